"""Polynomials in ascending coefficient arrays, and the determinant of a matrix of them.

A topology whose loop has more unknowns than a ladder network can eliminate by hand
writes its small-signal equations as a matrix of polynomials in p = s / w_ref and
reduces it by determinants (Cramer's rule): this module does the arithmetic, exact in
the structure and guarded against floating-point residues in the leading coefficients.
"""

from __future__ import annotations

import numpy as np

from partpick.physics.rational import poly_sum2

__all__ = ["poly_sum2", "poly_add", "poly_det"]

_ONE = np.array([1.0])


def poly_add(*polys) -> np.ndarray:
    """Sum of polynomials (ascending coefficient arrays; None is zero)."""
    out = np.zeros(1)
    for p in polys:
        if p is not None:
            out = poly_sum2(out, np.asarray(p, float))
    return out


def poly_det(m: list[list], memo: dict | None = None, tag=None) -> np.ndarray:
    """Determinant of a square matrix of polynomials (ascending coefficient arrays,
    None for zero) by Laplace expansion along the columns, memoised over row subsets
    (``memo`` may be shared by matrices whose columns after the first agree: ``tag``
    names the first column). Alongside each minor the sum of its terms' magnitudes is
    carried, so that leading coefficients that cancel (exactly zero, but a rounding
    residue in floating point, which would put a spurious root far out) are dropped:
    those below 1e-11 of what was summed into them."""
    n = len(m)
    memo = {} if memo is None else memo

    def minor(col: int, rows: tuple) -> tuple[np.ndarray, np.ndarray]:
        if col == n:
            return _ONE, _ONE
        key = (tag if col == 0 else None, col, rows)
        if key not in memo:
            total, size = np.zeros(1), np.zeros(1)
            for i, r in enumerate(rows):
                e = m[r][col]
                if e is None:
                    continue
                sub, sub_size = minor(col + 1, rows[:i] + rows[i + 1:])
                term = np.convolve(e, sub)
                total = poly_sum2(total, -term if i % 2 else term)
                size = poly_sum2(size, np.convolve(np.abs(e), sub_size))
            memo[key] = (total, size)
        return memo[key]

    total, size = minor(0, tuple(range(n)))
    top = total.size
    while top > 1 and abs(total[top - 1]) <= 1e-11 * size[top - 1]:
        top -= 1
    return total[:top]
