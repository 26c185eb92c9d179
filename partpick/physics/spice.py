"""SPICE netlist text of an in-memory :class:`~partpick.physics.netlist.Netlist`.

The text is plain SPICE (elements R, C, V, I, D, J, E, B, X, ``.subckt``, ``.model``,
``.options``, ``.tran``) so it runs in ngspice and, with at most small edits, in other
SPICE3 descendants. The one ngspice-specific construct in the circuit is ``min()`` /
``max()`` inside the B-source expression of the op-amp's output clamp (SPICE3f5 B
sources lack them); the optional ``.control`` blocks are ngspice's own: one writes the
probe data for partpick's batch runs (``linearize``, ``wrdata``), the other (given the
predicted frequency) makes ``ngspice -b FILE`` measure and print the frequency, the
amplitude and the THD at the load (``meas``, ``fourier``).

The op-amp is emitted as a subcircuit that implements exactly the macro-model of
:mod:`partpick.physics.opamp` (numbers from :func:`macro_params`), and the limiter
as diodes whose parameters are those of :func:`partpick.physics.junction.junctions_at`,
already evaluated at the netlist's temperature: IS by the SPICE law with the catalog's
EG and XTI, CJO and VJ by SPICE's own junction-capacitance law (so the values written
are what SPICE itself would compute from the catalog's 25 degC values); a JFET as
SPICE's standard JFET (``J`` with a ``.model NJF``: VTO, BETA, LAMBDA, IS at the
netlist's temperature, its gate capacitances as capacitors beside it) and a single
diode as a ``D`` with its own ``.model``. ``.options TEMP = TNOM`` keeps SPICE from
applying its temperature law a second time on top of that (at TEMP = TNOM it leaves
IS, CJO and VJ as written), so partpick's own analyses and SPICE see the same circuit.

Output is deterministic: the same netlist always gives the same text.
"""

from __future__ import annotations

import math
import re

from partpick import __version__
from partpick.catalog import Limiter, OpAmp
from partpick.physics.jfet import jfet_at
from partpick.physics.junction import Junction, junctions_at
from partpick.physics.netlist import Capacitor, DiodeX, JfetX, Kick, LimiterX, Netlist, OpAmpX, Resistor, VSource
from partpick.physics.opamp import macro_params

__all__ = ["to_spice", "subckt_name", "model_name", "MEASURE_PREFIX"]

MEASURE_PREFIX = "partpick measured:"  # how the batch block's result lines begin

# Simulator accuracy. With the maximum step at 1/(f points_per_cycle) the step bound,
# not RELTOL, sets the period error: on the demo designs the default trapezoidal
# rule at 200 points a cycle measures the frequency within 0.01 % of its step-size
# limit (0.03 % at 100 points), whatever RELTOL between 1e-3 and 1e-6, while
# METHOD=gear, whose numerical damping shifts the period, is off by 0.03 % at 200
# points. So trapezoidal stays; RELTOL 1e-4 (default 1e-3) is a cheap margin for
# the stiffer circuits (clamped op-amps, Zener knees). ABSTOL and VNTOL keep their
# defaults: the signals here are far above them.
_OPTIONS = "RELTOL=1e-4"


def _num(x: float) -> str:
    """A value in plain exponent notation SPICE reads everywhere (no unit suffixes):
    ``%.12g``, e.g. 10000, 1e-08."""
    x = float(x)
    if not math.isfinite(x):
        raise ValueError(f"SPICE export needs finite values (got {x!r})")
    return "%.12g" % x


def _sanitise(text: str) -> str:
    """Lower-case text reduced to [a-z0-9_] (SPICE names are case-insensitive and
    some simulators reject '-' or '.' in them)."""
    s = re.sub(r"[^a-z0-9_]", "_", text.lower())
    return s if s[:1].isalpha() else "p" + s


def subckt_name(op: OpAmp) -> str:
    """Name of the op-amp macro-model subcircuit for catalog op-amp ``op``."""
    return "pp_" + _sanitise(op.id)


def model_name(lim: Limiter, part: str = "") -> str:
    """Name of the diode ``.model`` of limiter ``lim``; ``part`` tells a Zener's
    forward ('f') and breakdown ('b') junctions apart."""
    return "pp_" + _sanitise(lim.id) + (("_" + part) if part else "")


def _designator(letter: str, name: str) -> str:
    """SPICE element name: the first letter gives the element type, so keep ``name``
    when it already starts with ``letter``, else prefix it (U1A -> XU1A)."""
    return name if name[:1].upper() == letter else letter + name


def _check_node(node: str) -> str:
    if not node or any(c.isspace() for c in node) or any(c in node for c in "(),="):
        raise ValueError(f"node name {node!r} cannot be written to a SPICE netlist")
    return node


def _opamp_subckt(op: OpAmp) -> list[str]:
    """The ``.subckt`` of the macro-model of ``op``; pins inp inn out vcc vee.

    Node x is the integrator (C1 || R1), y the node after the optional second pole.
    Currents follow the SPICE rule for ``B n+ n- I=...``: positive current flows from
    n+ through the source to n-, so ``B 0 x`` drives current into x.
    """
    m = macro_params(op)
    gm, imax = _num(m.gm_s), _num(m.imax_a)
    lines = [
        f"* op-amp macro-model of catalog part '{op.id}': GBW {_num(op.gbw_hz)} Hz, "
        f"A0 {_num(op.a0)}, slew {_num(op.slew_v_per_s)} V/s",
        "* The supply pins carry no quiescent current in this model: vcc and vee only",
        "* set the clamp levels of the output swing.",
        f".subckt {subckt_name(op)} inp inn out vcc vee",
        "* input transconductance, saturating smoothly at the slew current SR*C1",
        f"BGM 0 x I={imax}*tanh({gm}*V(inp,inn)/{imax})",
        "* integrator: dominant pole at GBW/A0",
        f"C1 x 0 {_num(m.c1_f)}",
        f"R1 x 0 {_num(m.r1_ohm)}",
        "* output swing clamp: current gclamp*(V(x) - clampval) out of x, clampval = V(x)",
        "* limited to [V(vee)+headroom_low, V(vcc)-headroom_high]. Written as the sum of",
        "* the two one-sided excesses, which equals V(x) - min(max(V(x),lo),hi) whenever",
        "* lo <= hi, but stays zero near 0 V while the rails are still down in the first",
        "* Newton iterations of the operating point (the nested form then pulls x hard",
        "* and forces gmin stepping).",
        f"BCL x 0 I={_num(m.gclamp_s)}*(max(V(x)-V(vcc)+{_num(m.head_high_v)},0)"
        f"+min(V(x)-V(vee)-{_num(m.head_low_v)},0))",
    ]
    y = "x"
    if m.pole2_hz is not None:
        r2 = 1e3
        c2 = 1.0 / (2 * math.pi * m.pole2_hz * r2)
        lines += [
            f"* second pole at {_num(m.pole2_hz)} Hz: buffered RC low-pass",
            "E2 xb 0 x 0 1",
            f"R2 xb y {_num(r2)}",
            f"C2 y 0 {_num(c2)}",
        ]
        y = "y"
    lines += [
        "* output stage: small-signal resistance Ro, current saturating at Ilim",
        f"BOUT 0 out I={_num(m.ilim_a)}*tanh((V({y})-V(out))/{_num(m.ro_ohm * m.ilim_a)})",
        f".ends {subckt_name(op)}",
    ]
    return lines


def _diode_model(name: str, j: Junction) -> str:
    """A ``.model`` card for junction ``j``, every value already at the netlist
    temperature (IS, and CJO and VJ by SPICE's own temperature law): current, series
    resistance and charge (CJO, VJ, M, FC, TT)."""
    return (f".model {name} D(IS={_num(j.is_a)} N={_num(j.n)} RS={_num(j.rs_ohm)} CJO={_num(j.cjo_f)} "
            f"VJ={_num(j.vj_v)} M={_num(j.m)} FC={_num(j.fc)} TT={_num(j.tt_s)})")


def _limiter_models(lim: Limiter, temp_k: float) -> list[str]:
    fwd, brk = junctions_at(lim, temp_k)
    if brk is None:
        return [f"* {lim.kind} '{lim.id}' forward junction at {_num(temp_k - 273.15)} degC",
                _diode_model(model_name(lim), fwd)]
    return [f"* Zener '{lim.id}' at {_num(temp_k - 273.15)} degC: forward junction and the",
            "* reverse breakdown junction (partpick's soft-knee Zener model, not SPICE BV/IBV);",
            "* the forward junction's depletion charge is the whole junction's, so the",
            "* breakdown junction stores none (CJO=0, TT=0)",
            _diode_model(model_name(lim, "f"), fwd),
            _diode_model(model_name(lim, "b"), brk)]


def _limiter_lines(el: LimiterX) -> list[str]:
    lim = el.limiter
    a, b = _check_node(el.a), _check_node(el.b)
    if lim.kind == "zener-pair":
        m = _sanitise(el.name) + "_m"
        f, r = model_name(lim, "f"), model_name(lim, "b")
        lines = [
            f"* {el.name}: two Zeners in series, opposed ({a} -|<- {m} ->|- {b}); each Zener is",
            "* a forward junction anode->cathode in parallel with a breakdown junction",
            "* cathode->anode",
            f"{_designator('D', el.name + 'AF')} {m} {a} {f}",
            f"{_designator('D', el.name + 'AR')} {a} {m} {r}",
            f"{_designator('D', el.name + 'BF')} {m} {b} {f}",
            f"{_designator('D', el.name + 'BR')} {b} {m} {r}",
        ]
    else:
        mod = model_name(lim)
        lines = [
            f"* {el.name}: anti-parallel {lim.kind} pair '{lim.id}'",
            f"{_designator('D', el.name + 'A')} {a} {b} {mod}",
            f"{_designator('D', el.name + 'B')} {b} {a} {mod}",
        ]
    return lines


def _jfet_lines(el: JfetX, temp_k: float) -> list[str]:
    """The JFET as SPICE's level-1 NJF (its own model card, parameters at temp_k) and
    its gate capacitances as capacitors (the model's CGS = CGD = 0)."""
    p = jfet_at(el.jfet, temp_k)
    d, g, s = _check_node(el.d), _check_node(el.g), _check_node(el.s)
    mod = "pp_" + _sanitise(el.name) + "_njf"
    lines = [f"* {el.name}: n-channel JFET '{el.jfet.id}' at {_num(temp_k - 273.15)} degC",
             f".model {mod} NJF(VTO={_num(p.vto_v)} BETA={_num(p.beta)} LAMBDA={_num(p.lam)} IS={_num(p.is_a)} "
             f"CGS=0 CGD=0)",
             f"{_designator('J', el.name)} {d} {g} {s} {mod}"]
    for tag, a, b, cap in (("GS", g, s, p.cgs_f), ("GD", g, d, p.cgd_f)):
        if cap > 0:
            lines.append(f"{_designator('C', el.name + tag)} {a} {b} {_num(cap)}")
    return lines


def _diode_lines(el: DiodeX, temp_k: float) -> list[str]:
    """One diode with its own model card (junction at temp_k, CJO = 0) and its
    capacitance as a capacitor."""
    a, k = _check_node(el.a), _check_node(el.k)
    mod = "pp_" + _sanitise(el.name) + "_d"
    j = junctions_at(el.diode, temp_k)[0]
    lines = [f"* {el.name}: diode '{el.diode.id}' at {_num(temp_k - 273.15)} degC",
             f".model {mod} D(IS={_num(j.is_a)} N={_num(j.n)} RS={_num(j.rs_ohm)} CJO=0)",
             f"{_designator('D', el.name)} {a} {k} {mod}"]
    if el.cap_f > 0:
        lines.append(f"{_designator('C', el.name)} {a} {k} {_num(el.cap_f)}")
    return lines


def _tran_times(netlist: Netlist, cycles: float, points_per_cycle: int) -> tuple[float, float]:
    """(time step = max step, stop time) of the transient run, s."""
    if not (netlist.f_hint_hz > 0 and math.isfinite(netlist.f_hint_hz)):
        raise ValueError("the netlist needs a positive f_hint_hz for the transient run")
    if cycles <= 0 or points_per_cycle < 1:
        raise ValueError("cycles must be > 0 and points_per_cycle >= 1")
    return 1.0 / (netlist.f_hint_hz * points_per_cycle), cycles / netlist.f_hint_hz


def _element_lines(el, stop_s: float, temp_k: float = 298.15) -> list[str]:
    """SPICE card(s) of one netlist element; stop_s (s) is the run length, so the
    kick's period can be set far beyond it; temp_k (K) the netlist's temperature."""
    if isinstance(el, Resistor):
        return [f"{_designator('R', el.name)} {_check_node(el.a)} {_check_node(el.b)} {_num(el.ohm)}"]
    if isinstance(el, Capacitor):
        return [f"{_designator('C', el.name)} {_check_node(el.a)} {_check_node(el.b)} {_num(el.farad)}"]
    if isinstance(el, VSource):
        return [f"{_designator('V', el.name)} {_check_node(el.a)} {_check_node(el.b)} DC {_num(el.volt)}"]
    if isinstance(el, Kick):
        # I 0 node: current flows from ground through the source into the node.
        # Edges of width/100 keep the integrator from seeing a step; flat top =
        # width - edge so the trapezoid delivers exactly charge_c. A period ten times
        # the run keeps the pulse from repeating.
        edge = el.width_s / 100
        period = 10 * stop_s + el.start_s + 2 * el.width_s
        return [f"* {el.name}: start-up kick, {_num(el.charge_c)} C into {el.node}",
                f"{_designator('I', el.name)} 0 {_check_node(el.node)} PULSE(0 {_num(el.amps)} "
                f"{_num(el.start_s)} {_num(edge)} {_num(edge)} {_num(el.width_s - edge)} {_num(period)})"]
    if isinstance(el, OpAmpX):
        pins = " ".join(_check_node(n) for n in (el.inp, el.inn, el.out, el.vcc, el.vee))
        return [f"{_designator('X', el.name)} {pins} {subckt_name(el.opamp)}"]
    if isinstance(el, LimiterX):
        return _limiter_lines(el)
    if isinstance(el, JfetX):
        return _jfet_lines(el, temp_k)
    if isinstance(el, DiodeX):
        return _diode_lines(el, temp_k)
    raise TypeError(f"cannot export element {el!r} to SPICE")


def _measure_block(netlist: Netlist, measure_hz: float, stop_s: float, cycles: float) -> list[str]:
    """A ``.control`` block that runs the transient and measures the settled waveform at
    the 'load' probe over the last cycles (up to 15 periods of measure_hz, Hz, at most
    half the run): the frequency from the time of n rising zero crossings, the peak
    amplitude from the extremes, the RMS over those whole periods, and the THD by
    ngspice's ``fourier`` at the measured frequency (its last period, 9 harmonics)."""
    if not (measure_hz > 0 and math.isfinite(measure_hz)):
        raise ValueError(f"measure_hz must be a positive frequency (got {measure_hz!r})")
    node = f"v({_check_node(netlist.probes['load'])})"
    window = min(15.0, cycles / 2)
    n = max(int(window) - 3, 1)
    td = _num(stop_s - window / measure_hz)
    return [
        "",
        "* 'ngspice -b <this file>' simulates and prints the frequency, the amplitude and the",
        "* THD at the load, then quits; in an interactive session ('ngspice <this file>') the",
        "* block runs too and stays, so 'plot " + node + "' shows the waveform.",
        ".control",
        "run",
        f"meas tran pp_t1 when {node}=0 rise=1 td={td}",
        f"meas tran pp_t2 when {node}=0 rise={n + 1} td={td}",
        f"let pp_freq = {n}/(pp_t2-pp_t1)",
        f"meas tran pp_vmax max {node} from={td} to={_num(stop_s)}",
        f"meas tran pp_vmin min {node} from={td} to={_num(stop_s)}",
        f"meas tran pp_vrms rms {node} from=$&pp_t1 to=$&pp_t2",
        "let pp_vpk = (pp_vmax-pp_vmin)/2",
        f"fourier $&pp_freq {node}",
        f"echo \"{MEASURE_PREFIX} frequency $&pp_freq Hz, amplitude at the load $&pp_vpk V peak, $&pp_vrms V rms "
        "(THD: the fourier table above)\"",
        "if $?batchmode",
        "  quit",
        "end",
        ".endc",
    ]


def to_spice(netlist: Netlist, *, cycles: float = 100, points_per_cycle: int = 200,
             probes=("osc", "load"), data_file: str | None = None, uniform: bool = True,
             title: str | None = None, measure_hz: float | None = None) -> str:
    """The netlist as SPICE text with a transient analysis of ``cycles`` periods of
    netlist.f_hint_hz (Hz), time step and maximum step 1/(f_hint points_per_cycle) s.

    ``probes`` are keys of netlist.probes whose nodes are written when ``data_file``
    (a path) is given, or ``x:NAME`` for the internal node x of op-amp NAME (the node
    its output clamp holds, inside the subcircuit instance): a ``.control`` block then
    runs the analysis, writes one time column (s) and one voltage column (V) per probe
    with ``wrdata`` and quits (batch use by :mod:`partpick.physics.ngspice`). Without
    data_file the text is a plain netlist for the user's own simulator session. ``uniform`` (data_file only) writes
    the data on the uniform grid of the time step (ngspice ``linearize``: linear
    interpolation of the accepted points, which lie at most one step apart) instead
    of at the simulator's own time points.

    ``title`` replaces the netlist's title line; ``measure_hz`` (the predicted
    frequency, Hz; not with data_file) adds the batch block of :func:`_measure_block`.
    """
    step, stop = _tran_times(netlist, cycles, points_per_cycle)
    temp_c = netlist.temp_k - 273.15
    lines = [
        # SPICE rule: the first line is the title, whatever it holds.
        " ".join((title or netlist.title).split()),
        f"* Generated by partpick {__version__}. Values in SI units (ohm, F, V, A, s).",
        f"* Temperature {_num(temp_c)} degC; diode parameters are already evaluated there.",
        "* In ngspice: 'ngspice <this file>', then 'run' and 'plot v(<probe node>)'.",
        "* Probes: " + ", ".join(f"{k} = {v}" for k, v in netlist.probes.items()),
        "",
    ]
    opamps: dict[str, OpAmp] = {}
    limiters: dict[str, Limiter] = {}
    for el in netlist.elements:
        if isinstance(el, OpAmpX):
            opamps.setdefault(el.opamp.id, el.opamp)
        elif isinstance(el, LimiterX):
            limiters.setdefault(el.limiter.id, el.limiter)

    for op in opamps.values():
        lines += _opamp_subckt(op) + [""]
    for lim in limiters.values():
        lines += _limiter_models(lim, netlist.temp_k) + [""]

    lines.append("* circuit")
    for el in netlist.elements:
        lines += _element_lines(el, stop, netlist.temp_k)
    lines += [
        "",
        "* TEMP = TNOM: the model parameters above already hold at this temperature, so",
        "* the simulator must not rescale them.",
        f".options TEMP={_num(temp_c)} TNOM={_num(temp_c)}",
        f".options {_OPTIONS}",
        "* no UIC: the DC operating point is solved first, then the kick starts the",
        "* oscillation",
        f".tran {_num(step)} {_num(stop)} 0 {_num(step)}",
    ]
    if data_file is not None:
        nodes = []
        amps = {el.name for el in netlist.elements if isinstance(el, OpAmpX)}
        for key in probes:
            if key.startswith("x:") and key[2:] in amps:
                nodes.append(f"v({_check_node(_designator('X', key[2:]))}.x)")
                continue
            if key not in netlist.probes:
                raise ValueError(f"unknown probe {key!r}; the netlist has {sorted(netlist.probes)}")
            nodes.append(f"v({_check_node(netlist.probes[key])})")
        if any(c.isspace() for c in data_file):
            raise ValueError(f"the data file path must not contain spaces (got {data_file!r})")
        lines += [
            "",
            ".control",
            "* one shared time column, a header line, 12 significant digits",
            "set wr_singlescale",
            "set wr_vecnames",
            "set numdgt=12",
            "run",
        ]
        if uniform:
            lines.append(f"linearize {' '.join(nodes)}")
        lines += [
            f"wrdata {data_file} {' '.join(nodes)}",
            "quit",
            ".endc",
        ]
    elif measure_hz is not None:
        lines += _measure_block(netlist, measure_hz, stop, cycles)
    lines.append(".end")
    return "\n".join(lines) + "\n"
