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

import numpy as np


__all__ = ["NetTable", "nearest", "sigma", "z_of", "dt_of", "cap_tempco", "values_of", "resistor_families",
           "arm_capacitor_families"]

@dataclass(frozen=True, slots=True, eq=False)
class NetTable:
    """Every frequency-setting network of one family pair in a frequency window, as
    arrays over its rows: values (n, len(roles)) in ohm and F; ln_f0 (ln Hz); ln_k
    (ln of the required gain); sigma_lnk (standard deviation of ln k from the parts'
    tolerances); unit_cost (sum of unit prices); sorted by ln_f0. families gives each
    role's family id; sigma_lnf is the relative standard deviation of f0 from the
    tolerances (the same for every row: JCGM 100 first-order propagation)."""

    roles: tuple[str, ...]
    families: tuple[str, ...]
    values: np.ndarray
    ln_f0: np.ndarray
    ln_k: np.ndarray
    sigma_lnk: np.ndarray
    unit_cost: np.ndarray
    sigma_lnf: float

    def __len__(self) -> int:
        return self.ln_f0.size


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
