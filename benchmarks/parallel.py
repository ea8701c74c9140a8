"""Speed-up from 1 to 2 workers: a launch-window sweep and a single two-island run.

Each measurement starts the command as a user would, in a new process, and times
the whole process on the wall clock:

- ``leverage sweep problems/demo.toml --slice-days D --seeds K --generations G
  --workers W`` for W = 1 (every run in this process, one after the other) and W = 2
  (two worker processes); G defaults to 2000 (about a second per run here) because
  at the demo's 400 generations a run takes 0.2 s and the sweep's own start-up,
  table writing and picture (about 3 s, in one process) hide the parallel part;
- ``leverage run`` of the demo with its two islands, ``--workers 1`` (islands in turn
  in one process) and ``--workers 2`` (one worker process per island), at the demo's
  own size and with more generations; the run's own search time (``best.json``
  ``run.wall_time_s``) is shown beside the process time.

Runs alternate between the worker counts so a change in machine load hits both. The
machine's load average is printed at start and end, and beside each sweep figure the
cores it actually got (CPU seconds of the child processes over wall seconds): other
work on the machine slows both sides and shrinks the speed-up.

Usage: python -m benchmarks.parallel [--repeats 3] [--slice-days 30] [--seeds 2]
       [--generations 2000] [--smoke]
"""

import argparse
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from benchmarks.common import DEMO, ROOT, leverage_run, median, print_footer, print_header


def children_cpu_s() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def sweep_wall(out, slice_days, seeds, workers, extra) -> tuple:
    """(wall s, CPU s) of one ``leverage sweep`` process and its workers."""
    cmd = [
        sys.executable,
        "-m",
        "leverage",
        "sweep",
        str(DEMO),
        "--slice-days",
        str(slice_days),
        "--seeds",
        str(seeds),
        "--workers",
        str(workers),
        "--out",
        str(out),
        "--force",
        "--quiet",
        *extra,
    ]
    cpu0 = children_cpu_s()
    start = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True, cwd=ROOT)
    wall = time.perf_counter() - start
    if proc.returncode not in (0, 3):
        raise RuntimeError(f"sweep failed ({proc.returncode}): {proc.stderr.strip()[-400:]}")
    return wall, children_cpu_s() - cpu0


def table_of(out) -> str:
    return (Path(out) / "sweep.csv").read_text()


def report(label, one, two):
    m1, m2 = median(one), median(two)
    print(
        f"  {label:<44} 1 worker {m1:7.2f} s   2 workers {m2:7.2f} s   "
        f"speed-up {m1 / m2:5.2f}x   (min {min(one):.2f} / {min(two):.2f} s)"
    )
    sys.stdout.flush()


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--slice-days", type=float, default=30.0)
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--generations", type=int, default=2000, help="per sweep run")
    ap.add_argument("--only", choices=("sweep", "run"), help="measure only one of the two")
    ap.add_argument("--smoke", action="store_true", help="tiny sizes, one repeat")
    args = ap.parse_args(argv)
    repeats = 1 if args.smoke else args.repeats
    slice_days = 180.0 if args.smoke else args.slice_days
    seeds = 1 if args.smoke else args.seeds
    extra = (
        ["--generations", "20", "--population", "8"]
        if args.smoke
        else ["--generations", str(args.generations)]
    )
    print_header("speed-up from 1 to 2 workers")

    with tempfile.TemporaryDirectory(prefix="leverage-parallel-") as tmp:
        tmp = Path(tmp)
        if args.only != "run":
            measure_sweep(tmp, slice_days, seeds, extra, repeats)
        if args.only != "sweep":
            measure_runs(tmp, repeats, args.smoke)
    print_footer()
    return 0


def measure_sweep(tmp, slice_days, seeds, extra, repeats):
    """Whole `leverage sweep` processes with 1 and 2 workers."""
    print(
        f"\nsweep of the demo window: slices of {slice_days:g} days, {seeds} seed(s) "
        f"each, {' '.join(extra)}, {repeats} repeat(s); whole process, median"
    )
    times = {1: [], 2: []}
    cores = {1: [], 2: []}
    for _ in range(repeats):
        for workers in (1, 2):
            wall, cpu = sweep_wall(tmp / f"s{workers}", slice_days, seeds, workers, extra)
            times[workers].append(wall)
            cores[workers].append(cpu / wall)
    same = table_of(tmp / "s1") == table_of(tmp / "s2")
    report("sweep", times[1], times[2])
    print(
        f"  cores used (CPU s / wall s, median): 1 worker {median(cores[1]):.2f}, "
        f"2 workers {median(cores[2]):.2f}"
    )
    print(f"  same table with 1 and 2 workers: {'yes' if same else 'NO'}")


def measure_runs(tmp, repeats, smoke):
    """Whole `leverage run` processes of the demo, 2 islands, with 1 and 2 workers."""
    sizes = [("demo size (400 generations)", [])]
    if smoke:
        sizes = [("smoke size", ["--generations", "20", "--population", "8"])]
    else:
        sizes.append(("4000 generations", ["--generations", "4000"]))
    print(
        f"\nleverage run of the demo, 2 islands, {repeats} repeat(s); "
        "process wall time and search time, median"
    )
    for label, options in sizes:
        walls = {1: [], 2: []}
        search = {1: [], 2: []}
        cores = {1: [], 2: []}
        answers = {}
        for _ in range(repeats):
            for workers in (1, 2):
                cpu0 = children_cpu_s()
                res = leverage_run(
                    DEMO, tmp / f"r{workers}", "--islands", "2", "--workers", str(workers), *options
                )
                if res["best"] is None:
                    raise RuntimeError(res["stderr"][-400:])
                walls[workers].append(res["process_wall_s"])
                cores[workers].append((children_cpu_s() - cpu0) / res["process_wall_s"])
                search[workers].append(res["best"]["run"]["wall_time_s"])
                answers[workers] = res["best"]["decision_vector"]["values"]
        report(f"run, {label}: process", walls[1], walls[2])
        report(f"run, {label}: search", search[1], search[2])
        print(
            f"  cores used by the whole process (median): 1 worker {median(cores[1]):.2f}, "
            f"2 workers {median(cores[2]):.2f}"
        )
        print(
            f"  same champion with 1 and 2 workers: {'yes' if answers[1] == answers[2] else 'NO'}"
        )


if __name__ == "__main__":
    sys.exit(main())
