"""The peak detector of an amplitude control: a diode from the oscillator output to a
hold capacitor, loaded by resistors to fixed voltages (the bleed resistor, an
integrator's input resistor at its virtual ground, a gate network).

Two views of the same circuit:

- the **periodic steady state** for an output A cos(w t): the hold voltage over one
  period, from the hold node's charge balance C dV/dt = i_diode(t) - sum g_j (V - v_j),
  discretised by the backward Euler rule on M points of the period and solved for the
  periodic solution by Newton's method (the Jacobian is cyclic lower-bidiagonal, solved
  by one forward recurrence). Its mean is what a slow control compares with its
  reference; its ripple, which repeats at the oscillation frequency (half-wave
  detection), modulates the control and so the gain;
- the **averaged** detector for the slow dynamics: the mean diode current over one
  cycle with the hold voltage taken as constant (a describing-function view of the
  rectifier, as in the classic analysis of peak rectifiers with a capacitive load:
  e.g. Sedra and Smith, Microelectronic Circuits, "the peak rectifier").

The diode is a Shockley junction with its series resistance
(:class:`partpick.physics.junction.Junction`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from partpick.physics.junction import Junction

__all__ = ["Detector", "HoldState", "hold_waveform", "average_current", "POINTS"]

POINTS = 1024          # points per period of the periodic solution


@dataclass(frozen=True, slots=True)
class Detector:
    """junction: the diode at its temperature; positive: anode at the output (the hold
    charges on positive peaks, to about A - Vf), else cathode at the output (the hold
    goes to about -(A - Vf)); hold_f: the hold capacitor (F) to the signal reference;
    loads: (conductance S, voltage V) of each resistor from the hold node to a fixed
    voltage (relative to the signal reference)."""

    junction: Junction
    positive: bool
    hold_f: float
    loads: tuple[tuple[float, float], ...]

    @property
    def g_load_s(self) -> float:
        return sum(g for g, _ in self.loads)

    @property
    def i_load_a(self) -> float:
        """Current the loads draw at 0 V on the hold (sum g v, into the hold), A."""
        return sum(g * v for g, v in self.loads)

    def into_hold(self, v_out, v_hold):
        """Diode current into the hold node (A) and its derivative in the hold voltage
        (S), for output and hold voltages (V, arrays)."""
        from scipy.special import wrightomega   # (the detector's solvers load scipy: compiled, 3-10x faster)

        j = self.junction
        vf = v_out - v_hold if self.positive else v_hold - v_out
        i = j.current(vf, wrightomega)
        gd = (i + j.is_a) / (j.n * j.vt)
        g = gd / (1.0 + gd * j.rs_ohm)
        return (i, -g) if self.positive else (-i, -g)


@dataclass(frozen=True, slots=True)
class HoldState:
    """The periodic hold voltage: v_v over one period (V, M points from the output's
    positive peak), its mean mean_v, its harmonics 1..K as phasors (V, v = mean +
    Re sum H_k e^{jk theta}), the diode current i_a (A, into the hold) and the peak
    diode current (A)."""

    v_v: np.ndarray
    mean_v: float
    harmonics: tuple[complex, ...]
    i_a: np.ndarray
    i_peak_a: float


def _cyclic(d: np.ndarray, c: float, rhs: np.ndarray) -> np.ndarray:
    """Solve d_i x_i - c x_{i-1} = rhs_i with x_{-1} = x_{M-1}: x_i = a_i + b_i x_{M-1}
    with a and b the solutions of the lower bidiagonal system for rhs and for x_{-1} = 1
    (LAPACK's tridiagonal solver dgtsv, both at once: the forward recurrence in compiled
    code), then periodicity fixes x_{M-1}."""
    from scipy.linalg import lapack   # (here: only a design with a detector loads scipy)

    n = d.size
    both = np.zeros((n, 2))
    both[:, 0] = rhs
    both[0, 1] = c
    *_, x, info = lapack.dgtsv(np.full(n - 1, -c), np.array(d, float), np.zeros(n - 1), both)
    if info != 0:
        raise FloatingPointError(f"singular hold system (dgtsv info {info})")
    a, b = x[:, 0], x[:, 1]
    return a + b * (a[-1] / (1.0 - b[-1]))


_GL_X, _GL_W = np.polynomial.legendre.leggauss(48)


def average_current(det: Detector, amp_v: float, v_hold: float) -> tuple[float, float]:
    """Mean diode current into the hold over one cycle of A cos(theta) with the hold
    at v_hold (V), and its derivative in v_hold (S): the averaged detector. Gauss-
    Legendre quadrature over the window around the peak where the forward voltage is
    within 40 n Vt of its largest (beyond it the current is below e^-40 of the peak's),
    the reverse current over the rest."""
    j = det.junction
    amp = max(amp_v, 1e-9)
    win = math.acos(max(1.0 - 40 * j.n * j.vt / amp, -1.0))
    theta = 0.5 * win * (_GL_X + 1.0)
    sign = 1.0 if det.positive else -1.0
    i, g = det.into_hold(sign * amp * np.cos(theta), np.full(theta.size, v_hold))
    rest = det.into_hold(np.array([sign * amp * math.cos(win)]), np.array([v_hold]))
    wts = 0.5 * win * _GL_W / math.pi
    out = (math.pi - win) / math.pi
    return float(wts @ i + out * rest[0][0]), float(wts @ g + out * rest[1][0])


def _level(det: Detector, amp_v: float, offset_v: float = 0.0) -> float:
    """The hold level where the averaged diode current feeds the loads: Newton's
    method on the net current (which falls as the hold rises), kept inside a bisection
    bracket (a Newton step outside it bisects instead)."""
    lo, hi = offset_v - amp_v - 1.0, offset_v + amp_v + 1.0
    v = 0.5 * (lo + hi)
    for _ in range(80):
        i, g = average_current(det, amp_v, v - offset_v)
        net = i - det.g_load_s * v + det.i_load_a
        if net > 0:
            lo = v
        else:
            hi = v
        slope = g - det.g_load_s
        nxt = v - net / slope if slope < 0 else math.nan
        if not lo < nxt < hi:
            nxt = 0.5 * (lo + hi)
        if abs(nxt - v) < 1e-12 * max(1.0, amp_v) or hi - lo < 1e-12 * max(1.0, amp_v):
            return nxt
        v = nxt
    return v


def hold_waveform(det: Detector, amp_v: float, f_hz: float, *, points: int = POINTS, kmax: int = 9,
                  start: np.ndarray | None = None, offset_v: float = 0.0) -> HoldState:
    """The periodic steady state of the hold node for an output
    offset_v + amp_v cos(2 pi f t) (V, f_hz in Hz; see module docstring)."""
    theta = 2 * math.pi * np.arange(points) / points
    v_out = offset_v + amp_v * np.cos(theta)
    c = det.hold_f * f_hz * points            # C / dt
    g_l, i_l = det.g_load_s, det.i_load_a
    v = np.full(points, _level(det, amp_v, offset_v)) if start is None else np.array(start, dtype=float)
    for _ in range(200):
        i, gi = det.into_hold(v_out, v)
        r = c * (v - np.roll(v, 1)) - i + g_l * v - i_l
        step = _cyclic(c - gi + g_l, c, -r)
        big = float(np.max(np.abs(step)))
        if big > 0.05:
            step *= 0.05 / big
        v = v + step
        if big < 1e-13 * max(1.0, amp_v):
            break
    i, _ = det.into_hold(v_out, v)
    spec = np.fft.rfft(v) / points
    harm = tuple(complex(2 * spec[k]) for k in range(1, kmax + 1))
    return HoldState(v, float(spec[0].real), harm, i, float(np.max(np.abs(i))))
