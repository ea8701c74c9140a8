"""Tests of leverage.bodies (constants and lookup).

Outside sources:
- IAU 2012 Resolution B2: 1 au = 149 597 870 700 m exactly.
- IERS Conventions (2010), Table 1.1: GM of the Earth 3.986004418e14 m^3/s^2 (TT).
- IAU 2015 Resolution B3 nominal values as given by astropy.constants (GM_sun
  1.3271244e20, GM_earth 3.986004e14, GM_jup 1.2668653e17 m^3/s^2; R_earth
  6.3781e6, R_jup 7.1492e7 m equatorial).
- Galilean satellites' GMs (Io 5959.9, Europa 3202.7, Ganymede 9887.8, Callisto
  7179.3 km^3/s^2), from memory, to relate Jupiter's system GM to the planet's.
- Standish's Table 1 (the Earth row is the Earth-Moon barycentre), see
  test_ephemeris.py.
"""

import numpy as np
import pytest
from astropy import constants as const

from leverage.astro import bodies

M3_TO_KM3 = 1e-9


def test_au_exact():
    assert bodies.AU_KM == 149_597_870.700  # IAU 2012 Resolution B2 (exact)


def test_earth_gm_iers_2010():
    assert bodies.planet("earth").gm_km3_s2 == 398_600.4418  # IERS 2010 Table 1.1


def test_sun_gm_vs_iau_2015_nominal():
    # IAU 2015 B3 nominal GM_sun (astropy) is given to 8 digits; DE440's value agrees
    # to 1e-9 relative.
    nominal = const.GM_sun.to_value("m3 / s2") * M3_TO_KM3
    assert bodies.GM_SUN_KM3_S2 == pytest.approx(nominal, rel=1e-9)


def test_earth_gm_vs_iau_2015_nominal():
    # Nominal 3.986004e14 m^3/s^2: 7 significant digits, half a unit = 0.05 km^3/s^2.
    nominal = const.GM_earth.to_value("m3 / s2") * M3_TO_KM3
    assert abs(bodies.planet("earth").gm_km3_s2 - nominal) <= 0.05


def test_jupiter_system_gm_vs_planet_gm():
    # bodies holds the Jupiter *system* GM (DE440, planet + satellites); the IAU 2015
    # nominal GM_jup (astropy, 8 digits: +-5 km^3/s^2) is the planet alone. The
    # difference is the Galilean satellites' GM (from memory, sum 26229.7 km^3/s^2).
    nominal = const.GM_jup.to_value("m3 / s2") * M3_TO_KM3
    galilean = 5959.9 + 3202.7 + 9887.8 + 7179.3
    assert bodies.planet("jupiter").gm_km3_s2 - nominal == pytest.approx(galilean, abs=10.0)


def test_radii_vs_iau_2015_nominal():
    assert bodies.planet("earth").equatorial_radius_km == pytest.approx(
        const.R_earth.to_value("km"), abs=0.05
    )
    assert bodies.planet("jupiter").equatorial_radius_km == pytest.approx(
        const.R_jup.to_value("km"), abs=0.5
    )


def test_lookup_is_case_insensitive():
    assert bodies.planet("  Venus ") is bodies.PLANETS["venus"]
    assert bodies.planet("MARS").name == "Mars"


def test_lookup_error_lists_valid_names():
    with pytest.raises(KeyError) as err:
        bodies.planet("pluto")
    message = str(err.value)
    assert "pluto" in message
    for name in bodies.PLANETS:
        assert name in message


def test_ephemeris_arrays_are_standish_rows():
    for body in bodies.PLANETS.values():
        eph = body.ephemeris_array()
        assert eph[0] == 0.0 and eph[1] == bodies.AU_KM
        np.testing.assert_array_equal(eph[2:], body.mean_elements)
    # Standish Table 1, Earth-Moon barycentre row: a = 1.00000261 au, e = 0.01671123,
    # L = 100.46457166 deg, dL/dT = 35999.37244981 deg/century (his table).
    row = bodies.PLANETS["earth"].mean_elements
    assert row[0] == 1.00000261 and row[1] == 0.01671123
    assert row[3] == 100.46457166 and row[9] == 35999.37244981


def test_osculating_array_layout():
    eph = bodies.osculating_array(2e8, 0.1, 10.0, 20.0, 30.0, 40.0, 1e8)
    assert eph[0] == 1.0 and eph[1] == bodies.GM_SUN_KM3_S2
    np.testing.assert_allclose(eph[2:9], [2e8, 0.1] + list(np.radians([10, 20, 30, 40])) + [1e8])
