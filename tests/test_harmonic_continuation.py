"""How harmonic balance (partpick/physics/harmonic.py) is started and stopped, checked
on the limiter surface's reference network (partpick/circuits/limiter_surface.py),
where thousands of solutions are chained, each starting from the last:

- a continuation answers as a cold start does: every warm-started point of a table row
  equals the solution found from the describing-function start at the same point (the
  same root, to the Newton tolerance), and uses no more harmonics than a cold start may
  (a chain once climbed one doubling per point, to 191 harmonics where a start from
  nothing stops at 23);
- a start that falls into the trivial root (the fundamental to zero, the residual with
  it) is given up within a few damped steps, not followed to 1e-20 V;
- a solution that needs more harmonics continues from the one it has.

The reference against which the answers are judged is the solver's own cold start
(Newton from the describing-function amplitude: Gelb and Vander Velde, 1968); its
agreement with ngspice is tests/test_ngspice_agreement.py's and
tests/test_ngspice_junctions.py's.
"""

from __future__ import annotations

import collections
import math

import pytest

from partpick.circuits import CONTROLS, TOPOLOGIES
from partpick.circuits.limiter_surface import R_GRID, X_GRID, _reference_balance
from partpick.physics import harmonic

TOPO = TOPOLOGIES["wien-bridge"]
CTL = CONTROLS["diode-limiter"]


def _part(demo_catalog, pid):
    return next(lim for lim in demo_catalog.limiters if lim.id == pid)


@pytest.fixture
def newton_steps(monkeypatch):
    """Count the Newton systems harmonic balance builds (one per step), by the number
    of odd harmonics solved for."""
    count = collections.Counter()
    for cls in (harmonic._Balance, harmonic._SeriesBalance):
        original = cls.system

        def counted(self, vk, w, _original=original):
            count[self.ks.size] += 1
            return _original(self, vk, w)

        monkeypatch.setattr(cls, "system", counted)
    return count


@pytest.mark.parametrize("pid, f_hz, rg, row", [
    ("z-pair-3v3", 100e3, 1e3, 12),    # a Zener pair: the middle node's even harmonics too
    ("led-red", 30e3, 10e3, 0),         # no series resistor: the hardest clipping of the table
])
def test_a_continuation_answers_as_a_cold_start(demo_catalog, pid, f_hz, rg, row):
    lim = _part(demo_catalog, pid)
    prev, compared = None, 0
    for x in X_GRID:
        if x * R_GRID[row] >= 1.0:
            break
        warm = _reference_balance(TOPO, lim, R_GRID[row] * rg, x, CTL, f_hz, prev, rg)
        if warm is not None and prev is not None:
            # the table's own ladder: 11 harmonics, doubled once
            assert warm.harmonics <= 23, (x, warm.harmonics)
            cold = _reference_balance(TOPO, lim, R_GRID[row] * rg, x, CTL, f_hz, None, rg)
            if cold is not None and cold.harmonics == warm.harmonics:
                assert math.isclose(warm.osc_peak_v, cold.osc_peak_v, rel_tol=1e-6), x
                assert math.isclose(warm.osc_thd, cold.osc_thd, rel_tol=1e-4), x
                assert math.isclose(warm.freq_hz, cold.freq_hz, rel_tol=1e-8), x
                compared += 1
        prev = warm
    assert compared >= 5


def test_a_start_falling_to_the_trivial_root_is_given_up_early(demo_catalog, newton_steps):
    # a red LED pair at 30 kHz asked for a conductance its junction capacitance swamps:
    # Newton from the describing-function amplitude falls to the trivial root (the
    # fundamental to a fifth per damped step); it once took 34 steps to reach 1e-21 V
    lim = _part(demo_catalog, "led-red")
    assert _reference_balance(TOPO, lim, 0.0, X_GRID[0], CTL, 30e3, None, 1e4) is None
    assert sum(newton_steps.values()) <= 12, newton_steps


@pytest.mark.parametrize("pid, most", [("d-si-signal", 9), ("led-red", 11)])
def test_more_harmonics_continue_from_the_solution_found(demo_catalog, newton_steps, pid, most):
    # a pair clipped hard (no series resistor, the largest gain excess of the table): 11
    # harmonics leave a tail, so the point is solved again with 23, starting from the
    # 11-harmonic solution (steps at 23 harmonics, counting the last check and the
    # frequency-per-capacitance system: 7 and 8; solved again from the describing-
    # function start they were 11 and 16)
    lim = _part(demo_catalog, pid)
    hb = _reference_balance(TOPO, lim, 0.0, X_GRID[-1], CTL, 30e3, None, 1e4)
    assert hb is not None and hb.harmonics == 23
    assert 0 < newton_steps[12] <= most, newton_steps
    assert 0 < hb.osc_thd < 0.5
