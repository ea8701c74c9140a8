"""Tests of the powered-flyby relation in leverage.core.flyby.

Outside sources: the powered swing-by model of Vasile, M. and De Pascale, P. (2006),
"Preliminary design of multiple gravity-assist trajectories", J. Spacecraft and
Rockets 43(4) (from memory): two hyperbolas share one periapsis, the turn is
asin(1/e_in) + asin(1/e_out) with e = 1 + r_p v^2/mu, and the periapsis burn is the
difference of the periapsis speeds from the energy equation of a hyperbola,
v_p^2 = v_inf^2 + 2 mu / r_p (Curtis, Orbital Mechanics for Engineering Students,
ch. 2; from memory). The checks are identities of that model: equal speeds give
the unpowered turn 2 asin(1/e); the powered turn is the mean of the two unpowered
turns; the periapsis solver inverts the turn; the burn vanishes when speeds match.
Outside the model: both hyperbolas flown by scipy.integrate.solve_ivp (DOP853) from the
periapsis the model solves for, far enough out to read the turn and the speeds.
Earth's GM 398 600.4418 km^3/s^2: IERS Conventions (2010), Table 1.1.
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

from leverage.core.flyby import (
    periapsis_burn,
    periapsis_for_turn,
    powered_periapsis,
    powered_turn,
    turn_angle,
)

MU_EARTH = 398_600.4418
SPEED = st.floats(min_value=0.5, max_value=20.0)
RADIUS = st.floats(min_value=6_500.0, max_value=500_000.0)


@settings(deadline=None, max_examples=200)
@given(v=SPEED, rp=RADIUS)
def test_equal_speeds_give_the_unpowered_turn(v, rp):
    assert math.isclose(
        powered_turn(MU_EARTH, v, v, rp), turn_angle(MU_EARTH, v, rp), rel_tol=1e-13
    )


@settings(deadline=None, max_examples=200)
@given(v_in=SPEED, v_out=SPEED, rp=RADIUS)
def test_powered_turn_is_the_mean_of_the_two_unpowered_turns(v_in, v_out, rp):
    mean = 0.5 * (turn_angle(MU_EARTH, v_in, rp) + turn_angle(MU_EARTH, v_out, rp))
    assert math.isclose(powered_turn(MU_EARTH, v_in, v_out, rp), mean, rel_tol=1e-12)


@settings(deadline=None, max_examples=300)
@given(v_in=SPEED, v_out=SPEED, rp=RADIUS)
def test_periapsis_solver_inverts_the_turn(v_in, v_out, rp):
    turn = powered_turn(MU_EARTH, v_in, v_out, rp)
    solved = powered_periapsis(MU_EARTH, v_in, v_out, turn)
    # Newton in log(rp) stops at a 1e-12 relative step.
    assert math.isclose(solved, rp, rel_tol=1e-8), (solved, rp)


@settings(deadline=None, max_examples=200)
@given(v=SPEED, turn=st.floats(min_value=0.01, max_value=3.0))
def test_equal_speeds_solve_to_the_unpowered_periapsis(v, turn):
    # r_p = mu/v^2 (1/sin(turn/2) - 1): the unpowered relation solved for r_p.
    assert math.isclose(
        powered_periapsis(MU_EARTH, v, v, turn), periapsis_for_turn(MU_EARTH, v, turn), rel_tol=1e-8
    )


def test_zero_and_straight_back_turns():
    assert powered_periapsis(MU_EARTH, 5.0, 6.0, 0.0) == math.inf
    assert powered_periapsis(MU_EARTH, 5.0, 6.0, math.pi) == 0.0


@settings(deadline=None, max_examples=200)
@given(v=SPEED, rp=RADIUS)
def test_no_burn_when_speeds_match(v, rp):
    assert periapsis_burn(MU_EARTH, v, v, rp) == 0.0


@settings(deadline=None, max_examples=200)
@given(v_in=SPEED, v_out=SPEED, rp=RADIUS)
def test_burn_is_the_difference_of_periapsis_speeds(v_in, v_out, rp):
    # Energy per unit mass on each hyperbola at periapsis: v_p^2/2 - mu/r_p = v_inf^2/2.
    vp_in = math.sqrt(2.0 * (0.5 * v_in**2 + MU_EARTH / rp))
    vp_out = math.sqrt(2.0 * (0.5 * v_out**2 + MU_EARTH / rp))
    assert math.isclose(
        periapsis_burn(MU_EARTH, v_in, v_out, rp), abs(vp_out - vp_in), rel_tol=1e-9, abs_tol=1e-12
    )


def test_burn_at_periapsis_is_smaller_than_the_speed_change_at_infinity():
    # The Oberth effect: a change of |v_inf| costs less when made deep in the well.
    v_in, v_out = np.array([4.0, 7.0]), np.array([5.0, 9.0])
    for a, b in zip(v_in, v_out):
        assert periapsis_burn(MU_EARTH, a, b, 6_678.0) < b - a


def _fly(mu, rp, vp, duration):
    """State far from the body after ``duration`` s (negative: before periapsis) from
    periapsis (rp, 0, 0) with speed vp along +y: scipy DOP853 on r'' = -mu r/|r|^3."""

    def rhs(_, y):
        r = y[:3]
        return np.concatenate([y[3:], -mu * r / np.linalg.norm(r) ** 3])

    sol = solve_ivp(
        rhs, (0.0, duration), [rp, 0.0, 0.0, 0.0, vp, 0.0], method="DOP853", rtol=1e-12, atol=1e-9
    )
    return sol.y[:3, -1], sol.y[3:, -1]


@pytest.mark.parametrize(
    "v_in, v_out, turn_deg", [(5.0, 6.0, 60.0), (9.0, 7.5, 25.0), (3.0, 3.4, 120.0)]
)
def test_powered_flyby_flown_by_an_integrator(v_in, v_out, turn_deg):
    """Fly the two hyperbolas with scipy: from periapsis backward at the incoming
    periapsis speed and forward at the outgoing one (vis-viva, v_p^2 = v_inf^2 + 2 mu/r_p).
    Far from the body (1e11 km) the speeds are the requested v_inf (energy) and the angle
    between the velocities is the requested turn: checks powered_periapsis and
    powered_turn without the model's own relations (measured: turn within 1.5e-11 rad,
    speed within 7e-12 relative). The burn is the difference of the periapsis speeds."""
    turn = math.radians(turn_deg)
    rp = powered_periapsis(MU_EARTH, v_in, v_out, turn)
    vp_in = math.sqrt(v_in**2 + 2.0 * MU_EARTH / rp)
    vp_out = math.sqrt(v_out**2 + 2.0 * MU_EARTH / rp)
    far = 1e11  # km
    r0, v0 = _fly(MU_EARTH, rp, vp_in, -far / v_in)
    r1, v1 = _fly(MU_EARTH, rp, vp_out, far / v_out)
    for r, v, speed in ((r0, v0, v_in), (r1, v1, v_out)):
        assert np.linalg.norm(r) > 0.9 * far
        assert math.sqrt(v @ v - 2.0 * MU_EARTH / np.linalg.norm(r)) == pytest.approx(
            speed, rel=5e-11
        )
    angle = math.acos(np.clip(v0 @ v1 / (np.linalg.norm(v0) * np.linalg.norm(v1)), -1, 1))
    assert angle == pytest.approx(turn, abs=1.5e-10)
    assert periapsis_burn(MU_EARTH, v_in, v_out, rp) == pytest.approx(
        abs(vp_out - vp_in), rel=1e-12
    )
