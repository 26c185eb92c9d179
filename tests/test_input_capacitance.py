"""The capacitance at an op-amp input that the physics leaves out, against ngspice.

The starter spec's #1 (tests/data/high-z-arms-bom.yaml, `partpick init` then `partpick
design`) sets 1 kHz with 481 kohm arms and 300 pF across the non-inverting input. The
op-amp's own input capacitance and the board's sit in parallel with that capacitor
(a few pF: NODE_CAP_F, common practice, no published source); partpick does not model
them, so check cautions where they would move the frequency by more than a quarter of
the tolerance, by the textbook Wien frequency f0 = 1 / (2 pi sqrt(Rs Cs Rp Cp)) (any
oscillator text). ngspice, running the whole circuit with the capacitance added, is the
independent reference for how far it moves.
"""

from __future__ import annotations

import pytest

from partpick.bom import load_bom
from partpick.circuits import build_netlist, input_cap_shift
from partpick.circuits.wien import circuit as wien_circuit
from partpick.physics.ngspice import ngspice_available, run_ngspice
from partpick.physics.waveform import analyse
from partpick.pipeline import evaluate_bom
from partpick.sensitivity import NODE_CAP_F, input_capacitance
from partpick.spec import Spec
from partpick.starter import STARTER_SPEC
from partpick.verify import cycles_to_settle, operating_conditions, predict
from tests.conftest import ROOT

DATA = ROOT / "tests" / "data"


def _starter(tmp_path):
    path = tmp_path / "spec.yaml"
    path.write_text(STARTER_SPEC, encoding="utf-8")
    return Spec.from_yaml(path)


def test_a_small_arm_capacitor_is_cautioned_and_a_large_one_is_not(tmp_path, demo_catalog):
    spec = _starter(tmp_path)
    bom = load_bom(DATA / "high-z-arms-bom.yaml", demo_catalog)
    r = evaluate_bom(bom, spec, demo_catalog, samples=2000)
    assert r.verdict.passed
    caution = next(x for x in r.verdict.cautions if "capacitance partpick does not model" in x)
    assert "cp (300 pF)" in caution and "5 pF" in caution and "-0.82 %" in caution, caution
    # textbook: sqrt(300 / 305) - 1 = -0.816 %
    assert input_cap_shift(bom.to_circuit(demo_catalog), NODE_CAP_F)[1] == pytest.approx((300 / 305) ** 0.5 - 1,
                                                                                          rel=1e-9)
    # the same frequency with arms ten times lower: 3 nF moves it by -0.083 %, under a quarter of 1 %
    op, lim = demo_catalog.find("opamps", "oa-gp-bip"), demo_catalog.find("limiters", "led-red")
    low = wien_circuit(48.1e3, 3.6e-9, 48.1e3, 3.0e-9, 3.32e3, 6.19e3, op, lim, rd_ohm=4.02e3)
    assert input_cap_shift(low, NODE_CAP_F)[1] == pytest.approx((3000 / 3005) ** 0.5 - 1, rel=1e-9)
    assert input_capacitance(spec, low) is None


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")
def test_the_cautioned_shift_is_what_ngspice_shows(tmp_path, demo_catalog):
    """5 pF more across Cp: ngspice moves the settled frequency by -0.78 % (run on
    2026-12-05), the caution says -0.82 % (the textbook frequency; the limiter's share
    of the loop moves a little with the amplitude): within a tenth of a percentage
    point, and far beyond the quarter of the 1 % tolerance that the caution names."""
    spec = _starter(tmp_path)
    circuit = load_bom(DATA / "high-z-arms-bom.yaml", demo_catalog).to_circuit(demo_catalog)
    cond = operating_conditions(spec)["nominal"]
    freqs = []
    for c in (circuit, circuit.with_values(cp=circuit.value("cp") + NODE_CAP_F)):
        point = predict(c, cond)
        t, v = run_ngspice(build_netlist(c, cond), cycles=cycles_to_settle(c, point, point.osc_peak_v))
        st = analyse(t, v["load"])
        assert st is not None and st.settled, st
        freqs.append(st.freq_hz)
    measured = freqs[1] / freqs[0] - 1
    stated = input_cap_shift(circuit, NODE_CAP_F)[1]
    assert measured < -0.0025   # (over a quarter of the tolerance)
    assert stated == pytest.approx(measured, abs=1e-3)
