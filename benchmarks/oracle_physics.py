"""Textbook estimates for the coverage oracle (benchmarks/oracle.py): its own, cheap,
and deliberately independent of partpick's search and circuit plug-ins. They only
rank a brute-force sweep; partpick's verifier (``evaluate_bom``) judges.

- Wien network: beta(s) = Zp / (Zs + Zp), Zs = Rs + 1/(s Cs), Zp = Rp || 1/(s Cp);
  f0 = 1 / (2 pi sqrt(Rs Rp Cs Cp)), gain needed 1 + Rs/Rp + Cp/Cs (any circuits
  handbook, e.g. Horowitz & Hill, The Art of Electronics, 3rd ed., 7.1.5).
- Op-amp: A(s) = A0 / ((1 + s/wp1)(1 + s/wp2)), wp1 = 2 pi GBW / A0 (single dominant
  pole, optional second pole); the non-inverting stage H = A / (1 + A/K). The loop
  oscillates where arg(H beta) = 0 (Barkhausen criterion), below f0 for finite GBW.
- Limiter: an anti-parallel junction pair (Shockley, I = Is (exp(V / (n Vt)) - 1),
  series resistance, SPICE's temperature law of Is: Is(T) = Is (T/Tn)^(XTI/N)
  exp(Eg/(N k) (1/Tn - 1/T)), as in the SPICE2/3 manuals), or two opposed Zeners
  (one forward junction, the other's breakdown taken as a soft exponential whose slope
  at the rated current is the Zener resistance), behind a series Rd. Its
  describing-function conductance G1(A) = I1/A (fundamental of the current for a sine
  of amplitude A across the branch; Gelb & Vander Velde, Multiple-Input Describing
  Functions, 1968) brings the gain down to what the network needs.
- THD: the branch's odd current harmonics, fed back through the network at 3f, 5f,
  7f, 9f with the branch's average incremental conductance (first-order harmonic
  balance); our own estimate, calibrated by the oracle against the verifier.
"""

from __future__ import annotations

import functools
import math

import numpy as np

K_B = 1.380649e-23      # J/K (SI 2019 exact)
Q_E = 1.602176634e-19   # C (SI 2019 exact)
T_NOM = 298.15

__all__ = ["f0_hz", "required_gain", "beta", "opamp_gain", "oscillation", "loop_solution", "pair_small_signal", "LimiterCurve", "limiter_curve",
           "harmonic_ratio"]


def f0_hz(rs, cs, rp, cp):
    """Textbook Wien frequency, Hz (arrays welcome)."""
    return 1.0 / (2 * math.pi * np.sqrt(rs * rp * cs * cp))


def required_gain(rs, cs, rp, cp):
    """Amplifier gain the Wien network needs at f0: 1 + Rs/Rp + Cp/Cs."""
    return 1.0 + rs / rp + cp / cs


def beta(rs, cs, rp, cp, w):
    """Wien feedback ratio Zp / (Zs + Zp) at angular frequency w (rad/s), complex."""
    s = 1j * w
    zs = rs + 1.0 / (s * cs)
    zp = rp / (1.0 + s * rp * cp)
    return zp / (zs + zp)


def opamp_gain(op, w):
    """Open-loop gain A(jw) of catalog op-amp ``op`` (dominant pole, optional second)."""
    s = 1j * np.asarray(w, dtype=float)
    a = op.a0 / (1.0 + s * op.a0 / (2 * math.pi * op.gbw_hz))
    if op.second_pole_hz:
        a = a / (1.0 + s / (2 * math.pi * op.second_pole_hz))
    return a


def loop_solution(op, rs, cs, rp, cp, rg, rf, rd: float = 0.0, c_lim: float = 0.0, g_lim: float = 0.0):
    """(f_osc / f0, small-signal margin) for each Rf in ``rf`` (ohm, array): the
    loop T = H beta with H = A / (1 + A Rg / (Rg + Zf)), Zf = Rf || (Rd + the limiter's
    small-signal admittance g_lim + s c_lim), solved for arg T = 0 by bisection between
    0.2 w0 and w0 (Barkhausen); the margin is |T| - 1 there."""
    rf = np.atleast_1d(np.asarray(rf, dtype=float))
    w0 = 2 * math.pi * float(f0_hz(rs, cs, rp, cp))

    def loop(w):
        s = 1j * w
        y_lim = g_lim + s * c_lim
        branch = np.where(np.abs(y_lim) > 0, 1.0 / (rd + 1.0 / np.where(np.abs(y_lim) > 0, y_lim, 1.0)), 0.0)
        zf = 1.0 / (1.0 / rf + branch)
        a = opamp_gain(op, w)
        return a / (1 + a * rg / (rg + zf)) * beta(rs, cs, rp, cp, w)

    lo = np.full(rf.shape, 0.2 * w0)
    hi = np.full(rf.shape, w0 * 1.0001)
    ok = (np.angle(loop(lo)) > 0) & (np.angle(loop(hi)) <= 0)
    for _ in range(40):
        mid = np.sqrt(lo * hi)
        up = np.angle(loop(mid)) > 0
        lo = np.where(up, mid, lo)
        hi = np.where(up, hi, mid)
    w = np.sqrt(lo * hi)
    margin = np.abs(loop(w)) - 1
    return np.where(ok, w / w0, np.nan), np.where(ok, margin, -1.0)


def oscillation(op, k, rs, cs, rp, cp) -> tuple[float, float]:
    """(f_osc / f0, loop-gain fraction) of an ideal gain-k stage on op-amp ``op``: the
    frequency ratio and |H beta| over its ideal k |beta(w0)|."""
    rho, margin = loop_solution(op, rs, cs, rp, cp, 1.0, np.array([k - 1.0]))
    ideal = k * float(abs(beta(rs, cs, rp, cp, 2 * math.pi * float(f0_hz(rs, cs, rp, cp)))))
    if not np.isfinite(rho[0]):
        return 1.0, 0.0
    return float(rho[0]), float((1 + margin[0]) / ideal)


def pair_small_signal(lim, temp_k: float = T_NOM) -> tuple[float, float]:
    """(conductance S, capacitance F) of a limiter pair at zero volts: two junctions in
    parallel (anti-parallel pair: 2 Is / (n Vt), 2 CJO) or in series (opposed Zeners:
    CJO / 2, no conduction)."""
    vt = K_B * temp_k / Q_E
    if lim.kind == "zener-pair":
        return 0.0, lim.cjo_f / 2
    return 2 * lim.is_a / (lim.n * vt), 2 * lim.cjo_f


# -- the limiter ----------------------------------------------------------------------------------

class LimiterCurve:
    """Describing-function tables of one limiter branch (pair behind Rd) at one
    temperature, with its forward voltage shifted by ``shift_v``: over a grid of branch
    amplitudes A (V peak), the fundamental conductance G1 (S), the odd current
    harmonics I3..I9 (A, sine terms) and the average incremental conductance (S)."""

    HARMONICS = (3, 5, 7, 9)

    def __init__(self, lim, rd_ohm: float, temp_k: float, shift_v: float = 0.0, samples: int = 128,
                 points: int = 320):
        vt = K_B * temp_k / Q_E
        ratio = temp_k / T_NOM
        is_t = lim.is_a * ratio ** (lim.xti / lim.n) * math.exp(lim.eg_j / (lim.n * K_B) * (1 / T_NOM - 1 / temp_k))
        i = np.geomspace(1e-13, 3.0, 700)
        v = lim.n * vt * np.log1p(i / is_t) + lim.rs_ohm * i
        dvdi = lim.n * vt / (i + is_t) + lim.rs_ohm + rd_ohm
        if lim.kind == "zener-pair":
            vz = lim.vz_v + lim.vz_tempco_v_per_k * (temp_k - T_NOM)
            knee = vz + lim.rz_ohm * lim.iz_a * np.log(i / lim.iz_a)
            v = v + np.maximum(knee, 0.0)
            dvdi = dvdi + np.where(knee > 0, lim.rz_ohm * lim.iz_a / i, 0.0)
        v = v + shift_v + rd_ohm * i
        ok = v > 0
        v, i, dvdi = v[ok], i[ok], dvdi[ok]
        self.v_tab = np.concatenate(([0.0], v))
        self.i_tab = np.concatenate(([0.0], i))
        self.g_tab = np.concatenate(([1.0 / dvdi[0]], 1.0 / dvdi))
        self.amp = np.geomspace(1e-3, 80.0, points)
        theta = 2 * math.pi * (np.arange(samples) + 0.5) / samples
        vv = self.amp[:, None] * np.sin(theta)[None, :]
        cur = np.sign(vv) * np.interp(np.abs(vv), self.v_tab, self.i_tab)
        self.g1 = 2 * np.mean(cur * np.sin(theta), axis=1) / self.amp
        self.g1 = np.maximum.accumulate(np.maximum(self.g1, 1e-15))
        self.ik = np.stack([2 * np.mean(cur * np.sin(k * theta), axis=1) for k in self.HARMONICS])
        self.gavg = np.mean(np.interp(np.abs(vv), self.v_tab, self.g_tab), axis=1)
        self.g_max = float(self.g1[-1])

    def amplitude(self, g_needed):
        """Branch amplitude (V peak) where G1 equals ``g_needed`` (S); nan where the
        branch cannot conduct that much within the table (no limiting) or g <= 0."""
        g = np.asarray(g_needed, dtype=float)
        out = np.exp(np.interp(np.log(np.maximum(g, 1e-300)), np.log(self.g1), np.log(self.amp)))
        return np.where((g > self.g1[0]) & (g < self.g_max), out, np.nan)

    def at(self, amp):
        """(I3..I9 as rows, average incremental conductance) at branch amplitudes ``amp``."""
        a = np.nan_to_num(np.asarray(amp, dtype=float), nan=1e-3)
        ik = np.stack([np.interp(a, self.amp, row) for row in self.ik])
        return ik, np.interp(a, self.amp, self.gavg)


@functools.lru_cache(maxsize=4096)
def limiter_curve(lim, rd_ohm: float, temp_k: float, shift_v: float = 0.0) -> LimiterCurve:
    """A cached :class:`LimiterCurve` (catalog records are frozen, hence hashable)."""
    return LimiterCurve(lim, rd_ohm, temp_k, shift_v)


def harmonic_ratio(curve: LimiterCurve, amp_branch, rs, cs, rp, cp, rg, rf, w):
    """Estimated THD at the oscillator output for branch amplitude ``amp_branch`` (V
    peak) and gain network Rg, Rf (ohm), oscillating at w (rad/s): per odd harmonic k,
    Vo_k [(1 - beta_k)(1/Rf + g_avg) - beta_k / Rg] = -I_k, over Vo_1."""
    ik, gavg = curve.at(amp_branch)
    b1 = np.abs(beta(rs, cs, rp, cp, w))
    vo1 = np.asarray(amp_branch) / (1 - b1)
    total = 0.0
    for row, k in zip(ik, curve.HARMONICS):
        bk = beta(rs, cs, rp, cp, k * w)
        den = (1 - bk) * (1 / rf + gavg) - bk / rg
        total = total + np.abs(row / den) ** 2
    return np.sqrt(total) / vo1
