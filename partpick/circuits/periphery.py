"""The periphery every topology shares: the op-amp type, the output stage that drives
the load, and on a single supply the mid-rail bias and the output coupling capacitor.

Output stages: 'none' (the oscillator output drives the load), 'follower' (a unity-gain
buffer on a spare op-amp channel), 'gain' (a non-inverting stage, gain 1 + Rb/Ra, Ra to
the reference), 'attenuator' (Ra in series, Rb to the reference), 'buffered-attenuator'
(that divider, then a follower that drives the load: a heavy load behind a limiter whose
amplitude is larger than the load wants). On a single supply a
divider of two equal resistors decoupled by a capacitor makes the mid-rail reference
and a coupling capacitor feeds the ground-referenced load.
"""

from __future__ import annotations

import math

import numpy as np

from partpick.circuits.base import Circuit, Conditions, Slot
from partpick.circuits.options import nearest
from partpick.errors import InfeasibleError
from partpick.physics.netlist import Capacitor, OpAmpX, Resistor, VSource
from partpick.physics.opamp import open_loop_gain, output_resistance
from partpick.physics.rational import Rational, const, parallel

__all__ = ["SLOTS", "BUFFERED", "STAGE_ROLES", "BIAS_ROLES", "stage_gain", "has_buffer", "slots_for",
           "supplies", "output", "output_admittance", "to_load", "reference_ripple", "channels_used", "stage_load_admittance",
           "impedance_c", "admittance_c", "fixed_parts", "rail_flags",
           "reference_flag", "draw"]

SLOTS = (
    Slot("opamp", "opamps", "U1", "op-amp (every channel of the circuit)"),
    Slot("stage_ra", "resistors", "R6", "output stage: gain-setting resistor to the reference, or series resistor"),
    Slot("stage_rb", "resistors", "R7", "output stage: feedback resistor, or shunt resistor"),
    Slot("bias_top", "resistors", "R8", "mid-rail bias divider, upper resistor"),
    Slot("bias_bottom", "resistors", "R9", "mid-rail bias divider, lower resistor"),
    Slot("bias_c", "capacitors", "C3", "mid-rail bias decoupling capacitor"),
    Slot("coupling_c", "capacitors", "C4", "output coupling capacitor"),
)
STAGE_KINDS = ("none", "follower", "gain", "attenuator", "buffered-attenuator")
BUFFERED = ("follower", "gain", "buffered-attenuator")   # stages that take an op-amp channel
RATIO_STAGES = ("gain", "attenuator", "buffered-attenuator")  # stages with a resistor pair
STAGE_ROLES = ("stage_ra", "stage_rb")
BIAS_ROLES = ("bias_top", "bias_bottom", "bias_c", "coupling_c")


def slots_for(stage: str, supply_kind: str) -> tuple[Slot, ...]:
    """The periphery slots a circuit with this stage and supply uses."""
    roles = ["opamp"]
    if stage in RATIO_STAGES:
        roles += list(STAGE_ROLES)
    if supply_kind == "single":
        roles += list(BIAS_ROLES)
    return tuple(s for s in SLOTS if s.role in roles)


def has_buffer(c: Circuit) -> bool:
    """The output stage takes an op-amp channel of its own."""
    return c.stage in BUFFERED


def channels_used(c: Circuit) -> int:
    """Op-amp channels the whole circuit needs: the topology's, the buffer's and the
    amplitude control's."""
    own = getattr(c.control, "op_channels", None)
    return c.topology.channels + (1 if has_buffer(c) else 0) + (own(c.values) if own is not None else 0)


def stage_gain(c: Circuit) -> float:
    """Ideal, unloaded gain of the output stage, V/V."""
    ra, rb = c.value("stage_ra"), c.value("stage_rb")
    if c.stage == "gain":
        return 1.0 + rb / ra
    if c.stage in ("attenuator", "buffered-attenuator"):
        return rb / (ra + rb)
    return 1.0


# -- netlist ------------------------------------------------------------------------------------

def supplies(c: Circuit, cond: Conditions) -> tuple[list, str, str]:
    """The supply sources and, on a single supply, the bias network: (elements, the
    signal reference node, the negative rail node)."""
    vcc, vee, _ = cond.rails(c.supply_kind)
    els: list = [VSource("VCC", "vcc", "0", vcc)]
    if c.supply_kind == "dual":
        els.append(VSource("VEE", "vee", "0", vee))
        return els, "0", "vee"
    rb = c.value("bias_top")
    els += [Resistor("R8", "vcc", "mid", rb), Resistor("R9", "mid", "0", c.value("bias_bottom", rb)),
            Capacitor("C3", "mid", "0", c.value("bias_c"))]
    return els, "mid", "0"


def output(c: Circuit, cond: Conditions, drive: str, ref: str, neg: str, channel: str = "U1B") -> tuple[list, str]:
    """The output stage from node ``drive``, the coupling capacitor and the load:
    (elements, the load node)."""
    els: list = []
    op = c.opamp
    if c.stage == "follower":
        els.append(OpAmpX(channel, drive, "so", "so", "vcc", neg, op))
        drive = "so"
    elif c.stage == "gain":
        els += [OpAmpX(channel, drive, "sn", "so", "vcc", neg, op),
                Resistor("R6", "sn", ref, c.value("stage_ra")),
                Resistor("R7", "sn", "so", c.value("stage_rb"))]
        drive = "so"
    elif c.stage == "attenuator":
        els += [Resistor("R6", drive, "ao", c.value("stage_ra")),
                Resistor("R7", "ao", ref, c.value("stage_rb"))]
        drive = "ao"
    elif c.stage == "buffered-attenuator":
        els += [Resistor("R6", drive, "ad", c.value("stage_ra")),
                Resistor("R7", "ad", ref, c.value("stage_rb")),
                OpAmpX(channel, "ad", "so", "so", "vcc", neg, op)]
        drive = "so"
    load = drive
    if c.supply_kind == "single":
        load = "load"
        els.append(Capacitor("C4", drive, "load", c.value("coupling_c")))
        if math.isinf(cond.load_r_ohm):
            els.append(Resistor("RBLEED", "load", "0", 1e7))  # DC path for the open load
    if not math.isinf(cond.load_r_ohm):
        els.append(Resistor("RLOAD", load, "0", cond.load_r_ohm))
    if cond.load_c_f > 0:
        els.append(Capacitor("CLOAD", load, "0", cond.load_c_f))
    return els, load


# -- small-signal contributions -------------------------------------------------------------------

def impedance_c(c_f: float, w_ref: float) -> Rational:
    """Impedance 1 / (s C) in p = s / w_ref."""
    return Rational(np.array([1.0]), np.array([0.0, w_ref * c_f]))


def admittance_c(c_f: float, w_ref: float) -> Rational:
    """Admittance s C in p."""
    return Rational(np.array([0.0, w_ref * c_f]), np.array([1.0]))


def _load_z(cond: Conditions, w_ref: float, single: bool) -> Rational | None:
    """Impedance of the load itself (R || C), None when open with no capacitance."""
    r = cond.load_r_ohm if not math.isinf(cond.load_r_ohm) else (1e7 if single else math.inf)
    y = const(0.0 if math.isinf(r) else 1.0 / r)
    if cond.load_c_f > 0:
        y = y + admittance_c(cond.load_c_f, w_ref)
    if not np.any(y.num):
        return None
    return y.inv()


def _driven_z(c: Circuit, cond: Conditions, w_ref: float) -> Rational | None:
    """Impedance seen at the node that drives the load (coupling capacitor included)."""
    zl = _load_z(cond, w_ref, c.supply_kind == "single")
    if zl is None:
        return None
    if c.supply_kind == "single":
        return impedance_c(c.value("coupling_c"), w_ref) + zl
    return zl


def output_admittance(c: Circuit, cond: Conditions, w_ref: float) -> Rational | None:
    """Admittance the output stage and load put on the oscillator's output node, S
    (None when a buffer isolates them or the load is open)."""
    zd = _driven_z(c, cond, w_ref)
    if c.stage == "none" and zd is not None:
        return zd.inv()
    if c.stage == "attenuator":
        rb = const(c.value("stage_rb"))
        shunt = rb if zd is None else parallel(rb, zd)
        return (const(c.value("stage_ra")) + shunt).inv()
    if c.stage == "buffered-attenuator":
        return const(1.0 / (c.value("stage_ra") + c.value("stage_rb")))
    return None


def to_load(c: Circuit, cond: Conditions, w_ref: float) -> Rational:
    """Transfer from the oscillator output to the load, V/V (output stage and coupling)."""
    zl = _load_z(cond, w_ref, c.supply_kind == "single")
    zd = _driven_z(c, cond, w_ref)
    coupling = const(1.0) if (c.supply_kind == "dual" or zl is None) else zl / zd
    if c.stage == "none":
        return coupling
    if c.stage == "attenuator":
        rb = const(c.value("stage_rb"))
        shunt = rb if zd is None else parallel(rb, zd)
        return shunt / (const(c.value("stage_ra")) + shunt) * coupling
    divider = const(1.0)
    if c.stage == "buffered-attenuator":
        ra, rb = c.value("stage_ra"), c.value("stage_rb")
        divider = const(rb / (ra + rb))
    a = open_loop_gain(c.opamp, w_ref)
    ro = output_resistance(c.opamp)
    yl = const(0.0) if zd is None else zd.inv()
    b = const(1.0)
    if c.stage == "gain":
        ra, rb = c.value("stage_ra"), c.value("stage_rb")
        b = const(ra / (ra + rb))
        yl = yl + const(1.0 / (ra + rb))
    # Vso (1 + Ro Yl) = A (Vin - b Vso)
    return divider * a / (const(1.0) + yl.scale(ro) + a * b) * coupling


def reference_ripple(c: Circuit, cond: Conditions, w_ref: float, y_net: Rational) -> Rational:
    """What the signal reference puts on the load per volt at the oscillator's output,
    V/V: zero on a dual supply (the reference is ground); on a single supply the
    mid-rail node, whose impedance R8 || R9 || C3 carries every current the networks
    return to it (y_net: the topology's own, per volt of output; the output stage's
    lower resistor), and which the stage and the coupling pass on to the load. Added to
    :func:`to_load` it is the load's transfer by superposition; the decoupling leaves
    ohms to tens of ohms there, which an attenuated output feels (ngspice, running the
    full circuit, measured 1.85 times the load amplitude a model with an ideal mid-rail
    gave, at 88 kHz behind a 1/52 divider with 100 nF decoupling: 105.6 mV against 57.2;
    with this term the model gives 105.7)."""
    if c.supply_kind != "single":
        return const(0.0)
    z_mid = parallel(const(1.0 / (1.0 / c.value("bias_top") + 1.0 / c.value("bias_bottom"))),
                     impedance_c(c.value("bias_c"), w_ref))
    zl = _load_z(cond, w_ref, True)
    zd = _driven_z(c, cond, w_ref)
    h = zl / zd              # the coupling capacitor into the load
    y = y_net
    if c.stage == "attenuator":
        ra, rb = c.value("stage_ra"), c.value("stage_rb")
        shunt = parallel(const(rb), zd)
        y = y + (shunt / (const(ra) + shunt)).scale(1.0 / rb)
        h = h * zd / (zd + const(ra * rb / (ra + rb)))   # the reference reaches the divider's tap through Ra || Rb
    elif c.stage == "buffered-attenuator":
        y = y + const(1.0 / (c.value("stage_ra") + c.value("stage_rb")))
    elif c.stage == "gain":
        y = y + const(1.0 / c.value("stage_ra"))          # its inverting input follows the drive
    return z_mid * y * h


def stage_load_admittance(c: Circuit, load_y: complex) -> complex:
    """What the buffer channel drives, S (complex: its magnitude sets the current, its
    phase the power the load takes): the load (load_y, S, at the frequency in question)
    and, for a gain stage, its own feedback divider."""
    return load_y + (1 / (c.value("stage_ra") + c.value("stage_rb")) if c.stage == "gain" else 0.0)


# -- search hooks ---------------------------------------------------------------------------------

def _coupled(spec, c_f: float) -> tuple[complex, complex]:
    """(Z_load, Z_C) at the spec's target frequency, ohm (an open load: the 10 Mohm
    bleed a single supply keeps)."""
    w = 2 * math.pi * spec.frequency.target_hz
    r_load = spec.load.resistance_ohm if not math.isinf(spec.load.resistance_ohm) else 1e7
    return 1 / (1 / r_load + 1j * w * spec.load.capacitance_f), 1 / (1j * w * c_f)


def coupling_gain(spec, c_f: float) -> float:
    """|V_load / V_drive| of the output coupling capacitor c_f (F) into the spec's load at
    its target frequency, the high-pass divider Z_load / (Z_load + 1/(j w C))."""
    zl, zc = _coupled(spec, c_f)
    return abs(zl / (zl + zc))


def coupled_admittance(spec, c_f: float) -> complex:
    """What the output stage drives through the coupling capacitor c_f (F) at the spec's
    target frequency, S: 1 / (Z_C + Z_load)."""
    zl, zc = _coupled(spec, c_f)
    return 1 / (zl + zc)


def coupling_spread(spec, c_f: float, c_sigma: float) -> float:
    """Standard deviation of ln |V_load| from the coupling capacitor's value spread
    c_sigma (relative): its log sensitivity d ln|H| / d ln C = 1 / (1 + (w R C)^2) for a
    resistive load (first-order high-pass), times c_sigma; next to nothing above the
    tenth-of-f rule, the capacitor's own tolerance where its corner lies far above f."""
    g = coupling_gain(spec, c_f)
    return (1 - g * g) * c_sigma    # 1/(1 + x^2) = 1 - |H|^2


def fixed_parts(spec, catalog, rfams, price, shelf=None) -> tuple[tuple[str, str, float], ...]:
    """Single supply: the mid-rail divider, its decoupling and the output coupling
    capacitor (the same for every candidate), as (role, family, value). The
    decoupling's corner lies at a thousandth of the frequency (the largest allowed value
    where none reaches it). The coupling capacitor is the cheapest allowed one whose
    corner lies at a tenth of the frequency or below (under 0.5 % loss); when none
    reaches that (a heavy load at a low frequency), the cheapest of the largest allowed
    value: its loss
    (:func:`coupling_gain`) and its spread (:func:`coupling_spread`) the search plans
    the amplitude with, and check judges at the load, the capacitor in the circuit."""
    if spec.supply.kind != "single":
        return ()
    fam = min(rfams, key=lambda r: r.price_unit)
    rb = nearest(fam.values(), 47e3)
    if shelf is not None:
        on = [(r.id, v) for r in rfams for v in r.values() if shelf.quantity(r.id, v) >= 2 * spec.builds]
        if on:
            fid, rb = min(on, key=lambda k: abs(math.log(k[1] / 47e3)))
            fam = catalog.find("resistors", fid)
    caps = [c for c in catalog.capacitors if spec.parts.capacitors is None or c.id in spec.parts.capacitors]
    f = spec.frequency.target_hz
    # bias corner a thousandth of f: the mid-rail node carries the networks' return currents,
    # which reach the load (reference_ripple), so its impedance is kept to tens of ohms
    need_b = 1000 / (2 * math.pi * f * rb / 2)
    r_load = spec.load.resistance_ohm if not math.isinf(spec.load.resistance_ohm) else 1e7
    need_c = 10 / (2 * math.pi * f * r_load)        # coupling corner a tenth of f: under 0.5 % loss
    out = [("bias_top", fam.id, rb), ("bias_bottom", fam.id, rb)]
    for role, need in (("bias_c", need_b), ("coupling_c", need_c)):
        fit = [(price(c.id, v), c.id, v) for c in caps for v in c.values()
               if c.voltage_v >= spec.supply.max_v and (shelf is None or shelf.quantity(c.id, v) >= spec.builds)]
        options = [o for o in fit if o[2] >= need]
        if not options and fit:   # (the physics judges what the largest one leaves)
            top = max(o[2] for o in fit)
            options = [o for o in fit if o[2] == top]
        if not options:
            raise InfeasibleError(f"no allowed capacitor reaches {need * 1e6:.3g} uF for the single-supply bias "
                                  f"and coupling at {f:g} Hz", ("parts",))
        _, cid, v = min(options)
        out.append((role, cid, v))
    return tuple(out)


# -- drawing --------------------------------------------------------------------------------------

def rail_flags(supply_kind: str) -> tuple[str, str | None]:
    """Names of the positive and negative supply flags on a drawing (None: ground)."""
    return ("+V", "-V") if supply_kind == "dual" else ("+V", None)


def reference_flag(supply_kind: str) -> str | None:
    """The signal reference's flag on a drawing: ground on a dual supply, the mid-rail
    node VREF on a single supply."""
    return None if supply_kind == "dual" else "VREF"


def draw(sheet, out, stage: str, supply_kind: str) -> None:
    """Draw on ``sheet`` (:class:`partpick.export.schematic.Sheet`) from the oscillator
    output ``out``: the output stage (U1B with R6, R7; R6, R7 as an attenuator, or as a
    divider before the buffer U1B), on a
    single supply the coupling capacitor C4 (its + towards the op-amp, which sits at
    mid-rail) and the bias network R8, R9, C3 making VREF, the output connector, and a
    note on the supply pins' decoupling and any spare channel, as in :func:`supplies`
    and :func:`output`."""
    x0, y0 = out
    drive = out
    if stage in BUFFERED:
        src = out
        if stage == "buffered-attenuator":   # the divider first, the buffer after it
            src = (x0 + 2.6, y0)
            sheet.resistor("stage_ra", out, src)
            sheet.resistor("stage_rb", src, (src[0], y0 - 2.8), loc="bottom")
            sheet.reference((src[0], y0 - 2.8))
        x = src[0] + 4.0
        pins = sheet.opamp("U1B", f"U1B\n{sheet.value('opamp')}", (x, y0))
        sheet.wire(src, pins["in2"])
        jo = (pins["out"][0] + 0.6, pins["out"][1])
        top = pins["in1"][1] + 1.65
        sheet.wire(pins["out"], jo)
        sheet.wire(pins["in1"], (x - 0.6, pins["in1"][1]), (x - 0.6, top))
        if stage == "gain":
            sheet.resistor("stage_rb", (x - 0.6, top), (jo[0], top))
            sheet.resistor("stage_ra", (x - 0.6, top), (x - 3.1, top))
            sheet.reference((x - 3.1, top))
        else:
            sheet.wire((x - 0.6, top), (jo[0], top))
        sheet.wire((jo[0], top), jo)
        drive = jo
    elif stage == "attenuator":
        drive = (x0 + 3.0, y0)
        sheet.resistor("stage_ra", out, drive)
        sheet.resistor("stage_rb", drive, (drive[0], y0 - 2.8), loc="bottom")
        sheet.reference((drive[0], y0 - 2.8))
    x_end = drive[0] + 1.0
    if supply_kind == "single":
        sheet.capacitor("coupling_c", (drive[0] + 0.6, drive[1]), (drive[0] + 3.1, drive[1]))
        sheet.wire(drive, (drive[0] + 0.6, drive[1]))
        x_end = drive[0] + 3.7
        _draw_bias(sheet, (max(x0 + 6.5, drive[0] - 1.0), y0 - 1.6))
        sheet.wire((drive[0] + 3.1, drive[1]), (x_end, drive[1]))
    else:
        sheet.wire(drive, (x_end, drive[1]))
    sheet.connector("OUT", (x_end, drive[1]), "OUT: to the load")
    channels = sheet.bom.channels
    op = sheet.family("opamp")
    notes = ["Supply: +V" + (" and -V" if supply_kind == "dual" else "") + " to every op-amp package, each pin "
             "decoupled to ground with 100 nF ceramic at the pin (not in the BOM)."]
    packages = -(-channels // op.channels)
    spare = packages * op.channels - channels
    if channels == 2:
        notes.append(f"U1A, U1B: {'the two channels of one' if op.channels > 1 else 'two single-channel'} "
                     f"{sheet.value('opamp')} {'package' if op.channels > 1 else 'packages'}.")
    elif channels > 2:     # an amplitude control's own channel besides
        names = ", ".join(f"U1{chr(ord('A') + k)}" for k in range(channels))
        notes.append(f"{names}: {'one' if packages == 1 else packages} {sheet.value('opamp')} "
                     f"{'package' if packages == 1 else 'packages'} ({op.channels} channel(s) each).")
    if spare > 0:
        notes.append(f"U1 has {spare} spare channel(s): tie each +input to the reference and "
                     "the output to its -input.")
    if supply_kind == "single":
        notes.append("VREF: mid-rail made by R8, R9 and C3; ground symbols are 0 V.")
    sheet.note("\n".join(notes), (-4.2, -8.0))


def _draw_bias(sheet, top) -> None:
    """R8 from +V to VREF, R9 from VREF to ground, C3 across R9 (its + at VREF)."""
    x, y = top
    sheet.flag("+V", (x, y), "up")
    j = (x, y - 2.4)
    sheet.resistor("bias_top", (x, y), j)
    sheet.resistor("bias_bottom", j, (x, y - 4.8))
    sheet.ground((x, y - 4.8))
    c = (x + 2.0, j[1])
    sheet.wire(j, c, (x + 3.0, j[1]))
    sheet.capacitor("bias_c", c, (c[0], y - 4.8), loc="bottom")
    sheet.ground((c[0], y - 4.8))
    sheet.flag("VREF", (x + 3.0, j[1]), "right")
