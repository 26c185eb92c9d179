"""The whole design job as one library call: ``design(spec, catalog)``, and the exact
evaluation of one BOM, ``evaluate_bom``. Receives parsed inputs and reads no files.

spec + catalog (+ stock) -> the problem (:mod:`partpick.search.problem`) -> the best
estimated design of every configuration (:mod:`partpick.search.enumerate`) -> for the
leading ones, exact physics at the nominal point and a refinement of the values with
what it measured (the pull on the frequency network, the amplitude on the stage ratio)
-> verification and Monte Carlo -> ranking (:mod:`partpick.rank`). Verification runs in
the search's order until the leader is certified: no configuration left unverified
could beat it even with optimistic figures. Each stage is timed (``Design.timings``).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace
from functools import partial

from partpick import units
from partpick.bom import Bom, BomLine, part_data
from partpick.catalog import Catalog
from partpick.circuits import check_spec, fitting_topologies, periphery, settled, slots_for
from partpick.circuits.options import sigma
from partpick.errors import InfeasibleError
from partpick.pricing import Pricer, bom_cost
from partpick.rank import Ranked, rank
from partpick.search.candidates import on_shelf
from partpick.search.designed import designed_batch
from partpick.search.enumerate import WINDOW_CAP, STAGE_RATIO, Candidate, PriceBook, Searcher
from partpick.search.pool import Pool, cost_first, hopeless, orders
from partpick.forked import fork_map
from partpick.lookahead import Ahead
from partpick.opening import (allowing, eased, kinds_opened, moved, new_families, opening_kinds, restricted,
                              widened)
from partpick.refusal import (NO_OSCILLATION, SAMPLES, default_notes, explain_refusal, frequency_hold, held_message,
                              held_tolerance, loosened, loosened_together, load_relaxation, relaxed, relaxed_all,
                              shelf_shortfall, structural_refusal, swing_target)
from partpick.search.problem import Problem, build_problem
from partpick.spec import AUTO_TOPOLOGY, Spec, check_parts
from partpick.tolerance import with_yield
from partpick.physics.harmonic import NeedsTransient
from partpick.points import Runs, points
from partpick.verify import operating_conditions, verify

__all__ = ["Design", "design", "candidate_bom", "evaluate_bom", "netlist_text"]

MAX_VERIFY = 40          # verifications at most per design run (the note says when it binds)
BARE_VERIFY = 6          # ... in the runs that work out why a spec does not design
# Transient runs (the operating points of an op-amp out of its linear range: swing, slew
# or current, where harmonic balance does not hold) at most per design command, counted
# run by run: each takes one to a few seconds (a 60-period run of a 50 kHz circuit 3.4 s
# on this project's 2-core machine) against milliseconds for a point by harmonic
# balance, so a space of such candidates would otherwise take minutes (the note says when
# it binds). A refusal's analysis, seven re-searches with loosened requirements, runs
# none: it judges by harmonic balance and skips what would need one. Counted in runs, not
# seconds, so that the result does not depend on the machine.
MAX_TRANSIENT = 3
REFUSAL_TRANSIENT = 0
# a candidate skipped for want of a transient run counts this many against the order's
# verification budget: its harmonic balance was solved and failed, which for a JFET
# control's slow loop costs about as much as verifying several limiter candidates
SKIP_WEIGHT = 5
# the ranks every design run verifies towards, whatever -n asks below it (see _goals)
SHOWN = 10


@dataclass(frozen=True, slots=True)
class Design:
    """Ranked, verified candidates (best first), the notes of the search (parts left
    out and why), how many configurations were searched and verified, and the time each
    stage took (s), and whether verification stopped before #1 was certified (``stopped``)."""

    ranked: tuple[Ranked, ...]
    notes: tuple[str, ...] = ()
    searched: int = 0
    verified: int = 0
    timings: dict = field(default_factory=dict, hash=False, compare=False)
    # whether verification stopped at its budget (per order, ``budget``) before it had
    # ruled out every candidate that could beat #1 by the search's estimates
    stopped: bool = False
    budget: int = 0

    @property
    def passing(self) -> tuple[Ranked, ...]:
        return tuple(r for r in self.ranked if r.verdict.passed)


def candidate_bom(c: Candidate, spec: Spec, problem: Problem, fixed=()) -> Bom:
    """The BOM of a search candidate: every slot of its circuit's shape, in slot order."""
    values, families = dict(c.values), dict(c.families)
    for role, fam, v in fixed:
        values[role], families[role] = v, fam
    lines = []
    control = c.control or problem.control.name
    for slot in slots_for(problem.topology.name, control, c.stage, spec.supply.kind):
        if slot.role in c.parts:
            lines.append(BomLine(slot.designator, slot.role, c.parts[slot.role], 0.0))
        elif values.get(slot.role):
            lines.append(BomLine(slot.designator, slot.role, families[slot.role], values[slot.role]))
    return Bom(tuple(lines), spec.supply.kind, c.stage, problem.topology.name, control)


def _searcher(spec: Spec, catalog: Catalog, stock, problem: Problem, by_cost: bool = False):
    fixed = ()
    if spec.supply.kind == "single":
        fixed = periphery.fixed_parts(spec, catalog, problem.r_families, Pricer(catalog, stock).unit, problem.shelf)
        # the search plans the amplitude before the coupling capacitor: the load's over its
        # loss, with its spread
        _, cfam, c_f = next(f for f in fixed if f[0] == "coupling_c")
        s_c = periphery.coupling_spread(spec, c_f, sigma(catalog.find("capacitors", cfam)))
        g = periphery.coupling_gain(spec, c_f)
        problem = replace(problem, amp_v=problem.amp_v / g, amp_sigma=s_c, load_gain=g,
                          drive_y=periphery.coupled_admittance(spec, c_f))
    price = PriceBook(Pricer(catalog, stock), catalog, fixed, problem.topology.channels)
    kinds = periphery.STAGE_KINDS if spec.output_stage == "auto" else (spec.output_stage,)
    offered = problem.topology.stages   # a topology may offer fewer
    kinds = tuple(k for k in kinds if k in offered)
    return Searcher(problem, price, kinds, by_cost), fixed


def design(spec: Spec, catalog: Catalog, *, stock=None, results: int | None = None,
           rank_by: tuple[str, ...] | None = None, samples: int = 20_000, seed: int = 0, progress=None,
           nearest: int | None = 3, work: Runs | None = None, given=(), opened=(), budget: int | None = None) -> Design:
    """Search, verify and rank candidates for ``spec`` from ``catalog`` (and the stock
    list the spec names, already loaded, when it names one).

    Raises :class:`InfeasibleError` when no candidate can meet the spec, naming the
    requirements that bind, what the best allowed design reaches and what would make
    it design, with the ``nearest`` failing designs (:mod:`partpick.refusal`; None:
    a bare refusal on a small verification budget, as the runs that work this out use;
    0: a bare refusal after the full search, for a caller that has its own answer to a
    refusal, as the trade-off's family runs); ``given``: (Relaxation, statement) the
    spec has had already, which the why-not states and keeps (a load resistance a
    refusal named); ``opened``: the families a refusal added to the spec's lists, or the
    target it moved (its why-not then opens and moves no more: :mod:`partpick.opening`).
    ``progress(done, total)``: called as candidates are verified. ``budget``: the candidates
    verified at most per order (MAX_VERIFY). ``topology: auto``: every topology
    that fits the spec, ranked together (:func:`_design_auto`).
    """
    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    check_parts(spec, catalog)
    check_spec(spec)
    if spec.topology == AUTO_TOPOLOGY:
        return _design_auto(spec, catalog, stock=stock, results=results, rank_by=rank_by, samples=samples, seed=seed,
                            progress=progress, nearest=nearest,
                            work=work if work is not None else Runs(MAX_TRANSIENT), given=given,   # one budget
                            opened=opened, budget=budget)
    n = results or spec.results
    rank_by = rank_by or spec.rank_by
    problem = build_problem(spec, catalog, stock)
    searcher, fixed = _searcher(spec, catalog, stock, problem, cost_first(rank_by))
    refusal_of = partial(structural_refusal, spec, catalog, problem, searcher.pairs, _reach(problem),
                         frequency_hold(spec, problem, searcher.best_hold, catalog)[0])
    early = refusal_of()
    if early is not None and nearest and early[1] == ("load.resistance",) and (rel := load_relaxation(spec, problem)):
        # the load the message names is stated where the spec with it designs; else the
        # why-not of that spec, which keeps it (stated as a bound), says what binds next
        bound = refusal_of(bound=True)[0]
        try:
            design(relaxed(spec, rel.field, rel.advice), catalog, stock=stock, results=1, samples=samples, seed=seed,
                   nearest=nearest, work=work, given=((rel, bound.split("binds: ", 1)[1]),))
        except InfeasibleError as exc:
            why_not = exc.message.startswith("no design")   # (else a structural refusal of its own)
            at = units.format_quantity(rel.advice, "resistance")
            raise InfeasibleError(exc.message if why_not else f"{bound}\nwith load.resistance at {at}, {exc.message}",
                                  tuple(dict.fromkeys(early[1] + exc.binding))) from None
    as_user = partial(_whole, catalog=catalog, stock=stock, seed=seed, samples=samples, nearest=nearest)
    if early is not None and nearest and not opened and (kinds := opening_kinds(spec, early[1])):
        # the parts allowed cannot make the oscillator at all: the families that would, and
        # the why-not of the spec with them allowed
        wide = widened(spec, catalog, kinds, partial(_bare, catalog=catalog, stock=stock, seed=seed,
                                                     work=Runs(REFUSAL_TRANSIENT)), as_user, early[0])
        if wide is not None:
            raise InfeasibleError("\n".join([early[0], *wide[0]]), tuple(dict.fromkeys(early[1] + wide[1])))
    swung = early is not None and early[1] == ("amplitude.target",)   # (no allowed op-amp swings it)
    if swung and nearest and not opened and (top := swing_target(spec, catalog, problem)[0]):
        # the amplitude the best op-amp swings: the why-not of the spec there, where it does not design
        still = moved(spec, "amplitude.target", top, as_user, early[0])
        if still is not None:
            raise InfeasibleError("\n".join([refusal_of(bound=True)[0], *still[0]]),
                                  tuple(dict.fromkeys(early[1] + still[1])))
    # a frequency tolerance no allowed family pair holds is refused at once by the runs
    # that explain a refusal; the design the user asked for goes on to the why-not, which
    # finds the tolerance a design holds (and the families that would hold this one)
    if early is not None and not (nearest and early[1] == ("frequency.tolerance",)):
        raise InfeasibleError(*early)
    t1 = time.perf_counter()
    timings["setup"] = t1 - t0
    verified: list[Ranked] = []
    budget = (budget or MAX_VERIFY) if nearest is not None else BARE_VERIFY
    work = work if work is not None else Runs(MAX_TRANSIENT)
    searched, t_search = 0, 0.0
    held: set = set()   # the configurations verified to pass: one design each is shown
    tried: set = set()  # (signature, values) of every candidate verified
    capped = False      # the last phase stopped on its budget
    failures: dict = {}  # failed verifications per kind of candidate (Pool.failed)
    stopped: dict = {}   # phase -> whether its last order's run towards #1 stopped at the budget

    def job(c: Candidate, transient):
        return _verify(_refined(c, spec, catalog, problem, searcher, fixed), spec, catalog, stock, problem, samples,
                       seed + 1, fixed, transient=transient)

    ahead = Ahead(job, _key)   # (the candidates that follow the one verified, verified on the other CPUs)

    def towards(goal: int, pool: Pool, attempts: int) -> int:
        """Verify pool's candidates in its order until the top ``goal`` are certified, the
        pool is spent or ``attempts`` (candidates verified, or skipped for want of a
        transient run) reach the budget; the attempts then."""
        while attempts < budget:
            c = pool.next(searcher.simulate)   # the closed form ordered it; the Monte Carlo model places it
            if c is None or pool.certified(verified, c, goal, rank_by):
                break
            if not pool.may_enter(verified, c, goal, rank_by):
                continue   # (it cannot enter the top goal; a later candidate may)
            if c.yield_est < pool.floor:
                if not pool.cost_first:
                    pool.drop_round(c)   # (in yield order: what follows in its round cannot pass either)
                continue   # (a cheaper candidate, or one of a later round, may still pass)
            if c.signature in held or _key(c) in tried:
                continue   # its configuration passes (at another level), or the cost order verified it
            tried.add(_key(c))
            attempts += 1

            def next_taken(d: Candidate, c: Candidate = c) -> bool:
                """Whether this loop verifies d after c if c changes nothing (whether c
                passes or not)."""
                return (d.signature not in held and d.signature != c.signature and _key(d) not in tried
                        and d.yield_est >= pool.floor)

            r = ahead.verify(c, pool, searcher.simulate, next_taken, work)
            if r is None:
                work.skipped += 1
                attempts += SKIP_WEIGHT - 1
                continue
            verified.append(r)
            # a pass: its configuration is shown once; a failure: its kind counts it
            held.add(c.signature) if r.verdict.passed else pool.failed(c, spec.yield_min_frac)
            if progress is not None:
                progress(len(verified), max(n, len(verified)))
        return attempts

    try:
        for i, phase in enumerate(_phases(spec, catalog, stock, problem, searcher, fixed, nearest is None)):
            passed = sum(r.verdict.passed for r in verified)
            if problem.fallback and i and (passed >= n or (passed and capped) or not _control_may_help(verified, spec)):
                break   # 'auto': the limiter gave the designs asked (or more than its budget shows), or
                # failed where no control helps
            t_s = time.perf_counter()
            batches = phase()
            t_search += time.perf_counter() - t_s
            start = len(verified)   # each phase has its own budget (a fallback must get its turn)
            # an order that spends its budget without a pass is followed by the next, with a
            # budget of its own: a cost-first order by the yield order, that by the yield order
            # with the kinds that failed waiting behind the others (Pool's demoted order)
            for by_cost, demoted in orders(rank_by):
                attempts = 0   # candidates verified, or skipped for want of transient runs
                simulated: dict = {}   # (the goals' pools share the Monte Carlo models of their rows)
                for goal in _goals(n):
                    pool = Pool(batches, by_cost, hopeless(spec.yield_min_frac), failures, demoted, simulated)
                    pool.skip = lambda d, pool=pool, goal=goal: (
                        d.signature in held or _key(d) in tried
                        or not pool.may_enter(verified, replace(d, yield_est=1.0), goal, rank_by))   # (see below)
                    searched += pool.size if by_cost == cost_first(rank_by) and not demoted and goal == 1 else 0
                    attempts = towards(goal, pool, attempts)
                    if goal == 1:
                        stopped[i] = attempts >= budget
                capped = attempts >= budget
                if any(r.verdict.passed for r in verified[start:]) or not capped:
                    break
    finally:
        ahead.close()
    t2 = time.perf_counter()
    timings["search"] = t_search
    timings["verify"] = t2 - t1 - t_search
    notes = tuple(f"{i}: {w}" for i, w in problem.dropped) + default_notes(spec)
    if searcher.window_capped:
        notes += (f"arm sets searched within +/-{math.expm1(WINDOW_CAP):.0%} of the target frequency (the tolerance "
                  "allows more; a cheaper capacitor value further off is not looked for)",)
    ranked = rank(verified, rank_by)
    timings["rank"] = time.perf_counter() - t2
    if not any(r.verdict.passed for r in ranked):
        if not nearest:
            raise InfeasibleError("no design meets the spec")
        raise InfeasibleError(*_refusal(spec, catalog, stock, problem, searcher, ranked, nearest, seed, samples,
                                        given, opened))
    if work.skipped:
        notes += (f"{work.skipped} candidates not verified: they needed transient runs (an op-amp out of its linear "
                  f"range: swing, slew or current limited), more than were left of the {MAX_TRANSIENT} such runs a "
                  "design allows",)
    return Design(tuple(ranked[:n]), notes, searched, len(verified), timings, any(stopped.values()), budget)


def _goals(n: int) -> tuple[int, ...]:
    """The ranks the verification works towards, in turn, each order's one budget shared:
    #1 first (a candidate is verified only where it could beat the best passing so far,
    until nothing left could), then the top max(n, SHOWN). For -n up to SHOWN both are
    the same, so what is verified, and #1, do not depend on -n; a larger -n changes only
    what the budget left after #1 goes to. #1 first: verifying towards the top ten at
    once spent the budget on candidates that could only enter ranks 2 to 10, and missed
    a cheaper #1 that -n 1 found (requirements 3, 56 and 118 of the coverage benchmark;
    the starter spec's #1 differed between -n 1 and -n 3)."""
    return tuple(dict.fromkeys((1, max(n, SHOWN))))


def _key(c: Candidate) -> tuple:
    """What tells candidates apart for verification: the configuration and the values."""
    return c.signature, tuple(sorted(c.values.items()))


def _phases(spec: Spec, catalog: Catalog, stock, problem: Problem, searcher: Searcher, fixed, bare: bool) -> list:
    """The search's batches in the order they are verified: the limiter's
    configurations, then the designs of the controls with a design hook (each phase a
    function, so that a phase not needed costs nothing)."""
    def surface():
        # each limiter, gain family and level's configurations are independent of the
        # others': spread over the CPUs (fork_map), a batch sent back without the searcher
        # it indexes (which holds every table) and joined to this one's here
        def detached(combo):
            b = searcher.configurations(*combo)
            return None if b is None else replace(b, searcher=None)

        combos = [(lim, gf, r_gnd) for lim in problem.limiters for gf in problem.r_families
                  for r_gnd in searcher.levels(gf)]
        return [replace(b, searcher=searcher) for b in fork_map(detached, combos) if b is not None]

    def hooked():
        def cost(c: Candidate) -> float:
            return bom_cost(candidate_bom(c, spec, problem, fixed), catalog, stock)[0]
        return [b for ctl in problem.designed if (b := designed_batch(searcher, ctl, cost)) is not None]

    if not searcher.pairs:
        return []   # (no arm family pair holds the frequency: the refusal says what does)
    if problem.designed and not (problem.fallback and bare):
        return [surface, hooked]
    return [surface]   # (the runs that explain a refusal leave a fallback out: its designs take seconds each)


def _design_auto(spec: Spec, catalog: Catalog, *, results, rank_by, nearest, **kw) -> Design:
    """Every topology that fits ``spec`` designed as if the spec had named it, and their
    candidates ranked together by the spec's keys (each row's BOM names its topology).
    A topology that finds no design adds a note saying why; when none does, the refusal
    gives each one's reason."""
    n = results or spec.results
    rank_by = rank_by or spec.rank_by
    designs, notes, why = [], [], []
    for name in fitting_topologies(spec):
        try:
            designs.append(design(replace(spec, topology=name), catalog, results=n, rank_by=rank_by,
                                  nearest=nearest, **kw))
        except InfeasibleError as exc:
            why.append(f"{name}: {exc.message.splitlines()[0]}")
    if not designs:
        raise InfeasibleError("no topology designs the spec:\n" + "\n".join(why))
    for d in designs:
        notes += [x for x in d.notes if x not in notes]
    timings: dict[str, float] = {}
    for d in designs:
        for key, value in d.timings.items():
            timings[key] = timings.get(key, 0.0) + value
    ranked = rank([r for d in designs for r in d.ranked], rank_by)
    return Design(tuple(ranked[:n]), tuple(notes + [f"no design from the {w}" for w in why]),
                  sum(d.searched for d in designs), sum(d.verified for d in designs), timings,
                  any(d.stopped for d in designs), max(d.budget for d in designs))


def _reach(problem: Problem) -> tuple[float, float]:
    """The textbook frequencies the allowed families' arms reach, Hz (lowest, highest)."""
    spans = [problem.topology.reach_hz(r_fam, c_fam, problem.shelf) for r_fam in problem.r_families
             for c_fam in problem.c_families]
    spans = [x for x in spans if all(map(math.isfinite, x))]
    return (min(x[0] for x in spans), max(x[1] for x in spans)) if spans else (math.nan, math.nan)


_CONTROL_FIELDS = ("amplitude.target", "amplitude.tolerance", "distortion.max_thd", "settling.max")


def _control_may_help(verified: list[Ranked], spec: Spec) -> bool:
    """Whether another amplitude control could pass where the limiter's verified
    candidates failed: one of them misses only amplitude, THD or settling requirements,
    or its builds fail the yield on amplitude or THD (an amplitude control changes those,
    not the frequency network, the startup or the op-amp's limits: a candidate that also
    misses one of those does not count); True when none was verified."""
    if not verified:
        return True
    for r in verified:
        failed = {ch.field for ch in r.verdict.checks if not ch.passed}
        if not failed <= {*_CONTROL_FIELDS, "yield.min"}:
            continue   # (it fails where no amplitude control helps: clipping, startup, frequency, ...)
        if failed & set(_CONTROL_FIELDS):
            return True
        if r.mc is not None and min(r.mc.share.get("amplitude", 1.0), r.mc.share.get("thd", 1.0)) < spec.yield_min_frac:
            return True
    return False


def _bare(s: Spec, keys=None, *, catalog: Catalog, stock, seed: int, work: Runs) -> list[Bom]:
    """The passing BOMs of a design run that only proposes (SAMPLES builds, a small
    verification budget, a bare refusal): what a refusal's analysis reads. A spec with
    every relaxable requirement at its loose value gets the design's whole budget: a
    refusal there says that nothing allowed oscillates at all."""
    loosest = s == loosened_together(s)
    try:
        return [r.bom for r in design(s, catalog, stock=stock, results=3, rank_by=keys, samples=SAMPLES, seed=seed,
                                      nearest=0 if loosest else None, work=work).passing]
    except InfeasibleError:
        return []


def _whole(s: Spec, opened, *, catalog: Catalog, stock, seed: int, samples: int, nearest: int) -> None:
    """Design s as the user's command would (its own builds and transient runs; a
    refusal raises), with what a refusal opened or moved (its why-not does no more)."""
    design(s, catalog, stock=stock, results=1, samples=samples, seed=seed, nearest=nearest, work=Runs(MAX_TRANSIENT),
           opened=opened)


def _refusal(spec: Spec, catalog: Catalog, stock, problem: Problem, searcher: Searcher, failing, nearest: int,
             seed: int, samples: int, given=(), opened=()) -> tuple[str, tuple[str, ...]]:
    """The why-not of a refused spec (:func:`partpick.refusal.explain_refusal`), with
    what the parts allowed cannot do named first. The re-searches verify with SAMPLES
    builds (they only propose); every verdict the message states (the value to relax
    to, the nearest designs' figures) is judged with the design's own ``samples`` and
    seed, so that the relaxed spec's verification of the same BOM agrees with it (a
    yield just at its limit at 4,000 builds can miss it at 20,000). Where no allowed
    design oscillates, the families that would (:mod:`partpick.opening`)."""
    work = Runs(REFUSAL_TRANSIENT)   # shared by every run of the analysis
    done: dict = {}   # the runs made, by (spec, ranking)

    def fresh(job) -> list[Bom]:
        return _bare(*job, catalog=catalog, stock=stock, seed=seed, work=work)

    def run(s: Spec, keys=None) -> list[Bom]:
        if (s, keys) not in done:
            done[(s, keys)] = fresh((s, keys))
        return done[(s, keys)]

    # a frequency tolerance no allowed family pair holds even centred: the analysis works on
    # the spec with it relaxed to what the best pair holds (with a margin for arms off
    # centre), and says so as it goes. Where the whole design (every control, the design's
    # own builds) designs there, that is the answer; else what binds next is found with it
    whole: dict = {}

    def designs(s: Spec) -> bool:
        """Whether the whole design (every control, the design's own builds) designs s."""
        if s not in whole:
            try:
                whole[s] = bool(design(s, catalog, stock=stock, results=1, samples=samples, seed=seed, nearest=0,
                                       work=work).ranked)
            except InfeasibleError:
                whole[s] = False
        return whole[s]

    hold, t_hold = frequency_hold(spec, problem, searcher.best_hold, catalog)
    held = hold and not searcher.pairs
    if held:
        rel = held_tolerance(spec, t_hold)
        if designs(relaxed(spec, rel.field, rel.advice)) and not given:
            return held_message(spec, hold, rel)
        given = tuple(given) + ((rel, hold),)
    # the runs that do not depend on one another's results (each requirement loosened
    # alone, each restricted kind of part opened up, the shelf made a preference), made
    # at once over the CPUs; what follows only reads them. A run is a pure function of its
    # spec (no transient run is allowed in any), so the answer is the same either way.
    loose = relaxed_all(spec, [g for g, _ in given])   # (the spec explain_refusal works on: the same runs)
    one_open = [(kind, kinds_opened(spec, (kind,))) for kind in restricted(spec)]
    prefer = replace(spec, stock=replace(spec.stock, mode="prefer")) if problem.shelf is not None else None
    # (the runs with more parts allowed search the most: started first, so that the
    # cheap ones fill the other CPUs meanwhile)
    first = [(s, None) for _, s in one_open] + [(prefer, None)] * (prefer is not None)
    first += [(s, keys) for _, s, keys in loosened(loose)]
    done.update(zip(first, fork_map(fresh, first)))

    def evaluate(s: Spec, bom: Bom) -> Ranked:
        return evaluate_bom(bom, s, catalog, stock, samples=samples, seed=seed + 1)

    more = []
    for kind, s in one_open:   # (stated where the spec with them designs, as the user's design would)
        new = new_families(spec, catalog, boms[0], (kind,)) if (boms := run(s)) else ()
        if new and designs(allowing(spec, catalog, new)):
            more.append((f"allow {kind} {', '.join(new)}", "the search designs with it"))
    lead = []
    if prefer is not None:
        boms = run(prefer)
        if boms:
            lead.append(("stock quantities", shelf_shortfall(boms[0], problem.shelf, spec.builds, catalog)))
    if hold and not held:
        more.append(("the frequency tolerance", hold))
    message, binding = explain_refusal(spec, failing, run, evaluate, nearest, more, lead, given, designs)
    as_user = partial(_whole, catalog=catalog, stock=stock, seed=seed, samples=samples, nearest=nearest)
    if NO_OSCILLATION in message.splitlines() and not opened and (
            (wide := widened(spec, catalog, restricted(spec), run, as_user, message)) is not None
            or (wide := eased(spec, run, as_user, message)) is not None):
        at = (lines := message.splitlines()).index(NO_OSCILLATION) + 1   # (after the line it answers)
        message = "\n".join(lines[:at] + wide[0] + lines[at:])
        binding = tuple(dict.fromkeys(binding + wide[1]))
    return message, binding


def _nominal(c: Candidate, spec: Spec, catalog: Catalog, problem: Problem, fixed):
    bom = candidate_bom(c, spec, problem, fixed)
    circuit = bom.to_circuit(catalog)
    cond = operating_conditions(spec)["nominal"]
    return circuit, settled(circuit, cond)[2]


def _refined(c: Candidate, spec: Spec, catalog: Catalog, problem: Problem, searcher: Searcher, fixed) -> Candidate:
    """The candidate with what exact physics at the nominal point measured put back:
    the frequency network re-chosen for the measured pull (the cheapest of the same
    required-gain bin landing within resolution; with a second output, the topology's
    retune_outputs for the pull and the outputs' amplitude ratio), the stage ratio
    re-chosen for the measured amplitude."""
    circuit, hb = _nominal(c, spec, catalog, problem, fixed)
    if hb is None or hb.regime != "limiter":
        return c
    values = dict(c.values)
    pull = math.log(hb.freq_hz / circuit.f0_hz)
    net = searcher.retune_network(c, pull)
    retune_outputs = getattr(problem.topology, "retune_outputs", None)
    if retune_outputs is not None and hb.outputs:
        # a second output: the network re-chosen for its measured amplitude ratio as well
        second = next(iter(hb.outputs.values()))
        net = retune_outputs(c.values, c.families, catalog, problem.ln_f, pull,
                             abs(second[0] / hb.load_harmonics[0]), problem.shelf) or net
    if net is not None:
        values.update(net)
    if c.stage in STAGE_RATIO:
        pair = searcher.restage(c, hb.load_peak_v)
        if pair is not None:
            values.update(zip(periphery.STAGE_ROLES, pair))
    if values == c.values:
        return c
    out = replace(c, values=values)
    out = replace(out, cost=bom_cost(candidate_bom(out, spec, problem, fixed), catalog, searcher.price.pricer.stock)[0])
    if problem.shelf is not None and not on_shelf(out, problem.shelf, spec.builds):
        return c   # the re-chosen values would take more of a value than the shelf holds
    return out


def _verify(c: Candidate, spec: Spec, catalog: Catalog, stock, problem: Problem, samples: int, seed: int,
            fixed, transient=True) -> Ranked | None:
    """The candidate verified; None when its operating points need transient runs that
    ``transient`` (as :func:`partpick.points.predict_points` takes it) does not allow."""
    try:
        r = evaluate_bom(candidate_bom(c, spec, problem, fixed), spec, catalog, stock, samples=samples, seed=seed,
                         transient=transient)
    except NeedsTransient:
        return None
    return replace(r, pick=c)


def evaluate_bom(bom: Bom, spec: Spec, catalog: Catalog, stock=None, *, samples: int = 20_000,
                 seed: int = 1, transient=True) -> Ranked:
    """Verify one BOM exactly (physics at every operating point, Monte Carlo yield) as a
    ranked item (``transient`` as :func:`partpick.points.predict_points` takes it: raise
    NeedsTransient rather than simulate where it says no)."""
    circuit = bom.to_circuit(catalog)
    tol, tc, rating = part_data(bom, catalog)
    v = verify(circuit, spec, tolerances=tol, tempcos=tc, ratings=rating, points=points(circuit, spec, transient))
    mc = wc = None
    if v.nominal.starts:
        v, mc, wc = with_yield(v, circuit, bom, catalog, spec, samples=samples, seed=seed)
    nom = v.nominal
    cost, parts = bom_cost(bom, catalog, stock)
    freq_err = nom.freq_hz / spec.frequency.target_hz - 1 if nom.starts else math.nan
    amp_err = nom.load_peak_v / spec.amplitude.peak_v - 1 if nom.starts else math.nan
    # the worse of the loads the spec requires THD at (an unused output's is shown, not counted)
    thd = max((c.value for c in v.checks if c.name.startswith("THD at ") and c.high is not None), default=math.nan)
    return Ranked(bom, circuit, v, freq_err, amp_err, thd, cost, parts, 0.0, None, mc, wc)


def netlist_text(bom: Bom, spec: Spec, catalog: Catalog, cycles: float | None = None) -> str:
    """The SPICE netlist of ``bom`` at the spec's nominal point, with a transient run of
    ``cycles`` periods (default: enough to settle), titled with the target and the
    predicted frequency; a batch block makes ``ngspice -b`` measure and print the
    frequency, amplitude and THD at the load."""
    from partpick.circuits import build_netlist
    from partpick.physics.spice import to_spice
    from partpick.verify import cycles_to_settle, operating_conditions, predict

    circuit = bom.to_circuit(catalog)
    cond = operating_conditions(spec)["nominal"]
    point = predict(circuit, cond)
    if cycles is None:
        cycles = cycles_to_settle(circuit, point, max(point.osc_peak_v, 1e-3)) if point.starts else 60
    target = units.format_quantity(spec.frequency.target_hz, "frequency")
    amp = units.Amplitude(point.load_peak_v, "pk").as_kind(spec.amplitude.target.kind)
    predicted = (f"predicted {units.format_quantity(float(f'{point.freq_hz:.6g}'), 'frequency')}, "
                 f"{units.format_amplitude(amp, 4)} at the load" if point.starts else "predicted not to start")
    title = f"partpick {circuit.topology.title} for {spec.name}: target {target}, {predicted} (nominal point)"
    # measured even when no oscillation is predicted: the run then shows the kick dying away
    return to_spice(build_netlist(circuit, cond), cycles=cycles, title=title,
                    measure_hz=point.freq_hz if point.starts else circuit.f0_hz)
