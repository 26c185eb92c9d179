"""What the plug-ins' search hooks offer the search, and the small statistics they share.

A topology offers **network options** (values of its frequency-setting slots with the
figures the search needs: ln f0, the required gain, the tolerance losses), an amplitude
control offers **control options** (its slots and the topology's gain network, with a
surrogate of the amplitude, THD and frequency pull it sets), the periphery offers
**stage options**. Each lists the purchasing lines it adds as (family, value, quantity).
Logarithms are natural: frequencies in ln Hz, amplitudes in ln V, gains in nepers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from statistics import NormalDist

from partpick.circuits.base import Values

__all__ = ["NetOption", "CtlOption", "StageOption", "merge_lines", "nearest", "sigma", "z_of", "dt_of",
           "cap_tempco", "values_of", "resistor_families", "arm_capacitor_families", "SLOPE", "slope",
           "AMP_SLOPE_MAX", "DM_MAX"]

SLOPE = 1000                # surrogate slopes are kept as multiples of 1/SLOPE
DM_MAX = 0.02               # nepers: how far from its reference gain excess a linearised surrogate is trusted
AMP_SLOPE_MAX = 25.0        # ln amplitude per neper of gain excess: steeper designs are too fragile to build


def slope(x: float) -> float:
    """A slope rounded to 1/SLOPE: the surrogate is defined with it, so the solver's
    integer model and the float evaluation use the same number."""
    return round(x * SLOPE) / SLOPE


@dataclass(frozen=True, slots=True)
class NetOption:
    """A frequency-setting network: values (role -> ohm, F), its resistor and capacitor
    families, ln_f0 (ln Hz), ln_k = ln(required gain), loss (worst-case margin loss from
    its tolerances, nepers), r_max / r_min (ohm, its largest and smallest resistor),
    lines, drift (frequency drift bound over temperature, nepers), spread (frequency
    spread from the tolerances at the yield's z, nepers), sigma_k (standard deviation
    of ln(required gain) from the tolerances)."""

    values: Values
    r_family: str
    c_family: str
    ln_f0: float
    ln_k: float
    loss: float
    r_max: float
    r_min: float
    lines: tuple
    drift: float = 0.0
    spread: float = 0.0
    sigma_k: float = 0.0


@dataclass(frozen=True, slots=True)
class CtlOption:
    """A gain network with its amplitude control: values (role -> ohm), parts (role ->
    family id of each active part), the resistor family; ln_g = ln(small-signal gain);
    surrogate at the gain excess ln1m_ref (nepers): ln_amp (ln of the oscillator
    output amplitude, V), thd (fraction), pull (relative harmonic frequency pull), each
    with its slope per neper of gain excess; loss (margin loss from its tolerances,
    nepers); ln_amp_tmin / ln_amp_tmax: ln amplitude at the temperature ends; k_amp:
    |amplitude slope| times z; sigma_g: standard deviation of ln(gain) from the
    tolerances; vf_spread: amplitude spread from the control's parts at the yield's z;
    families: (role, family id) of each value whose family is not r_family (a
    capacitor of the control); settle_s: the settling time the control predicts (s, 0
    when it sets the amplitude within a few cycles); channels: op-amp channels the
    control adds (an integrator)."""

    values: Values
    parts: tuple
    r_family: str
    ln_g: float
    ln1m_ref: float
    ln_amp: float
    s_amp: float
    thd: float
    s_thd: float
    pull: float
    s_pull: float
    loss: float
    lines: tuple
    ln_amp_tmin: float = 0.0
    ln_amp_tmax: float = 0.0
    k_amp: float = 0.0
    sigma_g: float = 0.0
    vf_spread: float = 0.0
    families: tuple = ()
    settle_s: float = 0.0
    channels: int = 0

    def part(self, role: str) -> str | None:
        return dict(self.parts).get(role)


@dataclass(frozen=True, slots=True)
class StageOption:
    """An output stage: kind, values (role -> ohm), resistor family, ln of its gain into
    the load, ln of the load current per volt at the oscillator output (ln S), lines."""

    kind: str
    values: Values
    r_family: str
    ln_gain: float
    ln_y: float
    lines: tuple


def merge_lines(lines) -> tuple:
    """((family, value, quantity), ...) with equal (family, value) merged: one line each."""
    merged: dict[tuple[str, float], int] = {}
    for fam, value, qty in lines:
        merged[(fam, value)] = merged.get((fam, value), 0) + qty
    return tuple((f, v, q) for (f, v), q in merged.items())


def nearest(values, target: float) -> float:
    """The value nearest ``target`` on a log scale."""
    return min(values, key=lambda v: abs(math.log(v / target)))


def sigma(fam) -> float:
    """Standard deviation of a part's relative value: tolerance / sqrt 3 (uniform) or
    tolerance / 3 (normal, tolerance at 3 sigma)."""
    return fam.tolerance_frac / (3.0 if fam.distribution == "normal" else math.sqrt(3.0))


def z_of(spec) -> float:
    """Two-sided normal quantile for the spec's yield: 2.58 for 99 %, 1.96 for 95 %."""
    return NormalDist().inv_cdf(0.5 + 0.5 * min(max(spec.yield_min_frac, 0.5), 0.9999))


def dt_of(spec) -> float:
    """Largest distance of a temperature end from the nominal temperature, K."""
    t = spec.temperature
    return max(t.max_k - t.nominal_k, t.nominal_k - t.min_k)


def cap_tempco(c) -> float:
    """Worst relative drift of one capacitor against another of its family, per K."""
    if c.has_band:
        return c.band_frac / (0.5 * (c.band_max_k - c.band_min_k))
    return c.tempco_spread_per_k


def values_of(fam, shelf=None) -> tuple[float, ...]:
    """The family's series values, only those on the shelf when ``shelf`` is given."""
    vals = fam.values()
    return vals if shelf is None else tuple(v for v in vals if shelf.quantity(fam.id, v) > 0)


def resistor_families(spec, catalog) -> list:
    """The resistor families the spec allows."""
    allowed = spec.parts.resistors
    return [r for r in catalog.resistors if allowed is None or r.id in allowed]


def arm_capacitor_families(spec, catalog) -> list:
    """The non-polarised capacitor families the spec allows (for frequency-setting arms)."""
    allowed = spec.parts.capacitors
    return [c for c in catalog.capacitors if (allowed is None or c.id in allowed)
            and "electrolytic" not in c.dielectric.lower()]
