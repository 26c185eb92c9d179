"""Analysis of a settled periodic waveform: frequency, amplitude, harmonics, THD.

Method. Cycles are delimited by upward crossings of the mean level, located by
linear interpolation between samples, with a small hysteresis (a crossing counts only
after the signal has been below the level by a few percent of its amplitude) so that
ripple or noise near the level cannot split a cycle. The frequency is the number of
whole cycles divided by the time between the first and the last crossing used. The
window of exactly those whole cycles is resampled uniformly (an integer number of
points per cycle, linear interpolation) and transformed with the FFT: because the
record spans an integer number of periods, each harmonic falls exactly on an FFT bin
and there is no spectral leakage, so no window function is needed (coherent sampling
as in IEEE Std 1057, and common practice in distortion measurement). The amplitude of
harmonic k is 2 |X[k N]| / M for N cycles in M points, and the total harmonic
distortion is sqrt(sum of harmonic 2..9 powers) / fundamental.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["WaveformStats", "analyse", "settle_time", "upward_crossings", "cycle_peaks", "relative_fundamental",
           "HARMONICS", "SETTLE_TOL", "EnvelopeWatch", "SETTLE_BLOCK", "ENVELOPE_SETTLED"]

HARMONICS = 9          # harmonics 1..9 are reported; 2..9 enter the THD
SETTLE_TOL = 0.005     # settled: cycle-to-cycle peak change below 0.5 %
_SETTLE_CYCLES = 5     # ... over the last five cycles
_DRIFT_TOL = 0.01      # ... and the whole analysed window drifts by less than 1 %
_HYSTERESIS = 0.05     # hysteresis of the crossing detector, fraction of the amplitude
_POINTS_PER_CYCLE = 256


@dataclass(frozen=True, slots=True)
class WaveformStats:
    """Result of :func:`analyse` over ``cycles`` whole cycles.

    freq_hz: frequency (Hz); peak_v: half the peak-to-peak value (V); vpp_v: peak to
    peak (V); rms_v: rms of the AC part (V); dc_v: mean (V); thd_frac: total harmonic
    distortion over harmonics 2..9 relative to the fundamental (fraction);
    harmonics: amplitudes of harmonics 1..9 (V, absolute); cycles: whole cycles
    analysed; envelope_ratio: peak of the last analysed cycle over that of the first
    (> 1 growing, < 1 decaying); settled: the per-cycle peak changes by less than
    0.5 % from cycle to cycle over the last five cycles and by less than 1 % across
    the whole window.
    """

    freq_hz: float
    peak_v: float
    vpp_v: float
    rms_v: float
    dc_v: float
    thd_frac: float
    harmonics: tuple[float, ...]
    cycles: int
    envelope_ratio: float
    settled: bool

    @property
    def growing(self) -> bool:
        """The amplitude still grows across the window by more than the settle drift."""
        return self.envelope_ratio > 1.0 + _DRIFT_TOL

    @property
    def decaying(self) -> bool:
        """The amplitude still falls across the window by more than the settle drift."""
        return self.envelope_ratio < 1.0 - _DRIFT_TOL


def upward_crossings(t_s: np.ndarray, v: np.ndarray, level: float, hysteresis: float = 0.0) -> np.ndarray:
    """Times (s) at which v rises through ``level``, linearly interpolated between
    samples. With hysteresis > 0 a crossing counts only when the signal has been below
    level - hysteresis since the previous counted crossing (a Schmitt trigger)."""
    t_s = np.asarray(t_s, dtype=float)
    v = np.asarray(v, dtype=float)
    if len(v) < 2:
        return np.empty(0)
    below = v[:-1] < level
    cand = np.flatnonzero(below & (v[1:] >= level))  # crossing between cand and cand + 1
    if len(cand) == 0:
        return np.empty(0)
    if hysteresis > 0:
        armed_idx = np.flatnonzero(v < level - hysteresis)
        if len(armed_idx) == 0:
            return np.empty(0)
        # the last armed sample at or before each candidate
        pos = np.searchsorted(armed_idx, cand, side="right") - 1
        keep: list[int] = []
        last = -1
        for c, p in zip(cand, pos):
            if p >= 0 and armed_idx[p] > last:
                keep.append(c)
                last = c
        cand = np.asarray(keep, dtype=int)
        if len(cand) == 0:
            return np.empty(0)
    v0, v1 = v[cand], v[cand + 1]
    frac = (level - v0) / (v1 - v0)
    return t_s[cand] + frac * (t_s[cand + 1] - t_s[cand])


def _level_and_hysteresis(v: np.ndarray) -> tuple[float, float]:
    tail = v[len(v) // 2:]
    level = float(np.mean(tail))
    half_range = 0.5 * float(np.max(tail) - np.min(tail))
    return level, _HYSTERESIS * half_range


def cycle_peaks(t_s: np.ndarray, v: np.ndarray, crossings: np.ndarray) -> np.ndarray:
    """Half the peak-to-peak value of each cycle between consecutive crossings, V."""
    t_s = np.asarray(t_s, dtype=float)
    v = np.asarray(v, dtype=float)
    edges = np.searchsorted(t_s, crossings)
    peaks = np.empty(max(len(crossings) - 1, 0))
    for k in range(len(peaks)):
        seg = v[edges[k]:edges[k + 1]]
        peaks[k] = 0.5 * float(seg.max() - seg.min()) if len(seg) else 0.0
    return peaks


def analyse(t_s, v, *, cycles: int = 20) -> WaveformStats | None:
    """Statistics of the last ``cycles`` whole cycles of the record v(t_s).

    t_s: sample times (s, ascending, need not be uniform); v: samples (V). Fewer cycles
    are used when the record holds fewer. Returns None when there are fewer than three
    upward crossings of the mean level (no oscillation to analyse).
    """
    t_s = np.asarray(t_s, dtype=float)
    v = np.asarray(v, dtype=float)
    if t_s.shape != v.shape or t_s.ndim != 1:
        raise ValueError("t_s and v must be 1-D arrays of equal length")
    if cycles < 2:
        raise ValueError("cycles must be at least 2")
    if len(v) < 4 or not np.all(np.isfinite(v)):
        return None
    level, hyst = _level_and_hysteresis(v)
    xs = upward_crossings(t_s, v, level, hyst)
    if len(xs) < 3:
        return None
    # refine the level to the mean over the whole cycles found, then locate again
    window = xs[-min(cycles, len(xs) - 1) - 1:]
    tu = np.linspace(window[0], window[-1], 64 * (len(window) - 1), endpoint=False)
    level = float(np.mean(np.interp(tu, t_s, v)))
    xs = upward_crossings(t_s, v, level, hyst)
    if len(xs) < 3:
        return None
    n = min(cycles, len(xs) - 1)
    window = xs[-n - 1:]
    t0, t1 = float(window[0]), float(window[-1])
    freq = n / (t1 - t0)

    m = n * _POINTS_PER_CYCLE
    tu = t0 + (t1 - t0) * np.arange(m) / m
    vu = np.interp(tu, t_s, v)
    spec = np.fft.rfft(vu)
    dc = float(spec[0].real / m)
    amps = tuple(float(2.0 * abs(spec[k * n]) / m) for k in range(1, HARMONICS + 1))
    fund = amps[0]
    thd = math.sqrt(sum(a * a for a in amps[1:])) / fund if fund > 0 else math.inf
    rms = float(np.sqrt(np.mean((vu - dc) ** 2)))

    inside = (t_s >= t0) & (t_s <= t1)
    seg = v[inside]
    vmax, vmin = float(seg.max()), float(seg.min())
    peaks = cycle_peaks(t_s, v, window)
    ratio = float(peaks[-1] / peaks[0]) if peaks[0] > 0 else math.inf
    last = peaks[-min(_SETTLE_CYCLES + 1, len(peaks)):]
    with np.errstate(divide="ignore", invalid="ignore"):
        steps = np.abs(np.diff(last) / last[:-1]) if len(last) > 1 else np.array([0.0])
    settled = bool(len(peaks) >= 3 and np.all(steps < SETTLE_TOL) and abs(ratio - 1.0) < _DRIFT_TOL)
    return WaveformStats(
        freq_hz=float(freq),
        peak_v=0.5 * (vmax - vmin),
        vpp_v=vmax - vmin,
        rms_v=rms,
        dc_v=dc,
        thd_frac=float(thd),
        harmonics=amps,
        cycles=int(n),
        envelope_ratio=ratio,
        settled=settled,
    )


def settle_time(t_s, v, final_peak_v: float, tol: float = 0.02) -> float | None:
    """Time (s) after which every cycle's peak (half its peak-to-peak value) stays
    within ``tol`` (relative) of final_peak_v: the end of the last cycle outside the
    band, or the first crossing when every cycle is inside. None when the record has
    no whole cycle or its last cycle is still outside the band."""
    t_s = np.asarray(t_s, dtype=float)
    v = np.asarray(v, dtype=float)
    if final_peak_v <= 0 or len(v) < 4:
        return None
    level, _ = _level_and_hysteresis(v)
    xs = upward_crossings(t_s, v, level, _HYSTERESIS * final_peak_v)
    if len(xs) < 2:
        return None
    peaks = cycle_peaks(t_s, v, xs)
    out = np.flatnonzero(np.abs(peaks - final_peak_v) > tol * final_peak_v)
    if len(out) == 0:
        return float(xs[0])
    if out[-1] == len(peaks) - 1:
        return None
    return float(xs[out[-1] + 1])


def relative_fundamental(t_s, v_ref, v, *, cycles: int = 20) -> complex | None:
    """The fundamental of v over the fundamental of v_ref (complex: the amplitude ratio,
    and the phase by which v leads v_ref in radians as its angle), both taken over the
    last ``cycles`` whole cycles of v_ref (delimited as in :func:`analyse`), resampled
    uniformly and transformed with the FFT (coherent sampling, so the fundamental falls
    on one bin). None when v_ref shows fewer than three cycles."""
    t_s = np.asarray(t_s, dtype=float)
    v_ref, v = np.asarray(v_ref, dtype=float), np.asarray(v, dtype=float)
    if len(v_ref) < 4 or not (np.all(np.isfinite(v_ref)) and np.all(np.isfinite(v))):
        return None
    level, hyst = _level_and_hysteresis(v_ref)
    xs = upward_crossings(t_s, v_ref, level, hyst)
    if len(xs) < 3:
        return None
    n = min(cycles, len(xs) - 1)
    t0, t1 = float(xs[-n - 1]), float(xs[-1])
    m = n * _POINTS_PER_CYCLE
    tu = t0 + (t1 - t0) * np.arange(m) / m
    a = np.fft.rfft(np.interp(tu, t_s, v_ref))[n]
    b = np.fft.rfft(np.interp(tu, t_s, v))[n]
    return complex(b / a) if a != 0 else None


SETTLE_BLOCK = 5   # cycles per block: a run may end when two blocks' mean envelopes agree
# ... within this share of the amplitude (then 20 cycles to analyse), as verification's
# transient runs end: the cycle count from the small-signal growth rate is a bound, and a
# limiter or the swing settles the envelope far sooner (three runs measured: ended at 80 to
# 132 of 218 to 400 cycles, within 7e-5 of the full run's amplitude). A build-up grows by
# more than this per block unless its growth time constant is over 50,000 cycles, a
# loop-gain excess of the order of 1e-5, which no design passes with.
ENVELOPE_SETTLED = 1e-4


class EnvelopeWatch:
    """The envelope of a recorded waveform, cycle by cycle: each cycle's largest and
    smallest sample, refined by a parabola through the extreme sample and its two
    neighbours, averaged over blocks of SETTLE_BLOCK cycles. A cycle's extreme
    jitters by about 2e-4 of the amplitude as the period drifts against the sample
    grid (measured on clipped and limited waveforms, whose peaks are not parabolas);
    the block mean holds the envelope's drift and averages the jitter out. A cycle's
    extremes are read over the two hinted cycles up to it: an oscillation may run well
    below the hinted frequency (a slewing op-amp: a 116 kHz design at 0.83 of it), and a
    window of one hinted cycle then misses a peak now and then (taking the sample at its
    edge for one) in a pattern no two blocks share, so the run never ended early; two
    hold a whole period of any oscillation down to half the hint."""

    def __init__(self, wave: np.ndarray, ppc: int, rel: float) -> None:
        self.wave, self.ppc, self.rel = wave, ppc, rel
        self.amp: list[float] = []
        self.mid: list[float] = []

    @staticmethod
    def _peak(y: np.ndarray, k: int) -> float:
        if 0 < k < len(y) - 1:
            a, b, c = y[k - 1], y[k], y[k + 1]
            den = a - 2 * b + c
            if den != 0.0:
                return float(b - 0.125 * (a - c) ** 2 / den)
        return float(y[k])

    def settled(self, step: int) -> bool:
        """Whether the mean amplitude and mean level of the last SETTLE_BLOCK cycles up
        to ``step`` (a cycle boundary: the samples up to it are recorded) agree with
        those of the block before within ``rel`` of the amplitude."""
        y = self.wave[max(step - 2 * self.ppc, 0): step + 1]
        hi, lo = self._peak(y, int(np.argmax(y))), self._peak(y, int(np.argmin(y)))
        self.amp.append(0.5 * (hi - lo))
        self.mid.append(0.5 * (hi + lo))
        b = SETTLE_BLOCK
        if len(self.amp) < 2 * b:
            return False
        amp, mid = self.amp[-2 * b:], self.mid[-2 * b:]
        tol = self.rel * sum(amp[b:]) / b + 1e-12
        return abs(sum(amp[b:]) - sum(amp[:b])) / b <= tol and abs(sum(mid[b:]) - sum(mid[:b])) / b <= tol
