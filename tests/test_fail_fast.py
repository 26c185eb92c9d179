"""What keeps the slowest inputs of the fuzz run (benchmarks/bench_fuzz.py) inside their
time: a limiter part met for the first time, and refusals whose loosened runs could
verify candidates that have next to no chance.

- Harmonic balance's Newton step uses the slope of the very interpolant the residual
  evaluates (the segment's slope of a piecewise-linear table), so it converges
  quadratically, as Newton's method does with an exact Jacobian (Kelley, Iterative
  Methods for Linear and Nonlinear Equations, SIAM 1995, theorem 5.1.1); with the
  interpolated tabulated derivative it converged linearly, a tenth a step, on a 6 ohm
  Zener's knee.
- A part's missing tables are computed together, every row of every slice in one spread
  over the CPUs (limiter_surface.prepare), and exactly the slices the search will read:
  for a part the package does not ship tables of, one slice at the design's frequency,
  not the two around it.
- A Newton step reads the table once for its four waveforms (LimiterTable.sample) and
  adds the loop's own term to the Jacobian in place: the same numbers, to the last bit.
- A design run skips candidates whose estimated yield is under a tenth of the limit.
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from partpick.circuits import CONTROLS, TOPOLOGIES
from partpick.circuits import limiter_surface as ls
from partpick.physics import harmonic
from partpick.physics.junction import limiter_table
from partpick.search.pool import hopeless

SPECS = Path(__file__).resolve().parents[1] / "specs"

TOPO = TOPOLOGIES["wien-bridge"]
CTL = CONTROLS["diode-limiter"]


def _part(demo_catalog, pid):
    return next(lim for lim in demo_catalog.limiters if lim.id == pid)


@pytest.mark.parametrize("pid", ["z-pair-3v3", "d-si-signal"])
def test_the_slope_is_the_interpolants_derivative(demo_catalog, pid):
    # the derivative of numpy.interp's piecewise-linear interpolant, by central
    # differences inside each segment (exact there, up to rounding), and the end slopes
    # beyond the table, where current() extends it linearly
    table = limiter_table(_part(demo_catalog, pid), 0.0, 298.15)
    t = table.element if table.element is not None else table
    mid = 0.5 * (t.v_v[1:] + t.v_v[:-1])
    h = 1e-3 * np.diff(t.v_v)
    numeric = (t.current(mid + h) - t.current(mid - h)) / (2 * h)
    assert np.allclose(t.slope(mid), numeric, rtol=1e-6, atol=1e-15)
    beyond = np.array([t.v_v[0] - 1.0, t.v_v[-1] + 1.0])
    assert np.array_equal(t.slope(beyond), [t.g_s[0], t.g_s[-1]])
    if t.q_c is not None:
        numeric_c = (t.charge(mid + h) - t.charge(mid - h)) / (2 * h)
        assert np.allclose(t.charge_slope(mid), numeric_c, rtol=1e-6, atol=1e-24)


@pytest.mark.parametrize("pid", ["z-pair-3v3", "led-red"])
def test_one_lookup_gives_the_four_waveforms_bit_for_bit(demo_catalog, pid):
    # sample() against current(), slope(), charge() and charge_slope() (numpy.interp and
    # the segment slopes), inside the grid, on its points, at and beyond its ends
    table = limiter_table(_part(demo_catalog, pid), 0.0, 298.15)
    t = table.element if table.element is not None else table
    rng = np.random.default_rng(5)
    span = t.v_v[-1] - t.v_v[0]
    v = np.concatenate([rng.uniform(t.v_v[0] - 0.2 * span, t.v_v[-1] + 0.2 * span, 20_000), t.v_v])
    for got, want in zip(t.sample(v), (t.current(v), t.slope(v), t.charge(v), t.charge_slope(v))):
        assert np.array_equal(got, want)


def test_the_loops_term_added_in_place_is_the_block_added():
    from partpick.physics.hb_matrices import add_diagonal as _add_diagonal, cmul_block as _cmul_block

    rng = np.random.default_rng(8)
    m = rng.normal(size=(12, 12))
    c = rng.normal(size=3) + 1j * rng.normal(size=3)
    at = np.array([2, 6, 8])          # the re rows of harmonics 1, 3 and 4 of six
    full = np.zeros(6, dtype=complex)
    full[at // 2] = c
    want = m + _cmul_block(full)
    _add_diagonal(m, c, at)
    assert np.array_equal(m, want)


def test_newton_converges_quadratically_on_a_zener_knee(demo_catalog, monkeypatch):
    # one table row of the Zener pair (the middle node's even harmonics too), each point
    # warm-started from the last: once the residual is small, each step squares it
    # (a ratio of successive residuals far below the tenth it was)
    lim = _part(demo_catalog, "z-pair-3v3")
    histories: list[list[float]] = []
    original = harmonic._SeriesBalance.system

    def recorded(self, vk, w):
        out = original(self, vk, w)
        histories[-1].append(float(np.max(np.abs(out[0]))))
        return out

    original_solve = harmonic._Balance.solve

    def solve(self, *args, **kw):
        histories.append([])
        return original_solve(self, *args, **kw)

    monkeypatch.setattr(harmonic._SeriesBalance, "system", recorded)
    monkeypatch.setattr(harmonic._Balance, "solve", solve)
    prev, fast = None, 0
    for x in ls.X_GRID[8:16]:
        prev = ls._reference_balance(TOPO, lim, ls.R_GRID[12] * 1e3, x, CTL, 30e3, prev, 1e3)
        assert prev is not None and prev.converged
        res = histories[-1]
        ratios = [b / a for a, b in zip(res, res[1:]) if a > 0]
        # the last steps, from a residual under a thousandth of the first
        late = [r for a, r in zip(res, ratios) if a < 1e-3 * res[0]]
        fast += bool(late) and min(late) < 1e-3
    assert fast >= 6, histories[-8:]


def test_a_parts_missing_slices_are_computed_together(demo_catalog, monkeypatch):
    lim = _part(demo_catalog, "d-schottky")
    asked: list[list[tuple]] = []
    stored: dict = {}

    def many(jobs):
        asked.append([(f, rg) for _, _, _, f, rg in jobs])
        return [{"vo": np.full((ls.R_GRID.size, ls.X_GRID.size), float(i)), "thd": np.ones((1, 1)),
                 "pull": np.zeros((1, 1)), "a_df": np.ones((1, 1))} for i, _ in enumerate(jobs)]

    monkeypatch.setattr(ls, "_compute_many", many)
    monkeypatch.setattr(ls, "has_arrays", lambda kind, key: key in stored)
    monkeypatch.setattr(ls, "store_arrays", lambda kind, key, arrays: stored.__setitem__(key, arrays))
    # 50 kHz reads the 30 and 100 kHz slices; gain networks at 1 k, 2 k (between the 1 k
    # and 3.3 k levels: both) and 10 k read all three levels
    ls.prepare(TOPO, lim, CTL, 50e3, [1e3, 2e3, 10e3])
    assert sorted(asked[0]) == sorted((f, rg) for f in (30e3, 100e3) for rg in ls.LEVELS)
    # what is held is not computed again; below the lowest slice only that one is read
    ls.prepare(TOPO, lim, CTL, 50e3, [1e3])
    ls.prepare(TOPO, lim, CTL, 120.0, [1e3, 10e3])
    assert asked[1:] == [[(ls.F_SLICES[0], 1e3), (ls.F_SLICES[0], 1e4)]]
    # and the surface reads what was computed, without solving anything
    monkeypatch.setattr(ls, "compute", lambda *a, **k: pytest.fail("computed again"))
    ls.surface.cache_clear()
    try:
        got = ls.surface(TOPO, lim, CTL, 30e3, 3.3e3)
        assert np.all(got.vo == float(asked[0].index((30e3, 3.3e3))))
    finally:
        ls.surface.cache_clear()
        ls._FRESH.clear()


def test_a_part_not_shipped_is_tabulated_at_the_designs_frequency(demo_catalog, monkeypatch):
    # an edited part (its series resistance changed) has no shipped tables: at 50 kHz it
    # is solved at 50 kHz, three levels, not at 30 and 100 kHz (six); below the lowest
    # slice it reads that one, as a shipped part does; the shipped part as it is still
    # reads the slices around the frequency
    shipped = _part(demo_catalog, "d-schottky")
    edited = replace(shipped, rs_ohm=shipped.rs_ohm * 0.5)
    assert ls._shipped(TOPO, shipped) and not ls._shipped(TOPO, edited)
    asked: list[list[tuple]] = []
    stored: dict = {}

    def many(jobs):
        asked.append([(f, rg) for _, _, _, f, rg in jobs])
        return [{"vo": np.full((ls.R_GRID.size, ls.X_GRID.size), float(i + 1)), "thd": np.ones((1, 1)),
                 "pull": np.zeros((1, 1)), "a_df": np.ones((1, 1))} for i, _ in enumerate(jobs)]

    monkeypatch.setattr(ls, "_compute_many", many)
    monkeypatch.setattr(ls, "has_arrays", lambda kind, key: key in stored)
    monkeypatch.setattr(ls, "store_arrays", lambda kind, key, arrays: stored.__setitem__(key, arrays))
    ls.prepare(TOPO, edited, CTL, 50e3, [1e3, 2e3, 10e3])
    assert sorted(asked[0]) == [(50e3, rg) for rg in ls.LEVELS]
    ls.prepare(TOPO, edited, CTL, 120.0, [1e3, 10e3])
    assert asked[1] == [(ls.F_SLICES[0], 1e3), (ls.F_SLICES[0], 1e4)]
    assert ls._slices(TOPO, shipped, 50e3)[:2] == (30e3, 100e3)
    monkeypatch.setattr(ls, "compute", lambda *a, **k: pytest.fail("computed again"))
    ls.surface.cache_clear()
    ls.surface_at.cache_clear()
    try:
        got = ls.surface_at(TOPO, edited, CTL, 50e3, 3.3e3)    # the slice itself, no blend
        assert np.all(got.vo == float(asked[0].index((50e3, 3.3e3)) + 1))
    finally:
        ls.surface.cache_clear()
        ls.surface_at.cache_clear()
        ls._FRESH.clear()


def test_the_level_weights_are_the_planners(demo_catalog):
    # within AT_LEVEL of a level, that level alone; between two, both, in ln Rg
    assert ls._level_weights(1e3 * math.exp(0.04)) == {1e3: 1.0}
    w = ls._level_weights(2e3)
    assert set(w) == {1e3, 3.3e3} and math.isclose(sum(w.values()), 1.0)
    assert math.isclose(w[3.3e3], math.log(2) / math.log(3.3))
    assert ls._level_weights(50e3) == {10e3: 1.0}


def test_a_hopeless_estimate_is_a_tenth_of_the_limit_at_most():
    # a yield limit of 50 % (a refusal's loosened run) once verified, and first placed by
    # their Monte Carlo models, 2,000 rows estimated at next to nothing (an amplitude
    # tolerance of 1 ppm): 9 s. The usual margin still rules near a spec's own limit.
    assert hopeless(0.5) == pytest.approx(0.05)
    assert hopeless(0.95) == pytest.approx(0.87)
    assert hopeless(1e-6) == pytest.approx(1e-7)
