"""Cost against accuracy: the front of designs no other beats on both.

Accuracy is the frequency error the builds reach at the spec's yield: the larger of
|q/f_target - 1| at the 0.1 % and 99.9 % quantiles of the Monte Carlo frequency (or, for
yields under 99.8 %, the quantiles that leave (1 - yield)/2 each side). Designs come from
one design run per allowed pair of resistor and capacitor families (so the front shows
what each grade of part buys), plus two single-objective runs over every family (the
cheapest, and the most accurate). Only designs that meet the spec are compared.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from partpick.catalog import Catalog
from partpick.circuits import TOPOLOGIES
from partpick.pipeline import design
from partpick.errors import InfeasibleError
from partpick.rank import Ranked
from partpick.spec import Spec

__all__ = ["Point", "tradeoff", "pareto"]


@dataclass(frozen=True, slots=True)
class Point:
    """One evaluated design: cost (currency per board), accuracy (fraction), yield,
    the families it uses, where it came from, and the ranked item itself."""

    cost: float
    accuracy: float
    yield_frac: float
    families: str
    source: str
    item: Ranked


def accuracy(r: Ranked, spec: Spec) -> float:
    """Frequency error the builds reach at the spec's yield (fraction)."""
    if r.mc is None or r.mc.freq_hz.size == 0:
        return float("inf")
    tail = max((1 - spec.yield_min_frac) / 2, 0.001)
    lo, hi = np.quantile(r.mc.freq_hz, [tail, 1 - tail])
    f = spec.frequency.target_hz
    return float(max(abs(lo / f - 1), abs(hi / f - 1)))


def pareto(points: list[Point]) -> list[Point]:
    """The points no other is both cheaper (or as cheap) and more accurate (or as
    accurate) than, one better in at least one; cheapest first."""
    front = []
    for p in points:
        dominated = any((q.cost <= p.cost and q.accuracy <= p.accuracy) and (q.cost < p.cost or q.accuracy < p.accuracy)
                        for q in points)
        if not dominated and not any(q.cost == p.cost and q.accuracy == p.accuracy for q in front):
            front.append(p)
    return sorted(front, key=lambda p: (p.cost, p.accuracy))


def tradeoff(spec: Spec, catalog: Catalog, *, stock=None, results: int = 3, samples: int = 20_000,
             progress=None) -> tuple[list[Point], list[Point]]:
    """Every evaluated design and the front (see module docstring)."""
    rfams = [r.id for r in catalog.resistors if spec.parts.resistors is None or r.id in spec.parts.resistors]
    cfams = [c.id for c in catalog.capacitors if (spec.parts.capacitors is None or c.id in spec.parts.capacitors)
             and "electrolytic" not in c.dielectric.lower()]
    extra = [c.id for c in catalog.capacitors if (spec.parts.capacitors is None or c.id in spec.parts.capacitors)
             and "electrolytic" in c.dielectric.lower()]
    runs = [(f"{r} + {c}", dataclasses.replace(spec, parts=dataclasses.replace(spec.parts, resistors=(r,),
                                                                               capacitors=(c, *extra))), None)
            for r in rfams for c in cfams]
    runs += [("cheapest (all families)", spec, ("cost",)), ("most accurate (all families)", spec, ("frequency_error",))]
    points: list[Point] = []
    for i, (label, sub, rank_by) in enumerate(runs, 1):
        try:
            d = design(sub, catalog, stock=stock, results=results, rank_by=rank_by, samples=samples)
        except InfeasibleError:
            continue
        finally:
            if progress is not None:
                progress(i, len(runs))
        for r in d.passing:
            network = TOPOLOGIES[r.bom.topology].network_roles
            fams = sorted({ln.family for ln in r.bom.lines if ln.role in network})
            points.append(Point(r.cost, accuracy(r, spec), r.yield_frac, " + ".join(fams), label, r))
    return points, pareto(points)
