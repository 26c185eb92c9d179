"""Bounds on the work one command does, from the bad-input fuzz run's hangs and memory
blow-ups (benchmarks/bench_fuzz.py): transient runs per command, the arm-set window of a
very wide frequency tolerance, the JFET rule's op-amps, and a vanishing series
resistance in the junction physics."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

import partpick.pipeline as pipeline
import partpick.points as points
from partpick.inputs import load_inputs
from partpick.physics.junction import Junction
from tests.conftest import CATALOGS, SPECS

COVERAGE = Path(__file__).parent / "data" / "coverage"


def test_a_vanishing_series_resistance_is_the_shockley_equation():
    """I = Is (exp(V / (n Vt)) - 1), the Shockley diode equation (any device text, e.g.
    Sedra and Smith, Microelectronic Circuits, ch. 4): an Rs of 1e-300 ohm drops
    nothing (it reached the Wright-omega form as a math domain error)."""
    v = np.linspace(-0.5, 0.8, 27)
    j = Junction(1e-14, 1.8, 1e-300, 0.025852)
    np.testing.assert_allclose(j.current(v), 1e-14 * np.expm1(v / (1.8 * 0.025852)), rtol=1e-12)
    # and a real Rs still takes its drop: at 10 mA through 5 ohm the terminal voltage is
    # 50 mV above the bare junction's (the junction's own voltage from the same equation)
    jr = Junction(1e-14, 1.8, 5.0, 0.025852)
    vj = 1.8 * 0.025852 * math.log1p(10e-3 / 1e-14)
    assert float(jr.current(np.array([vj + 0.05]))[0]) == pytest.approx(10e-3, rel=1e-9)


def test_the_linear_peak_is_the_full_power_bandwidth_relation():
    """Full-power bandwidth: a sine of peak V at f needs a slew rate of 2 pi f V (op-amp
    handbooks, e.g. Jung, Op Amp Applications Handbook, 1.5; from memory: 0.5 V/us
    gives a 10 V peak up to 7.96 kHz). The search and the JFET rule take the share of it
    the verification counts as linear (SLEW_SHARE); 1 Vrms at 50 kHz (0.444 V/us) is out
    of a 0.5 V/us op-amp's linear range, at 1 kHz it is in."""
    from partpick.physics.opamp import SLEW_SHARE, linear_peak_v

    class Op:
        slew_v_per_s = 0.5e6   # 0.5 V/us

    assert linear_peak_v(Op, 7.958e3) / SLEW_SHARE == pytest.approx(10.0, rel=1e-3)
    assert linear_peak_v(Op, 50e3) < math.sqrt(2) < linear_peak_v(Op, 1e3)


def test_candidates_needing_transient_runs_are_skipped_once_the_budget_is_spent(monkeypatch):
    """ord-027 (25 Hz, 680 mVrms into 220 ohm from 3.3 V): the cheapest candidate drives
    the load straight from a small op-amp, whose current limit needs transient runs at
    every point; with no transient run allowed it is skipped (and said so), and the
    follower that passes is still found, verified by harmonic balance throughout."""
    spec, cat, stock = load_inputs(COVERAGE / "ord-027.yaml", (str(CATALOGS),))
    monkeypatch.setattr(pipeline, "MAX_TRANSIENT", 0)
    d = pipeline.design(spec, cat, stock=stock, results=1, rank_by=("cost",), samples=2000)
    best = d.ranked[0]
    assert best.verdict.passed
    assert all(p.method == "harmonic balance" for p in best.verdict.corners.values())
    assert any("candidates not verified: they needed transient runs" in x for x in d.notes), d.notes


def test_a_candidate_spends_transient_runs_only_when_the_budget_affords_all_it_needs(monkeypatch):
    """ord-027 again: its cheapest candidate needs a transient run at each of its five
    operating points. With one run allowed it spends none and is skipped (it used to
    spend the one and be skipped at its second point, leaving nothing for a candidate the
    one run would have verified), in this process and with the candidates verified ahead
    in helper processes, which spend the budget in each candidate's turn; with five
    allowed it is verified by its five runs (and fails: the follower still passes)."""
    from partpick.physics import transient

    runs = []
    real = transient.simulate
    monkeypatch.setattr(transient, "simulate", lambda *a, **k: runs.append(1) or real(*a, **k))
    spec, cat, stock = load_inputs(COVERAGE / "ord-027.yaml", (str(CATALOGS),))
    designs = {}
    for budget, workers in ((1, "1"), (1, "2"), (5, "1")):
        monkeypatch.setattr(pipeline, "MAX_TRANSIENT", budget)
        monkeypatch.setenv("PARTPICK_WORKERS", workers)
        points._POINTS.clear()   # (predictions an earlier run made would need no run)
        runs.clear()
        designs[budget, workers] = d = pipeline.design(spec, cat, stock=stock, results=1, rank_by=("cost",),
                                                       samples=2000)
        assert d.ranked[0].verdict.passed
        if workers == "1":
            assert len(runs) == (0 if budget == 1 else 5)
    d, ahead, five = designs[1, "1"], designs[1, "2"], designs[5, "1"]
    assert any("more than were left of the 1 such runs a design allows" in x for x in d.notes), d.notes
    # (after #1, -n 1 verifies towards the top ten as -n 10 does: pipeline._goals; on 6b2e0b5,
    # before it, 1 and 2)
    assert (d.verified, five.verified) == (4, 9)
    # (with five runs the cheapest spends them all, asserted above; candidates verified after #1,
    # towards the top ten, may then be skipped for want of runs, so five's notes may say so too)
    assert [(r.bom, r.cost) for r in ahead.ranked] == [(r.bom, r.cost) for r in d.ranked]
    assert (ahead.notes, ahead.verified) == (d.notes, d.verified)


def test_a_refusal_analysed_over_processes_is_the_one_analysed_here(monkeypatch):
    """The refusal's independent re-searches run over forked processes
    (partpick/forked.py); each is a pure function of its spec, so the message is the
    same word for word as with everything in one process."""
    from dataclasses import replace

    from partpick.errors import InfeasibleError

    spec, cat, stock = load_inputs(SPECS / "seismic-cal-20hz.yaml", (str(CATALOGS),))
    tight = replace(spec, max_thd_frac=0.001, amplitude_control="diode")
    messages = []
    for n in ("1", "2"):
        monkeypatch.setenv("PARTPICK_WORKERS", n)
        with pytest.raises(InfeasibleError) as exc:
            pipeline.design(tight, cat, stock=stock, samples=2000)
        messages.append(exc.value.message)
    assert messages[0] == messages[1]
    assert "distortion.max_thd binds" in messages[0]


def test_a_very_wide_frequency_tolerance_searches_a_bounded_window():
    """A +/-20 % tolerance designs on arm sets within +/-5 % of the target (a +/-49 %
    window of 0.1 % resistors held millions of arm sets, over 2 GB), and says so."""
    spec, cat, stock = load_inputs(SPECS / "lvdt-exciter.yaml", (str(CATALOGS),))
    from dataclasses import replace

    wide = replace(spec, frequency=replace(spec.frequency, tolerance_frac=0.20))
    d = pipeline.design(wide, cat, stock=stock, results=1, samples=2000)
    assert d.ranked[0].verdict.passed
    assert abs(d.ranked[0].freq_error) < 0.05 + 0.01
    assert any("arm sets searched within +/-5% of the target frequency" in x for x in d.notes), d.notes
