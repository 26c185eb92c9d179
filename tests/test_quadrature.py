"""The quadrature (two-integrator) oscillator against outside references.

- Its harmonic transfer (what thd_transfer rests on) against the netlist's own nodal
  equations written out with sympy (ideal op-amps: virtual grounds).
- Its predictions (harmonic balance with all three op-amps) against ngspice, the
  independent simulator, on ten designs: frequency within 0.1 %, the amplitude at each
  load within 2 %, the phase difference between the outputs within 0.2 degree, THD at
  each load within a factor of 1.5, and startup agreeing -- a design damped in the ideal
  equations that the op-amps' lag makes start, and two that must not start (one too
  damped, one the op-amps' loss stops).
- The two-integrator loop's textbook figures: f0 = 1 / (2 pi sqrt(R1 C1 R2 C2)) and the
  90 degree phase between the integrators' outputs (any active-filter text, e.g. Sedra
  and Smith, Microelectronic Circuits, chapter on filters and tuned amplifiers).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from partpick.circuits import TOPOLOGIES, Conditions, build_netlist
from partpick.circuits.quadrature import circuit
from partpick.physics.netlist import Capacitor, OpAmpX, Resistor
from partpick.physics.ngspice import ngspice_available, run_ngspice
from partpick.physics.waveform import analyse, relative_fundamental
from partpick.verify import predict, transient_cycles_for

QUAD = TOPOLOGIES["quadrature"]


def _phasors(net, n_harm: int, w0: float, extra_nodes=()):
    """Node voltages per ampere injected into integrator 2's summing node at n_harm w0
    (the limiter's current), from the netlist's elements by KCL with sympy: resistors,
    capacitors, ideal op-amps (each inverting input held at the reference, its output
    current free)."""
    import sympy as sp

    s = sp.I * sp.Rational(n_harm) * sp.nsimplify(w0, rational=True)
    nodes = sorted({n for el in net.elements for n in (getattr(el, "a", None), getattr(el, "b", None),
                                                       getattr(el, "inn", None), getattr(el, "out", None))
                    if n not in (None, "0", "vcc", "vee")})
    v = {n: sp.Symbol(f"v_{n}") for n in nodes}
    v["0"] = 0
    kcl = {n: 0 for n in nodes}
    inject = {"nb": 1}
    outs = set()

    def branch(a, b, y):
        if a in kcl:
            kcl[a] -= y * (v[a] - v[b])
        if b in kcl:
            kcl[b] += y * (v[a] - v[b])

    for el in net.elements:
        if isinstance(el, Resistor) and not el.name.startswith("RLOAD"):
            branch(el.a, el.b, 1 / sp.nsimplify(el.ohm, rational=True))
        elif isinstance(el, Capacitor) and not el.name.startswith("CLOAD"):
            branch(el.a, el.b, s * sp.nsimplify(el.farad, rational=True))
        elif isinstance(el, OpAmpX):
            outs.add(el.out)
    eqs = [kcl[n] + inject.get(n, 0) for n in nodes if n not in outs]      # op-amp outputs: current free
    eqs += [v[el.inn] for el in net.elements if isinstance(el, OpAmpX)]   # virtual grounds
    sol = sp.solve(eqs, [v[n] for n in nodes], dict=True)[0]
    return {n: complex(sp.N(sol[v[n]])) for n in ("xs", "xc", *extra_nodes)}


@pytest.mark.parametrize("values", [
    dict(ri1=10e3, ci1=10e-9, ri2=12e3, ci2=8.2e-9, rn1=10e3, rn2=10.2e3),
    dict(ri1=4.7e3, ci1=22e-9, ri2=15e3, ci2=6.8e-9, rn1=10e3, rn2=10e3),
])
def test_harmonic_transfer_against_the_nodal_equations(demo_catalog, values):
    """A current I_n injected at integrator 2's summing node gives the cosine
    x2_n = -I_n / (j w0 C2 (n - 1/n) - g) and the sine x1_n = a x2_n / (j n w0 tau1)
    with the loop balanced (1/R4 - a/R3 = -g, g the branch's fundamental conductance,
    so the network without the branch has that negative conductance): checked against
    the netlist's KCL solved with sympy at n = 3, 5, and at n = 1 the integrators' 90
    degrees."""
    g = 5e-6
    a = values["rn2"] / values["rn1"]
    rq = 10e3
    rdamp = 1 / (a / rq - g)
    c = circuit(values["ri1"], values["ci1"], values["ri2"], values["ci2"], rq, rdamp,
                demo_catalog.find("opamps", "oa-jfet-4m"), rn1_ohm=values["rn1"], rn2_ohm=values["rn2"])
    net = build_netlist(c, Conditions(12.0, 298.15, math.inf))
    w0 = 2 * math.pi * c.f0_hz
    tau1 = values["ri1"] * values["ci1"]
    for n in (3, 5):
        ph = _phasors(net, n, w0)
        x2 = -1 / (1j * w0 * values["ci2"] * (n - 1 / n) - g)
        assert ph["xc"] == pytest.approx(x2, rel=1e-9)
        assert ph["xs"] / ph["xc"] == pytest.approx(a / (1j * n * w0 * tau1), rel=1e-9)
    # the thd_transfer hook: n / (w0 C2 R_ref) at n = 3, the g term dropped (g << (n - 1/n) w0 C2)
    arms = np.array([[values[k] for k in ("ri1", "ci1", "ri2", "ci2", "rn1", "rn2")]])
    assert float(QUAD.thd_transfer(np.array([2.0]), arms)[0]) == pytest.approx(3 / (w0 * values["ci2"] * 10e3),
                                                                                rel=1e-9)
    # at the fundamental the sine lags the cosine by exactly 90 degrees (ideal op-amps);
    # the amplitude ratio is output_ratio
    ph = _phasors(net, 1, w0)
    assert ph["xs"] / ph["xc"] == pytest.approx(a / (1j * w0 * tau1), rel=1e-9)
    assert abs(ph["xc"] / ph["xs"]) == pytest.approx(float(QUAD.output_ratio(c.values)), rel=1e-9)


def test_textbook_frequency_and_required_gain():
    """f0 = sqrt(R11/R10) / (2 pi sqrt(R1 C1 R2 C2)); with a unity inverter the
    textbook 1 / (2 pi R C) of equal integrators; the required gain 1 + R10/R11."""
    v = dict(ri1=10e3, ci1=10e-9, ri2=10e3, ci2=10e-9, rn1=10e3, rn2=10e3, rq=10e3, rdamp=10.5e3)
    assert float(QUAD.f0_hz(v)) == pytest.approx(1 / (2 * math.pi * 10e3 * 10e-9), rel=1e-12)
    assert float(QUAD.required_gain(v)) == pytest.approx(2.0)
    assert float(QUAD.gain(v)) == pytest.approx(2.05)


# name: (R1, C1, R2, C2, Rq, R4), op-amp, limiter, Rd, (supply per rail, load R, load C, load2 R, load2 C),
# inverter (R10, R11)
DESIGNS = {
    "1k6-diodes-rd": ((10e3, 10e-9, 10e3, 10e-9, 10e3, 10.5e3), "oa-jfet-4m", "d-si-signal", 4.7e3,
                      (12, 10e3, 0, 10e3, 0), None),
    "4k-led-resolver": ((9.2e3, 4.3e-9, 9.2e3, 4.3e-9, 10e3, 10.5e3), "oa-audio-10m", "led-red", 74.1e3,
                        (15, 2e3, 1e-9, 2e3, 1e-9), None),
    "unequal-integrators-zener": ((8.2e3, 12e-9, 12e3, 8.2e-9, 10e3, 10.7e3), "oa-prec-bip", "z-pair-3v3", 0.0,
                                  (15, 10e3, 0, 4.7e3, 0), None),
    "200hz-lowleak": ((10e3, 82e-9, 10e3, 82e-9, 10e3, 10.4e3), "oa-prec-bip", "d-si-lowleak", 22e3,
                      (12, 100e3, 0, 100e3, 0), None),
    "48k-gbw-makes-it-start": ((4.7e3, 680e-12, 4.7e3, 680e-12, 10e3, 9.9e3), "oa-jfet-4m", "d-si-signal", 3.3e3,
                               (12, 10e3, 0, 10e3, 0), None),
    "heavy-loads-led": ((10e3, 3.3e-9, 10e3, 3.3e-9, 10e3, 10.5e3), "oa-power-4m", "led-red", 47e3,
                        (12, 600, 0, 600, 0), None),
    "inverter-gain-1.02": ((10e3, 10e-9, 10e3, 10e-9, 10e3, 10.5e3), "oa-audio-10m", "d-si-signal", 10e3,
                           (12, 10e3, 0, 10e3, 0), (10e3, 10.2e3)),
    "schottky-rr-single-cell": ((15e3, 2.2e-9, 15e3, 2.2e-9, 10e3, 10.5e3), "oa-lp-rr", "d-schottky", 1e3,
                                (2.5, 10e3, 0, 10e3, 470e-12), None),
    "too-damped": ((10e3, 10e-9, 10e3, 10e-9, 10e3, 9.7e3), "oa-audio-10m", "d-si-signal", 4.7e3,
                   (12, 10e3, 0, 10e3, 0), None),
    "20k-opamp-loss-stops-it": ((10e3, 820e-12, 10e3, 820e-12, 10e3, 10.2e3), "oa-fast-50m", "d-schottky", 2.2e3,
                                (5, 10e3, 0, 10e3, 0), None),
}


def _build(cat, name):
    vals, op, lim, rd, (v, rl, cl, rl2, cl2), inv = DESIGNS[name]
    rn = inv or (10e3, 10e3)
    c = circuit(*vals, cat.find("opamps", op), cat.find("limiters", lim), rd_ohm=rd, rn1_ohm=rn[0], rn2_ohm=rn[1])
    return c, Conditions(v, 298.15, rl, cl, rl2, cl2)


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")
@pytest.mark.parametrize("name", list(DESIGNS))
def test_prediction_agrees_with_ngspice(name, demo_catalog):
    """partpick's prediction (harmonic balance on the loop with all three op-amps'
    A0, GBW and Ro) against ngspice running the same netlist from a kick to its settled
    state, the last 20 cycles measured (zero crossings, FFT over whole cycles, the
    cosine's fundamental against the sine's over the same cycles)."""
    c, cond = _build(demo_catalog, name)
    point = predict(c, cond)
    cycles = transient_cycles_for(point.lin, c.f0_hz, max(point.osc_peak_v, 0.05)) if point.starts else 80
    t, v = run_ngspice(build_netlist(c, cond), cycles=cycles, probes=("osc", "load", "load2"))
    st, st2 = analyse(t, v["load"]), analyse(t, v["load2"])
    starts = st is not None and st.peak_v > 0.05 and not st.decaying
    assert starts == point.starts
    if not point.starts:
        return
    assert point.method == "harmonic balance"
    out = point.outputs["load2"]
    rel = relative_fundamental(t, v["load"], v["load2"])
    assert st.freq_hz == pytest.approx(point.freq_hz, rel=1e-3)
    assert st.peak_v == pytest.approx(point.load_peak_v, rel=0.02)
    assert st2.peak_v == pytest.approx(out.peak_v, rel=0.02)
    assert abs(math.degrees(out.phase_rad - np.angle(rel))) < 0.2
    assert abs(rel) == pytest.approx(out.ratio, rel=0.02)
    for ours, theirs in ((point.load_thd, st.thd_frac), (out.thd, st2.thd_frac)):
        assert theirs / 1.5 <= ours <= theirs * 1.5


def _quad_bom(cat, limiter: str | None, rd: float = 0.0):
    from partpick.bom import Bom, BomLine

    lines = [BomLine("R1", "ri1", "tn-0.1", 9.2e3), BomLine("C1", "ci1", "c0g-1", 4.3e-9),
             BomLine("R2", "ri2", "tn-0.1", 9.2e3), BomLine("C2", "ci2", "c0g-1", 4.3e-9),
             BomLine("R3", "rq", "tn-0.1", 10e3), BomLine("R4", "rdamp", "tn-0.1", 10.5e3),
             BomLine("R10", "rn1", "tn-0.1", 9.2e3), BomLine("R11", "rn2", "tn-0.1", 9.2e3),
             BomLine("U1", "opamp", "oa-audio-10m", 0.0)]
    if limiter is not None:
        lines.append(BomLine("D1,D2", "limiter", limiter, 0.0))
        if rd:
            lines.append(BomLine("R5", "rd", "tn-0.1", rd))
    return Bom(tuple(lines), "dual", "none", "quadrature", "diode-limiter" if limiter else "none")


@pytest.mark.parametrize("limiter,rd", [("led-red", 74.1e3), ("d-si-signal", 0.0), ("z-pair-3v3", 2.2e3),
                                        (None, 0.0)])
def test_schematic_is_the_netlist(demo_catalog, limiter, rd):
    """The drawing's connections, read back from its geometry, are the netlist's nodes
    (both outputs' connectors included), with junction dots on every joint and no
    wire crossing another (tests/test_schematic.py's check); every part labelled."""
    pytest.importorskip("schemdraw")
    from partpick.export.schematic import schematic_svg
    from partpick.spec import Spec
    from tests.conftest import SPECS
    from tests.test_schematic import check_connections

    bom = _quad_bom(demo_catalog, limiter, rd)
    check_connections(bom, Spec.from_yaml(SPECS / "resolver-exciter.yaml"), demo_catalog)
    svg = schematic_svg(bom, demo_catalog)
    for ref in ("R1", "C1", "R2", "C2", "R3", "R4", "R10", "R11", "U1A", "U1B", "U1C", "OUT2"):
        assert f">{ref}<" in svg or f">{ref} " in svg or f">{ref}:" in svg, ref
    assert "U1A, U1B, U1C: 3 channels in 2 oa-audio-10m package(s)" in svg.replace("\n", " ")
