"""Verification of the search's candidates ahead of their turn, over the CPUs.

The pipeline verifies candidates one at a time in the pool's order, and what it does
next depends on what it has verified (a configuration that passes is not verified
again; verification stops once the top N are certified). Each verification is a pure
function of its candidate, so helper processes (:class:`partpick.forked.Helpers`,
forked once the search's tables are made) verify the candidate whose turn it is and
the next ones the pool gives that the loop would take if it changed nothing; when
their turn comes, their results are read back. The loop makes every decision in the
same order on the same results: the designs shown, their order and the candidates
verified are those of verifying one at a time, whatever the number of CPUs (a
look-ahead the loop does not take is only work lost on another CPU)."""

from __future__ import annotations

from partpick.forked import FAILED, Helpers, spread

__all__ = ["LOOK", "Ahead"]

LOOK = 4   # candidates looked at per helper to find ones worth verifying ahead (each is simulated)


class Ahead:
    """The verification of one design command's candidates: ``job(c, transient)`` (a
    result, or None where a transient run was refused), in helpers when there is more
    than one CPU, else here (close() when done)."""

    def __init__(self, job, key_of) -> None:
        self.job, self.key_of = job, key_of
        self.helpers: Helpers | None = None
        self.alone = spread() <= 1     # one CPU, a worker, no fork, or forking failed: all here

    def close(self) -> None:
        """The helpers leave."""
        if self.helpers is not None:
            self.helpers.close()

    def verify(self, c, pool, simulate, wanted, transient):
        """The result of candidate c, whose turn it is; meanwhile the free helpers take
        the next candidates of ``pool`` (peeked: :meth:`partpick.search.pool.Pool.peek`)
        that ``wanted`` accepts. ``transient``: the command's budget of transient runs,
        spent only here."""
        if self.alone:
            return self.job(c, transient)
        if self.helpers is None:
            try:   # forked at the first verification: after the search, with its tables
                # a helper makes no transient run: a candidate that needs one is verified
                # again here in its turn, with the command's budget and this process's
                # predictions (a helper that ran it would spend runs a one-at-a-time loop
                # may not: the predictions it would have cached are in another process)
                self.helpers = Helpers(lambda x: self.job(x, False), spread())
            except OSError:   # (no process to be had: verified here, one at a time)
                self.alone = True
                return self.job(c, transient)
        h, key = self.helpers, self.key_of(c)
        if not h.has(key):
            while not h.submit(key, c):
                if not h.free() and not h.busy:
                    return self.job(c, transient)   # (every helper lost)
                h.wait()
        more = pool.peek(simulate, h.free(), lambda d: wanted(d) and not h.has(self.key_of(d)), LOOK * h.size)
        for d in more:
            h.submit(self.key_of(d), d)
        r = h.result(key)
        return r if r is not None and r is not FAILED else self.job(c, transient)
