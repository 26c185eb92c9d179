"""The n-channel JFET as a voltage-controlled resistor: the SPICE level-1 channel law,
the gate junctions, and the small network around the channel in an amplitude control
(series resistor, the gate feedback that linearises it, the control node).

Channel (Shichman and Hodges, IEEE JSSC 3(3), 1968, the JFET model of Berkeley SPICE and
ngspice; ngspice's 'B' doping-tail parameter at its default 1, where the Sydney
University form reduces to this one): with V_GST = V_GS - VTO, in the triode region
(0 <= V_DS <= V_GST) I_D = BETA (1 + LAMBDA V_DS) V_DS (2 V_GST - V_DS), in saturation
I_D = BETA (1 + LAMBDA V_DS) V_GST^2, zero below pinch-off; for V_DS < 0 drain and source
swap roles (the gate-drain voltage controls). At small V_DS the channel is a resistor

    r_DS = 1 / (2 BETA (V_GS - VTO)) = r_DS(on) / (1 - V_GS / V_P),  r_DS(on) = 1 / (2 BETA |VTO|),

with V_P = VTO the pinch-off voltage: the law of the JFET voltage-controlled-resistor
application notes (e.g. Siliconix, "FETs as voltage-controlled resistors", AN105, 1997).
The V_DS^2 term makes the resistor nonlinear; feeding half the drain-source voltage back
to the gate (two equal resistors from drain and control node to the gate) gives
V_GS = V_C / 2 + V_DS / 2, and then I_D = BETA V_DS (V_C - 2 VTO) (1 + LAMBDA V_DS): the
square term cancels (same notes), leaving LAMBDA and the gate capacitances.

Gate junctions: ngspice's, a Shockley junction gate-source and gate-drain with IS and
the thermal voltage, below -3 Vt the smooth reverse tail -IS (1 + (3 Vt / (e V))^3).

Temperature (ngspice's JFET temperature parameters): VTO(T) = VTO + VTOTC (T - T0),
BETA(T) = BETA 1.01^(BETATCE (T - T0)) with BETATCE in %/K. The gate capacitances are
constant (the netlist writes them as capacitors) and IS keeps its 25 degC value: the gate
junctions only conduct in the first moments after power-on, where nothing is measured.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from partpick.physics.junction import thermal_voltage
from partpick.physics.rational import Rational, const

__all__ = ["T0_K", "JfetParams", "jfet_at", "channel", "gate_junction", "channel_conductance", "VcrBranch",
           "SmallSignal", "dc_point", "small_signal", "branch_network", "branch_at", "JfetBranch"]

T0_K = 298.15
_E = math.e


@dataclass(frozen=True, slots=True)
class JfetParams:
    """One n-channel JFET at one temperature: vto_v (V), beta (A/V^2), lam (1/V), is_a
    (A), cgs_f / cgd_f (F), vt_v = k T / q (V)."""

    vto_v: float
    beta: float
    lam: float
    is_a: float
    cgs_f: float
    cgd_f: float
    vt_v: float

    @property
    def r_on_ohm(self) -> float:
        """r_DS(on) = 1 / (2 BETA |VTO|), ohm."""
        return 1.0 / (2 * self.beta * abs(self.vto_v))


def jfet_at(part, temp_k: float) -> JfetParams:
    """The catalog JFET ``part`` (:class:`partpick.actives.Jfet`) at temp_k (K)."""
    dt = temp_k - T0_K
    return JfetParams(part.vto_v + part.vto_tempco_v_per_k * dt,
                      part.beta_a_per_v2 * 1.01 ** (100 * part.beta_tce_per_k * dt),
                      part.lambda_per_v, part.is_a, part.cgs_f, part.cgd_f, thermal_voltage(temp_k))


def channel(p: JfetParams, vds, vgs):
    """Drain current (A, drain to source) and its derivatives gds = dI/dV_DS and gm =
    dI/dV_GS (S) at V_DS, V_GS (V; arrays or numbers): the SPICE level-1 law above,
    in ngspice's normal and inverse modes."""
    vds = np.asarray(vds, dtype=float)
    vgs = np.asarray(vgs, dtype=float)
    inverse = vds < 0
    x = np.abs(vds)
    vgst = np.where(inverse, vgs - vds, vgs) - p.vto_v   # the controlling junction's overdrive
    on = vgst > 0
    tri = on & (vgst >= x)
    sat = on & ~tri
    betap = p.beta * (1 + p.lam * x)
    # current in the conducting direction, and its derivatives in x and in the overdrive
    cpart = np.where(tri, x * (2 * vgst - x), np.where(sat, vgst * vgst, 0.0))
    d_x = np.where(tri, 2 * (vgst - x), 0.0)
    d_v = np.where(tri, 2 * x, np.where(sat, 2 * vgst, 0.0))
    sign = np.where(inverse, -1.0, 1.0)
    i = sign * betap * cpart
    gm = sign * betap * d_v
    # d/dV_DS: x = |V_DS|, and in inverse mode the overdrive falls with V_DS
    gds = betap * d_x + p.beta * p.lam * cpart + np.where(inverse, betap * d_v, 0.0)
    gds = np.where(on, gds, 0.0)
    return i, gds, gm


def gate_junction(p: JfetParams, v):
    """Current (A) and conductance (S) of one gate junction at forward voltage v (V)."""
    v = np.asarray(v, dtype=float)
    vt = p.vt_v
    deep = v < -3 * vt
    vs = np.where(deep, v, -3 * vt)       # keeps the tail's arithmetic finite where unused
    arg = (3 * vt / (vs * _E)) ** 3
    ev = np.exp(np.minimum(np.where(deep, 0.0, v), 40 * vt) / vt)
    i = np.where(deep, -p.is_a * (1 + arg), p.is_a * (ev - 1))
    g = np.where(deep, p.is_a * 3 * arg / vs, p.is_a * ev / vt)
    return i, g


def channel_conductance(p: JfetParams, vgs: float) -> float:
    """Small-signal channel conductance at V_DS = 0: 2 BETA (V_GS - VTO), S (0 below
    pinch-off)."""
    return 2 * p.beta * max(vgs - p.vto_v, 0.0)


@dataclass(frozen=True, slots=True)
class VcrBranch:
    """The channel in its network, a two-terminal branch from port node a to port node
    b (the JFET's source): r_ser_ohm from a to the drain (0: drain on a); r_la_ohm from
    drain to gate (inf: no linearising feedback); r_lb_ohm from the gate to the control
    node (0: gate on the control node); z_ctl: the control node's small-signal impedance
    to b as a rational function of p = s / w_ref (None: an ideal voltage, no impedance).
    The port node sits at 0 V DC (an op-amp's virtual ground)."""

    jfet: JfetParams
    r_ser_ohm: float
    r_la_ohm: float
    r_lb_ohm: float
    z_ctl: Rational | None = None

    @property
    def linearised(self) -> bool:
        return math.isfinite(self.r_la_ohm)


@dataclass(frozen=True, slots=True)
class SmallSignal:
    """The JFET linearised at a DC point: gds, gm (channel), ggs, ggd (gate junctions),
    all S; vd_v, vg_v: that DC point (V, against the source)."""

    gds: float
    gm: float
    ggs: float
    ggd: float
    vd_v: float = 0.0
    vg_v: float = 0.0


def dc_point(b: VcrBranch, vc_v: float, iters: int = 100) -> tuple[float, float]:
    """DC drain and gate voltages (V, against the source) with the control node at
    vc_v (V): Newton on the drain and gate nodes, the gate junctions included (they
    clamp the gate near +0.5 V when the control node goes positive)."""
    p = b.jfet
    g_ser = 1.0 / b.r_ser_ohm if b.r_ser_ohm > 0 else None
    g_la = 1.0 / b.r_la_ohm if b.linearised else 0.0
    g_lb = 1.0 / b.r_lb_ohm if b.r_lb_ohm > 0 else None
    vd = 0.0
    vg = vc_v * (g_lb / (g_lb + g_la)) if g_lb is not None else vc_v
    vg = min(vg, 0.5)
    for _ in range(iters):
        i_ch, gds, gm = (float(x) for x in channel(p, vd, vg))
        i_gs, g_gs = (float(x) for x in gate_junction(p, vg))
        i_gd, g_gd = (float(x) for x in gate_junction(p, vg - vd))
        # residuals: current leaving the gate and the drain node
        f = np.zeros(2)
        jac = np.zeros((2, 2))
        f[0] = i_gs + i_gd + g_la * (vg - vd)
        jac[0] = [g_gs + g_gd + g_la, -g_gd - g_la]
        if g_lb is not None:
            f[0] += g_lb * (vg - vc_v)
            jac[0, 0] += g_lb
        f[1] = i_ch - i_gd + g_la * (vd - vg)
        jac[1] = [gm - g_gd - g_la, gds + g_gd + g_la]
        if g_ser is not None:
            f[1] += g_ser * vd
            jac[1, 1] += g_ser
        # unknowns (vg, vd); a node held by a source has its own trivial equation
        if g_lb is None:
            f[0], jac[0] = vg - vc_v, [1.0, 0.0]
        if g_ser is None:
            f[1], jac[1] = vd, [0.0, 1.0]
        step = np.linalg.solve(jac, -f)
        step = np.clip(step, -0.2, 0.2)
        vg += step[0]
        vd += step[1]
        if np.max(np.abs(step)) < 1e-13:
            break
    return vd, vg


def small_signal(b: VcrBranch, vd_v: float, vg_v: float) -> SmallSignal:
    """The branch's JFET linearised at the DC point (vd_v, vg_v)."""
    p = b.jfet
    _, gds, gm = channel(p, vd_v, vg_v)
    _, ggs = gate_junction(p, vg_v)
    _, ggd = gate_junction(p, vg_v - vd_v)
    return SmallSignal(float(gds), float(gm), float(ggs), float(ggd), vd_v, vg_v)


@dataclass(frozen=True, slots=True)
class _Network:
    """The branch's linear response (rationals in p): port current I = y V + t_j J +
    t_e E for port voltage V, a current J from drain to source beside the channel's
    linear part, and a voltage E behind the control node's impedance; drain voltage
    Vd = V - r_ser I; gate voltage Vg = k_g Vd + e_g E."""

    y: Rational
    t_j: Rational
    t_e: Rational
    k_g: Rational
    e_g: Rational
    r_ser: float


def branch_network(b: VcrBranch, w_ref: float, ss: SmallSignal) -> _Network:
    """The branch's linear response around ``ss`` (see :class:`_Network`), by nodal
    analysis of the gate node (admittances Y1 drain-gate, Y2 gate-source, Y3 gate to the
    control voltage through r_lb and the control node's impedance) and the drain node:

        Vg = (Y1 Vd + Y3 E) / (Y1 + Y2 + Y3),
        I = Vd (gds + gm k_g + Y1 (1 - k_g)) + (gm - Y1) e_g E + J = Yd Vd + Tc E + J,

    and with the series resistor Vd = V - r_ser I."""
    p = b.jfet
    s = Rational(np.array([0.0, w_ref]), np.array([1.0]))      # s in p = s / w_ref
    y1 = s.scale(p.cgd_f) + const(ss.ggd + (1.0 / b.r_la_ohm if b.linearised else 0.0))
    y2 = s.scale(p.cgs_f) + const(ss.ggs)
    one = const(1.0)
    if b.r_lb_ohm == 0 and b.z_ctl is None:
        k_g, e_g = const(0.0), one                               # the gate is the control voltage
    else:
        z3 = const(b.r_lb_ohm) if b.z_ctl is None else const(b.r_lb_ohm) + b.z_ctl
        y3 = z3.inv()
        tot = y1 + y2 + y3
        k_g, e_g = y1 / tot, y3 / tot
    yd = const(ss.gds) + k_g.scale(ss.gm) + y1 * (one - k_g)
    tc = (const(ss.gm) - y1) * e_g
    den = (one + yd.scale(b.r_ser_ohm)).inv()
    return _Network(yd * den, den, tc * den, k_g, e_g, b.r_ser_ohm)


def branch_at(b: VcrBranch, w_ref: float, ss: SmallSignal, p) -> tuple[np.ndarray, ...]:
    """The branch's linear response at the points ``p`` (= s / w_ref; complex array):
    (y, t_j, t_e, k_g, e_g) of :func:`branch_network` evaluated there, by the same nodal
    equations in complex arithmetic (no rationals built: the harmonic balance of the
    control loop asks for these at a few harmonics tens of thousands of times)."""
    q = b.jfet
    p = np.asarray(p, dtype=complex)
    s = w_ref * p
    y1 = s * q.cgd_f + (ss.ggd + (1.0 / b.r_la_ohm if b.linearised else 0.0))
    y2 = s * q.cgs_f + ss.ggs
    if b.r_lb_ohm == 0 and b.z_ctl is None:
        k_g, e_g = np.zeros_like(p), np.ones_like(p)           # the gate is the control voltage
    else:
        with np.errstate(divide="ignore", invalid="ignore"):
            z3 = b.r_lb_ohm + (0.0 if b.z_ctl is None else b.z_ctl(p))
            y3 = np.where(np.isinf(z3), 0.0, 1.0 / z3)          # (a control node open at DC)
        tot = y1 + y2 + y3
        k_g, e_g = y1 / tot, y3 / tot
    yd = ss.gds + ss.gm * k_g + y1 * (1.0 - k_g)
    tc = (ss.gm - y1) * e_g
    den = 1.0 / (1.0 + b.r_ser_ohm * yd)
    return yd * den, den, tc * den, k_g, e_g


class JfetBranch:
    """The branch at rest for the linear loop analysis, with the interface of
    :class:`partpick.physics.loop.Branch`: its exact small-signal admittance as a
    rational function (the channel and gate junctions linearised at the DC point, the
    gate network, the control node's impedance). g0_s is the channel's conductance."""

    table = None
    series_table = None
    series_ohm = 0.0
    cap_f = 0.0
    c0_f = 0.0              # its capacitances are inside the rational admittance
    has_charge = False

    def __init__(self, b: VcrBranch, ss: SmallSignal, z_ctl_at=None) -> None:
        """z_ctl_at(w_ref): the control node's impedance in p = s / w_ref (None: the
        branch's own z_ctl, or an ideal control voltage)."""
        self.vcr, self.ss, self.z_ctl_at = b, ss, z_ctl_at
        self.g0_s = ss.gds
        self._cache: dict[float, Rational] = {}

    def rational(self, w_ref: float, g_element: float | None = None) -> Rational:
        if w_ref not in self._cache:
            b = self.vcr if self.z_ctl_at is None else replace(self.vcr, z_ctl=self.z_ctl_at(w_ref))
            self._cache[w_ref] = branch_network(b, w_ref, self.ss).y
        return self._cache[w_ref]

    def admittance(self, p, w_ref: float, g_element: float | None = None):
        return self.rational(w_ref)(p)

    @property
    def is_linear_zero(self) -> bool:
        return False
