"""The search's candidates in the order they are verified (the pipeline takes them one by
one until verification may stop)."""

from __future__ import annotations

import heapq

import numpy as np

from partpick.rank import Ranked, rank
from partpick.search.candidates import Candidate

__all__ = ["Pool", "OPTIMISM", "cost_first"]

OPTIMISM = 0.02          # how much better than estimated an unverified candidate's yield may turn out


def cost_first(rank_by) -> bool:
    """Whether the ranking puts cost before yield (the pool then comes in cost order)."""
    keys = [k for k in rank_by if k in ("yield", "cost")]
    return bool(keys) and keys[0] == "cost"


class Pool:
    """The search's candidates in its order (Candidate.key: estimated yield to
    YIELD_STEP, then cost; cost first when the ranking puts it first, the candidates
    whose estimated yield cannot pass left out), best first: every configuration's best
    row from the batches, made into a Candidate only when it comes up, then re-placed by
    the Monte Carlo model of its yield before it is taken."""

    def __init__(self, batches, cost_first: bool = False, hopeless: float = 0.0) -> None:
        self.batches = batches
        self.cost_first = cost_first
        keys = [np.concatenate(k) for k in zip(*(b.keys() for b in batches))] if batches else [np.zeros(0)] * 3
        src = np.concatenate([np.full(len(b), i) for i, b in enumerate(batches)]) if batches else np.zeros(0, int)
        row = np.concatenate([np.arange(len(b)) for b in batches]) if batches else np.zeros(0, int)
        # each row's estimated yield, cost and THD, for the certification (certified)
        figures = [np.concatenate([np.asarray(getattr(b, f), float) for b in batches]) if batches else np.zeros(0)
                   for f in ("y", "cost", "thd")]
        # a row whose estimated yield is hopeless is never verified (its Monte Carlo
        # model would have to come out better than the estimates ever do), so it is not
        # simulated either: a spec nothing meets would otherwise place every row
        keep = np.flatnonzero(figures[0] >= hopeless)
        keys, src, row, figures = ([k[keep] for k in keys], src[keep], row[keep], [f[keep] for f in figures])
        if cost_first:
            keys = [keys[1], keys[0], keys[2]]
        order = np.lexsort(tuple(reversed(keys)))
        self.src, self.row = src[order], row[order]
        self.figures = [f[order] for f in figures]
        self.keys = [k[order] for k in keys]
        self.size = int(order.size)
        self.at = 0
        self.placed: list = []      # heap of (key, seq, simulated candidate)
        self._simulated: dict = {}  # position in this order -> its candidate simulated (by peek, or in turn)

    def _key(self, c: Candidate) -> tuple:
        k = c.key()
        return (k[1], k[0], k[2]) if self.cost_first else k

    def _head_key(self) -> tuple | None:
        if self.at >= self.size:
            return None
        return tuple(float(k[self.at]) for k in self.keys)

    def rest(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(estimated yield, cost, THD) of every candidate not yet taken: those placed by
        their simulated yield and those still in the search's order."""
        placed = [e[2] for e in self.placed]
        return tuple(np.concatenate([f[self.at:], np.array([getattr(c, k) for c in placed], float)])
                     for f, k in zip(self.figures, ("yield_est", "cost", "thd")))

    def next(self, simulate) -> Candidate | None:
        """The best candidate left, with its simulated yield (None when none is left)."""
        while True:
            head = self._head_key()
            if self.placed and (head is None or self.placed[0][0] <= head):
                return heapq.heappop(self.placed)[2]
            if head is None:
                return None
            c = self._simulated.get(self.at)
            if c is None:
                row = self.batches[self.src[self.at]].candidate(int(self.row[self.at]))
                c = self._simulated[self.at] = simulate(row)
            heapq.heappush(self.placed, (self._key(c), self.at, c))
            self.at += 1

    def peek(self, simulate, count: int, wanted, look: int) -> list[Candidate]:
        """Up to ``count`` of the candidates next() gives next for which ``wanted(c)``
        holds, looking at no more than ``look`` of them. The pool is left as it was (what
        next() gives, and rest(), are as without the look); the simulations are kept for
        next()."""
        at, placed = self.at, list(self.placed)
        found = []
        for _ in range(look):
            if len(found) >= count or (c := self.next(simulate)) is None:
                break
            if wanted(c):
                found.append(c)
        self.at, self.placed = at, placed
        return found

    def certified(self, verified: list[Ranked], c: Candidate, n: int, rank_by) -> bool:
        """Whether the verification may stop before candidate ``c``: n of the candidates
        ``verified`` pass, and neither ``c`` nor any candidate left here could beat the
        n-th of them even if its yield turned out OPTIMISM better than estimated, its
        frequency landed exactly and its THD a fifth lower. Every candidate left is
        judged, not only the next: this order (estimated yield, then cost) is not the
        ranking's, so a cheaper candidate of a slightly lower estimated yield may still
        tie on yield and win on cost."""
        passing = rank([r for r in verified if r.verdict.passed], rank_by)
        if len(passing) < n:
            return False
        y, cost, thd = self.rest()
        y, cost, thd = np.append(y, c.yield_est), np.append(cost, c.cost), np.append(thd, c.thd)
        return not _could_beat(y, cost, thd, passing[n - 1], rank_by).any()


def _could_beat(y: np.ndarray, cost: np.ndarray, thd: np.ndarray, nth: Ranked, rank_by) -> np.ndarray:
    """Which unverified candidates (estimated yield, cost, THD) could rank above ``nth``
    by the keys rank_by (see certified for the optimism allowed)."""
    beat = np.zeros(y.shape, bool)
    open_ = np.ones(y.shape, bool)      # tied so far: the next key decides
    for key in tuple(rank_by) + ("cost",):
        if key == "yield":
            ours = np.minimum(1.0, y + OPTIMISM)
            above, below = ours > nth.yield_frac + 0.002, ours < nth.yield_frac - 0.002
            beat |= open_ & above
            open_ &= ~above & ~below
        elif key == "cost":
            beat |= open_ & (cost < nth.cost)
            break
        elif key == "thd":
            better = 0.8 * thd < nth.thd * 0.95
            beat |= open_ & better
            open_ &= ~better
        # frequency error, amplitude error, margin, parts: refinement makes these
        # equal to within resolution for any candidate; the next key decides
    return beat
