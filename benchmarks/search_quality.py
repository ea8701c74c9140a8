"""How often the search finds the best-known design, and how fast.

For each reference problem with an entry in ``benchmarks/best_known.json`` (see
``benchmarks/best_known.py``) and each algorithm, run ``leverage run`` once per seed
(1..N) at the default settings (``leverage.schema``'s [search] population, generations
and islands, passed on the command line so a problem file's own [search] values do
not count; ``--file-settings`` uses them instead) and count the runs whose final design is feasible with an objective within 1 m/s
(0.001 in the objective's km/s) of the best-known one. Time to get there is read from
the run's own convergence log: the wall time (from the start of the search) of the
first evolution whose best objective is within the tolerance, or the whole run
(search and polish) when only the polish got there. "verified" counts the runs whose
final design also holds in the verification (best.json ``verification.holds``: the
design re-flown apart from the search's kernels against the stated limits).

``--in-process`` runs each seed in this process instead (``leverage.run.runner``'s own
``settings_from``, search and ``finish``: search and polish, islands evolved in turn,
which gives the champion of a ``leverage run`` with the same seed and island count),
without the start-up, the pictures and the verification that take most of a
``leverage run`` process (about 20 s of its 20-28 s with DE421): only the champion and
the run's own clock count, so "verified" and "process s" are not measured there.

Usage: python -m benchmarks.search_quality [--problems demo,earth-3yr] [--algorithms sade,pso]
       [--seeds 20] [--population N] [--generations N] [--islands N] [--file-settings]
       [--in-process] [--show-runs] [--smoke]
"""

import argparse
import json
import sys
import tempfile
from pathlib import Path

from benchmarks.best_known import OUT as BEST_KNOWN
from benchmarks.best_known import REFERENCES
from benchmarks.common import leverage_run, median, print_footer, print_header
from leverage.problem.schema import ALGORITHMS, keys_by_section

TOLERANCE = 0.001  # objective units (km/s): 1 m/s
# [search] keys passed to every run (the defaults unless given or --file-settings).
TUNABLE = ("population", "generations", "islands", "generations_per_migration", "polish")
ON_COMMAND_LINE = ("population", "generations", "islands")  # leverage run's options
SAVED = ("seed", "objective", "feasible", "wall_s", "evaluations", "x")


def in_process_run(path, seed, algorithm, overrides, target):
    """One seed in this process: the runner's settings, search and finish (polish and
    record), islands evolved in turn; no files, pictures or verification."""
    from leverage.problem.load import load_problem
    from leverage.run import runner
    from leverage.search.islands import SerialIslands

    problem = load_problem(path)
    settings = runner.settings_from(problem, dict(overrides, seed=seed, algorithm=algorithm))
    compiled, udp, search = runner.prepare(problem, settings, SerialIslands())
    while not search.done:
        search.step()
    record = runner.finish(problem, settings, compiled, udp, search, "complete")
    objective = record["objective"][0]
    objective = float("inf") if objective is None else float(objective)
    hit = bool(record["feasible"]) and target is not None and objective <= target + TOLERANCE
    reach = None
    if hit:
        reach = next(
            (r.wall_time_s for r in search.state.history if r.best_objective <= target + TOLERANCE),
            record["run"]["wall_time_s"],
        )
    return {
        "ok": True,
        "seed": seed,
        "objective": objective,
        "feasible": bool(record["feasible"]),
        "hit": hit,
        "holds": None,
        "reach_s": reach,
        "wall_s": record["run"]["wall_time_s"],
        "process_wall_s": float("nan"),
        "evaluations": record["run"]["evaluations"],
        "x": record["decision_vector"]["values"],
    }


def one_run(path, seed, algorithm, options, target):
    with tempfile.TemporaryDirectory(prefix="leverage-quality-") as tmp:
        res = leverage_run(
            path, Path(tmp) / "out", "--seed", seed, "--algorithm", algorithm, *options
        )
    best = res["best"]
    if best is None or "run" not in best:
        return {"ok": False, "error": res["stderr"].strip()[-200:]}
    objective = best["objective"][0]
    objective = float("inf") if objective is None else float(objective)
    hit = bool(best["feasible"]) and target is not None and objective <= target + TOLERANCE
    reach = None
    if target is not None:
        for row in res["log"]:
            if row["best_objective"] <= target + TOLERANCE:
                reach = row["wall_time_s"]
                break
        if reach is None and hit:
            reach = best["run"]["wall_time_s"]
    holds = (best.get("verification") or {}).get("holds") is True
    return {
        "ok": True,
        "seed": seed,
        "objective": objective,
        "feasible": bool(best["feasible"]),
        "hit": hit,
        "holds": holds,
        "reach_s": reach if hit else None,
        "wall_s": best["run"]["wall_time_s"],
        "process_wall_s": res["process_wall_s"],
        "evaluations": best["run"]["evaluations"],
        "x": best["decision_vector"]["values"],
    }


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--problems", default=",".join(REFERENCES))
    ap.add_argument("--algorithms", default=",".join(ALGORITHMS))
    ap.add_argument("--seeds", type=int, default=20)
    ap.add_argument("--population", type=int)
    ap.add_argument("--generations", type=int)
    ap.add_argument("--islands", type=int)
    ap.add_argument("--generations-per-migration", type=int)
    ap.add_argument("--polish", choices=("none", "bobyqa", "slsqp", "mbh"))
    ap.add_argument(
        "--file-settings",
        action="store_true",
        help="each problem file's own [search] values instead of the defaults",
    )
    ap.add_argument(
        "--in-process",
        action="store_true",
        help="search and polish in this process (no pictures, no verification)",
    )
    ap.add_argument(
        "--show-runs", action="store_true", help="print every run's seed, objective and time"
    )
    ap.add_argument(
        "--save-runs",
        metavar="FILE",
        help="write every run (problem, algorithm, seed, objective, design) to this JSON file",
    )
    ap.add_argument(
        "--bound-widening",
        type=float,
        metavar="FRACTION",
        help="islands search the box widened by this fraction of each range, clipped to "
        "the true bounds before the kernel (search.single.BOUND_WIDENING; --in-process)",
    )
    ap.add_argument(
        "--restarts",
        type=int,
        metavar="K",
        help="K restart epochs of equal length, the best champion kept "
        "(search.single.RESTARTS; --in-process)",
    )
    ap.add_argument("--smoke", action="store_true", help="tiny: demo, 2 seeds, 1 evolution")
    args = ap.parse_args(argv)
    if not args.in_process and (
        args.generations_per_migration or args.polish or args.bound_widening is not None
    ):
        ap.error("--generations-per-migration, --polish and --bound-widening need --in-process")
    if args.restarts:
        from leverage.search import single

        single.RESTARTS = args.restarts
        single.MIN_EPOCH_GENERATIONS = 1  # as many epochs as asked, however short
    if args.bound_widening is not None:
        from leverage.search import single

        single.BOUND_WIDENING = args.bound_widening
    if not args.file_settings:
        defaults = keys_by_section()["search"]
        for name in TUNABLE:
            if getattr(args, name) is None:
                setattr(args, name, defaults[name].default)
    options = []
    overrides = {}
    if args.smoke:
        args.problems, args.seeds = "demo", 2
        args.algorithms = args.algorithms if "," not in args.algorithms else "sade"
        args.generations, args.islands, args.population = 50, 1, 16
    for name in TUNABLE:
        if getattr(args, name) is not None:
            overrides[name] = getattr(args, name)
            if name in ON_COMMAND_LINE:
                options += [f"--{name}", getattr(args, name)]
    print_header(
        "search quality" + (" (smoke: tiny sizes, figures meaningless)" if args.smoke else "")
    )
    known = json.loads(BEST_KNOWN.read_text()) if BEST_KNOWN.exists() else {}
    source = "each problem file's [search] values" if args.file_settings else "the defaults"
    print(
        f"settings: {source}, "
        + (", ".join(f"{k} {v}" for k, v in overrides.items()) or "no overrides")
        + ("; in this process (search and polish only)" if args.in_process else "")
        + (f"; bound widening {args.bound_widening}" if args.bound_widening is not None else "")
        + f"; seeds 1..{args.seeds}; hit = feasible and within {TOLERANCE * 1000:.0f} m/s "
        "of the best-known objective"
    )
    summary = []
    saved = []
    for problem in args.problems.split(","):
        path = REFERENCES[problem]
        entry = known.get(problem)
        target = entry["objective"] if entry else None
        print(
            f"\n{problem} ({path.name}): best-known objective "
            + (f"{target:.6f}" if target is not None else "unknown (run benchmarks.best_known)")
        )
        print(
            f"  {'algorithm':<9} {'hits':>6} {'verified':>8} {'median s to hit':>16} "
            f"{'median run s':>13} "
            f"{'median process s':>17} {'median evals':>13} {'worst miss m/s':>15}"
        )
        for algorithm in args.algorithms.split(","):
            runs = [
                in_process_run(path, seed, algorithm, overrides, target)
                if args.in_process
                else one_run(path, seed, algorithm, options, target)
                for seed in range(1, args.seeds + 1)
            ]
            good = [r for r in runs if r["ok"]]
            hits = [r for r in good if r["hit"]]
            misses = [1000 * (r["objective"] - target) for r in good if target is not None]
            better = [m for m in misses if m < -1000 * TOLERANCE]
            verified = [r for r in good if r["holds"]]
            if args.show_runs:
                for r in good:
                    print(
                        f"    seed {r['seed']:>3}: objective {r['objective']:.6f} "
                        f"({1000 * (r['objective'] - target) if target is not None else 0:+.2f} m/s)"
                        f", feasible {r['feasible']}, {r['wall_s']:.2f} s"
                    )
            row = {
                "problem": problem,
                "algorithm": algorithm,
                "hits": len(hits),
                "verified": len(verified),
                "runs": len(runs),
                "median_reach_s": median([r["reach_s"] for r in hits]),
                "median_wall_s": median([r["wall_s"] for r in good]),
                "median_process_s": median([r["process_wall_s"] for r in good]),
                "median_evaluations": median([r["evaluations"] for r in good]),
                "worst_miss_m_s": max(misses) if misses else float("nan"),
            }
            summary.append(row)
            saved.extend(
                {"problem": problem, "algorithm": algorithm, **{k: r.get(k) for k in SAVED}}
                for r in good
            )
            print(
                f"  {algorithm:<9} {len(hits):>3}/{len(runs):<2} "
                + (f"{'-':>8}" if args.in_process else f"{len(verified):>5}/{len(runs):<2}")
                + f" {row['median_reach_s']:>16.2f} "
                f"{row['median_wall_s']:>13.2f} {row['median_process_s']:>17.2f} "
                f"{row['median_evaluations']:>13,.0f} {row['worst_miss_m_s']:>15.1f}",
                flush=True,
            )
            for r in runs:
                if not r["ok"]:
                    print(f"    a run failed: {r['error']}")
            if better:
                print(
                    f"    note: {len(better)} run(s) beat the best-known answer by more than "
                    f"1 m/s (up to {-min(better):.1f} m/s): rerun benchmarks.best_known denser"
                )
    if args.save_runs:
        Path(args.save_runs).write_text(json.dumps(saved, indent=1) + "\n")
        print(f"runs written to {args.save_runs}")
    print_footer()
    return 0


if __name__ == "__main__":
    sys.exit(main())
