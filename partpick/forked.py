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
import select
import struct

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
    """[func(x) for x in items], over forked worker processes when there are more than
    one CPU and more than one item (func's results must pickle); in this process when
    forking is not available or this process is a worker itself. The items are handed
    out one at a time as workers come free (their costs differ by tens of times: a
    static split leaves one CPU idle while the other works through the dear ones), and
    each result is put back at its item's place. Items a worker did not return (an
    error, a result that does not pickle) are computed here, so an error is raised as
    it would be without workers."""
    global _IN_WORKER
    items = list(items)
    n = min(workers(), len(items))
    if n <= 1 or _IN_WORKER or not hasattr(os, "fork"):
        return [func(x) for x in items]
    # the queue: a pipe of 4-byte item indices, written in whole pieces of at most
    # PIPE_BUF (each lands at once), so every 4-byte read a worker makes (reads of one
    # pipe are serialised by the kernel) takes one whole index
    tasks_r, tasks_w = os.pipe()
    children = []
    for _ in range(n):
        read, write = os.pipe()
        pid = os.fork()
        if pid == 0:   # the worker: take, compute, send, leave without running any exit handler
            try:
                os.close(read)
                os.close(tasks_w)
                _IN_WORKER = True
                done = []
                while len(got := os.read(tasks_r, 4)) == 4:
                    i = struct.unpack("<I", got)[0]
                    done.append((i, func(items[i])))
                data = pickle.dumps(done, protocol=pickle.HIGHEST_PROTOCOL)
                with os.fdopen(write, "wb") as out:
                    out.write(data)
            finally:
                os._exit(0)
        os.close(write)
        children.append((pid, read))
    os.close(tasks_r)
    queue = b"".join(struct.pack("<I", i) for i in range(len(items)))
    piece = max(4, getattr(select, "PIPE_BUF", 512) // 4 * 4)
    try:
        for at in range(0, len(queue), piece):
            os.write(tasks_w, queue[at:at + piece])
    except BrokenPipeError:
        pass   # every worker is gone: what they did not return is computed below, here
    finally:
        os.close(tasks_w)
    results: dict[int, object] = {}
    for pid, read in children:
        with os.fdopen(read, "rb") as src:
            data = src.read()
        os.waitpid(pid, 0)
        try:
            results.update(pickle.loads(data))
        except Exception:   # the worker failed: what it took is computed below, here
            pass
    return [results[i] if i in results else func(items[i]) for i in range(len(items))]
