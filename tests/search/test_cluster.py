"""Runs and sweeps on a real ipyparallel cluster (leverage/cluster.py, islands.ClusterIslands,
sweep.Sweep._run_cluster).

Outside sources: ipyparallel 9.2 documentation ("Starting the IPython controller and
engines", ``ipyparallel.Cluster``) for starting a controller and two engines on
127.0.0.1 only, and pygmo 2.19's ``ipyparallel_island``. The answers on the cluster
must equal the local answers for the same seeds, bit for bit: the engines run the same
code on the same pickled populations.

Every wait has a time limit; the cluster is stopped whatever happens.
"""

import csv
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from leverage.cli import main as cli_main
from leverage.problem.load import load_problem
from leverage.run.runner import finish, make_search, settings_from
from leverage.search.islands import SerialIslands
from leverage.search.udp import LeveragingUDP

ROOT = Path(__file__).resolve().parents[2]
START_TIMEOUT_S = 600  # guards a hang only; engines start in ~7 s on an idle machine
RUN_TIMEOUT_S = 1800  # guards a hang only; measured ~11 s idle
PROFILE = "leverage-test"
SMALL = ["--generations", "60", "--population", "10"]


@pytest.fixture(scope="module")
def local_cluster(tmp_path_factory):
    """A controller and 2 engines listening on 127.0.0.1 only, in a throw-away IPython
    folder; yields the environment a client needs and the connection-file path."""
    ipp = pytest.importorskip("ipyparallel")
    ipython_dir = tmp_path_factory.mktemp("ipython")
    env = dict(
        os.environ,
        IPYTHONDIR=str(ipython_dir),
        PYTHONPATH=os.pathsep.join(filter(None, [str(ROOT), os.environ.get("PYTHONPATH")])),
    )
    saved = {k: os.environ.get(k) for k in ("IPYTHONDIR", "PYTHONPATH")}
    os.environ.update(IPYTHONDIR=env["IPYTHONDIR"], PYTHONPATH=env["PYTHONPATH"])
    cluster = ipp.Cluster(
        n=2,
        profile=PROFILE,
        cluster_id="",
        controller_ip="127.0.0.1",
        controller_location="127.0.0.1",
        engine_timeout=START_TIMEOUT_S,
        log_level=40,
    )
    try:
        cluster.start_cluster_sync()
        client = cluster.connect_client_sync()
        client.wait_for_engines(2, timeout=START_TIMEOUT_S)
        client.close()
        connection = Path(cluster.profile_dir) / "security" / "ipcontroller-client.json"
        assert connection.is_file()
        yield env, connection
    finally:
        try:
            cluster.stop_cluster_sync()
        finally:
            for key, value in saved.items():
                if value is None:
                    os.environ.pop(key, None)
                else:
                    os.environ[key] = value


def local_answer(problem_path, seed, islands, generations=60, population=10):
    problem = load_problem(problem_path)
    settings = settings_from(
        problem,
        {"seed": seed, "islands": islands, "generations": generations, "population": population},
    )
    compiled = problem.compile()
    udp = LeveragingUDP.from_compiled(compiled, problem.name)
    search = make_search(compiled, udp, settings, SerialIslands())
    while not search.done:
        search.step()
    return finish(problem, settings, compiled, udp, search, "complete")


def leverage(*args):
    return [sys.executable, "-m", "leverage", *map(str, args)]


@pytest.mark.slow
def test_archipelago_and_sweep_on_two_local_engines(local_cluster, demo_path, tmp_path):
    env, connection = local_cluster

    # Islands on the engines, cluster named by its profile.
    out = tmp_path / "run"
    done = subprocess.run(
        leverage(
            "run",
            demo_path,
            "--out",
            out,
            "--quiet",
            "--islands",
            2,
            "--seed",
            3,
            "--cluster",
            PROFILE,
            *SMALL,
        ),
        env=env,
        capture_output=True,
        text=True,
        timeout=RUN_TIMEOUT_S,
    )
    assert done.returncode in (0, 3), done.stderr
    record = json.loads((out / "best.json").read_text())
    assert record["run"]["islands_evolved"] == "cluster"
    local = local_answer(demo_path, seed=3, islands=2)
    assert record["decision_vector"]["values"] == local["decision_vector"]["values"]
    assert record["objective"] == local["objective"]

    # Sweep runs farmed to the engines, cluster named by its connection file.
    remote = tmp_path / "sweep-cluster"
    done = subprocess.run(
        leverage(
            "sweep",
            demo_path,
            "--slice-days",
            180,
            "--out",
            remote,
            "--cluster",
            connection,
            *SMALL,
        ),
        env=env,
        capture_output=True,
        text=True,
        timeout=RUN_TIMEOUT_S,
    )
    assert done.returncode in (0, 3), done.stderr
    assert "runs on 2 ipyparallel engines" in done.stderr
    here = tmp_path / "sweep-local"
    assert (
        cli_main(
            [
                "sweep",
                str(demo_path),
                "--slice-days",
                "180",
                "--out",
                str(here),
                "--workers",
                "1",
                "--quiet",
                *SMALL,
            ]
        )
        == done.returncode
    )
    with open(remote / "sweep.csv", newline="") as a, open(here / "sweep.csv", newline="") as b:
        cluster_rows, local_rows = list(csv.DictReader(a)), list(csv.DictReader(b))
    assert len(cluster_rows) == 3 and all(r["runs_done"] == "1" for r in cluster_rows)
    assert cluster_rows == local_rows
    hosts = {json.loads(p.read_text())["run"]["host"] for p in remote.glob("runs/*/best.json")}
    assert hosts  # recorded where each run ran


def test_a_missing_connection_file_is_one_line(demo_path, tmp_path, capsys):
    missing = tmp_path / "nowhere" / "ipcontroller-client.json"
    assert (
        cli_main(["run", str(demo_path), "--out", str(tmp_path / "x"), "--cluster", str(missing)])
        == 2
    )
    err = capsys.readouterr().err.strip()
    # one line; a value over 80 characters is cut there, with its length in all
    (line,) = err.splitlines()
    assert line.startswith(f"leverage: command line: --cluster = '{str(missing)[:40]}")
    assert line.endswith(": no such connection file")
    assert str(missing) in line or f"({len(str(missing))} characters in all)" in line
    assert (
        cli_main(
            [
                "sweep",
                str(demo_path),
                "--slice-days",
                "30",
                "--workers",
                "2",
                "--cluster",
                "x",
                "--out",
                str(tmp_path / "y"),
            ]
        )
        == 2
    )
    assert "cannot be used with --cluster" in capsys.readouterr().err
