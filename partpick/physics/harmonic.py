"""Steady oscillation by harmonic balance: amplitude, frequency (with the control
branch's harmonic pull) and distortion. Topology-free: it takes the loop at the control
branch and the branch (:mod:`partpick.physics.loop`).

Unknowns are the odd harmonics of the voltage across the branch's nonlinear element
(the limiter pair), Vp_k (k = 1, 3, ..., K), and the angular frequency; the
fundamental's phase is the reference (Im Vp_1 = 0). For each harmonic the loop equation
(see ``Branch.element_coefficients``: the element's capacitance and the series
resistance are linear and enter the coefficients exactly) must hold, where Ip_k are the
Fourier coefficients of the element current i(vp(t)) computed by FFT of the sampled
waveform (the harmonic-balance method: K. S. Kundert and A.
Sangiovanni-Vincentelli, "Simulation of nonlinear circuits in the frequency domain",
IEEE Trans. CAD 5(4), 1986). Newton's method with the analytic Jacobian (the
conductance waveform di/dv mapped through the same transforms) converges in a few
steps from the describing-function solution (the single-harmonic balance, which
predicts the amplitude well but no frequency shift for a memoryless limiter; the
higher harmonics carry that shift). Only odd harmonics appear: the limiter is odd
and the circuit is symmetric about the signal reference.

The op-amps are linear here (A0, GBW, second pole, Ro). When the solution shows an
op-amp's output leaving its swing, slewing near its limit or running near its current
limit (:func:`partpick.physics.opamp.regime`), the result says so (``regime``) and the
caller integrates the full nonlinear circuit instead (:mod:`partpick.physics.transient`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from partpick.physics.linear import LinearResult
from partpick.physics.loop import Branch, Loop
from partpick.physics.opamp import loop_figures

__all__ = ["BalanceResult", "harmonic_balance", "describing_amplitude"]


@dataclass(frozen=True, slots=True)
class BalanceResult:
    """The settled oscillation as harmonic balance finds it.

    freq_hz: Hz; osc_peak_v / load_peak_v: half the peak-to-peak voltage at the op-amp
    output and at the load, V; osc_thd / load_thd: THD over harmonics 2..9, fraction;
    osc_harmonics / load_harmonics: complex amplitudes of harmonics 1..K (odd only
    non-zero), V; x_min_v / x_max_v: extremes of the op-amp's internal output voltage
    (before Ro) relative to the signal reference, V; slew_v_per_s: its largest rate of
    change, V/s; iout_peak_a: the op-amp's largest output current, A; ilim_peak_a:
    largest limiter current, A; regime: 'limiter' when the linear op-amp assumption
    holds, else 'swing', 'slew' or 'current'; converged: Newton met its tolerance.
    """

    freq_hz: float
    osc_peak_v: float
    load_peak_v: float
    osc_thd: float
    load_thd: float
    osc_harmonics: tuple[complex, ...]
    load_harmonics: tuple[complex, ...]
    x_min_v: float
    x_max_v: float
    slew_v_per_s: float
    iout_peak_a: float
    ilim_peak_a: float
    iout_rms_a: float
    regime: str
    converged: bool
    harmonics: int
    state: tuple = ()  # (element harmonics, scaled angular frequency): a warm start for a nearby problem


def _thd(h: np.ndarray) -> float:
    """sqrt(sum |H_k|^2, k = 2..9) / |H_1| (IEC 60268-3 style THD, relative to the fundamental)."""
    fund = abs(h[0])
    return float(np.sqrt(np.sum(np.abs(h[1:9]) ** 2)) / fund) if fund > 0 else math.nan


class _Balance:
    """The transforms and the loop of one harmonic-balance problem."""

    def __init__(self, loop: Loop, branch: Branch, kmax: int, nt: int) -> None:
        self.loop, self.branch, self.table = loop, branch, branch.table
        self.ks = np.arange(1, kmax + 1, 2)
        self.nt = nt
        theta = 2 * np.pi * np.arange(nt) / nt
        kt = np.outer(theta, self.ks)
        # columns: re_k, im_k for each odd k; v(theta) = sum Re(V_k e^{j k theta})
        self.synth = np.empty((nt, 2 * self.ks.size))
        self.synth[:, 0::2] = np.cos(kt)
        self.synth[:, 1::2] = -np.sin(kt)
        self.anal = self.synth.T * (2.0 / nt)

    def coeffs(self, w: float) -> tuple[np.ndarray, np.ndarray]:
        # unknowns are the harmonics of the voltage across the nonlinear element itself
        return self.branch.element_coefficients(self.loop, 1j * w * self.ks)

    def residual(self, vk: np.ndarray, w: float, coeffs=None):
        v_t = self.synth @ _ri(vk)
        i_t = self.table.current(v_t)
        ik = _cx(self.anal @ i_t)
        al, ga = coeffs if coeffs is not None else self.coeffs(w)
        return al * vk + ga * ik, ik, v_t, i_t

    def solve(self, a0: float, w0: float, iters: int = 60, start: np.ndarray | None = None):
        vk = np.zeros(self.ks.size, dtype=complex)
        vk[0] = a0
        if start is not None:
            n = min(start.size, vk.size)
            vk[:n] = start[:n]
        w = w0
        converged = False
        for _ in range(iters):
            al, ga = self.coeffs(w)
            r, ik, v_t, _ = self.residual(vk, w, (al, ga))
            scale = max(abs(vk[0]), 1e-12)
            if np.max(np.abs(r)) < 1e-10 * scale * max(1.0, np.max(np.abs(al))):
                converged = True
                break
            g_t = self.table.conductance(v_t)
            dI = self.anal @ (g_t[:, None] * self.synth)  # d(re,im I)/d(re,im V)
            J = _cmul_block(ga) @ dI + _cmul_block(al)
            h = 1e-7 * w
            al2, ga2 = self.coeffs(w + h)
            dw = _ri(((al2 - al) * vk + (ga2 - ga) * ik) / h)
            # unknowns: re V1, (re, im) V3.., w  (im V1 fixed at 0 as the phase reference)
            Jr = np.column_stack([J[:, 0], J[:, 2:], dw])
            step = np.linalg.solve(Jr, -_ri(r))
            # damp: keep the fundamental positive and the frequency step small
            lam = 1.0
            if vk[0].real + step[0] <= 0.2 * vk[0].real:
                lam = min(lam, 0.8 * vk[0].real / abs(step[0]))
            if abs(step[-1]) > 0.05 * w:
                lam = min(lam, 0.05 * w / abs(step[-1]))
            step *= lam
            vk[0] += step[0]
            vk[1:] += step[1:-1:2] + 1j * step[2:-1:2]
            w += step[-1]
        return vk, w, converged


def _ri(z: np.ndarray) -> np.ndarray:
    out = np.empty(2 * z.size)
    out[0::2], out[1::2] = z.real, z.imag
    return out


def _cx(x: np.ndarray) -> np.ndarray:
    return x[0::2] + 1j * x[1::2]


def _cmul_block(c: np.ndarray) -> np.ndarray:
    """Real 2x2 blocks for multiplication by complex c, as a block-diagonal matrix."""
    n = c.size
    m = np.zeros((2 * n, 2 * n))
    idx = np.arange(n) * 2
    m[idx, idx] = c.real
    m[idx, idx + 1] = -c.imag
    m[idx + 1, idx] = c.imag
    m[idx + 1, idx + 1] = c.real
    return m


def describing_amplitude(table, g_target: float, lo: float = 1e-4, hi: float = 200.0) -> float | None:
    """Amplitude (V) of a sine across a memoryless element ``table`` at which its
    describing-function conductance (fundamental current / amplitude, S) equals
    g_target; None if it never does (Gelb and Vander Velde, Multiple-Input Describing
    Functions and Nonlinear System Design, 1968, chapter 2)."""
    theta = 2 * np.pi * (np.arange(64) + 0.5) / 64
    amps = np.geomspace(lo, hi, 90)
    i = table.current(np.outer(amps, np.cos(theta)))
    n_df = (i @ np.cos(theta)) * (2 / 64) / amps
    above = np.nonzero(n_df >= g_target)[0]
    if above.size == 0 or above[0] == 0:
        return None
    j = above[0]
    # log-linear interpolation between the bracketing samples
    x0, x1, y0, y1 = math.log(amps[j - 1]), math.log(amps[j]), n_df[j - 1], n_df[j]
    return math.exp(x0 + (g_target - y0) * (x1 - x0) / (y1 - y0))


def harmonic_balance(loop: Loop, branch: Branch, lin: LinearResult, rails: tuple[float, float, float], *,
                     kmax: int = 21, start: BalanceResult | None = None) -> BalanceResult | None:
    """Settled oscillation of the loop closed through a nonlinear branch; rails (V) are
    (positive rail, negative rail, signal reference) for the op-amps' swing. None when
    the circuit does not start or the branch cannot bring the loop gain down (then the
    op-amps' swing sets the amplitude and the transient simulation must answer)."""
    if branch.table is None or not lin.starts or not math.isfinite(lin.marginal_g_s):
        return None
    a_df = describing_amplitude(branch.series_table, lin.marginal_g_s)
    if a_df is None:
        return None
    # start from the describing-function amplitude of the whole branch, less the drop
    # across the series resistance, as the element's own amplitude
    a_df = max(a_df - branch.series_ohm * lin.marginal_g_s * a_df, 0.2 * a_df)
    w0 = 2 * math.pi * lin.marginal_hz / loop.w_ref
    warm = None
    if start is not None and start.state:
        # the same network a little changed (another gain, temperature): same w_ref
        warm, w0, kmax = start.state
        warm = np.asarray(warm)
    for k in (kmax, 2 * kmax + 1, 4 * kmax + 3):
        hb = _Balance(loop, branch, k, max(64, 8 * (k + 1)))
        vk, w, ok = hb.solve(a_df, w0, start=warm)
        tail = np.max(np.abs(vk[-2:])) / abs(vk[0]) if ok else 1.0
        if ok and tail < 3e-4:
            break
    return _result(loop, rails, hb, vk, w, ok)


def _result(loop: Loop, rails, hb: _Balance, vk, w, ok) -> BalanceResult:
    br = hb.branch
    _, ipk, _, _ = hb.residual(vk, w)
    p = 1j * w * hb.ks
    ik = ipk + p * loop.w_ref * br.cap_f * vk       # branch current: element plus its capacitance
    vf = vk + br.series_ohm * ik                        # voltage across the whole branch
    i_t = hb.synth @ _ri(ik)
    vo = loop.probe("osc", p, vf, ik)
    vl = loop.probe("load", p, vf, ik)
    kmax = int(hb.ks[-1])
    full = lambda z: _full(z, hb.ks, kmax)  # noqa: E731
    vo_t = hb.synth @ _ri(vo)
    vl_t = hb.synth @ _ri(vl)
    regime, (x_min, x_max, slew, io_pk, io_rms) = loop_figures(
        loop.amps, rails, lambda name: loop.probe(name, p, vf, ik), lambda z: hb.synth @ _ri(z),
        lambda z: hb.synth @ _ri(1j * hb.ks * w * loop.w_ref * z))
    return BalanceResult(
        freq_hz=w * loop.w_ref / (2 * math.pi),
        osc_peak_v=float((vo_t.max() - vo_t.min()) / 2),
        load_peak_v=float((vl_t.max() - vl_t.min()) / 2),
        osc_thd=_thd(full(vo)),
        load_thd=_thd(full(vl)),
        osc_harmonics=tuple(full(vo)),
        load_harmonics=tuple(full(vl)),
        x_min_v=x_min,
        x_max_v=x_max,
        slew_v_per_s=slew,
        iout_peak_a=io_pk,
        ilim_peak_a=float(np.max(np.abs(i_t))),
        iout_rms_a=io_rms,
        regime=regime,
        converged=bool(ok),
        harmonics=kmax,
        state=(tuple(vk), w, kmax),
    )


def _full(z: np.ndarray, ks: np.ndarray, kmax: int) -> np.ndarray:
    out = np.zeros(max(kmax, 9), dtype=complex)
    out[ks - 1] = z
    return out
