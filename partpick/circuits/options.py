"""What the plug-ins' search hooks offer the search, and the small statistics they share.

A topology offers **network tables** (:class:`NetTable`: values of its
frequency-setting slots with the figures the search needs: ln f0, the required gain, the
tolerance spreads); an amplitude control that has a design rule of its own offers
**control designs** (:class:`ControlDesign`: its slots and the gain network it needs,
with what its physics predicts: amplitude, THD, pull, settling). Logarithms are natural:
frequencies in ln Hz, amplitudes in ln V, gains in nepers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from statistics import NormalDist

import numpy as np


__all__ = ["NetTable", "ControlDesign", "nearest", "sigma", "z_of", "dt_of", "cap_tempco", "values_of",
           "allowed_families", "resistor_families", "arm_capacitor_families"]


@dataclass(frozen=True, slots=True, eq=False)
class NetTable:
    """Every frequency-setting network of one family pair in a frequency window, as
    arrays over its rows: values (n, len(roles)) in ohm and F; ln_f0 (ln Hz); ln_k
    (ln of the required gain); sigma_lnk (standard deviation of ln k from the parts'
    tolerances); unit_cost (sum of unit prices); sorted by ln_f0. families gives each
    role's family id; sigma_lnf is the relative standard deviation of f0 from the
    tolerances (the same for every row: JCGM 100 first-order propagation). Where the
    topology gives them, lists holds each role's value list and index each value's place
    in it (values[:, j] == lists[j][index[:, j]]): a column is then priced by pricing its
    few distinct values."""

    roles: tuple[str, ...]
    families: tuple[str, ...]
    values: np.ndarray
    ln_f0: np.ndarray
    ln_k: np.ndarray
    sigma_lnk: np.ndarray
    unit_cost: np.ndarray
    sigma_lnf: float
    lists: tuple | None = None
    index: np.ndarray | None = None

    def __len__(self) -> int:
        return self.ln_f0.size


@dataclass(frozen=True, slots=True)
class ControlDesign:
    """One complete amplitude control a control's search hook offers (the JFET
    control's: :func:`partpick.circuits.jfet_search.search_designs`), judged by the
    control's own physics on the topology's equal-arm reference network at the hook's
    frequency, with the hook's op-amp.

    control: the control's registry name; slots: (role, value, family id) of every slot
    the control fills, value in ohm or F (0.0 for an active part, whose catalog id is the
    family id); gain: (role, value) of the gain network it needs (the topology's
    ``gain_values``, ohm, all of family gain_family); amp_v: the oscillator output's
    amplitude (V peak) at the minimum, nominal and maximum temperature; thd: THD at the
    oscillator output at the nominal temperature (fraction); pull: ln of the settled
    frequency over the loop's marginal one (the control's own pull; the op-amp's is in
    the marginal frequency); amp_per_excess: d ln(amplitude) / d(gain excess), the gain
    excess in nepers (how much a gain network's tolerance moves the amplitude); amp_spread:
    the amplitude's spread from the control's own parts (3 sigma, relative); settle_s:
    power-on until the amplitude stays within +/-2 % of its settled value (s); channels:
    op-amp channels the control adds; margin: ln of the small-signal gain at rest (the
    nominal parts at the nominal temperature) over the reference network's need;
    start_loss: nepers of that margin the weakest part of the control's spread loses at
    the hot end (the gain network's own tolerances not included); note: what it is, in
    words."""

    control: str
    slots: tuple[tuple[str, float, str], ...]
    gain_family: str
    gain: tuple[tuple[str, float], ...]
    amp_v: tuple[float, float, float]
    thd: float
    pull: float
    amp_per_excess: float
    amp_spread: float
    settle_s: float
    channels: int
    margin: float
    start_loss: float
    note: str = ""

    def values(self) -> dict[str, float]:
        """Every value the design sets, control and gain network (role -> ohm or F)."""
        return {**dict(self.gain), **{r: v for r, v, _ in self.slots if v}}

    def families(self) -> dict[str, str]:
        """The family (or, for an active part, the catalog id) of every role it fills."""
        return {**{r: self.gain_family for r, _ in self.gain}, **{r: f for r, _, f in self.slots}}


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


def allowed_families(spec, catalog, kind: str) -> list:
    """The families of ``kind`` (a catalog section) the spec allows."""
    ids = spec.parts.of_kind(kind)
    return [f for f in catalog.of_kind(kind) if ids is None or f.id in ids]


def resistor_families(spec, catalog) -> list:
    """The resistor families the spec allows."""
    return allowed_families(spec, catalog, "resistors")


def arm_capacitor_families(spec, catalog) -> list:
    """The non-polarised capacitor families the spec allows (for frequency-setting arms)."""
    allowed = spec.parts.capacitors
    return [c for c in catalog.capacitors if (allowed is None or c.id in allowed)
            and "electrolytic" not in c.dielectric.lower()]
