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

A stream (``submit_stream``) lets a worker go on with its task's next step while the
parent is still busy with the last one: the worker sends each value its generator
yields as soon as it is made. A front search's islands never migrate, so its workers
evolve them through the whole search this way, and never wait for the parent's log
rows, archive and checkpoint between evolutions (benchmarks/README.md).

Workers ignore SIGINT (the parent decides when to stop; a terminal Ctrl-C reaches
the whole process group), take the default SIGTERM (a group SIGTERM ends them), and
exit when the parent closes their pipe or is gone.
"""

import itertools
import multiprocessing as mp
import os
import signal
import sys
import traceback
from multiprocessing.connection import wait

POLL_S = 0.2  # longest uninterruptible wait in the parent, s
PARENT_CHECK_S = 1.0  # how often an idle worker checks that its parent is alive, s
START_METHOD = "fork" if sys.platform.startswith("linux") else "spawn"
STOP_SIGNALS = {signal.SIGINT, signal.SIGTERM}


class WorkerLost(RuntimeError):
    """A worker process died before returning its task's result."""


class WorkerFailed(RuntimeError):
    """A task raised in a worker; the message holds the worker's traceback."""


def _serve(conn, parent_pid):
    """Worker loop: receive (function, argument, count), send (ok, result or traceback
    text); for a stream (count an int) send each of the first ``count`` values the
    function's iterator yields as soon as it is made."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)  # a forked worker inherits the run's handler
    # started with both blocked (WorkerPool): a group SIGTERM held meanwhile ends us now
    signal.pthread_sigmask(signal.SIG_UNBLOCK, STOP_SIGNALS)
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
        outputs = _outputs(*msg)
        while True:
            try:
                out = (True, next(outputs))
            except StopIteration:
                break
            except BaseException as exc:  # report everything; the parent decides
                out = (False, f"{type(exc).__name__}: {exc}\n{traceback.format_exc()}")
            try:
                conn.send(out)
            except (BrokenPipeError, OSError):
                return
            if not out[0]:
                break


def _outputs(fn, arg, count):
    """What a task sends back: ``fn(arg)``, or for a stream (count an int) the first
    ``count`` values of the iterator ``fn(arg)``, each as soon as it is made."""
    if count is None:
        yield fn(arg)
        return
    made = 0
    for value in itertools.islice(fn(arg), count):
        yield value
        made += 1
    if made < count:
        raise RuntimeError(f"the stream ended after {made} of {count} values")


class WorkerPool:
    """``n`` worker processes; ``imap_unordered``/``map``/``submit`` run module-level
    functions, ``submit_stream`` module-level generator functions."""

    def __init__(self, n: int, start_method: str = START_METHOD):
        if n < 1:
            raise ValueError("a worker pool needs at least one worker")
        ctx = mp.get_context(start_method)
        self._workers = []
        self._busy = set()
        self._pending = None  # (item count, run) of a submitted run
        # Stop signals are held, not lost, while the workers start: blocked here (the
        # block is inherited through fork and exec, and a worker unblocks once it has
        # its own handlers, ``_serve``), delivered to this process when unblocked below
        # (a Ctrl-C then stops the run; ignoring SIGINT here instead dropped it).
        held = signal.pthread_sigmask(signal.SIG_BLOCK, STOP_SIGNALS)
        try:
            try:
                for _ in range(n):
                    parent, child = ctx.Pipe()
                    proc = ctx.Process(target=_serve, args=(child, os.getpid()), daemon=True)
                    proc.start()
                    child.close()
                    self._workers.append((proc, parent))
            finally:
                signal.pthread_sigmask(signal.SIG_SETMASK, held)  # a held signal acts here
        except BaseException:
            self.abort()  # no worker outlives a pool that failed to start
            raise

    @property
    def size(self) -> int:
        return len(self._workers)

    @property
    def pids(self) -> list:
        return [proc.pid for proc, _ in self._workers]

    def _start(self, fn, items, count=None) -> dict:
        """Send the first items to the workers at once; the rest go as workers free up
        (in ``_results``). ``count``: see ``submit_stream``."""
        run = {"fn": fn, "queue": list(enumerate(items))[::-1], "owner": {}, "count": count}
        for proc, conn in self._workers:
            self._dispatch(run, proc, conn)
        return run

    def _dispatch(self, run, proc, conn):
        if run["queue"]:
            index, item = run["queue"].pop()
            conn.send((run["fn"], item, run["count"]))
            run["owner"][conn] = (index, proc)
            self._busy.add(conn)

    def _receive(self, conn, proc):
        """The next value a worker sends (WorkerLost if it died, WorkerFailed if its
        task raised)."""
        try:
            ok, value = conn.recv()
        except (EOFError, OSError):
            raise WorkerLost(
                f"worker process {proc.pid} ended before returning "
                f"its result (exit code {proc.exitcode})"
            ) from None
        if not ok:
            self._busy.discard(conn)
            raise WorkerFailed(value)
        return value

    def _results(self, run):
        """Yield ``(index, result)`` of a started run as workers finish."""
        owner = run["owner"]  # pipe -> (index, process)
        while owner:
            for conn in wait(list(owner), timeout=POLL_S):
                index, proc = owner.pop(conn)
                value = self._receive(conn, proc)
                self._busy.discard(conn)
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
        self._submit(fn, list(items), None)

    def submit_stream(self, fn, items, count: int) -> None:
        """Start a stream and return at once: worker k iterates ``fn(items[k])`` and
        sends each of its first ``count`` values as soon as it is made, going on
        without waiting for this process; each ``collect()`` returns the next value of
        every item, in input order. At most one item per worker; one run at a time."""
        items = list(items)
        if len(items) > len(self._workers):
            raise ValueError(f"a stream takes at most one item per worker ({len(self._workers)})")
        if count < 1:
            raise ValueError("a stream sends at least one value")
        self._submit(fn, items, int(count))

    def _submit(self, fn, items, count):
        if self._pending is not None:
            raise RuntimeError("a submitted run is still being worked on")
        run = self._start(fn, items, count)
        run["left"] = count
        self._pending = (len(items), run)

    def collect(self) -> list:
        """The results of the submitted run, in input order (waits for them); of a
        stream, the next value of every item."""
        if self._pending is None:
            raise RuntimeError("nothing was submitted")
        n, run = self._pending
        out = [None] * n
        if run["count"] is None:
            self._pending = None
            for index, value in self._results(run):
                out[index] = value
            return out
        waiting = dict(run["owner"])
        try:
            while waiting:
                for conn in wait(list(waiting), timeout=POLL_S):
                    index, proc = waiting.pop(conn)
                    out[index] = self._receive(conn, proc)
        except BaseException:
            self._pending = None  # as for a run: a failed collect ends it
            raise
        run["left"] -= 1
        if run["left"] == 0:  # every worker has sent its last value and is idle again
            self._busy.difference_update(run["owner"])
            self._pending = None
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
