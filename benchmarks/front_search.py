"""Trade fronts: the compiled NSGA-II (``nsga2``) against pygmo's (``pygmo_nsga2``).

On ``problems/trade-front.toml`` (invented), in this process, numba on one thread:

1. speed: the floor is ``trajectory.batch_fitness_one_thread`` on ``--points`` random
   points drawn uniformly inside the bounds (best of ``--repeats``). Each algorithm
   (``fronts.make_front_algorithm``, as a run makes it) evolves a population of 64,
   made with batch evaluation as ``FrontSearch`` makes it, by calls of
   ``--generations`` generations: one warm-up call, then ``--calls`` timed calls; us per
   evaluation = wall time / evaluations of the timed calls. The algorithms alternate
   ``--turns`` times, so a shared machine's load hits both alike; the figure is the
   median of the turns, and its ratio to the floor.
2. front quality at equal evaluations: for seeds 1..``--seeds``, the search
   ``leverage run problems/trade-front.toml --seed N`` makes (``runner.make_search``
   with the file's ``[search]``: 2 islands x 64 x 600 generations, evolutions of 50),
   run to the end with the islands in turn in this process (the same front as in
   worker processes, tests/search/test_checkpoint.py); the final archive's hypervolume
   (``FrontSearch.hypervolume``: reference ``fronts.reference_point``, the DSM budget
   and zero gain) and its size. Median, smallest and largest per algorithm, and how
   many seeds each wins.

``--compiled-m P`` sets the compiled one's mutation probability (default 1/variables);
``--compiled-generations N`` and ``--compiled-islands N`` its generations and islands
(compared at equal wall time instead of equal evaluations); ``--better-than H`` counts the runs whose hypervolume passes H (the
template's runs end near 2.42 or near 3.52-3.56 (km/s)^2: two loop families).

Usage: python -m benchmarks.front_search [--seeds 10] [--turns 5] [--smoke]
"""

import argparse
import statistics
import time

import numba
import numpy as np
import pygmo as pg

from benchmarks.common import ROOT, print_footer, print_header
from benchmarks.eval_cost import random_points
from leverage.core import trajectory
from leverage.problem.load import load_problem
from leverage.run.runner import make_search, settings_from
from leverage.search.compiled_nsga2 import CompiledNSGA2
from leverage.search.fronts import make_front_algorithm
from leverage.search.islands import SerialIslands
from leverage.search.single import island_seed
from leverage.search.udp import LeveragingUDP

FRONT = ROOT / "problems" / "trade-front.toml"
ALGORITHMS = ("nsga2", "pygmo_nsga2")


def floor_us(compiled, points, repeats):
    xs = random_points(compiled, points)
    trajectory.batch_fitness_one_thread(xs[:4], compiled.params)
    best = np.inf
    for _ in range(repeats):
        start = time.perf_counter()
        trajectory.batch_fitness_one_thread(xs, compiled.params)
        best = min(best, time.perf_counter() - start)
    return best / points * 1e6


def evolve_us(udp, name, generations, calls, seed):
    """us per evaluation of ``calls`` evolve calls after a warm-up call."""
    algo = make_front_algorithm(name, generations, seed, udp.get_nobj(), 64)
    pop = pg.population(pg.problem(udp), 64, b=pg.bfe(), seed=seed)
    pop = algo.evolve(pop)  # warm-up: loads the compiled code
    before = pop.problem.get_fevals()
    start = time.perf_counter()
    for _ in range(calls):
        pop = algo.evolve(pop)
    wall = time.perf_counter() - start
    return wall / (pop.problem.get_fevals() - before) * 1e6


def front_run(problem, name, seed, compiled_m, overrides, compiled_settings=None):
    """Final hypervolume, archive size and evaluations of one run's search
    (``compiled_settings``: [search] settings of the compiled one's runs only)."""
    if name == "nsga2" and compiled_settings:
        overrides = {**overrides, **compiled_settings}
    settings = settings_from(problem, {"algorithm": name, "seed": seed, **overrides})
    compiled = problem.compile()
    udp = LeveragingUDP.from_compiled(compiled, problem.name)
    search = make_search(compiled, udp, settings, SerialIslands())
    if name == "nsga2" and compiled_m is not None:
        search.state.algorithms = [
            pg.algorithm(
                CompiledNSGA2(
                    settings.generations_per_migration, seed=island_seed(seed, i), m=compiled_m
                )
            )
            for i in range(settings.islands)
        ]
    while not search.done:
        search.step()
    return search.hypervolume(), len(search.state.archive_f), search.state.evaluations


def speed(compiled, udp, args):
    floor = floor_us(compiled, args.points, args.repeats)
    print(f"\n1. speed, one thread (population 64, {args.generations} generations a call)")
    print(f"  floor: batch_fitness_one_thread, {args.points} random points  {floor:8.2f} us")
    times = {name: [] for name in ALGORITHMS}
    for turn in range(args.turns):
        for name in ALGORITHMS:
            times[name].append(evolve_us(udp, name, args.generations, args.calls, seed=turn + 1))
    for name in ALGORITHMS:
        median = statistics.median(times[name])
        spread = ", ".join(f"{t:.2f}" for t in times[name])
        print(
            f"  {name:<14} {median:8.2f} us/evaluation = {median / floor:5.2f} x floor  ({spread})"
        )


def compiled_settings(args) -> dict:
    """The compiled one's own [search] settings from --compiled-generations/-islands."""
    out = {}
    if args.compiled_generations:
        out["generations"] = args.compiled_generations
    if args.compiled_islands:
        out["islands"] = args.compiled_islands
    if args.compiled_generations_per_migration:
        out["generations_per_migration"] = args.compiled_generations_per_migration
    return out


def quality(problem, args, overrides):
    m_note = "1/variables" if args.compiled_m is None else f"{args.compiled_m:g}"
    seeds = range(args.first_seed, args.first_seed + args.seeds)
    print(
        f"\n2. front quality, seeds {seeds[0]}..{seeds[-1]} "
        f"(compiled mutation probability {m_note})"
    )
    hv = {name: [] for name in ALGORITHMS}
    for seed in seeds:
        row = []
        for name in ALGORITHMS:
            start = time.perf_counter()
            volume, members, evals = front_run(
                problem, name, seed, args.compiled_m, overrides, compiled_settings(args)
            )
            hv[name].append(volume)
            row.append(
                f"{name} {volume:.5f} ({members} members, {evals} evaluations, "
                f"{time.perf_counter() - start:.1f} s)"
            )
        print(f"  seed {seed:2d}: " + "; ".join(row), flush=True)
    for name in ALGORITHMS:
        v = hv[name]
        print(
            f"  {name:<14} hypervolume (km/s)^2: median {statistics.median(v):.5f}, "
            f"smallest {min(v):.5f}, largest {max(v):.5f}"
        )
    wins = sum(a > b for a, b in zip(hv["nsga2"], hv["pygmo_nsga2"]))
    print(f"  nsga2 (compiled) larger on {wins} of {args.seeds} seeds")
    for name in ALGORITHMS:
        found = sum(v > args.better_than for v in hv[name])
        print(f"  {name:<14} above {args.better_than:g} (km/s)^2 in {found} of {args.seeds} runs")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=20_000)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--generations", type=int, default=50)
    parser.add_argument("--calls", type=int, default=4)
    parser.add_argument("--turns", type=int, default=5)
    parser.add_argument("--seeds", type=int, default=10)
    parser.add_argument("--first-seed", type=int, default=1)
    parser.add_argument("--skip-speed", action="store_true", help="front quality only")
    parser.add_argument("--compiled-m", type=float, default=None)
    parser.add_argument(
        "--compiled-generations",
        type=int,
        default=None,
        help="generations of the compiled one's runs (default: the file's; more compares "
        "the two at equal wall time rather than equal evaluations)",
    )
    parser.add_argument(
        "--compiled-islands", type=int, default=None, help="islands of the compiled one's runs"
    )
    parser.add_argument("--compiled-generations-per-migration", type=int, default=None)
    parser.add_argument(
        "--better-than",
        type=float,
        default=3.0,
        help="hypervolume above which a run counts as having found the better loop family",
    )
    parser.add_argument("--smoke", action="store_true", help="tiny sizes, meaningless figures")
    args = parser.parse_args(argv)
    overrides = {}
    if args.smoke:
        args.points, args.repeats, args.generations, args.calls = 500, 1, 2, 1
        args.turns, args.seeds = 1, 2
        overrides = {"generations": 10, "generations_per_migration": 5, "population": 16}
    print_header("front search: compiled NSGA-II against pygmo's nsga2 (trade-front)")
    numba.set_num_threads(1)
    problem = load_problem(FRONT)
    compiled = problem.compile()
    udp = LeveragingUDP.from_compiled(compiled, problem.name, one_thread=True)

    if not args.skip_speed:
        speed(compiled, udp, args)
    quality(problem, args, overrides)
    print_footer()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
