"""Start-up of `leverage run`: cold (empty numba cache; optionally a new venv) and warm.

Each measurement starts a new process and times, on the wall clock:
- ``python -c pass`` (the interpreter alone);
- importing the command (``import leverage.cli`` plus every subcommand module, which is
  what ``leverage`` does before parsing its arguments);
- ``leverage show`` of a demo result folder and ``leverage check`` of the demo (issue 13
  targets, warm: show <= 1 s, check <= 2 s);
- ``leverage run`` of the demo with one generation (``--generations 1``) on one island,
  through ``benchmarks/first_evaluation.py``, which notes when the first evaluation
  returns (kernels loaded from the numba cache, or compiled when it is cold) without
  changing what the command does: time to the first evaluation and to the end of the
  process (which includes the run's pictures and verification); and the same with the
  demo's own two islands (worker processes start at the first evolution).
Cold: NUMBA_CACHE_DIR and XDG_CACHE_HOME point at a fresh temporary folder, so every
kernel compiles; the run's own record says how long the compile took (best.json
``run.compile_s``, measured by ``leverage.run.compile_notice``). ``--new-venv`` also builds a fresh virtual environment with
``pip install -e .`` (downloads every dependency) and measures a cold start in it.

Usage: python -m benchmarks.startup [--repeats 5] [--cold 1] [--new-venv] [--smoke]
"""

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from benchmarks.common import DEMO, ROOT, median, print_footer, print_header

IMPORT_COMMAND = "import leverage.cli as c; list(c.command_modules())"


def timed(cmd, env=None) -> float:
    start = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True, env=env, cwd=ROOT)
    wall = time.perf_counter() - start
    if proc.returncode not in (0, 3, 7):
        raise RuntimeError(
            f"{' '.join(map(str, cmd))} failed ({proc.returncode}): {proc.stderr.strip()[-400:]}"
        )
    return wall


def first_evaluation(python, islands, env=None, with_compile=False) -> tuple:
    """(s to the end of the first evaluation, s to the end) of a one-generation demo run;
    ``with_compile``: and the run's own compile time (best.json run.compile_s)."""
    with tempfile.TemporaryDirectory(prefix="leverage-start-") as tmp:
        marker = Path(tmp) / "first"
        cmd = [
            python,
            "-m",
            "benchmarks.first_evaluation",
            str(marker),
            "run",
            str(DEMO),
            "--out",
            str(Path(tmp) / "out"),
            "--force",
            "--quiet",
            "--generations",
            "1",
            "--islands",
            str(islands),
        ]
        t0 = time.time()
        total = timed(cmd, env)
        first = float(marker.read_text().split()[1]) - t0
        if with_compile:
            record = json.loads((Path(tmp) / "out" / "best.json").read_text())
            return first, total, record["run"].get("compile_s", 0.0)
    return first, total


def demo_folder(python, env=None) -> Path:
    """A small demo result folder for ``leverage show`` (kept until the process ends)."""
    folder = Path(tempfile.mkdtemp(prefix="leverage-show-")) / "demo"
    timed(
        [
            python,
            "-m",
            "leverage",
            "run",
            str(DEMO),
            "--out",
            str(folder),
            "--quiet",
            "--generations",
            "50",
            "--islands",
            "1",
        ],
        env,
    )
    return folder


def measure(python, env, repeats, label, two_islands=True):
    """Print and return the start-up figures of ``repeats`` runs (median and min)."""
    folder = demo_folder(python, env)
    rows = {
        "python -c pass": [timed([python, "-c", "pass"], env) for _ in range(repeats)],
        "import the command": [timed([python, "-c", IMPORT_COMMAND], env) for _ in range(repeats)],
        "leverage show RESULT (target <= 1 s)": [
            timed([python, "-m", "leverage", "show", str(folder)], env) for _ in range(repeats)
        ],
        "leverage check demo (target <= 2 s)": [
            timed([python, "-m", "leverage", "check", str(DEMO)], env) for _ in range(repeats)
        ],
    }
    shutil.rmtree(folder.parent, ignore_errors=True)
    firsts, totals, firsts2, totals2 = [], [], [], []
    for _ in range(repeats):
        first, total = first_evaluation(python, 1, env)
        firsts.append(first)
        totals.append(total)
        if two_islands:
            first, total = first_evaluation(python, 2, env)
            firsts2.append(first)
            totals2.append(total)
    rows["run, 1 island: to first evaluation"] = firsts
    rows["run, 1 island: whole process"] = totals
    if two_islands:
        rows["run, 2 islands: to first evaluation"] = firsts2
        rows["run, 2 islands: whole process"] = totals2
    print(f"\n{label} ({repeats} run(s) each; median, min in s)")
    for key, values in rows.items():
        print(f"  {key:<40} {median(values):7.2f} {min(values):7.2f}")
    sys.stdout.flush()
    return rows


def cold_env():
    """An environment whose numba cache is a fresh empty folder; (env, folder)."""
    folder = tempfile.mkdtemp(prefix="leverage-cold-cache-")
    env = dict(os.environ, NUMBA_CACHE_DIR=folder, XDG_CACHE_HOME=folder)
    return env, folder


def cold_run(python, label):
    """One cold start: a fresh numba cache, then the same command warm right after."""
    env, folder = cold_env()
    try:
        first, total, compile_s = first_evaluation(python, 1, env, with_compile=True)
        print(
            f"  {label}: to first evaluation {first:.2f} s, whole process {total:.2f} s "
            f"(one generation, then pictures and verification); compiling the model "
            f"{compile_s} s (best.json run.compile_s)"
        )
        sys.stdout.flush()
        return first, total
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def new_venv_cold():
    """Build a new venv with pip install -e ., then one cold start in it."""
    base = shutil.which("python3.10") or sys.executable
    folder = Path(tempfile.mkdtemp(prefix="leverage-venv-"))
    try:
        start = time.perf_counter()
        subprocess.run([base, "-m", "venv", str(folder)], check=True, capture_output=True)
        proc = subprocess.run(
            [str(folder / "bin" / "pip"), "install", "-q", "-e", str(ROOT)],
            capture_output=True,
            text=True,
        )
        build = time.perf_counter() - start
        if proc.returncode != 0:
            print(
                f"  new venv: pip install failed after {build:.0f} s: {proc.stderr.strip()[-300:]}"
            )
            return
        print(f"  new venv: created and installed in {build:.0f} s (pip downloads included)")
        cold_run(str(folder / "bin" / "python"), "new venv, empty numba cache")
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=5, help="warm repetitions")
    ap.add_argument("--cold", type=int, default=1, help="cold starts (each compiles everything)")
    ap.add_argument(
        "--new-venv",
        action="store_true",
        help="also build a new venv (downloads the dependencies) and start it cold",
    )
    ap.add_argument("--smoke", action="store_true", help="one warm repetition, no cold start")
    args = ap.parse_args(argv)
    if args.smoke:
        args.repeats, args.cold, args.new_venv = 1, 0, False
    print_header(
        "start-up" + (" (smoke: one repetition, figures meaningless)" if args.smoke else "")
    )
    python = sys.executable
    # Warm the user's cache first (a no-op when it is already warm).
    first_evaluation(python, 1)
    measure(python, None, args.repeats, "warm (numba cache filled)", two_islands=not args.smoke)
    if args.cold:
        print(f"\ncold (fresh empty numba cache; {args.cold} start(s))")
        for k in range(args.cold):
            cold_run(python, f"cold start {k + 1}, this venv")
    if args.new_venv:
        new_venv_cold()
    print_footer()
    return 0


if __name__ == "__main__":
    sys.exit(main())
