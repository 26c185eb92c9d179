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

from dataclasses import replace

from partpick.circuits.periphery import BIAS_ROLES
from partpick.errors import InfeasibleError
from partpick.refusal import loosened_together
from partpick.spec import Spec

__all__ = ["KINDS", "restricted", "opened", "allowing", "families_to_allow", "new_families", "opening_kinds",
           "widened"]

KINDS = ("resistors", "capacitors", "opamps", "limiters")   # the kinds a refusal may open


def restricted(spec: Spec) -> tuple[str, ...]:
    """The kinds whose families the spec lists (the others allow the whole catalog)."""
    return tuple(k for k in KINDS if spec.parts.of_kind(k) is not None)


def opened(spec: Spec, kinds) -> Spec:
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
    wide = opened(spec, kinds)
    for s in (wide, loosened_together(wide)):
        boms = run(s)
        if boms:
            return new_families(spec, catalog, boms[0], kinds)
    return ()


def new_families(spec: Spec, catalog, bom, kinds) -> tuple[str, ...]:
    """The families (sorted ids) of kinds in bom that the spec's lists leave out (the
    single supply's bias and coupling parts not counted: they are drawn from what the
    spec allows)."""
    return tuple(sorted({ln.family for ln in bom.lines if ln.role not in BIAS_ROLES
                         and (kind := catalog.kind_of(ln.family)) in kinds
                         and ln.family not in spec.parts.of_kind(kind)}))


def allow_line(families) -> str:
    """The advice to allow families, when the spec with them designs as written."""
    return f"allow famil{'y' if len(families) == 1 else 'ies'} {', '.join(families)}: the search designs with " \
           f"{'it' if len(families) == 1 else 'them'}"


def allowed_block(families, message: str, said: str = "") -> list[str]:
    """The why-not of the spec with families allowed (its message), as lines that state
    them first: what binds next and the values to relax to hold with them. Its lines the
    refusal has said already (said) are left out, and its head and notes (ours)."""
    inner = message.splitlines()
    if inner and inner[0] == "no design meets the spec":
        inner = [ln for ln in inner[1:] if not ln.startswith("  (")]
    inner = [ln for ln in inner if ln not in said.splitlines()]
    return [f"with famil{'y' if len(families) == 1 else 'ies'} {', '.join(families)} allowed, the spec still does "
            "not design:"] + [f"  {ln}" for ln in inner]


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
    fams = families_to_allow(spec, catalog, kinds, run)
    if not fams:
        return None
    try:
        design(allowing(spec, catalog, fams), fams)
    except InfeasibleError as exc:
        return allowed_block(fams, exc.message, said), exc.binding
    return [allow_line(fams)], ()
