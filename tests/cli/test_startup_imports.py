"""Commands that do not search import nothing heavy they do not use (issue 13: every
command took 5-8 s to start because building the command imported every subcommand's
dependencies).

Checked against Python's own record of what was imported (``sys.modules``) in a fresh
interpreter per command; no timing is asserted (benchmarks/startup.py measures it).
"""

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
HEAVY = ("numba", "pygmo", "poliastro", "astropy", "matplotlib", "scipy")
PROBE = """
import json, sys
from leverage.cli import main
code = main(sys.argv[1:])
print(json.dumps({"code": code, "heavy": [m for m in %r if m in sys.modules]}))
""" % (HEAVY,)


def heavy_imports(*argv) -> dict:
    proc = subprocess.run(
        [sys.executable, "-c", PROBE, *map(str, argv)],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=600,  # a hang guard only: a cold numba cache may compile for minutes
    )
    return json.loads(proc.stdout.strip().splitlines()[-1])


@pytest.mark.parametrize("several", [False, True])
def test_show_imports_nothing_heavy(demo_result, several):
    folders = [demo_result, demo_result] if several else [demo_result]
    assert heavy_imports("show", *folders) == {"code": 0, "heavy": []}


def test_new_and_help_import_nothing_heavy(tmp_path):
    assert heavy_imports("new", tmp_path / "study.toml") == {"code": 0, "heavy": []}


def test_check_imports_no_search_and_no_pictures(demo_path):
    """check evaluates points (numba, poliastro's Lambert kernel) and reads dates
    (astropy); it needs no optimiser (pygmo) and no pictures (matplotlib). numba itself
    imports scipy's top package."""
    out = heavy_imports("check", demo_path)
    assert out["code"] == 0
    assert "pygmo" not in out["heavy"] and "matplotlib" not in out["heavy"]


def test_export_imports_no_search_and_no_pictures(demo_result, tmp_path):
    out = heavy_imports(
        "export", demo_result, "--format", "csv", "--output", tmp_path / "states.csv"
    )
    assert out["code"] == 0
    assert "pygmo" not in out["heavy"] and "matplotlib" not in out["heavy"]
