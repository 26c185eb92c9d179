"""The linear algebra of harmonic balance (:mod:`partpick.physics.harmonic`): the
transforms between a period's samples and its harmonics, and the conversion matrices
of a product of waveforms (the Jacobian of an element's current in its voltage's
harmonics), in the real form the Newton system takes: each complex harmonic as its
(re, im) pair, interleaved."""

from __future__ import annotations

import functools

import numpy as np

__all__ = ["transforms", "ri", "cx", "product_jacobian", "cmul_rows", "add_diagonal", "cmul_block"]


def transforms(ks: np.ndarray, nt: int) -> tuple[np.ndarray, np.ndarray]:
    """The (synthesis, analysis) pair of _transforms_for, for an array of harmonics."""
    return _transforms_for(tuple(int(k) for k in ks), nt)


@functools.lru_cache(maxsize=64)
def _transforms_for(harmonics: tuple[int, ...], nt: int) -> tuple[np.ndarray, np.ndarray]:
    """(synthesis, analysis) matrices of harmonics ks on nt samples of a period:
    columns re_k, im_k for each k, v(theta) = sum Re(V_k e^{j k theta}); the analysis
    is the inverse on those harmonics (a DC term k = 0 weighs 1/nt, the others 2/nt)."""
    ks = np.asarray(harmonics)
    theta = 2 * np.pi * np.arange(nt) / nt
    kt = np.outer(theta, ks)
    synth = np.empty((nt, 2 * ks.size))
    synth[:, 0::2] = np.cos(kt)
    synth[:, 1::2] = -np.sin(kt)
    anal = synth.T * (2.0 / nt)
    anal[0::2][ks == 0] /= 2.0
    # shared between problems of the same size: read-only
    synth.flags.writeable = anal.flags.writeable = False
    return synth, anal


def ri(z: np.ndarray) -> np.ndarray:
    """Complex z as the real vector (re z0, im z0, re z1, ...)."""
    out = np.empty(2 * z.size)
    out[0::2], out[1::2] = z.real, z.imag
    return out


def cx(x: np.ndarray) -> np.ndarray:
    """The inverse of ri."""
    return x[0::2] + 1j * x[1::2]


def product_jacobian(g_t: np.ndarray, ks: np.ndarray, c_t: np.ndarray | None = None, jw: np.ndarray | None = None,
                      rows: np.ndarray | None = None, held=None) -> np.ndarray:
    """The real Jacobian d(re, im I_k)/d(re, im V_m) over harmonics ks (rows and columns
    interleaved as transforms orders them) of i(theta) = g(theta) v(theta), g sampled
    at the nt points of a period: what ``anal @ (g_t[:, None] * synth)`` computes, from
    g's Fourier coefficients G_n = (1/nt) sum g e^(-j n theta) in O(nt log nt + K^2)
    instead of O(nt K^2). A change dV in V_m changes I_k by dV G_(k-m) + conj(dV) G_(k+m)
    (the product of two Fourier series; the conversion matrix of harmonic-balance
    analysis, Kundert, Sangiovanni-Vincentelli and White, Steady-State Methods for
    Simulating Analog and Microwave Circuits, 1990, chapter 7); the DC row (k = 0) is
    half of it, as the analysis weighs DC by 1/nt. With c_t (a capacitance waveform)
    its charge's conversion matrix times jw (per row: j k w) is added, and with rows
    every row is multiplied by its complex factor: the whole d(rows (I + jw Q))/dV in
    one pass (``held``: transforms(ks, nt) when the caller holds them)."""
    if ks.size < 24:
        # few harmonics: the plain product is cheaper than the transform's overhead
        synth, anal = held or transforms(ks, g_t.size)
        out = anal @ (g_t[:, None] * synth)
        if c_t is not None:
            out = out + cmul_rows(jw, anal @ (c_t[:, None] * synth))
        return out if rows is None else cmul_rows(rows, out)
    nt = g_t.size
    k, m = ks[:, None], ks[None, :]
    lo, hi = (k - m) % nt, (k + m) % nt
    big = np.fft.fft(g_t) / nt
    a, b = big[lo], big[hi]
    if c_t is not None:
        cap = np.fft.fft(c_t) / nt
        a, b = a + jw[:, None] * cap[lo], b + jw[:, None] * cap[hi]
    if rows is not None:
        a, b = a * rows[:, None], b * rows[:, None]
    dc = ks == 0
    a[dc] /= 2.0
    b[dc] /= 2.0
    out = np.empty((2 * ks.size, 2 * ks.size))
    out[0::2, 0::2] = a.real + b.real
    out[0::2, 1::2] = b.imag - a.imag
    out[1::2, 0::2] = a.imag + b.imag
    out[1::2, 1::2] = a.real - b.real
    return out


def cmul_rows(c: np.ndarray, m: np.ndarray) -> np.ndarray:
    """cmul_block(c) @ m without forming the block-diagonal matrix: each (re, im) row
    pair of m multiplied by the complex c of its harmonic."""
    re, im = m[0::2], m[1::2]
    cr, ci = c.real[:, None], c.imag[:, None]
    out = np.empty_like(m)
    out[0::2] = cr * re - ci * im
    out[1::2] = ci * re + cr * im
    return out


def add_diagonal(m: np.ndarray, c: np.ndarray, at: np.ndarray) -> None:
    """m += the real 2x2 blocks of multiplication by complex c, on the diagonal at the
    rows (= columns) at (each harmonic's re row): adding cmul_block(c) in place,
    without forming it."""
    m[at, at] += c.real
    m[at, at + 1] += -c.imag
    m[at + 1, at] += c.imag
    m[at + 1, at + 1] += c.real


def cmul_block(c: np.ndarray) -> np.ndarray:
    """Real 2x2 blocks for multiplication by complex c, as a block-diagonal matrix (the
    plain form cmul_rows and add_diagonal are tested against)."""
    n = c.size
    m = np.zeros((2 * n, 2 * n))
    idx = np.arange(n) * 2
    m[idx, idx] = c.real
    m[idx, idx + 1] = -c.imag
    m[idx + 1, idx] = c.imag
    m[idx + 1, idx + 1] = c.real
    return m
