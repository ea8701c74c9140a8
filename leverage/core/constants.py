"""Constants shared by every layer, each with its source. Plain floats (numba freezes them).

- ``AU_KM``: the astronomical unit, 149,597,870.700 km exactly (IAU 2012 Resolution B2).
- ``DAY_S``: the day of 86,400 SI seconds (IAU; the unit of Julian dates and TDB days here).
- ``JULIAN_CENTURY_S``: 36,525 days (the unit of Standish's element rates).
- ``J2000_JD``: JD 2451545.0, 2000-01-01 12:00 TDB, the epoch that time values here count
  from (IAU 1976 / IAU 2000 J2000.0).
- ``OBLIQUITY_J2000_RAD``: obliquity of the ecliptic at J2000, 84381.448 arcsec (IAU 1976,
  as used for JPL's ecliptic J2000 frame).
- ``PLANET_NAMES``: the eight planets, Sun outward (IAU 2006 Resolution B5).
- ``G0_KM_S2``: standard gravity 9.80665 m/s^2 (3rd CGPM 1901, exact), in km/s^2.
"""

import math

AU_KM = 149_597_870.700
DAY_S = 86400.0
JULIAN_CENTURY_S = 36525.0 * DAY_S
J2000_JD = 2451545.0
OBLIQUITY_J2000_RAD = 84381.448 / 3600.0 * math.pi / 180.0
G0_KM_S2 = 9.80665e-3
PLANET_NAMES = ("mercury", "venus", "earth", "mars", "jupiter", "saturn", "uranus", "neptune")
