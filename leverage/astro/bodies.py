"""Physical constants of the Sun and planets, each with its source.

GM in km^3/s^2, radii in km, angles in degrees. Sources:
- AU: IAU 2012 Resolution B2 (exact, 149 597 870.700 km).
- GM of the Sun and of the planetary systems: JPL planetary ephemeris DE440
  (Park et al. 2021, AJ 161:105), values quoted from memory; Earth's GM from the
  IERS Conventions (2010), Table 1.1 (398 600.4418 km^3/s^2, TT-compatible).
- Equatorial radii: IAU 2015 Resolution B3 nominal values for Earth, Jupiter,
  Saturn, Uranus, Neptune; IAU WGCCRE 2015 report (Archinal et al. 2018) for
  Mercury, Venus, Mars (quoted from memory).
- Pole right ascension / declination at J2000 (constant terms, EME2000): IAU
  WGCCRE 2015 report, quoted from memory; used only for DLA/RLA of a non-Earth
  departure.
- Mean elements: Standish, "Keplerian Elements for Approximate Positions of the
  Major Planets" (JPL), Table 1, 1800-2050 (Earth row = Earth-Moon barycentre).
- Default minimum flyby altitudes: common practice for a first design pass, not a
  safety limit; every problem file may set its own.
"""

from dataclasses import dataclass

import numpy as np

from leverage.core.constants import AU_KM  # noqa: F401 (re-exported)
from leverage.core.ephemeris import EPHEMERIS_SIZE, KIND_MEAN_ELEMENTS, KIND_OSCULATING

GM_SUN_KM3_S2 = 132_712_440_041.279419


@dataclass(frozen=True)
class Body:
    """A body that can be launched from, flown by, or targeted."""

    name: str
    gm_km3_s2: float
    equatorial_radius_km: float
    default_min_flyby_altitude_km: float
    pole_ra_deg: float
    pole_dec_deg: float
    # Standish Table 1: a (au), e, I, L, varpi, Omega (deg) then their rates per century.
    mean_elements: tuple

    def ephemeris_array(self) -> np.ndarray:
        """The packed ephemeris slots for compiled code (see core.ephemeris)."""
        return mean_elements_array(self.mean_elements)


def mean_elements_array(row) -> np.ndarray:
    eph = np.zeros(EPHEMERIS_SIZE)
    eph[0] = KIND_MEAN_ELEMENTS
    eph[1] = AU_KM
    eph[2:14] = row
    return eph


def osculating_array(
    a_km,
    ecc,
    inc_deg,
    raan_deg,
    argp_deg,
    mean_anomaly_deg,
    epoch_tdb_s,
    gm_central_km3_s2=GM_SUN_KM3_S2,
) -> np.ndarray:
    """Packed ephemeris slots of a body on fixed heliocentric ecliptic J2000 elements."""
    eph = np.zeros(EPHEMERIS_SIZE)
    eph[0] = KIND_OSCULATING
    eph[1] = gm_central_km3_s2
    eph[2] = a_km
    eph[3] = ecc
    eph[4:8] = np.radians([inc_deg, raan_deg, argp_deg, mean_anomaly_deg])
    eph[8] = epoch_tdb_s
    return eph


PLANETS = {
    "mercury": Body(
        "Mercury",
        22_031.868551,
        2_440.53,
        200.0,
        281.0103,
        61.4155,
        (
            0.38709927,
            0.20563593,
            7.00497902,
            252.25032350,
            77.45779628,
            48.33076593,
            0.00000037,
            0.00001906,
            -0.00594749,
            149472.67411175,
            0.16047689,
            -0.12534081,
        ),
    ),
    "venus": Body(
        "Venus",
        324_858.592,
        6_051.8,
        300.0,
        272.76,
        67.16,
        (
            0.72333566,
            0.00677672,
            3.39467605,
            181.97909950,
            131.60246718,
            76.67984255,
            0.00000390,
            -0.00004107,
            -0.00078890,
            58517.81538729,
            0.00268329,
            -0.27769418,
        ),
    ),
    "earth": Body(
        "Earth",
        398_600.4418,
        6_378.1,
        300.0,
        0.0,
        90.0,
        (
            1.00000261,
            0.01671123,
            -0.00001531,
            100.46457166,
            102.93768193,
            0.0,
            0.00000562,
            -0.00004392,
            -0.01294668,
            35999.37244981,
            0.32327364,
            0.0,
        ),
    ),
    "mars": Body(
        "Mars",
        42_828.375816,
        3_396.19,
        200.0,
        317.269202,
        54.432516,
        (
            1.52371034,
            0.09339410,
            1.84969142,
            -4.55343205,
            -23.94362959,
            49.55953891,
            0.00001847,
            0.00007882,
            -0.00813131,
            19140.30268499,
            0.44441088,
            -0.29257343,
        ),
    ),
    "jupiter": Body(
        "Jupiter",
        126_712_764.1,
        71_492.0,
        300_000.0,
        268.056595,
        64.495303,
        (
            5.20288700,
            0.04838624,
            1.30439695,
            34.39644051,
            14.72847983,
            100.47390909,
            -0.00011607,
            -0.00013253,
            -0.00183714,
            3034.74612775,
            0.21252668,
            0.20469106,
        ),
    ),
    "saturn": Body(
        "Saturn",
        37_940_584.8418,
        60_268.0,
        10_000.0,
        40.589,
        83.537,
        (
            9.53667594,
            0.05386179,
            2.48599187,
            49.95424423,
            92.59887831,
            113.66242448,
            -0.00125060,
            -0.00050991,
            0.00193609,
            1222.49362201,
            -0.41897216,
            -0.28867794,
        ),
    ),
    "uranus": Body(
        "Uranus",
        5_794_556.4,
        25_559.0,
        1_000.0,
        257.311,
        -15.175,
        (
            19.18916464,
            0.04725744,
            0.77263783,
            313.23810451,
            170.95427630,
            74.01692503,
            -0.00196176,
            -0.00004397,
            -0.00242939,
            428.48202785,
            0.40805281,
            0.04240589,
        ),
    ),
    "neptune": Body(
        "Neptune",
        6_836_527.10058,
        24_764.0,
        1_000.0,
        299.36,
        43.46,
        (
            30.06992276,
            0.00859048,
            1.77004347,
            -55.12002969,
            44.96476227,
            131.78422574,
            0.00026291,
            0.00005105,
            0.00035372,
            218.45945325,
            -0.32241464,
            -0.00508664,
        ),
    ),
}


def planet(name: str) -> Body:
    """The planet called ``name`` (case-insensitive); KeyError lists valid names."""
    key = name.strip().lower()
    if key not in PLANETS:
        raise KeyError(f"unknown body {name!r}; known: {', '.join(sorted(PLANETS))}")
    return PLANETS[key]
