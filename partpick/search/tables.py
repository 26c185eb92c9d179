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
    """Position of the smallest cost (the first of equals) in any range [a, z) of an
    array, vectorised over queries: the array cut into blocks of BLOCK, each position's
    smallest to the end and from the start of its block (running minima), and a sparse
    table over the blocks' smallest (range-minimum query: Bender and Farach-Colton,
    LATIN 2000); a range within one block is read off those running minima where one
    lies in it, else off the block itself. Made in a few passes over the array when the
    table is made (a sparse table over every position is log2 n passes, which a search
    of stage tables of 10^5 pairs spent a tenth of its CPU on, grown again in each
    worker)."""

    BLOCK = 32

    def __init__(self, cost: np.ndarray) -> None:
        cost = np.asarray(cost, float)
        b = self.BLOCK
        nb = max(-(-cost.size // b), 1)
        pad = np.full(nb * b, np.inf)
        pad[:cost.size] = cost
        self._pad = pad
        blk = pad.reshape(nb, b)
        at = np.arange(nb * b).reshape(nb, b)
        # from the block's start: a position takes over where its cost is smaller than all before it
        run = np.minimum.accumulate(blk, axis=1)
        new = np.ones(blk.shape, bool)
        new[:, 1:] = blk[:, 1:] < run[:, :-1]
        self._pre = np.maximum.accumulate(np.where(new, at, -1), axis=1).ravel()
        # to the block's end, scanned backwards: a position takes over where its cost is no
        # larger than all after it (so the first of equals stays)
        back, at_b = blk[:, ::-1], at[:, ::-1]
        run = np.minimum.accumulate(back, axis=1)
        new[:, 1:] = back[:, 1:] <= run[:, :-1]
        self._suf = np.minimum.accumulate(np.where(new, at_b, nb * b), axis=1)[:, ::-1].ravel()
        # the sparse table over the blocks' smallest: level k the block position of the
        # smallest in [i, i + 2**k) blocks (the first of equals)
        pos = self._pre[b - 1::b]
        top = pad[pos]
        levels = [pos]
        k = 1
        while (1 << k) <= nb:
            half, m = 1 << (k - 1), nb - (1 << k) + 1
            left = top[:m] <= top[half: half + m]
            levels.append(np.where(left, levels[-1][:m], levels[-1][half: half + m]))
            top = np.where(left, top[:m], top[half: half + m])
            k += 1
        self._levels = np.zeros((len(levels), nb), np.int64)
        for k, lv in enumerate(levels):
            self._levels[k, :lv.size] = lv

    def argmin(self, a: np.ndarray, z: np.ndarray) -> np.ndarray:
        """Position of the cheapest entry of each range [a, z); -1 where it is empty."""
        out = np.full(np.shape(a), -1)
        ok = z > a
        if not ok.any():
            return out
        b, pad = self.BLOCK, self._pad
        a, last = a[ok], z[ok] - 1
        ba, bz = a // b, last // b
        # a range over blocks: the rest of the first block, the whole blocks between (if
        # any) and the start of the last, the first of equals kept (they lie left to right)
        best = self._suf[a]
        x = self._pre[last]
        lo, hi = ba + 1, bz            # whole blocks [lo, hi)
        mid = hi > lo
        if mid.any():
            l_, h_ = lo[mid], hi[mid]
            j = np.floor(np.log2(h_ - l_)).astype(np.intp)
            p, q = self._levels[j, l_], self._levels[j, h_ - np.left_shift(1, j)]
            y = np.where(pad[p] <= pad[q], p, q)
            best[mid] = np.where(pad[y] < pad[best[mid]], y, best[mid])
        best = np.where(pad[x] < pad[best], x, best)
        # a range within one block: the smallest to the block's end where it lies in the
        # range (then it is the range's), else the smallest from the block's start where
        # that does, else read off the block (the first smallest; a range of infinite
        # costs only, its first position)
        one = np.flatnonzero(ba == bz)
        if one.size:
            s_, p_ = self._suf[a[one]], self._pre[last[one]]
            best[one] = np.where(s_ <= last[one], s_, p_)
            one = one[(s_ > last[one]) & (p_ < a[one])]
        if one.size:
            cols = np.arange(b)
            start, off_a, off_z = ba[one] * b, (a[one] % b)[:, None], (last[one] % b)[:, None]
            c = np.where((cols >= off_a) & (cols <= off_z), pad[start[:, None] + cols], np.inf)
            got = np.argmin(c, axis=1)
            got = np.where((got >= off_a[:, 0]) & (got <= off_z[:, 0]), got, off_a[:, 0])
            best[one] = start + got
        out[ok] = best
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

    def choose(self, want: np.ndarray, share: float | None = None, order: np.ndarray | None = None) -> np.ndarray:
        """Index of the pair for each wanted ln gain (pick, ``order`` as it takes it), a
        pair reusing the value ``share`` (ohm: Rg's, one BOM line less) first where one is
        as good (sharing)."""
        got = self.pick(want, order)
        if share is None:
            return got
        alt = self.sharing(want, share)
        return np.where(alt >= 0, alt, got)

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
        if n and np.all(table.ln_f0[1:] >= table.ln_f0[:-1]) and np.ptp(self.bins) < 2 ** 15:
            # (the table is sorted by ln f0: a stable sort by bin alone is the same order,
            # and a radix sort of 16-bit bins)
            order = np.argsort((self.bins - self.bins.min()).astype(np.int16), kind="stable").astype(np.int32)
        else:
            order = np.lexsort((table.ln_f0, self.bins)).astype(np.int32)
        self.order = order
        self.rank = np.empty_like(order)       # table row -> position in the sorted order
        self.rank[order] = np.arange(n)
        self.sbins = self.bins[order]
        self.sf = table.ln_f0[order]
        vals = table.values[order]
        # each column's unit price, and the two arms' line prices (columns 0-3): of its
        # value list's few values where the table has one
        index = table.index[order] if table.index is not None else None

        def priced(how, i):
            if index is None:
                return how(table.families[i], vals[:, i])
            return how(table.families[i], table.lists[i])[index[:, i]]

        unit = [priced(price.units, i) for i in range(len(table.families))]
        line = [priced(price.lines, i) for i in range(4)]
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
