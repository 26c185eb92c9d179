"""The schematic a technician builds from matches the circuit the physics simulates.

Every part of the BOM is drawn with its designator and value; the drawing's connections,
read from its geometry alone (wires, T-joints, ground symbols, net flags;
partpick.export.schematic.schematic_nets), are the netlist's nodes
(partpick.circuits.build_netlist) up to their names: one consistent one-to-one map of
drawn nets to netlist nodes carries every part's terminals onto that part's nodes. Checked
for dual and single supply, every output stage kind, diode pairs with and without Rd,
Zener pairs, no limiter, and the JFET control in its variants (with and without its
integrator, gate network, series resistor, compensating diode and voltage reference). Junction dots sit on every joint of three or more, and no
wire crosses another. Polarised capacitors have their + away from 0 V (the DC reasoning
of any circuits text: ground and the load's side of a coupling capacitor sit at 0 V, the
op-amp's side and the bias node at mid-rail).
"""

from __future__ import annotations

import dataclasses
from collections import Counter

import pytest

pytest.importorskip("schemdraw")

from partpick.bom import Bom, BomLine, load_bom  # noqa: E402
from partpick.circuits import build_netlist  # noqa: E402
from partpick.export.schematic import draw_bom, schematic_nets, schematic_svg  # noqa: E402
from partpick.physics.netlist import Capacitor, DiodeX, JfetX, LimiterX, OpAmpX, Resistor, VSource  # noqa: E402
from partpick.spec import Spec  # noqa: E402
from partpick.verify import operating_conditions  # noqa: E402
from tests.conftest import ROOT, SPECS  # noqa: E402

STAGES = ("none", "follower", "gain", "attenuator")
BASES = {  # (BOM, spec for the operating point)
    "dual": (SPECS / "boms" / "carrier-50khz-01.yaml", SPECS / "carrier-50khz.yaml"),
    "single": (ROOT / "tests" / "golden" / "test-tone-5v-01.yaml", SPECS / "test-tone-5v.yaml"),
}
NOT_PARTS = ("RLOAD", "CLOAD", "RBLEED", "RLOAD2", "CLOAD2")
CONNECTORS = {"OUT": "load", "OUT2": "load2"}   # drawn connector -> the netlist's probe it stands for
SUPPLIES = ("VCC", "VEE")
JFET_BOM = SPECS / "boms" / "clean-tone-1k-jfet.yaml"
JFET_SPEC = SPECS / "clean-tone-1k.yaml"


def variant(bom: Bom, stage: str, limiter: str | None, rd: float = 0.0) -> Bom:
    """``bom`` with another output stage (10k / 15k from its gain network's family) and
    another limiter (None: no amplitude control), with or without Rd."""
    fam = bom.line("rg").family
    lines = [ln for ln in bom.lines if ln.role not in ("stage_ra", "stage_rb", "limiter", "rd")]
    if stage in ("gain", "attenuator"):
        lines += [BomLine("R6", "stage_ra", fam, 10e3), BomLine("R7", "stage_rb", fam, 15e3)]
    if limiter is not None:
        lines.append(BomLine("D1,D2", "limiter", limiter, 0.0))
        if rd:
            lines.append(BomLine("R5", "rd", fam, rd))
    return dataclasses.replace(bom, lines=tuple(lines), stage=stage,
                               control="diode-limiter" if limiter else "none")


def expected(bom: Bom, spec: Spec, catalog):
    """From the netlist: [(drawn refs, netlist nodes, ordered)] and its probes (name -> node)."""
    net = build_netlist(bom.to_circuit(catalog), operating_conditions(spec)["nominal"])
    out = []
    for el in net.elements:
        if isinstance(el, (Resistor, Capacitor)) and el.name not in NOT_PARTS:
            out.append((el.name, (el.a, el.b), False))
        elif isinstance(el, OpAmpX):
            out.append((el.name, (el.inp, el.inn, el.out, el.vcc, el.vee), True))
        elif isinstance(el, LimiterX):
            out.append(("pair", (el.a, el.b), el.limiter.kind))
        elif isinstance(el, JfetX):
            out.append((el.name, (el.d, el.g, el.s), True))
        elif isinstance(el, DiodeX):
            out.append((el.name, (el.a, el.k), True))
        elif isinstance(el, VSource) and el.name not in SUPPLIES:   # a shunt reference: anode at its - end
            out.append((el.name, (el.b, el.a), True))
    return out, net.probes


def on_run(p, w) -> bool:
    """p lies on the straight wire w strictly between its ends."""
    (x1, y1), (x2, y2) = w
    return ((x1 == x2 == p[0] and min(y1, y2) < p[1] < max(y1, y2)) or
            (y1 == y2 == p[1] and min(x1, x2) < p[0] < max(x1, x2)))


class NetMap:
    """A one-to-one map netlist node <-> drawn net, refusing any inconsistency."""

    def __init__(self):
        self.fwd, self.back = {}, {}

    def bind(self, node, net) -> bool:
        if self.fwd.get(node, net) != net or self.back.get(net, node) != node:
            return False
        self.fwd[node], self.back[net] = net, node
        return True


def check_connections(bom: Bom, spec: Spec, catalog) -> None:
    import schemdraw
    import schemdraw.elements as elm

    schemdraw.use("svg")
    drawing = draw_bom(bom, catalog, schemdraw.Drawing(show=False), elm)
    nets = schematic_nets(drawing)
    parts, probes = expected(bom, spec, catalog)
    load = probes["load"]
    m = NetMap()
    drawn = set(nets) - set(CONNECTORS)
    want = {name for name, _, _ in parts if name != "pair"} | ({"D1", "D2"} if any(n == "pair" for n, _, _ in parts)
                                                               else set())
    assert drawn == want, (sorted(drawn), sorted(want))
    for connector, probe in CONNECTORS.items():
        assert (connector in nets) == (probe in probes), connector
        if connector in nets:
            assert m.bind(probes[probe], nets[connector][0])
    ordered = [p for p in parts if p[2] is True]
    for name, nodes, _ in ordered:
        for node, net in zip(nodes, nets[name]):
            assert m.bind(node, net), (name, node, net)
    pending = [p for p in parts if p[2] is not True]
    while pending:
        left = []
        for name, nodes, kind in pending:
            if name == "pair":
                a, b = nodes
                d1, d2 = nets["D1"], nets["D2"]
                if kind == "zener-pair":  # D1 and D2 opposed in series, anodes joined: cathodes on a and b
                    pairs = [(a, d1[1]), (b, d2[1])]
                    assert d1[0] == d2[0] and sum(d1[0] in t for t in nets.values()) == 2
                else:  # anti-parallel: D1 a -> b, D2 b -> a
                    pairs = [(a, d1[0]), (b, d1[1])]
                    assert (d2[0], d2[1]) == (d1[1], d1[0])
            else:
                x, y = nets[name]
                a, b = nodes
                if m.fwd.get(a) == x or m.fwd.get(b) == y:
                    pairs = [(a, x), (b, y)]
                elif m.fwd.get(a) == y or m.fwd.get(b) == x:
                    pairs = [(a, y), (b, x)]
                else:
                    left.append((name, nodes, kind))
                    continue
            for node, net in pairs:
                assert m.bind(node, net), (name, node, net)
        assert len(left) < len(pending), f"cannot place {left}"
        pending = left
    # junction dots on every joint of three or more (wire ends and terminals meeting, or
    # landing on a wire's run), and no wire crossing another
    ends = Counter(p for w in drawing.wires for p in w) + Counter(p for part in drawing.parts for p in part.points)
    joints = {p for p, n in ends.items() if n >= 3} | {p for p in ends for w in drawing.wires if on_run(p, w)}
    assert joints and joints <= set(drawing.dots), joints - set(drawing.dots)
    assert not drawing.crossings, drawing.crossings
    # polarised capacitors: + away from 0 V
    zero = {m.fwd["0"], m.fwd[load]} if "0" in m.fwd else {m.fwd[load]}
    for part in drawing.parts:
        if part.polar and part.ref.startswith("C"):
            plus, minus = nets[part.ref]
            assert plus not in zero and minus in zero, part.ref


@pytest.mark.parametrize("stage", STAGES)
@pytest.mark.parametrize("supply", ["dual", "single"])
def test_drawing_connections_are_the_netlist(demo_catalog, supply, stage):
    bom_path, spec_path = BASES[supply]
    bom = variant(load_bom(bom_path, demo_catalog), stage, "d-si-signal")
    check_connections(bom, Spec.from_yaml(spec_path), demo_catalog)


@pytest.mark.parametrize("limiter,rd", [("d-si-signal", 4.7e3), ("led-red", 0.0), ("z-pair-3v3", 0.0),
                                        ("z-pair-3v3", 2.2e3), (None, 0.0)])
@pytest.mark.parametrize("supply", ["dual", "single"])
def test_every_limiter_kind_is_drawn_as_built(demo_catalog, supply, limiter, rd):
    bom_path, spec_path = BASES[supply]
    bom = variant(load_bom(bom_path, demo_catalog), "gain", limiter, rd)
    check_connections(bom, Spec.from_yaml(spec_path), demo_catalog)


def test_single_channel_op_amp_buffer_is_a_second_channel_drawn(demo_catalog):
    bom_path, spec_path = BASES["dual"]
    bom = variant(load_bom(bom_path, demo_catalog), "follower", "d-si-signal")
    bom = dataclasses.replace(bom, lines=tuple(dataclasses.replace(ln, family="oa-prec-bip") if ln.role == "opamp"
                                               else ln for ln in bom.lines))
    check_connections(bom, Spec.from_yaml(spec_path), demo_catalog)
    assert "two single-channel oa-prec-bip packages" in schematic_svg(bom, demo_catalog).replace("\n", " ")


@pytest.mark.parametrize("supply", ["dual", "single"])
def test_every_part_is_labelled_with_designator_and_value(demo_catalog, supply):
    from partpick.bom import ROLES, value_text
    from partpick.pricing import channel_refs

    bom_path, _ = BASES[supply]
    bom = variant(load_bom(bom_path, demo_catalog), "gain", "d-si-signal", 4.7e3)
    svg = schematic_svg(bom, demo_catalog)
    for ln in bom.lines:
        refs = channel_refs(ln.ref, bom.channels) if ln.role == "opamp" else ln.ref.split(",")
        for ref in refs:
            assert f">{ref}<" in svg or f">{ref} " in svg, ref
        if ROLES[ln.role][1]:
            assert f">{value_text(ln)}<" in svg, (ln.ref, value_text(ln))
        else:
            assert ln.family in svg
    for word in ("OUT", "+V", "decoupled", "100 nF"):
        assert word in svg
    if supply == "single":
        assert "VREF" in svg and "mid-rail" in svg
    else:
        assert "-V" in svg


def jfet_variant(bom: Bom, stage: str = "none", drop=(), add=(), single: Bom | None = None) -> Bom:
    """The demo JFET BOM with another output stage (10k / 15k of its gain network's
    family), without the roles ``drop``, with the lines ``add`` and, given a single-supply
    BOM, on a single supply with that BOM's bias network and coupling capacitor."""
    fam = bom.line("rg").family
    lines = [ln for ln in bom.lines if ln.role not in drop]
    if stage in ("gain", "attenuator", "buffered-attenuator"):
        lines += [BomLine("R6", "stage_ra", fam, 10e3), BomLine("R7", "stage_rb", fam, 15e3)]
    lines += list(add)
    kind = "dual"
    if single is not None:
        kind = "single"
        lines += [ln for ln in single.lines if ln.role in ("bias_top", "bias_bottom", "bias_c", "coupling_c")]
    return dataclasses.replace(bom, lines=tuple(lines), stage=stage, supply_kind=kind)


INTEGRATOR = ("agc_ri", "agc_ci", "agc_rz", "agc_cp", "clamp", "agc_rr1", "agc_rr2", "comp", "agc_rc")
REFERENCE = (BomLine("U2", "vref", "vr-shunt-2v5", 0.0), BomLine("R18", "agc_rrb", "mf-1", 10e3))


@pytest.mark.parametrize("stage", STAGES + ("buffered-attenuator",))
def test_jfet_control_is_drawn_as_built_with_every_stage(demo_catalog, stage):
    bom = jfet_variant(load_bom(JFET_BOM, demo_catalog), stage)
    check_connections(bom, Spec.from_yaml(JFET_SPEC), demo_catalog)


@pytest.mark.parametrize("drop,add", [
    (("comp", "agc_rc"), REFERENCE),                          # the divider from a voltage reference, no D5
    (("agc_rz", "agc_cp", "clamp"), ()),                      # a bare integrator capacitor
    (("agc_rs", "agc_rla"), ()),                              # no series resistor, gate not linearised
    (("agc_rla", "agc_rlb"), ()),                             # the control node straight on the gate
    (INTEGRATOR, ()),                                         # the naive control: the hold drives the gate
], ids=["reference", "bare-integrator", "no-r10-no-r11", "no-gate-network", "no-integrator"])
def test_every_jfet_control_variant_is_drawn_as_built(demo_catalog, drop, add):
    bom = jfet_variant(load_bom(JFET_BOM, demo_catalog), "follower", drop, add)
    check_connections(bom, Spec.from_yaml(JFET_SPEC), demo_catalog)


def test_jfet_control_on_a_single_supply_is_drawn_as_built(demo_catalog):
    single = load_bom(BASES["single"][0], demo_catalog)
    bom = jfet_variant(load_bom(JFET_BOM, demo_catalog), "gain", (), REFERENCE, single)
    check_connections(bom, Spec.from_yaml(BASES["single"][1]), demo_catalog)
    svg = schematic_svg(bom, demo_catalog)
    for word in ("CTL", "OSC", "U1C", "jf-n-gp", "vr-shunt-2v5"):
        assert word in svg, word


def test_every_plug_in_draws_its_own_parts():
    from partpick.circuits import CONTROLS, TOPOLOGIES

    for plug in (*TOPOLOGIES.values(), *CONTROLS.values()):
        assert callable(getattr(plug, "draw", None)), plug.name
