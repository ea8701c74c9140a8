"""Problem files: valid files load with defaults filled; bad files give one line.

Outside sources:
- Calendar dates to TDB days past J2000: astropy.time.Time (IAU SOFA/ERFA), used
  directly here, independently of leverage.times.
- C3 = v_inf^2 (definition of launch energy), so the v-infinity bounds are the
  square roots of the C3 bounds.
- Earth's equatorial radius 6378.1 km: IAU 2015 Resolution B3 nominal value.
Everything else checks the project's own promises (README, "Exit codes" and
"Problem files"): a bad file or command line exits 2 with one line on stderr naming
the file, the key and the value, and never a traceback. The corpus of bad files is
in tests/problem/bad_problems/; each states the fragments its message must contain on
``# expect:`` lines.
"""

import math
from pathlib import Path

import numpy as np
import pytest
from astropy.time import Time

from leverage.cli import main
from leverage.problem.load import load_problem

ROOT = Path(__file__).resolve().parents[2]
BAD = Path(__file__).resolve().parent / "bad_problems"
BAD_FILES = sorted(BAD.glob("*.toml"))
SHIPPED = sorted((ROOT / "problems").glob("*.toml"))

MINIMAL = """
[body]
name = "earth"

[launch]
window_open_utc = "2031-01-01"
window_close_utc = "2031-12-31"
max_c3_km2_s2 = 20.0

[loop]
duration_days = [700.0, 800.0]
"""


def expectations(path: Path) -> list[str]:
    return [
        line.split(":", 1)[1].strip()
        for line in path.read_text(encoding="utf-8").splitlines()
        if line.startswith("# expect:")
    ]


def one_error_line(capsys) -> str:
    """The single line a refused input must print to stderr (nothing on stdout)."""
    out, err = capsys.readouterr()
    assert "Traceback" not in err and "Traceback" not in out
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert out == ""
    return lines[0]


# ---------------------------------------------------------------- valid files


def test_minimal_file_gets_the_documented_defaults(tmp_path):
    path = tmp_path / "minimal.toml"
    path.write_text(MINIMAL, encoding="utf-8")
    problem = load_problem(path)
    v = problem.values
    assert problem.name == "minimal"  # the file name without .toml
    assert v["launch"]["min_c3_km2_s2"] == 0.0
    assert (v["launch"]["min_dla_deg"], v["launch"]["max_dla_deg"]) == (-90.0, 90.0)
    assert v["loop"]["dsm_fraction"] == [0.05, 0.95]
    assert v["loop"]["revolutions"] == [0, v["loop"]["max_revolutions"]]  # "any"
    assert v["flyby"]["min_altitude_km"] == problem.body.default_min_flyby_altitude_km
    assert v["flyby"]["max_altitude_km"] == pytest.approx(10 * 6378.1)  # 10 Earth radii
    assert v["goal"]["kind"] == "min_dsm"
    assert v["goal"]["dsm_budget_km_s"] is None
    s = v["search"]
    assert (s["algorithm"], s["islands"], s["seed"]) == ("de", 2, 1)
    assert s["population"] >= 8 and s["generations"] >= 1


def test_minimal_file_compiles_to_the_expected_bounds(tmp_path):
    path = tmp_path / "minimal.toml"
    path.write_text(MINIMAL, encoding="utf-8")
    c = load_problem(path).compile()
    j2000 = 2451545.0
    open_day = Time("2031-01-01", scale="utc").tdb.jd - j2000
    close_day = Time("2031-12-31", scale="utc").tdb.jd - j2000
    assert c.lower[0] == pytest.approx(open_day, abs=1e-8)
    assert c.upper[0] == pytest.approx(close_day, abs=1e-8)
    assert c.upper[1] == pytest.approx(math.sqrt(20.0))  # v_inf = sqrt(C3)
    assert c.lower[1] == 0.0
    assert list(c.lower[4:6]) == [700.0, 0.05] and list(c.upper[4:6]) == [800.0, 0.95]
    assert np.all(c.lower <= c.upper)
    assert len(c.names) == len(c.units) == len(c.lower)


@pytest.mark.parametrize("path", SHIPPED, ids=[p.stem for p in SHIPPED])
def test_shipped_problems_load_and_say_what_they_are(path):
    problem = load_problem(path)
    c = problem.compile()
    assert np.all(c.lower <= c.upper)
    head = path.read_text(encoding="utf-8").split("[", 1)[0].lower()
    assert "invented" in head  # every shipped file says its scenario numbers are invented


def test_shipped_problems_include_the_demo_and_two_templates():
    names = {p.stem for p in SHIPPED}
    assert {"demo", "outer-departure", "inclination-raise"} <= names


def test_offset_datetime_is_the_same_instant_in_utc(tmp_path):
    plain = tmp_path / "plain.toml"
    plain.write_text(MINIMAL, encoding="utf-8")
    offset = tmp_path / "offset.toml"
    offset.write_text(
        MINIMAL.replace('"2031-01-01"', "2031-01-01T02:00:00+02:00"), encoding="utf-8"
    )
    assert load_problem(offset).compile().lower[0] == pytest.approx(
        load_problem(plain).compile().lower[0], abs=1e-9
    )


# ---------------------------------------------------------------- bad files


def test_the_corpus_is_large_enough():
    assert len(BAD_FILES) >= 20
    for path in BAD_FILES:
        assert expectations(path), f"{path.name} has no '# expect:' line"


@pytest.mark.parametrize("path", BAD_FILES, ids=[p.stem for p in BAD_FILES])
def test_bad_file_gives_one_line_naming_file_key_and_value(path, capsys):
    assert main(["check", str(path)]) == 2
    line = one_error_line(capsys)
    assert str(path) in line
    for fragment in expectations(path):
        assert fragment in line, f"{fragment!r} not in {line!r}"


def test_bad_file_is_refused_by_run_too(tmp_path, capsys):
    path = BAD / "unknown_body.toml"
    out = tmp_path / "out"
    assert main(["run", str(path), "--out", str(out)]) == 2
    assert "'pluto'" in one_error_line(capsys)
    assert not out.exists()  # nothing written for a refused problem


def test_directory_is_refused(tmp_path, capsys):
    assert main(["check", str(tmp_path)]) == 2
    line = one_error_line(capsys)
    assert str(tmp_path) in line and "directory" in line


def test_missing_file_is_refused(tmp_path, capsys):
    path = tmp_path / "nowhere.toml"
    assert main(["check", str(path)]) == 2
    line = one_error_line(capsys)
    assert str(path) in line and "no such file" in line


def test_non_utf8_file_is_refused(tmp_path, capsys):
    path = tmp_path / "latin1.toml"
    path.write_bytes(MINIMAL.replace("earth", "\xe9arth").encode("latin-1"))
    assert main(["check", str(path)]) == 2
    line = one_error_line(capsys)
    assert str(path) in line and "utf-8" in line.lower()


# ---------------------------------------------------------------- bad command lines


@pytest.mark.parametrize(
    "option, value, fragment",
    [
        ("--seed", "-1", "at least 0"),
        ("--algorithm", "nope", "expected one of"),
        ("--islands", "0", "at least 1"),
        ("--population", "2", "at least 8"),
        ("--generations", "0", "at least 1"),
        ("--generations", "many", "invalid int value"),
    ],
)
def test_bad_command_line_value_gives_one_line(option, value, fragment, tmp_path, capsys):
    out = tmp_path / "out"
    code = main(["run", str(ROOT / "problems" / "demo.toml"), "--out", str(out), option, value])
    assert code == 2
    line = one_error_line(capsys)
    assert option in line and value in line and fragment in line
    assert not out.exists()


def test_unknown_option_and_missing_command_give_one_line(capsys):
    assert main(["run", "--colour", "red"]) == 2
    assert "--colour" in one_error_line(capsys)
    assert main([]) == 2
    one_error_line(capsys)
