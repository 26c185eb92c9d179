"""The JFET amplitude control against ngspice, the independent simulator: eight designs
of the design rule from 20 Hz to 50 kHz, with and without the gate's linearisation,
each built on 10 kohm Wien arms into a 10 kohm load and run from power-on to its
settled state in ngspice. partpick's predictions must agree: settled amplitude within
2 %, frequency within 0.1 %, THD within a factor 1.5 (or 0.003 % absolute below
0.01 %), settling time (into +/-2 % of the settled amplitude) within 25 %, start-up
overshoot of the same sign and within 30 %. The start amplitude the kick leaves is
read from ngspice's first cycles (the envelope's growth fitted back to t = 0), so both
start alike.

And the bounce: a naive control (no integrator, a large hold capacitor for a small
ripple) has a loop damping near 0.1 by partpick's analysis and its amplitude rings in
ngspice; the designed one (damping near 0.9) comes down from its start-up overshoot
without ringing.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from partpick import units
from partpick.circuits import Conditions, build_netlist, make_circuit
from partpick.physics.envelope import band_times
from partpick.physics.ngspice import ngspice_available, run_ngspice
from partpick.physics.waveform import analyse, cycle_peaks, upward_crossings
from partpick.verify import cycles_to_settle, predict, settling_of

pytestmark = [pytest.mark.slow, pytest.mark.ngspice,
              pytest.mark.skipif(not ngspice_available(), reason="ngspice is not installed")]

COND = Conditions(15.0, 298.15, 10e3)
CAPS = ("agc_ch", "agc_ci", "agc_cp")

# Made by partpick.circuits.jfet_design.design for 1.414 V (3 V at 5 kHz, 2 V at 20 kHz)
# at the output, THD limits of 0.1 % (linearised) and 2 %, temperatures 15..35 degC,
# +/-15 V; recorded here so the test runs the simulators, not the design search.
DESIGNS = [
    ("f20-lin", 20, {"opamp": "oa-jfet-4m", "jfet": "jf-n-gp", "detector": "dd-si-signal", "clamp": "dd-si-signal"},
     {"rg": "453k", "rf": "47k5", "agc_rs": "23k7", "agc_rlb": "221k", "agc_rla": "221k", "agc_rb": "90k9",
      "agc_ch": "10u", "agc_ri": "909k", "agc_ci": "10u", "agc_rz": "137k", "agc_cp": "470n", "agc_rr1": "115k",
      "agc_rr2": "6k98"}),
    ("f20-nolin", 20, {"opamp": "oa-jfet-4m", "jfet": "jf-n-gp", "detector": "dd-si-signal", "clamp": "dd-si-signal"},
     {"rg": "750k", "rf": "47k5", "agc_rs": "23k2", "agc_rlb": "221k", "agc_rb": "90k9", "agc_ch": "10u",
      "agc_ri": "1M0", "agc_ci": "10u", "agc_rz": "137k", "agc_cp": "470n", "agc_rr1": "107k", "agc_rr2": "6k34"}),
    ("f1k-lin", 1000, {"opamp": "oa-jfet-4m", "jfet": "jf-n-gp", "detector": "dd-si-signal", "clamp": "dd-si-signal"},
     {"rg": "453k", "rf": "47k5", "agc_rs": "23k7", "agc_rlb": "221k", "agc_rla": "221k", "agc_rb": "90k9",
      "agc_ch": "220n", "agc_ri": "324k", "agc_ci": "560n", "agc_rz": "48k7", "agc_cp": "27n", "agc_rr1": "115k",
      "agc_rr2": "6k98"}),
    ("f1k-nolin", 1000, {"opamp": "oa-jfet-4m", "jfet": "jf-n-gp", "detector": "dd-si-signal", "clamp": "dd-si-signal"},
     {"rg": "750k", "rf": "47k5", "agc_rs": "23k2", "agc_rlb": "221k", "agc_rb": "90k9", "agc_ch": "220n",
      "agc_ri": "301k", "agc_ci": "1u2", "agc_rz": "22k6", "agc_cp": "56n", "agc_rr1": "107k", "agc_rr2": "6k34"}),
    ("f5k-lin", 5000, {"opamp": "oa-jfet-4m", "jfet": "jf-n-lowvp", "detector": "dd-si-signal", "clamp": "dd-si-signal"},
     {"rg": "732k", "rf": "47k5", "agc_rs": "23k2", "agc_rlb": "221k", "agc_rla": "221k", "agc_rb": "249k",
      "agc_ch": "16n", "agc_ri": "324k", "agc_ci": "560n", "agc_rz": "9k53", "agc_cp": "30n", "agc_rr1": "20k",
      "agc_rr2": "3k83"}),
    ("f20k-nolin", 20000, {"opamp": "oa-audio-10m", "jfet": "jf-n-gp", "detector": "dd-si-signal",
                           "clamp": "dd-si-signal"},
     {"rg": "750k", "rf": "47k5", "agc_rs": "23k2", "agc_rlb": "221k", "agc_rb": "150k", "agc_ch": "6n8",
      "agc_ri": "309k", "agc_ci": "82n", "agc_rz": "16k5", "agc_cp": "4n3", "agc_rr1": "16k2", "agc_rr2": "1k69"}),
    ("f50k-lin", 50000, {"opamp": "oa-audio-10m", "jfet": "jf-n-switch", "detector": "dd-si-signal",
                         "clamp": "dd-si-signal"},
     {"rg": "732k", "rf": "47k5", "agc_rs": "23k7", "agc_rlb": "221k", "agc_rla": "221k", "agc_rb": "90k9",
      "agc_ch": "4n3", "agc_ri": "340k", "agc_ci": "16n", "agc_rz": "34k", "agc_cp": "820p", "agc_rr1": "27k4",
      "agc_rr2": "1k69"}),
    ("f50k-nolin", 50000, {"opamp": "oa-audio-10m", "jfet": "jf-n-gp", "detector": "dd-si-signal",
                           "clamp": "dd-si-signal"},
     {"rg": "750k", "rf": "47k5", "agc_rs": "23k2", "agc_rlb": "221k", "agc_rb": "90k9", "agc_ch": "4n3",
      "agc_ri": "316k", "agc_ci": "22n", "agc_rz": "24k3", "agc_cp": "1n2", "agc_rr1": "107k", "agc_rr2": "6k34"}),
]
KINDS = {"opamp": "opamps", "jfet": "jfets", "detector": "diodes", "clamp": "diodes"}


def circuit(cat, f_hz: float, parts: dict, values: dict):
    """The design on equal 10 kohm arms tuned to f_hz."""
    vals = {k: units.parse_rkm(v, "capacitance" if k in CAPS else "resistance") for k, v in values.items()}
    cap = 1 / (2 * math.pi * f_hz * 10e3)
    vals.update(rs=10e3, rp=10e3, cs=cap, cp=cap)
    return make_circuit("wien-bridge", "jfet-agc", vals, {r: cat.find(KINDS[r], i) for r, i in parts.items()})


def envelope(t, v):
    """(mid-cycle times s, half peak-to-peak of each cycle V)."""
    xs = upward_crossings(t, v, 0.0, 0.02)
    return 0.5 * (xs[1:] + xs[:-1]), cycle_peaks(t, v, xs)


def start_amplitude(tp, pk) -> float:
    """The envelope's early exponential growth (below a fifth of its final value)
    fitted back to t = 0, V."""
    early = (pk < 0.2 * pk[-1]) & (tp < tp[np.argmax(pk > 0.5 * pk[-1])])
    slope, icept = np.polyfit(tp[early][1:], np.log(pk[early][1:]), 1)
    return math.exp(icept)


@pytest.mark.parametrize("name,f_hz,parts,values", DESIGNS, ids=[d[0] for d in DESIGNS])
def test_design_agrees_with_ngspice(demo_catalog, name, f_hz, parts, values):
    c = circuit(demo_catalog, f_hz, parts, values)
    point = predict(c, COND)
    assert point.method == "harmonic balance" and point.regime == "limiter"
    t, v = run_ngspice(build_netlist(c, COND), cycles=cycles_to_settle(c, point) + 40)
    st = analyse(t, v["osc"], cycles=30)
    assert st.settled
    assert point.osc_peak_v == pytest.approx(st.peak_v, rel=0.02)
    assert point.freq_hz == pytest.approx(st.freq_hz, rel=1e-3)
    if st.thd_frac < 1e-4:
        assert abs(point.osc_thd - st.thd_frac) < 3e-5
    else:
        assert st.thd_frac / 1.5 <= point.osc_thd <= 1.5 * st.thd_frac
    tp, pk = envelope(t, v["osc"])
    final = pk[-1]
    _, settle = band_times(tp, pk, 0.98 * final, 1.02 * final)
    ours = settling_of(c, point, (0.98, 1.02), start_amplitude(tp, pk))
    assert ours.settle_s == pytest.approx(settle, rel=0.25)
    over = pk.max() / final - 1
    assert (ours.overshoot > 0.01) == (over > 0.01)
    assert ours.overshoot == pytest.approx(over, rel=0.3)


def _rings(tp, pk, final: float, band: float = 0.01) -> int:
    """How often the envelope swings through its final value from one side of the
    +/-band to the other, once it has come within 5 % of it: each swing is half a ring."""
    inside = np.flatnonzero(np.abs(pk / final - 1) < 0.05)
    dev = pk[inside[0]:] / final - 1
    signs = np.sign(dev[np.abs(dev) > band])
    return int(np.count_nonzero(np.diff(signs)))


def test_a_naive_detector_bounces_and_the_design_does_not(demo_catalog):
    """Naive: the hold capacitor made large (2.2 uF behind 1 Mohm) to keep the ripple
    small, the hold driving the gate directly; designed: f1k-lin above. (With 1 uF the
    swing after the first undershoot is about 1 % in ngspice, on the edge of what the
    count takes for a ring; 2.2 uF rings plainly, damping 0.10.)"""
    cat = demo_catalog
    naive = make_circuit("wien-bridge", "jfet-agc",
                         {"rs": 10e3, "cs": 15.9e-9, "rp": 10e3, "cp": 15.9e-9, "rg": 47e3, "rf": 31.6e3,
                          "agc_rs": 22e3, "agc_rla": 220e3, "agc_rlb": 220e3, "agc_ch": 2.2e-6, "agc_rb": 1e6},
                         {"opamp": cat.find("opamps", "oa-jfet-4m"), "jfet": cat.find("jfets", "jf-n-gp"),
                          "detector": cat.find("diodes", "dd-si-signal")})
    _, f_hz, parts, values = DESIGNS[2]
    designed = circuit(cat, f_hz, parts, values)
    rings = {}
    for label, c in (("naive", naive), ("designed", designed)):
        point = predict(c, COND)
        t, v = run_ngspice(build_netlist(c, COND), cycles=cycles_to_settle(c, point) + 40)
        tp, pk = envelope(t, v["osc"])
        ours = settling_of(c, point, (0.98, 1.02), start_amplitude(tp, pk))
        rings[label] = (ours.damping, _rings(tp, pk, pk[-1]), _rings(ours.t_s, ours.amp_v, ours.amp_v[-1]))
    damping, in_spice, in_ours = rings["naive"]
    assert damping < 0.25 and in_spice >= 3 and in_ours >= 3
    damping, in_spice, in_ours = rings["designed"]
    assert damping > 0.6 and in_spice <= 1 and in_ours <= 1
