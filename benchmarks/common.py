"""Helpers shared by the benchmarks: machine description, load, and real `leverage run` calls.

A benchmark runs the command exactly as a user would (``python -m leverage run ...`` in
a child process) and reads the run's own numbers back from ``best.json`` and
``convergence.csv``.
"""

import csv
import json
import os
import platform
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "problems" / "demo.toml"
BENCH_PROBLEMS = Path(__file__).resolve().parent / "problems"


def load_average() -> tuple:
    """(1, 5, 15)-minute load averages from /proc/loadavg (None where unavailable)."""
    try:
        return tuple(float(v) for v in Path("/proc/loadavg").read_text().split()[:3])
    except OSError:
        return (None, None, None)


def cpu_model() -> str:
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown"


def machine() -> dict:
    """Cores, CPU, Python and package versions of this machine."""
    from leverage.record.design import package_versions

    return {
        "cores": os.cpu_count(),
        "cpu": cpu_model(),
        "platform": platform.platform(),
        "packages": package_versions(),
    }


def print_header(title: str) -> None:
    m = machine()
    load = load_average()
    print(f"== {title}  ({time.strftime('%Y-%m-%d %H:%M:%S %Z')})")
    print(f"machine: {m['cores']} cores, {m['cpu']}, {m['platform']}")
    print("packages: " + ", ".join(f"{k} {v}" for k, v in m["packages"].items()))
    print(f"load average at start (1/5/15 min): {load[0]} {load[1]} {load[2]}")
    sys.stdout.flush()


def print_footer() -> None:
    load = load_average()
    print(f"load average at end (1/5/15 min): {load[0]} {load[1]} {load[2]}")
    sys.stdout.flush()


def leverage_run(problem, out_dir, *options, env=None) -> dict:
    """Run ``leverage run PROBLEM --out OUT --force --quiet OPTIONS`` in a child process.

    Returns the run's own numbers: exit code, process wall time (s), ``best.json``
    (or None) and the convergence log rows (dicts of floats).
    """
    cmd = [
        sys.executable,
        "-m",
        "leverage",
        "run",
        str(problem),
        "--out",
        str(out_dir),
        "--force",
        "--quiet",
        *[str(o) for o in options],
    ]
    start = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True, env=env, cwd=ROOT)
    wall = time.perf_counter() - start
    best_path = Path(out_dir) / "best.json"
    best = json.loads(best_path.read_text()) if best_path.exists() else None
    rows = read_log(Path(out_dir) / "convergence.csv")
    return {
        "returncode": proc.returncode,
        "process_wall_s": wall,
        "best": best,
        "log": rows,
        "stderr": proc.stderr,
    }


def read_log(path) -> list:
    """Rows of a convergence.csv as dicts (numbers as float where they parse)."""
    path = Path(path)
    if not path.exists():
        return []
    out = []
    with open(path, newline="", encoding="utf-8") as fh:
        for row in csv.DictReader(fh):
            parsed = {}
            for key, value in row.items():
                try:
                    parsed[key] = float(value)
                except (TypeError, ValueError):
                    parsed[key] = value
            out.append(parsed)
    return out


def median(values):
    values = sorted(values)
    n = len(values)
    if n == 0:
        return float("nan")
    mid = n // 2
    return values[mid] if n % 2 else 0.5 * (values[mid - 1] + values[mid])
