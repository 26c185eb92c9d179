"""The JFET amplitude control: an n-channel JFET's channel as a voltage-controlled
resistor at the topology's 'ground' port (for the Wien bridge across Rg, from the
inverting input to the reference), so more channel conductance means more gain; a peak
detector (diode, hold capacitor, bleed resistor) at the oscillator output; and either
the hold node driving the gate directly (the amplitude is then set by the JFET's
pinch-off) or an error integrator comparing the hold with a reference divider (the
amplitude is then set by the reference).

Parts: the JFET Q1, optionally behind a series resistor R10; the gate network R11
(drain to gate) and R12 (control node to gate): two equal resistors feed half the
drain-source voltage back to the gate and cancel the channel's square-law term (the JFET
voltage-controlled-resistor application notes); without R11 the gate follows the control
node through R12 (or directly). Detector: D3, hold capacitor C5 and bleed resistor R13
to the reference; without an integrator D3 points from the hold to the output (the hold
goes negative, as the gate must), with one it points from the output to the hold.
Integrator: op-amp channel U1B (U1C beside a buffer), input resistor R14, capacitor C6
with the zero R15 in series, C7 across them (takes the ripple off the proportional
path), clamp diode D4 from its output to its inverting input (so
it cannot wind up to the rail while the oscillation builds), the non-inverting input on
the divider R16 / R17 from the positive rail or from the voltage reference U2 (biased by
R18), optionally through the diode D5 biased by R19 to the reference: D5 drops what the
detector diode drops and drifts as it does, so the amplitude keeps still over
temperature (the classic compensation of a rectifier's diode by a matched one).

At rest the JFET conducts most (its gate at zero or a little above), so the circuit
starts whenever that gain exceeds what the network needs.

Search hook: :meth:`JfetAgc.search_designs` (``spec, catalog, topology, f_hz,
gain_family, temps_k, *, opamp=None, amps_v=None, linearise=(True, False)``) returns a
short list of complete control designs
(:class:`partpick.circuits.options.ControlDesign`), one per JFET family, amplitude and
gate network the design rule (:mod:`partpick.circuits.jfet_design`) can make: the
control's slots (role, value, family or part id), the gain network it needs, the
oscillator amplitude at the minimum, nominal and maximum temperature (V peak), THD,
frequency pull (ln), d ln(amplitude) / d(gain excess), the amplitude spread (3 sigma,
relative), settling time and the op-amp channels it adds; each cached on disk by
content. The full contract: :mod:`partpick.circuits.jfet_search`.
"""

from __future__ import annotations

import functools
import math

import numpy as np

from partpick.circuits import periphery
from partpick.circuits.base import Circuit, Conditions, Slot
from partpick.physics.agc import Agc, Integrator, rest_branch, settled
from partpick.physics.agc_dynamics import agc_damping, agc_settling
from partpick.physics.detector import Detector
from partpick.physics.envelope import START_V
from partpick.physics.jfet import VcrBranch, jfet_at
from partpick.physics.junction import junctions_at
from partpick.physics.netlist import Capacitor, DiodeX, JfetX, OpAmpX, Resistor, VSource
from partpick.physics.opamp import swing_limits

__all__ = ["JfetAgc", "CONTROL", "SLOTS", "model", "solved", "v_plus", "has_integrator"]

SLOTS = (
    Slot("jfet", "jfets", "Q1", "JFET, the variable resistor across the gain network's ground leg"),
    Slot("agc_rs", "resistors", "R10", "in series with the JFET channel", optional=True),
    Slot("agc_rla", "resistors", "R11", "gate feedback from the drain (linearisation)", optional=True),
    Slot("agc_rlb", "resistors", "R12", "gate resistor from the control node", optional=True),
    Slot("detector", "diodes", "D3", "peak detector diode"),
    Slot("agc_ch", "capacitors", "C5", "detector hold capacitor"),
    Slot("agc_rb", "resistors", "R13", "detector bleed resistor"),
    Slot("agc_ri", "resistors", "R14", "integrator input resistor", optional=True),
    Slot("agc_ci", "capacitors", "C6", "integrator capacitor", optional=True),
    Slot("agc_rz", "resistors", "R15", "integrator zero, in series with its capacitor", optional=True),
    Slot("agc_cp", "capacitors", "C7", "across the integrator's feedback: filters the detector's ripple",
         optional=True),
    Slot("clamp", "diodes", "D4", "integrator clamp diode", optional=True),
    Slot("agc_rr1", "resistors", "R16", "reference divider, upper", optional=True),
    Slot("agc_rr2", "resistors", "R17", "reference divider, lower", optional=True),
    Slot("vref", "references", "U2", "voltage reference", optional=True),
    Slot("agc_rrb", "resistors", "R18", "voltage reference bias resistor", optional=True),
    Slot("comp", "diodes", "D5", "compensating diode in the reference path", optional=True),
    Slot("agc_rc", "resistors", "R19", "compensating diode's bias resistor", optional=True),
)

T0_K = 298.15


def has_integrator(c: Circuit) -> bool:
    return c.value("agc_ci") > 0


def reference_source_v(c: Circuit, cond: Conditions) -> float:
    """The voltage the reference divider hangs from, against the signal reference (V):
    the voltage reference's, or the positive rail's."""
    ref = c.part("vref")
    if ref is not None:
        return ref.voltage_v
    vcc, _, sig = cond.rails(c.supply_kind)
    return vcc - sig


def v_plus(c: Circuit, cond: Conditions, src_v: float | None = None) -> float:
    """The integrator's reference, V against the signal reference: the divider's
    output, less the compensating diode's drop when there is one (the divider's
    Thevenin source V_th behind R16 || R17, then D5 and R19 to the reference:
    V_th - I (R_th + R19) = V_D5(I), solved by bisection); src_v: the voltage the
    divider hangs from (default: the circuit's)."""
    r1, r2 = c.value("agc_rr1"), c.value("agc_rr2")
    v_th = (reference_source_v(c, cond) if src_v is None else src_v) * r2 / (r1 + r2)
    comp = c.part("comp")
    if comp is None:
        return v_th
    j = junctions_at(comp, cond.temp_k)[0]
    r_th, rc = r1 * r2 / (r1 + r2), c.value("agc_rc")
    lo, hi = 0.0, max(v_th, 0.0) / (r_th + rc)
    for _ in range(80):
        i = 0.5 * (lo + hi)
        if v_th - i * (r_th + rc) > float(j.voltage(np.array([i]))[0]):
            lo = i
        else:
            hi = i
    return 0.5 * (lo + hi) * rc


def model(c: Circuit, cond: Conditions) -> Agc:
    """The control of ``c`` at ``cond`` as the physics sees it (:class:`Agc`)."""
    temp = cond.temp_k
    r_la = c.value("agc_rla")
    vcr = VcrBranch(jfet_at(c.part("jfet"), temp), c.value("agc_rs"), r_la if r_la > 0 else math.inf,
                    c.value("agc_rlb"))
    integ = has_integrator(c)
    det = Detector(junctions_at(c.part("detector"), temp)[0], integ, c.value("agc_ch"),
                   ((1.0 / c.value("agc_rb"), 0.0),))
    it = None
    if integ:
        clamp = c.part("clamp")
        it = Integrator(c.value("agc_ri"), c.value("agc_ci"), c.value("agc_rz"), v_plus(c, cond), c.opamp,
                        swing_limits(c.opamp, cond.rails(c.supply_kind)),
                        junctions_at(clamp, temp)[0] if clamp is not None else None, c.value("agc_cp"))
    return Agc(vcr, det, it)


def integrator_channel(c: Circuit) -> str:
    """The op-amp channel of the integrator: the one after the topology's and the
    output buffer's."""
    used = c.topology.channels + (1 if periphery.has_buffer(c) else 0)
    return "U1" + chr(ord("A") + used)


class JfetAgc:
    """The JFET amplitude control (see module docstring)."""

    name = "jfet-agc"
    slots = SLOTS
    port = "ground"
    slow = True         # settles over many cycles: its own dynamics say how long
    reads_supply = True     # its rest state (the gate's bias) follows the supply
    supplies = ("dual",)   # the gate swings below the source: its design rule plans a dual supply

    def op_channels(self, roles) -> int:
        """Op-amp channels the control uses, given the roles a BOM fills."""
        return 1 if "agc_ci" in set(roles) else 0

    def branch(self, c: Circuit, temp_k: float, cond: Conditions | None = None):
        """The branch at rest (the control node at its DC operating point), for the
        linear analysis: :func:`partpick.physics.agc.rest_branch`. Without ``cond`` a
        15 V supply stands in: the rest state depends on the supply only through the
        reference, and the gate junctions clamp the JFET's gate whatever it is."""
        cond = cond or Conditions(15.0, temp_k, math.inf)
        return rest_branch(model(c, cond))

    def rest_conductance(self, c: Circuit) -> float:
        """The branch's conductance at rest (S): the real part of its small-signal
        admittance at the topology's f0, the JFET at its rest DC point."""
        return _rest_conductance(c)

    def balance(self, c: Circuit, cond: Conditions, loop, lin, *, kmax: int = 21, start=None):
        """The settled oscillation (:func:`partpick.physics.agc.settled`)."""
        if start is None:
            return solved(c, cond)[2]
        hb, _ = settled(loop, model(c, cond), lin, cond.rails(c.supply_kind), start=start)
        return hb

    def settling(self, c: Circuit, cond: Conditions, loop, lin, hb, band: tuple[float, float],
                 start_v: float = START_V, clip_v: float = math.inf):
        """The envelope from power-on (:func:`partpick.physics.agc_dynamics.agc_settling`);
        band (V) at the oscillator output; None when it does not start."""
        loop, lin, hb, st = solved(c, cond)
        if st is None:
            return None
        return agc_settling(loop, model(c, cond), st, hb.osc_peak_v, hb.freq_hz, band, start_v=start_v,
                            clip_v=clip_v)

    def damping(self, c: Circuit, cond: Conditions, clip_v: float = math.inf) -> float | None:
        """The damping ratio of the control's loop at its settled point
        (:func:`partpick.physics.agc_dynamics.agc_damping`: the linearised cycle map, no
        run from power-on); None when it does not start."""
        loop, lin, hb, st = solved(c, cond)
        return None if st is None else agc_damping(loop, model(c, cond), st, hb.osc_peak_v, hb.freq_hz, clip_v)[0]

    def netlist(self, c: Circuit, a: str, b: str, nodes: dict | None = None) -> list:
        """The branch from port node a (R10, the JFET's drain) to b (its source), the
        gate network, the detector at the oscillator output and, with an integrator,
        the integrator and its reference (see module docstring for the designators)."""
        nodes = nodes or {}
        out, ref = nodes.get("out", "out"), nodes.get("ref", b)
        vcc, neg = nodes.get("vcc", "vcc"), nodes.get("neg", "vee")
        v = c.value
        els: list = []
        drain = a
        if v("agc_rs") > 0:
            drain = "qd"
            els.append(Resistor("R10", a, drain, v("agc_rs")))
        ctl = "hc"
        gate = "qg" if v("agc_rlb") > 0 else ctl
        els.append(JfetX("Q1", drain, gate, b, c.part("jfet")))
        if v("agc_rla") > 0:
            els.append(Resistor("R11", drain, gate, v("agc_rla")))
        if v("agc_rlb") > 0:
            els.append(Resistor("R12", gate, ctl, v("agc_rlb")))
        det = c.part("detector")
        hold = "hh" if has_integrator(c) else ctl
        pair = (out, hold) if has_integrator(c) else (hold, out)
        els += [DiodeX("D3", pair[0], pair[1], det, det.cj_f),
                Capacitor("C5", hold, ref, v("agc_ch")),
                Resistor("R13", hold, ref, v("agc_rb"))]
        if not has_integrator(c):
            return els
        u = integrator_channel(c)
        els += [Resistor("R14", hold, "im", v("agc_ri")),
                OpAmpX(u, "ip", "im", ctl, vcc, neg, c.opamp)]
        if v("agc_rz") > 0:
            els += [Capacitor("C6", "im", "iz", v("agc_ci")), Resistor("R15", "iz", ctl, v("agc_rz"))]
        else:
            els.append(Capacitor("C6", "im", ctl, v("agc_ci")))
        if v("agc_cp") > 0:
            els.append(Capacitor("C7", "im", ctl, v("agc_cp")))
        clamp = c.part("clamp")
        if clamp is not None:
            els.append(DiodeX("D4", ctl, "im", clamp, clamp.cj_f))
        src = vcc
        if c.part("vref") is not None:
            src = "vk"
            els += [Resistor("R18", vcc, src, v("agc_rrb")), VSource("U2", src, ref, c.part("vref").voltage_v)]
        tap = "ip"
        if c.part("comp") is not None:
            tap = "it"
            els += [DiodeX("D5", tap, "ip", c.part("comp"), c.part("comp").cj_f), Resistor("R19", "ip", ref, v("agc_rc"))]
        els += [Resistor("R16", src, tap, v("agc_rr1")), Resistor("R17", tap, ref, v("agc_rr2"))]
        return els

    def search_designs(self, spec, catalog, topology, f_hz: float, gain_family, temps_k, *, opamp=None,
                       amps_v=None, linearise=(True, False)) -> tuple:
        """The search hook: a short list of complete control designs
        (:class:`partpick.circuits.options.ControlDesign`) for ``topology`` at f_hz (Hz)
        with gain resistors of ``gain_family``, judged at temps_k (min, nominal, max; K),
        each with its slot values, families and parts, the gain network it needs, the
        oscillator amplitude at the three temperatures, THD, pull, d ln(amplitude) /
        d(gain excess), amplitude spread, settling time and op-amp channels. Cached on
        disk by content. The contract: :mod:`partpick.circuits.jfet_search`."""
        from partpick.circuits.jfet_search import search_designs

        return search_designs(spec, catalog, topology, f_hz, gain_family, temps_k, opamp=opamp, amps_v=amps_v,
                              linearise=linearise)

    def amplitude_share_bound(self, spec, catalog) -> float:
        """The most builds (fraction) whose amplitude any design of the search hook can
        hold within the spec's tolerance, before designing one
        (:func:`partpick.circuits.jfet_search.amplitude_share_bound`)."""
        from partpick.circuits.jfet_search import amplitude_share_bound

        return amplitude_share_bound(spec, catalog)

    def spread_model(self, c: Circuit, cond: Conditions):
        """The builds' share of the control's part spreads for the Monte Carlo
        (:func:`partpick.circuits.jfet_spread.spread_model`)."""
        from partpick.circuits.jfet_spread import spread_model

        return spread_model(c, cond)

    def amplitude_spread(self, c: Circuit, temp_k: float, cond: Conditions | None = None) -> float:
        """Part-to-part spread of the amplitude (3 sigma, relative): with an integrator
        the detector diode's forward-voltage spread and the reference's tolerance on the
        divider's output (A = V+ + V_drop); without one the JFET's pinch-off range
        (the hold, so the amplitude, follows VTO volt for volt, and the gate network
        doubles it when linearised)."""
        det = c.part("detector")
        cond = cond or Conditions(15.0, temp_k, math.inf)
        hb = solved(c, cond)[2]
        if hb is None:
            return 0.0
        amp = hb.osc_peak_v
        if not has_integrator(c):
            j = c.part("jfet")
            gain = 2.0 if c.value("agc_rla") > 0 else 1.0
            return gain * max(j.vto_v - j.vto_min_v, j.vto_max_v - j.vto_v) / amp
        ref = c.part("vref")
        tol = 0.0
        if ref is not None:
            tol = ref.tolerance_frac * (1.0 if ref.distribution == "normal" else math.sqrt(3.0))
        comp = c.part("comp")
        return math.sqrt(det.vf_spread_v ** 2 + (tol * v_plus(c, cond)) ** 2
                         + (comp.vf_spread_v if comp is not None else 0.0) ** 2) / amp


    # -- drawing --------------------------------------------------------------------------------
    def draw(self, sheet, a, b, up: float, out=None) -> None:
        """Draw the control on ``sheet`` (:class:`partpick.export.schematic.Sheet`) as
        :meth:`netlist` wires it. At the port (a: the netlist's first port node, the
        drain's side; b: the second, where the source goes; ``up``: the clear side) the
        branch: R10 from a to the drain node, Q1 with its source at b, R11 from the drain
        node to the gate, R12 from the gate to the control node. The rest stands apart
        beside the port (:func:`_draw_loop`), joined to the branch by the net flag CTL
        (the control node) and to the oscillator output ``out`` by the net flag OSC."""
        s = 1.0 if b[0] > a[0] else -1.0       # towards b, where the gate network goes
        y1 = a[1] + 3.2 * up
        top = (b[0], y1)                       # the drain node
        sheet.wire(a, (a[0], y1))
        if sheet.has("agc_rs"):
            sheet.resistor("agc_rs", (a[0], y1), top)
        else:
            sheet.wire((a[0], y1), top)
        source = (b[0], b[1] + 0.8 * up)      # clear of the port's own labels
        sheet.wire(b, source)
        q = sheet.jfet("jfet", source, gate_side=s, up=up)
        sheet.wire(top, q["drain"])
        gate = (b[0] + 1.7 * s, q["gate"][1])
        sheet.wire(q["gate"], gate)
        if sheet.has("agc_rla"):
            sheet.wire(top, (gate[0], y1))
            sheet.resistor("agc_rla", (gate[0], y1), gate)
        ctl = gate
        if sheet.has("agc_rlb"):
            ctl = (b[0] + 4.2 * s, gate[1])
            sheet.resistor("agc_rlb", gate, ctl, loc="bottom")
        sheet.flag("CTL", ctl, "right" if s > 0 else "left")
        _draw_loop(sheet, (min(a[0], b[0]) - 8.0, a[1] + (6.0 if up > 0 else -19.0)))
        osc = (out[0], out[1] + 4.8 * up)
        sheet.wire(out, osc)
        sheet.flag("OSC", osc, "right")


def _draw_loop(sheet, origin) -> None:
    """The detector, integrator and reference of the control from ``origin`` (the left
    end of the detector row is 6 units above it): the OSC flag, D3 to the hold node with
    C5 and R13 to the reference; without an integrator the hold is the control node
    (flag CTL); with one, R14 into the op-amp channel after the others, its feedback C6
    (with R15), C7 and the clamp D4 over it, the CTL flag at its output, and below its
    +input D5 (with R19) from the divider's tap, the divider R16 / R17, and R16's top at
    +V or at the reference U2 (fed by R18 from +V)."""
    x0, y0 = origin

    def at(x: float, y: float):
        return (x0 + x, y0 + y)

    yd = 6.0
    integ = sheet.has("agc_ci")
    sheet.flag("OSC", at(0.0, yd), "left")
    hold = at(2.5, yd)
    d3 = sheet.ref("detector")
    ends = (at(0.0, yd), hold) if integ else (hold, at(0.0, yd))    # anode first
    sheet.part(d3, sheet.elm.Diode(), *ends, f"{d3}\n{sheet.value('detector')}", polar=True)
    sheet.capacitor("agc_ch", hold, at(2.5, yd - 2.4))
    sheet.reference(at(2.5, yd - 2.4))
    sheet.wire(hold, at(4.3, yd))
    sheet.resistor("agc_rb", at(4.3, yd), at(4.3, yd - 2.4))
    sheet.reference(at(4.3, yd - 2.4))
    if not integ:
        sheet.wire(at(4.3, yd), at(5.5, yd))
        sheet.flag("CTL", at(5.5, yd), "right")
        return
    sheet.wire(at(4.3, yd), at(5.3, yd))
    sheet.resistor("agc_ri", at(5.3, yd), at(7.8, yd))
    im = at(7.8, yd)
    unit = sheet.ref("opamp") + chr(ord("A") + sheet.bom.channels - 1)    # the last channel
    pins = sheet.opamp(unit, f"{unit}\n{sheet.value('opamp')}", at(8.6, yd - 1.25))
    sheet.wire(im, pins["in1"])
    hc = (pins["out"][0] + 0.8, pins["out"][1])
    sheet.wire(pins["out"], hc, (hc[0] + 1.0, hc[1]))
    sheet.flag("CTL", (hc[0] + 1.0, hc[1]), "right")
    # the feedback over the op-amp, im on the left, the control node on the right
    left, right = im[0], hc[0]
    y = im[1] + 1.8
    if sheet.has("agc_rz"):
        mid = round(0.5 * (left + right), 1)
        sheet.capacitor("agc_ci", (left, y), (mid, y))
        sheet.resistor("agc_rz", (mid, y), (right, y))
    else:
        sheet.capacitor("agc_ci", (left, y), (right, y))
    for role in ("agc_cp", "clamp"):
        if sheet.has(role):
            y += 1.4
            if role == "clamp":     # from the control node (anode) to the -input
                d4 = sheet.ref("clamp")
                sheet.part(d4, sheet.elm.Diode(), (right, y), (left, y), f"{d4}\n{sheet.value('clamp')}", polar=True)
            else:
                sheet.capacitor(role, (left, y), (right, y))
    sheet.wire(im, (left, y))
    sheet.wire(hc, (right, y))
    _draw_reference(sheet, pins["in2"])


def _draw_reference(sheet, ip) -> None:
    """The integrator's +input network from ``ip`` leftwards and down (see
    :func:`_draw_loop`)."""
    node = (ip[0] - 2.2, ip[1])
    sheet.wire(ip, node)
    tap = (node[0], node[1] - 3.15)
    if sheet.has("comp"):
        r19 = (ip[0] - 1.1, ip[1])
        sheet.resistor("agc_rc", r19, (r19[0], r19[1] - 2.2))
        sheet.reference((r19[0], r19[1] - 2.2))
        d5 = sheet.ref("comp")
        sheet.part(d5, sheet.elm.Diode(), tap, node, f"{d5}\n{sheet.value('comp')}", polar=True)
    else:
        sheet.wire(node, tap)
    sheet.resistor("agc_rr2", tap, (tap[0], tap[1] - 2.2))
    sheet.reference((tap[0], tap[1] - 2.2))
    src = (tap[0] - 2.5, tap[1])
    sheet.resistor("agc_rr1", tap, src, loc="bottom")
    if not sheet.has("vref"):
        sheet.flag(sheet.rails[0], src, "up")
        return
    u2 = sheet.ref("vref")
    low = (src[0], src[1] - 2.2)
    sheet.part(u2, sheet.elm.Zener(), low, src, f"{u2}\n{sheet.value('vref')}", polar=True)    # anode at the reference
    sheet.reference(low)
    rail = (src[0] - 2.5, src[1])
    sheet.resistor("agc_rrb", src, rail, loc="bottom")
    sheet.flag(sheet.rails[0], rail, "up")


@functools.lru_cache(maxsize=256)
def _rest_conductance(c: Circuit) -> float:
    w = 2 * math.pi * c.f0_hz
    br = CONTROL.branch(c, T0_K, Conditions(15.0, T0_K, math.inf))
    return float(br.rational(w)(1j).real)


@functools.lru_cache(maxsize=64)
def solved(c: Circuit, cond: Conditions):
    """(loop, linear result, settled oscillation, control state) of ``c`` at ``cond``:
    verification asks for the oscillation and its settling one after the other."""
    from partpick.circuits import build_loop, linear

    loop = build_loop(c, cond)
    lin = linear(c, cond, loop)
    hb, st = settled(loop, model(c, cond), lin, cond.rails(c.supply_kind))
    return loop, lin, hb, st


CONTROL = JfetAgc()
