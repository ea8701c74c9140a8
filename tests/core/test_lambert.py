"""Tests of leverage.core.lambert against published Lambert solutions.

Outside sources:
- H. D. Curtis, Orbital Mechanics for Engineering Students, Example 5.2.
- D. A. Vallado, Fundamentals of Astrodynamics and Applications, Lambert example
  (r1 = 15945.34 km on x, 76 min, short way), values quoted from memory.
- G. J. Der, "The Superior Lambert Algorithm", AMOS conference 2011, Examples I
  and II (zero and one revolution, both M = 1 roots).
- Two-body propagation (leverage.core.kepler.propagate, itself checked against
  Vallado and Curtis in test_kepler.py): a Lambert solution must reach r2 in tof.
"""

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from leverage.core.kepler import propagate
from leverage.core.lambert import branch_range, branch_revs, lambert

MU_EARTH_CURTIS = 398600.0  # Curtis uses 398 600 km^3/s^2 throughout his examples.
MU_EARTH = 398600.4418  # IERS 2010 value, used by Vallado and Der in these examples.


def _solve(mu, r1, r2, tof, revs=0, prograde=True, low_path=True):
    return lambert(
        mu, np.asarray(r1, float), np.asarray(r2, float), float(tof), revs, prograde, low_path
    )


# ---------------------------------------------------------------- published cases


def test_curtis_example_5_2():
    v1, v2, ok = _solve(
        MU_EARTH_CURTIS, (5000.0, 10000.0, 2100.0), (-14600.0, 2500.0, 7000.0), 3600.0
    )
    assert ok
    # Curtis, Example 5.2: v1, v2 (km/s), printed to 5 significant figures.
    np.testing.assert_allclose(v1, [-5.9925, 1.9254, 3.2456], atol=1e-4)
    np.testing.assert_allclose(v2, [-3.3125, -4.1966, -0.38529], atol=1e-4)


def test_vallado_lambert_example():
    # mu = 398600.4418 km^3/s^2 (the value Vallado uses for the Earth); with it the
    # published velocities are met to better than 1e-6 km/s.
    v1, v2, ok = _solve(
        MU_EARTH, (15945.34, 0.0, 0.0), (12214.83899, 10249.46731, 0.0), 76.0 * 60.0
    )
    assert ok
    # Vallado, Fundamentals of Astrodynamics and Applications, Lambert example
    # (short way, 76 min), from memory.
    np.testing.assert_allclose(v1, [2.058913, 2.915965, 0.0], atol=2e-6)
    np.testing.assert_allclose(v2, [-3.451565, 0.910315, 0.0], atol=2e-6)


DER_I_R1 = (2249.171260, 1898.007100, 5639.599193)
DER_I_R2 = (1744.495443, -4601.556054, 4043.864391)


@pytest.mark.parametrize(
    "prograde, v1_ref, v2_ref",
    [
        # Der (2011), Example I, prograde solution.
        (True, (-2.09572809, 3.92602196, -4.94516810), (2.46309613, 0.84490197, 6.10890863)),
        # Der (2011), Example I, retrograde solution.
        (False, (1.94312182, -4.35300015, 4.54630439), (-2.38885563, -1.42519647, -5.95772225)),
    ],
)
def test_der_example_1(prograde, v1_ref, v2_ref):
    v1, v2, ok = _solve(MU_EARTH, DER_I_R1, DER_I_R2, 1618.50, 0, prograde)
    assert ok
    np.testing.assert_allclose(v1, v1_ref, atol=1e-7)  # Der prints 8 decimals
    np.testing.assert_allclose(v2, v2_ref, atol=1e-7)


DER_II_R1 = (22592.145603, -1599.915239, -19783.950506)
DER_II_R2 = (1922.067697, 4054.157051, -8925.727465)


def test_der_example_2_zero_revolutions():
    v1, v2, ok = _solve(MU_EARTH, DER_II_R1, DER_II_R2, 36000.0, 0, True)
    assert ok
    # Der (2011), Example II, M = 0, prograde.
    np.testing.assert_allclose(v1, [2.000652697, 0.387688615, -2.666947760], atol=1e-7)
    np.testing.assert_allclose(v2, [-3.79246619, -1.77707641, 6.856814395], atol=1e-7)


def test_der_example_2_one_revolution_both_roots():
    # Der (2011), Example II, M = 1: the two roots, matched by value, not by flag.
    published = [
        ((0.50335770, 0.61869408, -1.57176904), (-4.18334626, -1.13262727, 6.13307091)),
        ((-2.45759553, 1.16945801, 0.43161258), (-5.53841370, 0.01822220, 5.49641054)),
    ]
    solutions = []
    for low_path in (True, False):
        v1, v2, ok = _solve(MU_EARTH, DER_II_R1, DER_II_R2, 36000.0, 1, True, low_path)
        assert ok
        solutions.append((v1, v2))
    # The two flags must give two different roots...
    assert np.linalg.norm(solutions[0][0] - solutions[1][0]) > 0.1
    # ... and together they must be the published pair. Tolerance 1e-6 km/s: the
    # published v2 of the second root is 5e-7 km/s off its own v1 (propagating
    # Der's v1 for 36000 s gives our v2, not his, to 1e-8 km/s), so that last
    # printed digit cannot be met; all other components agree to 1e-7.
    for v1_ref, v2_ref in published:
        matches = [
            np.allclose(v1, v1_ref, atol=1e-6) and np.allclose(v2, v2_ref, atol=1e-6)
            for v1, v2 in solutions
        ]
        assert sum(matches) == 1


def test_der_example_2_second_root_published_v2_inconsistency():
    # Justifies the 1e-6 tolerance above with the published numbers alone: Der's
    # second M = 1 root, v1 propagated for 36000 s, lands on r2 within 0.3 km but
    # with a velocity 5e-7 km/s away from his printed v2; our root agrees with the
    # propagated one to 1e-8 km/s.
    v1_pub = np.array([-2.45759553, 1.16945801, 0.43161258])
    v2_pub = np.array([-5.53841370, 0.01822220, 5.49641054])
    r, v, ok = propagate(MU_EARTH, np.array(DER_II_R1), v1_pub, 36000.0)
    assert ok
    assert np.linalg.norm(r - np.array(DER_II_R2)) < 0.3
    roots = [_solve(MU_EARTH, DER_II_R1, DER_II_R2, 36000.0, 1, True, lp) for lp in (True, False)]
    ours = min(roots, key=lambda s: np.linalg.norm(s[0] - v1_pub))
    assert np.linalg.norm(ours[1] - v) < 1e-7
    assert 2e-7 < np.linalg.norm(v2_pub - v) < 1e-6


# ---------------------------------------------------------------- failure modes


@pytest.mark.parametrize(
    "r2",
    [
        (4498.342520, 3796.014200, 11279.198386),  # 2 r1: 0 deg
        (-2249.171260, -1898.007100, -5639.599193),
    ],
)  # -r1: 180 deg
def test_collinear_returns_flag(r2):
    v1, v2, ok = _solve(MU_EARTH, DER_I_R1, r2, 3600.0)
    assert not ok
    assert np.all(v1 == 0.0) and np.all(v2 == 0.0)


def test_too_many_revolutions_returns_flag():
    # 36000 s is about 1.6 periods of the Example II orbits: five revolutions are impossible.
    for low_path in (True, False):
        _, _, ok = _solve(MU_EARTH, DER_II_R1, DER_II_R2, 36000.0, 5, True, low_path)
        assert not ok


@pytest.mark.parametrize("tof", [0.0, -1.0, -36000.0])
def test_non_positive_time_returns_flag(tof):
    _, _, ok = _solve(MU_EARTH, DER_II_R1, DER_II_R2, tof)
    assert not ok


def test_negative_revolutions_returns_flag():
    _, _, ok = _solve(MU_EARTH, DER_II_R1, DER_II_R2, 36000.0, -1)
    assert not ok


# ---------------------------------------------------------------- branch helpers


def test_branch_revs_numbering():
    # Documented numbering: 0 is M = 0; 2M-1 and 2M are the two roots of M.
    assert branch_revs(0) == (0, True)
    assert branch_revs(1) == (1, True)
    assert branch_revs(2) == (1, False)
    assert branch_revs(3) == (2, True)
    assert branch_revs(4) == (2, False)
    assert branch_revs(-3) == (0, True)


@pytest.mark.parametrize("rev_min, rev_max", [(0, 0), (0, 1), (0, 3), (1, 1), (1, 3), (2, 4)])
def test_branch_range_covers_each_root_once(rev_min, rev_max):
    first, last = branch_range(rev_min, rev_max)
    pairs = [branch_revs(b) for b in range(first, last + 1)]
    expected = [(0, True)] if rev_min == 0 else []
    for m in range(max(rev_min, 1), rev_max + 1):
        expected += [(m, True), (m, False)]
    assert sorted(pairs) == sorted(expected)
    assert len(set(pairs)) == len(pairs)


def test_branches_give_der_solutions():
    # Branches 0, 1, 2 of Der Example II are the M = 0 solution and the two M = 1 roots.
    v1s = []
    first, last = branch_range(0, 1)
    for b in range(first, last + 1):
        revs, low = branch_revs(b)
        v1, _, ok = _solve(MU_EARTH, DER_II_R1, DER_II_R2, 36000.0, revs, True, low)
        assert ok
        v1s.append(v1)
    np.testing.assert_allclose(
        v1s[0], [2.000652697, 0.387688615, -2.666947760], atol=1e-7
    )  # Der Ex. II
    assert np.linalg.norm(v1s[1] - v1s[2]) > 0.1


# ---------------------------------------------------------------- propagation property


def _vector(radius, lon, lat):
    return radius * np.array([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)])


radii = st.floats(6600.0, 42000.0)
lons = st.floats(0.0, 2.0 * np.pi)
lats = st.floats(-1.4, 1.4)


def _check_lands(r1, r2, tof, revs, prograde, low_path, must_solve):
    v1, v2, ok = lambert(MU_EARTH, r1, r2, tof, revs, prograde, low_path)
    if must_solve:
        assert ok
    else:
        assume(ok)  # no solution with these revolutions in this time: skipped, not passed
    r, v, pok = propagate(MU_EARTH, r1, v1, tof)
    assert pok
    assert np.linalg.norm(r - r2) <= 1e-6 * np.linalg.norm(r2)
    assert np.linalg.norm(v - v2) <= 1e-6 * np.linalg.norm(v2)
    normal = np.cross(r1, r2)
    normal /= np.linalg.norm(normal)
    if abs(normal[2]) > 0.1:
        # prograde means the transfer's angular momentum has a +z component.
        assert (np.cross(r1, v1)[2] > 0.0) == prograde
    return True


@settings(deadline=None, max_examples=60)
@given(radii, lons, lats, radii, lons, lats, st.floats(300.0, 40000.0), st.booleans())
def test_zero_rev_solution_reaches_r2(ra, lona, lata, rb, lonb, latb, tof, prograde):
    r1, r2 = _vector(ra, lona, lata), _vector(rb, lonb, latb)
    sin_angle = np.linalg.norm(np.cross(r1, r2)) / (ra * rb)
    assume(sin_angle > 0.05)
    # Izzo's M = 0 branch exists for every positive time of flight.
    assert _check_lands(r1, r2, tof, 0, prograde, True, must_solve=True)


@settings(deadline=None, max_examples=40)
@given(
    radii, lons, lats, radii, lons, lats, st.floats(20000.0, 200000.0), st.booleans(), st.booleans()
)
def test_one_rev_solution_reaches_r2_when_ok(
    ra, lona, lata, rb, lonb, latb, tof, prograde, low_path
):
    r1, r2 = _vector(ra, lona, lata), _vector(rb, lonb, latb)
    sin_angle = np.linalg.norm(np.cross(r1, r2)) / (ra * rb)
    assume(sin_angle > 0.05)
    _check_lands(r1, r2, tof, 1, prograde, low_path, must_solve=False)
