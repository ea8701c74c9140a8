"""A real ``leverage run`` process stopped by SIGINT or SIGTERM, then resumed (runner.py,
workers.py).

Outside sources: POSIX signal semantics and Python's ``signal`` and ``subprocess``
documentation (a signal sent to a process group reaches every member; exit status
128 + signal number for "stopped by a signal" is common practice, which is why an
interrupted run exits 130). The resumed run is compared with an uninterrupted run of
the same seed: both must end on the very same champion and log.
"""

import csv
import json
import os
import re
import signal
import subprocess
import sys
import time
from dataclasses import asdict
from pathlib import Path

import pytest

from leverage.problem.load import load_problem
from leverage.run.runner import finish, make_search, settings_from
from leverage.search.islands import SerialIslands
from leverage.search.udp import LeveragingUDP

# Only guards against a hang: a limit on how fast a loaded machine is would fail falsely
# (the suite has run under a load of 4 on 2 cores). How long stopping takes is not
# asserted here; the checks below are that the run stopped long before its end.
TIMEOUT_S = 900


def problem_file(demo_path: Path, folder: Path, generations: int) -> Path:
    """The demo problem with many short evolutions (20 generations each)."""
    text = demo_path.read_text()
    # Patterns, not the demo's literal values, so a change of the demo's [search] keeps this.
    text = re.sub(r"(?m)^generations = \d+$", f"generations = {generations}", text)
    text = text.replace("generations_per_migration = 50", "generations_per_migration = 20")
    text = re.sub(r"(?m)^population = \d+$", "population = 16", text)
    assert f"generations = {generations}" in text and "generations_per_migration = 20" in text
    path = folder / "problem.toml"
    path.write_text(text)
    return path


def leverage(*args) -> list:
    return [sys.executable, "-m", "leverage", *map(str, args)]


def log_rows(folder: Path) -> list:
    path = folder / "convergence.csv"
    if not path.is_file():
        return []
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def children(pid: int) -> list:
    try:
        with open(f"/proc/{pid}/task/{pid}/children") as fh:
            return [int(p) for p in fh.read().split()]
    except OSError:
        return []


def alive(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


def outliving(pids, grace_s: float = 60.0) -> list:
    """The pids still running after a grace period (multiprocessing's resource tracker
    leaves a moment after its parent; returns as soon as all are gone, so a generous
    grace costs nothing on an idle machine)."""
    deadline = time.monotonic() + grace_s
    while time.monotonic() < deadline and any(alive(p) for p in pids):
        time.sleep(0.1)
    return [p for p in pids if alive(p)]


def start_and_stop(problem: Path, out: Path, sig, group: bool, min_rows: int):
    """Start a run, send ``sig`` once ``min_rows`` log rows exist; return
    (exit code, seconds from signal to exit, worker pids seen, stderr)."""
    proc = subprocess.Popen(
        leverage("run", problem, "--out", out, "--quiet"),
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        start_new_session=True,
    )
    try:
        deadline = time.monotonic() + TIMEOUT_S
        while len(log_rows(out)) < min_rows:
            assert proc.poll() is None, proc.stderr.read().decode()
            assert time.monotonic() < deadline, "the run logged nothing in time"
            time.sleep(0.02)
        workers = children(proc.pid)
        sent = time.monotonic()
        if group:
            os.killpg(proc.pid, sig)
        else:
            proc.send_signal(sig)
        _, err = proc.communicate(timeout=TIMEOUT_S)
        return proc.returncode, time.monotonic() - sent, workers, err.decode()
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.communicate()


def champion(folder: Path) -> tuple:
    record = json.loads((folder / "best.json").read_text())
    return record["decision_vector"]["values"], record["objective"], record


@pytest.mark.slow
def test_sigint_keeps_the_files_and_resume_matches_an_uninterrupted_run(demo_path, tmp_path):
    problem = problem_file(demo_path, tmp_path, generations=1200)  # 60 evolutions
    out = tmp_path / "stopped"
    code, _, workers, err = start_and_stop(problem, out, signal.SIGINT, group=False, min_rows=4)
    assert code == 130, err
    _, _, record = champion(out)
    assert record["status"] == "interrupted"
    assert "(interrupted)" in (out / "summary.txt").read_text()
    evolutions = record["run"]["evolutions"]
    assert 2 <= evolutions < 60
    rows = log_rows(out)
    assert len(rows) >= 2 * evolutions  # two islands, flushed as they went
    assert (out / "checkpoint.pickle").is_file()
    assert not outliving(workers), "worker processes outlived the run"

    resumed = subprocess.run(
        leverage("run", problem, "--resume", out, "--quiet"),
        capture_output=True,
        text=True,
        timeout=TIMEOUT_S,
    )
    assert resumed.returncode in (0, 3), resumed.stderr
    x_resumed, f_resumed, rec_resumed = champion(out)
    assert rec_resumed["status"] == "complete"
    assert rec_resumed["run"]["resumed_from_evolution"] >= evolutions - 1

    # The same problem and seed never stopped (here, islands in turn in this process).
    loaded = load_problem(problem)
    settings = settings_from(loaded)
    compiled = loaded.compile()
    udp = LeveragingUDP.from_compiled(compiled, loaded.name)
    search = make_search(compiled, udp, settings, SerialIslands())
    while not search.done:
        search.step()
    straight = finish(loaded, settings, compiled, udp, search, "complete")
    assert x_resumed == straight["decision_vector"]["values"]
    assert f_resumed == straight["objective"]
    logged = [
        {
            k: float(v) if k not in ("island", "evolution", "generations", "evaluations") else v
            for k, v in r.items()
            if k != "wall_time_s"
        }
        for r in log_rows(out)
    ]
    expected = [
        {
            k: (str(v) if k in ("island", "evolution", "generations", "evaluations") else v)
            for k, v in asdict(r).items()
            if k != "wall_time_s"
        }
        for r in search.state.history
    ]
    assert logged == expected


@pytest.mark.slow
@pytest.mark.parametrize("group", [False, True], ids=["to-the-run", "to-its-process-group"])
def test_sigterm_stops_cleanly(demo_path, tmp_path, group):
    # A group SIGTERM also kills the worker processes mid-task: with pygmo's
    # multiprocessing pool the run then waited forever; here it must still exit.
    problem = problem_file(demo_path, tmp_path, generations=20000)  # far from done
    out = tmp_path / "run"
    code, _, workers, err = start_and_stop(problem, out, signal.SIGTERM, group=group, min_rows=4)
    assert code == 130, err
    _, f, record = champion(out)
    assert record["status"] == "interrupted"
    assert len(log_rows(out)) >= 4
    # the best so far is at least as good as anything the log saw
    assert f[0] <= min(float(r["best_objective"]) for r in log_rows(out)) + 1e-12
    assert workers, "the run should have had worker processes"
    assert not outliving(workers), "worker processes outlived the run"
