"""The settled oscillation under a JFET amplitude control: amplitude, frequency and
distortion. Topology-free: it takes the loop at the control's port
(:class:`partpick.physics.loop.Loop`) and the control as a record (:class:`Agc`): the
JFET branch (:mod:`partpick.physics.jfet`), the peak detector
(:mod:`partpick.physics.detector`) and, optionally, the error integrator.

The control is slow: over one cycle it is a constant gate voltage plus the detector's
ripple, so the settled oscillation is found in two steps.

1. **Fundamental** (the describing-function method for the JFET branch): with the
   output A cos(w t), the hold node's periodic state gives its mean and its ripple; the
   control node sits at its DC value V_C plus the ripple (the hold itself, or the
   integrator's output, whose gain to the ripple is -Z_f / R_in). The branch's
   fundamental admittance Y1 follows from the channel current evaluated over one
   period on the branch's internal waveforms, the channel's nonlinear residual fed
   back through the branch network until it settles. Newton's method then finds the
   frequency and the control variable with alpha + gamma Y1 = 0 at w: with an
   integrator the amplitude is fixed by the detector (its mean equals the reference)
   and the unknown is V_C; without one V_C is the hold's mean and the unknown is A.
2. **Harmonics** to first order: the channel's nonlinear current J_k at harmonic k
   (the V_DS^2 term, LAMBDA, and the ripple's modulation of the channel), the control
   node's ripple E_k and the detector's current pulses D_k drawn from the output (when
   the loop gives the coefficient eta of such a current) drive the linear network; the
   loop equation at k w gives the port voltage
   V_k = -(gamma (T_J J_k + T_E E_k) + eta D_k) / (alpha + gamma Y_k), and the probes
   give the output's harmonics. At DC the branch's own current (the gate network's,
   the channel's mean) through the network offsets the output, which the detector sees. Ripple at f modulating the gain by a depth m
   gives sidebands at 0 and 2f, near m/2 of the fundamental (amplitude modulation:
   any communications text, e.g. Haykin, Communication Systems, "amplitude modulation").

The first-order treatment is exact as the distortion goes to zero, which is where this
control works (THD well under 1 %).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from partpick.catalog import OpAmp
from partpick.physics.detector import Detector, HoldState, hold_waveform
from partpick.physics.harmonic import BalanceResult
from partpick.physics.jfet import JfetBranch, VcrBranch, branch_at, channel, dc_point, small_signal
from partpick.physics.junction import Junction
from partpick.physics.loop import Loop
from partpick.physics.opamp import loop_figures, open_loop_gain, output_resistance
from partpick.physics.rational import Rational, const

__all__ = ["Integrator", "Agc", "AgcState", "control_impedance", "integrator_gain", "rest_control", "rest_branch",
           "settled", "KMAX"]

KMAX = 9              # harmonics 1..9: what the THD counts
_NT = 256             # time points per period for the channel's waveforms


@dataclass(frozen=True, slots=True)
class Integrator:
    """The error integrator: r_in_ohm from the hold node to the op-amp's inverting
    input; c_f in series with r_zero_ohm (0: a pure integrator) from there to the
    output, which is the control node; the non-inverting input at v_plus_v (V, the
    reference, against the signal reference); the op-amp; swing: its output limits
    (V, against the signal reference); clamp: a diode from the output to the inverting
    input (holds the output near v_plus + Vf while the amplitude is low, so the
    integrator cannot wind up to the rail), or None; c_par_f: a capacitor across the
    whole feedback network (F, 0: none), which takes the detector's ripple off the
    proportional path above the loop's bandwidth."""

    r_in_ohm: float
    c_f: float
    r_zero_ohm: float
    v_plus_v: float
    opamp: OpAmp
    swing: tuple[float, float]
    clamp: Junction | None = None
    c_par_f: float = 0.0


@dataclass(frozen=True, slots=True)
class Agc:
    """A JFET amplitude control: the branch (its z_ctl is derived here), the detector
    at the oscillator output with its own loads (the bleed resistor), and the integrator
    (None: the hold node is the control node)."""

    vcr: VcrBranch
    detector: Detector
    integrator: Integrator | None = None

    def hold_detector(self, gate_load_s: float = 0.0) -> Detector:
        """The detector with every DC load on its hold node: its own, the integrator's
        input resistor (to the virtual ground at v_plus), or the gate network."""
        det = self.detector
        if self.integrator is not None:
            extra = ((1.0 / self.integrator.r_in_ohm, self.integrator.v_plus_v),)
        else:
            extra = ((gate_load_s, 0.0),) if gate_load_s else ()
        return replace(det, loads=det.loads + extra)


def _s(w_ref: float) -> Rational:
    return Rational(np.array([0.0, w_ref]), np.array([1.0]))


def _hold_z(agc: Agc, w_ref: float) -> Rational:
    """The hold node's small-signal impedance to the reference (detector diode off)."""
    return (_s(w_ref).scale(agc.detector.hold_f) + const(agc.detector.g_load_s)).inv()


def _feedback_z(it: Integrator, w_ref: float, g_clamp: float) -> Rational:
    """The integrator's feedback impedance: its zero and capacitor, with the clamp
    diode's conductance and the parallel capacitor across them."""
    yf = (const(it.r_zero_ohm) + _s(w_ref).scale(it.c_f).inv()).inv()
    if g_clamp > 0:
        yf = yf + const(g_clamp)
    if it.c_par_f > 0:
        yf = yf + _s(w_ref).scale(it.c_par_f)
    return yf.inv()


def control_impedance(agc: Agc, w_ref: float, g_clamp: float = 0.0, saturated: bool = False) -> Rational:
    """The control node's impedance to the reference, rational in p = s / w_ref: the
    hold node (no integrator), or the integrator's output: with A the op-amp's gain, Ro
    its output resistance, Z_in = R_in + Z_hold and Z_fb the feedback (its zero and
    capacitor, the clamp diode's conductance g_clamp across them),
    Z = 1 / ((1 + A Z_in / (Z_in + Z_fb)) / Ro + 1 / (Z_in + Z_fb)); Ro alone when the
    output is saturated."""
    it = agc.integrator
    if it is None:
        return _hold_z(agc, w_ref)
    ro = output_resistance(it.opamp)
    if saturated:
        return const(ro)
    z_in = const(it.r_in_ohm) + _hold_z(agc, w_ref)
    tot = z_in + _feedback_z(it, w_ref, g_clamp)
    a = open_loop_gain(it.opamp, w_ref)
    return ((const(1.0) + a * z_in / tot).scale(1.0 / ro) + tot.inv()).inv()


def integrator_gain(agc: Agc, w_ref: float) -> Rational:
    """Output per hold-node voltage of the integrator, open circuit:
    -A Z_fb / (R_in + Z_fb + A R_in) (-Z_fb / R_in with an ideal op-amp)."""
    it = agc.integrator
    zf = _feedback_z(it, w_ref, 0.0)
    a = open_loop_gain(it.opamp, w_ref)
    return (a * zf).scale(-1.0) / (const(it.r_in_ohm) + zf + a.scale(it.r_in_ohm))


def rest_control(agc: Agc) -> tuple[float, float, bool]:
    """The control node at rest, before any oscillation (the DC operating point):
    (voltage V, the clamp diode's conductance S, whether the integrator's output is
    saturated). The hold sits at its loads' level; an integrator drives its output up
    until the clamp conducts, or to its upper swing limit without a clamp."""
    it = agc.integrator
    if it is None:
        det = agc.detector
        return (det.i_load_a / det.g_load_s if det.g_load_s > 0 else 0.0), 0.0, False
    g_b, i_b = agc.detector.g_load_s, agc.detector.i_load_a
    g_i = 1.0 / it.r_in_ohm
    v_hold = (i_b + g_i * it.v_plus_v) / (g_b + g_i)
    i_cl = g_i * (it.v_plus_v - v_hold)
    if it.clamp is not None and i_cl > 0:
        j = it.clamp
        v_out = it.v_plus_v + float(j.voltage(np.array([i_cl]))[0])
        if v_out < it.swing[1]:
            gd = (i_cl + j.is_a) / (j.n * j.vt)
            return v_out, gd / (1.0 + gd * j.rs_ohm), False
    return it.swing[1], 0.0, True


def rest_branch(agc: Agc) -> JfetBranch:
    """The branch at rest for the linear analysis (startup): the JFET linearised at
    the DC point the control node's rest voltage sets, the control node's impedance."""
    vc, g_cl, sat = rest_control(agc)
    vd, vg = dc_point(agc.vcr, vc)
    return JfetBranch(agc.vcr, small_signal(agc.vcr, vd, vg), lambda w: control_impedance(agc, w, g_cl, sat))


@dataclass(frozen=True, slots=True)
class AgcState:
    """The settled control: vc_v the control node's DC voltage (V), vgs_v the JFET's DC
    gate-source voltage (V), hold: the detector's periodic state, ripple_v: the control
    node's ripple harmonics (V), vds_peak_v the largest drain-source voltage (V),
    y1_s the branch's fundamental admittance (S), dc_v the output's DC offset (V)."""

    vc_v: float
    vgs_v: float
    hold: HoldState
    ripple_v: tuple[complex, ...]
    vds_peak_v: float
    y1_s: complex
    dc_v: float = 0.0


class _Problem:
    """One settled-state problem: the loop, the control, and the transforms."""

    def __init__(self, loop: Loop, agc: Agc, kmax: int) -> None:
        self.loop, self.agc = loop, agc
        self.ks = np.arange(1, kmax + 1)
        theta = 2 * math.pi * np.arange(_NT) / _NT
        self.basis = np.exp(1j * np.outer(self.ks, theta))
        vcr = agc.vcr
        # the gate network's DC draw on the hold when the hold drives it directly
        # (a linearised gate sits at half the control voltage: 1 / (r_la + r_lb))
        gate_load = 1.0 / (vcr.r_la_ohm + vcr.r_lb_ohm) if vcr.linearised else 0.0
        self.det = agc.hold_detector(gate_load)
        self._z: dict[float, Rational] = {}
        self.dc = 0.0          # the output's DC offset (V): the branch's DC current through the network

    def _zc(self, w: float) -> Rational:
        if w not in self._z:
            self._z = {w: control_impedance(self.agc, w)}
        return self._z[w]

    def hold(self, amp: float, w: float, start=None) -> HoldState:
        return hold_waveform(self.det, amp, w / (2 * math.pi), kmax=self.ks.size, start=start, offset_v=self.dc)

    def ripple(self, hold: HoldState, w: float) -> np.ndarray:
        """The control node's ripple (Thevenin source) harmonics, V."""
        h = np.array(hold.harmonics[: self.ks.size])
        if self.agc.integrator is None:
            return h
        return integrator_gain(self.agc, w)(1j * self.ks) * h

    def respond(self, w: float, amp: float, vc: float, e: np.ndarray):
        """The branch driven so the output's fundamental is amp (V, zero phase), the
        control node at vc (V) with ripple e: a dict of the port voltage and current
        phasors (harmonic 1 driven, the others with the port held at zero), the
        branch's admittance at each harmonic, the harmonic sources and waveforms."""
        vcr = replace(self.agc.vcr, z_ctl=self._zc(w))
        vd0, vg0 = dc_point(vcr, vc)
        ss = small_signal(vcr, vd0, vg0)
        p1 = np.array([1j * w / self.loop.w_ref])
        cv = complex(self.loop.probe("osc", p1, np.ones(1), np.zeros(1))[0])
        ci = complex(self.loop.probe("osc", p1, np.zeros(1), np.ones(1))[0])
        pk = 1j * self.ks
        j = np.zeros(self.ks.size, dtype=complex)
        for _ in range(40):
            y, tj, te, kg, eg = branch_at(vcr, w, ss, pk)
            src = tj * j + te * e
            v = np.zeros(self.ks.size, dtype=complex)
            v[0] = (amp - ci * src[0]) / (cv + ci * y[0])
            i_port = y * v + src
            vd = v - vcr.r_ser_ohm * i_port
            vg = kg * vd + eg * e
            vds = vd0 + np.real(vd @ self.basis)
            vgs = vg0 + np.real(vg @ self.basis)
            ich, gds, gm = channel(vcr.jfet, vds, vgs)
            harm = 2 * np.fft.fft(ich)[1: self.ks.size + 1] / _NT
            ss_new = replace(ss, gds=float(gds.mean()), gm=float(gm.mean()))
            j_new = harm - ss_new.gds * vd - ss_new.gm * vg
            done = np.max(np.abs(j_new - j)) <= 1e-12 * max(abs(harm[0]), 1e-30)
            j, ss = j_new, ss_new
            if done:
                break
        # DC: the branch's current with the port at 0 V (its operating point, and the
        # mean the nonlinear channel adds) through the network to the output
        i_op = -vd0 / vcr.r_ser_ohm if vcr.r_ser_ohm > 0 else float(channel(vcr.jfet, vd0, vg0)[0])
        y0, tj0 = (complex(x[0]) for x in branch_at(vcr, w, ss, np.zeros(1))[:2])
        extra = float(np.mean(ich)) - float(channel(vcr.jfet, vd0, vg0)[0])
        s0 = i_op + tj0.real * extra
        p0 = np.zeros(1, dtype=complex)
        al0, ga0 = (complex(x[0]) for x in self.loop.coefficients(p0))
        v0 = -ga0 * s0 / (al0 + ga0 * y0)
        dc = float(np.real(self.loop.probe("osc", p0, np.array([v0]), np.array([y0 * v0 + s0]))[0]))
        return {"v": v, "i": i_port, "y": y, "src": src, "vds": vds, "vgs_dc": vg0, "ich": ich, "dc": dc}

    def drawn(self, hold: HoldState) -> np.ndarray:
        """Harmonics 1..K of the current the detector draws from the output (A)."""
        spec = np.fft.rfft(hold.i_a) / hold.i_a.size
        return 2 * spec[1: self.ks.size + 1]

    def inject(self, w: float, ks) -> np.ndarray:
        """The loop's coefficient of a current drawn from the output, at k w (0 when the
        topology does not give it)."""
        if self.loop.inject is None:
            return np.zeros(len(ks), dtype=complex)
        return self.loop.inject(1j * w * np.asarray(ks) / self.loop.w_ref)

    def residual(self, w: float, amp: float, vc: float, e: np.ndarray, jd: np.ndarray | None = None
                 ) -> tuple[complex, dict]:
        """The loop equation at the fundamental, alpha + gamma Y1 (+ eta J1 / V1 for the
        detector's current drawn from the output), scaled by |alpha|."""
        r = self.respond(w, amp, vc, e)
        p1 = np.array([1j * w / self.loop.w_ref])
        al, ga = (complex(x[0]) for x in self.loop.coefficients(p1))
        y1 = r["i"][0] / r["v"][0]
        extra = complex(self.inject(w, [1])[0] * jd[0] / r["v"][0]) if jd is not None else 0.0
        return (al + ga * y1 + extra) / abs(al), r


def _newton(f, x0: np.ndarray, steps: np.ndarray, limits: np.ndarray, iters: int = 40, tol: float = 1e-11):
    """Newton on a complex residual of two real unknowns, finite-difference Jacobian
    (relative steps ``steps``), each update clipped to ``limits``."""
    x = np.array(x0, dtype=float)
    r0 = f(x)
    ok = False
    for _ in range(iters):
        jac = np.empty((2, 2))
        for k in range(2):
            dx = np.zeros(2)
            dx[k] = steps[k]
            r1 = f(x + dx)
            jac[:, k] = [(r1 - r0).real / steps[k], (r1 - r0).imag / steps[k]]
        try:
            step = np.linalg.solve(jac, [-r0.real, -r0.imag])
        except np.linalg.LinAlgError:
            break
        scale = np.max(np.abs(step) / limits)
        if scale > 1:
            step /= scale
        x = x + step
        r0 = f(x)
        if abs(r0) < tol:
            ok = True
            break
    return x, ok


def _control_start(prob: _Problem, g_need: float) -> float:
    """A control voltage (V) at which the branch's conductance is about g_need (S): the
    channel conductance that leaves, behind the series resistor, 2 BETA (V_GS - VTO)
    solved for V_GS, and the gate network's DC divider back to the control node (a
    starting point for Newton)."""
    vcr = prob.agc.vcr
    p = vcr.jfet
    g_ch = 1.0 / max(1.0 / max(g_need, 1e-12) - vcr.r_ser_ohm, 1e-3)
    vgs = min(p.vto_v + g_ch / (2 * p.beta), 0.3)
    share = vcr.r_la_ohm / (vcr.r_la_ohm + vcr.r_lb_ohm) if vcr.linearised else 1.0
    return vgs / share


def _amp_for_mean(prob: _Problem, w: float, target: float, a0: float) -> tuple[float, HoldState]:
    """The output amplitude (V) at which the hold's mean is target (V): secant in ln A
    on the periodic detector state."""
    sign = 1.0 if prob.det.positive else -1.0
    x0, x1 = math.log(a0), math.log(a0 * 1.05)
    h0, h1 = prob.hold(math.exp(x0), w), prob.hold(math.exp(x1), w)
    f0, f1 = sign * (h0.mean_v - target), sign * (h1.mean_v - target)
    for _ in range(40):
        if f1 == f0:
            break
        x2 = x1 - f1 * (x1 - x0) / (f1 - f0)
        x2 = min(max(x2, x1 - 0.5), x1 + 0.5)
        x0, f0 = x1, f1
        x1 = x2
        h1 = prob.hold(math.exp(x1), w, start=h1.v_v)
        f1 = sign * (h1.mean_v - target)
        if abs(f1) < 1e-12:
            break
    return math.exp(x1), h1


def settled(loop: Loop, agc: Agc, lin, rails: tuple[float, float, float], *, kmax: int = KMAX,
            start: BalanceResult | None = None) -> tuple[BalanceResult | None, AgcState | None]:
    """The settled oscillation (see module docstring) and the control's state; (None,
    None) when the circuit does not start. rails: (positive rail, negative rail, signal
    reference), V, for the op-amps' swing."""
    if not lin.starts or not math.isfinite(lin.marginal_hz) or not math.isfinite(lin.marginal_g_s):
        return None, None
    prob = _Problem(loop, agc, kmax)
    it = agc.integrator
    w = 2 * math.pi * lin.marginal_hz
    if start is not None and start.state:
        amp, w, u = start.state
    else:
        amp, u = None, _control_start(prob, lin.marginal_g_s)
    if it is not None:
        amp, hold = _amp_for_mean(prob, w, it.v_plus_v, amp or it.v_plus_v + 0.6)
        x = np.array([w, u])
        ok = False
        for _ in range(8):
            e, jd = prob.ripple(hold, x[0]), prob.drawn(hold)
            x, ok = _newton(lambda z: prob.residual(z[0], amp, z[1], e, jd)[0], x, np.array([1e-7 * x[0], 1e-7]),
                            np.array([0.02 * x[0], 0.3]))
            prob.dc = prob.respond(x[0], amp, x[1], e)["dc"]
            amp_new, hold = _amp_for_mean(prob, x[0], it.v_plus_v, amp)
            moved = abs(amp_new / amp - 1)
            amp = amp_new
            if moved < 1e-10:
                break
        w, vc = float(x[0]), float(x[1])
    else:
        if amp is None:
            amp, _ = _amp_for_mean(prob, w, u, abs(u) + 0.6)
        cache: dict = {}

        def f(z):
            hold = prob.hold(math.exp(z[1]), z[0], start=cache.get("v"))
            cache["v"] = hold.v_v
            return prob.residual(z[0], math.exp(z[1]), hold.mean_v, np.array(hold.harmonics[:kmax]),
                                 prob.drawn(hold))[0]

        x = np.array([w, math.log(amp)])
        for _ in range(6):
            x, ok = _newton(f, x, np.array([1e-7 * w, 1e-7]), np.array([0.02 * w, 0.2]))
            hold = prob.hold(math.exp(x[1]), x[0])
            dc = prob.respond(x[0], math.exp(x[1]), hold.mean_v, np.array(hold.harmonics[:kmax]))["dc"]
            moved = abs(dc - prob.dc)
            prob.dc = dc
            if moved < 1e-9:
                break
        w, amp = float(x[0]), math.exp(x[1])
        hold = prob.hold(amp, w)
        vc = hold.mean_v
    e = prob.ripple(hold, w)
    _, r = prob.residual(w, amp, vc, e, prob.drawn(hold))
    return _result(prob, w, amp, vc, r, hold, e, rails, ok), AgcState(
        vc, float(r["vgs_dc"]), hold, tuple(e), float(np.max(np.abs(r["vds"]))), complex(r["i"][0] / r["v"][0]),
        prob.dc)


def _thd(h: np.ndarray) -> float:
    """sqrt(sum |H_k|^2, k = 2..9) / |H_1| (IEC 60268-3 style THD)."""
    return float(np.sqrt(np.sum(np.abs(h[1:9]) ** 2)) / abs(h[0]))


def _result(prob: _Problem, w: float, amp: float, vc: float, r: dict, hold: HoldState, e: np.ndarray, rails,
            ok: bool) -> BalanceResult:
    loop, ks = prob.loop, prob.ks
    p = 1j * w * ks / loop.w_ref
    al, ga = loop.coefficients(p)
    v, i = r["v"].copy(), r["i"].copy()
    # harmonics 2..K: the sources drive the loop, and so does the detector's current
    # drawn from the output (its pulses have every harmonic)
    y, src = r["y"][1:], r["src"][1:]
    drive = ga[1:] * src + prob.inject(w, ks[1:]) * prob.drawn(hold)[1:]
    v[1:] = -drive / (al[1:] + ga[1:] * y)
    i[1:] = y * v[1:] + src
    wave = lambda z: np.real(z @ prob.basis)  # noqa: E731
    osc, load = loop.probe("osc", p, v, i), loop.probe("load", p, v, i)
    regime, main = loop_figures(loop.amps, rails, lambda name: loop.probe(name, p, v, i), wave,
                                lambda z: wave(1j * ks * w * z))
    it = prob.agc.integrator
    ripple_pk = float(np.sum(np.abs(e)))
    if it is not None and regime == "limiter" and not (it.swing[0] < vc - ripple_pk and vc + ripple_pk < it.swing[1]):
        regime = "swing"     # the integrator's output at its limit: the reference no longer holds the amplitude
    osc_t, load_t = wave(osc), wave(load)
    pad = lambda z: tuple(complex(c) for c in z) + (0j,) * max(0, 9 - z.size)  # noqa: E731
    return BalanceResult(
        freq_hz=w / (2 * math.pi), osc_peak_v=float((osc_t.max() - osc_t.min()) / 2),
        load_peak_v=float((load_t.max() - load_t.min()) / 2), osc_thd=_thd(osc), load_thd=_thd(load),
        osc_harmonics=pad(osc), load_harmonics=pad(load), x_min_v=main[0], x_max_v=main[1], slew_v_per_s=main[2],
        iout_peak_a=main[3], ilim_peak_a=float(np.max(np.abs(r["ich"]))), iout_rms_a=main[4], regime=regime,
        converged=bool(ok), harmonics=int(ks[-1]), state=(amp, w, vc if it is not None else math.log(amp)))
