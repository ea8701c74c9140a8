"""Cost of one evaluation: the compiled floor, inside real runs, and a unit-aware baseline.

On the demo problem, in one process:

1. floor: the compiled fitness on a batch of random points drawn uniformly inside the
   bounds (``trajectory.batch_fitness`` on one thread, and on every thread;
   ``trajectory.fitness`` called once per point), plus the layers a search adds on top
   of one call (the pygmo problem shell, ``pygmo.problem.fitness``); and the kernel
   pair the fitness cannot avoid, timed alternately with the floor on the same points:
   the body's ephemeris at launch and at the flyby, the propagation from launch to the
   DSM and the Lambert arc from the DSM to the flyby (``kernel_pair``; target: floor
   at most 2.5 x the kernel pair);
2. in-process algorithms: each single-objective algorithm's ``evolve`` on one
   population in this process (per-individual calls from pygmo to Python to numba), and
   pso_gen with pygmo batch evaluation (one call per generation to the numba batch);
3. real ``leverage run`` processes: the demo (single objective) at its own settings and
   on one island, and the multi-objective template ``problems/trade-front.toml`` when
   ``leverage.fronts`` exists; evaluations per wall second per core from the run's own
   numbers (``best.json`` run.evaluations and run.wall_time_s; ``convergence.csv``);
4. the baseline: the same evaluation with poliastro's unit-aware objects
   (``benchmarks/unit_aware_baseline.py``) on the same points; the DSM of both must
   agree to 1 m/s.

The demo is compiled as its file says: the default ephemeris (JPL DE421 Chebyshev
tables in the parameter array, ``leverage.astro.de_tables``) and its ``[margins]``; the
floor and every run use it. Section 1 also times the same demo compiled with Standish's
mean elements (``[ephemeris] source = "mean_elements"``, same margins) on the same
points, alternating the two in the same process (target: DE421 at most 1.3 x mean
elements). The unit-aware baseline builds its planets from Standish's elements, so its
DSM is compared with the mean-element compile.

Cores used by a run are min(islands, cores): each island a worker process (single
objective and fronts alike), or, with one island, that one process (a front's batches
then spread over the cores: all of them count).

Usage: python -m benchmarks.eval_cost [--points N] [--baseline-points N] [--smoke]
"""

import argparse
import copy
import dataclasses
import importlib.util
import os
import sys
import tempfile
import time
from pathlib import Path

import numba
import numpy as np
import pygmo as pg
from numba import njit

from benchmarks.common import DEMO, ROOT, leverage_run, print_footer, print_header
from leverage.astro import de_tables
from leverage.core import layout as L
from leverage.core import trajectory
from leverage.core.ephemeris import DAY_S, body_state_in
from leverage.core.frames import direction_from_angles, velocity_frame
from leverage.core.kepler import propagate
from leverage.core.lambert import lambert
from leverage.problem.load import compile_problem, load_problem
from leverage.search.single import make_algorithm
from leverage.search.udp import LeveragingUDP

FRONT_PROBLEM = ROOT / "problems" / "trade-front.toml"
SINGLE_ALGORITHMS = ("sade", "de", "de1220", "pso", "cmaes")


def random_points(compiled, n, seed=7):
    rng = np.random.default_rng(seed)
    return compiled.lower + rng.random((n, compiled.lower.size)) * (compiled.upper - compiled.lower)


# Not cached: compiled against whichever leverage is imported (compare_trees.py loads
# this file with another checkout's leverage; a cache would mix the two).
@njit
def kernel_pair_inputs(xs, p):
    """Per point: launch state (r0 km, v0 km/s) and the launch, DSM and flyby epochs
    (s TDB), as the fitness builds them (made before timing the kernel pair). Written
    out here rather than called from ``trajectory``: compare_trees.py runs this file
    against older checkouts, which have no such entry point."""
    out = np.empty((xs.shape[0], 9))
    deg = np.pi / 180.0
    for i in range(xs.shape[0]):
        x = xs[i]
        t0 = x[L.X_LAUNCH_EPOCH_DAYS] * DAY_S
        t_loop = x[L.X_LOOP_DURATION_DAYS] * DAY_S
        r0, vb0 = body_state_in(p, L.P_BODY_EPH, t0)
        along, out_dir, normal = velocity_frame(r0, vb0)
        u = direction_from_angles(
            along,
            out_dir,
            normal,
            x[L.X_LAUNCH_IN_PLANE_ANGLE_DEG] * deg,
            x[L.X_LAUNCH_OUT_OF_PLANE_ANGLE_DEG] * deg,
        )
        out[i, 0:3] = r0
        out[i, 3:6] = vb0 + x[L.X_LAUNCH_VINF_KM_S] * u
        out[i, 6] = t0
        out[i, 7] = t0 + x[L.X_DSM_FRACTION] * t_loop
        out[i, 8] = t0 + t_loop
    return out


@njit
def kernel_pair(inputs, p):
    """The work no fitness can avoid, per point: the body's ephemeris at launch and at
    the flyby, propagation launch -> DSM, Lambert DSM -> flyby (M = 0). Returns a sum
    of the results so that none of the work can be left out by the compiler."""
    total = 0.0
    mu = p[L.P_MU_SUN]
    for i in range(inputs.shape[0]):
        t0, t1, t2 = inputs[i, 6], inputs[i, 7], inputs[i, 8]
        r0, vb0 = body_state_in(p, L.P_BODY_EPH, t0)
        r2, vb2 = body_state_in(p, L.P_BODY_EPH, t2)
        r1, v1m, ok = propagate(mu, inputs[i, 0:3], inputs[i, 3:6], t1 - t0)
        v1p, v2, solved = lambert(mu, r1, r2, t2 - t1, 0, True, True)
        total += r0[0] + vb0[0] + vb2[0] + v1m[0] + v1p[0] + v2[0]
    return total


def measure_kernel_pair(compiled, xs, repeats):
    """us per evaluation of the floor (batch_fitness, 1 thread) and of the kernel pair on
    the same points, timed alternately (best of ``repeats`` each)."""
    p = compiled.params
    n = len(xs)
    threads = numba.get_num_threads()
    numba.set_num_threads(1)
    inputs = kernel_pair_inputs(xs, p)
    kernel_pair(inputs[:4], p)
    trajectory.batch_fitness(xs[:4], p)
    floor, pair = [], []
    for _ in range(repeats):
        floor.append(best_of(1, lambda: trajectory.batch_fitness(xs, p)) / n * 1e6)
        pair.append(best_of(1, lambda: kernel_pair(inputs, p)) / n * 1e6)
    numba.set_num_threads(threads)
    return min(floor), min(pair)


def best_of(repeats, func):
    """Smallest wall time (s) of ``repeats`` calls of func (the least-disturbed one)."""
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return min(times)


def measure_floor(compiled, xs, repeats):
    """Microseconds per evaluation of the compiled fitness, several ways."""
    p = compiled.params
    n = len(xs)
    trajectory.batch_fitness(xs[:4], p)  # load or compile before timing
    trajectory.fitness(xs[0], p)
    threads = numba.get_num_threads()
    out = {}
    numba.set_num_threads(1)
    out["batch, 1 thread"] = best_of(repeats, lambda: trajectory.batch_fitness(xs, p)) / n * 1e6
    numba.set_num_threads(threads)
    wall = best_of(repeats, lambda: trajectory.batch_fitness(xs, p)) / n * 1e6
    out[f"batch, {threads} threads (wall)"] = wall
    out[f"batch, {threads} threads (per core)"] = wall * threads

    def chunks():
        for i in range(0, n, 64):
            trajectory.batch_fitness(xs[i : i + 64], p)

    wall = best_of(repeats, chunks) / n * 1e6
    out[f"batches of 64, {threads} threads (per core)"] = wall * threads

    def per_call():
        for x in xs:
            trajectory.fitness(x, p)

    out["trajectory.fitness per call"] = best_of(repeats, per_call) / n * 1e6
    udp = LeveragingUDP.from_compiled(compiled)

    def udp_call():
        for x in xs:
            udp.fitness(x)

    out["LeveragingUDP.fitness per call"] = best_of(repeats, udp_call) / n * 1e6
    prob = pg.problem(udp)

    def pg_call():
        for x in xs:
            prob.fitness(x)

    out["pygmo.problem.fitness per call"] = best_of(repeats, pg_call) / n * 1e6
    return out


def mean_element_twin(problem):
    """The problem compiled with Standish's mean elements instead of its own ephemeris
    (as ``[ephemeris] source = "mean_elements"`` would; margins and all else the same)."""
    values = copy.deepcopy(problem.values)
    values["ephemeris"].update(source="mean_elements", used="mean_elements")
    return compile_problem(dataclasses.replace(problem, values=values))


def measure_de_table(compiled, compiled_mean, xs, repeats):
    """us per evaluation (batch, 1 thread; and per call) with the problem's DE421 tables
    (its default compile) and with mean elements, timed alternately so both see the same
    machine load."""
    p_mean, p_de = compiled_mean.params, compiled.params
    if compiled.ephemeris == compiled_mean.ephemeris:  # a file that asks for mean elements
        p_de = de_tables.with_de_ephemeris(p_mean, "de421", *de_tables.problem_span_s(compiled))
    n = len(xs)
    threads = numba.get_num_threads()
    numba.set_num_threads(1)
    trajectory.batch_fitness(xs[:4], p_de)
    trajectory.fitness(xs[0], p_de)
    out = {
        "mean elements, batch": [],
        "DE421 table, batch": [],
        "mean elements, per call": [],
        "DE421 table, per call": [],
    }
    for _ in range(repeats):
        for label, p in (("mean elements", p_mean), ("DE421 table", p_de)):
            out[f"{label}, batch"].append(
                best_of(1, lambda: trajectory.batch_fitness(xs, p)) / n * 1e6
            )

            def per_call():
                for x in xs:
                    trajectory.fitness(x, p)

            out[f"{label}, per call"].append(best_of(1, per_call) / n * 1e6)
    numba.set_num_threads(threads)
    table_mb = (p_de.size - p_mean.size) * 8 / 1e6
    return {k: min(v) for k, v in out.items()}, table_mb


def measure_in_process(compiled, evaluations, population):
    """us per evaluation of each algorithm's evolve in this process on one core."""
    udp = LeveragingUDP.from_compiled(compiled)
    threads = numba.get_num_threads()
    numba.set_num_threads(1)
    out = {}
    gens = max(1, evaluations // population)
    for name in SINGLE_ALGORITHMS:
        algo = make_algorithm(name, gens, 1)
        pop = pg.population(pg.problem(udp), population, seed=1)
        before = pop.problem.get_fevals()
        start = time.perf_counter()
        pop = algo.evolve(pop)
        wall = time.perf_counter() - start
        out[f"{name} (per-individual calls)"] = wall / (pop.problem.get_fevals() - before) * 1e6
    for pop_size in (population, 4 * population):
        gens = max(1, evaluations // pop_size)
        uda = pg.pso_gen(gen=gens, seed=1)
        uda.set_bfe(pg.bfe())  # default bfe: the UDP's batch_fitness, one call per generation
        algo = pg.algorithm(uda)
        pop = pg.population(pg.problem(udp), pop_size, seed=1)
        before = pop.problem.get_fevals()
        start = time.perf_counter()
        pop = algo.evolve(pop)
        wall = time.perf_counter() - start
        out[f"pso_gen + batch evaluation, population {pop_size}"] = (
            wall / (pop.problem.get_fevals() - before) * 1e6
        )
    numba.set_num_threads(threads)
    if FRONT_PROBLEM.exists() and importlib.util.find_spec("leverage.search.fronts"):
        front = load_problem(FRONT_PROBLEM).compile()
        front_udp = LeveragingUDP.from_compiled(front)
        size = 64
        gens = max(1, evaluations // size)
        for n_threads in sorted({1, threads}):
            numba.set_num_threads(n_threads)
            uda = pg.nsga2(gen=gens, seed=1)  # pygmo's (pygmo_nsga2): see front_search.py
            uda.set_bfe(pg.bfe())
            pop = pg.population(pg.problem(front_udp), size, b=pg.bfe(), seed=1)
            before = pop.problem.get_fevals()
            start = time.perf_counter()
            pop = pg.algorithm(uda).evolve(pop)
            wall = time.perf_counter() - start
            out[
                f"trade-front: pygmo_nsga2 + batch evaluation, pop. {size}, {n_threads} thread(s), "
                f"per core"
            ] = wall * n_threads / (pop.problem.get_fevals() - before) * 1e6
        numba.set_num_threads(threads)
    return out


def run_rates(label, problem, cores, *options):
    """Evaluations per wall second per core of one real `leverage run`."""
    with tempfile.TemporaryDirectory(prefix="leverage-bench-") as tmp:
        res = leverage_run(problem, Path(tmp) / "out", *options)
    best, log = res["best"], res["log"]
    if best is None or "run" not in best:
        print(f"  {label}: run failed (exit {res['returncode']}): {res['stderr'].strip()[-300:]}")
        return None
    evals = best["run"]["evaluations"]
    wall = best["run"]["wall_time_s"]
    out = {
        "label": label,
        "cores": cores,
        "evaluations": evals,
        "wall_s": wall,
        "process_wall_s": res["process_wall_s"],
        "us_per_eval_per_core": wall * cores / evals * 1e6,
    }
    # Steady state: from the end of the first evolution (which includes starting the
    # worker processes) to the end of the last, from the convergence log.
    # Island rows only: a front run's log also has an all-islands "front" row per evolution.
    log = [r for r in log if isinstance(r["island"], float)]
    evolutions = sorted({int(r["evolution"]) for r in log})
    if len(evolutions) >= 2:
        first = [r for r in log if int(r["evolution"]) == evolutions[0]]
        last = [r for r in log if int(r["evolution"]) == evolutions[-1]]
        d_evals = sum(r["evaluations"] for r in last) - sum(r["evaluations"] for r in first)
        d_wall = last[0]["wall_time_s"] - first[0]["wall_time_s"]
        if d_evals > 0:
            out["steady_us_per_eval_per_core"] = d_wall * cores / d_evals * 1e6
            out["first_evolution_s"] = first[0]["wall_time_s"]
    return out


def measure_baseline(problem, compiled, xs):
    """us per evaluation of the unit-aware baseline, and the largest DSM difference."""
    from benchmarks import unit_aware_baseline as baseline

    setting = baseline.Setting(compiled, problem.body)
    start = time.perf_counter()
    for x in xs[:2]:
        baseline.evaluate(x, setting)  # poliastro compiles its kernels on first use
    first_use = time.perf_counter() - start
    start = time.perf_counter()
    results = [baseline.evaluate(x, setting) for x in xs]
    wall = time.perf_counter() - start
    diffs, obj_rel = [], []
    for x, res in zip(xs, results):
        q = trajectory.details(x, compiled.params)
        f = trajectory.fitness(x, compiled.params)
        if res is None or q[L.Q_OK] != 1.0:
            continue
        diffs.append(abs(q[L.Q_DSM] - res["dsm_kms"]))
        obj_rel.append(abs(f[0] - res["objective"]) / max(1.0, abs(f[0])))
    return {
        "us_per_eval": wall / len(xs) * 1e6,
        "first_use_s": first_use,
        "compared": len(diffs),
        "points": len(xs),
        "max_dsm_diff_m_s": 1000 * max(diffs) if diffs else float("nan"),
        "max_objective_rel_diff": max(obj_rel) if obj_rel else float("nan"),
    }


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--points", type=int, default=20000, help="random points for the floor")
    ap.add_argument(
        "--baseline-points",
        type=int,
        default=300,
        help="points evaluated by the unit-aware baseline",
    )
    ap.add_argument("--in-process-evaluations", type=int, default=48000)
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--smoke", action="store_true", help="tiny sizes: checks that it runs")
    args = ap.parse_args(argv)
    if args.smoke:
        args.points, args.baseline_points, args.in_process_evaluations, args.repeats = (
            200,
            3,
            480,
            1,
        )
    print_header(
        "evaluation cost" + (" (smoke: tiny sizes, figures meaningless)" if args.smoke else "")
    )
    problem = load_problem(DEMO)
    compiled = problem.compile()
    compiled_mean = mean_element_twin(problem)
    xs = random_points(compiled, args.points)
    print(
        f"demo compiled with: {compiled.ephemeris}; margins "
        f"{ {k: v for k, v in problem.values['margins'].items() if v > 0.0} }"
    )
    cores = os.cpu_count() or 1

    print(
        f"\n1. floor: demo problem, {args.points} random points inside the bounds, "
        f"best of {args.repeats}"
    )
    floor = measure_floor(compiled, xs, args.repeats)
    for key, value in floor.items():
        print(f"  {key:<40} {value:8.2f} us/evaluation")
    floor_us = floor["batch, 1 thread"]
    alt_floor, pair_us = measure_kernel_pair(compiled, xs, args.repeats)
    print(
        f"  kernel pair (2 ephemeris look-ups + propagate + Lambert), timed alternately "
        f"with the floor:\n    floor {alt_floor:8.2f} us, kernel pair {pair_us:8.2f} us/evaluation"
        f" = floor {alt_floor / pair_us:5.2f} x the kernel pair (target <= 2.5 x)"
    )
    if FRONT_PROBLEM.exists():
        # The front template has its own limits; its floor, for comparison with the demo's.
        front = load_problem(FRONT_PROBLEM).compile()
        fxs = random_points(front, args.points)
        trajectory.batch_fitness(fxs[:4], front.params)
        threads = numba.get_num_threads()
        numba.set_num_threads(1)
        front_floor = best_of(args.repeats, lambda: trajectory.batch_fitness(fxs, front.params))
        numba.set_num_threads(threads)
        print(
            f"  {'trade-front problem: batch, 1 thread':<40} "
            f"{front_floor / args.points * 1e6:8.2f} us/evaluation"
        )
    de, table_mb = measure_de_table(compiled, compiled_mean, xs, args.repeats)
    print(
        f"  Earth from JPL DE421 Chebyshev table ({table_mb:.2f} MB appended to p; the "
        "default) against mean elements, 1 thread, timed alternately:"
    )
    for kind in ("batch", "per call"):
        mean_us, de_us = de[f"mean elements, {kind}"], de[f"DE421 table, {kind}"]
        print(
            f"    {kind:<10} mean elements {mean_us:8.2f} us, DE421 table {de_us:8.2f} us/evaluation"
            f" = {de_us / mean_us:5.2f} x mean elements (target <= 1.3 x)"
        )

    print(
        f"\n2. algorithms evolving one population in this process, 1 numba thread unless "
        f"said, {args.in_process_evaluations} evaluations each (random start population)"
    )
    for key, value in measure_in_process(compiled, args.in_process_evaluations, 24).items():
        print(f"  {key:<72} {value:8.2f} us/evaluation  {value / floor_us:5.2f} x floor")

    print("\n3. real `leverage run` processes (the run's own numbers)")
    runs = []
    islands = problem.values["search"]["islands"]
    smoke_opts = ["--generations", "4"] if args.smoke else []
    if not args.smoke:  # worker-process start-up alone would take the smoke's time
        runs.append(run_rates(f"demo, its settings ({islands} islands)", DEMO, min(islands, cores)))
    runs.append(run_rates("demo, --islands 1", DEMO, 1, "--islands", "1", *smoke_opts))
    if importlib.util.find_spec("leverage.search.fronts") and FRONT_PROBLEM.exists():
        runs.append(
            run_rates(
                "trade-front (multi-objective, its settings)",
                FRONT_PROBLEM,
                min(load_problem(FRONT_PROBLEM).values["search"]["islands"], cores),
                *(["--generations", "4"] if args.smoke else []),
            )
        )
    else:
        print(
            "  multi-objective: skipped (leverage/fronts.py or problems/trade-front.toml "
            "not present yet)"
        )
    for r in runs:
        if r is None:
            continue
        line = (
            f"  {r['label']:<48} {r['evaluations']:>8,} evaluations in {r['wall_s']:.2f} s "
            f"on {r['cores']} core(s): {r['us_per_eval_per_core']:6.2f} us/evaluation/core "
            f"= {r['us_per_eval_per_core'] / floor_us:5.2f} x floor"
        )
        if "steady_us_per_eval_per_core" in r:
            s = r["steady_us_per_eval_per_core"]
            line += (
                f"; after the first evolution ({r['first_evolution_s']:.2f} s): "
                f"{s:6.2f} us = {s / floor_us:5.2f} x floor"
            )
        print(line)

    print(
        f"\n4. unit-aware baseline (poliastro Orbit/propagate/izzo.lambert, astropy "
        f"quantities) on the first {args.baseline_points} of the same points"
    )
    if args.smoke:
        print(
            "  skipped in smoke mode: poliastro compiles its (uncached) numba kernels on "
            "first use in every process, about 20 s"
        )
        print_footer()
        return 0
    # The baseline's planets come from Standish's elements: compare with that compile.
    base = measure_baseline(problem, compiled_mean, xs[: args.baseline_points])
    per_call = floor["trajectory.fitness per call"]
    print(
        f"  baseline: {base['us_per_eval']:.0f} us/evaluation, after {base['first_use_s']:.1f} s "
        "for its first two evaluations (poliastro compiles its uncached kernels)"
    )
    print(
        f"  DSM agreement (against the mean-element compile) on {base['compared']}/"
        f"{base['points']} points solved by both: "
        f"largest difference {base['max_dsm_diff_m_s']:.4f} m/s "
        f"({'within' if base['max_dsm_diff_m_s'] <= 1.0 else 'NOT within'} 1 m/s); "
        f"largest relative objective difference {base['max_objective_rel_diff']:.2e}"
    )
    print(
        f"  speed-up: {base['us_per_eval'] / floor_us:,.0f} x (vs the floor, DE421), "
        f"{base['us_per_eval'] / per_call:,.0f} x (vs one compiled call)",
        end="",
    )
    in_run = [r for r in runs[:1] if r is not None]
    if in_run:
        print(
            f", {base['us_per_eval'] / in_run[0]['us_per_eval_per_core']:,.0f} x "
            f"(vs the cost per core in the demo run)"
        )
    else:
        print()
    print_footer()
    return 0


if __name__ == "__main__":
    sys.exit(main())
