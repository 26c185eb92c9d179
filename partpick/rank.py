"""Ranking verified candidates by the spec's ``rank_by`` order.

Candidates that meet every requirement come first. Within each group the keys apply
in order: yield (Monte Carlo, higher first), frequency error, amplitude error, THD, startup
margin (higher first), cost, part count (lower first).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from partpick.bom import Bom
from partpick.circuits import Circuit
from partpick.verify import Verdict

__all__ = ["Ranked", "rank"]


@dataclass(frozen=True, slots=True)
class Ranked:
    """One verified candidate: its BOM, circuit, verdict and figures.

    freq_error: verified nominal frequency error (fraction, signed); amp_error (fraction,
    signed); thd (fraction); cost (currency, per board: parts and BOM lines); parts
    (count); surrogate: the solver's objective for it."""

    bom: Bom
    circuit: Circuit
    verdict: Verdict
    freq_error: float
    amp_error: float
    thd: float
    cost: float
    parts: int
    surrogate: float
    pick: object = None  # the solver's choice it came from (partpick.search.space.Pick)
    mc: object = None    # Monte Carlo result (partpick.tolerance.YieldResult)
    worst: dict | None = None  # worst-case corners

    @property
    def yield_frac(self) -> float:
        return self.mc.yield_frac if self.mc is not None else 0.0


def _key(r: Ranked, rank_by: tuple[str, ...]) -> tuple:
    v = r.verdict
    values = {
        "yield": -r.yield_frac,
        "frequency_error": abs(r.freq_error) if math.isfinite(r.freq_error) else math.inf,
        "amplitude_error": abs(r.amp_error) if math.isfinite(r.amp_error) else math.inf,
        "thd": r.thd if math.isfinite(r.thd) else math.inf,
        "startup_margin": -v.nominal.lin.margin,
        "cost": r.cost,
        "parts": r.parts,
    }
    keys = list(rank_by) + [k for k in ("frequency_error", "cost", "parts") if k not in rank_by]
    # frequency error and yield are compared in coarse steps so that a cheaper part
    # is not passed over for an imperceptible gain (0.01 % and 0.1 % of margin).
    coarse = {"frequency_error": 1e-4, "yield": 2e-3, "amplitude_error": 1e-3, "thd": 1e-4}
    out = [0 if v.passed else 1]
    for k in keys:
        step = coarse.get(k)
        out.append(round(values[k] / step) if step and math.isfinite(values[k]) else values[k])
    # last, the BOM itself: equal candidates come out in the same order on every run
    return tuple(out) + (r.surrogate, tuple((ln.role, ln.family, ln.value) for ln in r.bom.lines))


def rank(items: list[Ranked], rank_by: tuple[str, ...]) -> list[Ranked]:
    """Sort by pass/fail, then the ``rank_by`` keys; equal BOMs keep the first."""
    seen = set()
    unique = []
    for r in items:
        sig = tuple((ln.role, ln.family, ln.value) for ln in r.bom.lines)
        if sig not in seen:
            seen.add(sig)
            unique.append(r)
    return sorted(unique, key=lambda r: _key(r, rank_by))
