"""The global search: a pygmo archipelago of islands, ring migration, a local polish.

Migration is done here, between evolutions, in a fixed order (the champion of
island i replaces the worst individual of island i+1 when better), so the same
seed and island count always give the same champion whatever the process timing.
An evolver (``leverage.islands``) evolves the islands between migrations: in turn in
this process, in worker processes, or on ipyparallel engines; all give the same
answer. ``state`` holds everything that moves (populations, algorithms with their
random-engine state, counts, history), which is what ``leverage.checkpoint`` saves.
With worker processes the next evolution starts as soon as migration is done, so the
log row (and the runner's checkpoint) of this one are made while the workers evolve;
``state`` stays that of the evolution just finished until the next ``step``.
"""

import time
from dataclasses import dataclass, field

import numpy as np
import pygmo as pg

from leverage.core import layout as L
from leverage.search.islands import SerialIslands, evolve_ahead, evolved
from leverage.search.udp import LeveragingUDP

ALGORITHM_NOTES = {
    "sade": "self-adaptive differential evolution (pygmo sade, jDE variant 2)",
    "de": "differential evolution (pygmo de, rand/1/exp)",
    "de1220": "self-adaptive differential evolution with adaptive variants (pygmo de1220)",
    "pso": "particle swarm optimisation (pygmo pso)",
    "cmaes": "covariance matrix adaptation evolution strategy (pygmo cmaes)",
}


def island_seed(seed: int, island: int) -> int:
    """The seed of island ``island``'s population and algorithm in a run with ``seed``
    (fits pygmo's 32-bit seed for every seed and island count the schema allows)."""
    return seed * 1000 + island


def make_algorithm(name: str, generations: int, seed: int) -> pg.algorithm:
    """A pygmo algorithm running ``generations`` generations per call to evolve."""
    if name == "sade":
        uda = pg.sade(gen=generations, variant=2, variant_adptv=1, ftol=0, xtol=0, seed=seed)
    elif name == "de":
        uda = pg.de(gen=generations, ftol=0, xtol=0, seed=seed)
    elif name == "de1220":
        uda = pg.de1220(gen=generations, ftol=0, xtol=0, seed=seed)
    elif name == "pso":
        uda = pg.pso(gen=generations, seed=seed)
    elif name == "cmaes":
        uda = pg.cmaes(gen=generations, ftol=0, xtol=0, force_bounds=True, seed=seed)
    else:
        raise ValueError(f"unknown algorithm {name!r}; known: {', '.join(ALGORITHM_NOTES)}")
    return pg.algorithm(uda)


def make_polisher(name: str, seed: int):
    """Local optimiser for the champion (None for 'none')."""
    if name == "none":
        return None
    if name == "bobyqa":
        uda = pg.nlopt("bobyqa")
    elif name == "slsqp":
        uda = pg.nlopt("slsqp")
    elif name == "mbh":
        inner = pg.nlopt("bobyqa")
        inner.xtol_rel = 1e-10
        inner.maxeval = 2000
        return pg.algorithm(pg.mbh(inner, stop=5, perturb=0.01, seed=seed))
    else:
        raise ValueError(f"unknown polish {name!r}")
    uda.xtol_rel = 1e-12
    uda.ftol_rel = 1e-14
    uda.maxeval = 4000
    return pg.algorithm(uda)


@dataclass
class SearchSettings:
    algorithm: str
    islands: int
    population: int
    generations: int
    generations_per_migration: int
    seed: int
    polish: str

    @property
    def evolutions(self) -> int:
        return max(1, -(-self.generations // self.generations_per_migration))


@dataclass
class IslandRecord:
    """One convergence-log row."""

    evolution: int
    island: str
    generations: int
    evaluations: int
    wall_time_s: float
    best_objective: float
    median_objective: float
    best_violation: float


@dataclass
class SearchState:
    populations: list
    algorithms: list
    evolution: int = 0
    evaluations: int = 0
    history: list = field(default_factory=list)


def min_violation(udp: LeveragingUDP, xs: np.ndarray) -> float:
    """Smallest total penalty (objective units) among the decision vectors ``xs``."""
    return float(udp.batch_details(xs)[:, L.Q_PENALTY].min())


class Search:
    """Runs the archipelago step by step so a caller can log, show and stop it."""

    def __init__(self, udp: LeveragingUDP, settings: SearchSettings, evolver=None):
        self.udp = udp
        self.settings = settings
        self.evolver = evolver or SerialIslands()
        self.problem = pg.problem(udp)
        s = settings
        pops = [
            pg.population(self.problem, s.population, seed=island_seed(s.seed, i))
            for i in range(s.islands)
        ]
        algos = [
            make_algorithm(s.algorithm, s.generations_per_migration, island_seed(s.seed, i))
            for i in range(s.islands)
        ]
        self.state = SearchState(
            populations=pops,
            algorithms=algos,
            evaluations=sum(p.problem.get_fevals() for p in pops),
        )
        self.start_time = time.monotonic()
        self._submitted = False  # the next evolution is running in the workers

    @property
    def done(self) -> bool:
        return self.state.evolution >= self.settings.evolutions

    def step(self) -> list:
        """One evolution on every island, then ring migration; returns log rows."""
        st, s = self.state, self.settings
        submitted, self._submitted = self._submitted, False
        st.algorithms, st.populations = evolved(
            self.evolver, submitted, st.algorithms, st.populations
        )
        self._migrate()
        st.evolution += 1
        if not self.done:
            self._submitted = evolve_ahead(self.evolver, st.algorithms, st.populations)
        elapsed = time.monotonic() - self.start_time
        rows = []
        evals = 0
        for i, pop in enumerate(st.populations):
            f = pop.get_f()[:, 0]
            evals += pop.problem.get_fevals()
            rows.append(
                IslandRecord(
                    evolution=st.evolution,
                    island=str(i),
                    generations=st.evolution * s.generations_per_migration,
                    evaluations=pop.problem.get_fevals(),
                    wall_time_s=elapsed,
                    best_objective=float(f.min()),
                    median_objective=float(np.median(f)),
                    best_violation=min_violation(self.udp, pop.get_x()),
                )
            )
        st.evaluations = evals
        st.history.extend(rows)
        return rows

    def _migrate(self):
        pops = self.state.populations
        n = len(pops)
        if n < 2:
            return
        migrants = [(p.champion_x.copy(), p.champion_f.copy()) for p in pops]
        for i in range(n):
            dest = pops[(i + 1) % n]
            x, f = migrants[i]
            worst = int(np.argmax(dest.get_f()[:, 0]))
            if f[0] < dest.get_f()[worst, 0]:
                dest.set_xf(worst, x, f)

    def champion(self) -> tuple[np.ndarray, np.ndarray]:
        """Best (x, f) over all islands so far."""
        best = min(self.state.populations, key=lambda p: p.champion_f[0])
        return best.champion_x.copy(), best.champion_f.copy()

    def polish(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, int]:
        """Local polish of x; returns (x, f, evaluations used). Keeps x if no better."""
        algo = make_polisher(self.settings.polish, self.settings.seed)
        f0 = np.asarray(self.problem.fitness(x))
        if algo is None:
            return x, f0, 0
        pop = pg.population(self.problem)
        pop.push_back(x, f0)
        before = pop.problem.get_fevals()
        pop = algo.evolve(pop)
        used = pop.problem.get_fevals() - before
        if pop.champion_f[0] < f0[0]:
            return pop.champion_x.copy(), pop.champion_f.copy(), used
        return x, f0, used
