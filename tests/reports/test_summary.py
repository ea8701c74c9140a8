"""The summary's Lambert root label ("low-path" / "high-path") against its source.

Outside source: poliastro 0.17's unit-aware ``poliastro.iod.izzo.lambert(k, r0, r, tof,
M, prograde, lowpath)`` (Izzo 2015, "Revisiting Lambert's problem", Celestial Mechanics
and Dynamical Astronomy 121), whose docstring defines ``lowpath``: True or False gets the
transfer orbit whose vacant focus is below or above the chord line. The label the
summary prints must be the ``lowpath`` that, given to that routine, reproduces the
recorded arc (and the other label must not). Designs: the invented demo problem with
one-revolution arcs only (both roots tried at every evaluation).
"""

import re

import astropy.units as u
import numpy as np
import pytest
from poliastro.iod import izzo

from leverage.problem.load import load_problem_text
from leverage.record.design import base_record, design_record
from leverage.reports.summary import render
from leverage.run.runner import settings_from
from leverage.search.udp import LeveragingUDP


@pytest.fixture(scope="module")
def designs(demo_path):
    text = demo_path.read_text().replace("revolutions = 0", "revolutions = 1")
    problem = load_problem_text(text, source="demo-one-revolution")
    compiled = problem.compile()
    udp = LeveragingUDP.from_compiled(compiled, problem.name)
    rng = np.random.default_rng(11)
    found = {}
    for _ in range(400):
        x = compiled.lower + rng.uniform(0.0, 1.0, compiled.lower.shape) * (
            compiled.upper - compiled.lower
        )
        record = base_record(problem, settings_from(problem), "complete")
        record.update(design_record(compiled, udp, x))
        if not record["derived"]["lambert_revolutions"]["value"] == 1:
            continue
        label = re.search(r"(low|high)-path root", render(record)).group(1)
        found.setdefault(label, record)
        if len(found) == 2:
            break
    assert set(found) == {"low", "high"}, found.keys()
    return found


def _state(record, name):
    for event in record["events"]:
        if event["event"] == name:
            return event
    raise KeyError(name)


@pytest.mark.parametrize("label", ["low", "high"])
def test_printed_root_is_poliastros_lowpath(designs, label):
    record = designs[label]
    dsm, flyby = _state(record, "dsm"), _state(record, "flyby")
    r1 = np.array(dsm["position_km"]) * u.km
    r2 = np.array(flyby["position_km"]) * u.km
    v1 = np.array(dsm["velocity_after_km_s"])
    tof = (flyby["epoch_tdb_s"] - dsm["epoch_tdb_s"]) * u.s
    k = 132_712_440_041.279419 * u.km**3 / u.s**2  # GM of the Sun, DE440
    solved = {}
    for lowpath in (True, False):
        v0, _ = izzo.lambert(k, r1, r2, tof, M=1, prograde=True, lowpath=lowpath, rtol=1e-10)
        solved[lowpath] = v0.to_value(u.km / u.s)
    same = solved[label == "low"]
    other = solved[label != "low"]
    assert np.linalg.norm(same - v1) < 1e-6  # km/s: the recorded arc
    assert np.linalg.norm(other - v1) > 1e-3  # the other root is another arc
