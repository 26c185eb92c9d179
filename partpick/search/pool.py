"""The search's candidates in the order they are verified (the pipeline takes them one by
one until verification may stop)."""

from __future__ import annotations

import heapq

import numpy as np

from partpick.rank import FREQ_RES_FLOOR, Ranked, rank, resolution
from partpick.search.candidates import Candidate

__all__ = ["Pool", "OPTIMISM", "DEMOTE_AFTER", "cost_first", "hopeless", "orders"]

OPTIMISM = 0.02          # how much better than estimated an unverified candidate's yield may turn out
# failed verifications of one kind of candidate (Candidate.kind: op-amp, control, stage)
# after which, in a demoted order, the rest of that kind wait behind every kind that has
# failed fewer times: the estimates of one kind can err alike (a THD or an output current
# the closed form puts just inside a limit), so the candidates that follow a kind's
# failures may all fail the same way, and a budget spent on them leaves a kind that passes
# untried. Only a rescue: an order that found a pass keeps its own (a kind's third
# candidate is often the cheapest that passes, where its first two just missed startup)
DEMOTE_AFTER = 2


def hopeless(y: float) -> float:
    """The estimated yield below which no candidate is verified, for a yield limit y
    (fraction): the estimates have come out up to about 8 % pessimistic (lower than the
    Monte Carlo of verification), more where the spec's own failure budget is large; and
    never ten times: a yield limit of 50 % (a refusal's loosened run) would otherwise
    verify, and first place by their Monte Carlo models, rows whose estimate is next to
    nothing (2,000 of them, 9 s, for an amplitude tolerance of 1 ppm)."""
    return max(y - max(0.08, 1.5 * (1 - y)), y / 10)


def cost_first(rank_by) -> bool:
    """Whether the ranking puts cost before yield (the pool then comes in cost order)."""
    keys = [k for k in rank_by if k in ("yield", "cost")]
    return bool(keys) and keys[0] == "cost"


def orders(rank_by) -> tuple[tuple[bool, bool], ...]:
    """The orders a phase's candidates are verified in, (cost first, demoted) each, the
    next taken only where the last spent its budget without a pass: the cost order where
    the ranking puts cost first, the yield order, and the yield order again with the
    kinds that failed waiting behind the others (in a refusal's runs too: requirement
    170's joint advice was found only so)."""
    return ((True, False),) * cost_first(rank_by) + ((False, False), (False, True))


class Pool:
    """The search's candidates in its order (Candidate.key: estimated yield to
    YIELD_STEP, then cost; cost first when the ranking puts it first, the candidates
    whose estimated yield cannot pass left out), best first: every configuration's best
    row from the batches, made into a Candidate only when it comes up, then re-placed by
    the Monte Carlo model of its yield before it is taken."""

    def __init__(self, batches, cost_first: bool = False, hopeless: float = 0.0, failures: dict | None = None,
                 demoted: bool = False, simulated: dict | None = None) -> None:
        self.batches = batches
        self.cost_first = cost_first
        self.demoted = demoted   # (the kinds' failures order the candidates: DEMOTE_AFTER)
        self.floor = hopeless    # the estimated yield below which no candidate is verified
        keys = [np.concatenate(k) for k in zip(*(b.keys() for b in batches))] if batches else [np.zeros(0)] * 3
        src = np.concatenate([np.full(len(b), i) for i, b in enumerate(batches)]) if batches else np.zeros(0, int)
        row = np.concatenate([np.arange(len(b)) for b in batches]) if batches else np.zeros(0, int)
        # each row's kind (an index into self.kinds) and the failed verifications of each
        # kind (shared by the pools of one design run: ``failures``, kind -> count)
        index: dict = {}
        kind = np.array([index.setdefault(k, len(index)) for b in batches for k in b.kinds()], int)
        self.kinds: list[tuple] = list(index)
        self.failures = failures if failures is not None else {}
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
        self.src, self.row, self.kind, self.figures, self.keys = src, row, kind[keep], figures, keys
        self.size = int(src.size)
        self.at = 0
        self.placed: list = []      # heap of (key, seq, simulated candidate)
        # (batch, row) -> its candidate simulated (by peek, or in turn; shared by the pools of
        # the same batches given the same dict)
        self._simulated: dict = simulated if simulated is not None else {}
        self._ranked: tuple = (None, None)   # (what was ranked, the n-th passing): see _nth
        self._passing: list = []             # the passing ones of the first _scanned verified
        self._scanned = 0
        self._freq_res = 0.0                 # the least frequency-error resolution of those passing
        # a candidate the caller leaves out whatever its yield (set by the caller, a
        # predicate): dropped as it comes up, before its Monte Carlo model is run
        self.skip = None
        self._sort()

    def _round(self, kind: tuple) -> int:
        """How far back a kind's candidates wait: one round per DEMOTE_AFTER failures
        in a demoted order, else none."""
        return self.failures.get(kind, 0) // DEMOTE_AFTER if self.demoted else 0

    def _sort(self) -> None:
        """The rows not yet taken in the order (round of their kind, then the search's key)."""
        at = self.at
        rounds = np.array([self._round(k) for k in self.kinds] or [0], int)[self.kind[at:]]
        order = at + np.lexsort(tuple(reversed([rounds, *(k[at:] for k in self.keys)])))
        for name in ("src", "row", "kind"):
            getattr(self, name)[at:] = getattr(self, name)[order]
        for arrays in (self.figures, self.keys):
            for a in arrays:
                a[at:] = a[order]
        self.placed = [(self._key(e[2]), e[1], e[2]) for e in self.placed]
        heapq.heapify(self.placed)

    def failed(self, c: Candidate, promised: float) -> None:
        """Candidate c failed verification: where its estimated yield promised a pass
        (at least ``promised``, the spec's limit), its kind counts one more failure (and,
        in a demoted order, waits behind the others once it has DEMOTE_AFTER more). A
        candidate verified on the chance that it comes out better than estimated and
        failing is no news."""
        if c.yield_est < promised:
            return
        kind = c.kind()
        self.failures[kind] = self.failures.get(kind, 0) + 1
        if self.demoted and self.failures[kind] % DEMOTE_AFTER == 0:
            self._sort()

    def drop_round(self, c: Candidate) -> None:
        """Leave out the rest of candidate c's round: in the yield order, c's estimated
        yield cannot pass, and neither can what follows it in its round (the candidates
        of kinds that failed more often, in later rounds, still come)."""
        r = self._round(c.kind())
        self.placed = [e for e in self.placed if e[0][0] != r]
        heapq.heapify(self.placed)
        while self.at < self.size and self._round(self.kinds[self.kind[self.at]]) == r:
            self.at += 1

    def _key(self, c: Candidate) -> tuple:
        k = c.key()
        return (self._round(c.kind()),) + ((k[1], k[0], k[2]) if self.cost_first else k)

    def _head_key(self) -> tuple | None:
        if self.at >= self.size:
            return None
        return (self._round(self.kinds[self.kind[self.at]]),) + tuple(float(k[self.at]) for k in self.keys)

    def rest(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(estimated yield, cost, THD) of every candidate not yet taken: those placed by
        their simulated yield and those still in the search's order."""
        placed = [e[2] for e in self.placed]
        return tuple(np.concatenate([f[self.at:], np.array([getattr(c, k) for c in placed], float)])
                     for f, k in zip(self.figures, ("yield_est", "cost", "thd")))

    def next(self, simulate) -> Candidate | None:
        """The best candidate left, with its simulated yield (None when none is left),
        passing over those ``skip`` leaves out."""
        while True:
            head = self._head_key()
            if self.placed and (head is None or self.placed[0][0] <= head):
                return heapq.heappop(self.placed)[2]
            if head is None:
                return None
            at = int(self.src[self.at]), int(self.row[self.at])
            c = self._simulated.get(at)
            if c is None:
                c = self.batches[at[0]].candidate(at[1])
                if self.skip is not None and self.skip(c):
                    self.at += 1
                    continue
                c = self._simulated[at] = simulate(c)
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
        nth = self._nth(verified, n, rank_by)
        if nth is None:
            return False
        y, cost, thd = self.rest()
        y, cost, thd = np.append(y, c.yield_est), np.append(cost, c.cost), np.append(thd, c.thd)
        return not _could_beat(y, cost, thd, nth, rank_by).any()

    def _nth(self, verified: list[Ranked], n: int, rank_by) -> Ranked | None:
        """The n-th best of the candidates verified that pass (None: fewer pass), ranked
        again only when more have passed (the list only grows)."""
        if len(verified) < self._scanned:   # (another list: read from the start)
            self._passing, self._scanned = [], 0
        # (the list only grows: a verdict's pass is read once, not at every candidate the pool
        # weighs, 1,200 of them for 40 verified)
        self._passing += [r for r in verified[self._scanned:] if r.verdict.passed]
        self._scanned = len(verified)
        passing = self._passing
        if self._ranked[0] != (len(passing), n, tuple(rank_by)):
            ranked = rank(passing, rank_by)
            self._ranked = ((len(passing), n, tuple(rank_by)), ranked[n - 1] if len(ranked) >= n else None)
            self._freq_res = min((resolution(r, "frequency_error") for r in passing), default=0.0)
        return self._ranked[1]

    def may_enter(self, verified: list[Ranked], c: Candidate, n: int, rank_by) -> bool:
        """Whether candidate c could rank among the top n (with the optimism of
        certified, and a key the estimates cannot judge counted as a chance): fewer than
        n of the candidates ``verified`` pass, or it could beat the n-th. (Verification
        skips c otherwise: a candidate of a kind that waits in a later round may still
        enter, so the rest is not certified.)"""
        nth = self._nth(verified, n, rank_by)
        # the least frequency error c could tie the n-th at: its own resolution (half the
        # builds' spread, which the arm families' spread bounds from below: measured 0.98 to
        # 1.4 times it, so 0.8 of it) and no more than any verified one's, which may
        # anchor the tier that c and the n-th fall in (rank's tiers)
        res = min(max(FREQ_RES_FLOOR, 0.5 * 0.8 * c.freq_sigma), self._freq_res) if nth is not None else 0.0
        return nth is None or bool(_could_beat(*(np.array([x]) for x in (c.yield_est, c.cost, c.thd)), nth,
                                               rank_by, unjudged=True, freq_res=res)[0])


def _could_beat(y: np.ndarray, cost: np.ndarray, thd: np.ndarray, nth: Ranked, rank_by,
                unjudged: bool = False, freq_res: float = 0.0) -> np.ndarray:
    """Which unverified candidates (estimated yield, cost, THD) could rank above ``nth``
    by the keys rank_by (see certified for the optimism allowed). A key the estimates
    cannot judge (frequency or amplitude error, margin, parts) is a tie, or with
    ``unjudged`` a chance to beat: one candidate is skipped only where it surely loses.
    With ``unjudged``, the frequency error is a tie where the n-th's is within
    ``freq_res`` (a fraction, a lower bound of the resolution of the tier a candidate
    would share with it): even landing exactly on the target, a candidate would tie."""
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
        elif unjudged and key == "frequency_error" and abs(nth.freq_error) <= freq_res:
            continue   # (a tie whatever the candidate's error: the next key decides)
        elif unjudged:
            beat |= open_
            break
        # frequency error, amplitude error, margin, parts: refinement makes these
        # equal to within resolution for any candidate; the next key decides
    return beat
