"""Tests of the feasibility screen (leverage.screen).

Outside sources: Tisserand's parameter with respect to a body on a circular orbit,
T = a_b/a + 2 cos i sqrt(a (1 - e^2)/a_b), and v_inf = V_b sqrt(3 - T) (the Tisserand
relation used in gravity-assist design, e.g. Strange and Longuski 2002, J. Spacecraft
and Rockets 39(1); from memory): with no DSM the return v-infinity equals the launch
v-infinity. The turn limit 2 asin(1/(1 + r_p v^2/mu)) (Curtis, Orbital Mechanics for
Engineering Students, sec. 8.9; from memory). The return v-infinity after a tangential
burn at an apsis is also computed from vis-viva and angular momentum alone (Curtis
secs. 2.4, 2.8), independently of Tisserand's relation. The problems are the invented demo
(problems/demo.toml) and goals made impossible by construction from it.
"""

import json
from pathlib import Path

import numpy as np
import pytest

from leverage.problem.load import load_problem
from leverage.problem.screen import _Model, screen

ROOT = Path(__file__).resolve().parents[2]


def edited(demo_path, tmp_path, replacements, extra=""):
    text = demo_path.read_text()
    for old, new in replacements:
        assert old in text
        text = text.replace(old, new)
    path = tmp_path / "edited.toml"
    path.write_text(text + extra)
    return load_problem(path)


def test_without_a_dsm_the_return_vinf_is_the_launch_vinf(demo_path):
    model = _Model(load_problem(demo_path))
    w, vt, vr, v0 = model.returns(0.0)
    assert len(w) > 50
    np.testing.assert_allclose(w, v0, rtol=1e-9)


def test_unreachable_outgoing_vinf(demo_path, tmp_path):
    # 15 km/s from C3 <= 10 (3.2 km/s) with at most 0.3 km/s of DSM: impossible.
    problem = edited(
        demo_path,
        tmp_path,
        [
            ("max_c3_km2_s2 = 24.0", "max_c3_km2_s2 = 10.0"),
            (
                "min_outgoing_vinf_km_s = 7.5",
                "min_outgoing_vinf_km_s = 15.0\ndsm_budget_km_s = 0.3",
            ),
        ],
    )
    result = screen(problem)
    assert result.verdict == "unreachable"
    (req,) = result.requirements
    assert req.shortfall() > 5.0  # km/s short
    text = "\n".join(result.lines())
    assert "UNREACHABLE" in text and "short by" in text


def test_unreachable_inclination_beyond_one_turn(demo_path, tmp_path):
    # A 70 deg inclination needs a v-infinity near the body's orbital speed; at C3 <= 10
    # and 0.2 km/s of DSM the turn at the minimum periapsis cannot tilt the orbit so far.
    problem = edited(
        demo_path,
        tmp_path,
        [
            ("max_c3_km2_s2 = 24.0", "max_c3_km2_s2 = 10.0"),
            (
                "min_outgoing_vinf_km_s = 7.5",
                "min_outgoing_inclination_deg = 70.0\ndsm_budget_km_s = 0.2",
            ),
            ("outgoing_vinf_km_s = 0.01", ""),
        ],
    )
    result = screen(problem)
    assert result.verdict == "unreachable"
    assert result.requirements[0].best < 70.0


@pytest.mark.slow
def test_reachable_goal_is_then_reached(demo_path, demo_result):
    """The session's demo run (tests/conftest.py, shared with the report tests) reaches a
    feasible design, and the screen's DSM estimate is below the demo's best-known DSM
    (benchmarks/best_known.json: a dense launch-date x loop grid, every point polished,
    0.813 km/s), since the screen ignores phasing and is optimistic by design."""
    problem = load_problem(demo_path)
    result = screen(problem)
    assert result.verdict == "reachable"
    record = json.loads((demo_result / "best.json").read_text())
    assert record["status"] == "complete" and record["feasible"]
    known = json.loads((ROOT / "benchmarks" / "best_known.json").read_text())["demo"]
    assert known["sha256"] == problem.sha256 and known["feasible"]
    assert result.min_dsm_kms <= known["total_dv_km_s"]


def _return_vinf_by_vis_viva(v0, dv, at_aphelion, sign):
    """Return v-infinity (units of the body's circular speed) after a tangential launch
    at r = 1 with v-infinity v0 and a tangential burn sign*dv at perihelion or aphelion,
    from vis-viva and the conservation of angular momentum only (Curtis, Orbital
    Mechanics for Engineering Students, secs. 2.4 and 2.8; from memory) - no Tisserand."""
    h0 = 1.0 + v0  # perihelion speed at r = 1 (mu = 1)
    a0 = 1.0 / (2.0 - h0 * h0)
    r = 2.0 * a0 - 1.0 if at_aphelion else 1.0
    v = h0 / r + sign * dv  # speed after the burn, tangential
    h = r * v
    speed2 = v * v + 2.0 * (1.0 / 1.0 - 1.0 / r)  # energy: at r = 1
    vr2 = speed2 - h * h  # radial part squared at r = 1
    if vr2 < 0.0:
        return None  # the new orbit does not reach r = 1
    return float(np.sqrt((h - 1.0) ** 2 + vr2))


@pytest.mark.parametrize("v0_kms, dv_kms", [(5.2, 0.3), (4.0, 0.5), (3.0, 1.0)])
def test_return_vinf_after_an_apsis_dsm_matches_vis_viva(demo_path, v0_kms, dv_kms):
    """The screen's Tisserand relation against an independent vis-viva computation, for
    the one launch sample tangential along the body's velocity: each apsis, each sense."""
    model = _Model(load_problem(demo_path))
    model.v_launch = np.array([v0_kms / model.v_b])
    model.pump = np.array([0.0])
    w, vt, vr, v0 = model.returns(dv_kms)
    expected = [
        _return_vinf_by_vis_viva(v0_kms / model.v_b, dv_kms / model.v_b, apo, sign)
        for apo in (False, True)
        for sign in (1.0, -1.0)
    ]
    expected = sorted(e for e in expected if e is not None)
    assert len(expected) >= 3
    np.testing.assert_allclose(sorted(w), expected, rtol=1e-12)
