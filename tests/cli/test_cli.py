"""End-to-end runs through the command line: the files a run writes and what they hold.

Outside sources:
- Calendar dates of the timeline: astropy.time.Time (IAU SOFA/ERFA) converts the
  printed UTC dates back to TDB and compares them with best.json's epochs.
- C3 = v_inf^2 (definition of launch energy) relates two numbers of the record.
- hashlib.sha256 (FIPS 180-4) recomputes the problem hash from the problem file.
Everything else checks the project's own promises in README.md ("Using it": the run
folder's files, the convergence.csv header, exit codes, `leverage check` and `leverage
show`). Optimizer runs are marked slow and run at a small size unless --full-size.
Most runs evolve their islands in this process (--workers 1, the same champion as
worker processes, see test_runner.py) and skip the pictures and verification that
follow a run (issue 5's, tested with them); the demo run keeps both, as a user sees it.
"""

import csv
import hashlib
import json
import re
from pathlib import Path

import pytest
from astropy.time import Time

from leverage import CAUTION
from leverage.cli import main
from leverage.run import afterrun

ROOT = Path(__file__).resolve().parents[2]
PROBLEMS = ROOT / "problems"
TEMPLATES = ["outer-departure", "inclination-raise"]
SMALL = ["--generations", "100", "--population", "16"]
NUM = r"(-?\d+(?:\.\d+)?)"
DATE = r"(\d{4}-\d\d-\d\d \d\d:\d\d:\d\d)"


@pytest.fixture
def no_pictures(monkeypatch):
    monkeypatch.setattr(afterrun, "pictures_and_verification", lambda *a, **k: None)


def run_args(problem, out, full_size, *extra):
    args = ["run", str(problem), "--out", str(out), "--quiet"]
    return args + ([] if full_size else SMALL) + list(extra)


def documented_log_header() -> list[str]:
    """The convergence.csv header as README.md documents it."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    m = re.search(r"header `([a-z_,]+)`", readme)
    assert m, "README.md no longer documents the convergence.csv header"
    return m.group(1).split(",")


# ---------------------------------------------------------------- helpers


def agrees(printed: str, value: float) -> bool:
    """True when ``printed`` is ``value`` rounded to the decimals shown."""
    decimals = len(printed.split(".")[1]) if "." in printed else 0
    return abs(float(printed.replace(",", "")) - value) <= 0.5 * 10**-decimals + 1e-9 * abs(value)


def find(text: str, pattern: str) -> tuple:
    m = re.search(pattern, text, re.M)
    assert m, f"summary has no line matching {pattern!r}"
    return m.groups()


def value(record, name):
    return record["derived"][name]["value"]


def check_summary_against_record(text: str, record: dict):
    """Every number of the summary, re-derived from best.json."""
    events = {e["event"]: e for e in record["events"]}
    t0 = events["launch"]["epoch_tdb_s"]
    p, s, run = record["problem"], record["search"], record["run"]

    name, sha = find(text, r"^problem\s+(\S+)\s+\(sha256 ([0-9a-f]+)\)")
    assert name == p["file"] and p["sha256"].startswith(sha)
    algo, islands, pop, gens, seed, polish = find(
        text, r"^search\s+(\w+), (\d+) islands x (\d+), (\d+) generations, seed (\d+), polish (\w+)"
    )
    assert (algo, int(islands), int(pop), int(gens), int(seed), polish) == (
        s["algorithm"],
        s["islands"],
        s["population"],
        s["generations"],
        s["seed"],
        s["polish"],
    )
    sectors = s.get("epoch_sectors_deg") or []
    if len(sectors) > 1:
        (k, listed) = find(text, r"^\s+in (\d+) epochs, each starting afresh over .*: (.*) deg$")
        assert int(k) == len(sectors)
        assert listed == ", ".join(f"{lo:.1f}..{hi:.1f}" for lo, hi in sectors)
    evals, wall = find(text, r"^effort\s+([\d,]+) evaluations in search " + NUM + " s")
    assert int(evals.replace(",", "")) == run["evaluations"] and agrees(wall, run["wall_time_s"])
    # In its own unit and natural sign (record["objective_shown"]), not as minimised.
    shown = record["objective_shown"][0]
    unit = re.escape(f" {shown['unit']}") if shown["unit"] else ""
    (obj,) = find(text, r"^objective " + re.escape(shown["name"]) + " " + NUM + unit)
    assert agrees(obj, shown["factor"] * record["objective"][0])
    (feasible,) = find(text, r"^holds in the search model:\s+(yes|NO)")
    assert (feasible == "yes") == record["feasible"]
    (verified,) = find(text, r"^holds in the verification: (yes|NO|not run yet)")
    assert {"yes": True, "NO": False, "not run yet": None}[verified] == record["verification"][
        "holds"
    ]
    assert "feasible: yes" not in text

    for label, event in (("launch", "launch"), ("DSM", "dsm"), ("return flyby", "flyby")):
        date, day = find(text, rf"^\s+{label}\s+{DATE}\s+{NUM}\s")
        epoch = events[event]["epoch_tdb_s"]
        printed_tdb = Time(date, scale="utc").tdb
        assert abs((printed_tdb.jd1 - 2451545.0 + printed_tdb.jd2) * 86400.0 - epoch) < 1.0
        assert agrees(day, (epoch - t0) / 86400.0)
    c3, vinf = find(text, rf"^\s+launch\s+{DATE}\s+{NUM}\s+C3 {NUM} km\^2/s\^2, v-inf {NUM}")[2:]
    assert agrees(c3, value(record, "c3")) and agrees(vinf, value(record, "launch_vinf"))
    (dsm,) = find(text, rf"^\s+DSM\s+{DATE}\s+{NUM}\s+{NUM} km/s")[2:]
    assert agrees(dsm, value(record, "dsm"))
    vin, alt = find(
        text,
        rf"^\s+return flyby\s+{DATE}\s+{NUM}\s+v-inf {NUM} km/s, "
        rf"altitude {NUM} km",
    )[2:]
    assert agrees(vin, value(record, "flyby_vinf_in")) and agrees(
        alt, value(record, "flyby_altitude")
    )

    c3, dla, rla = find(text, rf"^launch\s+C3 {NUM} km\^2/s\^2, DLA {NUM} deg, RLA {NUM} deg")
    assert agrees(c3, value(record, "c3"))
    assert agrees(dla, value(record, "dla")) and agrees(rla, value(record, "rla"))
    got = find(
        text,
        rf"^DSM\s+{NUM} km/s\s+\(radial {NUM} km/s, along-track {NUM} km/s, "
        rf"normal {NUM} km/s\)",
    )
    for printed, key in zip(got, ("dsm", "dsm_radial", "dsm_along_track", "dsm_normal")):
        assert agrees(printed, value(record, key)), key
    revs, root = find(text, r"Lambert arc: (\d+) revolutions?, (low|high)-path root")
    assert int(revs) == value(record, "lambert_revolutions")
    assert (root == "low") == bool(value(record, "lambert_low_path"))
    got = find(
        text,
        rf"^flyby\s+altitude {NUM} km, turn {NUM} deg \(largest allowed {NUM} deg\), "
        rf"B-plane angle {NUM} deg",
    )
    for printed, key in zip(
        got, ("flyby_altitude", "turn_angle", "max_turn_angle", "bplane_angle")
    ):
        assert agrees(printed, value(record, key)), key
    got = find(
        text,
        rf"^v-inf\s+launch {NUM} km/s, flyby in {NUM} km/s, out {NUM} km/s, "
        rf"gain {NUM} km/s",
    )
    for printed, key in zip(got, ("launch_vinf", "flyby_vinf_in", "flyby_vinf_out", "vinf_gain")):
        assert agrees(printed, value(record, key)), key
    (ratio,) = find(text, rf"^leverage\s+{NUM} km/s per km/s")
    assert agrees(ratio, value(record, "leverage_ratio"))
    got = find(
        text,
        rf"^outgoing\s+a {NUM} au, e {NUM}, i {NUM} deg, perihelion {NUM} au, "
        rf"aphelion {NUM} au",
    )
    for printed, key in zip(
        got,
        (
            "outgoing_sma",
            "outgoing_eccentricity",
            "outgoing_inclination",
            "outgoing_perihelion",
            "outgoing_aphelion",
        ),
    ):
        assert agrees(printed, value(record, key)), key

    assert record["margins"], "a run always has margins"
    checked = {c["limit"]: c for c in record["verification"].get("margins", [])}
    for limit, m in record["margins"].items():
        # name, stated limit, margin asked, margin in the search model, in the verification
        asked, printed, verified, state = find(
            text, rf"^\s+{limit}\s+.*?\s{NUM}\s+{NUM}\s+(\S+)\s+(?:\S+\s+)?(ok|VIOLATED)$"
        )
        assert agrees(asked, m["required_margin"]) and agrees(printed, m["margin"]), limit
        assert (state == "ok") == m["holds"], limit
        assert m["holds"] == (m["margin"] >= m["required_margin"] - 1e-9), limit
        if limit in checked:
            assert agrees(verified.rstrip("!"), checked[limit]["check"]), limit
            assert verified.endswith("!") != checked[limit]["holds"], limit
        else:
            assert verified == "-", limit
    assert text.count(CAUTION) >= 1


def check_run_folder(out: Path, problem: Path, seed: int | None = None) -> dict:
    """The files of a finished run and what README.md says they hold; returns best.json."""
    for name in ("problem.toml", "convergence.csv", "best.json", "summary.txt"):
        assert (out / name).is_file(), name
    text = problem.read_text(encoding="utf-8")
    assert (out / "problem.toml").read_text(encoding="utf-8") == text
    record = json.loads((out / "best.json").read_text(encoding="utf-8"))

    assert record["caution"] == CAUTION
    assert record["status"] == "complete"
    assert record["problem"]["sha256"] == hashlib.sha256(text.encode()).hexdigest()
    if seed is not None:
        assert record["search"]["seed"] == seed
    versions = record["package_versions"]
    for package in ("leverage", "python", "numpy", "scipy", "numba", "pygmo", "astropy"):
        assert versions.get(package), package
    dv = record["decision_vector"]
    n = len(dv["names"])
    assert n >= 7 and all(len(dv[k]) == n for k in ("units", "values", "lower", "upper"))
    assert all(lo <= v <= hi for lo, v, hi in zip(dv["lower"], dv["values"], dv["upper"]))
    for name, item in record["derived"].items():
        assert {"value", "unit", "meaning"} <= set(item), name
    for name, m in record["margins"].items():
        assert {"margin", "unit", "holds"} <= set(m), name
    d = record["derived"]
    assert d["c3"]["unit"] == "km^2/s^2" and d["dsm"]["unit"] == "km/s"
    assert value(record, "c3") == pytest.approx(value(record, "launch_vinf") ** 2, rel=1e-9)
    assert value(record, "vinf_gain") == pytest.approx(
        value(record, "flyby_vinf_in") - value(record, "launch_vinf"), abs=1e-9
    )
    assert [e["event"] for e in record["events"]][:3] == ["launch", "dsm", "flyby"]

    summary = (out / "summary.txt").read_text(encoding="utf-8")
    check_summary_against_record(summary, record)
    check_convergence_log(out / "convergence.csv", record)
    return record


def check_convergence_log(path: Path, record: dict):
    with open(path, newline="", encoding="utf-8") as fh:
        reader = csv.DictReader(fh)
        assert reader.fieldnames == documented_log_header()
        rows = list(reader)
    s = record["search"]
    evolutions = record["run"]["evolutions"]
    assert len(rows) == s["islands"] * evolutions  # one row per island per evolution
    seen = {(int(r["evolution"]), r["island"]) for r in rows}
    assert seen == {(e, str(i)) for e in range(1, evolutions + 1) for i in range(s["islands"])}
    for island in map(str, range(s["islands"])):
        mine = [r for r in rows if r["island"] == island]
        gens = [int(r["generations"]) for r in mine]
        assert gens == [e * s["generations_per_migration"] for e in range(1, evolutions + 1)]
        evals = [int(r["evaluations"]) for r in mine]
        assert evals == sorted(evals) and evals[0] > 0
    walls = [float(r["wall_time_s"]) for r in rows]
    assert walls == sorted(walls) and walls[-1] <= record["run"]["wall_time_s"]
    for r in rows:
        assert float(r["best_objective"]) <= float(r["median_objective"])
        assert float(r["best_violation"]) >= 0.0
    last = [float(r["best_objective"]) for r in rows if int(r["evolution"]) == evolutions]
    # the polish only ever improves the champion of the last evolution
    assert record["objective"][0] <= min(last) + 1e-12


# ---------------------------------------------------------------- runs


@pytest.mark.slow
def test_demo_run_from_the_readme(tmp_path, full_size, capsys):
    """The README's command on the demo, with worker processes, pictures and all."""
    out = tmp_path / "demo"
    problem = PROBLEMS / "demo.toml"
    code = main(run_args(problem, out, full_size, "--seed", "3"))
    printed = capsys.readouterr().out
    assert code == 0  # a feasible design
    record = check_run_folder(out, problem, seed=3)
    assert record["feasible"] and record["run"]["evaluations"] > 1000
    summary = (out / "summary.txt").read_text(encoding="utf-8")
    assert summary in printed  # the summary is also printed
    assert main(["show", str(out)]) == 0
    shown, _, last = capsys.readouterr().out.rstrip("\n").rpartition("\n")
    assert shown.rstrip("\n") == summary.rstrip("\n") and last.startswith("refined   not yet")


@pytest.mark.slow
@pytest.mark.parametrize("name", TEMPLATES)
def test_template_runs_to_a_feasible_design(name, tmp_path, full_size, no_pictures, capsys):
    out = tmp_path / name
    problem = PROBLEMS / f"{name}.toml"
    assert main(run_args(problem, out, full_size, "--workers", "1")) == 0
    record = check_run_folder(out, problem)
    assert record["feasible"]
    capsys.readouterr()
    assert main(["show", str(out)]) == 0
    shown, _, last = capsys.readouterr().out.rstrip("\n").rpartition("\n")
    assert shown.rstrip("\n") == (out / "summary.txt").read_text(encoding="utf-8").rstrip("\n")
    assert last.startswith("refined   not yet")


@pytest.mark.slow
def test_no_feasible_design_exits_3(tmp_path, no_pictures, capsys):
    """Infeasible by construction: 70 km/s of v-infinity after the flyby with C3 <= 24
    and at most 0.5 km/s of DSM. Earth moves at ~30 km/s and the spacecraft leaves it at
    under 35 km/s, so even a head-on return is far below 70 km/s."""
    text = (PROBLEMS / "demo.toml").read_text(encoding="utf-8")
    text = text.replace(
        "min_outgoing_vinf_km_s = 7.5", "min_outgoing_vinf_km_s = 70.0\ndsm_budget_km_s = 0.5"
    )
    assert "70.0" in text
    problem = tmp_path / "unreachable.toml"
    problem.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    assert (
        main(
            [
                "run",
                str(problem),
                "--out",
                str(out),
                "--quiet",
                "--workers",
                "1",
                "--generations",
                "40",
                "--population",
                "16",
            ]
        )
        == 3
    )
    record = json.loads((out / "best.json").read_text(encoding="utf-8"))
    assert record["feasible"] is False
    assert record["margins"]["min_outgoing_vinf"]["holds"] is False
    summary = (out / "summary.txt").read_text(encoding="utf-8")
    assert "holds in the search model:  NO" in summary and "VIOLATED" in summary
    check_summary_against_record(summary, record)


def test_existing_output_folder_is_refused_without_force(tmp_path, capsys):
    out = tmp_path / "taken"
    out.mkdir()
    (out / "keep.txt").write_text("earlier work", encoding="utf-8")
    assert main(["run", str(PROBLEMS / "demo.toml"), "--out", str(out), "--quiet"]) == 2
    stdout, err = capsys.readouterr()
    assert len(err.splitlines()) == 1 and "--out" in err and str(out) in err
    assert "Traceback" not in err
    assert sorted(p.name for p in out.iterdir()) == ["keep.txt"]


def test_output_path_that_is_a_file_is_refused(tmp_path, capsys):
    out = tmp_path / "a-file"
    out.write_text("not a folder", encoding="utf-8")
    assert main(["run", str(PROBLEMS / "demo.toml"), "--out", str(out), "--force"]) == 2
    _, err = capsys.readouterr()
    assert len(err.splitlines()) == 1 and "not a folder" in err


def test_show_refuses_a_folder_without_a_result(tmp_path, capsys):
    assert main(["show", str(tmp_path)]) == 2
    _, err = capsys.readouterr()
    assert len(err.splitlines()) == 1 and str(tmp_path) in err
    (tmp_path / "best.json").write_text("{}", encoding="utf-8")
    assert main(["show", str(tmp_path)]) == 2
    _, err = capsys.readouterr()
    assert len(err.splitlines()) == 1 and "best.json" in err and "Traceback" not in err


@pytest.mark.parametrize("name", ["demo"] + TEMPLATES)
def test_check_lists_variables_with_bounds_and_units(name, capsys):
    path = PROBLEMS / f"{name}.toml"
    assert main(["check", str(path), "--samples", "3"]) == 0
    out = capsys.readouterr().out
    from leverage.problem.load import load_problem

    compiled = load_problem(path).compile()
    for var, lo, hi, unit in zip(compiled.names, compiled.lower, compiled.upper, compiled.units):
        line = next((ln for ln in out.splitlines() if ln.split()[:1] == [var]), None)
        assert line is not None, var
        assert line.rstrip().endswith(unit)
        lo_s, hi_s = line.split()[1:3]
        assert float(lo_s) == pytest.approx(lo, rel=1e-5, abs=1e-9)
        assert float(hi_s) == pytest.approx(hi, rel=1e-5, abs=1e-9)
    assert "3 random points" in out
