"""Array kernels of the search's enumeration (:mod:`partpick.search.enumerate`): the
best row of each configuration, and the amplitude-side rows worth matching with arm
sets, each in linear time over numpy arrays."""

from __future__ import annotations

import numpy as np

__all__ = ["first_of_groups", "best_rows", "cheapest_of_groups"]


def first_of_groups(groups: np.ndarray, keys: tuple[np.ndarray, ...]) -> np.ndarray:
    """Position of the smallest row of each group by the keys compared in turn (the
    first key first; NaN as +inf; equal rows: the first), groups ascending: what the
    first row of each group of ``np.lexsort(keys[::-1] + (groups,))`` is, in linear time
    (the stable sort of every row costs more than the search's scoring)."""
    sel = np.arange(groups.size)
    if groups.size == 0:
        return sel
    for key in keys:      # (groups: small non-negative integers, the index of a table of minima)
        k = np.where(np.isnan(key[sel]), np.inf, key[sel])
        best = np.full(int(groups.max()) + 1, np.inf)
        np.minimum.at(best, groups[sel], k)
        sel = sel[k == best[groups[sel]]]
    _, first = np.unique(groups[sel], return_index=True)
    return sel[first]


def best_rows(bins: np.ndarray, score: np.ndarray, keep: int = 2) -> np.ndarray:
    """The amplitude-side rows worth matching with arm sets: per K bin (rows sorted by
    bin), the best ``keep`` by score (the smallest margin in standard deviations; of
    equal ones, the first), for each line of score (groups x rows): a mask of the rows
    chosen per group. Non-finite scores are never chosen."""
    work = np.where(np.isfinite(score), score, -np.inf)
    chosen = np.zeros(work.shape, bool)
    if bins.size == 0:
        return chosen
    n = bins.size
    starts = np.flatnonzero(np.r_[True, bins[1:] != bins[:-1]])
    seg = np.repeat(np.arange(starts.size), np.diff(np.r_[starts, n]))
    rows, lines = work.reshape(-1, n), chosen.reshape(-1, n)
    back = n - np.arange(n)      # larger for an earlier row: the first hit of a bin is its largest
    for _ in range(keep):
        top = np.maximum.reduceat(rows, starts, axis=-1)
        # (rows hold no NaN and no +inf: a hit where the top is finite is finite, and a bin
        # whose top is -inf has nothing to choose)
        first = np.maximum.reduceat(np.where(rows == top[:, seg], back, 0), starts, axis=-1)
        first[top == -np.inf] = 0
        line, _ = np.nonzero(first)
        if line.size == 0:
            break
        col = n - first[first > 0]
        lines[line, col] = True
        rows[line, col] = -np.inf
    return chosen


def cheapest_of_groups(groups: np.ndarray, bound: np.ndarray, slack: float, exact, tie: np.ndarray) -> np.ndarray:
    """The rows first_of_groups(groups, (exact(every row), tie)) gives, where exact
    (a function of row positions) is dear and, for every row, bound <= exact - c <=
    bound + slack with c a constant of the row's group: a row whose bound exceeds its
    group's smallest by more than slack has an exact value over that row's, so it cannot
    be the smallest, and exact is computed only for the others (in order: the first of
    equals is the same)."""
    if groups.size == 0:
        return np.zeros(0, np.intp)
    lo = np.full(int(groups.max()) + 1, np.inf)
    np.minimum.at(lo, groups, bound)
    near = np.flatnonzero(bound <= lo[groups] + slack + 1e-9)    # (1e-9: the sums' rounding)
    return near[first_of_groups(groups[near], (exact(near), tie[near]))]
