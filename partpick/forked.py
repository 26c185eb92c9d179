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
import signal
import struct

__all__ = ["workers", "spread", "fork_map", "Helpers", "FAILED"]

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


def spread() -> int:
    """Processes fork_map would spread work over from here: 1 in a worker (its own work
    stays in it) or where forking is not available, else workers()."""
    return 1 if _IN_WORKER or not hasattr(os, "fork") else workers()


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
    n = min(spread(), len(items))
    if n <= 1:
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


FAILED = object()   # a helper's item that raised, or whose result did not pickle


class Helpers:
    """Worker processes forked once that compute func(item) for items sent one at a
    time, for a loop whose next items depend on earlier results and which keeps the
    workers busy ahead of it (func a pure function of its item: the results are those of
    computing it here). Forked once, not per item: a fork of a process holding the
    search's tables costs milliseconds, and the copy-on-write pages a worker touches are
    copied once. Items and results go through a pipe per worker, each a length and a
    pickle. close() makes the workers leave."""

    def __init__(self, func, count: int) -> None:
        self.func = func
        self.workers: list[tuple[int, object, object]] = []   # (pid, task writer, result reader)
        self.busy: dict[int, object] = {}                     # worker index -> key of its item
        self.done: dict = {}                                  # key -> result (or FAILED)
        for _ in range(count):
            task_r, task_w = os.pipe()
            res_r, res_w = os.pipe()
            try:
                pid = os.fork()
            except OSError:
                for fd in (task_r, task_w, res_r, res_w):
                    os.close(fd)
                self.close()   # (the workers forked so far leave; the caller works alone)
                raise
            if pid == 0:
                try:
                    os.close(task_w)
                    os.close(res_r)
                    for _, w, r in self.workers:   # (the earlier workers' pipes are not this one's)
                        w.close()
                        r.close()
                    self._serve(os.fdopen(task_r, "rb"), os.fdopen(res_w, "wb"))
                finally:
                    os._exit(0)
            os.close(task_r)
            os.close(res_w)
            self.workers.append((pid, os.fdopen(task_w, "wb"), os.fdopen(res_r, "rb")))

    def _serve(self, tasks, results) -> None:
        global _IN_WORKER
        _IN_WORKER = True
        while len(head := tasks.read(4)) == 4 and (size := struct.unpack("<I", head)[0]):
            key, item = pickle.loads(tasks.read(size))
            try:
                data = pickle.dumps((key, True, self.func(item)), protocol=pickle.HIGHEST_PROTOCOL)
            except Exception:   # (computed again by the loop, which raises it as it would without workers)
                data = pickle.dumps((key, False, None), protocol=pickle.HIGHEST_PROTOCOL)
            results.write(struct.pack("<I", len(data)) + data)
            results.flush()

    @property
    def size(self) -> int:
        return len(self.workers)

    def free(self) -> int:
        """Workers without an item."""
        return sum(1 for i, w in enumerate(self.workers) if w is not None and i not in self.busy)

    def has(self, key) -> bool:
        """Whether the item under key was sent (done or in work)."""
        return key in self.done or key in self.busy.values()

    def submit(self, key, item) -> bool:
        """Send item to a free worker (False when none is free)."""
        for i, w in enumerate(self.workers):
            if w is not None and i not in self.busy:
                data = pickle.dumps((key, item), protocol=pickle.HIGHEST_PROTOCOL)
                try:
                    w[1].write(struct.pack("<I", len(data)) + data)
                    w[1].flush()
                except OSError:
                    self._lost(i)
                    continue
                self.busy[i] = key
                return True
        return False

    def wait(self) -> None:
        """Until one busy worker's result is in."""
        if not self.busy:
            return
        ready, _, _ = select.select([self.workers[i][2] for i in self.busy], [], [])
        for i in list(self.busy):
            if self.workers[i][2] in ready:
                self._receive(i)

    def result(self, key):
        """The result of the item sent under key, waited for; FAILED when it raised (or
        its worker was lost)."""
        while key not in self.done:
            if key not in self.busy.values():
                return FAILED
            self.wait()
        return self.done.pop(key)

    def _receive(self, i: int) -> None:
        reader = self.workers[i][2]
        head = reader.read(4)
        data = reader.read(struct.unpack("<I", head)[0]) if len(head) == 4 else b""
        try:
            key, ok, value = pickle.loads(data)
        except Exception:
            self._lost(i)
            return
        self.done[key] = value if ok else FAILED
        del self.busy[i]

    def _lost(self, i: int) -> None:
        if i in self.busy:
            self.done[self.busy.pop(i)] = FAILED
        self._stop(i)

    def _stop(self, i: int) -> None:
        pid, w, r = self.workers[i]
        self.workers[i] = None
        if i in self.busy:   # (its item is not wanted any more: not waited for)
            del self.busy[i]
            os.kill(pid, signal.SIGKILL)
        for f in (w, r):
            try:
                f.close()
            except OSError:
                pass
        os.waitpid(pid, 0)

    def close(self) -> None:
        """Every worker leaves: an idle one when told, a busy one killed."""
        for i, w in enumerate(self.workers):
            if w is not None:
                if i not in self.busy:
                    try:
                        w[1].write(struct.pack("<I", 0))
                        w[1].flush()
                    except OSError:
                        pass
                self._stop(i)
