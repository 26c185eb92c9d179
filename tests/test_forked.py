"""partpick/forked.py: work handed out over forked processes gives what the same work
gives in one process, in the items' order, whatever the items cost."""

from __future__ import annotations

import os
import time

import pytest

from partpick import forked


def _slow_square(x: int) -> tuple[int, int]:
    # uneven costs: the first item is dear, the rest cheap (the case a static split
    # serves worst); the worker's pid tells who computed it
    time.sleep(0.3 if x == 0 else 0.01)
    return x * x, os.getpid()


def test_results_in_item_order_and_shared_out_as_workers_come_free(monkeypatch):
    monkeypatch.setenv("PARTPICK_WORKERS", "2")
    if forked.workers() < 2:
        pytest.skip("one CPU: everything runs here")
    got = forked.fork_map(_slow_square, range(12))
    assert [v for v, _ in got] == [x * x for x in range(12)]
    pids = [p for _, p in got]
    assert os.getpid() not in pids
    # the worker that took the dear item 0 did not also get every other odd/even item:
    # the other worker took the cheap ones as it came free
    assert pids.count(pids[0]) < 6


def _fails_on_three(x: int) -> int:
    if x == 3:
        raise ValueError("three")
    return x


def test_an_error_in_a_worker_is_raised_here_as_without_workers(monkeypatch):
    monkeypatch.setenv("PARTPICK_WORKERS", "2")
    with pytest.raises(ValueError, match="three"):
        forked.fork_map(_fails_on_three, range(6))
    monkeypatch.setenv("PARTPICK_WORKERS", "1")
    with pytest.raises(ValueError, match="three"):
        forked.fork_map(_fails_on_three, range(6))


def test_one_worker_or_one_item_runs_here(monkeypatch):
    monkeypatch.setenv("PARTPICK_WORKERS", "1")
    assert forked.fork_map(_slow_square, [2])[0][1] == os.getpid()
    assert [v for v, _ in forked.fork_map(_slow_square, range(3))] == [0, 1, 4]


def _double(x: int) -> int:
    return 2 * x


def test_more_items_than_a_pipe_holds(monkeypatch):
    """20,000 indices are 80 kB, more than a pipe's 64 kB: the queue is written while the
    workers read it, so nothing waits for ever."""
    monkeypatch.setenv("PARTPICK_WORKERS", "2")
    assert forked.fork_map(_double, range(20_000)) == [2 * x for x in range(20_000)]


def test_a_design_is_the_same_searched_over_two_processes_or_one(monkeypatch):
    # the search's configurations (one batch per limiter, gain family and level) are
    # made over the CPUs; the ranked designs and every figure must be those of the search
    # in one process
    from partpick.catalog import load_catalog
    from partpick.pipeline import design
    from partpick.spec import Spec
    from tests.conftest import CATALOGS, ROOT

    monkeypatch.setenv("PARTPICK_WORKERS", "2")
    if forked.workers() < 2:
        pytest.skip("one CPU: everything runs here")
    spec = Spec.from_text((ROOT / "specs" / "carrier-50khz.yaml").read_text(encoding="utf-8"), "carrier-50khz.yaml")
    catalog = load_catalog(CATALOGS)

    def ranked():
        d = design(spec, catalog, results=5)
        # (verified: the candidates verified ahead on the other CPU change nothing the
        # loop decides, not even how many it verifies)
        return [(r.bom, r.cost, r.verdict.passed, r.yield_frac) for r in d.ranked], d.searched, d.verified

    two = ranked()
    monkeypatch.setenv("PARTPICK_WORKERS", "1")
    one = ranked()
    assert two == one
    assert len(two[0]) == 5


def _square_or_fail(x: int) -> int:
    if x == 3:
        raise ValueError("three")
    time.sleep(0.01 * (x % 3))
    return x * x


def test_helpers_compute_each_item_once_sent_and_report_failures(monkeypatch):
    """forked.Helpers: workers forked once take items as they are sent; each result is
    func(item) (here: x squared), an item that raised comes back as FAILED, and the
    workers leave on close."""
    if not hasattr(os, "fork"):
        pytest.skip("no fork here")
    h = forked.Helpers(_square_or_fail, 2)
    try:
        pending = list(range(8))
        while pending:
            if h.submit(("k", pending[0]), pending[0]):
                pending.pop(0)
            else:
                h.wait()
        got = {x: h.result(("k", x)) for x in range(8)}
    finally:
        h.close()
    assert got[3] is forked.FAILED
    assert {x: v for x, v in got.items() if x != 3} == {x: x * x for x in range(8) if x != 3}
    assert h.result(("k", 99)) is forked.FAILED       # never sent
    assert all(w is None for w in h.workers)


def test_helpers_close_does_not_wait_for_a_busy_worker():
    if not hasattr(os, "fork"):
        pytest.skip("no fork here")
    h = forked.Helpers(time.sleep, 1)
    assert h.submit("long", 30.0)
    t = time.perf_counter()
    h.close()
    assert time.perf_counter() - t < 5.0


class _Queue:
    """A stand-in for search.pool.Pool: peek gives the next items not yet taken."""

    def __init__(self, items):
        self.items = list(items)

    def peek(self, simulate, count, wanted, look):
        return [x for x in self.items[:look] if wanted(x)][:count]


def _job(x, transient):
    return x * x if x % 5 else None      # (every fifth wants a transient run it is refused)


@pytest.mark.parametrize("fork_fails", [False, True])
def test_verification_ahead_gives_the_loops_results_in_its_order(monkeypatch, fork_fails):
    """lookahead.Ahead: each item's result is job(item) whether a helper computed it
    ahead or not; with no process to be had (fork fails) everything is computed here."""
    from partpick.lookahead import Ahead

    monkeypatch.setenv("PARTPICK_WORKERS", "2")
    if forked.workers() < 2:
        pytest.skip("one CPU: everything runs here")
    if fork_fails:
        def no_fork():
            raise OSError("no process")
        monkeypatch.setattr(forked.os, "fork", no_fork)
    queue = _Queue(range(1, 21))
    ahead = Ahead(_job, lambda x: x)
    got = []
    try:
        while queue.items:
            x = queue.items.pop(0)
            got.append(ahead.verify(x, queue, None, lambda d: True, lambda: False))
    finally:
        ahead.close()
    assert got == [_job(x, None) for x in range(1, 21)]
    assert (ahead.helpers is None) == fork_fails
