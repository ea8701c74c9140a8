"""Plausibility warnings: values that are valid but look like a slip of units.

They are warnings (the file loads, ``Problem.warnings``), one stderr line each from
``leverage check`` and ``leverage run``; a refusal of the same key carries the hint.
``leverage check`` exits 7 when its feasibility screen finds the goal unreachable.
Unit facts used: 1 km/s = 1000 m/s; 1 year = 365.25 days (Julian year); pi rad = 180 deg.
"""

from pathlib import Path

import pytest

from leverage.cli import EXIT_UNREACHABLE, main
from leverage.problem.load import load_problem, load_problem_text
from leverage.problem.plausibility import warnings

ROOT = Path(__file__).resolve().parents[2]
SHIPPED = sorted((ROOT / "problems").glob("*.toml"))

BASE = """
[body]
name = "earth"

[launch]
window_open_utc = "2031-01-01"
window_close_utc = "2031-12-31"
max_c3_km2_s2 = 24.0
{launch}
[loop]
duration_days = {duration}

[goal]
min_outgoing_vinf_km_s = {vinf}
"""


def problem_text(vinf="7.5", duration="[650.0, 850.0]", launch=""):
    return BASE.format(vinf=vinf, duration=duration, launch=launch)


@pytest.mark.parametrize("path", SHIPPED, ids=[p.stem for p in SHIPPED])
def test_shipped_problems_raise_no_warning(path):
    assert load_problem(path).warnings == []


def test_speed_typed_in_m_per_s_is_named_with_key_value_and_slip():
    slips = load_problem_text(problem_text(vinf="7500")).warnings
    assert [str(s) for s in slips] == [
        "[goal] min_outgoing_vinf_km_s = 7500: over 50 km/s; typed in m/s? 7500 m/s is 7.5 km/s"
    ]


def test_years_typed_as_days_is_named_in_the_refusal_it_causes():
    # [1.2, 2.0] days cannot leave Earth's sphere of influence: refused, with the hint.
    with pytest.raises(Exception) as info:
        load_problem_text(problem_text(duration="[1.2, 2.0]"))
    text = str(info.value)
    assert "[loop] duration_days" in text and "shortest loop" in text
    assert "typed in years? [1.2, 2] years is [438, 730] days" in text


def test_years_typed_as_days_warns_when_the_file_is_otherwise_valid():
    values = {"loop": {"duration_days": [2.0, 3.0]}}
    (slip,) = warnings(values)
    assert slip.key == "[loop] duration_days" and "[730, 1096] days" in slip.hint


@pytest.mark.parametrize(
    "angles, shown", [("[-3.1416, 3.1416]", "-180 deg"), ("[-1.57, 1.57]", "-89.95 deg")]
)
def test_radians_in_a_degree_key_warn(angles, shown):
    text = problem_text(launch=f"in_plane_angle_deg = {angles}\n")
    (slip,) = load_problem_text(text).warnings
    assert slip.key == "[launch] in_plane_angle_deg" and "looks like radians" in slip.hint
    assert shown in slip.hint


def test_whole_degrees_and_ordinary_values_do_not_warn():
    text = problem_text(launch="in_plane_angle_deg = [-90.0, 3.0]\nmin_dla_deg = -28.5\n")
    assert load_problem_text(text).warnings == []


def test_check_prints_one_warning_line_per_slip_and_exits_7_when_unreachable(tmp_path, capsys):
    path = tmp_path / "slip.toml"
    path.write_text(
        problem_text(vinf="7500", launch="out_of_plane_angle_deg = [-1.5708, 1.5708]\n"),
        encoding="utf-8",
    )
    assert main(["check", str(path), "--samples", "1"]) == EXIT_UNREACHABLE == 7
    out, err = capsys.readouterr()
    lines = err.splitlines()
    warned = [line for line in lines if line.startswith("leverage: warning: ")]
    assert len(warned) == 2
    assert "[launch] out_of_plane_angle_deg = [-1.5708, 1.5708]" in warned[0]
    assert "radians" in warned[0]
    assert "[goal] min_outgoing_vinf_km_s = 7500" in warned[1] and "m/s" in warned[1]
    assert "verdict: UNREACHABLE" in out
    assert lines[-1].endswith("(see the screen above)") and "unreachable" in lines[-1]


def test_run_prints_the_warnings_too(tmp_path, capsys):
    path = tmp_path / "slip.toml"
    path.write_text(problem_text(vinf="7500"), encoding="utf-8")
    blocker = tmp_path / "a-file"
    blocker.write_text("", encoding="utf-8")
    # --out names a file: refused after loading, before any search.
    assert main(["run", str(path), "--out", str(blocker)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err[0].startswith(f"leverage: warning: {path}: [goal] min_outgoing_vinf_km_s = 7500")
    assert "is a file, not a folder" in err[1]


def test_check_of_a_reachable_goal_exits_0(capsys):
    assert main(["check", str(ROOT / "problems" / "demo.toml"), "--samples", "1"]) == 0
    assert "leverage:" not in capsys.readouterr().err
