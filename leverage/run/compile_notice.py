"""Say so while the model compiles: numba's first compile on a new install or after an
update takes 20-60 s (23 s on a quiet 2-core machine, 41-57 s at a load of 3-4;
benchmarks/README.md "Start-up") and was silent before.

``warm_up(udp, x, stream)`` evaluates one point with every compiled entry point the
search will call (``fitness``, ``details`` and ``batch_details``; ``batch_fitness`` only
for a front, the only search that evaluates in batches), inside ``CompileNotice``. The notice listens to
numba's ``numba:compile`` events, which numba sends only when it compiles (never
when it loads a function from its cache): on a warm cache it prints nothing. On a cold
one it prints what is happening, a live count of the functions compiled with the
elapsed time (on a terminal; elsewhere one line every ``PERIOD_S``), and how long it
took.
"""

import sys
import time

PERIOD_S = 10.0  # seconds between progress lines when stderr is not a terminal


class CompileNotice:
    """While active, report numba compilations on ``stream`` (default stderr)."""

    def __init__(self, stream=None, enabled: bool = True):
        self.stream = stream or sys.stderr
        self.enabled = enabled
        self.tty = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.functions = 0  # compiled so far (callees included)
        self.started = None  # monotonic time of the first compile
        self.seconds = 0.0
        self._last = 0.0
        self._step = ""
        self._name = "numba internals"  # the last of our (or poliastro's) functions begun

    # numba.core.event.Listener's two methods (called through _Listener)
    def on_start(self, event):
        now = time.monotonic()
        if self.started is None:
            self.started = now
            self._last = now
            self._write(
                "compiling the trajectory model for this machine (first run after an "
                "install or an update; later runs load it from the cache)",
                newline=True,
            )
        self.functions += 1
        dispatcher = event.data.get("dispatcher") if isinstance(event.data, dict) else None
        func = getattr(dispatcher, "py_func", None)
        module = getattr(func, "__module__", "") or ""
        if module.split(".")[0] in ("leverage", "poliastro"):  # not numba's own helpers
            self._name = f"{module.split('.')[-1]}.{func.__name__}"
        name = self._name
        elapsed = now - self.started
        if self.tty or now - self._last >= PERIOD_S:
            self._last = now
            self._write(
                f"  compiling{self._step}: {self.functions} functions, {elapsed:.0f} s "
                f"(now {name})",
                newline=not self.tty,
            )

    def on_end(self, event):
        pass

    def step(self, text: str):
        """Name the entry point being compiled next (shown in the progress)."""
        self._step = f" {text}"

    def _write(self, text: str, newline: bool):
        if not self.enabled:
            return
        if self.tty and not newline:
            self.stream.write("\r" + text[:99].ljust(99))
        else:
            self.stream.write(("\n" if self.tty and self._live else "") + text + "\n")
        self._live = self.tty and not newline
        self.stream.flush()

    _live = False

    def __enter__(self):
        from numba.core import event

        notice = self

        class _Listener(event.Listener):  # numba accepts only its Listener subclasses
            def on_start(self, ev):
                notice.on_start(ev)

            def on_end(self, ev):
                notice.on_end(ev)

        self._event, self._listener = event, _Listener()
        event.register("numba:compile", self._listener)
        return self

    def __exit__(self, *exc):
        self._event.unregister("numba:compile", self._listener)
        if self.started is not None:
            self.seconds = time.monotonic() - self.started
            if exc[0] is None:
                self._write(
                    f"compiled {self.functions} functions in {self.seconds:.1f} s; "
                    "cached for later runs",
                    newline=True,
                )
        return False


def warm_up(
    udp, x, batch: bool = False, stream=None, enabled: bool = True, algorithm_warm_up=None
) -> float:
    """Load or compile the kernels a search calls by evaluating ``x`` once; returns the
    seconds spent compiling (0.0 when everything came from the cache). ``batch``: also
    the parallel batch evaluation (a front search; a single-objective search never
    calls it, so it is not compiled there). ``algorithm_warm_up(udp, x)``: the search
    algorithm's own compiled kernel, if it has one (``search.single.algorithm_warm_up``);
    loaded here, before worker processes are forked, so they do not each load it."""
    import numpy as np

    steps = 2 + bool(batch) + (algorithm_warm_up is not None)
    with CompileNotice(stream, enabled) as notice:
        notice.step(f"[1/{steps}] the objective")
        udp.fitness(x)
        notice.step(f"[2/{steps}] the derived quantities")
        udp.details(x)
        # Loading even a cached kernel takes ~40 ms (measured); a search's first log
        # row calls batch_details and the one-thread batch scoring, where those loads
        # would compete with the workers.
        row = np.asarray(x, dtype=float)[None, :]
        udp.batch_details(row)
        udp.with_one_thread().batch_fitness(row)
        if batch:
            notice.step(f"[3/{steps}] the parallel batch evaluation")
            udp.batch_fitness(row)
        if algorithm_warm_up is not None:
            notice.step(f"[{steps}/{steps}] the search algorithm")
            algorithm_warm_up(udp, x)
    return notice.seconds
