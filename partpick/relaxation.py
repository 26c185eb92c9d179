"""The requirements a refusal relaxes (frequency and amplitude tolerance, THD limit,
yield), a spec with them loosened, and how far a design needs them relaxed: alone by
bisection on that design's exact verification, together one after the other, and the
values moved towards the loose ones until the whole design designs there (see
:mod:`partpick.refusal`, which states them)."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from partpick.spec import Spec

__all__ = ["RELAXABLE", "JOINT_STEPS", "BISECTIONS", "Relaxation", "requirement_value", "relaxed", "relaxed_all",
           "loosened", "loosened_together", "round_loose", "reach", "reach_together", "loosest", "toward",
           "designed_step", "with_the_rest"]

# requirement -> (how loose a run may make it, how it reads, the ranking that puts the
# designs best at it first, tighter is smaller)
RELAXABLE = {
    "frequency.tolerance": (0.10, "the tightest frequency tolerance any allowed design holds",
                            ("yield", "frequency_error", "cost"), True),
    "amplitude.tolerance": (0.50, "the tightest amplitude tolerance any allowed design holds",
                            ("yield", "amplitude_error", "cost"), True),
    "distortion.max_thd": (0.10, "the lowest THD any allowed design reaches", ("thd", "yield", "cost"), True),
    "yield.min": (0.50, "the highest yield any allowed design reaches", ("yield", "cost"), False),
}
JOINT_STEPS = (0.25, 0.5)   # shares of the way to the loose values a joint relaxation is tried at
BISECTIONS = 7        # steps of the bisection on a requirement (its result within about 2 %)


@dataclass(frozen=True, slots=True)
class Relaxation:
    """One requirement loosened: field, reached (the best value an allowed design
    reaches with everything else met, SI), advice (the round value to relax to)."""

    field: str
    reached: float
    advice: float


def requirement_value(spec: Spec, field: str) -> float:
    """The spec's value of a relaxable requirement (fraction)."""
    return {"frequency.tolerance": spec.frequency.tolerance_frac, "amplitude.tolerance": spec.amplitude.tolerance_frac,
            "distortion.max_thd": spec.max_thd_frac, "yield.min": spec.yield_min_frac}[field]


def relaxed(spec: Spec, field: str, value: float) -> Spec:
    """The spec with one relaxable requirement set to value (fraction; the load
    resistance in ohm)."""
    if field == "frequency.tolerance":
        return replace(spec, frequency=replace(spec.frequency, tolerance_frac=value))
    if field == "amplitude.tolerance":
        return replace(spec, amplitude=replace(spec.amplitude, tolerance_frac=value))
    if field == "distortion.max_thd":
        return replace(spec, max_thd_frac=value)
    if field == "load.resistance":   # (ohm: a structural refusal's, given to the why-not)
        return replace(spec, load=replace(spec.load, resistance_ohm=value))
    return replace(spec, yield_min_frac=value)


def loosened(spec: Spec) -> list[tuple[str, Spec, tuple[str, ...]]]:
    """(field, the spec with it at its loose value, the ranking that puts the designs
    best at it first) for each relaxable requirement the spec holds tighter than
    loose: the first run explain_refusal makes for each."""
    out = []
    for field, (loose, _, keys, smaller) in RELAXABLE.items():
        now = requirement_value(spec, field)
        if not ((now >= loose) if smaller else (now <= loose)):
            out.append((field, relaxed(spec, field, loose), keys))
    return out


def round_loose(x: float, tighter_smaller: bool) -> float:
    """A round value (two significant digits) on the loose side of x."""
    if x <= 0:
        return x
    k = 10 ** (math.floor(math.log10(x)) - 1)
    return (math.ceil(x / k - 1e-9) if tighter_smaller else math.floor(x / k + 1e-9)) * k


def reach(spec: Spec, field: str, designs, check) -> Relaxation | None:
    """The best value of ``field`` at which one of ``designs`` (BOMs) passes, by
    bisection between the spec's value (fails) and the loose one (passes); check(spec,
    bom) -> passes."""
    loose, _, _, smaller = RELAXABLE[field]
    best = None
    for bom in designs:
        lo, hi = requirement_value(spec, field), loose
        if not check(relaxed(spec, field, hi), bom):
            continue
        for _ in range(BISECTIONS):
            mid = math.sqrt(lo * hi) if smaller else 0.5 * (lo + hi)
            if check(relaxed(spec, field, mid), bom):
                hi = mid
            else:
                lo = mid
        if best is None or (hi < best if smaller else hi > best):
            best = hi
    if best is None:
        return None
    advice = round_loose(best, smaller)
    return Relaxation(field, best, advice)


def loosest(spec: Spec, field: str) -> float:
    """The value a loosened run gives a relaxable requirement: its loose value, or the
    spec's own where that is looser already."""
    loose, _, _, smaller = RELAXABLE[field]
    return (max if smaller else min)(requirement_value(spec, field), loose)


def with_the_rest(spec: Spec, base: list[Relaxation], designs) -> list[Relaxation] | None:
    """The relaxations base (the nearest design's misses at what it reaches; may be
    empty) with every other relaxable requirement moved a share of the way to its loose
    value too (JOINT_STEPS, then all the way): the first at which the whole design
    designs, None when none does. For a spec whose nearest design misses one
    requirement, but whose search, with that one relaxed, finds no design for want of
    another (requirement 144 of the coverage set: its nearest design misses only the
    yield, and with the yield relaxed the amplitude tolerance and the THD limit bind)."""
    own = {r.field for r in base}
    for t in JOINT_STEPS + (1.0,):
        rest = []
        for field, (_, _, _, smaller) in RELAXABLE.items():
            now = requirement_value(spec, field)
            if field not in own and (value := toward(field, now, t)) != now:
                rest.append(Relaxation(field, value, round_loose(value, smaller)))
        if rest and designs(relaxed_all(spec, list(base) + rest)):
            return list(base) + rest
    return None


def designed_step(spec: Spec, together: list[Relaxation], designs) -> list[Relaxation] | None:
    """The relaxations, or the first of them moved a share JOINT_STEPS of the way to
    their loose values (geometrically for a tolerance or limit, linearly for the
    yield), or to the loose values, at which a design run designs; None when none
    does. (Near a yield of 99.9 % the Monte Carlo's noise can hold a design a step or
    two past the value its nearest design reaches.)"""
    for t in (0.0,) + JOINT_STEPS + (1.0,):
        step = [replace(rel, advice=round_loose(toward(rel.field, rel.advice, t), RELAXABLE[rel.field][3]))
                for rel in together]
        if designs(relaxed_all(spec, step)):
            return step
    return None


def toward(field: str, value: float, t: float) -> float:
    """value moved a share t of the way to the field's loose value: geometrically for a
    tolerance or limit, linearly for the yield."""
    loose, smaller = RELAXABLE[field][0], RELAXABLE[field][3]
    if (value >= loose) if smaller else (value <= loose):
        return value   # (as loose already)
    return value * (loose / value) ** t if smaller else value + (loose - value) * t


def loosened_together(spec: Spec, t: float = 1.0) -> Spec:
    """The spec with every relaxable requirement moved a share t of the way to its loose
    value (toward)."""
    for field in RELAXABLE:
        spec = relaxed(spec, field, toward(field, requirement_value(spec, field), t))
    return spec


def relaxed_all(spec: Spec, relaxations) -> Spec:
    """The spec with every relaxation's advice applied."""
    for rel in relaxations:
        spec = relaxed(spec, rel.field, rel.advice)
    return spec


def reach_together(spec: Spec, fields, bom, check) -> list[Relaxation] | None:
    """How far ``fields`` (relaxable requirements that no run designs with one of them
    loosened alone) must be relaxed together for ``bom`` to pass: each in turn, the
    yield first (what a buyer gives up last), held at the spec's value if the design
    passes there, else bisected (as reach) with those before it at the values found
    and those after it at their loose values; the whole checked once more as stated
    (the rounding only loosens). The requirements that need relaxing, or None when a
    field is not relaxable or bom does not pass."""
    if not fields or any(f not in RELAXABLE for f in fields):
        return None
    fields = sorted(fields, key=lambda f: f != "yield.min")
    loose = {f: loosest(spec, f) for f in fields}
    if any(loose[f] == requirement_value(spec, f) for f in fields):
        return None     # already as loose as a run makes it: nothing to bisect
    value = dict(loose)
    found: list[Relaxation] = []

    def at(values) -> Spec:
        s = spec
        for g, v in values.items():
            s = relaxed(s, g, v)
        return s

    for f in fields:
        value[f] = requirement_value(spec, f)
        if check(at(value), bom):
            continue      # this one need not move
        rel = reach(at({g: v for g, v in value.items() if g != f}), f, [bom], check)
        if rel is None:
            return None
        value[f] = rel.advice
        found.append(rel)
    return found if found and check(at(value), bom) else None
