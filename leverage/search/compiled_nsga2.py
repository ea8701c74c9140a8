"""NSGA-II as a pygmo user-defined algorithm whose whole evolution is one compiled call.

``CompiledNSGA2.evolve(pop)`` hands the population's decision vectors and objectives to
``leverage.core.nsga2.evolve`` (Deb et al. 2002; the method and its operators are
described there), which runs every generation of the call and evaluates the children
with the compiled fitness itself, and writes the survivors back. The feasible
non-dominated designs among all of the call's children come back too (``take_met``),
so a front search sees every generation's front, not only the last. pygmo's own
nsga2 spends about as long per generation on its bookkeeping and on copying the
problem (its 110 kB parameter array) for each batch as on the 64 evaluations
(benchmarks/README.md); here nothing runs in Python between generations (in worker
processes; in the run's own process ``nsga2.evolve_in_threads`` steps the
generations from Python so that each batch can use numba's threads).

The operators' settings default to pygmo nsga2's (crossover probability 0.95, SBX
distribution index 10, mutation distribution index 50) except the mutation probability:
1 / (number of variables), the value Deb et al. 2002 used (pygmo's default is 0.01).
Only ``leverage.search.udp.LeveragingUDP`` problems (exact type) can be evolved: the
kernel calls ``core.trajectory`` with the problem's parameter array.

Random numbers: each call seeds the kernel with a 32-bit value drawn from the
algorithm's seed and the number of calls made so far (``search.seeds.call_seed``),
so successive calls differ, the same seed repeats a search, and an algorithm pickled
between calls (worker processes, checkpoints) continues exactly as the original would.
"""

import copy

import numpy as np

from leverage.core import nsga2
from leverage.search.seeds import call_seed
from leverage.search.udp import LeveragingUDP, call_kernel

DEFAULT_CR = 0.95  # crossover probability (pygmo nsga2's default)
DEFAULT_ETA_C = 10.0  # SBX distribution index (pygmo nsga2's default)
DEFAULT_ETA_M = 50.0  # polynomial-mutation distribution index (pygmo nsga2's default)
ARCHIVE_ROWS = 600  # designs one call's archive holds (twice the front search's 300)


class CompiledNSGA2:
    """pygmo user-defined algorithm: ``gen`` NSGA-II generations per ``evolve`` call.

    m: probability of mutating each variable; None means 1 / (number of variables).
    """

    def __init__(
        self, gen=1, cr=DEFAULT_CR, eta_c=DEFAULT_ETA_C, m=None, eta_m=DEFAULT_ETA_M, seed=0
    ):
        if not 0.0 <= cr <= 1.0 or (m is not None and not 0.0 <= m <= 1.0):
            raise ValueError("cr and m are probabilities, in [0, 1]")
        if eta_c < 0.0 or eta_m < 0.0:
            raise ValueError("the distribution indices eta_c and eta_m must be >= 0")
        self.gen = int(gen)
        self.cr = float(cr)
        self.eta_c = float(eta_c)
        self.m = None if m is None else float(m)
        self.eta_m = float(eta_m)
        self.seed = int(seed)
        self.calls = 0  # evolve calls made: the second half of each call's seed
        self.met = None  # (x, f) of the feasible non-dominated designs of the last call

    def take_met(self):
        """(x, f) of the feasible, mutually non-dominated designs among the children of
        the last ``evolve`` call (rows; None before the first call or once taken), and
        forget them (so they do not travel with the algorithm to the next call)."""
        met, self.met = getattr(self, "met", None), None
        return met

    def set_seed(self, seed):
        self.seed = int(seed)
        self.calls = 0

    def evolve(self, pop):
        udp = pop.problem.extract(LeveragingUDP)
        if udp is None:
            raise TypeError(
                "CompiledNSGA2 evolves only a leverage.search.udp.LeveragingUDP problem"
            )
        n = len(pop)
        if n < 8 or n % 4:
            raise ValueError(
                f"CompiledNSGA2 needs a population that is a multiple of 4, at least 8 (got {n})"
            )
        if self.gen == 0:
            return pop
        # pygmo hands a Python algorithm the caller's own population; its built-in
        # algorithms leave that one as it was, and so does this one (one copy a call).
        pop = copy.deepcopy(pop)
        lower, upper = (np.asarray(b, dtype=float) for b in pop.problem.get_bounds())
        m = 1.0 / len(lower) if self.m is None else self.m
        seed32 = call_seed(self.seed, self.calls)
        self.calls += 1
        # getattr: a UDP pickled by an older version has no flag
        threads = not getattr(udp, "one_thread", False)
        x, f, met_x, met_f = call_kernel(
            nsga2.evolve_in_threads if threads else nsga2.evolve,
            np.ascontiguousarray(pop.get_x(), dtype=float),
            np.ascontiguousarray(pop.get_f(), dtype=float),
            lower,
            upper,
            udp.params,
            self.gen,
            self.cr,
            self.eta_c,
            m,
            self.eta_m,
            seed32,
            ARCHIVE_ROWS,
        )
        self.met = (met_x, met_f)
        for i in range(n):
            pop.set_xf(i, x[i], f[i])
        pop.problem.increment_fevals(self.gen * n)
        return pop

    def get_name(self):
        return "NSGA-II, compiled (leverage.core.nsga2)"

    def get_extra_info(self):
        m = "1/variables" if self.m is None else f"{self.m:g}"
        return (
            f"\tGenerations per evolve: {self.gen}\n\tcr: {self.cr:g}, eta_c: {self.eta_c:g}, "
            f"m: {m}, eta_m: {self.eta_m:g}\n\tSeed: {self.seed}, calls so far: {self.calls}"
        )


def warm_up(udp, x):
    """Load (or compile) the evolution kernel: one generation of 8 copies of x, on this
    thread (a parent that forks worker processes must not start numba's threads)."""
    x = np.asarray(x, dtype=float)
    xs = np.repeat(x[None, :], 8, axis=0)
    f = np.repeat(np.asarray(udp.fitness(x), dtype=float)[None, :], 8, axis=0)
    lower, upper = (np.asarray(b, dtype=float) for b in udp.get_bounds())
    nsga2.evolve(
        xs,
        f,
        lower,
        upper,
        udp.params,
        1,
        DEFAULT_CR,
        DEFAULT_ETA_C,
        0.1,
        DEFAULT_ETA_M,
        1,
        ARCHIVE_ROWS,
    )
