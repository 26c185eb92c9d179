"""Independent pieces of work spread over forked processes: the CPUs this process may
run on, each piece a pure function of its item, so the results are those of computing
them in order here (and are, where forking is not possible: another platform, or a
process that is itself a worker)."""

from __future__ import annotations

import multiprocessing
import os

__all__ = ["workers", "fork_map"]

_TASK = None   # (func, items) a forked worker reads (set before the fork: closures need not pickle)


def workers() -> int:
    """Processes work may be spread over: the CPUs this process may run on
    (``PARTPICK_WORKERS`` caps it; 1 keeps everything in this process)."""
    try:
        n = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        n = os.cpu_count() or 1
    cap = os.environ.get("PARTPICK_WORKERS", "")
    return max(1, min(n, int(cap))) if cap.isdigit() and int(cap) > 0 else max(1, n)


def _run(i: int):
    func, items = _TASK
    return func(items[i])


def fork_map(func, items) -> list:
    """[func(x) for x in items], over forked worker processes when there are more than
    one CPU and more than one item (func's results must pickle); in this process when
    forking is not available, this process is a worker itself, or the pool breaks."""
    global _TASK
    items = list(items)
    n = min(workers(), len(items))
    if (n > 1 and "fork" in multiprocessing.get_all_start_methods()
            and not multiprocessing.current_process().daemon):
        _TASK = (func, items)
        try:
            with multiprocessing.get_context("fork").Pool(n) as pool:
                return pool.map(_run, range(len(items)), chunksize=1)
        except (OSError, multiprocessing.ProcessError):
            pass
        finally:
            _TASK = None
    return [func(x) for x in items]
