"""Sorted tables the search looks values up in: the arm sets of a family pair by
required-gain bin and frequency (the cheapest in any frequency range, by range-minimum
query), and the resistor pairs of an output stage by gain (those the load does not
enter made once per machine: the user cache, :mod:`partpick.cache`); a per-process memo
of tables that depend only on their inputs."""

from __future__ import annotations

import math

import numpy as np

from partpick.cache import content_key, load_arrays, store_arrays
from partpick.circuits.options import values_of
from partpick.search.prices import factorize

__all__ = ["K_BIN", "K_GRID", "STAGE_RATIO", "RangeMin", "ArmIndex", "StageTable", "stage_table", "memo", "memo_all"]

K_BIN = 0.004            # ln K bin width
K_GRID = np.arange(round(math.log(2.4) / K_BIN), round(math.log(3.9) / K_BIN) + 1)   # bin numbers of the arms' K
# the ratios an output stage is offered at: an attenuator down to 1/500 (20 mV at the load from
# 10 V at the oscillator), a gain stage up to 20 (the verifier judges its bandwidth and swing)
STAGE_RATIO = {"gain": (1.05, 20.0), "attenuator": (0.002, 0.95), "buffered-attenuator": (0.002, 0.95)}
STAGE_RES = 0.003        # ln gain: stage pairs this close to the wanted gain are equal for the amplitude
STAGE_LEVEL = 20e3       # ohm: among those, the pair whose Ra + Rb is nearest this (common practice, no
                         # published source: low enough against stray capacitance and bias current,
                         # high enough not to load the op-amp)
_KEY_SPAN = 100.0        # ln f0 units between bins in the arm index's sort key (far more than any window)

_MEMO: dict = {}   # tables one run shares with the next in the same process (the why-not's runs)


def memo(key, make):
    """The table under key, made once per process (the keys hold every input: the
    frozen part records themselves, never just their ids)."""
    if key not in _MEMO:
        if len(_MEMO) > 512:
            _MEMO.clear()
        _MEMO[key] = make()
    return _MEMO[key]


def memo_all(jobs) -> None:
    """The tables of jobs ([(key, make)]) not made yet, made and kept as :func:`memo`
    keeps them. Made in this process, one after the other: over the CPUs
    (:func:`partpick.forked.fork_map`) each worker pickled its tables back (an amplitude
    side with its planner, a stage table of up to 40,000 pairs), and whole design
    commands took 6 to 10 % more CPU and 2 to 5 % more time than made here (paired
    runs of four specs, 2026-12-05)."""
    todo = [(k, make) for k, make in dict(jobs).items() if k not in _MEMO]
    if len(_MEMO) + len(todo) > 512:
        _MEMO.clear()
    for k, make in todo:
        _MEMO[k] = make()


class RangeMin:
    """Index of the smallest cost in any range [a, z) of an array, by a sparse table
    (range-minimum query: Bender and Farach-Colton, LATIN 2000), vectorised over
    queries."""

    def __init__(self, cost: np.ndarray) -> None:
        self.cost = cost
        # int32 positions: the table's levels are its memory (log2 n rows of n), and no
        # table comes near 2**31 rows; a level is made when a query first needs it (the
        # search's ranges are short: most tables never need their upper levels). The
        # levels are the rows of one array (row k valid in its first n - 2**k + 1
        # places), so that a batch of queries reads them in one gather, whatever levels
        # its ranges need
        self.levels = np.arange(cost.size, dtype=np.int32)[None, :]
        self._top = np.asarray(cost, float)   # the smallest costs of the top level's ranges

    def _grow(self, j: int) -> None:
        """Make the levels up to j: level k the position of the smallest cost in
        [i, i + 2**k) for each i (the first of equals), from the level below's positions
        and smallest costs, read as two shifted slices (no gather of the costs)."""
        have = self.levels.shape[0]
        if have > j:
            return
        n, top = self.cost.size, self._top
        levels = np.zeros((j + 1, n), np.int32)
        levels[:have] = self.levels
        for k in range(have, j + 1):
            prev, half, m = levels[k - 1], 1 << (k - 1), n - (1 << k) + 1
            left = top[:m] <= top[half: half + m]
            levels[k, :m] = np.where(left, prev[:m], prev[half: half + m])
            top = np.where(left, top[:m], top[half: half + m])
        self.levels, self._top = levels, top

    def argmin(self, a: np.ndarray, z: np.ndarray) -> np.ndarray:
        """Position of the cheapest entry of each range [a, z); -1 where it is empty."""
        out = np.full(np.shape(a), -1)
        ok = z > a
        if not ok.any():
            return out
        a, z = a[ok], z[ok]
        j = np.floor(np.log2(z - a)).astype(np.intp)
        self._grow(int(j.max()))
        x, y = self.levels[j, a], self.levels[j, z - np.left_shift(1, j)]
        out[ok] = np.where(self.cost[x] <= self.cost[y], x, y)
        return out


class StageTable:
    """The resistor pairs of one stage kind and family sorted by stage gain; for a
    wanted gain, the pair within STAGE_RES of it whose level (Ra + Rb) is nearest
    STAGE_LEVEL, else the nearest gain."""

    def __init__(self, kind: str, rfam, load_y: complex, shelf=None) -> None:
        self.gains, self.ra, self.rb = stage_table(kind, rfam, load_y, shelf)
        self.ln_g = np.log(self.gains)
        self._level = RangeMin(np.abs(np.log((self.ra + self.rb) / STAGE_LEVEL)))

    def __len__(self) -> int:
        return self.gains.size

    def pick(self, want: np.ndarray, order: np.ndarray | None = None) -> np.ndarray:
        """Index of the pair for each wanted ln gain; ``order``: the wanted gains'
        ascending order (non-finite ones as 0), where the caller has it: the binary
        searches then each start where the last ended, and the range-minimum queries
        read the table in order (the same answers, sooner on tables of 10^5 pairs)."""
        ln_g = self.ln_g
        w = np.where(np.isfinite(want), want, 0.0)
        w = w if order is None else w[order]
        j = np.clip(np.searchsorted(ln_g, w), 1, ln_g.size - 1)
        near = np.where(np.abs(ln_g[j - 1] - w) <= np.abs(ln_g[j] - w), j - 1, j)
        best = self._level.argmin(np.searchsorted(ln_g, w - STAGE_RES, side="left"),
                                  np.searchsorted(ln_g, w + STAGE_RES, side="right"))
        got = np.where(best >= 0, best, near)
        if order is None:
            return got
        out = np.empty_like(got)
        out[order] = got
        return out

    def sharing(self, want: np.ndarray, value: float) -> np.ndarray:
        """Index of the pair with Ra or Rb equal to value (ohm) whose gain is nearest each
        wanted ln gain, where it lies within STAGE_RES of it (equal for the amplitude);
        -1 elsewhere."""
        sel = np.flatnonzero((self.ra == value) | (self.rb == value))
        out = np.full(np.shape(want), -1)
        if sel.size == 0:
            return out
        g = self.ln_g[sel]
        w = np.where(np.isfinite(want), want, np.inf)
        j = np.searchsorted(g, w)
        lo, hi = np.clip(j - 1, 0, g.size - 1), np.clip(j, 0, g.size - 1)
        near = np.where(np.abs(g[lo] - w) <= np.abs(g[hi] - w), lo, hi)
        return np.where(np.abs(g[near] - w) <= STAGE_RES, sel[near], -1)


class ArmIndex:
    """The arm sets of one family pair, grouped by K bin and sorted by frequency within
    each bin, with the cheapest set in any frequency range of a bin (RangeMin)."""

    def __init__(self, table, price) -> None:
        self.table = table
        n = len(table)
        self.bins = np.round(table.ln_k / K_BIN).astype(np.int32)
        order = np.lexsort((table.ln_f0, self.bins)).astype(np.int32)
        self.order = order
        self.rank = np.empty_like(order)       # table row -> position in the sorted order
        self.rank[order] = np.arange(n)
        self.sbins = self.bins[order]
        self.sf = table.ln_f0[order]
        vals = table.values[order]
        # each column's unit price, and the two arms' line prices (columns 0-3), looked up
        # once per distinct value
        unit, line = [], []
        for i, fam in enumerate(table.families):
            uniq, inv = factorize(vals[:, i])
            unit.append(price.units(fam, uniq)[inv])
            if i < 4:
                line.append(price.lines(fam, uniq)[inv])
        # one line per distinct value (a value used twice shares its line); a stocked
        # value's line costs nothing
        lr = line[0] + np.where(vals[:, 0] == vals[:, 2], 0.0, line[2])
        lc = line[1] + np.where(vals[:, 1] == vals[:, 3], 0.0, line[3])
        self.cost = sum(unit) + lr + lc
        # one sortable key: bin, then frequency within the bin
        self.key = (self.sbins - K_GRID[0]) * _KEY_SPAN + (self.sf - self.sf.min() if n else self.sf)
        self.f_min = float(self.sf.min()) if n else 0.0
        self._cheap = RangeMin(self.cost)

    def _range(self, bins: np.ndarray, lo_f: np.ndarray, hi_f: np.ndarray):
        base = (bins - K_GRID[0]) * _KEY_SPAN - self.f_min
        return (np.searchsorted(self.key, base + lo_f, side="left"),
                np.searchsorted(self.key, base + hi_f, side="right"))

    def cheapest(self, bins: np.ndarray, lo_f: np.ndarray, hi_f: np.ndarray) -> np.ndarray:
        """Index (into the table) of the cheapest arm set of each bin with ln f0 in
        [lo_f, hi_f]; -1 where there is none (vectorised range-minimum queries)."""
        best = self._cheap.argmin(*self._range(bins, lo_f, hi_f))
        return np.where(best >= 0, self.order[np.maximum(best, 0)], -1)

    def nearest(self, bins: np.ndarray, target: np.ndarray) -> np.ndarray:
        """Index of the arm set of each bin whose frequency is nearest target; -1 if the
        bin is empty."""
        lo, hi = self._range(bins, np.full(bins.shape, -np.inf), np.full(bins.shape, np.inf))
        base = (bins - K_GRID[0]) * _KEY_SPAN - self.f_min
        k = np.searchsorted(self.key, base + target)
        out = np.full(bins.shape, -1)
        for cand in (k - 1, k):
            ok = (cand >= lo) & (cand < hi)
            c = np.where(ok, cand, 0)
            better = ok & ((out < 0) | (np.abs(self.sf[c] - target) < np.abs(self.sf[np.where(out < 0, 0, out)] - target)))
            out = np.where(better, c, out)
        return np.where(out >= 0, self.order[np.maximum(out, 0)], -1)



def stage_table(kind: str, rfam, load_y: complex, shelf=None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(gains ascending, Ra, Rb) of every resistor pair of the family for a ratio stage
    (resistors from 1 kohm, and from 10 ohm for a passive attenuator, which may need to
    be stiff against a heavy load). load_y: the load's admittance at the target
    frequency, S (complex: a passive attenuator's gain is the magnitude of its divider
    with the load across Rb)."""
    lo = 10.0 if kind == "attenuator" else 1e3
    vals = np.array([v for v in values_of(rfam, shelf) if lo <= v <= 1e6])
    if vals.size == 0:
        return np.zeros(0), np.zeros(0), np.zeros(0)
    # the pairs' order depends only on the values where the load does not enter (made once
    # per machine: the cache, keyed by the values; the pairs as indices, the gains
    # computed again from them by the same expression, so the same to the last bit)
    cached = (kind != "attenuator" or load_y == 0) and vals.size <= np.iinfo(np.uint16).max
    key = content_key("stage-table-1", kind, vals.tolist()) if cached else None
    got = load_arrays("stage-table", key) if key is not None else None
    # (a damaged entry, or one not of these values, is made again: the cache is only an optimisation)
    if (got is not None and set(got) == {"a", "b"} and got["a"].shape == got["b"].shape
            and all(x.size == 0 or int(x.max()) < vals.size for x in got.values())):
        ra, rb = vals[got["a"]], vals[got["b"]]
        return _stage_gain(kind, ra, rb, load_y), ra, rb
    ia, ib = (a.ravel() for a in np.meshgrid(np.arange(vals.size), np.arange(vals.size), indexing="ij"))
    g = _stage_gain(kind, vals[ia], vals[ib], load_y)
    lo_g, hi_g = STAGE_RATIO[kind]
    keep = np.flatnonzero((g >= lo_g) & (g <= hi_g))
    keep = keep[np.argsort(g[keep], kind="stable")]
    if key is not None:
        store_arrays("stage-table", key, {"a": ia[keep].astype(np.uint16), "b": ib[keep].astype(np.uint16)},
                     compress=False)
    return g[keep], vals[ia[keep]], vals[ib[keep]]


def _stage_gain(kind: str, ra: np.ndarray, rb: np.ndarray, load_y: complex) -> np.ndarray:
    """The gain of a stage of kind with resistors Ra, Rb (ohm) and the load admittance
    load_y (S) across Rb where it is passive."""
    if kind == "gain":
        return 1 + rb / ra
    if kind == "attenuator":
        shunt = 1 / (1 / rb + load_y)
        return np.abs(shunt / (ra + shunt))
    return rb / (ra + rb)
