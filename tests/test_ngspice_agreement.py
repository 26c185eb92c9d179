"""partpick's predictions against ngspice, the independent simulator.

Each design below is exported as a SPICE netlist, run in ngspice (batch mode) from a
small kick to its settled state, and its last 20 cycles measured (frequency from
zero crossings, amplitude, THD over harmonics 2..9 by FFT over whole cycles). The
assertions are those of the physics issue: frequency within 0.5 % of partpick's
prediction, amplitude at the load within 5 %, startup / no-startup agreeing (margins of
-3 % and +3 % included), THD within a factor of 1.5 where it exceeds 0.3 %.
"""

from __future__ import annotations


import pytest

from partpick.physics.ngspice import ngspice_available, run_ngspice
from partpick.physics.waveform import analyse
from partpick.circuits import Conditions, build_netlist
from partpick.circuits.wien import circuit as WienCircuit
from partpick.verify import predict, transient_cycles_for

pytestmark = [pytest.mark.ngspice, pytest.mark.slow,
              pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")]

# name: (circuit keywords, conditions keywords); op-amp and limiter by catalog id.
DESIGNS = {
    "equal-1k6-diodes-direct": (dict(rs=10e3, cs=10e-9, rp=10e3, cp=10e-9, rg=10e3, rf=22e3,
                                     op="oa-jfet-4m", lim="d-si-signal"), dict(v=12, rl=10e3)),
    "equal-1k6-diodes-rd-heavy": (dict(rs=10e3, cs=10e-9, rp=10e3, cp=10e-9, rg=10e3, rf=22e3, rd=10e3,
                                       op="oa-audio-10m", lim="d-si-signal"), dict(v=12, rl=600)),
    "unequal-arms-rd": (dict(rs=4.7e3, cs=22e-9, rp=15e3, cp=4.7e-9, rg=10e3, rf=6.8e3, rd=4.7e3,
                             op="oa-jfet-4m", lim="d-si-signal"), dict(v=12, rl=10e3)),
    "20hz-precision": (dict(rs=82e3, cs=100e-9, rp=82e3, cp=100e-9, rg=10e3, rf=24e3, rd=22e3,
                            op="oa-prec-bip", lim="d-si-lowleak"), dict(v=15, rl=100e3)),
    "48khz-fast-50m": (dict(rs=3.3e3, cs=1e-9, rp=3.3e3, cp=1e-9, rg=1e3, rf=2.4e3, rd=1e3,
                            op="oa-fast-50m", lim="d-schottky"), dict(v=5, rl=1e3, cl=100e-12)),
    "19k4-gbw-1m": (dict(rs=8.2e3, cs=1e-9, rp=8.2e3, cp=1e-9, rg=10e3, rf=24e3, rd=10e3,
                         op="oa-lp-rr", lim="d-si-signal"), dict(v=2.5, rl=100e3)),
    "no-limiter-clips": (dict(rs=10e3, cs=10e-9, rp=10e3, cp=10e-9, rg=10e3, rf=33e3,
                              op="oa-gp-bip"), dict(v=9, rl=10e3)),
    "zener-pair": (dict(rs=10e3, cs=10e-9, rp=10e3, cp=10e-9, rg=10e3, rf=33e3,
                        op="oa-jfet-4m", lim="z-pair-3v3"), dict(v=12, rl=10e3)),
    "single-5v-diodes-rd": (dict(rs=15e3, cs=10e-9, rp=15e3, cp=10e-9, rg=10e3, rf=22e3, rd=10e3,
                                 op="oa-lp-rr", lim="d-si-signal", single=True), dict(v=5, rl=10e3)),
    "margin-minus-3pct": (dict(rs=10e3, cs=10e-9, rp=10e3, cp=10e-9, rg=10e3, rf=19.1e3,
                               op="oa-fast-50m", lim="d-si-signal"), dict(v=6, rl=10e3)),
    "margin-plus-3pct": (dict(rs=10e3, cs=10e-9, rp=10e3, cp=10e-9, rg=10e3, rf=20.9e3, rd=10e3,
                              op="oa-fast-50m", lim="d-si-signal"), dict(v=6, rl=10e3)),
    "led-heavy-load": (dict(rs=4.7e3, cs=33e-9, rp=4.7e3, cp=33e-9, rg=4.7e3, rf=11e3,
                            op="oa-power-4m", lim="led-red"), dict(v=12, rl=150)),
    "follower-heavy-load": (dict(rs=10e3, cs=4.7e-9, rp=10e3, cp=4.7e-9, rg=10e3, rf=22e3, rd=4.7e3,
                                 op="oa-power-4m", lim="d-si-signal", stage="follower"), dict(v=12, rl=50)),
    "attenuator": (dict(rs=10e3, cs=4.7e-9, rp=10e3, cp=4.7e-9, rg=10e3, rf=22e3, rd=22e3,
                        op="oa-jfet-4m", lim="d-si-signal", stage="attenuator", ra=10e3, rb=4.7e3),
                   dict(v=12, rl=10e3)),
    # a 100 nF load at 50 kHz (32 ohm of reactance) behind a 46.4 ohm attenuator: the
    # design partpick returns for the carrier spec with that load (refused before the
    # search counted the capacitance in the attenuator's ratio and the op-amp's current)
    "attenuator-100nF-load": (dict(rs=24.3e3, cs=120e-12, rp=19.6e3, cp=150e-12, rg=3.32e3, rf=8.87e3, rd=13.3e3,
                                   op="oa-fast-50m", lim="led-red", stage="attenuator", ra=46.4, rb=20e3),
                              dict(v=5, rl=1e3, cl=100e-9)),
}


def _build(demo_catalog, spec):
    ck, cd = spec
    circuit = WienCircuit(
        rs_ohm=ck["rs"], cs_f=ck["cs"], rp_ohm=ck["rp"], cp_f=ck["cp"], rg_ohm=ck["rg"], rf_ohm=ck["rf"],
        opamp=demo_catalog.find("opamps", ck["op"]),
        limiter=demo_catalog.find("limiters", ck["lim"]) if "lim" in ck else None,
        rd_ohm=ck.get("rd", 0.0), stage=ck.get("stage", "none"),
        stage_ra_ohm=ck.get("ra", 0.0), stage_rb_ohm=ck.get("rb", 0.0),
        supply_kind="single" if ck.get("single") else "dual",
        bias_r_ohm=100e3 if ck.get("single") else 0.0, bias_c_f=10e-6 if ck.get("single") else 0.0,
        coupling_c_f=22e-6 if ck.get("single") else 0.0,
    )
    return circuit, Conditions(cd["v"], 298.15, cd["rl"], cd.get("cl", 0.0))


@pytest.mark.parametrize("name", list(DESIGNS))
def test_prediction_agrees_with_ngspice(name, demo_catalog):
    circuit, cond = _build(demo_catalog, DESIGNS[name])
    point = predict(circuit, cond)
    cycles = transient_cycles_for(point.lin, circuit.f0_hz, max(point.osc_peak_v, 0.05)) if point.starts else 80
    t, v = run_ngspice(build_netlist(circuit, cond), cycles=cycles)
    st = analyse(t, v["load"])
    spice_starts = st is not None and st.peak_v > 0.05 and not st.decaying
    assert spice_starts == point.starts, (name, point.lin.margin, st)
    if not point.starts:
        return
    assert st.settled, (name, st)
    assert st.freq_hz == pytest.approx(point.freq_hz, rel=0.005), (name, point.method)
    assert st.peak_v == pytest.approx(point.load_peak_v, rel=0.05), (name, point.method)
    if st.thd_frac > 0.003:
        ratio = point.load_thd / st.thd_frac
        assert 1 / 1.5 <= ratio <= 1.5, (name, point.load_thd, st.thd_frac)


def test_design_table_covers_the_issue(demo_catalog):
    """The table spans what the physics issue asks for: 20 Hz to 50 kHz, GBW 1 to 50 MHz,
    every limiter kind and none, light and heavy loads, dual and single supply."""
    built = [_build(demo_catalog, s) for s in DESIGNS.values()]
    freqs = [c.f0_hz for c, _ in built]
    gbws = [c.opamp.gbw_hz for c, _ in built]
    assert min(freqs) < 25 and max(freqs) > 45e3
    assert min(gbws) <= 1e6 and max(gbws) >= 50e6
    kinds = {c.part("limiter").kind if c.part("limiter") else None for c, _ in built}
    assert kinds == {None, "diode", "zener-pair", "led"}
    assert {c.supply_kind for c, _ in built} == {"dual", "single"}
    assert min(k.load_r_ohm for _, k in built) <= 200 and max(k.load_r_ohm for _, k in built) >= 100e3
    assert any(c.value("rs") != c.value("rp") for c, _ in built)
    margins = sorted(round(c.ideal_margin, 2) for c, _ in built)
    assert -0.03 in margins and 0.03 in margins
    assert len(built) >= 12


MID_SPEC = """name: mid-rail-88k
description: demo scenario, a faint 87.9 kHz tone from one 12 V rail
frequency: {target: 87.9 kHz, tolerance: 2 %}
amplitude: {target: 57 mVpk, tolerance: 20 %}
supply: {kind: single, min: 11.4 V, max: 12.6 V}
load: {resistance: 1.5 kohm}
temperature: {min: 0 degC, max: 50 degC}
distortion: {max_thd: 1 %}
yield: {min: 99.5 %}
"""


@pytest.mark.ngspice
@pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")
def test_the_mid_rail_ripple_reaches_the_load_as_in_ngspice(demo_catalog):
    """A single-supply design behind a 1/52 attenuator at 88 kHz with 100 nF mid-rail
    decoupling (coverage requirement 22's brute-force BOM): the networks' currents return
    through the mid-rail node's 18 ohm and its ripple reaches the load nearly whole. The
    full circuit in ngspice (bias network included) gives about 106 mV peak at the load;
    a model with an ideal mid-rail gave 57 mV (and passed check). The prediction agrees
    with ngspice to 3 %, and with the decoupling made ideal (1 F) it falls to the 57 mV."""
    from partpick.bom import load_bom
    from partpick.spec import Spec
    from partpick.verify import cycles_to_settle, operating_conditions
    from tests.conftest import ROOT

    spec = Spec.from_text(MID_SPEC)
    circuit = load_bom(ROOT / "tests" / "data" / "mid-rail-88k-bom.yaml", demo_catalog).to_circuit(demo_catalog)
    cond = operating_conditions(spec)["nominal"]
    point = predict(circuit, cond)
    t, v = run_ngspice(build_netlist(circuit, cond), cycles=cycles_to_settle(circuit, point, point.osc_peak_v))
    st = analyse(t, v["load"])
    assert st is not None and st.settled
    assert st.peak_v == pytest.approx(point.load_peak_v, rel=0.03)
    assert 0.095 < st.peak_v < 0.115
    ideal = predict(circuit.with_values(bias_c=1.0), cond)
    assert ideal.load_peak_v == pytest.approx(0.0572, rel=0.02)


@pytest.mark.ngspice
@pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")
def test_a_saturated_output_stage_is_clipping_as_in_ngspice(demo_catalog):
    """Coverage requirement 64's brute-force BOM at its minimum supply (2.97 V): a
    micropower op-amp (Ro 2 kohm) drives a 1.5 kohm divider and a 3.7 kohm gain network.
    In ngspice its internal node x (the macro-model's clamp node, read inside the
    subcircuit instance) sits on the clamp, the rails less the 20 mV headroom, while its
    pin swings about 0.5 V peak, a volt inside them: the output stage saturates every
    cycle. partpick's transient run says the same (x within 1 mV of the clamp, the pin's
    amplitude within 3 % of ngspice's), and check fails the swing headroom at the minimum
    supply as clipping (it passed while the run read the swing at the pin)."""
    from partpick.bom import load_bom
    from partpick.physics.netlist import OpAmpX
    from partpick.pipeline import evaluate_bom
    from partpick.spec import Spec
    from partpick.verify import cycles_to_settle, operating_conditions
    from tests.conftest import ROOT

    data = ROOT / "tests" / "data"
    spec = Spec.from_text((data / "clamped-micro-3v3.yaml").read_text())
    bom = load_bom(data / "clamped-micro-3v3-bom.yaml", demo_catalog)
    circuit = bom.to_circuit(demo_catalog)
    cond = operating_conditions(spec)["supply min"]
    point = predict(circuit, cond)
    assert point.method == "transient" and point.regime == "swing"
    lo, hi = point.swing_low_v, point.swing_high_v
    assert 0 <= point.x_max_v - hi < 1e-3 and 0 <= lo - point.x_min_v < 1e-3
    net = build_netlist(circuit, cond)
    amp = next(el.name for el in net.elements if isinstance(el, OpAmpX) and el.out == net.probes["osc"])
    t, v = run_ngspice(net, cycles=cycles_to_settle(circuit, point, point.osc_peak_v),
                       probes=("osc", "load", f"x:{amp}"))
    tail = t >= t[-1] - 20 / point.freq_hz
    x = v[f"x:{amp}"][tail] - cond.rails(circuit.supply_kind)[2]
    assert x.max() == pytest.approx(hi, abs=5e-3) and x.min() == pytest.approx(lo, abs=5e-3)
    st = analyse(t, v["osc"])
    assert st is not None and st.settled
    assert st.peak_v == pytest.approx(point.osc_peak_v, rel=0.03)
    assert st.peak_v < hi - 0.9                    # the pin a volt inside the clamp
    r = evaluate_bom(bom, spec, demo_catalog, None)
    head = next(ck for ck in r.verdict.checks if ck.name == "output swing headroom at minimum supply")
    assert not head.passed and head.note == "clipping"
