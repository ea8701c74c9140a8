"""The pygmo user-defined problem: a thin, picklable shell around the compiled fitness.

pygmo's pattern (inherit nothing; ``fitness``, ``get_bounds``, ``get_nobj``,
``batch_fitness``). Worker processes unpickle it by importing this module, so it
holds only numpy arrays and module-level jitted functions.
"""

import os

# numba's threading layer here is GNU OpenMP, whose idle threads spin for about 300,000
# turns before sleeping. On a busy machine a spinning thread takes the core from the one
# with work: a batch of 24-64 points on 2 threads ran 2-45x slower than on one. Never
# spinning (OMP_WAIT_POLICY=PASSIVE) loses the 2-thread gain on small batches of a quiet
# machine; 1,000 turns kept most of it and never fell behind one thread
# (benchmarks/README.md). Read when the first numba-parallel call loads OpenMP; a user's
# own setting is kept.
if "OMP_WAIT_POLICY" not in os.environ:
    os.environ.setdefault("GOMP_SPINCOUNT", "1000")

import numpy as np  # noqa: E402

from leverage.core import box, trajectory  # noqa: E402
from leverage.core import layout as L  # noqa: E402


def reraise_interrupt(exc: SystemError):
    """Raise the KeyboardInterrupt inside ``exc``'s causes, else ``exc`` itself.

    numba raises an exception inside compiled code (one the kernel catches itself, such
    as poliastro's Lambert solver finding no solution for M revolutions) by calling
    into Python; a signal that arrived meanwhile runs Python's handler there (a Ctrl-C
    or the run's SIGTERM handler), and its KeyboardInterrupt comes out of the compiled
    call as a SystemError (measured: 11 of 12 SIGTERMs during a one-process run)."""
    cause = exc
    while cause is not None:
        if isinstance(cause, KeyboardInterrupt):
            raise KeyboardInterrupt from None
        cause = cause.__cause__
    raise exc


def call_kernel(kernel, *args):
    """``kernel(*args)`` (a compiled function), a signal's KeyboardInterrupt raised as
    itself rather than inside a SystemError (``reraise_interrupt``)."""
    try:
        return kernel(*args)
    except SystemError as exc:
        reraise_interrupt(exc)


class LeveragingUDP:
    """pygmo problem over the decision vector described in ``core.layout``."""

    def __init__(self, params, lower, upper, n_obj=1, name="leverage", one_thread=False):
        self.params = np.ascontiguousarray(params, dtype=float)
        self.lower = np.asarray(lower, dtype=float)
        self.upper = np.asarray(upper, dtype=float)
        self.n_obj = int(n_obj)
        self.name = name
        # True: batches are evaluated on the calling thread (islands in worker
        # processes, one core each; and no OpenMP threads in a parent that forks them).
        self.one_thread = bool(one_thread)

    @classmethod
    def from_compiled(cls, compiled, name="leverage", one_thread=False):
        return cls(
            compiled.params, compiled.lower, compiled.upper, compiled.n_obj, name, one_thread
        )

    def with_one_thread(self) -> "LeveragingUDP":
        """The same problem, its batches evaluated on the calling thread."""
        return LeveragingUDP(
            self.params, self.lower, self.upper, self.n_obj, self.name, one_thread=True
        )

    def fitness(self, x):
        return call_kernel(trajectory.fitness, np.asarray(x, dtype=float), self.params)

    def batch_fitness(self, dvs):
        xs = np.asarray(dvs, dtype=float).reshape(-1, self.lower.shape[0])
        # getattr: a UDP pickled in a checkpoint of an older version has no flag
        if getattr(self, "one_thread", False):
            return call_kernel(trajectory.batch_fitness_one_thread, xs, self.params).ravel()
        return call_kernel(trajectory.batch_fitness, xs, self.params).ravel()

    def has_batch_fitness(self):
        return True

    def get_bounds(self):
        return (self.lower, self.upper)

    def clip(self, x):
        """``x`` (a point or rows of points) moved into the bounds."""
        return np.minimum(np.maximum(np.asarray(x, dtype=float), self.lower), self.upper)

    def get_nobj(self):
        return self.n_obj

    def gradient(self, x):
        # Finite differences (pygmo's estimate_gradient_h) for the SLSQP polish.
        import pygmo as pg

        return pg.estimate_gradient_h(lambda v: self.fitness(v), x)

    def get_name(self):
        return f"leverage: {self.name}"

    def details(self, x):
        """All derived quantities of one point (slots in core.layout)."""
        return call_kernel(trajectory.details, np.asarray(x, dtype=float), self.params)

    def batch_details(self, xs):
        """``details`` of every row of xs (rows of N_Q quantities)."""
        xs = np.asarray(xs, dtype=float).reshape(-1, self.lower.shape[0])
        return call_kernel(trajectory.batch_details, xs, self.params)


class WidenedUDP(LeveragingUDP):
    """The same problem seen by a global optimiser over a box widened by ``widen`` of
    each variable's range on both sides; every point is clipped to the true bounds
    before the kernel, so the fitness of a point outside is that of its clipped image.

    pygmo's DE variants re-sample a trial point that leaves the box, so an optimum on a
    bound is reached only by sampling the bound itself; in the widened box every trial
    past the bound (up to ``widen``) lands on it. Record and polish the clipped point
    (``clip``) with a ``LeveragingUDP`` over the true bounds.
    """

    def __init__(self, params, lower, upper, n_obj=1, name="leverage", widen=0.0):
        super().__init__(params, lower, upper, n_obj, name)
        self.widen = float(widen)
        span = self.upper - self.lower
        self.box_lower = self.lower - self.widen * span
        self.box_upper = self.upper + self.widen * span

    @classmethod
    def around(cls, udp: LeveragingUDP, widen: float, penalty_factor: float = 1.0) -> "WidenedUDP":
        """``udp`` over the widened box; its penalty weight times ``penalty_factor``."""
        params = np.array(udp.params, dtype=float, copy=True)
        params[L.P_PENALTY_WEIGHT] *= penalty_factor
        return cls(params, udp.lower, udp.upper, udp.n_obj, udp.name, widen)

    def narrowed(self, slot: int, low: float, high: float) -> "WidenedUDP":
        """The same problem with the search box of variable ``slot`` set to [low, high]
        (points are still clipped to the true bounds, not to this box)."""
        other = WidenedUDP(self.params, self.lower, self.upper, self.n_obj, self.name, self.widen)
        other.box_lower[slot], other.box_upper[slot] = low, high
        return other

    def fitness(self, x):
        x = np.asarray(x, dtype=float)
        return call_kernel(box.fitness_clipped, x, self.lower, self.upper, self.params)

    def batch_fitness(self, dvs):
        xs = self.clip(np.asarray(dvs, dtype=float).reshape(-1, self.lower.shape[0]))
        return call_kernel(trajectory.batch_fitness, xs, self.params).ravel()

    def get_bounds(self):
        return (self.box_lower, self.box_upper)

    def details(self, x):
        return super().details(self.clip(x))
