"""The Wien-bridge oscillator: slots, textbook equations and the circuit netlist.

Series arm Rs + Cs from the op-amp output to the non-inverting input, shunt arm
Rp || Cp from there to the reference (ground, or the mid-rail bias on a single
supply). Non-inverting gain 1 + Rf/Rg; the limiter branch (element pair, with Rd in
series when Rd > 0) across Rf brings the gain down as the amplitude grows. Optional
output stage: a follower, a non-inverting gain stage (second op-amp channel), or a
resistive attenuator. On a single supply a divider with a decoupling capacitor makes
the mid-rail reference and a coupling capacitor feeds the ground-referenced load.

Network (any circuits text, e.g. Sedra and Smith, Microelectronic Circuits, chapter
on sinusoidal oscillators): beta(s) = Zp / (Zs + Zp), f0 = 1 / (2 pi sqrt(Rs Rp Cs Cp)),
and the amplifier gain needed at f0 is 1 + Rs/Rp + Cp/Cs (3 for equal arms).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from partpick.catalog import Limiter, OpAmp
from partpick.physics.rational import Rational, const, parallel
from partpick.physics.circuit import Capacitor, Kick, LimiterX, Netlist, OpAmpX, Resistor, VSource

__all__ = ["STAGES", "DESIGNATORS", "WienCircuit", "Conditions", "build_netlist", "Loop", "build_loop",
           "opamp_gain"]

STAGES = ("none", "follower", "gain", "attenuator")

# Role -> reference designator, shared by BOM, netlist and report.
DESIGNATORS = {
    "rs": "R1", "cs": "C1", "rp": "R2", "cp": "C2", "rg": "R3", "rf": "R4", "rd": "R5",
    "limiter": "D1,D2", "opamp": "U1", "stage_ra": "R6", "stage_rb": "R7",
    "bias_top": "R8", "bias_bottom": "R9", "bias_c": "C3", "coupling_c": "C4",
}


@dataclass(frozen=True, slots=True)
class WienCircuit:
    """Exact part values of one Wien-bridge candidate (ohm, F) and its active parts.

    rd_ohm: resistor in series with the limiter (0 = limiter directly across Rf).
    stage: 'none' | 'follower' | 'gain' (gain 1 + stage_rb/stage_ra, ra to the
    reference) | 'attenuator' (stage_ra in series, stage_rb to the reference).
    Single supply: bias divider of two bias_r_ohm resistors decoupled by bias_c_f,
    output coupling capacitor coupling_c_f.
    """

    rs_ohm: float
    cs_f: float
    rp_ohm: float
    cp_f: float
    rg_ohm: float
    rf_ohm: float
    opamp: OpAmp
    limiter: Limiter | None = None
    rd_ohm: float = 0.0
    stage: str = "none"
    stage_ra_ohm: float = 0.0
    stage_rb_ohm: float = 0.0
    supply_kind: str = "dual"
    bias_r_ohm: float = 0.0
    bias_c_f: float = 0.0
    coupling_c_f: float = 0.0

    def __post_init__(self) -> None:
        if self.stage not in STAGES:
            raise ValueError(f"stage must be one of {STAGES}")
        if self.supply_kind not in ("dual", "single"):
            raise ValueError("supply_kind must be 'dual' or 'single'")

    @property
    def f0_hz(self) -> float:
        """Textbook frequency 1 / (2 pi sqrt(Rs Rp Cs Cp)), Hz (ideal amplifier)."""
        return 1.0 / (2 * math.pi * math.sqrt(self.rs_ohm * self.rp_ohm * self.cs_f * self.cp_f))

    @property
    def required_gain(self) -> float:
        """Amplifier gain at f0 for loop gain 1: 1 + Rs/Rp + Cp/Cs (3 for equal arms)."""
        return 1.0 + self.rs_ohm / self.rp_ohm + self.cp_f / self.cs_f

    @property
    def gain(self) -> float:
        """Small-signal non-inverting gain 1 + Rf/Rg (limiter off)."""
        return 1.0 + self.rf_ohm / self.rg_ohm

    @property
    def ideal_margin(self) -> float:
        """Startup margin with an ideal op-amp: gain / required gain - 1."""
        return self.gain / self.required_gain - 1.0

    @property
    def stage_gain(self) -> float:
        """Ideal, unloaded gain of the output stage, V/V."""
        if self.stage == "gain":
            return 1.0 + self.stage_rb_ohm / self.stage_ra_ohm
        if self.stage == "attenuator":
            return self.stage_rb_ohm / (self.stage_ra_ohm + self.stage_rb_ohm)
        return 1.0

    @property
    def has_buffer(self) -> bool:
        return self.stage in ("follower", "gain")

    @property
    def limiter_cap_f(self) -> float:
        """Junction capacitance across the limiter pair, F: two diodes in parallel, or
        two Zeners in series."""
        if self.limiter is None:
            return 0.0
        return 2 * self.limiter.cj_f if self.limiter.kind != "zener-pair" else self.limiter.cj_f / 2


@dataclass(frozen=True, slots=True)
class Conditions:
    """One operating point: supply_v (V; per rail for a dual supply, the one rail for
    a single supply), temp_k (K), the load load_r_ohm (ohm, inf = open) || load_c_f (F)."""

    supply_v: float
    temp_k: float
    load_r_ohm: float
    load_c_f: float = 0.0

    def rails(self, supply_kind: str) -> tuple[float, float, float]:
        """(positive rail, negative rail, signal reference), V."""
        if supply_kind == "dual":
            return self.supply_v, -self.supply_v, 0.0
        return self.supply_v, 0.0, self.supply_v / 2


def build_netlist(c: WienCircuit, cond: Conditions, *, kick_v: float = 0.01) -> Netlist:
    """The circuit of ``c`` at ``cond`` as elements (see :mod:`partpick.physics.circuit`).

    A kick of charge Cp * kick_v into the non-inverting input at t = 0 starts the
    oscillation from the DC operating point.
    """
    vcc, vee, _ = cond.rails(c.supply_kind)
    d = DESIGNATORS
    mid = "0" if c.supply_kind == "dual" else "mid"
    els: list = [VSource("VCC", "vcc", "0", vcc)]
    if c.supply_kind == "dual":
        els.append(VSource("VEE", "vee", "0", vee))
        neg = "vee"
    else:
        neg = "0"
        els += [Resistor(d["bias_top"], "vcc", "mid", c.bias_r_ohm),
                Resistor(d["bias_bottom"], "mid", "0", c.bias_r_ohm),
                Capacitor(d["bias_c"], "mid", "0", c.bias_c_f)]
    els += [
        Resistor(d["rs"], "out", "sa", c.rs_ohm),
        Capacitor(d["cs"], "sa", "np", c.cs_f),
        Resistor(d["rp"], "np", mid, c.rp_ohm),
        Capacitor(d["cp"], "np", mid, c.cp_f),
        Resistor(d["rg"], "nn", mid, c.rg_ohm),
        Resistor(d["rf"], "out", "nn", c.rf_ohm),
        OpAmpX("U1A", "np", "nn", "out", "vcc", neg, c.opamp),
    ]
    if c.limiter is not None:
        lim_a = "out"
        if c.rd_ohm > 0:
            els.append(Resistor(d["rd"], "out", "dl", c.rd_ohm))
            lim_a = "dl"
        els.append(LimiterX("D1", lim_a, "nn", c.limiter, c.limiter_cap_f))
    drive = "out"
    if c.stage == "follower":
        els.append(OpAmpX("U1B", "out", "so", "so", "vcc", neg, c.opamp))
        drive = "so"
    elif c.stage == "gain":
        els += [OpAmpX("U1B", "out", "sn", "so", "vcc", neg, c.opamp),
                Resistor(d["stage_ra"], "sn", mid, c.stage_ra_ohm),
                Resistor(d["stage_rb"], "sn", "so", c.stage_rb_ohm)]
        drive = "so"
    elif c.stage == "attenuator":
        els += [Resistor(d["stage_ra"], "out", "ao", c.stage_ra_ohm),
                Resistor(d["stage_rb"], "ao", mid, c.stage_rb_ohm)]
        drive = "ao"
    load = drive
    if c.supply_kind == "single":
        load = "load"
        els.append(Capacitor(d["coupling_c"], drive, "load", c.coupling_c_f))
        if math.isinf(cond.load_r_ohm):
            els.append(Resistor("RBLEED", "load", "0", 1e7))  # DC path for the open load
    if not math.isinf(cond.load_r_ohm):
        els.append(Resistor("RLOAD", load, "0", cond.load_r_ohm))
    if cond.load_c_f > 0:
        els.append(Capacitor("CLOAD", load, "0", cond.load_c_f))
    f_hint = c.f0_hz
    els.append(Kick("IKICK", "np", c.cp_f * kick_v, 0.0, 0.02 / f_hint))
    return Netlist(
        title=f"partpick Wien-bridge oscillator, f0 {f_hint:.6g} Hz",
        elements=tuple(els),
        temp_k=cond.temp_k,
        f_hint_hz=f_hint,
        probes={"osc": "out", "load": load},
    )


# -- small-signal network (the equations the physics solves) ---------------------------------

def _res(r: float) -> Rational:
    return const(r)


def _cap(c_f: float, w_ref: float) -> Rational:
    """Impedance 1 / (s C) in p = s / w_ref."""
    return Rational(np.array([1.0]), np.array([0.0, w_ref * c_f]))


def _adm_cap(c_f: float, w_ref: float) -> Rational:
    """Admittance s C in p."""
    return Rational(np.array([0.0, w_ref * c_f]), np.array([1.0]))


def opamp_gain(op: OpAmp, w_ref: float) -> Rational:
    """Open-loop gain A(s) = A0 wa / (s + wa) [* w2 / (s + w2)], wa = 2 pi GBW / A0."""
    a = 2 * math.pi * op.gbw_hz / op.a0 / w_ref
    out = Rational(np.array([op.a0 * a]), np.array([a, 1.0]))
    if op.second_pole_hz is not None:
        b = 2 * math.pi * op.second_pole_hz / w_ref
        out = out * Rational(np.array([b]), np.array([b, 1.0]))
    return out


def _load_z(cond: Conditions, w_ref: float, single: bool) -> Rational | None:
    """Impedance of the load itself (R || C), None when open with no capacitance."""
    r = cond.load_r_ohm if not math.isinf(cond.load_r_ohm) else (1e7 if single else math.inf)
    y = const(0.0 if math.isinf(r) else 1.0 / r)
    if cond.load_c_f > 0:
        y = y + _adm_cap(cond.load_c_f, w_ref)
    if not np.any(y.num):
        return None
    return y.inv()


def _driven_z(c: WienCircuit, cond: Conditions, w_ref: float) -> Rational | None:
    """Impedance seen at the node that drives the load (coupling capacitor included)."""
    zl = _load_z(cond, w_ref, c.supply_kind == "single")
    if zl is None:
        return None
    if c.supply_kind == "single":
        return _cap(c.coupling_c_f, w_ref) + zl
    return zl


@dataclass(frozen=True, slots=True)
class Loop:
    """The oscillator loop in p = s / w_ref (w_ref in rad/s).

    beta: Wien network transfer Zp / (Zs + Zp); yx: admittance loading the op-amp
    output besides the gain network (Wien network + load path), S; yf: 1/Rf, S; a: op-amp open-loop
    gain; ro_ohm, rg_ohm; to_load: op-amp output to load, V/V; rd_ohm and cap_f: the
    limiter branch's series resistor and pair capacitance. With the feedback branch
    current If = yf Vf + Ilim(Vf) through Rg, the op-amp equation
    Vo (1 + Ro Yx) + Ro If = A (beta Vo - Rg If) with Vo = Vf + Rg If becomes, per
    harmonic, alpha Vf + gamma Ilim = 0 with
    alpha = Q0 (1 + Rg yf) + (Ro + A Rg) yf, gamma = Q0 Rg + Ro + A Rg,
    Q0 = 1 + Ro Yx - A beta (built once as rationals).
    """

    w_ref: float
    beta: Rational
    yx: Rational
    yf: Rational
    a: Rational
    ro_ohm: float
    rg_ohm: float
    to_load: Rational
    alpha: Rational
    gamma: Rational
    rd_ohm: float = 0.0
    cap_f: float = 0.0

    def coefficients(self, p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(alpha, gamma) at p (complex arrays)."""
        return self.alpha(p), self.gamma(p)

    def pair_coefficients(self, p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The loop equation written for the voltage across the limiter pair, Vp, and
        the pair's own current Ip: with Ilim = Ip + s C Vp through the branch and
        Vf = Vp + Rd Ilim, alpha Vf + gamma Ilim = 0 becomes
        (alpha + (alpha Rd + gamma) s C) Vp + (alpha Rd + gamma) Ip = 0. This keeps the
        junction capacitance where it is, behind Rd."""
        al, ga = self.alpha(p), self.gamma(p)
        k = al * self.rd_ohm + ga
        return al + k * (p * self.w_ref * self.cap_f), k

    def branch_admittance(self, p: np.ndarray, g_pair: float) -> np.ndarray:
        """Small-signal admittance of the limiter branch (pair conductance g_pair and its
        capacitance, behind Rd), S."""
        yp = g_pair + p * self.w_ref * self.cap_f
        return yp / (1.0 + self.rd_ohm * yp)

    def branch_rational(self, g_pair: float) -> Rational:
        """:meth:`branch_admittance` as a rational function of p."""
        return Rational(np.array([g_pair, self.w_ref * self.cap_f]),
                        np.array([1.0 + self.rd_ohm * g_pair, self.rd_ohm * self.w_ref * self.cap_f]))

    def vo_per_vf(self, p: np.ndarray, vf: np.ndarray, ilim: np.ndarray) -> np.ndarray:
        """Op-amp output Vo = Vf + Rg (yf Vf + Ilim), V."""
        return vf + self.rg_ohm * (self.yf(p) * vf + ilim)


def _loop(w, beta, yx, yf, a, ro, rg, to_load, rd=0.0, cap=0.0) -> Loop:
    q0 = const(1.0) + yx.scale(ro) - a * beta
    k = const(ro) + a.scale(rg)
    alpha = q0 * (const(1.0) + yf.scale(rg)) + k * yf
    gamma = q0.scale(rg) + k
    return Loop(w, beta, yx, yf, a, ro, rg, to_load, alpha, gamma, rd, cap)


def build_loop(c: WienCircuit, cond: Conditions, w_ref: float | None = None) -> Loop:
    """The small-signal equations of ``c`` at ``cond`` (the op-amp's A0, GBW, optional
    second pole and output resistance; the load, the output stage's input and, on a
    single supply, the coupling capacitor). The bias node is taken as AC ground."""
    w = w_ref or 2 * math.pi * c.f0_hz
    zs = _res(c.rs_ohm) + _cap(c.cs_f, w)
    zp = parallel(_res(c.rp_ohm), _cap(c.cp_f, w))
    beta = zp / (zs + zp)
    yx = (zs + zp).inv()
    zd = _driven_z(c, cond, w)
    if c.stage == "none" and zd is not None:
        yx = yx + zd.inv()
    elif c.stage == "attenuator":
        shunt = _res(c.stage_rb_ohm) if zd is None else parallel(_res(c.stage_rb_ohm), zd)
        yx = yx + (_res(c.stage_ra_ohm) + shunt).inv()
    yf = const(1.0 / c.rf_ohm)
    return _loop(w, beta, yx, yf, opamp_gain(c.opamp, w), max(c.opamp.output_resistance_ohm, 1e-3),
                 c.rg_ohm, _to_load(c, cond, w), c.rd_ohm, c.limiter_cap_f)


def _to_load(c: WienCircuit, cond: Conditions, w: float) -> Rational:
    """Transfer from the op-amp output to the load, V/V (output stage and coupling)."""
    zl = _load_z(cond, w, c.supply_kind == "single")
    zd = _driven_z(c, cond, w)
    coupling = const(1.0) if (c.supply_kind == "dual" or zl is None) else zl / zd
    if c.stage == "none":
        return coupling
    if c.stage == "attenuator":
        shunt = _res(c.stage_rb_ohm) if zd is None else parallel(_res(c.stage_rb_ohm), zd)
        return shunt / (_res(c.stage_ra_ohm) + shunt) * coupling
    a = opamp_gain(c.opamp, w)
    ro = max(c.opamp.output_resistance_ohm, 1e-3)
    yl = const(0.0) if zd is None else zd.inv()
    b = const(1.0)
    if c.stage == "gain":
        b = const(c.stage_ra_ohm / (c.stage_ra_ohm + c.stage_rb_ohm))
        yl = yl + const(1.0 / (c.stage_ra_ohm + c.stage_rb_ohm))
    # Vso (1 + Ro Yl) = A (Vin - b Vso)
    return a / (const(1.0) + yl.scale(ro) + a * b) * coupling
