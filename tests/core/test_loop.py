"""The returned-with-no-burn loop: a check of propagation against a closed-form fact.

Outside source (common practice, Kepler's third law): a spacecraft leaving a planet
on a circular orbit onto a heliocentric orbit whose period is a whole multiple of
the planet's (or a whole fraction of a whole number of planet periods) meets the
planet again at the same point after that time, and by symmetry of the unchanged
orbits its arrival v-infinity equals its departure v-infinity.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from leverage.astro.bodies import AU_KM, GM_SUN_KM3_S2, osculating_array
from leverage.core.ephemeris import body_state
from leverage.core.kepler import elements_from_state, propagate

MU = GM_SUN_KM3_S2
PLANET_PERIOD_S = 2.0 * np.pi * np.sqrt(AU_KM**3 / MU)  # Kepler's third law


def _planet(phase_deg):
    # A planet on a circular 1 AU orbit in the ecliptic, at longitude phase_deg at t = 0.
    return osculating_array(AU_KM, 0.0, 0.0, 0.0, 0.0, phase_deg, 0.0, MU)


def _departure(eph, period_ratio, in_plane, out_of_plane):
    """v-infinity putting the spacecraft on an orbit of period period_ratio x planet's,
    with its heliocentric velocity direction at the given angles from the planet's."""
    r_p, v_p = body_state(eph, 0.0)
    a_sc = AU_KM * period_ratio ** (2.0 / 3.0)  # Kepler's third law
    speed = np.sqrt(MU * (2.0 / AU_KM - 1.0 / a_sc))  # vis-viva
    along = v_p / np.linalg.norm(v_p)
    out = r_p / np.linalg.norm(r_p)
    normal = np.cross(out, along)
    direction = (
        np.cos(out_of_plane) * (np.cos(in_plane) * along + np.sin(in_plane) * out)
        + np.sin(out_of_plane) * normal
    )
    return r_p, v_p, speed * direction - v_p


@settings(deadline=None, max_examples=30)
@given(
    st.sampled_from([(2.0, 2), (1.0, 1), (1.5, 3), (0.75, 3), (0.5, 1)]),
    st.floats(-0.6, 0.6),
    st.floats(-0.4, 0.4),
    st.floats(0.0, 360.0),
)
def test_loop_returns_with_same_vinf(ratio_and_planet_revs, in_plane, out_of_plane, phase):
    ratio, planet_revs = ratio_and_planet_revs
    # Spacecraft period = ratio x planet period; both are back after planet_revs
    # planet periods = planet_revs / ratio whole spacecraft periods.
    eph = _planet(phase)
    r_p0, v_p0, vinf_dep = _departure(eph, ratio, in_plane, out_of_plane)
    v_sc0 = v_p0 + vinf_dep
    period_sc = 2.0 * np.pi * np.sqrt(elements_from_state(MU, r_p0, v_sc0)[0] ** 3 / MU)
    assert period_sc == pytest.approx(ratio * PLANET_PERIOD_S, rel=1e-10)
    t_back = planet_revs * PLANET_PERIOD_S
    r_sc, v_sc, ok = propagate(MU, r_p0, v_sc0, t_back)
    assert ok
    r_p1, v_p1 = body_state(eph, t_back)
    np.testing.assert_allclose(r_p1, r_p0, atol=1e-9 * AU_KM)  # the planet is back
    assert np.linalg.norm(r_sc - r_p1) < 1e-8 * AU_KM  # 1.5 km: the spacecraft meets it
    vinf_arr = v_sc - v_p1
    np.testing.assert_allclose(vinf_arr, vinf_dep, atol=1e-9 * np.linalg.norm(v_p0))


def test_loop_not_closed_halfway():
    # Control: half-way through a 2-year loop the spacecraft is at aphelion, far from
    # the planet (so the check above is not met trivially).
    eph = _planet(0.0)
    r_p0, v_p0, vinf_dep = _departure(eph, 2.0, 0.0, 0.0)
    r_sc, _, ok = propagate(MU, r_p0, v_p0 + vinf_dep, PLANET_PERIOD_S)
    assert ok
    r_p1, _ = body_state(eph, PLANET_PERIOD_S)
    a_sc = AU_KM * 2.0 ** (2.0 / 3.0)
    # Departure at perihelion (tangential, faster), so half a period later the
    # spacecraft is at aphelion 2 a - 1 AU while the planet is back at the start.
    assert np.linalg.norm(r_sc) == pytest.approx(2.0 * a_sc - AU_KM, rel=1e-9)
    assert np.linalg.norm(r_sc - r_p1) > 0.5 * AU_KM
