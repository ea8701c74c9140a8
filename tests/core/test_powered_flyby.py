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
Earth's GM 398 600.4418 km^3/s^2: IERS Conventions (2010), Table 1.1.
"""
import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

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
    assert math.isclose(powered_turn(MU_EARTH, v, v, rp), turn_angle(MU_EARTH, v, rp),
                        rel_tol=1e-13)


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
    assert math.isclose(powered_periapsis(MU_EARTH, v, v, turn),
                        periapsis_for_turn(MU_EARTH, v, turn), rel_tol=1e-8)


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
    vp_in = math.sqrt(2.0 * (0.5 * v_in ** 2 + MU_EARTH / rp))
    vp_out = math.sqrt(2.0 * (0.5 * v_out ** 2 + MU_EARTH / rp))
    assert math.isclose(periapsis_burn(MU_EARTH, v_in, v_out, rp), abs(vp_out - vp_in),
                        rel_tol=1e-9, abs_tol=1e-12)


def test_burn_at_periapsis_is_smaller_than_the_speed_change_at_infinity():
    # The Oberth effect: a change of |v_inf| costs less when made deep in the well.
    v_in, v_out = np.array([4.0, 7.0]), np.array([5.0, 9.0])
    for a, b in zip(v_in, v_out):
        assert periapsis_burn(MU_EARTH, a, b, 6_678.0) < b - a
