"""leverage show with several result folders (leverage.compare, leverage/cli/show.py).

No outside numbers are involved: the table must repeat each record's own values. The
fixture is a real small run of the (invented) demo problem; a second and third
folder are copies of it with one problem-file setting and some record fields changed.
"""

import json
import shutil

import pytest

from leverage.cli import main
from leverage.fileio import read_json
from leverage.reports import compare
from leverage.reports.summary import render as summary_render


@pytest.fixture(scope="module")
def folders(demo_result, tmp_path_factory):
    root = tmp_path_factory.mktemp("show")
    a = root / "baseline"
    shutil.copytree(demo_result, a)
    b = root / "higher-flyby"
    shutil.copytree(demo_result, b)
    text = (b / "problem.toml").read_text()
    (b / "problem.toml").write_text(
        text.replace("min_altitude_km = 300.0", "min_altitude_km = 1000.0")
    )
    record = read_json(b / "best.json")
    record["margins"]["min_flyby_altitude"]["margin"] = -12.5
    record["margins"]["min_flyby_altitude"]["holds"] = False
    record["feasible"] = False
    record["verification"] = {
        "holds": False,
        "status": "done",
        "broken": [{"limit": "min_flyby_altitude", "check": -12.5, "unit": "km"}],
        "margins": [],
    }
    record["run"]["evaluations"] = 123456
    (b / "best.json").write_text(json.dumps(record))
    return a, b


def _table(capsys, *paths):
    assert main(["show", *map(str, paths)]) == 0
    return capsys.readouterr().out


def _row(text, label):
    return next(ln for ln in text.splitlines() if ln.startswith(label))


def test_several_folders_side_by_side(folders, capsys):
    a, b = folders
    text = _table(capsys, a, b)
    ra, rb = read_json(a / "best.json"), read_json(b / "best.json")
    assert (
        f"folders in {a.parent}/:" in text and "A = baseline" in text and "B = higher-flyby" in text
    )
    assert "CAUTION" in text
    dsm = _row(text, "DSM (km/s)").split()[-2:]
    assert dsm == [f"{ra['derived']['dsm']['value']:.4f}", f"{rb['derived']['dsm']['value']:.4f}"]
    assert _row(text, "goal").split()[-2:] == [ra["problem"]["goal"]] * 2
    assert _row(text, "holds: search model").split()[-2:] == ["yes", "NO"]
    assert _row(text, "holds: verification").split()[-2:] == ["yes", "NO"]
    assert _row(text, "ephemeris").split()[-2:] == ["DE421", "DE421"]
    assert _row(text, "evaluations").split()[-1] == "123,456"
    altitude = _row(text, "  min_flyby_altitude")
    assert altitude.endswith("-12.5000 !")
    wall = _row(text, "search time (s)").split()[-2]
    assert float(wall) == pytest.approx(ra["run"]["wall_time_s"], abs=0.05)
    # the problem-file setting that differs is named with both values
    diff = _row(text, "  flyby.min_altitude_km").split()
    assert diff[-2:] == ["300.0", "1000.0"]


def test_one_folder_keeps_the_full_summary(folders, capsys):
    a, _ = folders
    text = _table(capsys, a)
    summary, _, last = text.strip().rpartition("\n")
    assert summary.strip() == summary_render(read_json(a / "best.json")).strip()
    assert last.startswith("refined   ")


def test_same_problem_files_say_so(folders):
    a, _ = folders
    assert compare.setting_differences([a, a]) == []
    text = compare.render([str(a), str(a)], [read_json(a / "best.json")] * 2)
    assert "no setting differs" in text


def test_a_folder_without_best_json_is_a_one_line_error(folders, tmp_path, capsys):
    a, _ = folders
    assert main(["show", str(a), str(tmp_path)]) == 2
    err = capsys.readouterr().err.strip()
    assert "no best.json here" in err and len(err.splitlines()) == 1


def test_show_says_whether_a_result_was_refined(folders, capsys, tmp_path):
    a, _ = folders
    folder = tmp_path / "refined-run"
    shutil.copytree(a, folder)
    assert main(["show", str(folder)]) == 0
    assert "refined   not yet (leverage refine RESULT_DIR" in capsys.readouterr().out
    (folder / "refined").mkdir()
    (folder / "refined" / "refined.json").write_text(
        json.dumps(
            {
                "status": "converged",
                "derived": {"dsm": {"value": 0.8011, "unit": "km/s", "patched_conic": 0.8112}},
            }
        )
    )
    assert main(["show", str(folder)]) == 0
    out = capsys.readouterr().out
    assert "refined   converged in an n-body model; DSM 0.8112 -> 0.8011 km/s (-10.1 m/s)" in out
    assert "iteration limit" not in out
    assert main(["show", str(folder), str(a)]) == 0
    row = next(
        ln for ln in capsys.readouterr().out.splitlines() if ln.startswith("refined DSM (km/s)")
    )
    assert row.split()[-2:] == ["0.8011", "not"] or row.endswith("not yet")
    # refine says when its budget, not a settled optimiser, ended it (refined.json)
    data = json.loads((folder / "refined" / "refined.json").read_text())
    data["stopped_at_iteration_limit"] = True
    (folder / "refined" / "refined.json").write_text(json.dumps(data))
    assert main(["show", str(folder)]) == 0
    assert (
        "(-10.1 m/s); stopped at its iteration limit, not a proven optimum; see refined/"
        in capsys.readouterr().out
    )


def test_six_long_named_folders_stay_aligned_in_100_columns(demo_result, tmp_path, capsys):
    """Six folders with 70-character names, a long problem name and wide numbers: every
    line fits in 100 columns, every row of a block of columns is as long as its header
    row (right-aligned cells in fixed columns), and a value cut to fit says so."""
    paths = []
    for k in range(6):
        folder = tmp_path / (
            f"study-{k}-" + "launch-window-trade-with-a-long-descriptive-name" + "x" * 12
        )
        shutil.copytree(demo_result, folder)
        record = read_json(folder / "best.json")
        record["problem"]["name"] = "a study name far longer than any column of the table"
        record["run"]["evaluations"] = 123_456_789_012 + k
        (folder / "best.json").write_text(json.dumps(record))
        paths.append(folder)
    text = _table(capsys, *paths)
    lines = text.splitlines()
    assert max(len(line) for line in lines) <= 100
    for k, letter in enumerate("ABCDEF"):
        assert f"{letter} = {paths[k].name}" in text
    # the header row of letters, then its rows down to the blank line
    (header,) = [i for i, line in enumerate(lines) if line.split() == list("ABCDEF")]
    j = header + 1
    while lines[j].strip():
        assert len(lines[j]) == len(lines[header]), (lines[header], lines[j])
        j += 1
    assert j - header > 20  # the whole block of key numbers was checked
    problem_row = _row(text, "problem ")
    assert problem_row.count("~") == 6 and problem_row.count("a study na") == 6
    evaluations = _row(text, "evaluations").split()[1:]
    assert len(evaluations) == 6 and all(c.startswith("123,456,") for c in evaluations)
    assert "~ ends a value cut to fit 100 columns" in text
