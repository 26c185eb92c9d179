"""The whole design job as one library call: ``design(spec, catalog)``.

spec + catalog -> search space -> CP-SAT proposals -> exact verification -> ranking.
Each stage is timed (``Design.timings``) so benchmarks can report them.
"""

from __future__ import annotations

import dataclasses
import math
import time
from dataclasses import dataclass, field

from partpick.bom import Bom, BomLine, part_data
from partpick.catalog import Catalog
from partpick.errors import InfeasibleError
from partpick.rank import Ranked, rank
from partpick.search import BUFFERED, Pick, Space, build_space, retune_arms, solve
from partpick.spec import Spec, check_parts
from partpick.topologies.wien import DESIGNATORS
from partpick.tolerance import with_yield
from partpick.verify import verify

__all__ = ["Design", "design", "pick_to_bom", "bom_cost", "evaluate_bom"]

RETUNE = 3  # leading candidates whose arms are retuned with the verified pull


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
    """The BOM of a solver pick (single supply adds the bias and coupling parts)."""
    a, g, s = p.arms, p.gain, p.stage
    d = DESIGNATORS
    lines = [BomLine(d["rs"], "rs", a.r_family, a.rs), BomLine(d["cs"], "cs", a.c_family, a.cs),
             BomLine(d["rp"], "rp", a.r_family, a.rp), BomLine(d["cp"], "cp", a.c_family, a.cp),
             BomLine(d["rg"], "rg", g.r_family, g.rg), BomLine(d["rf"], "rf", g.r_family, g.rf)]
    if g.rd > 0:
        lines.append(BomLine(d["rd"], "rd", g.r_family, g.rd))
    lines.append(BomLine(d["limiter"], "limiter", g.limiter, 0.0))
    lines.append(BomLine(d["opamp"], "opamp", p.op.opamp, 0.0))
    if s.kind in ("gain", "attenuator"):
        lines += [BomLine(d["stage_ra"], "stage_ra", s.r_family, s.ra),
                  BomLine(d["stage_rb"], "stage_rb", s.r_family, s.rb)]
    if spec.supply.kind == "single":
        (rfam, rb, _), (bcfam, cb, _), (ccfam, cc, _) = space.fixed_lines
        lines += [BomLine(d["bias_top"], "bias_top", rfam, rb), BomLine(d["bias_bottom"], "bias_bottom", rfam, rb),
                  BomLine(d["bias_c"], "bias_c", bcfam, cb), BomLine(d["coupling_c"], "coupling_c", ccfam, cc)]
    return Bom(tuple(lines), spec.supply.kind, s.kind)


def bom_cost(bom: Bom, catalog: Catalog, stock=None) -> tuple[float, int]:
    """Cost per board (unit prices plus one line price per distinct family and value,
    priced as the search prices them, stock list included; a buffer on a single-channel
    op-amp takes a second package) and the physical part count."""
    from partpick.search import _line_price, _pricer

    price = _pricer(catalog, stock)
    qty = bom.uses()
    op = catalog.find("opamps", bom.line("opamp").family)
    if bom.stage in BUFFERED and op.channels == 1:
        qty[(op.id, 0.0)] += 1
    cost = sum(price(f, v) * n + _line_price(catalog, (f, v), stock) for (f, v), n in qty.items())
    parts = sum(n * (catalog.find("limiters", f).parts if catalog.kind_of(f) == "limiters" else 1)
                for (f, _v), n in qty.items())
    return cost, parts + (1 if bom.stage in BUFFERED and op.channels > 1 else 0)


def design(spec: Spec, catalog: Catalog, *, results: int | None = None, time_limit_s: float = 10.0,
           workers: int = 2, seed: int = 0, rank_by: tuple[str, ...] | None = None,
           samples: int = 20_000, progress=None) -> Design:
    """Search, verify and rank candidates for ``spec`` from ``catalog``.

    Raises :class:`InfeasibleError` when no candidate can meet the spec, naming the
    requirement that binds and what is achievable. ``progress(done, total)`` is called
    as candidates are verified (physics and Monte Carlo).
    """
    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    check_parts(spec, catalog)
    n = results or spec.results
    rank_by = rank_by or spec.rank_by
    stock = None
    if spec.stock is not None:
        from partpick.stock import load_stock

        stock = load_stock(spec.stock.path, catalog)
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
    # Retune the arms of the leading candidates with it (same families, same required
    # gain), so the built circuit lands closer still, and let verification judge again.
    for r in rank(items, rank_by)[:RETUNE]:
        p = r.pick
        if not r.verdict.nominal.starts:
            continue
        pull = math.log(r.verdict.nominal.freq_hz) - p.arms.ln_f0
        op = p.op
        arms = retune_arms(spec, catalog, p.arms, pull, (math.exp(op.ln_r_min), math.exp(op.ln_r_max)))
        if arms is not None:
            items.append(verified(dataclasses.replace(p, arms=arms)))
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
