"""The benchmark scripts still run: each one's ``--smoke`` mode, at a tiny size.

No outside sources: these tests check only that every script in ``benchmarks/`` runs to
the end, exits 0 and prints its sections; they assert nothing about timings (speed is
reported by the benchmarks themselves, never tested). The 1800 s subprocess timeout only
guards against a hang (measured 2-17 s each on an idle machine).
"""

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def smoke(module: str) -> str:
    proc = subprocess.run(
        [sys.executable, "-m", f"benchmarks.{module}", "--smoke"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=1800,
    )
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert "load average at end" in proc.stdout
    return proc.stdout


@pytest.mark.slow
def test_eval_cost_smoke():
    out = smoke("eval_cost")
    assert "batch, 1 thread" in out
    assert "demo, --islands 1" in out
    assert "x floor" in out


@pytest.mark.slow
def test_compare_trees_smoke():
    out = smoke("compare_trees")  # this checkout against itself
    assert "floor / kernel pair" in out
    assert "demo run" in out and "front run" in out


@pytest.mark.slow
def test_de_design_smoke():
    out = smoke("de_design")
    assert "one table, combined at build time" in out and "cubic Hermite" in out


@pytest.mark.slow
def test_best_known_smoke_does_not_write(tmp_path):
    known = ROOT / "benchmarks" / "best_known.json"
    before = known.read_bytes() if known.exists() else None
    out = smoke("best_known")
    assert "best-known objective" in out
    assert (known.read_bytes() if known.exists() else None) == before


@pytest.mark.slow
def test_search_quality_smoke():
    out = smoke("search_quality")
    assert "sade" in out and "/2" in out


@pytest.mark.slow
def test_startup_smoke():
    out = smoke("startup")
    assert "to first evaluation" in out


@pytest.mark.slow
def test_mutants_smoke():
    """One mutant in a temporary copy: the clean copy passes, the mutant is caught."""
    out = smoke("mutants")
    assert "unmutated copy, 1 test file(s) or test(s): exit 0" in out
    assert "turn-angle-half" in out and "caught 1 of 1" in out


def test_every_mutant_finds_its_text_once():
    """The mutation script replaces exact source text: a reformat or a model change that
    moves it must update the mutant (benchmarks/mutants.py stops on 0 or 2+ matches)."""
    from benchmarks.mutants import MUTANTS

    counts = {m.name: (ROOT / m.path).read_text(encoding="utf-8").count(m.old) for m in MUTANTS}
    assert all(n == 1 for n in counts.values()), counts
    assert len(MUTANTS) >= 12


@pytest.mark.slow
def test_front_search_smoke():
    out = smoke("front_search")
    assert "x floor" in out and "pygmo_nsga2" in out
    assert "hypervolume (km/s)^2: median" in out
