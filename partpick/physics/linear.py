"""Linear loop analysis of the oscillator: closed-loop poles, startup, the frequency
with the op-amp's pull, and the startup margin. Topology-free: it takes the loop at the
control branch (:class:`partpick.physics.loop.Loop`) and the branch's small-signal form.

The loop equation alpha(s) V + gamma(s) I = 0 with the branch linearised at zero
amplitude (I = Y0 V) gives the characteristic equation alpha + gamma Y0 = 0; its
numerator polynomial's roots are the circuit's natural frequencies. A complex pair in
the right half-plane means the circuit starts (Barkhausen criterion exceeded); its real
part is the envelope's growth rate. The startup margin is |L| - 1 at the frequency
where the loop gain L (broken where the topology puts it) has zero phase.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import polynomial as P

from partpick.physics.loop import Branch, Loop

__all__ = ["LinearResult", "analyse_linear", "loop_gain", "NO_BRANCH"]

NO_BRANCH = Branch(None)  # a control that adds nothing at small signal


@dataclass(frozen=True, slots=True)
class LinearResult:
    """Small-signal facts of one candidate at one operating point.

    poles_rad_s: closed-loop natural frequencies, rad/s; starts: a natural frequency lies
    in the right half-plane; growth_per_s: real part of the dominant one, 1/s (negative:
    the kick dies away); startup_hz: its imaginary part / 2 pi, Hz (0 when real); margin: |L| - 1 at the
    loop's phase-zero frequency phase_zero_hz (Hz); marginal_hz: frequency at which the
    loop oscillates once the limiter has brought the gain down to exactly 1, with the
    op-amp's pull but no harmonic pull, Hz; marginal_g_s: the average conductance the
    control branch must present for that, S.
    """

    poles_rad_s: tuple[complex, ...]
    starts: bool
    growth_per_s: float
    startup_hz: float
    margin: float
    phase_zero_hz: float
    marginal_hz: float
    marginal_g_s: float

    def buildup_time_s(self, start_v: float, final_v: float) -> float:
        """Time for the envelope to grow from start_v to final_v (V) at the small-signal
        growth rate, s; inf when it does not start."""
        if not self.starts or self.growth_per_s <= 0:
            return math.inf
        return math.log(final_v / start_v) / self.growth_per_s


def loop_gain(loop: Loop, p: np.ndarray, branch: Branch = NO_BRANCH) -> np.ndarray:
    """Loop gain L(p) with the branch at its small-signal admittance (its element
    conductance g0 with its capacitance, behind its series resistance)."""
    y = 0.0 if branch.is_linear_zero else branch.admittance(p, loop.w_ref)
    return loop.loop_gain(p, y)


def _char_roots(loop: Loop, branch: Branch) -> np.ndarray:
    """Roots (in p) of alpha + gamma Yb (Yb the branch at zero amplitude), built as one
    rational; roots shared with the denominator are artefacts of cross-multiplying and
    are dropped."""
    q = loop.alpha if branch.is_linear_zero else loop.alpha + loop.gamma * branch.rational(loop.w_ref)
    num = q.num / np.max(np.abs(q.num))
    roots = P.polyroots(num)
    den_roots = P.polyroots(q.den) if q.den.size > 1 else np.array([])
    keep = [r for r in roots if den_roots.size == 0 or np.min(np.abs(den_roots - r)) > 1e-7 * max(abs(r), 1e-9)]
    return np.array(keep)


def _illinois(f, a: float, b: float, fa: float, fb: float, rtol: float = 1e-13) -> float:
    """A root of f bracketed by [a, b] by the Illinois variant of regula falsi
    (Dowell and Jarratt, BIT 11, 1971): superlinear, and it never leaves the bracket.
    Kept here so the loop analysis needs no scipy.optimize import."""
    side = 0
    for _ in range(100):
        c = (a * fb - b * fa) / (fb - fa)
        fc = f(c)
        if fc == 0 or abs(b - a) < rtol * abs(c):
            return c
        if (fc > 0) == (fb > 0):
            b, fb = c, fc
            if side == -1:
                fa /= 2
            side = -1
        else:
            a, fa = c, fc
            if side == 1:
                fb /= 2
            side = 1
    return c


def _phase_zero(f, lo: float, hi: float, centre: float) -> float | None:
    """The zero of f(w) nearest ``centre`` on [lo, hi], by a log grid then Brent's method."""
    grid = np.geomspace(lo, hi, 161)
    vals = f(grid)
    best = None
    for i in np.nonzero(np.sign(vals[:-1]) != np.sign(vals[1:]))[0]:
        root = _illinois(lambda w: float(f(np.array([w]))[0]), grid[i], grid[i + 1], vals[i], vals[i + 1])
        if best is None or abs(math.log(root / centre)) < abs(math.log(best / centre)):
            best = root
    return best


def analyse_linear(loop: Loop, branch: Branch = NO_BRANCH) -> LinearResult:
    """Poles, startup, margin and marginal frequency of the loop closed through the
    branch at zero amplitude. The search for the phase-zero frequencies spans 0.2 to 2
    times w_ref, which the topology sets near its textbook frequency."""
    w = loop.w_ref
    roots = _char_roots(loop, branch) * w
    # The dominant natural frequency: a complex pair normally; with a large gain excess
    # the pair splits into two real roots, both in the right half-plane (it still starts,
    # as a relaxation oscillation that the op-amp's swing then shapes).
    dom = max(roots, key=lambda r: r.real) if roots.size else complex(-math.inf, 0.0)
    starts = bool(roots.size) and dom.real > 0

    wz = _phase_zero(lambda x: np.imag(loop_gain(loop, 1j * x, branch)), 0.2, 2.0, 1.0)
    if wz is None:
        margin, fz = -1.0, math.nan
    else:
        margin = float(np.real(loop_gain(loop, 1j * wz, branch))) - 1.0
        fz = wz * w / (2 * math.pi)

    # Marginal oscillation: alpha + g gamma = 0 with g real (the branch's average conductance).
    def im_ratio(x):
        al, ga = loop.coefficients(1j * x)
        return np.imag(-al / ga)

    wm = _phase_zero(im_ratio, 0.2, 2.0, 1.0)
    if wm is None:
        fm, gm = math.nan, math.nan
    else:
        al, ga = loop.coefficients(np.array([1j * wm]))
        fm, gm = wm * w / (2 * math.pi), float(np.real(-al / ga)[0])
    return LinearResult(
        poles_rad_s=tuple(complex(r) for r in sorted(roots, key=lambda r: -r.real)),
        starts=starts,
        growth_per_s=float(dom.real),
        startup_hz=float(abs(dom.imag) / (2 * math.pi)),
        margin=margin,
        phase_zero_hz=fz,
        marginal_hz=fm,
        marginal_g_s=gm,
    )
