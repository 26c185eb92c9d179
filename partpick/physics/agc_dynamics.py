"""The JFET amplitude control in time: from power-on to the settled amplitude, cycle by
cycle, by the envelope equation (:mod:`partpick.physics.envelope`) with the control's own
states.

A peak detector samples: around each peak its diode charges the hold in a short pulse,
between peaks the hold and the integrator evolve linearly. So one period (T = 2 pi / w)
is stepped in 32 stretches, each with:

- the linear part: the hold (bleed resistor, integrator input) and the integrator (its
  feedback network: capacitor, zero resistor, the capacitor across them; the clamp
  diode as a limit; the op-amp's swing) are linear within each mode (free, clamped,
  saturated): exact matrix exponentials;
- the detector's charge over the stretch: with the diode's exponential law the charge
  equation C dV/dt = Is exp((A cos(w t) + V_dc - V) / (n Vt)) integrates in closed form,
  exp(V_end / n Vt) = exp(V_start / n Vt) + (Is / (C w n Vt)) * integral of
  exp((A cos(theta) + V_dc) / n Vt) over the stretch (Gauss-Legendre nodes; over a whole
  period the integral is 2 pi I0(A / n Vt), I0 the modified Bessel function: the
  peak-rectifier analysis of any electronics text, written out for the exponential
  diode; V_dc the output's DC offset);
- the envelope: ln A grows by sigma(V_C) weighted by 2 sin^2 of the phase (a resonator
  takes energy from a changed gain in proportion to its velocity squared, mean weight
  1), sigma the real part of the loop's dominant natural frequency with the JFET
  linearised at the DC point the control voltage V_C sets (gate junctions included),
  shifted so it vanishes at the settled V_C of :func:`partpick.physics.agc.settled`;
  growth stops at the op-amp's swing.

The damping ratio comes from the map of one period linearised at its settled point
(eigenvalues mu, lambda = ln(mu) / T). The start is the DC operating point, as in the
transient simulators: the hold at its loads' level, the integrator at its clamp or its
upper swing limit, the oscillation at start_v. The closed-form charge leaves out the
diode's series resistance, so the map settles a few parts in a thousand from the
harmonic-balance amplitude; :func:`agc_settling` scales the envelope onto it.
"""

from __future__ import annotations

import math
from bisect import bisect_right

import numpy as np

from partpick.physics.agc import Agc, AgcState, rest_control
from partpick.physics.envelope import START_V, Settling, band_times, growth_table
from partpick.physics.jfet import JfetBranch, dc_point, small_signal
from partpick.physics.loop import Loop

__all__ = ["agc_settling", "agc_damping", "CycleMap"]

_SUB = 32          # sub-steps per cycle
_GL_X, _GL_W = np.polynomial.legendre.leggauss(6)


class CycleMap:
    """The peak-to-peak map of one control (see module docstring). States: ln A, the
    hold V_H and, with an integrator, its feedback network's voltage V_F (inverting
    input minus output) and its capacitor's q."""

    def __init__(self, loop: Loop, agc: Agc, state: AgcState, amp_v: float, freq_hz: float, clip_v: float) -> None:
        self.agc, self.it, self.det = agc, agc.integrator, agc.detector
        self.amp_v, self.clip_v = amp_v, clip_v
        self.period = 1.0 / freq_hz
        vcr = agc.vcr
        it = self.it
        gate = 1.0 / (vcr.r_la_ohm + vcr.r_lb_ohm) if vcr.linearised and it is None else 0.0
        self.g_h, self.i_h = self.det.g_load_s + gate, self.det.i_load_a
        lo, hi = it.swing if it is not None else (min(3 * vcr.jfet.vto_v - 1.0, -clip_v), 0.8)
        # dense where the channel conducts (the control voltage pinches it off at VTO,
        # at 2 VTO when the gate sees half of it), sparse beyond
        pinch = vcr.jfet.vto_v * (vcr.r_la_ohm + vcr.r_lb_ohm) / vcr.r_la_ohm if vcr.linearised else vcr.jfet.vto_v
        dense = np.linspace(max(pinch - 0.3, lo), min(0.8, hi), 61)
        near = state.vc_v + np.linspace(-0.2, 0.2, 9)
        self.vc_grid = np.unique(np.concatenate([np.linspace(lo, hi, 17), dense, near]))

        def branch_at(vc: float) -> JfetBranch:
            vd, vg = dc_point(vcr, vc)
            return JfetBranch(vcr, small_signal(vcr, vd, vg))

        sig = growth_table(loop, branch_at, self.vc_grid)
        self.sig = sig - float(np.interp(state.vc_v, self.vc_grid, sig))
        self._grid, self._sig = self.vc_grid.tolist(), self.sig.tolist()
        self._slope = (np.diff(self.sig) / np.diff(self.vc_grid)).tolist()
        j = self.det.junction
        self.nvt = j.n * j.vt
        self.log_k = math.log(j.is_a / (self.det.hold_f * 2 * math.pi * freq_hz * self.nvt))
        self._sign = 1.0 if self.det.positive else -1.0
        self.v_clamp = 0.0
        if it is not None:
            vc_rest, _, sat = rest_control(agc)
            self.v_clamp = vc_rest - it.v_plus_v if (it.clamp is not None and not sat) else math.inf
        self._phi: dict = {}
        self.state = state
        self._gl = self._nodes()
        # the oscillation takes energy from a changed gain in proportion to its
        # velocity squared: weight 2 sin^2 theta (mean 1), theta from the peak
        self.weight = (2 * np.sin(2 * math.pi * np.arange(_SUB + 1) / _SUB) ** 2).tolist()

    def sigma(self, vc: float) -> float:
        """The envelope's growth rate (1/s) at control voltage vc (V): the table,
        linearly interpolated."""
        g = self._grid
        k = min(max(bisect_right(g, vc) - 1, 0), len(g) - 2)
        return self._sig[k] + self._slope[k] * (vc - g[k])

    # -- the detector's charge --------------------------------------------------------------
    def _nodes(self) -> list:
        """Per sub-step k: (the largest -cos theta over the stretch, the Gauss-Legendre
        nodes' cos theta, their log weights plus the DC offset's share), fixed for the
        map, so a sub-step's charge is scalar arithmetic (the map runs for up to
        100,000 cycles of 32 sub-steps: array calls on six nodes cost more than the
        sums)."""
        s = self._sign
        out = []
        for k in range(_SUB):
            a, b = 2 * math.pi * k / _SUB, 2 * math.pi * (k + 1) / _SUB
            top = max(-math.cos(a), -math.cos(b), -1.0 if a < math.pi < b else -2.0)
            theta = 0.5 * (b - a) * (_GL_X + 1.0) + a
            lw = s * self.state.dc_v / self.nvt + np.log(0.5 * (b - a) * _GL_W)
            out.append((top, np.cos(theta).tolist(), lw.tolist()))
        return out

    def _charge(self, amp: float, h: float, k: int) -> float:
        """The hold after sub-step k of the cycle (theta from 2 pi k / N to
        2 pi (k + 1) / N, the detector's peak at theta = pi), from h before it: the
        closed-form charge of the exponential diode (see module docstring) over that
        stretch of the sine, by Gauss-Legendre nodes in log form."""
        s = self._sign
        hs = s * h
        top, cos_t, lw = self._gl[k]
        nvt = self.nvt
        if amp * top + s * self.state.dc_v - hs < -40 * nvt:
            return h        # the diode carries nothing worth counting in this stretch
        expo = [w - amp * c / nvt for c, w in zip(cos_t, lw)]
        peak = max(expo)
        log_int = peak + math.log(sum(math.exp(e - peak) for e in expo)) + self.log_k
        u = hs / nvt
        hi, lo = (u, log_int) if u >= log_int else (log_int, u)
        return s * nvt * (hi + math.log1p(math.exp(lo - hi)))

    # -- the linear part -----------------------------------------------------------------------
    def _system(self, mode: str):
        """(M, b) of dx/dt = M x + b for the hold and integrator states in ``mode``:
        'free' (op-amp linear), 'clamp' (its output held by the clamp), 'hi' / 'lo'
        (saturated)."""
        c_h = self.det.hold_f
        it = self.it
        if it is None:
            return np.array([[-self.g_h / c_h]]), np.array([self.i_h / c_h])
        g_i = 1.0 / it.r_in_ohm
        v_sat = {"hi": it.swing[1], "lo": it.swing[0]}.get(mode)
        two = it.r_zero_ohm > 0
        n = 3 if two else 2
        m = np.zeros((n, n))
        b = np.zeros(n)
        # the input current I_in = g_i (V_H - V_-): V_- = v_plus, or v_sat + V_F when saturated
        m[0, 0] = -(self.g_h + g_i) / c_h
        b[0] = self.i_h / c_h
        if v_sat is None:
            b[0] += g_i * it.v_plus_v / c_h
            in_vh, in_vf, in_c = g_i, 0.0, -g_i * it.v_plus_v
        else:
            m[0, 1] = g_i / c_h
            b[0] += g_i * v_sat / c_h
            in_vh, in_vf, in_c = g_i, -g_i, -g_i * v_sat
        if two:
            c_f = it.c_par_f if it.c_par_f > 0 else it.c_f * 1e-3
            g_z = 1.0 / it.r_zero_ohm
            if mode != "clamp":
                m[1, 0], m[1, 1], m[1, 2] = in_vh / c_f, (in_vf - g_z) / c_f, g_z / c_f
                b[1] = in_c / c_f
            m[2, 1], m[2, 2] = g_z / it.c_f, -g_z / it.c_f
        elif mode != "clamp":
            c_f = it.c_f + it.c_par_f
            m[1, 0], m[1, 1] = in_vh / c_f, in_vf / c_f
            b[1] = in_c / c_f
        return m, b

    def _step(self, mode: str):
        """The exact update x -> Phi x + g over T / _SUB in ``mode`` (as lists: the map
        applies it to two to four states per sub-step)."""
        if mode not in self._phi:
            from scipy.linalg import expm   # (here: a design that never runs this map loads no scipy)

            m, b = self._system(mode)
            n = m.shape[0]
            big = np.zeros((n + 1, n + 1))
            big[:n, :n], big[:n, n] = m, b
            e = expm(big * (self.period / _SUB))
            self._phi[mode] = (e[:n, :n].tolist(), e[:n, n].tolist())
        return self._phi[mode]

    def _apply(self, mode: str, x: list) -> list:
        phi, g = self._step(mode)
        return [sum(p * v for p, v in zip(row, x)) + gi for row, gi in zip(phi, g)]

    def control(self, x) -> tuple[float, str]:
        """(control voltage V_C, mode) for the hold/integrator states x."""
        it = self.it
        if it is None:
            return x[0], "free"
        out = it.v_plus_v - x[1]
        if out >= it.swing[1]:
            return it.swing[1], "hi"
        if out <= it.swing[0]:
            return it.swing[0], "lo"
        if out >= it.v_plus_v + self.v_clamp:
            return it.v_plus_v + self.v_clamp, "clamp"
        return out, "free"

    def advance(self, y: np.ndarray) -> np.ndarray:
        """One period from half a period before a peak of the detector's polarity: in
        each sub-step the linear evolution, then the detector's charge over it, the
        envelope growing meanwhile (trapezoidal rule on sigma)."""
        la, x = float(y[0]), [float(v) for v in y[1:]]
        dt = self.period / _SUB
        la_max = math.log(self.clip_v)
        w = self.weight
        vc, mode = self.control(x)
        s0 = self.sigma(vc)
        for k in range(_SUB):
            if mode == "clamp":
                x[1] = -self.v_clamp
                # the clamp holds while the feedback current would push the output higher
                free = self._apply("free", x)
                mode = "free" if free[1] >= -self.v_clamp else "clamp"
            x_new = self._apply(mode, x)
            x_new[0] = self._charge(min(math.exp(la), self.clip_v), x_new[0], k)
            vc, mode = self.control(x_new)
            s1 = self.sigma(vc)
            la += 0.5 * (s0 * w[k] + s1 * w[k + 1]) * dt
            la = min(la, la_max)
            x, s0 = x_new, s1
        return np.array([la] + x)

    def initial(self, start_v: float) -> np.ndarray:
        it = self.it
        if it is None:
            return np.array([math.log(start_v), self.i_h / self.g_h if self.g_h > 0 else 0.0])
        vc, _, sat = rest_control(self.agc)
        g_b, i_b = self.det.g_load_s, self.det.i_load_a
        if sat:
            v_h = i_b / g_b if g_b > 0 else 0.0      # no current into the integrator at DC
            v_f = v_h - vc
        else:
            g_i = 1.0 / it.r_in_ohm
            v_h = (i_b + g_i * it.v_plus_v) / (g_b + g_i)
            v_f = it.v_plus_v - vc
        y = [math.log(start_v), v_h, v_f] + ([v_f] if it.r_zero_ohm > 0 else [])
        return np.array(y)

    def fixed_point(self) -> np.ndarray:
        """The settled state half a period before a peak."""
        y = [math.log(self.amp_v), self.state.hold.mean_v]
        if self.it is not None:
            v_f = self.it.v_plus_v - self.state.vc_v
            y += [v_f] + ([v_f] if self.it.r_zero_ohm > 0 else [])
        return np.array(y)

    def damping(self) -> tuple[float, float]:
        """(damping ratio of the slowest oscillatory mode of the map linearised at its
        fixed point, 1 when none; the slowest decay rate, 1/s)."""
        y0 = self.fixed_point()
        f0 = self.advance(y0)
        n = y0.size
        jac = np.empty((n, n))
        for k in range(n):
            h = 1e-6 * max(abs(y0[k]), 1e-2)
            y1 = y0.copy()
            y1[k] += h
            jac[:, k] = (self.advance(y1) - f0) / h
        mu = np.linalg.eigvals(jac).astype(complex)
        lam = np.log(np.where(np.abs(mu) > 0, mu, 1e-300)) / self.period
        osc = [z for z in lam if abs(z.imag) > 1e-9 * abs(z)]
        zeta = min((-z.real / abs(z) for z in osc), default=1.0)
        decay = min((-z.real for z in lam), default=0.0)
        return float(zeta), float(decay)


def agc_damping(loop: Loop, agc: Agc, state: AgcState, amp_v: float, freq_hz: float,
                clip_v: float = math.inf) -> tuple[float, float]:
    """(damping ratio, slowest decay rate in 1/s) of the control's loop at its settled
    point (:meth:`CycleMap.damping`), without the run from power-on (arguments as
    :func:`agc_settling`)."""
    return CycleMap(loop, agc, state, amp_v, freq_hz, clip_v).damping()


def agc_settling(loop: Loop, agc: Agc, state: AgcState, amp_v: float, freq_hz: float, band: tuple[float, float], *,
                 start_v: float = START_V, clip_v: float = math.inf, max_cycles: int = 100_000) -> Settling:
    """The envelope of the output from power-on (see module docstring): amp_v (V) and
    freq_hz (Hz) are the settled oscillation of :func:`partpick.physics.agc.settled`,
    band the amplitude band (V) the settling time refers to, clip_v the op-amp's swing
    (V). The run lasts until the envelope has stayed within a tenth of the band's
    half-width for ten of the loop's slowest time constants; the envelope is then scaled
    by the few parts in a thousand that put its end on amp_v (the map's closed-form
    pulse leaves out the diode's series resistance)."""
    m = CycleMap(loop, agc, state, amp_v, freq_hz, clip_v)
    zeta, decay = m.damping()
    y = m.initial(min(start_v, amp_v))
    if decay <= 0:
        # the settled point is unstable: the amplitude swings in a limit cycle for ever
        return Settling(math.inf, math.inf, math.inf, zeta, np.zeros(1), np.full(1, start_v))
    window = max(int(10.0 / max(decay, 1e-9) / m.period), 20)
    quiet = 0.1 * (band[1] - band[0]) / 2 / amp_v          # relative
    limit = min(max_cycles, max(40 * window, 2000))
    amps = [math.exp(y[0])]
    for k in range(1, limit + 1):
        y = m.advance(y)
        amps.append(math.exp(y[0]))
        if k % window == 0 and k >= 2 * window:
            last = np.array(amps[-window:])
            # still, and at the settled amplitude (not held at the op-amp's swing)
            if last.max() - last.min() < quiet * last.mean() and abs(last.mean() / amp_v - 1) < 0.03:
                break
    amp = np.array(amps)
    if not (math.isfinite(amp[-1]) and amp[-1] > 0):
        # the envelope died away (or ran off) in the map: it never settles at amp_v
        return Settling(math.inf, math.inf, math.inf, zeta, np.arange(amp.size) * m.period, amp)
    amp *= amp_v / amp[-1]
    t = np.arange(amp.size) * m.period
    first, settle = band_times(t, amp, *band)
    return Settling(first, settle, max(float(amp.max()) / amp_v - 1.0, 0.0), zeta, t, amp)
