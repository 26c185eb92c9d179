"""The JFET amplitude control's physics against published facts and an independent
simulator.

- The channel's small-signal resistance r_DS = r_DS(on) / (1 - V_GS / V_P),
  r_DS(on) = 1 / (2 BETA |VTO|) (Siliconix application note AN105, "FETs as
  voltage-controlled resistors"; the same law in Horowitz and Hill, The Art of
  Electronics, 3rd ed., section 3.2.7, from memory).
- Feeding half the drain-source voltage back to the gate cancels the channel's V_DS^2
  term (same note): the current is then odd in V_DS and linear without LAMBDA, while the
  gate on a fixed voltage leaves an even (second-harmonic) term of BETA V_DS^2.
- The envelope equation: for the Wien bridge with an ideal amplifier of gain K the
  natural frequencies solve s^2 + w0 (3 - K) s + w0^2 = 0 (Sedra and Smith,
  Microelectronic Circuits, "the Wien-bridge oscillator"), so the envelope grows at
  sigma = w0 (K - 3) / 2; with a real op-amp the loop's sigma approaches it as the
  gain-bandwidth grows.
- ngspice, the independent simulator: its level-1 JFET's drain current over a grid of
  V_DS and V_GS equals partpick's law, and a peak detector driven by a sine settles to
  the hold voltage and ripple partpick's periodic solution finds.
"""

from __future__ import annotations

import math
import subprocess

import numpy as np
import pytest

from partpick.circuits import Conditions, build_loop, make_circuit
from partpick.physics.detector import Detector, hold_waveform
from partpick.physics.envelope import band_times, growth_rate
from partpick.physics.jfet import channel, channel_conductance, gate_junction, jfet_at
from partpick.physics.junction import junctions_at
from partpick.physics.linear import NO_BRANCH
from partpick.physics.ngspice import ngspice_available

needs_ngspice = pytest.mark.skipif(not ngspice_available(), reason="ngspice is not installed")


@pytest.fixture(scope="module")
def part(demo_catalog):
    return demo_catalog.find("jfets", "jf-n-gp")


@pytest.mark.parametrize("vgs", [0.0, -0.5, -1.0, -1.5, -1.9])
def test_channel_resistance_law(part, vgs):
    """r_DS = r_DS(on) / (1 - V_GS / V_P), the slope of the drain current at V_DS = 0
    (AN105)."""
    p = jfet_at(part, 298.15)
    r_on = 1 / (2 * p.beta * abs(p.vto_v))
    law = r_on / (1 - vgs / p.vto_v)
    h = 1e-7
    slope = (channel(p, h, vgs)[0] - channel(p, -h, vgs)[0]) / (2 * h)
    assert 1 / slope == pytest.approx(law, rel=1e-6)
    assert 1 / channel_conductance(p, vgs) == pytest.approx(law, rel=1e-12)
    assert p.r_on_ohm == pytest.approx(r_on, rel=1e-12)


def test_pinched_off_channel_conducts_nothing(part):
    p = jfet_at(part, 298.15)
    i, gds, gm = channel(p, np.array([-0.1, 0.1]), p.vto_v - 0.1)
    assert np.all(i == 0) and np.all(gds == 0) and np.all(gm == 0)


def test_half_drain_voltage_on_the_gate_cancels_the_square_term(part):
    """With V_GS = V_C / 2 + V_DS / 2 the current is odd in V_DS and, LAMBDA aside,
    exactly BETA (V_C - 2 VTO) V_DS; with the gate held at V_C / 2 its even part is
    -BETA V_DS^2 (AN105)."""
    import dataclasses

    p = dataclasses.replace(jfet_at(part, 298.15), lam=0.0)
    vc = -1.0
    v = np.linspace(-0.2, 0.2, 41)
    fed = channel(p, v, vc / 2 + v / 2)[0]
    assert np.max(np.abs(fed + fed[::-1])) < 1e-15                      # odd
    assert fed == pytest.approx(p.beta * (vc - 2 * p.vto_v) * v, abs=1e-15)
    held = channel(p, v, vc / 2)[0]
    even = 0.5 * (held + held[::-1])
    assert even == pytest.approx(-p.beta * v ** 2, abs=1e-15)


def test_derivatives_match_the_current(part):
    p = jfet_at(part, 298.15)
    h = 1e-7
    for vds in (-2.5, -0.3, -0.02, 0.02, 0.3, 2.5):
        for vgs in (-1.5, -0.5, 0.2):
            _, gds, gm = channel(p, vds, vgs)
            assert gds == pytest.approx((channel(p, vds + h, vgs)[0] - channel(p, vds - h, vgs)[0]) / (2 * h),
                                        rel=1e-5, abs=1e-10)
            assert gm == pytest.approx((channel(p, vds, vgs + h)[0] - channel(p, vds, vgs - h)[0]) / (2 * h),
                                       rel=1e-5, abs=1e-10)
    i, g = gate_junction(p, np.array([-1.0, 0.3]))
    assert i[0] == pytest.approx(-p.is_a, rel=1e-3) and i[1] == pytest.approx(p.is_a * math.expm1(0.3 / p.vt_v))


def test_temperature_laws(part):
    """VTO + VTOTC (T - T0) and BETA 1.01^(BETATCE (T - T0)), ngspice's JFET
    temperature parameters."""
    hot = jfet_at(part, 348.15)
    assert hot.vto_v == pytest.approx(part.vto_v + 50 * part.vto_tempco_v_per_k)
    assert hot.beta == pytest.approx(part.beta_a_per_v2 * 1.01 ** (100 * part.beta_tce_per_k * 50))


@pytest.mark.parametrize("gain", [3.03, 3.3])
def test_envelope_growth_rate_of_the_wien_bridge(demo_catalog, gain):
    """sigma = w0 (K - 3) / 2 for equal arms (Sedra and Smith), approached by the loop's
    dominant root with an op-amp of ever larger gain-bandwidth."""
    import dataclasses

    op = demo_catalog.find("opamps", "oa-jfet-4m")
    r, cap = 10e3, 10e-9
    w0 = 1 / (r * cap)
    sigmas = []
    for gbw in (4e7, 4e8):
        fast = dataclasses.replace(op, gbw_hz=gbw, a0=1e8, output_resistance_ohm=0.0)
        c = make_circuit("wien-bridge", "none", {"rs": r, "cs": cap, "rp": r, "cp": cap, "rg": 10e3,
                                                  "rf": 10e3 * (gain - 1)}, {"opamp": fast})
        sigmas.append(growth_rate(build_loop(c, Conditions(15.0, 298.15, math.inf)), NO_BRANCH))
    ideal = w0 * (gain - 3) / 2
    assert abs(sigmas[1] - ideal) < abs(sigmas[0] - ideal)
    assert sigmas[1] == pytest.approx(ideal, rel=2e-3)


def test_an_envelope_that_steps_across_its_band_has_entered_it():
    """Sampled once a cycle, a fast start-up can step from below the band to above it:
    the entry is where the straight line between the samples crosses the band's edge
    (linear interpolation), not the later return from above."""
    t = np.array([0.0, 1.0, 2.0, 3.0, 4.0])
    amp = np.array([0.1, 3.0, 2.0, 1.0, 1.0])
    first, settle = band_times(t, amp, 0.9, 1.1)
    assert first == pytest.approx((0.9 - 0.1) / (3.0 - 0.1))
    assert settle == pytest.approx(2.0 + (1.1 - 2.0) / (1.0 - 2.0))
    assert band_times(t, np.array([0.1, 0.2, 3.0, 3.0, 3.0]), 0.9, 1.1)[1] == math.inf


def _ngspice(deck: str, tmp_path, data: str) -> np.ndarray:
    (tmp_path / "c.cir").write_text(deck, encoding="utf-8")
    subprocess.run(["ngspice", "-b", "c.cir"], cwd=tmp_path, capture_output=True, check=True, timeout=120)
    return np.loadtxt(tmp_path / data, skiprows=1, ndmin=2)


@needs_ngspice
def test_drain_current_equals_ngspice_level_1(part, tmp_path):
    """ngspice's NJF (default level 1, B = 1) with the same VTO, BETA, LAMBDA over
    V_DS -0.5..0.5 V and V_GS -1.5..0.2 V, both modes and regions."""
    p = jfet_at(part, 300.15)
    deck = f"""jfet law
.model jm NJF(VTO={p.vto_v!r} BETA={p.beta!r} LAMBDA={p.lam!r} IS=1e-30)
VD d 0 DC 0
VG g 0 DC 0
J1 d g 0 jm
.options TEMP=27 TNOM=27 GMIN=1e-15
.control
set wr_singlescale
set wr_vecnames
set numdgt=12
dc VD -0.5 0.5 0.05 VG -1.5 0.2 0.425
wrdata law.dat i(VD)
quit
.endc
.end
"""
    table = _ngspice(deck, tmp_path, "law.dat")
    vds = np.tile(np.linspace(-0.5, 0.5, 21), 5)
    vgs = np.repeat(np.linspace(-1.5, 0.2, 5), 21)
    ours = channel(p, vds, vgs)[0]
    # ngspice's current through VD is the drain current back into the source
    assert -table[:, 1] == pytest.approx(ours, rel=1e-6, abs=1e-10)


@needs_ngspice
@pytest.mark.parametrize("hold_f,bleed", [(1e-6, 100e3), (47e-9, 220e3)])
def test_peak_detector_equals_ngspice(demo_catalog, tmp_path, hold_f, bleed):
    """A diode from a 1.414 V, 1 kHz sine into C || R: the mean and ripple of the hold
    in ngspice's settled run against partpick's periodic solution."""
    d = demo_catalog.find("diodes", "dd-si-signal")
    j = junctions_at(d, 300.15)[0]
    deck = f"""detector
.model dd D(IS={j.is_a!r} N={j.n!r} RS={j.rs_ohm!r} CJO=0)
VS out 0 SIN(0 1.414 1000)
D1 out h dd
C1 h 0 {hold_f!r}
R1 h 0 {bleed!r}
.options TEMP=27 TNOM=27 RELTOL=1e-5
.tran 2e-6 {40 * bleed * hold_f + 0.01!r} 0 2e-6
.control
set wr_singlescale
set wr_vecnames
set numdgt=12
run
linearize v(h)
wrdata h.dat v(h)
quit
.endc
.end
"""
    table = _ngspice(deck, tmp_path, "h.dat")
    t, v = table[:, 0], table[:, 1]
    last = v[t > t[-1] - 0.005]                          # five whole periods
    ours = hold_waveform(Detector(j, True, hold_f, ((1 / bleed, 0.0),)), 1.414, 1000.0)
    assert ours.mean_v == pytest.approx(last.mean(), abs=2e-3)
    assert np.ptp(ours.v_v) == pytest.approx(np.ptp(last), rel=0.05)


@needs_ngspice
@pytest.mark.slow
def test_transient_solver_runs_the_jfet_and_diodes_as_ngspice_does(demo_catalog):
    """The demo design's first 40 cycles (growth, clipping, the integrator pulling back)
    in partpick's BDF2 simulator and in ngspice: the same envelope within 1 %."""
    from partpick.bom import load_bom
    from partpick.circuits import build_netlist
    from partpick.physics.ngspice import run_ngspice
    from partpick.physics.transient import simulate
    from partpick.physics.waveform import cycle_peaks, upward_crossings
    from tests.conftest import ROOT

    c = load_bom(ROOT / "specs" / "boms" / "clean-tone-1k-jfet.yaml", demo_catalog).to_circuit(demo_catalog)
    net = build_netlist(c, Conditions(15.0, 298.15, 10e3))
    ours = simulate(net, cycles=40)
    t, v = run_ngspice(net, cycles=40)
    peaks = []
    for tt, x in ((ours.t_s, ours.v["osc"]), (t, v["osc"])):
        peaks.append(cycle_peaks(tt, x, upward_crossings(tt, x, 0.0, 0.02)))
    n = min(map(len, peaks))
    assert n >= 35
    assert peaks[0][:n] == pytest.approx(peaks[1][:n], rel=0.01)


def test_spice_cards_of_the_new_elements(demo_catalog):
    """A JFET is SPICE's level-1 NJF with its parameters at the netlist's temperature and
    its gate capacitances beside it; a diode a D with its own model and capacitor."""
    from partpick.physics.netlist import DiodeX, JfetX, Netlist, Resistor, VSource
    from partpick.physics.spice import to_spice

    j = demo_catalog.find("jfets", "jf-n-gp")
    d = demo_catalog.find("diodes", "dd-si-signal")
    net = Netlist("t", (VSource("VG", "g", "0", -1.0), Resistor("RD", "vcc", "d", 1e3), VSource("VCC", "vcc", "0", 1.0),
                        JfetX("Q1", "d", "g", "0", j), DiodeX("D3", "d", "h", d, d.cj_f),
                        Resistor("RH", "h", "0", 1e4)), 348.15, 1e3, {"osc": "d", "load": "h"})
    text = to_spice(net, cycles=2)
    hot = jfet_at(j, 348.15)
    assert f".model pp_q1_njf NJF(VTO={hot.vto_v:.12g} BETA={hot.beta:.12g} LAMBDA=0.01 IS=1e-14 CGS=0 CGD=0)" in text
    assert "JQ1 d g 0 pp_q1_njf" in text and "CQ1GS g 0 3e-12" in text and "CQ1GD g d 3e-12" in text
    assert "D3 d h pp_d3_d" in text and "CD3 d h 2e-12" in text
    assert ".model pp_d3_d D(" in text


@pytest.mark.parametrize("positive", [True, False])
@pytest.mark.parametrize("amp,offset", [(0.05, 0.0), (1.414, 0.2), (9.0, -0.5)])
def test_averaged_hold_level_is_the_root_of_the_net_current(demo_catalog, positive, amp, offset):
    """The start of the periodic solution (the hold level where the averaged diode
    current feeds the loads, a safeguarded Newton iteration) against scipy.optimize's
    brentq on the same net current, to 1e-9 V."""
    from scipy.optimize import brentq

    from partpick.physics.detector import _level, average_current

    j = junctions_at(demo_catalog.find("diodes", "dd-si-signal"), 300.15)[0]
    det = Detector(j, positive, 100e-9, ((1 / 100e3, 0.0), (1 / 330e3, 0.8)))

    def net(v):
        return average_current(det, amp, v - offset)[0] - det.g_load_s * v + det.i_load_a

    ref = brentq(net, offset - amp - 1.0, offset + amp + 1.0, xtol=1e-13)
    assert _level(det, amp, offset) == pytest.approx(ref, abs=1e-9)


@pytest.mark.parametrize("r_ser,r_la,r_lb,z_ctl", [
    (0.0, math.inf, 0.0, None),                 # the gate on an ideal control voltage
    (2.2e3, 100e3, 0.0, None),                  # a series resistor, linearising feedback
    (1e3, 220e3, 47e3, None),                   # the gate fed through a resistor
    (1e3, 220e3, 47e3, "rc"),                   # ... from a control node with an RC impedance
])
def test_branch_response_is_the_nodal_solution_of_its_circuit(part, r_ser, r_la, r_lb, z_ctl):
    """branch_at (the control loop's branch in complex arithmetic) against Kirchhoff's
    current law at the drain and gate nodes solved as a linear system (numpy.linalg), and
    against the rational functions of branch_network at the same points. Nodes: port V
    -- r_ser -- drain; channel gds Vd + gm Vg + J to the source (0 V); Y1 drain-gate
    (Cgd, ggd, 1/r_la); Y2 gate-source (Cgs, ggs); Y3 gate to the control voltage E
    through r_lb and the control node's impedance."""
    from partpick.physics.jfet import SmallSignal, VcrBranch, branch_at, branch_network
    from partpick.physics.rational import Rational

    w_ref = 2 * math.pi * 1e3
    zc = Rational(np.array([10e3]), np.array([1.0, 10e3 * 1e-6 * w_ref])) if z_ctl else None  # 10 k || 1 uF
    b = VcrBranch(jfet_at(part, 298.15), r_ser, r_la, r_lb, zc)
    ss = SmallSignal(gds=2.0e-3, gm=1.5e-3, ggs=1e-9, ggd=2e-9, vd_v=0.0, vg_v=-1.0)
    p = np.array([0.0, 1j, 2j, 3j, 5j])
    got = branch_at(b, w_ref, ss, p)
    net = branch_network(b, w_ref, ss)
    for value, rational in zip(got, (net.y, net.t_j, net.t_e, net.k_g, net.e_g)):
        np.testing.assert_allclose(value, rational(p), rtol=1e-11, atol=1e-18)
    q = b.jfet
    for k, pk in enumerate(p):
        s = w_ref * pk
        y1 = s * q.cgd_f + ss.ggd + (1 / r_la if math.isfinite(r_la) else 0.0)
        y2 = s * q.cgs_f + ss.ggs
        z3 = r_lb + (zc(pk) if zc else 0.0)
        y3 = 0.0 if (r_lb == 0 and zc is None) else 1 / z3
        for drive, want in (((1, 0, 0), got[0][k]), ((0, 1, 0), got[1][k]), ((0, 0, 1), got[2][k])):
            v, j, e = drive
            if r_lb == 0 and zc is None:      # the gate is the control node: Vg = E
                # unknowns Vd, I: I = (V - Vd)/r_ser (or Vd = V), KCL at the drain
                vg = e
                if r_ser == 0:
                    vd = v
                    i = ss.gds * vd + ss.gm * vg + j + y1 * (vd - vg)
                else:
                    vd = (v / r_ser - ss.gm * vg - j + y1 * vg) / (1 / r_ser + ss.gds + y1)
                    i = (v - vd) / r_ser
            else:
                # unknowns Vd, Vg, I
                a = np.array([[1 / r_ser + ss.gds + y1, ss.gm - y1, 0],
                              [-y1, y1 + y2 + y3, 0],
                              [1 / r_ser, 0, 1]], dtype=complex)
                rhs = np.array([v / r_ser - j, y3 * e, v / r_ser], dtype=complex)
                vd, vg, i = np.linalg.solve(a, rhs)
            assert abs(i - want) <= 1e-9 * max(abs(want), 1e-12), (drive, pk, i, want)
