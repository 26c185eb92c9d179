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
    # the sine alone: the cosine's harmonic over n (x1_n / x2_n = a / (j n w0 tau1), checked above)
    assert float(QUAD.thd_transfer(np.array([2.0]), arms, all_outputs=False)[0]) == pytest.approx(
        1 / (w0 * values["ci2"] * 10e3), rel=1e-9)
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
    assert "U1A, U1B, U1C: 2 oa-audio-10m packages (2 channel(s) each)" in svg.replace("\n", " ")


# -- the spec's fields for a second output, and topology: auto ---------------------------------------

QUAD_FIELDS = ("load_cosine: {resistance: 2 kohm, capacitance: 1 nF}\n"
               "quadrature: {phase_error: 0.5 deg, amplitude_match: 1 %}\n")


def test_spec_reads_the_second_output_and_the_quadrature_requirements():
    """load_cosine is a load as 'load' is; the phase error reads in degrees (SI Brochure,
    Table 8: 1 deg = pi/180 rad) or radians; an angle without its unit is refused, as a
    bare fraction is."""
    from partpick.errors import SpecError
    from partpick.spec import Spec
    from tests.conftest import VALID_SPEC

    text = VALID_SPEC.replace("topology: wien-bridge", "topology: quadrature") + QUAD_FIELDS
    spec = Spec.from_text(text, "q.yaml")
    assert spec.topology == "quadrature"
    assert (spec.load_cosine.resistance_ohm, spec.load_cosine.capacitance_f) == (2e3, pytest.approx(1e-9))
    assert spec.quadrature.phase_error_rad == pytest.approx(0.5 * math.pi / 180, rel=1e-12)
    assert spec.quadrature.amplitude_match_frac == pytest.approx(0.01)
    assert Spec.from_text(text.replace("0.5 deg", "8.7 mrad"), "q.yaml").quadrature.phase_error_rad == \
        pytest.approx(8.7e-3)
    with pytest.raises(SpecError) as exc:
        Spec.from_text(text.replace("phase_error: 0.5 deg", "phase_error: 0.5"), "q.yaml")
    assert "'quadrature.phase_error' needs its unit" in str(exc.value)
    assert Spec.from_text(VALID_SPEC, "w.yaml").load_cosine is None


@pytest.mark.parametrize("change,field,words", [
    # a second output asked of the one-output Wien bridge
    (("", QUAD_FIELDS), "load_cosine", "has one"),
    # the quadrature oscillator: both outputs straight to their loads, dual supply, no 'ground' port
    (("topology: wien-bridge", "topology: quadrature\noutput_stage: follower"), "output_stage", "not offered"),
    (("kind: dual, min: 10.8 V, max: 13.2 V", "kind: single, min: 10.8 V, max: 13.2 V"), "supply", "not offered"),
    (("topology: wien-bridge", "topology: quadrature\namplitude_control: jfet-agc"), "amplitude_control",
     "'ground' port"),
])
def test_a_spec_asking_what_its_topology_lacks_is_refused_on_one_line(demo_catalog, change, field, words):
    from partpick.errors import SpecError
    from partpick.pipeline import design
    from partpick.spec import Spec
    from tests.conftest import VALID_SPEC

    old, new = change
    text = VALID_SPEC.replace("topology: wien-bridge", "topology: quadrature") if field == "supply" else VALID_SPEC
    text = (text + new) if not old else text.replace(old, new)
    with pytest.raises(SpecError) as exc:
        design(Spec.from_text(text, "x.yaml"), demo_catalog)
    assert exc.value.field == field and words in str(exc.value)
    assert "\n" not in str(exc.value)


def test_auto_with_a_second_output_means_the_quadrature_oscillator():
    from partpick.circuits import fitting_topologies
    from partpick.spec import Spec
    from tests.conftest import VALID_SPEC

    auto = VALID_SPEC.replace("topology: wien-bridge", "topology: auto")
    assert fitting_topologies(Spec.from_text(auto, "a.yaml")) == ("wien-bridge", "quadrature")
    assert fitting_topologies(Spec.from_text(auto + QUAD_FIELDS, "a.yaml")) == ("quadrature",)
    single = auto.replace("kind: dual", "kind: single")
    assert fitting_topologies(Spec.from_text(single, "a.yaml")) == ("wien-bridge",)


@pytest.mark.slow
def test_auto_ranks_both_topologies_together(demo_catalog):
    """topology: auto on the audio test-tone spec: each topology designed as if the spec
    named it, the union ranked by the spec's keys (rank.rank), the table naming each
    row's topology."""
    import dataclasses
    import json

    from partpick.export.summary import design_output
    from partpick.pipeline import design
    from partpick.rank import rank
    from partpick.spec import Spec
    from tests.conftest import SPECS

    spec = dataclasses.replace(Spec.from_yaml(SPECS / "audio-tone-1k.yaml"), topology="auto")
    d = design(spec, demo_catalog, samples=2000)
    each = [design(dataclasses.replace(spec, topology=t), demo_catalog, samples=2000).ranked
            for t in ("wien-bridge", "quadrature")]
    assert all(rows and rows[0].verdict.passed for rows in each)   # both topologies design the spec
    want = rank([r for rows in each for r in rows], spec.rank_by)[:spec.results]
    assert [r.bom for r in d.ranked] == [r.bom for r in want]
    text = design_output(d, spec, "a.yaml", demo_catalog, "text")
    header = next(line for line in text.splitlines() if line.startswith("#  verdict"))
    assert header.split()[-1] == "topology"
    rows = json.loads(design_output(d, spec, "a.yaml", demo_catalog, "json"))["candidates"]
    for i, r in enumerate(d.ranked, 1):
        row = next(line for line in text.splitlines() if line.startswith(f"{i}  "))
        assert row.split()[-1] == r.bom.topology == rows[i - 1]["topology"]


def test_resolver_exciter_checks_both_outputs(demo_catalog):
    """The demo resolver exciter's #1 design: both loads within the amplitude and THD
    limits, the phase and amplitude match within the spec's quadrature requirements,
    each checked at every operating point; the Monte Carlo counts the quadrature share."""
    from partpick.pipeline import design
    from partpick.spec import Spec
    from tests.conftest import SPECS

    spec = Spec.from_yaml(SPECS / "resolver-exciter.yaml")
    top = design(spec, demo_catalog, results=1, samples=2000).ranked[0]
    checks = {c.name: c for c in top.verdict.checks}
    for name in ("amplitude at cosine load (nominal)", "amplitude at cosine load over supply and temperature",
                 "THD at cosine load", "phase error at cosine load", "amplitude match at cosine load"):
        assert checks[name].passed, checks[name]
    assert checks["phase error at cosine load"].high == pytest.approx(math.radians(0.5))
    assert top.verdict.passed and "quadrature" in top.mc.share
    assert top.bom.topology == "quadrature"
