"""Conformance of every registered circuit plug-in (DEVELOPERS.md, "Adding a topology",
"Adding an amplitude control"). A new plug-in passes these or does not land:

- its slots fit with the others' (roles and designators unique, kinds the catalog knows);
- its equations agree with an independent derivation: the natural frequencies of its own
  netlist, derived symbolically with sympy by nodal analysis (tests/mna.py), put a pole
  pair on the imaginary axis at 2 pi f0 exactly when the gain equals the required gain;
- its loop (what the physics solves) has the same natural frequencies as that
  derivation with the op-amps' small-signal model;
- its netlist simulated by ngspice agrees with partpick's prediction;
- its search hooks agree with its equations: every table row's figures and the gain
  network's conductances and slopes (the search against brute force is in
  tests/test_search_optimality.py).

Every registered topology and every control that fits one of its ports needs an example
in EXAMPLES below.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from partpick.catalog import KINDS
from partpick.circuits import (CONTROLS, TOPOLOGIES, Conditions, all_slots, build_netlist, linear, make_circuit,
                               periphery, settled)
from partpick.physics.ngspice import ngspice_available, run_ngspice
from partpick.physics.waveform import analyse
from partpick.verify import cycles_to_settle, predict
from tests import mna


def _wien(cat, control, **extra):
    values = {"rs": 10e3, "cs": 10e-9, "rp": 12e3, "cp": 8.2e-9, "rg": 10e3, "rf": 22e3, **extra}
    parts = {"opamp": cat.find("opamps", "oa-jfet-4m")}
    if control == "diode-limiter":
        parts["limiter"] = cat.find("limiters", "d-si-signal")
        values.setdefault("rd", 4.7e3)
    if control == "jfet-agc":
        # the JFET across Rg behind R10, the gate linearised, an integrator with its zero,
        # ripple capacitor and clamp, the reference divider from the positive rail
        parts.update(jfet=cat.find("jfets", "jf-n-gp"), detector=cat.find("diodes", "dd-si-signal"),
                     clamp=cat.find("diodes", "dd-si-signal"))
        values.update(rg=47e3, rf=26e3, agc_rs=22e3, agc_rla=220e3, agc_rlb=220e3, agc_ch=68e-9, agc_rb=220e3,
                      agc_ri=150e3, agc_ci=680e-9, agc_rz=15e3, agc_cp=68e-9, agc_rr1=12e3, agc_rr2=1e3)
    return make_circuit("wien-bridge", control, values, parts, stage="follower")


def _quadrature(cat, control, **extra):
    values = {"ri1": 10e3, "ci1": 10e-9, "ri2": 12e3, "ci2": 8.2e-9, "rq": 10e3, "rdamp": 10.5e3,
              "rn1": 10e3, "rn2": 10.2e3, **extra}
    parts = {"opamp": cat.find("opamps", "oa-jfet-4m")}
    if control == "diode-limiter":
        parts["limiter"] = cat.find("limiters", "d-si-signal")
        values.setdefault("rd", 4.7e3)
    return make_circuit("quadrature", control, values, parts)


# (topology, control) -> builder(catalog) of an example circuit; the conditions it runs at
EXAMPLES = {
    ("wien-bridge", "diode-limiter"): lambda cat: _wien(cat, "diode-limiter"),
    ("wien-bridge", "none"): lambda cat: _wien(cat, "none", rf=26e3),
    ("wien-bridge", "jfet-agc"): lambda cat: _wien(cat, "jfet-agc"),
    ("quadrature", "diode-limiter"): lambda cat: _quadrature(cat, "diode-limiter"),
    ("quadrature", "none"): lambda cat: _quadrature(cat, "none", rdamp=10.2e3),
}
# the second load is the quadrature oscillator's cosine output's (a topology with one output ignores it)
COND = Conditions(12.0, 298.15, 10e3, 100e-12, 4.7e3, 220e-12)


def _pairs():
    return [(t, c) for t, topo in TOPOLOGIES.items() for c, ctl in CONTROLS.items() if ctl.port in topo.ports]


def test_every_plugin_combination_has_an_example():
    assert set(_pairs()) <= set(EXAMPLES), "add an example circuit for every topology/control pair"


def test_slots_fit_together():
    """Roles are unique across every plug-in (a BOM line names its role alone);
    designators are unique within every circuit a BOM can describe (two topologies
    may both call their first resistor R1)."""
    from partpick.circuits import STAGES, SUPPLY_KINDS, slots_for

    seen_roles = {}
    plugs = [*TOPOLOGIES.values(), *CONTROLS.values()]
    slots = [s for p in plugs for s in p.slots] + list(periphery.SLOTS)
    for s in slots:
        assert s.kind in KINDS, s
        assert seen_roles.setdefault(s.role, s) is s, f"role {s.role} declared twice"
    assert set(all_slots()) == set(seen_roles)
    for t, ctl in _pairs():
        for stage in STAGES:
            for supply in SUPPLY_KINDS:
                refs = [s.designator for s in slots_for(t, ctl, stage, supply)]
                assert len(refs) == len(set(refs)), (t, ctl, stage, supply, refs)
    for ctl in CONTROLS.values():
        assert any(ctl.port in t.ports for t in TOPOLOGIES.values()), f"no topology offers port {ctl.port}"


def _at_required_gain(c, excess: float = 0.0):
    """The circuit with its gain knob set so gain = required gain * (1 + excess)."""
    topo = c.topology
    want = c.required_gain * (1 + excess)
    lo, hi = -0.9, 10.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if topo.gain(topo.nudge_gain(c, mid).values) < want:
            lo = mid
        else:
            hi = mid
    return topo.nudge_gain(c, 0.5 * (lo + hi))


@pytest.mark.parametrize("name", list(TOPOLOGIES))
def test_equations_against_symbolic_netlist(name, demo_catalog):
    """f0 and the required gain from the plug-in's equations against the natural
    frequencies of its own netlist with ideal op-amps (sympy)."""
    ctl = next(c for t, c in EXAMPLES if t == name and c == "none")
    c = EXAMPLES[(name, ctl)](demo_catalog)
    w0 = 2 * math.pi * c.f0_hz
    marginal = _at_required_gain(c)
    roots = mna.characteristic_roots(build_netlist(marginal, COND), ideal_opamps=True, scale=w0)
    pair = min(roots, key=lambda r: abs(r - 1j * w0))
    assert abs(pair.real) < 1e-6 * w0 and pair.imag == pytest.approx(w0, rel=1e-6)
    grows = mna.characteristic_roots(build_netlist(_at_required_gain(c, 0.02), COND), ideal_opamps=True, scale=w0)
    assert max(r.real for r in grows if abs(r.imag) > 0.5 * w0) > 0
    # the equations are vectorised over builds and give the same numbers one by one
    v = {k: np.array([x, 1.1 * x]) for k, x in c.values.items()}
    topo = c.topology
    for fn in (topo.f0_hz, topo.required_gain, topo.gain):
        arr = fn(v)
        assert arr[0] == pytest.approx(float(fn(c.values)), rel=1e-12)
        assert arr[1] == pytest.approx(float(fn({k: 1.1 * x for k, x in c.values.items()})), rel=1e-12)


@pytest.mark.parametrize("pair", list(EXAMPLES), ids=lambda p: "-".join(p))
def test_loop_against_symbolic_netlist(pair, demo_catalog):
    """The loop the physics solves has the natural frequencies of the netlist with the
    op-amps' small-signal model and the control at rest (sympy)."""
    c = EXAMPLES[pair](demo_catalog)
    lin = linear(c, COND)
    br = c.control.branch(c, COND.temp_k)
    w0 = 2 * math.pi * c.f0_hz
    roots = mna.characteristic_roots(build_netlist(c, COND), limiter_g=br.g0_s, limiter_c=br.c0_f, scale=w0)
    ref = max((r for r in roots if abs(r.imag) > 0.2 * w0), key=lambda r: r.real)
    ours = max((p for p in lin.poles_rad_s if abs(p.imag) > 0.2 * w0), key=lambda p: p.real)
    assert ours.real == pytest.approx(ref.real, rel=1e-5, abs=1e-6 * w0)
    assert abs(ours.imag) == pytest.approx(abs(ref.imag), rel=1e-7)


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")
@pytest.mark.parametrize("pair", list(EXAMPLES), ids=lambda p: "-".join(p))
def test_netlist_in_ngspice_agrees_with_prediction(pair, demo_catalog):
    c = EXAMPLES[pair](demo_catalog)
    point = predict(c, COND)
    cycles = cycles_to_settle(c, point, max(point.osc_peak_v, 0.05)) if point.starts else 80
    t, v = run_ngspice(build_netlist(c, COND), cycles=cycles)
    st = analyse(t, v["load"])
    assert (st is not None and st.peak_v > 0.05 and not st.decaying) == point.starts
    if point.starts:
        assert st.freq_hz == pytest.approx(point.freq_hz, rel=0.005)
        assert st.peak_v == pytest.approx(point.load_peak_v, rel=0.05)


SPEC = """\
name: conformance
topology: {topology}
frequency: {{target: 2 kHz, tolerance: 2 %}}
amplitude: {{target: 2 Vpk, tolerance: 20 %}}
supply: {{kind: dual, min: 12 V, max: 12 V}}
load: {{resistance: 10 kohm}}
temperature: {{min: 20 degC, max: 30 degC}}
distortion: {{max_thd: 8 %}}
yield: {{min: 90 %}}
parts: {{resistors: [mf-1], capacitors: [c0g-1], opamps: [oa-jfet-4m, oa-audio-10m], limiters: all}}
"""


@pytest.mark.parametrize("name", list(TOPOLOGIES))
def test_search_hooks_agree_with_the_equations(name, demo_catalog):
    """The tables and gain-network hooks the search reads carry what the topology's own
    equations give (f0, required gain, gain), checked row by row and by finite
    differences; the search's optimality against brute force is in
    tests/test_search_optimality.py."""
    topo = TOPOLOGIES[name]
    rf, cf = demo_catalog.find("resistors", "mf-1"), demo_catalog.find("capacitors", "c0g-1")
    ln_f = math.log(2e3)
    table = topo.network_table(rf, cf, ln_f - 0.02, ln_f + 0.02)
    assert len(table) > 20
    rng = np.random.default_rng(3)
    for i in rng.choice(len(table), 50, replace=False):
        values = dict(zip(table.roles, table.values[i]))
        assert table.ln_f0[i] == pytest.approx(math.log(topo.f0_hz(values)), abs=1e-12)
        assert table.ln_k[i] == pytest.approx(math.log(topo.required_gain(values)), abs=1e-12)
        assert ln_f - 0.02 - 1e-12 <= table.ln_f0[i] <= ln_f + 0.02 + 1e-12
    assert np.all(np.diff(table.ln_f0) >= 0)
    r_gnd = 10e3
    for k_need, r_fb in ((2.9, 22e3), (3.0, 21e3), (3.4, 26.1e3)):
        gv = topo.gain_values(r_gnd, r_fb)
        gain = float(topo.gain(gv))
        g = float(topo.port_conductance(r_gnd, r_fb, k_need))
        # the branch conductance g across the port brings the gain to the required one
        loaded = topo.gain_values(r_gnd, 1 / (1 / r_fb + g))
        assert float(topo.gain(loaded)) == pytest.approx(k_need, rel=1e-12)
        # slope of that conductance in the gain excess m = ln(G/K), at a fixed K
        h = 1e-6
        up = float(topo.port_conductance(r_gnd, r_fb, k_need * math.exp(-h)))
        assert float(topo.port_conductance_slope(r_gnd, r_fb, k_need)) == pytest.approx((up - g) / h, rel=1e-4)
        # d ln G / d ln R of the gain resistors
        bumped = float(topo.gain(topo.gain_values(r_gnd, r_fb * (1 + h))))
        assert float(topo.gain_sensitivity(gain)) == pytest.approx(math.log(bumped / gain) / math.log1p(h), rel=1e-4)


def test_wien_harmonic_transfer_against_the_divider():
    """thd_transfer rests on the Wien network's transfer at n times the oscillation
    frequency, 1 / (K + j p (n - 1/n)): checked against Zp / (Zs + Zp) written out with
    sympy for unequal arms."""
    import sympy as sp

    rs, cs, rp, cp, n = sp.symbols("rs cs rp cp n", positive=True)
    w = n / sp.sqrt(rs * rp * cs * cp)
    zs = rs + 1 / (sp.I * w * cs)
    zp = rp / (1 + sp.I * w * rp * cp)
    beta = zp / (zs + zp)
    k = 1 + rs / rp + cp / cs
    p = sp.sqrt(rs * cp / (rp * cs))
    closed = 1 / (k + sp.I * p * (n - 1 / n))
    for vals in ({rs: 10e3, cs: 10e-9, rp: 12e3, cp: 8.2e-9, n: 3}, {rs: 4.7e3, cs: 22e-9, rp: 3.9e3, cp: 27e-9, n: 5}):
        assert complex(beta.subs(vals).evalf()) == pytest.approx(complex(closed.subs(vals).evalf()), rel=1e-12)
    topo = TOPOLOGIES["wien-bridge"]
    # equal arms at gain 3 are the reference: no change
    assert float(topo.thd_transfer(np.array([3.0]))[0]) == pytest.approx(1.0)
    arms = np.array([[10e3, 10e-9, 12e3, 8.2e-9]])
    kk = 1 + 10e3 / 12e3 + 8.2 / 10
    pp = math.sqrt(10e3 * 8.2e-9 / (12e3 * 10e-9))
    s3 = 3 - 1 / 3

    def t(k, p):
        return (k - 1) ** 2 / k * math.sqrt(k ** 2 + (p * s3) ** 2) / (p * s3)

    assert float(topo.thd_transfer(np.array([kk]), arms)[0]) == pytest.approx(t(kk, pp) / t(3, 1), rel=1e-12)


def test_a_far_warm_start_gives_the_cold_start_answer(demo_catalog):
    """A balance started from a neighbouring point's (``settled(c, cond, near)``, as the
    operating points are predicted) promises the same answer, only sooner. A red-LED limiter at
    50 kHz warm-started at -100 degC from its 25 degC solution fell into the trivial
    root (the fundamental collapsed to nanovolts, reported as the oscillation, though
    the linear analysis says the circuit starts); it is now solved again from the
    describing-function amplitude and equals the cold start's answer."""
    values = dict(rs=25.5e3, cs=110e-12, rp=30.9e3, cp=100e-12, rg=3.32e3, rf=6.04e3, rd=5.9e3, stage_ra=845.0,
                  stage_rb=21e3)
    parts = {"opamp": demo_catalog.find("opamps", "oa-audio-10m"), "limiter": demo_catalog.find("limiters", "led-red")}
    c = make_circuit("wien-bridge", "diode-limiter", values, parts, stage="attenuator")
    near = predict(c, Conditions(5.0, 298.15, 1e3, 100e-12), transient=False)
    for temp_k in (173.15, 203.15):
        cond = Conditions(4.75, temp_k, 1e3, 100e-12)
        cold = predict(c, cond, transient=False)
        warm = predict(c, cond, transient=False, analysed=settled(c, cond, near.balance))
        assert cold.method == warm.method == "harmonic balance"
        assert cold.osc_peak_v > 2.5     # the LED pair's knee at the cold end, through the gain of 2.8
        assert warm.osc_peak_v == pytest.approx(cold.osc_peak_v, rel=1e-9)
        assert warm.freq_hz == pytest.approx(cold.freq_hz, rel=1e-9)
