"""The default single-objective algorithm: differential evolution run inside the
compiled fitness (``core.diffevo``), wrapped as a pygmo user-defined algorithm so
islands, populations, migration and checkpoints work as with pygmo's own.

pygmo's ``de`` calls the fitness once per member through Python; here one ``evolve``
is one compiled call (benchmarks/README.md, "Compiled search, end of round", has
the measured cost against the floor). The algorithm is DE/rand/1/exp with
weight 0.8 and crossover 0.9, the variant and settings pygmo's ``de`` uses by
default; its search quality was measured on the reference problems before it became
the default.
"""

import copy

import numpy as np

from leverage.core import diffevo
from leverage.search.seeds import call_seed
from leverage.search.udp import LeveragingUDP, WidenedUDP, call_kernel

WEIGHT = 0.8  # differential weight F (Storn and Price 1997)
CROSSOVER = 0.9  # crossover probability CR


def box_of(problem):
    """(udp, search box lower, upper) of a pygmo problem over a leverage UDP."""
    udp = problem.extract(WidenedUDP)
    if udp is not None:
        return udp, udp.box_lower, udp.box_upper
    udp = problem.extract(LeveragingUDP)
    if udp is None:
        raise TypeError("compiled DE evolves only leverage problems")
    return udp, udp.lower, udp.upper


class CompiledDE:
    """pygmo UDA: ``gen`` generations of DE/rand/1/exp per ``evolve`` call.

    Each call draws its random numbers from ``call_seed(seed, calls)`` and counts the
    call, so an algorithm restored from a checkpoint goes on exactly as the original.
    """

    def __init__(self, gen: int, seed: int, weight: float = WEIGHT, crossover: float = CROSSOVER):
        self.gen = int(gen)
        self.seed = int(seed)
        self.weight = float(weight)
        self.crossover = float(crossover)
        self.calls = 0

    def evolve(self, pop):
        n = len(pop)
        if n < 4:
            raise ValueError(f"compiled DE needs at least 4 individuals, got {n}")
        if self.gen == 0:
            return pop
        # pygmo hands a Python algorithm the caller's own population; pygmo's C++
        # algorithms work on a copy, and the search relies on that (an evolution cut
        # short, and a checkpoint kept while the next evolution runs, leave it as it was).
        pop = copy.deepcopy(pop)
        udp, lo, hi = box_of(pop.problem)
        x0 = pop.get_x()
        f0 = np.ascontiguousarray(pop.get_f()[:, 0])
        seed = call_seed(self.seed, self.calls)
        x, f, used = call_kernel(
            diffevo.evolve,
            x0,
            f0,
            self.gen,
            self.weight,
            self.crossover,
            lo,
            hi,
            udp.lower,
            udp.upper,
            udp.params,
            seed,
        )
        self.calls += 1
        for i in np.flatnonzero((x != x0).any(axis=1)):
            pop.set_xf(int(i), x[i], [f[i]])
        pop.problem.increment_fevals(int(used))
        return pop

    def set_seed(self, seed: int):
        self.seed = int(seed)
        self.calls = 0

    def get_name(self):
        return "differential evolution, DE/rand/1/exp, compiled with the fitness (leverage)"

    def get_extra_info(self):
        return f"generations {self.gen}, weight {self.weight}, crossover {self.crossover}"


def warm_up(udp, x):
    """Load (or compile) the evolution kernel by one generation of 4 copies of x."""
    x = np.asarray(x, dtype=float)
    xs = np.repeat(x[None, :], 4, axis=0)
    f = np.full(4, np.inf)
    diffevo.evolve(
        xs, f, 1, WEIGHT, CROSSOVER, udp.lower, udp.upper, udp.lower, udp.upper, udp.params, 1
    )
