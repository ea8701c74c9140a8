"""The global search: a pygmo archipelago of islands, ring migration, a local polish.

Migration is done here, between evolutions, in a fixed order (the champion of
island i replaces the worst individual of island i+1 when better), so the same
seed and island count always give the same champion whatever the process timing.
An evolver (``leverage.islands``) evolves the islands between migrations: in turn in
this process, in worker processes, or on ipyparallel engines; all give the same
answer. ``state`` holds everything that moves (populations, algorithms with their
random-engine state, counts, history, the champions of finished restart epochs),
which is what ``leverage.checkpoint`` saves. The islands see a slightly widened box
(``BOUND_WIDENING``), start again from new populations in epochs that each search one
sector of the launch direction (``RESTARTS``), and score points with a gentler penalty
than the problem's (``SCOUT_PENALTY_FACTOR``); champions and log rows are scored with
the problem's own; a short DE around the best champion (``search_near``), then every
epoch's champion is polished.
With worker processes the next evolution starts as soon as migration is done, so the
log row (and the runner's checkpoint) of this one are made while the workers evolve;
``state`` stays that of the evolution just finished until the next ``step``.
"""

import time
from dataclasses import dataclass, field

import numpy as np
import pygmo as pg

from leverage.core import layout as L
from leverage.core import trajectory
from leverage.record.design import feasible
from leverage.search import compiled_de, compiled_nsga2
from leverage.search.islands import SerialIslands, evolve_ahead, evolved
from leverage.search.udp import LeveragingUDP, WidenedUDP

ALGORITHM_NOTES = {
    "sade": "self-adaptive differential evolution (pygmo sade, jDE variant 2)",
    "de": "differential evolution, DE/rand/1/exp, compiled with the fitness (leverage)",
    "pygmo_de": "differential evolution (pygmo de, rand/1/exp)",
    "de1220": "self-adaptive differential evolution with adaptive variants (pygmo de1220)",
    "pso": "particle swarm optimisation (pygmo pso)",
    "cmaes": "covariance matrix adaptation evolution strategy (pygmo cmaes)",
}


def island_seed(seed: int, island: int) -> int:
    """The seed of island ``island``'s population and algorithm in a run with ``seed``
    (fits pygmo's 32-bit seed for every seed and island count the schema allows)."""
    return seed * 1000 + island


# The default search (benchmarks/README.md, "Compiled search, end of round", 20
# seeds on six reference problems) is DE/rand/1/exp compiled with the fitness
# (``compiled_de``) with the two measures below; each was measured against the
# default before it and kept because it was at least as good on every problem.
#
# The islands search a box widened by this fraction of each variable's range on both
# sides, points clipped to the true bounds before the kernel (``udp.WidenedUDP``); the
# champion is recorded and polished clipped, inside the true bounds. DE re-samples a
# trial component that leaves the box, so an optimum on a bound (earth-gain's launch
# v-infinity on its 1 km/s floor) was rarely reached: pygmo's sade went from 8 to 17
# of 20 seeds on earth-gain with 0.03. 0: the true box.
BOUND_WIDENING = 0.03
# The generations are cut into equal epochs of at least MIN_EPOCH_GENERATIONS and of
# at least two evolutions, at most RESTARTS of them. Epoch j of k searches sector j of k
# equal sectors of the launch in-plane angle (the problem's own range; each sector
# widened by BOUND_WIDENING of the whole range on both sides, so an optimum on a sector
# edge lies inside two); at its end the champion is kept aside and every island starts
# again from a new random population (seeds from ``restart_seed``) in the next sector.
# The direction of launch against the body's velocity is what sets the loop's family
# (a longer or shorter period than the body's, leaving inward or outward): on
# inclination-raise.toml the four families 0.683, 0.7225, 0.762 and 0.834 km/s sit at
# in-plane angles near 111, -80, -107 and 84 deg, and a search over the whole circle
# settled in the best one in about one epoch in ten whatever its length; one sector per
# epoch gives each family its own epoch (benchmarks/README.md, "Launch-direction
# sectors"). Short runs, such as the tests' 60-100 generations, run as one epoch over the
# whole range.
RESTARTS = 4
MIN_EPOCH_GENERATIONS = 1000
SECTOR_SLOT = L.X_LAUNCH_IN_PLANE_ANGLE_DEG

# Penalty continuation (the sequential unconstrained minimisation of Fiacco and
# McCormick, 1968): the islands score points with the problem's penalty weight times
# SCOUT_PENALTY_FACTOR in the first half of each epoch's evolutions and times
# SETTLE_PENALTY_FACTOR in the second half; the champion, the log rows and the polish use
# the problem's own weight. An optimum on an active limit is the bottom of a V-shaped
# valley under a steep penalty (inclination-raise: 0.02 deg past its inclination limit
# costs 0.16 km/s at the default weight 10 against 0.03 km/s for the same step inside),
# which DE crawls along slowly; a gentle penalty lets the population settle in its
# family and come to the limit from both sides. Too gentle a penalty to the end leaves
# a point past the limit that the polish cannot bring back (demo: 8 m/s short), hence
# the second half. Measured on the seven reference problems (benchmarks/README.md).
SCOUT_PENALTY_FACTOR = 0.03
SETTLE_PENALTY_FACTOR = 0.06


def epoch_count(settings) -> int:
    """How many epochs a search with ``settings`` runs."""
    k = min(RESTARTS, settings.generations // MIN_EPOCH_GENERATIONS, settings.evolutions // 2)
    return max(1, k)


def epoch_start(settings, epoch: int) -> int:
    """The first evolution (0-based) of ``epoch``: the evolutions are shared out as
    evenly as they go, every epoch getting at least two."""
    return -(-epoch * settings.evolutions // epoch_count(settings))


def phase_of(settings, evolution: int) -> tuple[int, float]:
    """(epoch, penalty factor) of the evolution numbered ``evolution`` (0: the first):
    SCOUT_PENALTY_FACTOR in the first half of its epoch, SETTLE_PENALTY_FACTOR after; a
    search of one evolution has no halves and keeps the problem's own weight (1.0)."""
    epoch = min(evolution, settings.evolutions - 1) * epoch_count(settings) // settings.evolutions
    start, end = epoch_start(settings, epoch), epoch_start(settings, epoch + 1)
    if end - start < 2:
        return epoch, 1.0
    scouting = evolution - start < (end - start) // 2
    return epoch, SCOUT_PENALTY_FACTOR if scouting else SETTLE_PENALTY_FACTOR


def sector(lower: float, upper: float, epoch: int, epochs: int, widen: float):
    """(low, high) of sector ``epoch`` of ``epochs`` equal sectors of [lower, upper],
    widened by ``widen`` of the whole range on both sides and kept inside the range
    widened so; one sector: the whole widened range."""
    span = upper - lower
    low = lower + span * epoch / epochs - widen * span
    high = lower + span * (epoch + 1) / epochs + widen * span
    return max(low, lower - widen * span), min(high, upper + widen * span)


def restart_seed(seed: int, island: int, epoch: int) -> int:
    """The seed of island ``island`` in restart epoch ``epoch`` (0: ``island_seed``)."""
    return (island_seed(seed, island) + epoch * 2_654_435_761) % 2**32


def make_algorithm(name: str, generations: int, seed: int) -> pg.algorithm:
    """A pygmo algorithm running ``generations`` generations per call to evolve."""
    if name == "sade":
        uda = pg.sade(gen=generations, variant=2, variant_adptv=1, ftol=0, xtol=0, seed=seed)
    elif name == "de":
        uda = compiled_de.CompiledDE(gen=generations, seed=seed)
    elif name == "pygmo_de":
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


# The polish minimises the penalised objective, whose penalty is zero on a limit and
# finite past it: it can settle on an active limit with a margin of about -1e-14 (demo
# seed 12 and earth-vinf-dla seed 2 of the 2026-12-02 runs: the best objective,
# reported infeasible), or, where two limits are active at once, a few 1e-6 outside.
# When the polished design fails a limit, a second polish starts from it with every
# limit moved inward by POLISH_INSIDE of its value (at least that much of its kernel
# unit: km, km^2/s^2, rad, km/s, s), so it lands strictly inside; if that one still
# fails a limit (two active limits whose penalised optimum lies outside), a third with
# the penalty weight also times POLISH_WEIGHT_FACTOR (steep: BOBYQA stops up to ~0.1
# m/s short there, so it comes last). A design is kept when it meets every limit.
# The record's feasibility rule stays exact.
POLISH_INSIDE = 1e-9

# Before the polish, a short DE around the best champion (``Search.search_near``):
# +-2% of each range, 32 members, 300 generations (9,600 evaluations, 2% of the
# default search's).
NEAR_FRACTION = 0.02
NEAR_POPULATION = 32
NEAR_GENERATIONS = 300
POLISH_WEIGHT_FACTOR = 1000.0


def inside_limits(
    params: np.ndarray, inside: float = POLISH_INSIDE, weight_factor: float = POLISH_WEIGHT_FACTOR
) -> np.ndarray:
    """A copy of ``params`` with every limit moved inward by ``inside`` times its
    magnitude (at least ``inside`` in its kernel unit; unset limits, inf or 0, stay)
    and the penalty weight times ``weight_factor``."""
    p = np.array(params, dtype=float, copy=True)
    p[L.P_PENALTY_WEIGHT] *= weight_factor
    L.tighten_limits(
        p,
        {
            slot: inside * max(1.0, abs(p[slot])) if np.isfinite(p[slot]) else 0.0
            for slot in L.LIMIT_INWARD
        },
    )
    return p


def algorithm_warm_up(name: str):
    """A function (udp, x) that loads the compiled kernel of algorithm ``name``, or
    None when the algorithm has none (pygmo's own run in pygmo)."""
    return {"de": compiled_de.warm_up, "nsga2": compiled_nsga2.warm_up}.get(name)


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
    kept: list = field(default_factory=list)  # (x, f) champions of finished restart epochs


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
        self._island_problems = {}  # (epoch, penalty factor) -> pygmo problem
        # Log rows are scored on this thread: numba's OpenMP threads must not start in a
        # process that may fork workers later (a sweep's worker, a test process).
        self._scorer = udp.with_one_thread()
        pops, algos = self._start_islands(0)
        self.state = SearchState(
            populations=pops,
            algorithms=algos,
            evaluations=sum(p.problem.get_fevals() for p in pops),
        )
        self.start_time = time.monotonic()
        self._submitted = False  # the next evolution is running in the workers

    def epoch_sectors_deg(self) -> list:
        """[low, high] of the launch in-plane angle (deg) each epoch searches, in order:
        its sector widened (``sector``), inside the problem's range (the search box may
        reach past it; such points are clipped to it)."""
        lo, hi = self.udp.lower[SECTOR_SLOT], self.udp.upper[SECTOR_SLOT]
        boxes = (self._sector_box(j) for j in range(epoch_count(self.settings)))
        return [[float(max(a, lo)), float(min(b, hi))] for a, b in boxes]

    def _sector_box(self, epoch: int) -> tuple[float, float]:
        """The search box of the launch in-plane angle in ``epoch`` (``sector``)."""
        lo, hi = self.udp.lower[SECTOR_SLOT], self.udp.upper[SECTOR_SLOT]
        return sector(lo, hi, epoch, epoch_count(self.settings), BOUND_WIDENING)

    def island_problem(self, epoch: int, factor: float) -> pg.problem:
        """The islands' problem in ``epoch``: the widened box with the launch in-plane
        angle narrowed to the epoch's sector, the penalty weight times ``factor``."""
        key = (epoch, factor)
        if key not in self._island_problems:
            u = WidenedUDP.around(self.udp, BOUND_WIDENING, factor)
            u = u.narrowed(SECTOR_SLOT, *self._sector_box(epoch))
            self._island_problems[key] = pg.problem(u)
        return self._island_problems[key]

    def _start_islands(self, epoch: int):
        s = self.settings
        seeds = [restart_seed(s.seed, i, epoch) for i in range(s.islands)]
        problem = self.island_problem(*phase_of(s, epoch_start(s, epoch)))
        pops = [pg.population(problem, s.population, seed=seeds[i]) for i in range(s.islands)]
        algos = [make_algorithm(s.algorithm, s.generations_per_migration, k) for k in seeds]
        return pops, algos

    def _next_phase(self):
        """Before the next evolution: new populations in the next sector when an epoch
        ends, or the same members scored with the next penalty factor."""
        st, s = self.state, self.settings
        if st.evolution >= s.evolutions:
            return
        epoch, factor = phase_of(s, st.evolution)
        last_epoch, last_factor = phase_of(s, st.evolution - 1)
        if epoch != last_epoch:
            st.kept.append(min(self._islands_best(), key=lambda c: c[1][0]))
            done = sum(p.problem.get_fevals() for p in st.populations)
            st.populations, st.algorithms = self._start_islands(epoch)
            st.restart_evaluations = getattr(st, "restart_evaluations", 0) + done
        elif factor != last_factor:
            st.populations = [self._rescored(pop, epoch, factor) for pop in st.populations]

    def _rescored(self, pop, epoch: int, factor: float) -> pg.population:
        """``pop``'s members in a population of the (epoch, factor) problem, scored in
        one compiled batch on this thread (through pygmo, point by point, 20 us a
        point); its evaluation count goes on from ``pop``'s."""
        new = pg.population(self.island_problem(epoch, factor))
        u = new.problem.extract(WidenedUDP)
        xs = pop.get_x()
        fs = trajectory.batch_fitness_one_thread(u.clip(xs), u.params)
        for x, f in zip(xs, fs):
            new.push_back(x, f)
        new.problem.increment_fevals(int(pop.problem.get_fevals()) + len(xs))
        return new

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
        finished, carried = st.populations, getattr(st, "restart_evaluations", 0)
        # Before the next evolution is handed to the workers: a restart or a new
        # penalty factor replaces the populations that evolution must start from.
        self._next_phase()
        if not self.done:
            self._submitted = evolve_ahead(self.evolver, st.algorithms, st.populations)
        elapsed = time.monotonic() - self.start_time
        rows = []
        evals = 0
        for i, pop in enumerate(finished):
            xs = self.udp.clip(pop.get_x())
            f = self._scorer.batch_fitness(xs)  # the problem's own penalty weight
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
                    best_violation=min_violation(self.udp, xs),
                )
            )
        st.evaluations = evals + carried
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

    def candidates(self) -> list:
        """(x, f) of each finished epoch's champion and of each island's now, f scored
        with the problem's own penalty weight, x inside the bounds."""
        kept = [(x.copy(), f.copy()) for x, f in getattr(self.state, "kept", [])]
        return kept + self._islands_best()

    def _islands_best(self) -> list:
        """(x, f) of each island's champion, x clipped to the bounds, f with the
        problem's own penalty weight."""
        out = []
        for pop in self.state.populations:
            x = self.udp.clip(pop.champion_x)
            out.append((x, np.asarray(self.problem.fitness(x))))
        return out

    def champion(self) -> tuple[np.ndarray, np.ndarray]:
        """Best (x, f) so far, f with the problem's own penalty weight."""
        x, f = min(self.candidates(), key=lambda c: c[1][0])
        return x.copy(), f.copy()

    def polish_candidates(self) -> tuple[np.ndarray, np.ndarray, int]:
        """Polish every epoch's champion (``candidates``: each epoch searched its own
        sector, so each may sit in another family) and the best one's ``search_near``
        champion; returns the best polished (x, f) that meets every limit (else the best
        polished) and the evaluations used (the short DE's included)."""
        best, used = None, 0
        seen = []
        starts = [x for x, _ in sorted(self.candidates(), key=lambda c: c[1][0])]
        if self.settings.polish != "none":
            near, used = self.search_near(starts[0])
            starts.insert(1, near)
        for x in starts:
            if any(np.array_equal(x, y) for y in seen):
                continue  # migration copies a champion to the next island
            seen.append(x)
            x, f, more = self.polish(x)
            used += more
            key = (not self._meets_limits(x), f[0])
            if best is None or key < best[0]:
                best = (key, x, f)
        return best[1], best[2], used

    def search_near(self, x: np.ndarray) -> tuple[np.ndarray, int]:
        """A short DE in a box of +-NEAR_FRACTION of each range around ``x`` (inside the
        bounds; NEAR_POPULATION members, x one of them, NEAR_GENERATIONS generations)
        with the settle phase's penalty; returns its champion (inside the bounds) and
        the evaluations used. BOBYQA alone stops in the nearest dip of a valley that
        runs along an active limit: on inclination-raise.toml a champion 1.4 m/s above
        the family's bottom (seed 5) stayed there, and reached it from this one."""
        u = WidenedUDP.around(self.udp, 0.0, SETTLE_PENALTY_FACTOR)
        span = self.udp.upper - self.udp.lower
        u.box_lower = np.maximum(x - NEAR_FRACTION * span, self.udp.lower)
        u.box_upper = np.minimum(x + NEAR_FRACTION * span, self.udp.upper)
        seed = restart_seed(self.settings.seed, 0, RESTARTS + 1)
        pop = pg.population(pg.problem(u), NEAR_POPULATION - 1, seed=seed)
        pop.push_back(x)
        pop = make_algorithm("de", NEAR_GENERATIONS, seed).evolve(pop)
        return u.clip(pop.champion_x), int(pop.problem.get_fevals())

    def polish(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, int]:
        """Local polish of x; returns (x, f, evaluations used). Keeps x if no better.
        A polished design that fails a limit is polished again inside the limits (see
        ``POLISH_INSIDE``) and replaced by the first such design that meets them all."""
        x, f, used = self._polish_on(self.problem, x)
        if self.settings.polish == "none" or self._meets_limits(x):
            return x, f, used
        u = self.udp
        for factor in (1.0, POLISH_WEIGHT_FACTOR):
            params = inside_limits(u.params, POLISH_INSIDE, factor)
            inside = LeveragingUDP(params, u.lower, u.upper, u.n_obj, u.name)
            x2, _, more = self._polish_on(pg.problem(inside), x)
            used += more
            if self._meets_limits(x2):
                return x2, np.asarray(self.problem.fitness(x2)), used
        return x, f, used

    def _meets_limits(self, x) -> bool:
        return feasible(self.udp.details(x))

    def _polish_on(self, problem, x):
        algo = make_polisher(self.settings.polish, self.settings.seed)
        f0 = np.asarray(problem.fitness(x))
        if algo is None:
            return x, f0, 0
        pop = pg.population(problem)
        pop.push_back(x, f0)
        before = pop.problem.get_fevals()
        pop = algo.evolve(pop)
        used = pop.problem.get_fevals() - before
        if pop.champion_f[0] < f0[0]:
            return pop.champion_x.copy(), pop.champion_f.copy(), used
        return x, f0, used
