"""Tests of loops longer than one year: the DSM-to-return Lambert arc may make several
revolutions, and with revolutions = "any" each evaluation keeps the best branch.

Outside sources: none numeric. The problems are the invented demo (problems/demo.toml)
with its loop window moved to two years or three years. Two-body timing (Kepler's
third law; from memory) says a two-year loop from Earth at C3 <= 24 km^2/s^2 (period
under two years) returns on the first pass after the DSM (0 revolutions), while a
three-year loop needs a whole revolution between the DSM and the return.
"""

import json

import numpy as np
import pytest

from leverage.core import layout as L
from leverage.problem.load import load_problem
from leverage.run.runner import Progress, run, settings_from
from leverage.search.udp import LeveragingUDP

WINDOWS = {"two-year": ([680.0, 780.0], 0), "three-year": ([1040.0, 1140.0], 1)}


def loop_problem(demo_path, tmp_path, window, revolutions='"any"'):
    text = demo_path.read_text()
    for old, new in [
        ("duration_days = [650.0, 850.0]", f"duration_days = {window}"),
        ("dsm_fraction = [0.2, 0.8]", "dsm_fraction = [0.05, 0.95]"),
        ("revolutions = 0", f"revolutions = {revolutions}\nmax_revolutions = 2"),
    ]:
        assert old in text
        text = text.replace(old, new)
    path = tmp_path / f"loop-{window[0]:.0f}-{revolutions.strip(chr(34))}.toml"
    path.write_text(text)
    return load_problem(path)


def test_any_keeps_the_best_branch_at_every_point(demo_path, tmp_path):
    any_udp = LeveragingUDP.from_compiled(
        loop_problem(demo_path, tmp_path, [650.0, 1150.0]).compile()
    )
    fixed = [
        LeveragingUDP.from_compiled(
            loop_problem(demo_path, tmp_path, [650.0, 1150.0], str(m)).compile()
        )
        for m in (0, 1, 2)
    ]
    compiled = loop_problem(demo_path, tmp_path, [650.0, 1150.0]).compile()
    rng = np.random.default_rng(7)
    for _ in range(40):
        x = compiled.lower + rng.random(8) * (compiled.upper - compiled.lower)
        solved = [u.fitness(x)[0] for u in fixed if u.details(x)[L.Q_OK] == 1.0]
        if solved:  # branches whose arc cannot be solved are skipped, not scored
            assert any_udp.fitness(x)[0] == min(solved)
        else:
            assert any_udp.details(x)[L.Q_OK] == 0.0


@pytest.mark.slow
@pytest.mark.parametrize("name", sorted(WINDOWS))
def test_each_loop_length_finds_its_own_optimum(demo_path, tmp_path, full_size, name):
    window, revs = WINDOWS[name]
    problem = loop_problem(demo_path, tmp_path, window)
    # 1000 generations: at 400 (two evolutions of the default 200) the three-year search
    # ended on a poorer design returning on the first pass (0 revolutions)
    settings = settings_from(problem, None if full_size else {"generations": 1000})
    out = tmp_path / name
    outcome = run(problem, settings, out, Progress(1, enabled=False), echo=lambda *a: None)
    record = json.loads((out / "best.json").read_text())
    assert outcome.status == "complete" and outcome.feasible and record["feasible"]
    x = np.array(record["decision_vector"]["values"])
    assert window[0] <= x[L.X_LOOP_DURATION_DAYS] <= window[1]
    assert record["derived"]["lambert_revolutions"]["value"] == revs
    # No other revolution count does better at the optimum found.
    f_found = record["objective"][0]
    for m in (0, 1, 2):
        udp = LeveragingUDP.from_compiled(
            loop_problem(demo_path, tmp_path, window, str(m)).compile()
        )
        assert udp.fitness(x)[0] >= f_found - 1e-12
