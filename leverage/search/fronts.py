"""Trade fronts: multi-objective search with leverage's compiled NSGA-II (``nsga2``, the
default) or pygmo's nsga2 (``pygmo_nsga2``), moead (moead_gen) or nspso.

``FrontSearch`` has the interface of ``search.Search`` (``udp``, ``settings``,
``state``, ``start_time``; ``done``, ``step()``, ``champion()``, ``polish(x)``) so the
runner drives either. Each island is one population evolved with pygmo's batch fitness
evaluator (``pygmo.bfe`` calling the UDP's ``batch_fitness``); islands are independent
(no migration) and differ by seed. Where they evolve is the evolver's choice
(``leverage.search.islands``), as for a single objective: in worker processes (or on
engines) each island evolves on one thread, the batches evaluated on that thread, and
the workers evolve their islands from the first evolution to the last without waiting
for this process between evolutions (``islands.evolve_on``);
in this process (``SerialIslands``: one island or one worker) the islands evolve in
turn and each batch is spread over the cores (numba-parallel ``batch_fitness``).
Either way the same seed gives the same front: a batch's values do not depend on the
thread that computes them, and each island's algorithm carries its random state.

After every evolution the feasible members (every limit margin >= 0) of all islands,
and with the compiled NSGA-II the feasible non-dominated designs among every
generation's children (``CompiledNSGA2.take_met``), are merged into an archive
holding only mutually non-dominated designs (Kung et al.'s sweep for two objectives,
pygmo's fast non-dominated sorting for more). Its hypervolume against a fixed
reference point (pygmo.hypervolume; the reference is the DSM budget, the arrival
v-infinity limit, or zero gain / inclination / mass) measures how the front
converges. The design written up in full is the front's knee: the member farthest
from the hyperplane through the front's extreme members, in objectives scaled to
[0, 1] over the front (Das 1999, "On characterizing the 'knee' of the Pareto curve
based on normal-boundary intersection", Structural Optimization 18; from memory).
"""

import csv
import io
import math
import time
from dataclasses import dataclass, field, fields

import numpy as np
import pygmo as pg

from leverage.core import layout as L
from leverage.fileio import write_atomic
from leverage.problem.load import check_algorithm
from leverage.record.design import DERIVED, clean, feasible_rows
from leverage.search.compiled_nsga2 import CompiledNSGA2
from leverage.search.islands import SerialIslands, evolve_on, evolved
from leverage.search.single import IslandRecord, SearchState, island_seed

FRONT_ALGORITHM_NOTES = {
    "nsga2": "non-dominated sorting genetic algorithm II, every generation of an evolution "
    "in one compiled call (leverage.core.nsga2)",
    "pygmo_nsga2": "non-dominated sorting genetic algorithm II (pygmo nsga2, batch evaluation)",
    "moead": "decomposition-based evolutionary algorithm, DE variant (pygmo moead_gen, "
    "batch evaluation)",
    "nspso": "non-dominated sorting particle swarm (pygmo nspso, batch evaluation)",
}
MAX_ARCHIVE = 300  # front members kept; beyond this the most crowded are dropped

# objective code -> (column name of the minimised quantity, unit)
OBJECTIVES = {
    L.OBJ_TOTAL_DV: ("total_dv", "km/s"),
    L.OBJ_GAIN: ("minus_gain", "km/s"),
    L.OBJ_INCLINATION: ("minus_inclination", "deg"),
    L.OBJ_ARRIVAL_VINF: ("arrival_vinf", "km/s"),
    L.OBJ_MASS: ("minus_delivered_mass", "t"),
}


def unit_slug(unit: str) -> str:
    """A unit as a column-name suffix: 'km^2/s^2' -> 'km2_s2', 'days TDB' -> 'days_tdb'."""
    return unit.replace("^", "").replace("/", "_").replace(" ", "_").lower()


def column(name: str, unit: str) -> str:
    slug = unit_slug(unit)
    return f"{name}_{slug}" if slug else name


def hypervolume_unit(codes) -> str:
    """Unit of the hypervolume of objectives ``codes``: the product of their units,
    "(km/s)^2" for two in km/s, "(km/s)(deg)" for km/s and deg."""
    units = [OBJECTIVES[c][1] for c in codes]
    if len(set(units)) == 1:
        return f"({units[0]})^{len(units)}"
    return "".join(f"({u})" for u in units)


def search_class(compiled, settings):
    """Search for a single objective, FrontSearch for several; refuses a mismatched
    --algorithm in one line."""
    from leverage.search.single import Search

    front = compiled.n_obj > 1
    check_algorithm("search settings", "algorithm", settings.algorithm, front, settings.population)
    return FrontSearch if front else Search


def make_front_algorithm(
    name: str, generations: int, seed: int, n_obj: int, population: int
) -> pg.algorithm:
    """A pygmo multi-objective algorithm: the compiled NSGA-II, or one of pygmo's with
    batch fitness evaluation."""
    if name == "nsga2":
        return pg.algorithm(CompiledNSGA2(gen=generations, seed=seed))
    if name == "pygmo_nsga2":
        uda = pg.nsga2(gen=generations, seed=seed)
    elif name == "moead":
        # "grid" weights need special sizes beyond two objectives; low discrepancy does not.
        weights = "grid" if n_obj == 2 else "low discrepancy"
        uda = pg.moead_gen(
            gen=generations,
            weight_generation=weights,
            neighbours=max(2, min(20, population - 1)),
            seed=seed,
        )
    elif name == "nspso":
        uda = pg.nspso(gen=generations, seed=seed)
    else:
        raise ValueError(f"unknown algorithm {name!r}; known: {', '.join(FRONT_ALGORITHM_NOTES)}")
    uda.set_bfe(pg.bfe())
    return pg.algorithm(uda)


def non_dominated(f: np.ndarray) -> np.ndarray:
    """Indices of the rows of f (minimised) that no other row dominates, duplicates
    dropped (pygmo fast non-dominated sorting)."""
    if len(f) == 0:
        return np.zeros(0, dtype=int)
    _, first = np.unique(np.round(f, 12), axis=0, return_index=True)
    first = np.sort(first)
    if len(first) == 1:
        return first
    g = f[first]
    if g.shape[1] == 2:
        # Two objectives: sorted by the first (then the second), a row is undominated
        # exactly when its second is below every earlier row's (Kung, Luccio and
        # Preparata 1975); pygmo's full sort of every front cost the front search's
        # parent ~5 ms an evolution (benchmarks/README.md).
        order = np.lexsort((g[:, 1], g[:, 0]))
        second = g[order, 1]
        earlier_best = np.concatenate(([np.inf], np.minimum.accumulate(second)[:-1]))
        return first[np.sort(order[second < earlier_best])]
    fronts = pg.fast_non_dominated_sorting(g)[0]
    return first[np.sort(np.asarray(fronts[0], dtype=int))]


def most_spread(f: np.ndarray, n: int) -> np.ndarray:
    """Indices (ascending) of the n members of the non-dominated set f with the largest
    crowding distance (pygmo.crowding_distance; Deb et al. 2002, Sec. III-B; its
    extreme members first), as pygmo.select_best_N_mo picks from one front, without
    its sort of the whole set into fronts (5-12 ms a call on 1,000-1,500 members
    against 0.15 ms, measured)."""
    crowd = pg.crowding_distance(f)
    return np.sort(np.argsort(-crowd, kind="stable")[:n])


def taken_met(algorithms) -> list:
    """(x, f) of the feasible non-dominated designs each compiled NSGA-II island met in
    its last evolution (``CompiledNSGA2.take_met``), taken out of the algorithms; none
    from pygmo's algorithms."""
    out = []
    for algorithm in algorithms:
        uda = algorithm.extract(CompiledNSGA2)
        met = uda.take_met() if uda is not None else None
        if met is not None and len(met[1]):
            out.append(met)
    return out


def reference_point(params: np.ndarray) -> np.ndarray:
    """Fixed hypervolume reference of a front problem, in objective units."""
    ref = []
    for k in range(int(params[L.P_N_OBJ])):
        code = int(params[L.P_OBJ_CODES + k])
        if code == L.OBJ_TOTAL_DV:
            ref.append(params[L.P_DSM_BUDGET_KMS])
        elif code == L.OBJ_ARRIVAL_VINF:
            ref.append(params[L.P_ARRIVAL_VINF_MAX_KMS])
        else:
            ref.append(0.0)  # zero gain, inclination or delivered mass
    return np.array(ref, dtype=float)


def hypervolume(f: np.ndarray, ref: np.ndarray) -> float:
    """Hypervolume (objective units multiplied) dominated by the rows of f that are
    strictly better than ref in every objective; 0 if none is."""
    if len(f) == 0:
        return 0.0
    inside = f[np.all(f < ref, axis=1)]
    if len(inside) == 0:
        return 0.0
    return float(pg.hypervolume(inside).compute(ref))


def knee(f: np.ndarray) -> tuple[int, float]:
    """(row, distance) of the member of a non-dominated set f farthest below the
    hyperplane through its extreme rows, objectives scaled to [0, 1] over the set
    (Das 1999; see module docstring). A distance near 0 means a nearly flat front,
    on which no member stands out as the knee."""
    if len(f) <= 2:
        return 0, 0.0
    lo, hi = f.min(axis=0), f.max(axis=0)
    span = np.where(hi > lo, hi - lo, 1.0)
    g = (f - lo) / span
    extremes = g[np.argmin(f, axis=0)]  # one extreme member per objective
    try:
        normal = np.linalg.solve(extremes, np.ones(f.shape[1]))  # plane: normal . g = 1
    except np.linalg.LinAlgError:
        normal = np.ones(f.shape[1])
    if not np.all(np.isfinite(normal)) or not np.any(normal):
        normal = np.ones(f.shape[1])
    distance = (1.0 - g @ normal) / np.linalg.norm(normal)
    k = int(np.argmax(distance))
    return k, float(distance[k])


@dataclass
class FrontRecord(IslandRecord):
    """One convergence-log row of a front search: an island's row plus hypervolume.

    Island "front" rows carry the archive (all islands' feasible non-dominated set)."""

    hypervolume: float


@dataclass
class FrontState(SearchState):
    """SearchState plus the archive of feasible, mutually non-dominated designs."""

    archive_x: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    archive_f: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))


class FrontSearch:
    """Islands of a pygmo multi-objective algorithm and the front archive."""

    log_columns = [f.name for f in fields(FrontRecord)]

    def __init__(self, udp, settings, evolver=None):
        self.udp = udp
        self.settings = settings
        self.evolver = evolver or SerialIslands()
        in_process = isinstance(self.evolver, SerialIslands)
        # Islands elsewhere evolve on one thread each; and a parent that forks worker
        # processes must not have started numba's OpenMP threads (workers.py).
        self.problem = pg.problem(udp if in_process else udp.with_one_thread())
        self.where = "this process (batch evaluation)" if in_process else self.evolver.name
        s = settings
        n_obj = udp.get_nobj()
        bfe = pg.bfe()
        pops = [
            pg.population(self.problem, s.population, b=bfe, seed=island_seed(s.seed, i))
            for i in range(s.islands)
        ]
        algos = [
            make_front_algorithm(
                s.algorithm,
                s.generations_per_migration,
                island_seed(s.seed, i),
                n_obj,
                s.population,
            )
            for i in range(s.islands)
        ]
        self.state = FrontState(
            populations=pops,
            algorithms=algos,
            evaluations=sum(p.problem.get_fevals() for p in pops),
            archive_x=np.zeros((0, len(udp.lower))),
            archive_f=np.zeros((0, n_obj)),
        )
        self.reference = reference_point(udp.params)
        self.start_time = time.monotonic()
        self._submitted = False  # the workers are evolving the islands to the end
        self._knee_of = (None, 0)  # (archive_f, its knee row): champion() asks often
        self._update_archive()

    @property
    def done(self) -> bool:
        return self.state.evolution >= self.settings.evolutions

    def _members(self, pop):
        """(feasible x, their f, smallest penalty) of a population: one details pass."""
        xs, fs = pop.get_x(), pop.get_f()
        qs = self.udp.batch_details(xs)
        keep = feasible_rows(qs)
        return xs[keep], fs[keep], float(qs[:, L.Q_PENALTY].min())

    def _update_archive(self, members=None, met=()):
        st = self.state
        if members is None:
            members = [self._members(pop) for pop in st.populations]
        xs, fs = [st.archive_x], [st.archive_f]
        for x, f in [(x, f) for x, f, _ in members] + list(met):
            xs.append(x)
            fs.append(f)
        x, f = np.vstack(xs), np.vstack(fs)
        keep = non_dominated(f)
        x, f = x[keep], f[keep]
        if len(f) > MAX_ARCHIVE:
            best = most_spread(f, MAX_ARCHIVE)
            x, f = x[best], f[best]
        st.archive_x, st.archive_f = x, f

    def step(self) -> list:
        """One evolution of every island, then the archive; returns log rows."""
        st, s = self.state, self.settings
        if not self._submitted:  # islands never migrate: workers evolve them to the end
            left = s.evolutions - st.evolution
            self._submitted = evolve_on(self.evolver, st.algorithms, st.populations, left)
        st.algorithms, st.populations = evolved(
            self.evolver, self._submitted, st.algorithms, st.populations
        )
        st.evolution += 1
        self._submitted = self._submitted and not self.done
        met = taken_met(st.algorithms)
        # the archive and log rows are made while the workers go on evolving
        members = [self._members(pop) for pop in st.populations]
        self._update_archive(members, met)
        elapsed = time.monotonic() - self.start_time
        rows, evals = [], 0
        common = dict(
            evolution=st.evolution,
            generations=st.evolution * s.generations_per_migration,
            wall_time_s=elapsed,
        )
        for i, (pop, (_, ff, least_penalty)) in enumerate(zip(st.populations, members)):
            f = pop.get_f()[:, 0]
            evals += pop.problem.get_fevals()
            rows.append(
                FrontRecord(
                    island=str(i),
                    evaluations=pop.problem.get_fevals(),
                    best_objective=float(f.min()),
                    median_objective=float(np.median(f)),
                    best_violation=least_penalty,
                    hypervolume=hypervolume(ff[non_dominated(ff)], self.reference),
                    **common,
                )
            )
        st.evaluations = evals
        af = st.archive_f
        rows.append(
            FrontRecord(
                island="front",
                evaluations=evals,
                best_objective=float(af[:, 0].min()) if len(af) else math.nan,
                median_objective=float(np.median(af[:, 0])) if len(af) else math.nan,
                best_violation=0.0 if len(af) else min(r.best_violation for r in rows),
                hypervolume=self.hypervolume(),
                **common,
            )
        )
        st.history.extend(rows)
        return rows

    def hypervolume(self) -> float:
        return hypervolume(self.state.archive_f, self.reference)

    def headline(self) -> str:
        """The progress line's summary of the search so far: the front's size and
        hypervolume (its knee, the design written up, may jump along a flat front)."""
        history = self.state.history
        last = history[-1] if history else None
        hv = last.hypervolume if last is not None and last.island == "front" else self.hypervolume()
        unit = hypervolume_unit(self._codes())
        return f"front {len(self.state.archive_f)} designs, hypervolume {hv:.6g} {unit}"

    def _codes(self) -> list:
        """The objective codes of the problem (``core.layout`` OBJ_*), in order."""
        return [int(self.udp.params[L.P_OBJ_CODES + k]) for k in range(self.udp.get_nobj())]

    def champion(self) -> tuple[np.ndarray, np.ndarray]:
        """The knee of the archive; without feasible designs, the least-violating member."""
        st = self.state
        if len(st.archive_f):
            # called after every evolution (progress line) and at the end: one knee a set
            if self._knee_of[0] is not st.archive_f:
                self._knee_of = (st.archive_f, knee(st.archive_f)[0])
            k = self._knee_of[1]
            return st.archive_x[k].copy(), st.archive_f[k].copy()
        best = None
        for pop in st.populations:
            for x, f in zip(pop.get_x(), pop.get_f()):
                pen = self.udp.details(x)[L.Q_PENALTY]
                if best is None or pen < best[0]:
                    best = (pen, x.copy(), f.copy())
        return best[1], best[2]

    def polish(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, int]:
        """No local polish for a front member: returns x unchanged, 0 evaluations."""
        return x, np.asarray(self.problem.fitness(x)), 0

    def write_front(self, path, compiled) -> dict:
        """Write the archive as CSV (atomically); return its description for best.json.

        One row per member, sorted by the first objective: member number, knee flag,
        the minimised objectives, the decision vector (``x_<name>``) and every derived
        quantity of ``result.DERIVED``, each column named with its unit; no name repeats.
        """
        st = self.state
        codes = self._codes()
        order = np.argsort(st.archive_f[:, 0], kind="stable") if len(st.archive_f) else []
        knee_row, knee_distance = knee(st.archive_f) if len(st.archive_f) else (-1, math.nan)
        header = (
            ["member", "knee"]
            + [column("objective_" + OBJECTIVES[c][0], OBJECTIVES[c][1]) for c in codes]
            # decision names carry their units; "x_" keeps them apart from derived
            # quantities of the same name (launch_vinf_km_s, flyby_altitude_km, ...)
            + ["x_" + name for name in compiled.names]
            + [column(name, unit) for name, _, unit, _, _ in DERIVED]
        )
        assert len(set(header)) == len(header), "front.csv column names repeat"
        buf = io.StringIO()
        csv.writer(buf, lineterminator="\n").writerow(header)
        if len(order):
            qs = self.udp.batch_details(st.archive_x)
            slots = [slot for _, slot, _, _, _ in DERIVED]
            factors = np.array([factor for _, _, _, factor, _ in DERIVED])
            # one table of numbers, written with repr (the shortest text that reads back
            # the same float); row by row through csv and float() cost ~8 of 11 ms
            table = np.hstack((st.archive_f, st.archive_x, qs[:, slots] * factors))[order]
            for member, (i, row) in enumerate(zip(order, table.tolist())):
                buf.write(f"{member},{int(i == knee_row)},{','.join(map(repr, row))}\n")
        write_atomic(path, buf.getvalue())
        return {
            "file": str(getattr(path, "name", path)),
            "members": int(len(order)),
            "objectives": [column(OBJECTIVES[c][0], OBJECTIVES[c][1]) for c in codes],
            "reference_point": [float(v) for v in self.reference],
            "hypervolume": self.hypervolume(),
            "hypervolume_unit": hypervolume_unit(codes),
            "knee_member": int(list(order).index(knee_row)) if knee_row >= 0 else None,
            "knee_distance": clean(knee_distance),
        }
