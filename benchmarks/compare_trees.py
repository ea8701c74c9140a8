"""Before/after on a shared machine: two checkouts of leverage, timed alternately.

On a machine shared with other work, two benchmark runs minutes apart see different
loads, so a before/after ratio from two separate ``eval_cost`` runs mixes the change
with the load. This script alternates the two checkouts (``--before DIR``, default
this one; ``--after DIR``, default this one) ``--repeats`` times; each turn runs, each
in a fresh process with that checkout on PYTHONPATH:

1. the floor (``trajectory.batch_fitness``, 1 thread) and the kernel pair on 20,000
   random demo points, alternately, best of 5 (``eval_cost.measure_kernel_pair``; the
   kernel pair is this checkout's ``benchmarks/eval_cost.py`` function, compiled
   against the tree under test);
2. the demo and ``problems/trade-front.toml`` at their own settings, islands in worker
   processes as ``leverage run`` does (``runner.run`` without the pictures and the
   verification): us of wall time per evaluation per core (cores =
   min(islands, cores)), the same after the first evolution, and CPU time of the run's
   processes (parent and workers) per evaluation. ``--long-front N`` adds the
   trade-front run at N generations, where its fixed costs weigh less.

Figures per checkout: the smallest floor and kernel pair, the median of the rest.

Each measurement runs this file in a process whose working folder and PYTHONPATH are
the checkout under test (so an older checkout needs no copy of this script).

Usage: python -m benchmarks.compare_trees --before /path/to/old/checkout [--after DIR]
       [--repeats 3] [--long-front 6000] [--smoke]
"""

import argparse
import csv
import json
import os
import resource
import subprocess
import sys
import tempfile
from pathlib import Path

from benchmarks.common import ROOT, load_average, print_footer, print_header

RUNS = (("demo", "problems/demo.toml"), ("front", "problems/trade-front.toml"))


def child_floor(points: int, repeats: int) -> dict:
    """Floor and kernel pair of the leverage on PYTHONPATH, with this checkout's
    ``eval_cost.py`` (loaded by path: an older checkout may not have the kernel pair)."""
    import importlib.util

    from leverage.problem.load import load_problem

    spec = importlib.util.spec_from_file_location(
        "eval_cost_here", Path(__file__).with_name("eval_cost.py")
    )
    eval_cost = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(eval_cost)
    compiled = load_problem(Path("problems") / "demo.toml").compile()
    xs = eval_cost.random_points(compiled, points)
    floor, pair = eval_cost.measure_kernel_pair(compiled, xs, repeats)
    return {"floor": floor, "pair": pair}


def child_run(path: str, generations: int | None) -> dict:
    from leverage.problem.load import load_problem
    from leverage.run.runner import Progress, run, settings_from
    from leverage.search.islands import local_evolver

    def cpu_s():
        own, kids = (
            resource.getrusage(w) for w in (resource.RUSAGE_SELF, resource.RUSAGE_CHILDREN)
        )
        return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime

    problem = load_problem(Path(path))
    settings = settings_from(problem, {"generations": generations})
    cores = min(settings.islands, os.cpu_count() or 1)
    start = cpu_s()
    with tempfile.TemporaryDirectory() as tmp:
        outcome = run(
            problem,
            settings,
            Path(tmp) / "run",
            progress=Progress(1, enabled=False),
            echo=lambda *a: None,
            evolver=local_evolver(settings.islands),
            after=False,
        )
        with open(Path(tmp) / "run" / "convergence.csv", newline="") as fh:
            log = [r for r in csv.DictReader(fh) if r["island"].isdigit()]
    cpu = cpu_s() - start
    info = outcome.record["run"]
    out = {
        "us_per_core": info["wall_time_s"] * cores / info["evaluations"] * 1e6,
        "cpu_us": cpu / info["evaluations"] * 1e6,
        "where": info.get("islands_evolved"),
    }
    evolutions = sorted({int(r["evolution"]) for r in log})
    if len(evolutions) >= 2:
        first = [r for r in log if int(r["evolution"]) == evolutions[0]]
        last = [r for r in log if int(r["evolution"]) == evolutions[-1]]
        # from the generations column: an island's evaluations count restarts from its
        # new population at each restart epoch
        population = int(outcome.record["search"]["population"])
        d_evals = population * sum(
            int(b["generations"]) - int(a["generations"]) for a, b in zip(first, last)
        )
        d_wall = float(last[0]["wall_time_s"]) - float(first[0]["wall_time_s"])
        out["steady_us_per_core"] = d_wall * cores / d_evals * 1e6
    return out


def in_tree(tree: Path, *args) -> dict:
    env = dict(os.environ, PYTHONPATH=str(tree))
    proc = subprocess.run(
        [sys.executable, str(Path(__file__).resolve()), *map(str, args)],
        cwd=tree,
        env=env,
        capture_output=True,
        text=True,
    )
    if proc.returncode != 0:
        raise RuntimeError(f"{tree}: {proc.stderr.strip()[-500:]}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--before", type=Path, default=ROOT, help="checkout measured first")
    ap.add_argument("--after", type=Path, default=ROOT, help="checkout measured second")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument(
        "--long-front",
        type=int,
        metavar="GENERATIONS",
        help="also time the trade-front run with this many generations (its fixed costs, "
        "fork to front.csv, then weigh less: 6000 is ten times its own)",
    )
    ap.add_argument("--smoke", action="store_true", help="tiny sizes: checks that it runs")
    ap.add_argument("--child", nargs="+", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:  # one measurement, in a process with the tree under test
        kind, *rest = args.child
        if kind == "floor":
            print(json.dumps(child_floor(int(rest[0]), int(rest[1]))))
        else:
            print(json.dumps(child_run(rest[0], int(rest[1]) if rest[1] != "-" else None)))
        return 0
    points, repeats, generations = (200, 1, "100") if args.smoke else (20000, 5, "-")
    if args.smoke:
        args.repeats = 1
    print_header(
        "before/after, alternately"
        + (" (smoke: tiny sizes, figures meaningless)" if args.smoke else "")
    )
    runs = [(name, path, generations) for name, path in RUNS]
    if args.long_front:
        runs.append((f"front-{args.long_front}", RUNS[1][1], str(args.long_front)))
    trees = {"before": args.before.resolve(), "after": args.after.resolve()}
    for label, tree in trees.items():
        print(f"{label}: {tree}")
    rows = {label: [] for label in trees}
    for turn in range(args.repeats):
        for label, tree in trees.items():
            row = {"load": load_average()[0]}
            row.update(in_tree(tree, "--child", "floor", points, repeats))
            for name, path, gens in runs:
                row[name] = in_tree(tree, "--child", "run", path, gens)
            rows[label].append(row)
            print(f"  turn {turn + 1} {label}: {json.dumps(row)}", flush=True)

    def median(values):
        values = sorted(values)
        return values[len(values) // 2]

    print("\nper checkout: smallest floor and kernel pair; medians of the rest")
    for label, got in rows.items():
        floor = min(r["floor"] for r in got)
        pair = min(r["pair"] for r in got)
        ratio = median(r["floor"] / r["pair"] for r in got)
        print(
            f"  {label}: floor {floor:.2f} us, kernel pair {pair:.2f} us, floor / kernel pair "
            f"{ratio:.2f} (median of turns)"
        )
        for name, _, _ in runs:
            wall = median(r[name]["us_per_core"] for r in got)
            cpu = median(r[name]["cpu_us"] for r in got)
            steady = [r[name]["steady_us_per_core"] for r in got if "steady_us_per_core" in r[name]]
            text = f"    {name} run ({got[0][name]['where']}): {wall:.2f} us/evaluation/core = {wall / floor:.2f} x floor"
            if steady:
                s = median(steady)
                text += f"; after the first evolution {s:.2f} = {s / floor:.2f} x"
            text += (
                f"; CPU of all its processes {cpu:.2f} us/evaluation = {cpu / floor:.2f} x floor"
            )
            print(text)
    print_footer()
    return 0


if __name__ == "__main__":
    sys.exit(main())
