"""Cost against accuracy: the front of designs no other beats on both.

Accuracy is the frequency error the builds reach at the spec's yield: the larger of
|q/f_target - 1| at the 0.1 % and 99.9 % quantiles of the Monte Carlo frequency (or, for
yields under 99.8 %, the quantiles that leave (1 - yield)/2 each side). Designs come from
the spec's own design run (its ranking, the top DESIGN_RESULTS: what ``partpick design``
finds), one run per allowed pair of resistor and capacitor families (so the front shows
what each grade of part buys), two single-objective runs over every family (the
cheapest, and the most accurate), and any further designs the caller has (a report's
own run). Only designs that meet the spec are compared; a design found by several runs
counts once.

The front keeps a design only when every design at most as expensive is less accurate
by more than ACCURACY_TIE (relative): a design that another matches in accuracy at a
lower or equal cost is weakly dominated and left out, and accuracies closer than the tie
are taken as equal (the Monte Carlo quantiles cannot tell them apart).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from partpick.catalog import Catalog
from partpick.circuits import TOPOLOGIES
from partpick.errors import InfeasibleError
from partpick.pipeline import design
from partpick.rank import Ranked
from partpick.spec import Spec

__all__ = ["Point", "tradeoff", "pareto", "accuracy", "dominates", "DESIGN_RESULTS", "ACCURACY_TIE"]

DESIGN_RESULTS = 50   # candidates of the spec's own design run taken onto the plot
FAMILY_RESULTS = 3    # candidates of each family-pair and single-objective run
ACCURACY_TIE = 1e-3   # relative: accuracies closer than this are equal (Monte Carlo resolution, with margin)


@dataclass(frozen=True, slots=True)
class Point:
    """One evaluated design: cost (currency per board), accuracy (fraction), yield,
    the families it uses, the runs that found it, and the ranked item itself."""

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


def dominates(q: Point, p: Point) -> bool:
    """q is at most as expensive and at least as accurate as p (accuracies within
    ACCURACY_TIE count as equal), and q is not p's design."""
    return q.item.bom != p.item.bom and q.cost <= p.cost + 1e-12 and q.accuracy <= p.accuracy * (1 + ACCURACY_TIE)


def pareto(points: list[Point]) -> list[Point]:
    """The front (see module docstring), cheapest first: a sweep in order of cost (then
    accuracy) keeps a point only when it is more accurate, beyond the tie, than every
    point before it."""
    front: list[Point] = []
    best = float("inf")
    for p in sorted(points, key=lambda p: (round(p.cost, 9), p.accuracy)):
        if p.accuracy < best * (1 - ACCURACY_TIE):
            front.append(p)
        best = min(best, p.accuracy)
    return front


def _runs(spec: Spec, catalog: Catalog) -> list[tuple[str, Spec, tuple[str, ...] | None, int]]:
    """(label, spec, ranking, results) of every design run."""
    rfams = [r.id for r in catalog.resistors if spec.parts.resistors is None or r.id in spec.parts.resistors]
    caps = [c for c in catalog.capacitors if spec.parts.capacitors is None or c.id in spec.parts.capacitors]
    cfams = [c.id for c in caps if "electrolytic" not in c.dielectric.lower()]
    extra = [c.id for c in caps if "electrolytic" in c.dielectric.lower()]  # bias and coupling only
    runs = [("design (the spec's ranking)", spec, None, max(DESIGN_RESULTS, spec.results))]
    runs += [(f"{r} + {c}", dataclasses.replace(spec, parts=dataclasses.replace(spec.parts, resistors=(r,),
                                                                              capacitors=(c, *extra))),
              None, FAMILY_RESULTS) for r in rfams for c in cfams]
    runs += [("cheapest (all families)", spec, ("cost",), FAMILY_RESULTS),
             ("most accurate (all families)", spec, ("frequency_error",), FAMILY_RESULTS)]
    return runs


def tradeoff(spec: Spec, catalog: Catalog, *, stock=None, samples: int = 20_000, progress=None,
             extra: tuple[Ranked, ...] = ()) -> tuple[list[Point], list[Point]]:
    """Every evaluated design that meets the spec and the front (see module docstring).

    Raises :class:`InfeasibleError` (naming what binds, from the spec's own run) when no
    run finds a design that meets the spec."""
    found: dict[tuple, Point] = {}
    refusal = None
    runs = _runs(spec, catalog)

    def add(r: Ranked, label: str) -> None:
        key = (r.bom.stage, *((ln.role, ln.family, ln.value) for ln in r.bom.lines))
        if key in found:
            found[key] = dataclasses.replace(found[key], source=found[key].source + "; " + label)
            return
        network = TOPOLOGIES[r.bom.topology].network_roles
        fams = sorted({ln.family for ln in r.bom.lines if ln.role in network})
        found[key] = Point(r.cost, accuracy(r, spec), r.yield_frac, " + ".join(fams), label, r)

    for r in extra:
        if r.verdict.passed:
            add(r, "given")
    for i, (label, sub, rank_by, results) in enumerate(runs, 1):
        try:
            # only the spec's own run explains a refusal (the others' analyses, seconds each,
            # would be thrown away)
            d = design(sub, catalog, stock=stock, results=results, rank_by=rank_by, samples=samples,
                       nearest=3 if i == 1 else 0)
        except InfeasibleError as exc:
            if i == 1:
                refusal = exc
            continue
        finally:
            if progress is not None:
                progress(i, len(runs))
        for r in d.passing:
            add(r, label)
    points = list(found.values())
    if not points:
        raise refusal or InfeasibleError("no design meets the spec with any allowed family pair", ("parts",))
    return points, pareto(points)
