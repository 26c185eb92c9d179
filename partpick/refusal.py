"""Why a spec does not design, and what would make it design.

When no verified candidate meets the spec, each requirement that can be loosened
(frequency tolerance, amplitude tolerance, THD limit, yield) is loosened alone to a
generous value and the whole design run repeated: the requirements whose loosening
alone lets a design through are the ones that bind. For each, the value the best
allowed design reaches with every other requirement met is found by bisection on that
requirement, each step an exact verification of the designs the loosened run found
(so "relax X to Y" is checked: the design passes the spec with X at Y). When no single
requirement binds, all four are loosened together and the nearest design says what it
misses, and how far the requirements it misses must be relaxed together for it to pass
(each bisected in turn, the whole checked as stated). A frequency tolerance that no allowed
family pair holds even centred on the target is relaxed first, to what the best pair holds
at the spec's yield (the normal spread of the textbook frequency, inverted) with a margin:
where the whole design designs there that is the advice, else the analysis above runs on
the spec so relaxed and every value it states comes with it. Every value to relax to is
stated where the spec relaxed to it designs (a run of the search, else the whole design).
A spec that restricts part families, or builds from the shelf alone, is also
run with every family allowed, or with the catalog behind the shelf, and the parts
that make the difference are named. The nearest failing designs follow, each with the
requirements it misses and by how much.

Loosening a requirement only enlarges what passes, so the figure reported for another
requirement cannot get worse when one is relaxed (up to the search's own resolution).
"""

from __future__ import annotations

import math

import numpy as np

from partpick import units
from partpick.relaxation import (JOINT_STEPS, RELAXABLE, Relaxation, designed_step, loosened, loosened_together, reach,
                                  reach_together, relaxed, relaxed_all, requirement_value, round_loose, with_the_rest)
from partpick.search.estimate import frequency_share, frequency_tolerance
from partpick.spec import Spec

__all__ = ["RELAXABLE", "Relaxation", "relaxed", "loosened", "requirement_value", "explain_refusal", "default_notes",
           "miss_text", "structural_refusal", "frequency_hold", "held_tolerance", "held_message", "relaxed_all",
           "load_relaxation", "shelf_shortfall", "loosened_together", "NO_OSCILLATION", "round_loose", "swing_target"]

# the why-not's line when nothing allowed starts within the supply, load and temperature
NO_OSCILLATION = ("no allowed design oscillates within the supply, load and temperature given, even with the "
                  "tolerances, the THD limit and the yield loosened")
LADDER = (1.5, 3.0)   # steps (times the spec's value, towards the loose one) a loosened run is tried at
SAMPLES = 4000        # Monte Carlo builds per verification while searching what would design
# the frequency tolerance a refusal works from when no allowed family pair holds the spec's:
# this many times what the best pair holds centred on the target (room for arms off centre;
# common practice, no published source)
HOLD_MARGIN = 1.25


def default_notes(spec: Spec) -> tuple[str, ...]:
    """Requirements the spec leaves at their default, said so wherever they matter."""
    if spec.line_of("yield.min") is None and spec.source != "<spec>":
        return (f"yield.min is the default {spec.yield_min_frac:.0%}: the spec does not set it",)
    return ()


def _joint_advice(spec: Spec, lead, check, designs, before=()) -> tuple[tuple[str, ...], str]:
    """When no requirement binds alone: the binding requirements and the message line,
    from the nearest design of the run with all four loosened (lead, Ranked). The
    requirements that set the limits it misses are relaxed together as far as it needs
    (reach_together), or further, to where a design run designs (designed_step); where
    none does, with every other relaxable requirement moved too (with_the_rest). The
    line gives the values; where no design run designs even so, it names the checks'
    fields only. before: relaxations
    the spec has had already (stated with the values, unless a field is among them)."""
    misses = lead.verdict.failed()
    binding = tuple(dict.fromkeys(c.field for c in misses))
    governing = tuple(dict.fromkeys(_governed_by(c) for c in misses))
    reached = None if None in governing else reach_together(spec, governing, lead.bom, check)
    # stated only where the search designs (the design passes at the values found, but
    # the search, judging by its surrogate first, need not propose it there)
    together = designed_step(spec, reached, designs) if reached else None
    how = "from what the nearest design, 1. below, reaches"
    if together is None and (together := with_the_rest(spec, reached or [], designs)) is not None:
        governing = tuple(r.field for r in together)   # (the lead's misses were not all the story)
        how = ("what the nearest design, 1. below, misses at what it reaches, " if reached else "") + \
            "the others a share of the way to their loose values"
    at = _with(before)
    if together is None:
        return binding, (f"{at}no single requirement binds alone: {', '.join(binding)} together; with all four "
                         "loosened the nearest design (1. below) reaches what it shows: relax those requirements to it")
    together = [g for g in before if g.field not in {r.field for r in together}] + together
    return governing, (f"{at}no single requirement binds alone: {', '.join(governing)} together; the search designs "
                       f"with them relaxed together ({how}): "
                       f"{_advice(together, joint=True)}")


def _with(relaxations) -> str:
    """'with X at V, ' for each relaxation the spec has had already."""
    return "".join(f"with {r.field} at {_fmt(r.field, r.advice)}, " for r in relaxations)


def _advice(relaxations, joint: bool = False) -> str:
    """'relax X to V', or 'relax jointly X to V and Y to W' for more than one (or when
    stated as joint)."""
    items = " and ".join(f"{r.field} to {_fmt(r.field, r.advice)}" for r in relaxations)
    return f"relax {'jointly ' if joint or len(relaxations) > 1 else ''}{items}"


def _governed_by(c) -> str | None:
    """The relaxable requirement whose value sets a check's limits (the frequency's,
    nominal and over temperature, come from frequency.tolerance; the amplitude's from
    amplitude.tolerance), None for a check no relaxable requirement moves (a slew rate,
    a supply headroom)."""
    if c.field in RELAXABLE:
        return c.field
    if c.field in ("frequency.target", "temperature") and c.dim == "frequency":
        return "frequency.tolerance"
    if c.field == "amplitude.target" and c.dim == "voltage":
        return "amplitude.tolerance"
    return None


def _fmt(field: str, value: float) -> str:
    if field == "load.resistance":
        return units.format_quantity(float(f"{value:.3g}"), "resistance")
    sign = "+/-" if field.endswith("tolerance") else ""
    return sign + units.format_quantity(float(f"{value:.3g}"), "fraction")


def _q(x: float | None, dim: str, spec: Spec | None = None) -> str:
    """x (SI) with its unit; a voltage at the load in the kind the spec wrote its
    amplitude in (Vrms, Vpk, Vpp)."""
    if x is None or not math.isfinite(x):
        return "-"
    if spec is not None and dim == "voltage":
        return units.format_amplitude(units.Amplitude(x, "pk").as_kind(spec.amplitude.target.kind), 4)
    return units.format_quantity(float(f"{x:.4g}"), dim)


def miss_text(c, spec: Spec | None = None) -> str:
    """A failed check: its value and its limit, with units (an amplitude at the load in
    the spec's kind)."""
    at_load = spec if c.field.startswith("amplitude") else None

    def q(x):
        return _q(x, c.dim, at_load)

    limit = (f"{q(c.low)} .. {q(c.high)}" if c.low is not None and c.high is not None
             else f">= {q(c.low)}" if c.low is not None else f"<= {q(c.high)}")
    return f"{c.name} {q(c.value)} (limit {limit})"


def _distance(r) -> tuple:
    """How far a failing design is from passing: requirements missed, then how far (each
    shortfall relative to its limit), then its cost."""
    misses = r.verdict.failed()
    far = sum(abs(c.margin) / max(abs(c.high if c.high is not None else c.low or 1.0), 1e-12) for c in misses
              if c.margin is not None and math.isfinite(c.margin))
    return (len(misses), far, r.cost)


def _nearest_lines(failing, count: int, spec: Spec) -> list[str]:
    """The first ``count`` failing designs, in the order given, each with what it misses."""
    out = []
    for i, r in enumerate(failing[:count], 1):
        parts = ", ".join(dict.fromkeys(ln.family for ln in r.bom.lines))
        misses = "; ".join(miss_text(c, spec) for c in r.verdict.failed())
        out.append(f"  {i}. {parts} ({r.bom.stage} output stage), {r.cost:.3f} per board; misses: {misses}")
    return out


def explain_refusal(spec: Spec, failing, run, evaluate, nearest: int = 3, allow_more=None,
                    leading=(), given=(), designs=None) -> tuple[str, tuple[str, ...]]:
    """The refusal message and the binding fields. failing: the verified candidates
    that missed (Ranked); run(spec) -> the BOMs of a design run's passing designs
    (empty on a refusal); evaluate(spec, bom) -> the BOM verified against spec
    (Ranked); allow_more: [(what, advice)] from runs with more parts allowed;
    leading: [(requirement, statement)] that bind before any tolerance does (the
    shelf's quantities); given: [(Relaxation, statement)] that no design can do
    without (a frequency tolerance no allowed family pair holds): the analysis works
    on the spec with them applied, and every value it advises comes with them;
    designs(spec) -> whether the whole design (every control, the design's own builds)
    designs it, asked where a run of the search alone does not."""

    def check(s, bom) -> bool:
        return evaluate(s, bom).verdict.passed

    def confirmed(s) -> bool:
        """Whether a value may be stated: the spec relaxed to it designs, as the user's
        design of it would (the whole design, its own builds: a search run's fewer builds
        pass a 99.9 % yield its 20,000 miss), else a search run of it passes."""
        return designs(s) if designs is not None else bool(run(s, None))

    tried = []
    lines = ["no design meets the spec"] + [f"  ({n})" for n in default_notes(spec)]
    lines += [f"{g.field} binds: {text}" for g, text in given]
    before = [g for g, _ in given]
    shown, spec = spec, relaxed_all(spec, before)   # the nearest designs are judged as written
    found: list[Relaxation] = []
    for field, loose_spec, keys in loosened(spec):
        loose, _, _, smaller = RELAXABLE[field]
        now = requirement_value(spec, field)
        # the loose run first (if it refuses, this requirement does not bind alone), then
        # nearer steps, so that the designs bisected on are good at this requirement
        boms = run(loose_spec, keys)
        for step in LADDER if boms else ():
            value = now * step if smaller else 1 - (1 - now) * step
            if (value >= loose) if smaller else (value <= loose):
                break
            nearer = run(relaxed(spec, field, value), keys)
            if nearer:
                boms = nearer
                break
        tried += boms[:3]
        rel = reach(spec, field, boms[:3], check) if boms else None
        if rel is not None:
            found.append(rel)
    # each value stated where the spec relaxed to it designs (the design the bisection ends on
    # passes there, but the search, judging by its surrogate first, need not propose that
    # very design), else moved a quarter or half of the way to the loose value
    found = [(designed_step(spec, [rel], confirmed) or [rel])[0] for rel in found]
    binding = tuple(dict.fromkeys([g.field for g in before] + [w for w, _ in leading] + [r.field for r in found]))
    lines += [f"{what} binds: {text}" for what, text in leading]
    for k, rel in enumerate(found, len(leading)):
        what = RELAXABLE[rel.field][1]
        # (a relaxation given before is stated with it; one of its own field replaces it)
        with_ = [g for g in before if g.field != rel.field]
        lines.append(f"{'or ' if k else ''}{_with(with_)}{rel.field} binds: {what} with every other requirement met is "
                     f"{_fmt(rel.field, rel.reached)}; {_advice(with_ + [rel])}")
    lead_designs: list = []
    if not found and not leading:
        # all four loosened together, a share of the way first, so that the nearest design
        # the advice is read from is as near the spec as a run finds one
        for t in JOINT_STEPS + (1.0,):
            boms = run(loosened_together(spec, t), None)
            if boms:
                break
        # the designs the message points at: first in the list
        lead_designs = sorted((r for r in (evaluate(spec, bom) for bom in boms[:3]) if not r.verdict.passed),
                              key=_distance)
        if lead_designs:
            fields, line = _joint_advice(spec, lead_designs[0], check, confirmed, before)
            binding = tuple(g.field for g in before if g.field not in fields) + fields
            lines.append(line)
            if before:   # (judged as written, they also show what the given relaxation is for)
                lead_designs = [evaluate(shown, r.bom) for r in lead_designs]
        else:
            near = sorted((r for r in failing if r.verdict.nominal.starts and not r.verdict.passed), key=_distance)
            if near:   # designs oscillate, and miss what no loosened requirement touches: name it
                misses = near[0].verdict.failed()
                binding = tuple(dict.fromkeys(c.field for c in misses))
                lines.append(f"{', '.join(binding)} {'binds' if len(binding) == 1 else 'bind'}: even with the "
                             "tolerances, the THD limit and the yield loosened, no design meets the spec; the nearest "
                             f"misses {'; '.join(miss_text(c, spec) for c in misses)}")
            else:
                lines.append(NO_OSCILLATION)
    for what, advice in (allow_more or ()):
        lines.append(f"also: {what}: {advice}")
    # the designs the loosened runs found, judged against the spec as written
    spec = shown
    failing = list(failing) + [evaluate(spec, bom) for bom in tried]
    failing = [r for r in failing if not r.verdict.passed]
    if failing or lead_designs:
        # the joint run's designs first (the message points at them), then the nearest:
        # fewest requirements missed, then by how far, then the cheaper
        lines.append("nearest designs (--why-not N shows N):")
        lines += _nearest_lines(_unique(lead_designs + sorted(failing, key=_distance)), nearest, spec)
    return "\n".join(lines), binding


def _unique(items):
    seen, out = set(), []
    for r in items:
        key = tuple((ln.role, ln.family, ln.value) for ln in r.bom.lines)
        if key not in seen:
            seen.add(key)
            out.append(r)
    return out


def load_relaxation(spec: Spec, problem) -> Relaxation | None:
    """The load resistance (ohm) a load.resistance refusal names: the lowest at which
    the amplitude's low end takes no more current, with the load's capacitance, than the
    strongest allowed op-amp plans for (derating rule output_current), rounded up to
    two figures. None when the resistance does not bind (the load drives within that
    current, or its capacitance alone takes more)."""
    low = spec.amplitude.peak_v * (1 - spec.amplitude.tolerance_frac)
    y = spec.load.admittance_s(spec.frequency.target_hz)
    if not problem.ops:
        return None
    y_max = max(op.opamp.output_current_a for op in problem.ops) * problem.current_share / low   # S
    if abs(y) <= y_max or y.imag > y.real or y_max <= y.imag:
        return None
    r_need = 1 / math.sqrt(y_max ** 2 - y.imag ** 2)
    return Relaxation("load.resistance", r_need, round_loose(r_need, True))


def structural_refusal(spec: Spec, catalog, problem, pairs, reach_hz, hold: str = "",
                       bound: bool = False) -> tuple[str, tuple[str, ...]] | None:
    """A refusal that needs no search: no op-amp, limiter or family allowed; no
    op-amp that takes the supply, swings the amplitude or drives the load; no arm set
    of the allowed families near the target frequency. None when the search must
    answer. reach_hz: (lowest, highest) textbook frequency the allowed families'
    arms reach, Hz; hold: what the best family pair holds when no pair can hold the
    frequency tolerance (empty when one can); bound: the load resistance or amplitude it
    names is stated as a bound (beyond it nothing designs), not as the value to move it
    to (that is stated where the spec with it designs)."""
    notes = "".join(f" ({n})" for n in default_notes(spec))
    for kind, word in (("opamps", "op-amp"), ("limiters", "limiter"), ("resistors", "resistor family"),
                       ("capacitors", "capacitor family")):
        if spec.parts.of_kind(kind) == ():
            return (f"parts.{kind} binds: the spec allows no {word}; list at least one (the catalog has "
                    f"{', '.join(x.id for x in catalog.of_kind(kind))}){notes}", (f"parts.{kind}",))
    a = spec.amplitude
    low = a.peak_v * (1 - a.tolerance_frac)
    if not problem.ops:
        reasons = "; ".join(f"{i}: {w}" for i, w in problem.dropped)
        top, best = swing_target(spec, catalog, problem)
        if best:   # (an op-amp was left out for its swing alone)
            return (f"amplitude.target binds: {_q(a.peak_v, 'voltage')} peak at the load (at least "
                    f"{_q(low, 'voltage')} peak within its tolerance) is more than any allowed op-amp swings: the "
                    f"best ({best}) swings {_q(top * (1 - a.tolerance_frac), 'voltage')} peak at the minimum supply; "
                    + (f"an amplitude.target over {_q(top, 'voltage')} peak cannot design (or raise the supply). "
                       if bound else f"relax amplitude.target to {_q(top, 'voltage')} peak or raise the supply. ") +
                    f"Left out: {reasons}{notes}", ("amplitude.target",))
        return f"supply binds: no allowed op-amp can serve: {reasons}{notes}", ("supply",)
    # the least current the load takes at the target frequency: the sine's peak times the
    # magnitude of the load's admittance, 1/R in parallel with j 2 pi f C
    ld, f = spec.load, spec.frequency.target_hz
    y = ld.admittance_s(f)
    g, b, i_load = y.real, y.imag, low * abs(y)
    best_i = max(op.opamp.output_current_a for op in problem.ops) * problem.current_share
    if i_load > best_i:
        plans = (f"the strongest allowed op-amp plans for {_q(best_i, 'current')} ({problem.current_share:.0%} of its "
                 f"output current, derating rule output_current)")
        y_max = best_i / low   # the largest load admittance that current drives, S
        if b > g:   # the capacitance takes most of it: name it, and what would do
            # a bound, not a promise: the op-amp also drives its own network, and the
            # search says what designs
            fix = (f"a load.capacitance over {_q(math.sqrt(y_max ** 2 - g * g) / (2 * math.pi * f), 'capacitance')} "
                   "cannot design" if y_max > g else
                   f"even with no capacitance a load.resistance under {_q(1 / y_max, 'resistance')} cannot design")
            return (f"load.capacitance binds: {_q(low, 'voltage')} peak into {_q(ld.capacitance_f, 'capacitance')} "
                    f"at {_q(f, 'frequency')} (reactance {_q(1 / b, 'resistance')}) with "
                    f"{_q(ld.resistance_ohm, 'resistance')} takes {_q(i_load, 'current')}; {plans}, so {fix}: lower "
                    f"it or add an external driver{notes}", ("load.capacitance",))
        rel = load_relaxation(spec, problem)
        fix = (f"raise load.resistance to {_fmt(rel.field, rel.advice)} or add an external driver" if rel else
               "lower the load's capacitance or add an external driver")
        if rel and bound:
            fix = f"a load.resistance under {_fmt(rel.field, rel.advice)} cannot design (or add an external driver)"
        return (f"load.resistance binds: {_q(low, 'voltage')} peak into {_q(ld.resistance_ohm, 'resistance')} "
                f"takes {_q(i_load, 'current')}; {plans}: {fix}{notes}", ("load.resistance",))
    if not pairs and hold:
        return f"frequency.tolerance binds: {hold}{notes}", ("frequency.tolerance",)
    if not pairs:
        lo, hi = reach_hz
        return (f"frequency.target out of reach: the allowed resistor and capacitor families make arms from "
                f"{_q(lo, 'frequency')} to {_q(hi, 'frequency')} (textbook f0), not "
                f"{_q(spec.frequency.target_hz, 'frequency')}; allow other families{notes}", ("frequency.target",))
    return None


def frequency_hold(spec: Spec, problem, best_hold, catalog) -> tuple[str, float]:
    """When even the best allowed family pair (best_hold: resistor family, capacitor
    family, share of builds within the tolerance), centred on the target, misses the
    frequency yield: what it holds, what the catalog's best pair would, and what to do;
    and the tolerance (fraction) the allowed pair holds centred in the spec's yield
    (frequency_share inverted). ("", nan) when it holds."""
    if best_hold is None or best_hold[2] >= spec.yield_min_frac:
        return "", math.nan
    rfa, cfa, share = best_hold
    tol, y = spec.frequency.tolerance_frac, spec.yield_min_frac
    t = frequency_tolerance(problem.freq_sigma(rfa, cfa), problem.freq_drift(rfa, cfa), y)
    f = spec.frequency.target_hz

    def reaches(r, c) -> bool:   # (equal arms of the pair make the target: a pair that cannot is no answer)
        lo, hi = problem.topology.reach_hz(r, c)
        return lo <= f <= hi

    shares = {(r, c): float(frequency_share(np.array([0.0]), problem.freq_sigma(r, c), problem.freq_drift(r, c),
                                            tol)[0])
              for r in catalog.of_kind("resistors") for c in catalog.of_kind("capacitors") if reaches(r, c)}
    shares = shares or {(rfa, cfa): share}
    r_best, c_best = max(shares, key=lambda k: (shares[k], k[0].id, k[1].id))
    if shares[(r_best, c_best)] >= y:
        other = (f"in the catalog, {r_best.id} resistors with {c_best.id} capacitors would hold it in about "
                 f"{shares[(r_best, c_best)] * 100:.0f} %; allow tighter families or plan a trim")
    else:
        other = (f"no family pair in the catalog holds it either (the best, {r_best.id} resistors with {c_best.id} "
                 f"capacitors, in about {shares[(r_best, c_best)] * 100:.0f} %): plan a trim or relax it")
    return (f"even centred on the target, the best allowed families ({rfa.id} resistors "
            f"{rfa.tolerance_frac * 100:.3g} %, {cfa.id} capacitors {cfa.tolerance_frac * 100:.3g} %) hold "
            f"{_fmt('frequency.tolerance', tol)} in about {share * 100:.0f} % of builds and "
            f"{_fmt('frequency.tolerance', t)} in {y * 100:.4g} %; {other}"), t


def held_tolerance(spec: Spec, t: float) -> Relaxation:
    """The frequency tolerance a refusal works from when no allowed pair holds the
    spec's: HOLD_MARGIN times what the best pair holds centred (t, fraction), rounded up."""
    return Relaxation("frequency.tolerance", t, round_loose(max(t * HOLD_MARGIN, spec.frequency.tolerance_frac), True))


def held_message(spec: Spec, hold: str, rel: Relaxation) -> tuple[str, tuple[str, ...]]:
    """The refusal when the frequency tolerance relaxed as far as the families need
    (rel) is all it takes: a design run designs there."""
    notes = "".join(f"\n  ({n})" for n in default_notes(spec))
    return (f"no design meets the spec{notes}\nfrequency.tolerance binds: {hold}; the search designs at "
            f"{_fmt(rel.field, rel.advice)}: {_advice([rel])}"), (rel.field,)


def swing_target(spec: Spec, catalog, problem) -> tuple[float, str]:
    """(the amplitude target, V peak, whose tolerance's bottom the best allowed op-amp
    left out for its swing alone swings at the minimum supply; its id): (0, '') if none
    (one that cannot take the supply would swing more in vain)."""
    swung = {i for i, why in problem.dropped if why.startswith("swings")}
    best = max((_swing_of(op, spec) for op in catalog.opamps if op.id in swung), default=(0.0, ""))
    return best[0] / (1 - spec.amplitude.tolerance_frac), best[1]


def _swing_of(op, spec: Spec) -> tuple[float, str]:
    from partpick.circuits import Conditions
    from partpick.physics.opamp import swing_limits

    lo, hi = swing_limits(op, Conditions(spec.supply.min_v, 298.15, math.inf).rails(spec.supply.kind))
    return min(-lo, hi), op.id


def shelf_shortfall(bom, shelf, builds: int, catalog) -> str:
    """What the shelf lacks for ``bom`` (the best design with the catalog behind the
    shelf): each value it runs out of, with the designators that need it."""
    need: dict = {}
    for ln in bom.lines:
        need.setdefault((ln.family, ln.value), []).append(ln.ref)
    resistors = {r.id for r in catalog.resistors}
    short = []
    for (fam, value), refs in need.items():
        have = shelf.quantity(fam, value)
        if have < len(refs) * builds:
            what = (units.format_quantity(value, "resistance" if fam in resistors else "capacitance") + " "
                    if value else "")
            short.append(f"{what}{fam} for {', '.join(refs)} (needs {len(refs) * builds} for {builds} board(s), the "
                         f"shelf has {have})")
    return ("the shelf runs out of " + "; ".join(short) + ": with those added (or stock mode 'prefer') the best "
            "design uses them")
