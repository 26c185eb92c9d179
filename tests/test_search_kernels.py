"""The search's array kernels and its candidate pool against plain references.

- ``first_of_groups`` (the best row of each configuration in linear time) against
  numpy's ``lexsort`` (a stable sort by the same keys, the first row of each group);
- ``best_rows`` (the best two amplitude-side rows of each K bin, every stage kind at
  once) against a plain loop over each group and bin;
- ``Pool.peek`` (the verification's look-ahead) against the pool without it: the
  candidates next() gives and the figures rest() reports are the same with or without
  looks in between;
- the yield bound that spares the search's full scoring of rows no candidate can come
  from, against the scoring of every row: the pool's candidates are the same, in the
  same order.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, replace

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from partpick.search.candidates import YIELD_STEP, Candidate
from partpick.search.kernels import best_rows, cheapest_of_groups, first_of_groups
from partpick.search.pool import Pool


@given(st.integers(0, 2**31 - 1), st.integers(1, 400), st.integers(1, 40))
def testfirst_of_groups_is_the_first_row_of_each_group_of_a_stable_lexsort(seed, n, groups):
    rng = np.random.default_rng(seed)
    g = rng.integers(0, groups, n) * 3          # (sparse group numbers, as configurations are)
    # few distinct values, so that ties on the first keys are common; NaN as the largest
    k1 = rng.integers(0, 3, n).astype(float)
    k2 = rng.choice([0.5, 1.25, 2.0], n)
    k3 = rng.choice([0.0, 0.1, np.nan, 0.3], n)
    order = np.lexsort((np.where(np.isnan(k3), np.inf, k3), k2, k1, g))
    want = order[np.r_[True, g[order][1:] != g[order][:-1]]]
    assert first_of_groups(g, (k1, k2, k3)).tolist() == want.tolist()


def _best_rows_loop(bins, score, keep=2):
    out = []
    for line in score:
        chosen = []
        for b in np.unique(bins):
            rows = [i for i in np.flatnonzero(bins == b) if np.isfinite(line[i])]
            rows.sort(key=lambda i: (-line[i], i))        # best first; of equal ones, the first
            chosen += rows[:keep]
        out.append(sorted(chosen))
    return out


@given(st.integers(0, 2**31 - 1), st.integers(0, 120), st.integers(1, 5))
def test_best_rows_of_every_group_at_once_equal_a_loop_per_group_and_bin(seed, n, groups):
    rng = np.random.default_rng(seed)
    bins = np.sort(rng.integers(0, 12, n))
    score = rng.choice([-np.inf, np.inf, np.nan, 0.5, 1.0, 1.5, 2.0], (groups, n))
    got = best_rows(bins, score)
    assert [np.flatnonzero(m).tolist() for m in got] == _best_rows_loop(bins, score)


@dataclass
class _Batch:
    """Rows with the figures Pool reads (a stand-in for search.candidates.Batch)."""

    y: np.ndarray
    cost: np.ndarray
    err: np.ndarray
    thd: np.ndarray

    def __len__(self):
        return self.y.size

    def keys(self):
        return np.floor((1.0 - self.y) / YIELD_STEP), self.cost, np.abs(self.err)

    def kinds(self):
        return [("none", "", (("opamp", f"op{i % 3}"),)) for i in range(len(self))]

    def candidate(self, i):
        return Candidate(("row", id(self), i), {"r": float(i)}, {}, {"opamp": f"op{i % 3}"},
                         yield_est=float(self.y[i]), cost=float(self.cost[i]), err=float(self.err[i]),
                         thd=float(self.thd[i]))


def _simulate(c):
    # a deterministic re-placement: some candidates come out better, some worse
    shift = ((hash(c.signature) % 7) - 3) * 0.004
    return replace(c, yield_est=min(1.0, max(0.0, c.yield_est + shift)), simulated=True)


@given(st.integers(0, 2**31 - 1), st.booleans())
def test_a_look_ahead_leaves_the_pool_as_it_was(seed, cost_first):
    rng = np.random.default_rng(seed)
    batches = [_Batch(rng.uniform(0.9, 1.0, n), rng.choice([1.0, 1.5, 2.0, 3.0], n), rng.normal(0, 0.01, n),
                      rng.uniform(0, 0.02, n)) for n in rng.integers(1, 30, 3)]

    def walk(peeks: bool):
        pool = Pool(batches, cost_first, demoted=True)
        seen = []
        while True:
            if peeks:
                pool.peek(_simulate, int(rng.integers(1, 4)), lambda c: c.signature[2] % 2 == 0, 8)
            rest = [x.tolist() for x in pool.rest()]
            c = pool.next(_simulate)
            if c is None:
                return seen
            seen.append((c.signature, c.yield_est, sorted(map(sorted, rest))))
            if c.signature[2] % 5 < 2:     # some fail verification: their kinds wait behind the others
                pool.failed(c, 0.0)

    assert walk(True) == walk(False)
    # nothing is lost or taken twice, whatever the failures
    everything = sorted((id(b), i) for b in batches for i in range(len(b)))
    assert sorted((x[0][1], x[0][2]) for x in walk(False)) == everything


def test_a_kind_that_keeps_failing_waits_behind_the_others():
    # rows 0, 3, 6 are op0's, 1, 4, 7 op1's (see _Batch.kinds), all estimated at 100 %,
    # in cost order 0, 1, 2, ...: op0's first two fail, so op1's and op2's come before
    # op0's third
    b = _Batch(np.ones(9), np.arange(9.0), np.zeros(9), np.zeros(9))
    taken = []
    pool = Pool([b], demoted=True)
    for _ in range(4):
        c = pool.next(lambda c: c)
        taken.append(c.signature[2])
        if c.parts["opamp"] == "op0":
            pool.failed(c, 0.99)
    # 0 (op0 fails), 1, 2, 3 (op0 fails: two, demoted), then op1's and op2's before op0's 6
    rest = []
    while (c := pool.next(lambda c: c)) is not None:
        rest.append(c.signature[2])
    assert taken == [0, 1, 2, 3]
    assert rest == [4, 5, 7, 8, 6]


def test_a_failure_its_estimate_foresaw_is_no_news():
    # estimated at 90 % against a 95 % limit: verified on the chance, its failures do not
    # demote its kind
    b = _Batch(np.full(9, 0.9), np.arange(9.0), np.zeros(9), np.zeros(9))
    assert _failing_all(Pool([b], demoted=True), 0.95) == list(range(9))


def _failing_all(pool, promised: float) -> list[int]:
    """The rows a pool gives when every candidate fails verification (``promised``: the
    spec's yield limit), in order."""
    taken = []
    while (c := pool.next(lambda c: c)) is not None:
        taken.append(c.signature[2])
        pool.failed(c, promised)
    return taken


@given(st.integers(0, 2**31 - 1), st.integers(0, 3000), st.booleans())
def test_factorize_equals_numpys_unique_with_inverse(seed, n, with_zero):
    """prices.factorize (the price lookup of every arm set's parts) against
    numpy.unique(..., return_inverse=True), on E96-like values, and with a 0 (an empty
    slot) that takes np.unique's own path."""
    from partpick.search.prices import factorize

    rng = np.random.default_rng(seed)
    values = rng.choice(np.round(np.geomspace(10.0, 1e6, 481), 3), n)
    if with_zero and n:
        values[0] = 0.0
    want_u, want_inv = np.unique(values, return_inverse=True)
    got_u, got_inv = factorize(values)
    assert got_u.tolist() == want_u.tolist()
    assert got_inv.tolist() == want_inv.tolist()


@given(st.integers(0, 2**31 - 1), st.integers(1, 3000))
def test_range_minimum_is_the_first_smallest_of_each_range(seed, n):
    """tables.RangeMin (blocks of 32 with running minima, a sparse table over the
    blocks) against a scan of each range: the position of the first smallest cost, -1
    for an empty range; ranges within a block, over a few blocks and over the whole."""
    from partpick.search.tables import RangeMin

    rng = np.random.default_rng(seed)
    cost = rng.integers(0, 20, n).astype(float)      # (ties are common)
    rm = RangeMin(cost)
    for span in (4, 40, 100, n):
        a = rng.integers(0, n, 100)
        z = np.minimum(a + rng.integers(0, span + 1, 100), n)
        want = [a_ + int(np.argmin(cost[a_:z_])) if z_ > a_ else -1 for a_, z_ in zip(a, z)]
        assert rm.argmin(a, z).tolist() == want


def test_an_order_that_is_not_demoted_keeps_its_own():
    # the plain orders count the failures (for a demoted order after them) and keep the
    # search's order: a kind's third candidate is often the cheapest that passes
    b = _Batch(np.ones(9), np.arange(9.0), np.zeros(9), np.zeros(9))
    failures: dict = {}
    assert _failing_all(Pool([b], failures=failures), 0.99) == list(range(9))
    assert sorted(failures.values()) == [3, 3, 3]
    # ... and a demoted order made after them starts from those counts: op0 failed more
    failures[b.candidate(0).kind()] += 2
    assert Pool([b], failures=failures, demoted=True).next(lambda c: c).signature[2] == 1


def test_a_batch_names_each_rows_kind_as_its_candidate_does(demo_catalog):
    # Batch.kinds reads the kinds off the rows' groups without making the candidates; the
    # pool counts failures by Candidate.kind: the two must agree row by row
    from partpick.pipeline import _searcher
    from partpick.search.problem import build_problem
    from partpick.spec import Spec
    from tests.conftest import SPECS

    spec = Spec.from_yaml(SPECS / "audio-tone-1k.yaml")
    problem = build_problem(spec, demo_catalog)
    searcher, _ = _searcher(spec, demo_catalog, None, problem)
    # (the first limiter, gain family and level with rows the pool may verify)
    b = next(b for lim in problem.limiters for gf in problem.r_families for r in searcher.levels(gf)
             if (b := searcher.configurations(lim, gf, r)) is not None and len(b) > 10)
    assert b.kinds() == [b.candidate(i).kind() for i in range(len(b))]
    assert len(set(b.kinds())) > 1


def test_a_dearer_candidate_tied_on_frequency_error_is_not_verified(demo_catalog):
    """Reference: partpick.rank's tiers (a frequency error within the resolution, half the
    builds' spread, is a tie; cost then decides). A candidate whose best case, landing on
    the target, still ties the n-th on frequency error and costs more cannot enter the top
    n: it is skipped; where the n-th is off target by more than any resolution, landing on
    target would beat it, so it is verified."""
    from partpick.pipeline import design
    from partpick.spec import Spec
    from tests.conftest import ROOT

    keys = ("yield", "frequency_error", "cost")
    d = design(Spec.from_yaml(ROOT / "specs" / "seismic-cal-20hz.yaml"), demo_catalog, results=5, nearest=0)
    rows = [r for r in d.ranked if r.verdict.passed]
    assert len(rows) >= 3

    def enters(freq_error: float, cost: float) -> bool:
        verified = [replace(r, freq_error=freq_error) for r in rows]
        nth = sorted(verified, key=lambda r: r.cost)[2]   # (all tie on yield and frequency: cost decides)
        c = Candidate(("x",), {}, {}, {}, yield_est=1.0, cost=nth.cost + cost, freq_sigma=0.002)
        return Pool([]).may_enter(verified, c, 3, keys)

    assert not enters(0.0, +0.5)      # on target, all of them: the dearer one ties and loses on cost
    assert enters(0.05, +0.5)         # 5 % off target: the dearer one on target would rank above
    assert enters(0.0, -0.5)          # cheaper: it may enter either way


@given(st.integers(0, 2**31 - 1), st.booleans())
def test_a_skipped_candidate_is_never_simulated_and_the_rest_keep_their_order(seed, cost_first):
    """Reference: the same pool without the predicate, its candidates filtered after the
    fact (what the design loop did before: simulate, then pass over)."""
    rng = np.random.default_rng(seed)
    batches = [_Batch(rng.uniform(0.9, 1.0, n), rng.choice([1.0, 1.5, 2.0, 3.0], n), rng.normal(0, 0.01, n),
                      rng.uniform(0, 0.02, n)) for n in rng.integers(1, 30, 3)]
    left_out = lambda c: c.signature[2] % 3 == 0   # noqa: E731
    simulated = []

    def counted(c):
        simulated.append(c.signature)
        return _simulate(c)

    def walk(pool, sim):
        out = []
        while (c := pool.next(sim)) is not None:
            out.append(c.signature)
        return out

    plain = [s for s in walk(Pool(batches, cost_first), _simulate) if not left_out(Candidate(s, {}, {}, {}))]
    pool = Pool(batches, cost_first)
    pool.skip = left_out
    assert walk(pool, counted) == plain
    assert not any(left_out(Candidate(s, {}, {}, {})) for s in simulated)


@given(st.lists(st.lists(st.integers(0, 200), min_size=0, max_size=60), min_size=1, max_size=6),
       st.sampled_from(["resistors", "capacitors"]))
def test_price_book_prices_every_value_as_the_pricer_does(demo_catalog, calls, kind):
    # PriceBook keeps each family's values priced so far and looks a call's values up in
    # them; each price must be the pricer's own for that part (partpick.pricing, which
    # bom_cost counts a BOM with), over calls that repeat values, add new ones, or are empty
    from partpick.pricing import Pricer
    from partpick.search.prices import PriceBook

    pricer = Pricer(demo_catalog)
    book = PriceBook(pricer, demo_catalog)
    fam = demo_catalog.of_kind(kind)[0]
    series = np.array(fam.values())
    for picks in calls:
        values = series[np.array(picks, int) % series.size].reshape(-1, 1) if picks else np.zeros((0, 1))
        got = book.units(fam.id, values)
        assert got.shape == values.shape
        assert got.ravel().tolist() == [pricer.unit(fam.id, float(v)) for v in values.ravel()]
        assert book.lines(fam.id, values).ravel().tolist() == [pricer.line(fam.id, float(v)) for v in values.ravel()]


def test_stage_tables_from_the_cache_are_the_tables_made(demo_catalog, tmp_path, monkeypatch):
    # a stage table that does not depend on the load is made once per machine (the user
    # cache, keyed by the values) and read back as indices: read, it must be the table
    # made, to the last bit; and every entry the handbook expression of its pair: a
    # non-inverting stage's gain 1 + Rb/Ra, a divider's Rb/(Ra + Rb); every pair of the
    # series' values from 1 kohm to 1 Mohm within the stage's ratio range, once each
    import itertools

    from partpick.search.tables import STAGE_RATIO, stage_table

    monkeypatch.setenv("PARTPICK_CACHE", str(tmp_path))
    fam = demo_catalog.find("resistors", "tk-5")
    vals = [v for v in fam.values() if 1e3 <= v <= 1e6]
    for kind, expr in (("gain", lambda a, b: 1 + b / a), ("buffered-attenuator", lambda a, b: b / (a + b))):
        made = stage_table(kind, fam, 0j)
        assert list((tmp_path / "stage-table").glob("*.npz")), "not stored"
        read = stage_table(kind, fam, 0j)
        for x, y in zip(made, read):
            assert x.dtype == y.dtype and x.tobytes() == y.tobytes()
        gains, ra, rb = read
        assert np.all(np.diff(gains) >= 0)
        lo, hi = STAGE_RATIO[kind]
        want = sorted((a, b) for a, b in itertools.product(vals, vals) if lo <= expr(a, b) <= hi)
        assert sorted(zip(ra.tolist(), rb.tolist())) == want
        assert gains.tolist() == [expr(a, b) for a, b in zip(ra.tolist(), rb.tolist())]


def test_a_damaged_stage_table_entry_is_made_again(demo_catalog, tmp_path, monkeypatch):
    # the cache is only an optimisation: an entry whose indices point past the family's
    # values (damaged, or written for other values) gives the table made afresh, not an error
    from partpick.search.tables import stage_table

    monkeypatch.setenv("PARTPICK_CACHE", str(tmp_path))
    fam = demo_catalog.find("resistors", "tk-5")
    made = stage_table("gain", fam, 0j)
    (entry,) = (tmp_path / "stage-table").glob("*.npz")
    np.savez(entry, a=np.array([60000], np.uint16), b=np.array([0], np.uint16))
    again = stage_table("gain", fam, 0j)
    for x, y in zip(made, again):
        assert x.tobytes() == y.tobytes()


@given(st.integers(0, 2**31 - 1), st.integers(1, 400))
def test_a_stage_pick_in_the_wanted_gains_order_is_the_pick_without_it(seed, n):
    """StageTable.pick given the wanted gains' ascending order (non-finite as 0, as the
    search passes it) answers as without it, and both against a scan: the pair with Ra
    + Rb nearest STAGE_LEVEL (the first such) among those within STAGE_RES of the wanted
    gain, else the nearest gain."""
    from partpick.search.tables import STAGE_LEVEL, STAGE_RES

    table = _divider_table()
    rng = np.random.default_rng(seed)
    want = rng.uniform(table.ln_g[0] - 0.1, table.ln_g[-1] + 0.1, n)
    want[rng.random(n) < 0.05] = np.nan
    order = np.argsort(np.where(np.isfinite(want), want, 0.0), kind="stable")
    got = table.pick(want, order)
    assert got.tolist() == table.pick(want).tolist()
    level = np.abs(np.log((table.ra + table.rb) / STAGE_LEVEL))
    for w, j in zip(np.where(np.isfinite(want), want, 0.0)[:40], got[:40]):
        close = np.flatnonzero(np.abs(table.ln_g - w) <= STAGE_RES)
        if close.size:
            assert level[j] == level[close].min() and abs(table.ln_g[j] - w) <= STAGE_RES
        else:
            assert abs(table.ln_g[j] - w) == np.abs(table.ln_g - w).min()


@functools.cache
def _divider_table():
    """The buffered attenuator's stage table of the demo tk-5 family (made once)."""
    from partpick.catalog import load_catalog
    from partpick.search.tables import StageTable
    from tests.conftest import CATALOGS

    return StageTable("buffered-attenuator", load_catalog(CATALOGS).find("resistors", "tk-5"), 0j)


@given(st.integers(0, 2**31 - 1), st.integers(1, 400), st.integers(1, 12))
def test_the_cheapest_of_groups_by_a_bound_is_the_first_of_groups_by_the_whole_value(seed, n, groups):
    """kernels.cheapest_of_groups (the whole cost computed only for rows whose bound, the
    arm set's cost, is within the slack of their group's cheapest) gives the rows
    first_of_groups gives with the whole cost of every row (ties common: values in cents),
    and computes the whole cost of fewer rows where the bounds spread."""
    rng = np.random.default_rng(seed)
    g = rng.integers(0, groups, n)
    bound = rng.integers(0, 60, n) / 100.0
    slack = 0.15
    extra = rng.integers(0, 16, n) / 100.0                    # what the other slots add, at most the slack
    whole = bound + extra + (g % 3) * 0.5                     # plus a constant of the group
    tie = rng.integers(0, 3, n).astype(float)
    asked = []

    def exact(at):
        asked.append(at.size)
        return whole[at]

    got = cheapest_of_groups(g, bound, slack, exact, tie)
    assert sorted(got.tolist()) == sorted(first_of_groups(g, (whole, tie)).tolist())
    assert asked[0] <= n


@given(st.integers(0, 2**31 - 1), st.integers(1, 200))
def test_a_stage_pair_sharing_a_value_is_the_nearest_such_pair_within_resolution(seed, n):
    """StageTable.sharing (a ranking by cost looks for a stage pair that reuses Rg's value,
    one BOM line less): against a scan, the pair with Ra or Rb equal to the value whose
    gain is nearest the wanted one, where it lies within STAGE_RES; -1 elsewhere."""
    from partpick.search.tables import STAGE_RES

    table = _divider_table()
    rng = np.random.default_rng(seed)
    value = float(rng.choice(np.unique(table.rb)))
    want = rng.uniform(table.ln_g[0] - 0.1, table.ln_g[-1] + 0.1, n)
    got = table.sharing(want, value)
    holds = np.flatnonzero((table.ra == value) | (table.rb == value))
    for w, j in zip(want, got):
        d = np.abs(table.ln_g[holds] - w)
        if d.min() <= STAGE_RES:
            assert j in holds and abs(table.ln_g[j] - w) == d.min()
        else:
            assert j == -1


@pytest.mark.parametrize("name", ["seismic-cal-20hz.yaml", "audio-tone-1k.yaml", "resolver-exciter.yaml"])
def test_the_rows_the_yield_bound_leaves_unscored_change_no_candidate(demo_catalog, monkeypatch, name):
    # Searcher._bounded bounds each row's estimated yield (startup, frequency and amplitude
    # shares, each at its most) before the limiter's figures and the drive are worked out,
    # and _rows drops what is under Searcher.least_y: the pool built from those batches
    # must hold the same candidates, in the same order, as the pool built from every row
    # scored in full (least_y below any yield)
    from partpick.pipeline import _searcher
    from partpick.search.enumerate import Searcher
    from partpick.search.pool import hopeless
    from partpick.search.problem import build_problem
    from partpick.spec import Spec
    from tests.conftest import SPECS

    spec = Spec.from_yaml(SPECS / name)
    problem = build_problem(spec, demo_catalog)
    searcher, _ = _searcher(spec, demo_catalog, None, problem)
    combos = [(lim, gf, r) for lim in problem.limiters for gf in problem.r_families for r in searcher.levels(gf)]
    scored = []   # rows scored in full, per call
    rows = Searcher._rows
    monkeypatch.setattr(Searcher, "_rows", lambda self, *a: scored.append(a[4].size) or rows(self, *a))
    bounded = [searcher.configurations(*c) for c in combos]
    n_bounded = sum(scored)
    scored.clear()
    monkeypatch.setattr(searcher, "least_y", -1.0)
    full = [searcher.configurations(*c) for c in combos]
    assert n_bounded < 0.7 * sum(scored)   # (the bound leaves rows out: else this proves nothing)
    floor = hopeless(spec.yield_min_frac)
    pools = [Pool([b for b in batches if b is not None], hopeless=floor) for batches in (bounded, full)]
    assert pools[0].size == pools[1].size > 0
    for name_ in ("keys", "figures"):
        for x, z in zip(getattr(pools[0], name_), getattr(pools[1], name_)):
            assert np.array_equal(x, z)
    made = [[pool.batches[pool.src[i]].candidate(pool.row[i]) for i in range(pool.size)] for pool in pools]
    assert [(c.signature, c.values, c.yield_est, c.cost) for c in made[0]] == \
        [(c.signature, c.values, c.yield_est, c.cost) for c in made[1]]


def test_the_amplitude_slope_alone_is_the_full_evaluations(demo_catalog):
    # Planner.amplitude_slope gives evaluate's dln_vo without the rest, for the bound above:
    # the same numbers, NaN where evaluate has NaN
    from partpick.pipeline import _searcher
    from partpick.search.problem import build_problem
    from partpick.spec import Spec
    from tests.conftest import SPECS

    spec = Spec.from_yaml(SPECS / "audio-tone-1k.yaml")
    problem = build_problem(spec, demo_catalog)
    searcher, _ = _searcher(spec, demo_catalog, None, problem)
    topo = problem.topology
    checked = 0
    for lim in problem.limiters:
        gf = problem.r_families[0]
        amp = searcher._amp_side(lim, gf, searcher.levels(gf)[0])
        rng = np.random.default_rng(7)
        k = np.exp(np.log(3.0) + rng.uniform(-0.02, 0.02, amp["m"].size))   # near the rows' own K
        g, dg = topo.port_conductance(amp["r_gnd"], amp["r_fb"], k), topo.port_conductance_slope(amp["r_gnd"],
                                                                                                 amp["r_fb"], k)
        m = np.log(amp["gain"] / k)
        full = amp["planner"].evaluate(g, dg, topo.osc_per_port_k(k), m, amp["ird"])["dln_vo"]
        alone = amp["planner"].amplitude_slope(g, dg, amp["ird"])
        assert np.array_equal(full, alone, equal_nan=True)
        checked += int(np.isfinite(full).sum())
    assert checked > 100
