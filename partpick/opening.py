"""The families a refusal asks to allow when the parts a spec allows cannot make the
oscillator at all: no allowed op-amp takes the supply or swings the amplitude, or no
allowed design oscillates within the supply, load and temperature even with every
requirement loosened (a 3.3 V Zener pair cannot limit on a 3.3 V supply).

The restricted kinds are opened to the whole catalog in a design run, first with the
requirements as written, then with all of them loosened; the families outside the
spec's lists that the run's first design uses are the ones named. The spec with them
allowed is then designed as the user would design it: where it designs, the message
says to allow them; where it does not, its own why-not (what binds next, the values to
relax to, the nearest designs) follows, stated with those families allowed, so that
every value it gives holds with them.
"""

from __future__ import annotations

import math
from dataclasses import replace

from partpick import units
from partpick.errors import InfeasibleError
from partpick.refusal import NO_OSCILLATION, loosened_together, relaxed, round_loose
from partpick.spec import Spec

__all__ = ["KINDS", "restricted", "kinds_opened", "allowing", "families_to_allow", "new_families", "opening_kinds",
           "widened", "eased"]

KINDS = ("resistors", "capacitors", "opamps", "limiters")   # the kinds a refusal may open
# a target nothing oscillates at is moved toward an easy value: these shares of the way
# (geometrically) first, then bisected this many times between the last that does not
# design and the first that does
EASE_STEPS = (0.25, 0.5, 1.0)
EASE_BISECTIONS = 3
EASY_LOAD_OHM = 100e3     # a load the weakest op-amp drives (common practice, no published source)
STILL = "the spec still does not design:"


def restricted(spec: Spec) -> tuple[str, ...]:
    """The kinds whose families the spec lists (the others allow the whole catalog)."""
    return tuple(k for k in KINDS if spec.parts.of_kind(k) is not None)


def kinds_opened(spec: Spec, kinds) -> Spec:
    """The spec with every family of the catalog allowed for each kind of kinds."""
    return replace(spec, parts=replace(spec.parts, **{k: None for k in kinds}))


def allowing(spec: Spec, catalog, families) -> Spec:
    """The spec with families (ids of the catalog) added to their kinds' lists."""
    lists = {}
    for fam in families:
        kind = catalog.kind_of(fam)
        lists[kind] = lists.get(kind, spec.parts.of_kind(kind)) + (fam,)
    return replace(spec, parts=replace(spec.parts, **lists))


def families_to_allow(spec: Spec, catalog, kinds, run) -> tuple[str, ...]:
    """The families (sorted ids) of kinds outside the spec's lists that the first design
    of a run uses with those kinds opened: as written, else with every relaxable
    requirement at its loose value (run(spec) -> the passing BOMs of a design run). Empty
    when neither run designs, or its design needs nothing the spec does not allow."""
    wide = kinds_opened(spec, kinds)
    for s in (wide, loosened_together(wide)):
        boms = run(s)
        if boms:
            return new_families(spec, catalog, boms[0], kinds)
    return ()


def new_families(spec: Spec, catalog, bom, kinds) -> tuple[str, ...]:
    """The families (sorted ids) of kinds in bom that the spec's lists leave out (the
    single supply's bias and coupling parts too: a 2.2 uF mid-rail capacitor the
    allowed families cannot make is as much a reason as an arm)."""
    return tuple(sorted({ln.family for ln in bom.lines if (kind := catalog.kind_of(ln.family)) in kinds
                         and ln.family not in spec.parts.of_kind(kind)}))


def _named(families) -> str:
    """'family X' or 'families X, Y'."""
    return f"famil{'y' if len(families) == 1 else 'ies'} {', '.join(families)}"


def allow_line(families) -> str:
    """The advice to allow families, when the spec with them designs as written."""
    return f"allow {_named(families)}: the search designs with {'it' if len(families) == 1 else 'them'}"


def allowed_block(families, message: str, said: str = "") -> list[str]:
    """The why-not of the spec with families allowed (its message), as lines that state
    them first: what binds next and the values to relax to hold with them."""
    return _block(f"with {_named(families)} allowed", message, said)


def _block(given: str, message: str, said: str) -> list[str]:
    """A why-not (message) stated under what it is given ('with ...'), its lines the
    refusal has said already (said) left out, and its head and notes (ours)."""
    inner = message.splitlines()
    if inner and inner[0] == "no design meets the spec":
        inner = [ln for ln in inner[1:] if not ln.startswith("  (")]
    inner = [ln for ln in inner if ln not in said.splitlines()]
    return [f"{given}, {STILL}"] + [f"  {ln}" for ln in inner]


def opening_kinds(spec: Spec, binding) -> tuple[str, ...]:
    """The restricted kinds a structural refusal (its binding fields) opens: the op-amps
    where none allowed takes the supply, the arm families where none reaches the
    frequency."""
    want = {("supply",): ("opamps",), ("frequency.target",): ("resistors", "capacitors")}.get(tuple(binding), ())
    return tuple(k for k in want if k in restricted(spec))


def widened(spec: Spec, catalog, kinds, run, design, said: str = "") -> tuple[list[str], tuple[str, ...]] | None:
    """(message lines, binding) naming the families of kinds to allow, followed by the
    why-not of the spec with them allowed where it still does not design (but for what
    the refusal said already, said); None when opening kinds designs nothing either.
    run(spec) -> a design run's passing BOMs; design(spec, families) designs the spec as
    the user's command would, raising InfeasibleError with its why-not."""
    fams = families_to_allow(spec, catalog, kinds, run) if kinds else ()
    if not fams:
        return None
    try:
        design(allowing(spec, catalog, fams), fams)
    except InfeasibleError as exc:
        if NO_OSCILLATION in exc.message.splitlines():
            return None     # (they do not make it oscillate either)
        return allowed_block(fams, exc.message, said), exc.binding
    return [allow_line(fams)], ()


def _targeted(spec: Spec, field: str, value: float) -> Spec:
    """The spec with its amplitude target (V peak, kept in the kind it was written in)
    or its load resistance (ohm) at value."""
    if field == "amplitude.target":
        kind = spec.amplitude.target.kind
        return replace(spec, amplitude=replace(spec.amplitude, target=units.Amplitude(value, "pk").as_kind(kind)))
    return relaxed(spec, field, value)


def _shown(spec: Spec, field: str, value: float) -> str:
    if field == "amplitude.target":
        return units.format_amplitude(units.Amplitude(value, "pk").as_kind(spec.amplitude.target.kind), 3)
    return units.format_quantity(value, "resistance")


def eased(spec: Spec, run, design, said: str = "") -> tuple[list[str], tuple[str, ...]] | None:
    """Where nothing allowed oscillates even with every relaxable requirement loosened
    and every kind of part opened: the amplitude target or the load that binds, moved
    toward an easy value (an amplitude of an eighth of the smaller supply span, a load
    of EASY_LOAD_OHM) until a run with the tolerances loosened designs, then bisected
    (run(spec) -> a design run's passing BOMs); the nearer of the two, rounded to two
    figures toward the easy side. (message lines, binding): the value to move it to
    where the spec with it designs as the user's command would (design(spec, opened)
    raises InfeasibleError with its why-not), else that spec's why-not stated with it;
    None when neither moves anything into oscillation."""
    targets = [("amplitude.target", spec.amplitude.peak_v, spec.supply.span_min_v / 8),
               ("load.resistance", spec.load.resistance_ohm, EASY_LOAD_OHM)]
    best = None
    for field, now, easy in targets:
        if not (math.isfinite(now) and now > 0) or abs(math.log(easy / now)) < 0.1 or (
                field == "load.resistance" and now >= easy):
            continue

        def moves(t: float, field=field, now=now, easy=easy) -> bool:
            return bool(run(loosened_together(_targeted(spec, field, now * (easy / now) ** t))))

        hi = next((t for t in EASE_STEPS if moves(t)), None)
        if hi is None:
            continue
        lo = ([0.0] + list(EASE_STEPS))[EASE_STEPS.index(hi)]
        for _ in range(EASE_BISECTIONS):
            lo, hi = (lo, (lo + hi) / 2) if moves((lo + hi) / 2) else ((lo + hi) / 2, hi)
        if best is None or hi < best[1]:
            best = (field, hi, now, round_loose(now * (easy / now) ** hi, easy > now))   # (toward the easy side)
    if best is None:
        return None
    field, _, now, value = best
    head = (f"{field} binds: nothing allowed oscillates at {_shown(spec, field, now)} even with the tolerances, "
            f"the THD limit and the yield loosened; at {_shown(spec, field, value)} it does")
    still = moved(spec, field, value, design, said)
    if still is not None:
        return [head] + still[0], (field,) + still[1]
    verb = "raise" if value > now else "lower"
    return [f"{head}, and the spec designs there: {verb} {field} to {_shown(spec, field, value)}"], (field,)


def moved(spec: Spec, field: str, value: float, design, said: str = "") -> tuple[list[str], tuple[str, ...]] | None:
    """The spec with its amplitude target (V peak) or load (ohm) at the value a refusal
    names, designed as the user's command would (design(spec, opened) raises
    InfeasibleError with its why-not): None where it designs, else (that why-not's lines
    stated with the value, but for what the refusal said already, said; its binding)."""
    try:
        design(_targeted(spec, field, value), (field,))
    except InfeasibleError as exc:
        return _block(f"with {field} at {_shown(spec, field, value)}", exc.message, said), tuple(exc.binding)
    return None
