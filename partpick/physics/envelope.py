"""How the amplitude gets there: the envelope of the oscillation from power-on to its
settled value, for any amplitude control. Topology-free: it takes the loop at the
control's port and the control's quasi-static branch.

The envelope equation: while the loop changes slowly compared with one period, the
oscillation's amplitude A follows d(ln A)/dt = sigma, the real part of the dominant
natural frequency of the loop closed with the control branch as it is at that moment
(near the oscillation, sigma = (w0 / 2) times the relative loop-gain excess for a
resonator of w0; for the Wien bridge with equal arms the roots of
s^2 + w0 (3 - K) s + w0^2 give sigma = w0 (K - 3) / 2: e.g. Sedra and Smith,
Microelectronic Circuits, "the Wien-bridge oscillator"). A limiter's branch changes
with the amplitude itself (its describing-function conductance); a slow control's
branch changes with the control's own states (a detector, an integrator), which
integrate alongside.

Results: the startup time (power-on until the amplitude first enters its band), the
settling time (until it stays there), the overshoot, and the damping ratio of the
control loop linearised at its settled point (the slowest oscillatory mode's
-Re(lambda) / |lambda|; 1 when no mode oscillates): a loop with damping near 0.1 bounces.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import polynomial as P

from partpick.physics.loop import Branch, Loop

__all__ = ["Settling", "growth_rate", "growth_table", "band_times", "limiter_settling", "START_V"]

# The amplitude at the output a power-on leaves in the circuit before the loop takes
# over, V: supply and bias transients of a few millivolts (common practice, no
# published source). The settling time grows with its logarithm.
START_V = 0.01


@dataclass(frozen=True, slots=True)
class Settling:
    """startup_s: power-on until the amplitude first enters its band (s); settle_s:
    until it stays in the band (s, inf when it does not within the run); overshoot:
    the largest amplitude over the settled one, minus 1 (0 when none); damping: the
    damping ratio of the loop at its settled point; t_s / amp_v: the envelope (s, V)."""

    startup_s: float
    settle_s: float
    overshoot: float
    damping: float
    t_s: np.ndarray
    amp_v: np.ndarray


def growth_rate(loop: Loop, branch) -> float:
    """Real part (1/s) of the dominant oscillatory natural frequency (imaginary part
    above a fifth of w_ref) of the loop closed through ``branch`` at small signal: the
    roots of alpha + gamma Y (those shared with its denominator are artefacts of the
    cross-multiplication, as in :mod:`partpick.physics.linear`)."""
    q = loop.alpha + loop.gamma * branch.rational(loop.w_ref)
    num = q.num / np.max(np.abs(q.num))
    roots = P.polyroots(num)
    den = P.polyroots(q.den) if q.den.size > 1 else np.array([])
    keep = [r for r in roots if den.size == 0 or np.min(np.abs(den - r)) > 1e-7 * max(abs(r), 1e-9)]
    osc = [r for r in keep if abs(r.imag) > 0.2]
    pick = osc or keep
    return float(max(r.real for r in pick) * loop.w_ref) if pick else -math.inf


def growth_table(loop: Loop, branch_at, xs: np.ndarray) -> np.ndarray:
    """sigma (1/s) with the branch ``branch_at(x)`` for each x of xs."""
    return np.array([growth_rate(loop, branch_at(float(x))) for x in xs])


def band_times(t_s: np.ndarray, amp_v: np.ndarray, lo_v: float, hi_v: float) -> tuple[float, float]:
    """(first entry into [lo_v, hi_v], the moment after which the envelope stays in it),
    s; inf when it never enters, or leaves it again at the end. A step from one side of
    the band to the other passes through it between the samples: that is the entry."""
    below, above = amp_v < lo_v, amp_v > hi_v
    inside = ~below & ~above
    across = np.concatenate([[False], (below[:-1] & above[1:]) | (above[:-1] & below[1:])])
    if not (inside | across).any():
        return math.inf, math.inf
    j = int(np.argmax(inside | across))
    first = float(t_s[j])
    if j > 0:
        edge = hi_v if amp_v[j - 1] > hi_v else lo_v
        first = float(t_s[j - 1] + (edge - amp_v[j - 1]) / (amp_v[j] - amp_v[j - 1]) * (t_s[j] - t_s[j - 1]))
    if not inside[-1]:
        return first, math.inf
    out = np.flatnonzero(~inside)
    if out.size == 0:
        return first, float(t_s[0])
    k = out[-1]
    # interpolate the last crossing into the band
    edge = hi_v if amp_v[k] > hi_v else lo_v
    a0, a1 = amp_v[k], amp_v[k + 1]
    frac = (edge - a0) / (a1 - a0) if a1 != a0 else 1.0
    return first, float(t_s[k] + frac * (t_s[k + 1] - t_s[k]))


def _overshoot(amp_v: np.ndarray, final_v: float) -> float:
    return max(float(np.max(amp_v)) / final_v - 1.0, 0.0)


def limiter_settling(loop: Loop, branch: Branch, final_v: float, osc_per_port: complex, band: tuple[float, float],
                     start_v: float = START_V, clip_v: float = math.inf, points: int = 60) -> Settling:
    """The envelope under a memoryless limiter branch: sigma(A) from the branch's
    describing-function conductance at the port amplitude A / |osc_per_port| (shifted
    so that sigma(final_v) = 0, the harmonic-balance amplitude), integrated from
    start_v (V) by the exact solution of d(ln A)/dt = sigma on a fine ln A grid
    (dt = d(ln A) / sigma); the amplitude approaches its value from below without
    overshoot. clip_v: the op-amp's swing, where growth stops."""
    lo = math.log(min(start_v, final_v) * 0.999)
    grid = np.linspace(lo, math.log(final_v), points)
    theta = 2 * np.pi * (np.arange(64) + 0.5) / 64
    sig = []
    for la in grid:
        vp = math.exp(la) / abs(osc_per_port)
        table = branch.series_table
        g_b = 0.0 if table is None else float((table.current(vp * np.cos(theta)) @ np.cos(theta)) * (2 / 64) / vp)
        g_e = g_b / max(1.0 - branch.series_ohm * g_b, 1e-12)
        sig.append(growth_rate(loop, _Fixed(branch, g_e)))
    sig = np.array(sig)
    sig -= sig[-1]
    # time to cross each ln A step at the mean rate over it; the last step (rate -> 0)
    # is where the approach becomes exponential: treat it with the slope there
    rate = 0.5 * (sig[1:] + sig[:-1])
    dt = np.where(rate > 0, np.diff(grid) / np.maximum(rate, 1e-300), math.inf)
    t = np.concatenate([[0.0], np.cumsum(dt)])
    amp = np.exp(grid)
    slope = (sig[-2] - sig[-1]) / (grid[-1] - grid[-2])      # -d sigma / d ln A at the final value
    if slope > 0 and math.isfinite(t[-2]):
        # ln A -> final exponentially at rate slope: add the tail to within 0.01 %
        tail_t = t[-2] + np.linspace(0, 12 / slope, 40)
        tail_a = final_v * np.exp((grid[-2] - grid[-1]) * np.exp(-slope * (tail_t - t[-2])))
        t, amp = np.concatenate([t[:-1], tail_t]), np.concatenate([amp[:-1], tail_a])
    if clip_v < final_v:
        amp = np.minimum(amp, clip_v)
    first, settle = band_times(t, amp, *band)
    return Settling(first, settle, _overshoot(amp, final_v), 1.0, t, amp)


class _Fixed:
    """A limiter branch with its element held at conductance g (S): its rational."""

    is_linear_zero = False

    def __init__(self, branch: Branch, g: float) -> None:
        self.branch, self.g = branch, g

    def rational(self, w_ref: float):
        return self.branch.rational(w_ref, self.g)
