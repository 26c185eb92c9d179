"""Conformance of every registered circuit plug-in (DEVELOPERS.md, "Adding a topology",
"Adding an amplitude control"). A new plug-in passes these or does not land:

- its slots fit with the others' (roles and designators unique, kinds the catalog knows);
- its equations agree with an independent derivation: the natural frequencies of its own
  netlist, derived symbolically with sympy by nodal analysis (tests/mna.py), put a pole
  pair on the imaginary axis at 2 pi f0 exactly when the gain equals the required gain;
- its loop (what the physics solves) has the same natural frequencies as that
  derivation with the op-amps' small-signal model;
- its netlist simulated by ngspice agrees with partpick's prediction;
- its search hooks agree with brute force: the solver's top N equals exhaustive
  enumeration on a reduced space, and every option's figures equal the equations.

Every registered topology and every control that fits one of its ports needs an example
in EXAMPLES below.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from partpick.catalog import KINDS
from partpick.circuits import (CONTROLS, TOPOLOGIES, Conditions, all_slots, build_netlist, linear, make_circuit,
                               periphery)
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


# (topology, control) -> builder(catalog) of an example circuit; the conditions it runs at
EXAMPLES = {
    ("wien-bridge", "diode-limiter"): lambda cat: _wien(cat, "diode-limiter"),
    ("wien-bridge", "none"): lambda cat: _wien(cat, "none", rf=26e3),
    ("wien-bridge", "jfet-agc"): lambda cat: _wien(cat, "jfet-agc"),
}
COND = Conditions(12.0, 298.15, 10e3, 100e-12)


def _pairs():
    return [(t, c) for t, topo in TOPOLOGIES.items() for c, ctl in CONTROLS.items() if ctl.port in topo.ports]


def test_every_plugin_combination_has_an_example():
    assert set(_pairs()) <= set(EXAMPLES), "add an example circuit for every topology/control pair"


def test_slots_fit_together():
    seen_roles, seen_refs = {}, {}
    plugs = [*TOPOLOGIES.values(), *CONTROLS.values()]
    slots = [s for p in plugs for s in p.slots] + list(periphery.SLOTS)
    for s in slots:
        assert s.kind in KINDS, s
        assert seen_roles.setdefault(s.role, s) is s, f"role {s.role} declared twice"
        assert seen_refs.setdefault(s.designator, s.role) == s.role, f"designator {s.designator} used twice"
    assert set(all_slots()) == set(seen_roles)
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
    roots = mna.characteristic_roots(build_netlist(c, COND), limiter_g=br.g0_s, scale=w0)
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


@pytest.fixture(scope="module")
def spaces(demo_catalog):
    from partpick.search.space import build_space
    from partpick.spec import Spec

    return {name: build_space(Spec.from_text(SPEC.format(topology=name), "conformance.yaml"), demo_catalog)
            for name in TOPOLOGIES}


@pytest.mark.parametrize("name", list(TOPOLOGIES))
def test_search_hooks_against_brute_force(name, spaces):
    from partpick.search.solver import solve
    from partpick.search.space import enumerate_best

    space = spaces[name]
    topo = TOPOLOGIES[name]
    for net in space.nets:  # every option carries what its values give by the equations
        assert net.ln_f0 == pytest.approx(math.log(topo.f0_hz(net.values)), abs=1e-12)
        assert net.ln_k == pytest.approx(math.log(topo.required_gain(net.values)), abs=1e-12)
    for ctl in space.ctls:
        assert ctl.ln_g == pytest.approx(math.log(topo.gain(ctl.values)), abs=1e-12)
    # a reduced space: every k-th option plus those of the full space's best choices, so it
    # holds good BOMs and plenty of bad ones
    best = solve(space, 6)

    def keep(items, extra, count):
        return tuple(dict.fromkeys([*items[:count], *extra]))

    small = dataclasses.replace(space, nets=keep(space.nets[::max(len(space.nets) // 25, 1)], [p.net for p in best], 40),
                                ctls=keep(space.ctls, [p.ctl for p in best], 12),
                                stages=keep(space.stages, [p.stage for p in best], 4))
    assert len(small.nets) * len(small.ctls) * len(small.stages) * len(small.ops) >= 500
    exhaustive = enumerate_best(small, 5)
    assert exhaustive, "the reduced space must hold feasible choices for the comparison to mean anything"
    ours = solve(small, 5)
    assert [p.objective for p in ours] == [p.objective for p in exhaustive]
    assert {p.key() for p in ours} == {p.key() for p in exhaustive}
