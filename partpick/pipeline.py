"""The whole design job as one library call: ``design(spec, catalog)``, and the exact
evaluation of one BOM, ``evaluate_bom``. Receives parsed inputs and reads no files.

spec + catalog (+ stock) -> search space (from the plug-ins' hooks) -> CP-SAT proposals
-> exact verification and Monte Carlo -> ranking. Each stage is timed
(``Design.timings``) so benchmarks can report them.
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass, field

from partpick.bom import Bom, BomLine, part_data
from partpick.catalog import Catalog
from partpick.circuits import TOPOLOGIES, check_spec, slots_for
from partpick.errors import InfeasibleError
from partpick.pricing import Pricer, bom_cost
from partpick.rank import Ranked, rank
from partpick.search.solver import solve
from partpick.search.space import Pick, Space, build_space
from partpick.spec import Spec, check_parts
from partpick.tolerance import with_yield
from partpick.verify import verify

__all__ = ["Design", "design", "pick_to_bom", "evaluate_bom", "netlist_text"]

RETUNE = 3  # leading candidates whose frequency network is retuned with the verified pull


@dataclass(frozen=True, slots=True)
class Design:
    """Ranked, verified candidates (best first), the search space's notes and the time
    each stage took (s)."""

    ranked: tuple[Ranked, ...]
    space: Space
    timings: dict = field(default_factory=dict, hash=False, compare=False)

    @property
    def passing(self) -> tuple[Ranked, ...]:
        return tuple(r for r in self.ranked if r.verdict.passed)


def pick_to_bom(p: Pick, spec: Spec, space: Space) -> Bom:
    """The BOM of a solver pick: every slot of the circuit's shape filled from the
    pick's options, the op-amp and (single supply) the fixed bias and coupling parts."""
    caps = {s.role for s in TOPOLOGIES[space.topology].slots if s.kind == "capacitors"}
    values = {**p.net.values, **p.ctl.values, **p.stage.values}
    family = {role: (p.net.c_family if role in caps else p.net.r_family) for role in p.net.values}
    family.update({role: p.ctl.r_family for role in p.ctl.values})
    family.update({role: p.stage.r_family for role in p.stage.values})
    actives = {**dict(p.ctl.parts), "opamp": p.op.opamp}
    for role, fam, v in space.fixed:
        family[role], values[role] = fam, v
    lines = []
    for slot in slots_for(space.topology, space.control, p.stage.kind, spec.supply.kind):
        if slot.role in actives:
            lines.append(BomLine(slot.designator, slot.role, actives[slot.role], 0.0))
        elif values.get(slot.role):
            lines.append(BomLine(slot.designator, slot.role, family[slot.role], values[slot.role]))
    return Bom(tuple(lines), spec.supply.kind, p.stage.kind, space.topology, space.control)


def design(spec: Spec, catalog: Catalog, *, stock=None, results: int | None = None, time_limit_s: float = 10.0,
           workers: int = 2, seed: int = 0, rank_by: tuple[str, ...] | None = None,
           samples: int = 20_000, progress=None) -> Design:
    """Search, verify and rank candidates for ``spec`` from ``catalog`` (and the stock
    list the spec names, already loaded, when it names one).

    Raises :class:`InfeasibleError` when no candidate can meet the spec, naming the
    requirement that binds and what is achievable. ``progress(done, total)`` is called
    as candidates are verified (physics and Monte Carlo).
    """
    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    check_parts(spec, catalog)
    check_spec(spec)
    n = results or spec.results
    rank_by = rank_by or spec.rank_by
    space = build_space(spec, catalog, stock=stock)
    t1 = time.perf_counter()
    timings["enumerate"] = t1 - t0
    picks = solve(space, n + 2, time_limit_s=time_limit_s, workers=workers, seed=seed)
    t2 = time.perf_counter()
    timings["solve"] = t2 - t1
    if not picks:
        raise InfeasibleError("the solver found no candidate within its time limit; raise it or relax the spec",
                              ("search",))
    total = len(picks) + RETUNE
    done = [0]

    def verified(p: Pick) -> Ranked:
        out = _verified(p, spec, space, catalog, samples, seed + 1, stock)
        done[0] += 1
        if progress is not None:
            progress(done[0], total)
        return out

    items = [verified(p) for p in picks]
    # The solver aimed with the surrogate's pull; verification measured the real one.
    # Retune the frequency network of the leading candidates with it (same families, same
    # required gain), so the built circuit lands closer still, and let verification judge
    # again.
    topo = TOPOLOGIES[space.topology]
    price = Pricer(catalog).unit
    for r in rank(items, rank_by)[:RETUNE]:
        p = r.pick
        if not r.verdict.nominal.starts:
            continue
        pull = math.log(r.verdict.nominal.freq_hz) - p.net.ln_f0
        op = p.op
        net = topo.retune(spec, catalog, p.net, pull, (math.exp(op.ln_r_min), math.exp(op.ln_r_max)), price)
        if net is not None:
            items.append(verified(dataclasses.replace(p, net=net)))
    t3 = time.perf_counter()
    timings["verify"] = t3 - t2
    ranked = rank(items, rank_by)[:n]
    timings["rank"] = time.perf_counter() - t3
    if not any(r.verdict.passed for r in ranked):
        raise InfeasibleError(_verified_failure(ranked), tuple(sorted({c.field for r in ranked
                                                                       for c in r.verdict.failed()})))
    return Design(tuple(ranked), space, timings)


def evaluate_bom(bom: Bom, spec: Spec, catalog: Catalog, stock=None, *, samples: int = 20_000,
                 seed: int = 1, pick: Pick | None = None) -> Ranked:
    """Verify one BOM exactly (physics at every operating point, Monte Carlo yield) as a
    ranked item."""
    circuit = bom.to_circuit(catalog)
    tol, tc, rating = part_data(bom, catalog)
    v = verify(circuit, spec, tolerances=tol, tempcos=tc, ratings=rating)
    mc = wc = None
    if v.nominal.starts:
        v, mc, wc = with_yield(v, circuit, bom, catalog, spec, samples=samples, seed=seed)
    nom = v.nominal
    cost, parts = bom_cost(bom, catalog, stock)
    freq_err = nom.freq_hz / spec.frequency.target_hz - 1 if nom.starts else math.nan
    amp_err = nom.load_peak_v / spec.amplitude.peak_v - 1 if nom.starts else math.nan
    thd = max((c.value for c in v.checks if c.name == "THD at load"), default=math.nan)
    return Ranked(bom, circuit, v, freq_err, amp_err, thd, cost, parts, pick.objective if pick else 0.0, pick, mc, wc)


def _verified(p: Pick, spec: Spec, space: Space, catalog: Catalog, samples: int, seed: int, stock=None) -> Ranked:
    """Exact verification of one solver pick, with its Monte Carlo yield."""
    return evaluate_bom(pick_to_bom(p, spec, space), spec, catalog, stock, samples=samples, seed=seed, pick=p)


def _verified_failure(ranked: list[Ranked]) -> str:
    """Which requirement the best candidates still miss after exact verification."""
    counts: dict[str, int] = {}
    for r in ranked:
        for c in r.verdict.failed():
            counts[c.name] = counts.get(c.name, 0) + 1
    worst = max(counts, key=counts.get)
    best = ranked[0]
    fails = "; ".join(f"{c.name}: {c.value:.4g} (limit {c.low if c.low is not None else ''}"
                      f"{'..' if c.low is not None and c.high is not None else ''}"
                      f"{c.high if c.high is not None else ''})" for c in best.verdict.failed())
    return (f"no verified candidate meets the spec; '{worst}' fails in {counts[worst]} of {len(ranked)}; "
            f"the best candidate misses {fails}")


def netlist_text(bom: Bom, spec: Spec, catalog: Catalog, cycles: float | None = None) -> str:
    """The SPICE netlist of ``bom`` at the spec's nominal point, with a transient run of
    ``cycles`` periods (default: enough to settle)."""
    from partpick.circuits import build_netlist
    from partpick.physics.spice import to_spice
    from partpick.verify import cycles_to_settle, operating_conditions, predict

    circuit = bom.to_circuit(catalog)
    cond = operating_conditions(spec)["nominal"]
    if cycles is None:
        point = predict(circuit, cond)
        cycles = cycles_to_settle(circuit, point, max(point.osc_peak_v, 1e-3)) if point.starts else 60
    return to_spice(build_netlist(circuit, cond), cycles=cycles)
