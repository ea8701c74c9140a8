"""Objectives as people read them (leverage.record.objective): own unit, natural sign.

Checked against the model's own derived quantities at sampled points: the natural value
of the minimised objective, less its penalty, must equal the delivered mass (kg) or
the v-infinity gain (km/s) the model computed there.
"""

from pathlib import Path

import numpy as np

from leverage.core import layout as L
from leverage.problem.load import load_problem, load_problem_text
from leverage.record.objective import from_record, shown_objectives
from leverage.search.udp import LeveragingUDP

PROBLEMS = Path(__file__).resolve().parents[2] / "problems"

MAX_GAIN = (
    (PROBLEMS / "demo.toml")
    .read_text()
    .replace('kind = "min_dsm"', 'kind = "max_gain"\ndsm_budget_km_s = 1.5')
)


def _points(compiled, n=40, seed=3):
    rng = np.random.default_rng(seed)
    return [
        compiled.lower + rng.random(compiled.lower.shape) * (compiled.upper - compiled.lower)
        for _ in range(n)
    ]


def _check(problem, slot, name, unit):
    compiled = problem.compile()
    (shown,) = shown_objectives(compiled.params)
    assert (shown.name, shown.unit, shown.maximised) == (name, unit, True)
    udp = LeveragingUDP.from_compiled(compiled, problem.name)
    checked = 0
    for x in _points(compiled):
        q = udp.details(x)
        if q[L.Q_OK] != 1.0 or not np.isfinite(q[slot]):
            continue
        f = udp.fitness(x)[0] - q[L.Q_PENALTY]
        assert np.isclose(shown.value(f), q[slot], rtol=1e-6, atol=1e-6)  # penalty round-off
        checked += 1
    assert checked >= 5


def test_delivered_mass_reads_in_kg_with_its_own_sign():
    _check(load_problem(PROBLEMS / "delivered-mass.toml"), L.Q_M_DELIVERED, "delivered mass", "kg")


def test_gain_reads_in_km_s_with_its_own_sign():
    _check(load_problem_text(MAX_GAIN, name="gain"), L.Q_GAIN, "v-infinity gain", "km/s")


def test_min_dsm_and_front_and_old_records():
    (dsm,) = shown_objectives(load_problem(PROBLEMS / "demo.toml").compile().params)
    assert (dsm.name, dsm.unit, dsm.factor, dsm.maximised) == ("total DSM", "km/s", 1.0, False)
    front = shown_objectives(load_problem(PROBLEMS / "trade-front.toml").compile().params)
    assert [(s.name, s.factor) for s in front] == [("total DV", 1.0), ("v-infinity gain", -1.0)]
    assert front[1].text(-3.006) == "v-infinity gain 3.006 km/s"
    # A best.json written before objective_shown: the minimised value, unnamed.
    assert [s.factor for s in from_record({"objective": [0.5]})] == [1.0]
