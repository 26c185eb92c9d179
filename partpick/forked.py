"""Independent pieces of work spread over forked processes: the CPUs this process may
run on, each piece a pure function of its item, so the results are those of computing
them in order here (and are, where forking is not possible: another platform, or a
process that is itself a worker).

Plain os.fork and a pipe per worker, no pool: a pool's helper threads in the parent can
hold a lock at the moment of a later fork, and the child then waits on it for ever (an
intermittent hang measured with multiprocessing.Pool); with no thread besides the one
that forks, nothing is held."""

from __future__ import annotations

import os
import pickle

__all__ = ["workers", "fork_map"]

_IN_WORKER = False   # set in a forked worker: its own work stays in it


def workers() -> int:
    """Processes work may be spread over: the CPUs this process may run on
    (``PARTPICK_WORKERS`` caps it; 1 keeps everything in this process)."""
    try:
        n = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        n = os.cpu_count() or 1
    cap = os.environ.get("PARTPICK_WORKERS", "")
    return max(1, min(n, int(cap))) if cap.isdigit() and int(cap) > 0 else max(1, n)


def fork_map(func, items) -> list:
    """[func(x) for x in items], over forked worker processes (item i to worker i mod n)
    when there are more than one CPU and more than one item (func's results must
    pickle); in this process when forking is not available or this process is a worker
    itself. A worker that fails (an error, a result that does not pickle) has its items
    computed here, so an error is raised as it would be without workers."""
    global _IN_WORKER
    items = list(items)
    n = min(workers(), len(items))
    if n <= 1 or _IN_WORKER or not hasattr(os, "fork"):
        return [func(x) for x in items]
    children = []
    for w in range(n):
        mine = list(range(w, len(items), n))
        read, write = os.pipe()
        pid = os.fork()
        if pid == 0:   # the worker: compute, send, leave without running any exit handler
            try:
                os.close(read)
                _IN_WORKER = True
                data = pickle.dumps([func(items[i]) for i in mine], protocol=pickle.HIGHEST_PROTOCOL)
                with os.fdopen(write, "wb") as out:
                    out.write(data)
            finally:
                os._exit(0)
        os.close(write)
        children.append((pid, read, mine))
    results: list = [None] * len(items)
    for pid, read, mine in children:
        with os.fdopen(read, "rb") as src:
            data = src.read()
        os.waitpid(pid, 0)
        try:
            got = pickle.loads(data)
        except Exception:   # the worker failed: its items again, here
            got = [func(items[i]) for i in mine]
        for i, value in zip(mine, got):
            results[i] = value
    return results
