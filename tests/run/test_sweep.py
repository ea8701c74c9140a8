"""Launch-window sweeps: slices (leverage/slices.py), the table and launch period
(leverage/sweep_report.py) and a small real sweep with resume (leverage/sweep.py).

Outside sources: the calendar arithmetic is checked against astropy ``Time`` (UTC to
TDB days past J2000, astropy 5.3) and Python's ``datetime``; the sweep's runs are held
to ``leverage run`` on the same slice file and seed (the same champion, bit for bit).
"""

import csv
import json

import pytest
from astropy.time import Time

from leverage.cli import main as cli_main
from leverage.errors import ProblemError
from leverage.problem.load import load_problem
from leverage.reports.sweep_table import launch_periods
from leverage.run.runner import finish, make_search, settings_from
from leverage.run.slices import Slice, replace_key, window_slices, write_slice_problems
from leverage.search.islands import SerialIslands
from leverage.search.udp import LeveragingUDP


def test_slices_cover_the_window_edge_to_edge(demo_path):
    problem = load_problem(demo_path)  # window 2031-01-01 .. 2031-12-31: 364 days
    slices = window_slices(problem, 30)
    assert len(slices) == 13  # 12 full slices of 30 days and one of 4
    assert slices[0].start_utc == "2031-01-01" and slices[-1].end_utc == "2031-12-31"
    for a, b in zip(slices, slices[1:]):
        assert a.end_utc == b.start_utc
    assert [s.days for s in slices] == [30.0] * 12 + [4.0]
    assert window_slices(problem, 400) == [Slice(1, "2031-01-01", "2031-12-31")]
    half = window_slices(problem, 0.5)
    assert half[1].start_utc == "2031-01-01T12:00:00"
    for bad in (0, -3, float("nan")):
        with pytest.raises(ProblemError, match="--slice-days"):
            window_slices(problem, bad)


def test_slice_problem_files_bound_the_launch_epoch(demo_path, tmp_path):
    problem = load_problem(demo_path)
    slices = window_slices(problem, 100)
    loaded = write_slice_problems(problem, slices, tmp_path)
    assert [p.source for p in loaded] == [str(tmp_path / f"{s.name}.toml") for s in slices]
    for sl, sub in zip(slices, loaded):
        compiled = sub.compile()
        # launch epoch bounds, TDB days past J2000 (astropy: JD(TDB) - 2451545.0)
        lo = Time(sub.values["launch"]["window_open_utc"], scale="utc").tdb.jd - 2451545.0
        assert sub.values["launch"]["window_open_utc"] == sl.start_utc
        assert compiled.lower[0] == pytest.approx(lo, abs=1e-9)
        hi = Time(sl.end_utc, scale="utc").tdb.jd - 2451545.0
        assert compiled.upper[0] == pytest.approx(hi, abs=1e-9)
        # everything else is the original problem
        assert compiled.lower[1:].tolist() == problem.compile().lower[1:].tolist()
        assert sub.values["goal"] == problem.values["goal"]


def test_replace_key_refuses_a_window_it_cannot_find():
    text = '[launch]\nwindow = { window_open_utc = "2031-01-01" }\n'
    with pytest.raises(ProblemError, match=r"\[launch\] window_open_utc: a sweep needs"):
        replace_key(text, "x.toml", "launch", "window_open_utc", "2031-02-01")
    text = '[launch]\n  window_open_utc = "2031-01-01" # open\n[loop]\nwindow_open_utc = 1\n'
    out = replace_key(text, "x.toml", "launch", "window_open_utc", "2031-02-01")
    assert out.splitlines()[1].startswith('  window_open_utc = "2031-02-01"')
    assert out.splitlines()[3] == "window_open_utc = 1"


def _row(n, start, end, objective, feasible):
    return {
        "slice": n,
        "start_utc": start,
        "end_utc": end,
        "best_objective": "" if objective is None else repr(objective),
        "feasible": "" if objective is None else int(feasible),
    }


def test_launch_periods_are_runs_of_slices_within_budget():
    rows = [
        _row(1, "2031-01-01", "2031-01-31", 0.9, True),
        _row(2, "2031-01-31", "2031-03-02", 1.1, True),
        _row(3, "2031-03-02", "2031-04-01", 0.5, False),  # a limit violated
        _row(4, "2031-04-01", "2031-05-01", 0.8, True),
        _row(5, "2031-05-01", "2031-05-31", None, False),  # not run yet
        _row(6, "2031-05-31", "2031-06-30", 0.7, True),
    ]
    spans = [(a["slice"], b["slice"]) for a, b in launch_periods(rows, None)]
    assert spans == [(1, 2), (4, 4), (6, 6)]
    spans = [(a["slice"], b["slice"]) for a, b in launch_periods(rows, 1.0)]
    assert spans == [(1, 1), (4, 4), (6, 6)]
    assert launch_periods(rows, 0.1) == []


def read_csv(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


@pytest.mark.slow
def test_small_sweep_writes_runs_table_and_resumes(demo_path, tmp_path, capsys, full_size):
    out = tmp_path / "sweep"
    size = [] if full_size else ["--generations", "60", "--population", "10"]
    args = [
        "sweep",
        str(demo_path),
        "--slice-days",
        "150",
        "--seeds",
        "2",
        "--out",
        str(out),
        "--workers",
        "2",
        *size,
    ]
    code = cli_main(args)
    captured = capsys.readouterr()
    assert code in (0, 3), captured.err
    rows = read_csv(out / "sweep.csv")
    assert [r["slice"] for r in rows] == ["1", "2", "3"]
    assert [(r["start_utc"], r["end_utc"]) for r in rows] == [
        ("2031-01-01", "2031-05-31"),
        ("2031-05-31", "2031-10-28"),
        ("2031-10-28", "2031-12-31"),
    ]
    assert all(r["runs_done"] == "2" for r in rows)
    for sl in (1, 2, 3):
        for seed in (1, 2):
            folder = out / "runs" / f"slice-{sl:02d}-seed-{seed}"
            for name in ("problem.toml", "convergence.csv", "best.json", "summary.txt"):
                assert (folder / name).is_file(), folder / name
    text = (out / "sweep.txt").read_text()
    assert "launch period (best design meets every limit)" in text
    assert "Preliminary patched-conic design" in text
    assert "runs 6/6, slices done 3/3, best so far total DSM " in captured.err
    # objectives in their own unit (the demo minimises the DSM: factor 1, km/s)
    assert "objective total DSM, km/s (lower is better)" in text
    assert all(r["objective_unit"] == "km/s" for r in rows)
    assert all(float(r["objective_value"]) == float(r["best_objective"]) for r in rows)
    # show and plot take the sweep folder: its table, and launch_window.png
    (out / "launch_window.png").unlink()
    assert cli_main(["show", str(out)]) == 0
    assert "leverage sweep: demo (complete, 6/6 runs)" in capsys.readouterr().out
    assert cli_main(["plot", str(out)]) == 0
    assert capsys.readouterr().out.strip() == str(out / "launch_window.png")

    # The table's best of slice 2 is the better of its two runs ...
    records = [
        json.loads((out / "runs" / f"slice-02-seed-{s}" / "best.json").read_text()) for s in (1, 2)
    ]
    best = min(records, key=lambda r: (not r["feasible"], r["objective"][0]))
    assert float(rows[1]["best_objective"]) == best["objective"][0]
    assert rows[1]["result_folder"] == f"runs/slice-02-seed-{best['search']['seed']}"
    # ... and a sweep run is exactly a plain run of that slice's problem file and seed.
    sub = load_problem(out / "slices" / "slice-02.toml")
    settings = settings_from(
        sub, {"seed": 2, **({} if full_size else {"generations": 60, "population": 10})}
    )
    compiled = sub.compile()
    udp = LeveragingUDP.from_compiled(compiled, sub.name)
    search = make_search(compiled, udp, settings, SerialIslands())
    while not search.done:
        search.step()
    plain = finish(sub, settings, compiled, udp, search, "complete")
    assert records[1]["decision_vector"]["values"] == plain["decision_vector"]["values"]

    # Resume: only the run whose best.json is gone runs again; the table comes out the same.
    (out / "runs" / "slice-03-seed-1" / "best.json").unlink()
    table_before = (out / "sweep.csv").read_text()
    assert (
        cli_main(
            [
                "sweep",
                str(demo_path),
                "--slice-days",
                "150",
                "--seeds",
                "2",
                "--resume",
                str(out),
                "--workers",
                "1",
                *size,
            ]
        )
        == code
    )
    err = capsys.readouterr().err
    assert "5 of 6 runs already done, 1 to go" in err
    assert (out / "sweep.csv").read_text() == table_before

    # A second sweep into the folder is refused, and so is a resume that asks otherwise.
    assert cli_main(args) == 2
    assert "folder exists and is not empty" in capsys.readouterr().err
    assert (
        cli_main(
            [
                "sweep",
                str(demo_path),
                "--slice-days",
                "100",
                "--seeds",
                "2",
                "--resume",
                str(out),
                *size,
            ]
        )
        == 2
    )
    assert "differs in its --slice-days" in capsys.readouterr().err
