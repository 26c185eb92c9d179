"""Steady oscillation by harmonic balance: amplitude, frequency (with the control
branch's harmonic pull) and distortion. Topology-free: it takes the loop at the control
branch and the branch (:mod:`partpick.physics.loop`).

Unknowns are the odd harmonics of the voltage across the branch's nonlinear element
(the limiter pair), Vp_k (k = 1, 3, ..., K), and the angular frequency; the
fundamental's phase is the reference (Im Vp_1 = 0). For each harmonic the loop equation
(see ``Branch.element_coefficients``: a linear capacitance and the series resistance
enter the coefficients exactly) must hold, where the element current is
i(vp(t)) + dq(vp(t))/dt: its harmonics Ip_k + j k w Q_k, with Ip_k and Q_k the Fourier
coefficients of the tabulated current i(v) and charge q(v) computed by FFT of the
sampled waveform (the harmonic-balance method: K. S. Kundert and A.
Sangiovanni-Vincentelli, "Simulation of nonlinear circuits in the frequency domain",
IEEE Trans. CAD 5(4), 1986). Newton's method with the analytic Jacobian (the
conductance waveform di/dv and the capacitance waveform dq/dv, times j k w, mapped
through the same transforms) converges in a few steps from the describing-function
solution (the single-harmonic balance, which predicts the amplitude well but no
frequency shift for a memoryless limiter; the higher harmonics and the charge carry
that shift). Only odd harmonics appear: the limiter is odd and the circuit is
symmetric about the signal reference. Two opposed Zeners in series are not one
memoryless element: the node between them moves with the charge each stores, so their
branch adds the even harmonics of that node as unknowns (:class:`_SeriesBalance`).

At the solution the frequency's derivative in a capacitance added across the element
comes from the same Jacobian (implicit-function theorem): how far the frequency moves
per picofarad of limiter capacitance, without another solution.

The op-amps are linear here (A0, GBW, second pole, Ro). When the solution shows an
op-amp's output leaving its swing, slewing near its limit or running near its current
limit (:func:`partpick.physics.opamp.regime`), the result says so (``regime``) and the
caller integrates the full nonlinear circuit instead (:mod:`partpick.physics.transient`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from partpick.physics.hb_matrices import add_diagonal, cx, product_jacobian, ri, transforms
from partpick.physics.linear import LinearResult
from partpick.physics.loop import Branch, Loop
from partpick.physics.opamp import loop_figures

__all__ = ["BalanceResult", "harmonic_balance", "describing_amplitude", "output_figures", "NeedsTransient"]


class NeedsTransient(Exception):
    """Harmonic balance does not hold at a point (an op-amp out of its linear range) and
    the caller asked not to simulate it (partpick.verify.predict)."""


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
    holds, else 'swing', 'slew' or 'current'; converged: Newton met its tolerance;
    outputs: the harmonics 1..K (V) of each further output the loop names.
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
    cap_eff_f: float = 0.0  # the element's capacitance as the fundamental sees it, Re(Q_1 / V_1), F
    freq_per_cap_hz_f: float = math.nan  # d freq_hz / d C for a capacitance C added across the element, Hz/F
    outputs: dict = field(default_factory=dict, compare=False)  # further output -> harmonics 1..K (V)

    @property
    def holds(self) -> bool:
        """Whether this answers for its point: converged, with the amplitude control in
        charge (no op-amp out of its linear range); else a transient run does."""
        return self.converged and self.regime == "limiter"


def _thd(h: np.ndarray) -> float:
    """sqrt(sum |H_k|^2, k = 2..9) / |H_1| (IEC 60268-3 style THD, relative to the fundamental)."""
    fund = abs(h[0])
    return float(np.sqrt(np.sum(np.abs(h[1:9]) ** 2)) / fund) if fund > 0 else math.nan


def output_figures(harmonics, ref_harmonics, points: int = 512) -> tuple[float, float, complex]:
    """Of a waveform given by its harmonics 1..K (complex, V): half its peak-to-peak
    value (V), its THD (harmonics 2..9 over the fundamental) and its fundamental over
    that of ``ref_harmonics`` (complex: the amplitude ratio and the phase by which it
    leads the reference)."""
    h = np.asarray(harmonics, complex)
    ks = np.arange(1, h.size + 1)
    theta = 2 * np.pi * np.arange(points) / points
    v = np.real(np.exp(1j * np.outer(theta, ks)) @ h)
    ref = complex(ref_harmonics[0])
    return float((v.max() - v.min()) / 2), _thd(h), (complex(h[0]) / ref if ref else complex(math.nan))


class _Balance:
    """The transforms and the loop of one harmonic-balance problem."""

    def __init__(self, loop: Loop, branch: Branch, kmax: int, nt: int) -> None:
        self.loop, self.branch, self.table = loop, branch, branch.table
        self.charged = branch.has_charge
        self.ks = np.arange(1, kmax + 1, 2)
        self.nt = nt
        self.synth, self.anal = transforms(self.ks, nt)
        # made once, as they serve every Newton step: j k, the (re, im) positions of the
        # harmonics' diagonal blocks, the Jacobian's columns kept (all but Im V1)
        self.jk = 1j * self.ks
        self.diag_re = 2 * np.arange(self.ks.size)
        self.cols = np.array([0, *range(2, 2 * self.ks.size)])

    def coeffs(self, w: float) -> tuple[np.ndarray, np.ndarray]:
        # unknowns are the harmonics of the voltage across the nonlinear element itself
        return self.branch.element_coefficients(self.loop, 1j * w * self.ks)

    def coeffs_and_step(self, w: float) -> tuple[np.ndarray, np.ndarray, float, np.ndarray, np.ndarray]:
        """(alpha, gamma) at w, the step h of the frequency derivative, and (alpha,
        gamma) at w + h: the two evaluated together (half the calls)."""
        h = 1e-7 * w
        n = self.ks.size
        al, ga = self.branch.element_coefficients(self.loop, 1j * np.concatenate([w * self.ks, (w + h) * self.ks]))
        return al[:n], ga[:n], h, al[n:], ga[n:]

    def _wave(self, vk: np.ndarray, w: float, slopes: bool):
        """(element current harmonics Ie = I_k + j k w Q_k (A), charge harmonics Q_k (C)
        or None, v(theta), i(theta), and with slopes the conductance and capacitance
        (or None) along v(theta), S and F) at element harmonics vk and scaled angular
        frequency w."""
        v_t = self.synth @ ri(vk)
        g_t = c_t = qk = None
        if self.charged:
            i_t, g_t, q_t, c_t = self.table.sample(v_t)
            qk = cx(self.anal @ q_t)
            ik = cx(self.anal @ i_t) + self.jk * (w * self.loop.w_ref) * qk
        else:
            i_t = self.table.current(v_t)
            ik = cx(self.anal @ i_t)
            if slopes:
                g_t = self.table.slope(v_t)
        return ik, qk, v_t, i_t, g_t, c_t

    def residual(self, vk: np.ndarray, w: float, coeffs=None):
        """(loop residual per harmonic, element current harmonics Ie = I_k + j k w Q_k
        (A), charge harmonics Q_k (C), v(theta), i(theta)) at element harmonics vk and
        scaled angular frequency w."""
        ik, qk, v_t, i_t, _, _ = self._wave(vk, w, False)
        al, ga = coeffs if coeffs is not None else self.coeffs(w)
        return al * vk + ga * ik, ik, qk, v_t, i_t

    def system(self, vk: np.ndarray, w: float):
        """(complex residual, real Newton Jacobian over re V1, (re, im) V3.., w (im V1 is
        the phase reference), al, ga) at vk, w."""
        al, ga, h, al2, ga2 = self.coeffs_and_step(w)
        ik, qk, _, _, g_t, c_t = self._wave(vk, w, True)
        r = al * vk + ga * ik
        # ga d(re,im I)/d(re,im V); with charge, the charging current j k w Q_k too (the
        # capacitance waveform C(v(theta)) mapped like the conductance, times j k w)
        J = product_jacobian(g_t, self.ks, c_t, self.jk * (w * self.loop.w_ref), ga, (self.synth, self.anal))
        add_diagonal(J, al, self.diag_re)
        dik_dw = 0.0 if qk is None else self.jk * self.loop.w_ref * qk
        dw = ri(((al2 - al) * vk + (ga2 - ga) * ik) / h + ga * dik_dw)
        return r, np.column_stack([J[:, self.cols], dw]), al, ga

    def unpack(self, step: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """A Newton step's (V harmonics, other unknowns) parts, its frequency step last."""
        dv = np.empty(self.ks.size, dtype=complex)
        dv[0] = step[0]
        dv[1:] = step[1:-1:2] + 1j * step[2:-1:2]
        return dv, np.zeros(0, dtype=complex)

    def rows(self, r: np.ndarray) -> np.ndarray:
        """The residual (complex per harmonic) as the Newton system's right-hand side."""
        return ri(r)

    def solve(self, a0: float, w0: float, iters: int = 60, start: np.ndarray | None = None,
              start_even: np.ndarray | None = None):
        vk = np.zeros(self.ks.size, dtype=complex)
        vk[0] = a0
        if start is not None:
            n = min(start.size, vk.size)
            vk[:n] = start[:n]
        self.begin(vk, start_even)
        w = w0
        converged = False
        self.collapsed = False
        floor = _HEADING_TO_ZERO * abs(vk[0])
        first = None
        for _ in range(iters):
            r, Jr, al, _ = self.system(vk, w)
            scale = max(abs(vk[0]), 1e-12)
            res = np.max(np.abs(r))
            if res < 1e-10 * scale * max(1.0, np.max(np.abs(al))):
                converged = True
                break
            first = res if first is None else first
            if abs(vk[0]) < floor and res < _HEADING_TO_ZERO * first:
                # on its way to the trivial root: the fundamental fallen to nothing (the
                # damping lets it fall to a fifth per step, so this is six steps of it)
                # and the residual with it; stop rather than follow it to 1e-20 V. A
                # fundamental as small with the residual where it was can still climb
                # back (a warm start from a far corner does): that one goes on
                self.collapsed = True
                break
            if abs(vk[0]) < _GONE * floor:
                # stuck there, the fundamental still falling ten decades below its start
                # and the residual not (a row of a Zener's table at 100 kHz does this
                # for fifty steps): no oscillation from this start
                break
            step = np.linalg.solve(Jr, -self.rows(r))
            dv, dother = self.unpack(step)
            # damp: keep the fundamental positive, the frequency step (and the other
            # unknowns' DC) small
            lam = 1.0
            if vk[0].real + dv[0].real <= 0.2 * vk[0].real:
                lam = min(lam, 0.8 * vk[0].real / abs(dv[0].real))
            if abs(step[-1]) > 0.05 * w:
                lam = min(lam, 0.05 * w / abs(step[-1]))
            if dother.size and abs(dother[0]) > 0.5:
                lam = min(lam, 0.5 / abs(dother[0]))
            vk = vk + lam * dv
            self.advance(lam * dother)
            w += lam * step[-1]
        return vk, w, converged

    def begin(self, vk: np.ndarray, start_even: np.ndarray | None) -> None:
        """Set the unknowns besides V (none here)."""

    def advance(self, d: np.ndarray) -> None:
        """Move the unknowns besides V by d (none here)."""

    def freq_per_cap(self, vk: np.ndarray, w: float) -> float:
        """d(frequency)/d(C) at the solution vk, w, Hz/F, for a linear capacitance C added
        across the element: the implicit-function theorem on the converged equations,
        dX/dC = -J^-1 dR/dC with dR_k/dC = ga_k j k w w_ref V_k (element_coefficients)."""
        _, Jr, _, ga = self.system(vk, w)
        dr = ga * 1j * self.ks * (w * self.loop.w_ref) * vk
        dx = np.linalg.solve(Jr, -self.rows_odd(dr))
        return float(dx[-1]) * self.loop.w_ref / (2 * math.pi)

    def rows_odd(self, dr: np.ndarray) -> np.ndarray:
        """A derivative of the odd (loop) rows as a right-hand side."""
        return ri(dr)


class _SeriesBalance(_Balance):
    """Harmonic balance of a branch made of two equal elements in series, opposed (two
    Zeners, anode to anode), with the node between them.

    With the pair's voltage v(theta) odd (only odd harmonics, as the whole circuit is
    symmetric), the two elements swap roles every half period: the voltage across the
    forward-oriented one is u(theta) = v(theta) / 2 + e(theta) with e holding only even
    harmonics (its DC included), the other one's is u(theta + pi), and the node between
    them balances when i_e(u(theta)) + i_e(u(theta + pi)) = 0, i.e. when the even
    harmonics of the element current i_e(u) + dq_e(u)/dt vanish. Its odd harmonics are
    the pair's current. Unknowns: the odd harmonics of v (as for one element), the even
    harmonics of e and the frequency; the even rows are scaled by |gamma| at the
    fundamental so that every row is in volts."""

    def __init__(self, loop: Loop, branch: Branch, kmax: int, nt: int) -> None:
        super().__init__(loop, branch, kmax, nt)
        self.elem = branch.table.element
        self.split = (branch.table.v_v, branch.table.split_v)
        self.kall = np.arange(0, kmax + 1)
        self.synth_all, self.anal_all = transforms(self.kall, nt)
        self.odd = self.kall % 2 == 1
        self.ek = np.zeros(int(np.sum(~self.odd)), dtype=complex)
        nk = self.kall.size
        self.keep_rows = np.array([r for r in range(2 * nk) if r != 1])          # Im of the DC row is 0
        self.keep_cols = np.array([c for c in range(2 * nk) if c not in (1, 3)])  # Im u0 (none), Im u1 (phase)
        # made once, as they serve every Newton step: the kept block's index, j k, and
        # the (re, im) positions of the odd harmonics' diagonal blocks
        self.kept = np.ix_(self.keep_rows, self.keep_cols)
        self.jk = 1j * self.kall
        self.jk_odd, self.jk_even = self.jk[self.odd], self.jk[~self.odd]
        self.odd_re = 2 * np.nonzero(self.odd)[0]

    def _u(self, vk: np.ndarray, ek: np.ndarray) -> np.ndarray:
        uk = np.empty(self.kall.size, dtype=complex)
        uk[self.odd], uk[~self.odd] = vk / 2, ek
        return uk

    def _currents(self, uk: np.ndarray, w: float):
        """Element current and charge harmonics (all k) at u's harmonics, u(theta), and
        the element's conductance and capacitance along it (S, F)."""
        u_t = self.synth_all @ ri(uk)
        i_t, g_t, q_t, c_t = self.elem.sample(u_t)
        qk = cx(self.anal_all @ q_t)
        ik = cx(self.anal_all @ i_t) + self.jk * (w * self.loop.w_ref) * qk
        return ik, qk, u_t, g_t, c_t

    def residual(self, vk: np.ndarray, w: float, coeffs=None):
        ik, qk, *_ = self._currents(self._u(vk, self.ek), w)
        al, ga = coeffs if coeffs is not None else self.coeffs(w)
        v_t = self.synth @ ri(vk)
        i_t = self.synth @ ri(ik[self.odd])
        return al * vk + ga * ik[self.odd], ik[self.odd], qk[self.odd], v_t, i_t

    def begin(self, vk: np.ndarray, start_even: np.ndarray | None) -> None:
        ek = np.zeros(self.kall.size - self.ks.size, dtype=complex)
        if start_even is not None:
            n = min(start_even.size, ek.size)
            ek[:n] = start_even[:n]
        else:
            # the split with no charge moving: both elements carry the pair's current
            v_t = self.synth @ ri(vk)
            e_t = np.interp(v_t, *self.split) - v_t / 2
            ek = cx(self.anal_all @ e_t)[~self.odd]
        self.ek = ek

    def advance(self, d: np.ndarray) -> None:
        self.ek = self.ek + d

    def system(self, vk: np.ndarray, w: float):
        """(complex residual over all harmonics (odd: the loop, V; even: the middle node,
        scaled to V), the real Newton Jacobian over the kept unknowns and w, al, ga)."""
        nk, odd, even = self.kall.size, self.odd, ~self.odd
        al, ga, h, al2, ga2 = self.coeffs_and_step(w)
        zs = abs(ga[0])
        ik, qk, u_t, g_t, c_t = self._currents(self._u(vk, self.ek), w)
        r = np.empty(nk, dtype=complex)
        r[odd] = al * vk + ga * ik[odd]
        r[even] = zs * ik[even]
        # rows: odd k -> ga dI/du + 2 al (u_k = v_k / 2); even k -> zs dI/du
        rowscale = np.ones(nk, dtype=complex)
        rowscale[odd], rowscale[even] = ga, zs
        J = product_jacobian(g_t, self.kall, c_t, self.jk * (w * self.loop.w_ref), rowscale,
                              (self.synth_all, self.anal_all))
        add_diagonal(J, 2 * al, self.odd_re)     # + 2 al on the odd harmonics' blocks
        dr = np.empty(nk, dtype=complex)
        dr[odd] = (((al2 - al) * vk + (ga2 - ga) * ik[odd]) / h + ga * self.jk_odd * self.loop.w_ref * qk[odd])
        dr[even] = zs * self.jk_even * self.loop.w_ref * qk[even]
        Jr = np.column_stack([J[self.kept], ri(dr)[self.keep_rows]])
        return r, Jr, al, ga

    def rows(self, r: np.ndarray) -> np.ndarray:
        return ri(r)[self.keep_rows]

    def rows_odd(self, dr: np.ndarray) -> np.ndarray:
        full = np.zeros(self.kall.size, dtype=complex)
        full[self.odd] = dr
        return ri(full)[self.keep_rows]

    def unpack(self, step: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        du = np.zeros(2 * self.kall.size)
        du[self.keep_cols] = step[:-1]
        duk = cx(du)
        return 2 * duk[self.odd], duk[~self.odd]


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


# the fundamental's share of its starting amplitude below which a converged solution is
# the trivial one
COLLAPSED = 1e-6
# the share below which Newton, its residual fallen by as much, is known to be heading
# for that root (a settled oscillation sits near the describing-function amplitude it
# starts from, within a few times); stopping there spares the thirty steps that reach it
# at the damped rate
_HEADING_TO_ZERO = 1e-4
# below the share above, how much further a fundamental may fall, the residual not
# falling with it, before the start is given up (none seen to climb back from 1e-5)
_GONE = 1e-6


def harmonic_balance(loop: Loop, branch: Branch, lin: LinearResult, rails: tuple[float, float, float], *,
                     kmax: int = 21, start: BalanceResult | None = None, escalate: int = 2,
                     cold_retry: bool = True) -> BalanceResult | None:
    """Settled oscillation of the loop closed through a nonlinear branch; rails (V) are
    (positive rail, negative rail, signal reference) for the op-amps' swing. None when
    the circuit does not start or the branch cannot bring the loop gain down (then the
    op-amps' swing sets the amplitude and the transient simulation must answer). When
    the highest harmonics are not yet negligible the harmonics are doubled, at most
    ``escalate`` times; a warm start begins at its own harmonics, doubling them up to
    the same highest count (a continuation of many solutions, each starting from the
    last, must not climb past it one doubling at a time). A warm start that falls into
    the trivial root is started again cold unless ``cold_retry`` is False (its caller
    does that itself: then the collapsed, unconverged result is returned)."""
    top = (kmax, 2 * kmax + 1, 4 * kmax + 3)[escalate]
    if branch.table is None or not lin.starts or not math.isfinite(lin.marginal_g_s):
        return None
    a_df = describing_amplitude(branch.series_table, lin.marginal_g_s)
    if a_df is None:
        return None
    # start from the describing-function amplitude of the whole branch, less the drop
    # across the series resistance, as the element's own amplitude
    a_df = max(a_df - branch.series_ohm * lin.marginal_g_s * a_df, 0.2 * a_df)
    w_lin = 2 * math.pi * lin.marginal_hz / loop.w_ref
    if start is not None and start.state:
        # the same network a little changed (another gain, temperature): same w_ref
        warm, w0, k0, *even = start.state
        *got, collapsed = _escalated(loop, branch, a_df, w0, min(k0, top), top, np.asarray(warm),
                                     np.asarray(even[0]) if even and even[0] else None)
        if not collapsed or not cold_retry:
            return _result(loop, rails, *got)
        # a warm start too far off (a cold corner from the nominal point) can fall into
        # the trivial root: start again from the describing-function amplitude
    *got, _ = _escalated(loop, branch, a_df, w_lin, kmax, top, None, None)
    return _result(loop, rails, *got)


def _escalated(loop: Loop, branch: Branch, a_df: float, w0: float, kmax: int, top: int, warm, warm_even):
    """(balance, harmonics, scaled frequency, converged, collapsed) from the start
    given with harmonics up to kmax, doubled (k -> 2 k + 1) while the highest are not
    yet negligible and the count stays within top."""
    series = getattr(branch.table, "element", None) is not None
    k = kmax
    while True:
        hb = (_SeriesBalance if series else _Balance)(loop, branch, k, max(64, 8 * (k + 1)))
        vk, w, ok = hb.solve(a_df, w0, start=warm, start_even=warm_even)
        # a fundamental that collapsed to nothing is the trivial root, which the linear
        # analysis has just shown unstable (the circuit starts): not the settled
        # oscillation, so no answer; more harmonics cannot change that, and its tail
        # ratio is 0 / 0
        if hb.collapsed or (ok and abs(vk[0]) < COLLAPSED * a_df):
            return hb, vk, w, False, True
        tail = np.max(np.abs(vk[-2:])) / abs(vk[0]) if ok else 1.0
        if (ok and tail < 3e-4) or 2 * k + 1 > top:
            break
        k = 2 * k + 1
        if ok:
            # more harmonics from this solution: its own harmonics and frequency are
            # already those of the richer one to within the tail just measured
            warm, w0 = vk, w
            warm_even = getattr(hb, "ek", None)
    return hb, vk, w, ok, False


def _result(loop: Loop, rails, hb: _Balance, vk, w, ok) -> BalanceResult:
    br = hb.branch
    _, ipk, qk, _, _ = hb.residual(vk, w)
    p = 1j * w * hb.ks
    ik = ipk + p * loop.w_ref * br.cap_f * vk       # branch current: element plus its linear capacitance
    # the element's capacitance as the fundamental sees it (describing-function capacitance)
    cap_eff = br.cap_f + (float(np.real(qk[0] / vk[0])) if qk is not None and abs(vk[0]) > 0 else 0.0)
    vf = vk + br.series_ohm * ik                        # voltage across the whole branch
    i_t = hb.synth @ ri(ik)
    vo = loop.probe("osc", p, vf, ik)
    vl = loop.probe("load", p, vf, ik)
    kmax = int(hb.ks[-1])
    full = lambda z: _full(z, hb.ks, kmax)  # noqa: E731
    vo_t = hb.synth @ ri(vo)
    vl_t = hb.synth @ ri(vl)
    regime, (x_min, x_max, slew, io_pk, io_rms) = loop_figures(
        loop.amps, rails, lambda name: loop.probe(name, p, vf, ik), lambda z: hb.synth @ ri(z),
        lambda z: hb.synth @ ri(1j * hb.ks * w * loop.w_ref * z))
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
        state=(tuple(vk), w, kmax, tuple(getattr(hb, "ek", ()))),
        cap_eff_f=cap_eff,
        freq_per_cap_hz_f=hb.freq_per_cap(vk, w) if ok else math.nan,
        outputs={name: tuple(full(loop.probe(name, p, vf, ik))) for name in loop.outputs},
    )


def _full(z: np.ndarray, ks: np.ndarray, kmax: int) -> np.ndarray:
    out = np.zeros(max(kmax, 9), dtype=complex)
    out[ks - 1] = z
    return out
