"""Tests of leverage.core.ephemeris (Standish mean elements; osculating two-body orbits).

Outside sources:
- astropy's built-in ephemeris (``get_body_barycentric_posvel(..., ephemeris=
  'builtin')``, no network): ERFA's epv00 for the Sun and Simon et al. (1994)
  planetary theory plan94 for the planets (heliocentric, mean equator and equinox
  of J2000). Our mean-element positions and velocities stay within 1.5x (2x for
  velocity) of the largest differences measured against it over 2000-2050 (see
  MEASURED for what those numbers are and what this check cannot see).
- Two-body propagation (leverage.core.kepler, checked in test_kepler.py) for the
  osculating orbits, and the velocity as the time derivative of the position
  (common practice).

The Earth row of Standish's Table 1 is the Earth-Moon barycentre; it is compared with
astropy's 'earth-moon-barycenter' (plan94's EMB), not with the Earth.
"""

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import get_body_barycentric_posvel
from astropy.time import Time
from scipy.optimize import brentq

from leverage.astro.bodies import AU_KM, GM_SUN_KM3_S2, PLANETS, osculating_array
from leverage.core.ephemeris import DAY_S, body_state, mean_elements_state, osculating_state
from leverage.core.frames import equatorial_to_ecliptic
from leverage.core.kepler import propagate

ARCSEC = np.pi / 180.0 / 3600.0

# Largest differences from the reference (plan94) measured over the epochs below
# (2000-2050): heliocentric angle ("), distance (km), velocity (m/s). The bounds are 1.5x
# these (angle, distance) and 2x (velocity): a regression check against an outside
# ephemeris, not a statement of accuracy. For scale: Standish's own error table for
# Table 1 (1800-2050, quoted from memory) gives 15-600" and 1000-1 500 000 km, but as
# geocentric RA/Dec, not comparable with a heliocentric angle; and plan94's own errors
# against DE200 (ERFA documentation) are 7-87" and 500-661 000 km, included in these
# measurements. The largest terms are the periodic perturbations the mean elements
# leave out (Mars-Jupiter and Jupiter-Saturn terms) and, beyond Jupiter, the Sun's
# offset from the barycentre of the interior planets (Jacobi coordinates).
# What this cannot see: a UTC/TDB mix-up (69 s is 2.8" of the Earth's motion, a sixth of
# its bound); tests/astro/test_times.py checks the time scales against astropy.
MEASURED = {  # angle ("), distance (km), velocity (m/s)
    "mercury": (13.7, 1_293.0, 2.9),
    "venus": (23.0, 5_424.0, 3.7),
    "earth": (17.6, 6_277.0, 2.5),  # Earth-Moon barycentre
    "mars": (103.0, 37_802.0, 11.9),
    "jupiter": (489.5, 572_337.0, 36.5),
    "saturn": (592.2, 2_783_712.0, 40.3),
    "uranus": (101.7, 1_207_071.0, 16.1),
    "neptune": (61.7, 1_333_360.0, 7.5),
}
ASTROPY_NAME = {"earth": "earth-moon-barycenter"}

# A few dozen epochs over 2000-2050 (TDB), at a step (503 d) that is not a multiple
# of any planet's period.
EPOCH_DAYS = np.arange(0.0, 50.0 * 365.25, 503.0)


@pytest.fixture(scope="module")
def reference():
    times = Time(2451545.0 + EPOCH_DAYS, format="jd", scale="tdb")
    sun_p, sun_v = get_body_barycentric_posvel("sun", times, ephemeris="builtin")
    sun_p = sun_p.xyz.to_value(u.km).T
    sun_v = sun_v.xyz.to_value(u.km / u.s).T
    out = {"sun": sun_p}
    for name in PLANETS:
        p, v = get_body_barycentric_posvel(ASTROPY_NAME.get(name, name), times, ephemeris="builtin")
        out[name] = (
            p.xyz.to_value(u.km).T,
            v.xyz.to_value(u.km / u.s).T,
            p.xyz.to_value(u.km).T - sun_p,
            v.xyz.to_value(u.km / u.s).T - sun_v,
        )
    return out


@pytest.mark.parametrize("name", list(PLANETS))
def test_mean_elements_near_plan94(reference, name):
    eph = PLANETS[name].ephemeris_array()
    angle_max, radial_max, _ = MEASURED[name]
    worst_angle = worst_radial = 0.0
    for k, days in enumerate(EPOCH_DAYS):
        r, _ = body_state(eph, days * DAY_S)
        r_ref = equatorial_to_ecliptic(reference[name][2][k])
        angle = np.arctan2(np.linalg.norm(np.cross(r, r_ref)), r @ r_ref) / ARCSEC
        worst_angle = max(worst_angle, angle)
        worst_radial = max(worst_radial, abs(np.linalg.norm(r) - np.linalg.norm(r_ref)))
    assert worst_angle <= 1.5 * angle_max, (name, worst_angle)
    assert worst_radial <= 1.5 * radial_max, (name, worst_radial)


@pytest.mark.parametrize("name", list(PLANETS))
def test_mean_elements_velocity_near_plan94(reference, name):
    # The mean-element velocity is the derivative of the mean-element position.
    eph = PLANETS[name].ephemeris_array()
    bound = 2.0 * MEASURED[name][2] / 1000.0  # km/s
    for k, days in enumerate(EPOCH_DAYS):
        _, v = body_state(eph, days * DAY_S)
        v_ref = equatorial_to_ecliptic(reference[name][3][k])
        assert np.linalg.norm(v - v_ref) <= bound, (name, days)


def test_mean_elements_in_ecliptic_frame():
    # Frame check: the ecliptic of date moves away from the ecliptic of J2000 by
    # ~47" per century (common practice), so over 2000-2050 the Earth-Moon
    # barycentre stays within 1' of the J2000 ecliptic; equatorial axes by mistake
    # would put it up to 23.4 deg away.
    eph = PLANETS["earth"].ephemeris_array()
    for days in EPOCH_DAYS:
        r, _ = body_state(eph, days * DAY_S)
        assert abs(r[2]) / np.linalg.norm(r) < 60.0 * ARCSEC


@pytest.mark.parametrize("name", list(PLANETS))
def test_mean_elements_velocity_is_derivative_of_position(name):
    # Central difference over +-1 h. The velocity neglects the slow rates of a, e, I,
    # varpi, Omega (at most ~1e-5 of dL/dt), so 1e-4 relative.
    eph = PLANETS[name].ephemeris_array()
    for days in (0.0, 3000.0, 9000.0, 17000.0):
        t = days * DAY_S
        r_plus, _ = mean_elements_state(eph, t + 3600.0)
        r_minus, _ = mean_elements_state(eph, t - 3600.0)
        _, v = mean_elements_state(eph, t)
        fd = (r_plus - r_minus) / 7200.0
        assert np.linalg.norm(v - fd) <= 1e-4 * np.linalg.norm(v)


def test_mean_elements_at_j2000_sun_distance():
    # Standish Table 1 at T = 0: the EMB is at r = a (1 - e cos E) with M = L - varpi.
    row = PLANETS["earth"].mean_elements
    a, ecc = row[0] * AU_KM, row[1]
    m = np.radians(row[3] - row[4])
    e_anom = brentq(lambda x: x - ecc * np.sin(x) - m, -10.0, 10.0, xtol=1e-15)
    r, _ = body_state(PLANETS["earth"].ephemeris_array(), 0.0)
    assert np.linalg.norm(r) == pytest.approx(a * (1.0 - ecc * np.cos(e_anom)), rel=1e-12)


# ---------------------------------------------------------------- osculating orbits


@pytest.mark.parametrize(
    "elements",
    [
        (2.3 * AU_KM, 0.25, 12.0, 80.0, 150.0, 40.0),
        (0.9 * AU_KM, 0.6, 3.0, 300.0, 20.0, -170.0),
        (5.2 * AU_KM, 0.05, 1.3, 100.0, 275.0, 10.0),
    ],
)
def test_osculating_state_follows_two_body_motion(elements):
    epoch = 123456789.0  # s TDB past J2000
    eph = osculating_array(*elements, epoch)
    t0 = epoch + 40.0 * DAY_S
    r0, v0 = body_state(eph, t0)
    for dt_days in (1.0, 100.0, 1000.0, -700.0):
        r_ref, v_ref, ok = propagate(GM_SUN_KM3_S2, r0, v0, dt_days * DAY_S)
        assert ok
        r, v = body_state(eph, t0 + dt_days * DAY_S)
        np.testing.assert_allclose(r, r_ref, atol=1e-9 * elements[0])
        np.testing.assert_allclose(v, v_ref, atol=1e-9 * np.linalg.norm(v0))


def test_osculating_state_at_epoch():
    # At the epoch the state has the given mean anomaly: r = a (1 - e cos E), and the
    # energy is -mu / (2 a) (vis-viva, common practice).
    a, ecc, m0 = 1.7 * AU_KM, 0.3, 75.0
    eph = osculating_array(a, ecc, 5.0, 40.0, 60.0, m0, 1e8)
    r, v = osculating_state(eph, 1e8)
    e_anom = brentq(lambda x: x - ecc * np.sin(x) - np.radians(m0), -10.0, 10.0, xtol=1e-15)
    assert np.linalg.norm(r) == pytest.approx(a * (1.0 - ecc * np.cos(e_anom)), rel=1e-12)
    energy = 0.5 * (v @ v) - GM_SUN_KM3_S2 / np.linalg.norm(r)
    assert energy == pytest.approx(-GM_SUN_KM3_S2 / (2.0 * a), rel=1e-12)
