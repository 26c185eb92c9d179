"""The search's candidates in the order they are verified (the pipeline takes them one by
one until verification may stop)."""

from __future__ import annotations

import heapq

import numpy as np

from partpick.search.candidates import Candidate

__all__ = ["Pool"]


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
        # each row's estimated yield, cost and THD, for the certification (_certified)
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
            c = simulate(self.batches[self.src[self.at]].candidate(int(self.row[self.at])))
            heapq.heappush(self.placed, (self._key(c), self.at, c))
            self.at += 1
