"""Rational functions of the (scaled) Laplace variable, for exact small circuits.

Coefficients are ascending powers of p = s / w_ref; scaling by a reference angular
frequency near the oscillation keeps the coefficients near 1, so polynomial roots
stay well conditioned (a common practice in filter design, e.g. scipy.signal's
normalised prototypes).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Rational", "const", "parallel", "polyval", "poly_sum2"]


def _trim(c: np.ndarray) -> np.ndarray:
    if c.size and c[-1] != 0:
        return c    # (nothing to trim: the usual case, without a search for the last non-zero)
    nz = np.flatnonzero(c)
    return c[: nz[-1] + 1] if nz.size else c[:1] * 0


def poly_sum2(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """a + b for ascending coefficient arrays of any lengths."""
    if a.size < b.size:
        a, b = b, a
    out = a.copy()
    out[: b.size] += b
    return out


def polyval(c: np.ndarray, p: np.ndarray | complex) -> np.ndarray:
    """sum c[k] p^k, through the Vandermonde matrix (one vector operation, which beats
    Horner's loop for the low degrees and short vectors used here)."""
    p = np.asarray(p, dtype=complex)
    return np.power.outer(p, _POWERS[c.size] if c.size < len(_POWERS) else np.arange(c.size)) @ c


_POWERS = tuple(np.arange(k) for k in range(24))   # polyval's exponents (made once, not per call)


@dataclass(frozen=True, slots=True)
class Rational:
    """num(p) / den(p), ascending coefficients."""

    num: np.ndarray
    den: np.ndarray

    def __add__(self, other: "Rational") -> "Rational":
        return Rational(_trim(poly_sum2(np.convolve(self.num, other.den), np.convolve(other.num, self.den))),
                        _trim(np.convolve(self.den, other.den)))

    def __sub__(self, other: "Rational") -> "Rational":
        return self + other.scale(-1.0)

    def __mul__(self, other: "Rational") -> "Rational":
        return Rational(_trim(np.convolve(self.num, other.num)), _trim(np.convolve(self.den, other.den)))

    def __truediv__(self, other: "Rational") -> "Rational":
        return Rational(_trim(np.convolve(self.num, other.den)), _trim(np.convolve(self.den, other.num)))

    def scale(self, k: float) -> "Rational":
        return Rational(self.num * k, self.den)

    def inv(self) -> "Rational":
        return Rational(self.den, self.num)

    def __call__(self, p: np.ndarray | complex) -> np.ndarray:
        return polyval(self.num, p) / polyval(self.den, p)


def const(k: float) -> Rational:
    return Rational(np.array([float(k)]), np.array([1.0]))


def parallel(*zs: Rational) -> Rational:
    """Impedances in parallel: 1 / sum(1/Z)."""
    y = zs[0].inv()
    for z in zs[1:]:
        y = y + z.inv()
    return y.inv()
