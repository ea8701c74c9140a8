"""Worker processes on this machine that the parent can always stop.

A small pool over ``multiprocessing`` with one pipe per worker. It replaces pygmo's
``mp_island`` pool for two measured reasons: when a process-group SIGTERM kills a
``multiprocessing.Pool`` worker mid-task, that task's result never arrives and the
run hangs; and a busy ``mp_island`` cannot be stopped before its evolution ends.
Here a dead worker shows up as a closed pipe (``WorkerLost``), the parent waits in
short, signal-interruptible slices, and ``abort()`` kills the workers at once.

Start method: ``fork`` on Linux, where a worker starts in milliseconds with the
parent's imports and compiled numba kernels already loaded (measured: spawning two
workers that import numpy, pygmo, numba and this package cost 2-6 s, more than a demo
run's whole search); ``spawn`` elsewhere (as pygmo's own multiprocessing island
uses). Forking is safe here because the parent has started no threads when a pool
starts: the single-objective search evaluates one point at a time, and the sweep's
warm-up calls no numba-parallel function.

Workers ignore SIGINT (the parent decides when to stop; a terminal Ctrl-C reaches
the whole process group), take the default SIGTERM (a group SIGTERM ends them), and
exit when the parent closes their pipe or is gone.
"""

import multiprocessing as mp
import os
import signal
import sys
import traceback
from multiprocessing.connection import wait

POLL_S = 0.2  # longest uninterruptible wait in the parent, s
PARENT_CHECK_S = 1.0  # how often an idle worker checks that its parent is alive, s
START_METHOD = "fork" if sys.platform.startswith("linux") else "spawn"


class WorkerLost(RuntimeError):
    """A worker process died before returning its task's result."""


class WorkerFailed(RuntimeError):
    """A task raised in a worker; the message holds the worker's traceback."""


def _serve(conn, parent_pid):
    """Worker loop: receive (function, argument), send (ok, result or traceback text)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)  # a forked worker inherits the run's handler
    while True:
        try:
            # A forked sibling may hold our pipe's other end, so EOF alone cannot tell
            # that the parent is gone: look at the parent pid too.
            while not conn.poll(PARENT_CHECK_S):
                if os.getppid() != parent_pid:
                    return
            msg = conn.recv()
        except (EOFError, OSError):
            return  # the parent closed the pipe or died
        if msg is None:
            return
        fn, arg = msg
        try:
            out = (True, fn(arg))
        except BaseException as exc:  # report everything; the parent decides
            out = (False, f"{type(exc).__name__}: {exc}\n{traceback.format_exc()}")
        try:
            conn.send(out)
        except (BrokenPipeError, OSError):
            return


class WorkerPool:
    """``n`` spawned worker processes; ``imap_unordered``/``map`` run module-level functions."""

    def __init__(self, n: int, start_method: str = START_METHOD):
        if n < 1:
            raise ValueError("a worker pool needs at least one worker")
        ctx = mp.get_context(start_method)
        self._workers = []
        self._busy = set()
        self._pending = None  # (item count, run) of a submitted run
        # SIG_IGN survives exec, so a Ctrl-C while a worker boots cannot reach it.
        previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
        try:
            for _ in range(n):
                parent, child = ctx.Pipe()
                proc = ctx.Process(target=_serve, args=(child, os.getpid()), daemon=True)
                proc.start()
                child.close()
                self._workers.append((proc, parent))
        finally:
            signal.signal(signal.SIGINT, previous)

    @property
    def size(self) -> int:
        return len(self._workers)

    @property
    def pids(self) -> list:
        return [proc.pid for proc, _ in self._workers]

    def _start(self, fn, items) -> dict:
        """Send the first items to the workers at once; the rest go as workers free up
        (in ``_results``)."""
        run = {"fn": fn, "queue": list(enumerate(items))[::-1], "owner": {}}
        for proc, conn in self._workers:
            self._dispatch(run, proc, conn)
        return run

    def _dispatch(self, run, proc, conn):
        if run["queue"]:
            index, item = run["queue"].pop()
            conn.send((run["fn"], item))
            run["owner"][conn] = (index, proc)
            self._busy.add(conn)

    def _results(self, run):
        """Yield ``(index, result)`` of a started run as workers finish."""
        owner = run["owner"]  # pipe -> (index, process)
        while owner:
            for conn in wait(list(owner), timeout=POLL_S):
                index, proc = owner.pop(conn)
                try:
                    ok, value = conn.recv()
                except (EOFError, OSError):
                    raise WorkerLost(
                        f"worker process {proc.pid} ended before returning "
                        f"its result (exit code {proc.exitcode})"
                    ) from None
                self._busy.discard(conn)
                if not ok:
                    raise WorkerFailed(value)
                self._dispatch(run, proc, conn)
                yield index, value

    def imap_unordered(self, fn, items):
        """Yield ``(index, fn(items[index]))`` as workers finish, in finishing order."""
        yield from self._results(self._start(fn, items))

    def map(self, fn, items) -> list:
        """``[fn(item) for item in items]`` across the workers, in input order."""
        items = list(items)
        out = [None] * len(items)
        for index, value in self.imap_unordered(fn, items):
            out[index] = value
        return out

    def submit(self, fn, items) -> None:
        """Start ``map(fn, items)`` and return at once (the items are sent, so the caller
        may change its own objects meanwhile); ``collect()`` waits for its list. One run
        at a time."""
        if self._pending is not None:
            raise RuntimeError("a submitted run is still being worked on")
        items = list(items)
        self._pending = (len(items), self._start(fn, items))

    def collect(self) -> list:
        """The results of the submitted run, in input order (waits for them)."""
        if self._pending is None:
            raise RuntimeError("nothing was submitted")
        n, run = self._pending
        self._pending = None
        out = [None] * n
        for index, value in self._results(run):
            out[index] = value
        return out

    def close(self, timeout_s: float = 5.0):
        """Stop the workers: politely when idle, by force if busy or slow to leave."""
        if self._busy:
            self.abort()
            return
        for proc, conn in self._workers:
            try:
                conn.send(None)
            except (BrokenPipeError, OSError):
                pass
        for proc, conn in self._workers:
            proc.join(timeout_s)
        self.abort()

    def abort(self):
        """Kill every worker now (work in progress is lost) and reap them."""
        for proc, conn in self._workers:
            if proc.is_alive():
                proc.kill()
        for proc, conn in self._workers:
            proc.join(5.0)
            conn.close()
        self._workers = []
        self._busy = set()
        self._pending = None
