"""Launch-vehicle performance and the rocket equation (kg, km/s, s).

Injected mass at a launch C3 is read from a table of (C3, mass) rows by linear
interpolation; outside the table the mass is held at the end row's value and a
negative margin (km^2/s^2 beyond the table) makes the design infeasible, so the
search sees a continuous objective. Mass after a burn follows Tsiolkovsky's rocket
equation m_final = m0 exp(-dv / (g0 Isp)), with g0 the standard acceleration of
gravity 9.80665 m/s^2 (3rd CGPM, 1901).
"""

import numpy as np
from numba import njit

from .constants import G0_KM_S2


@njit(cache=True)
def injected_mass(c3, table_c3, table_mass, rows):
    """(mass kg, margin km^2/s^2) at launch energy c3 from the first ``rows`` table rows.

    table_c3 increasing (km^2/s^2); margin = min(c3 - first C3, last C3 - c3), >= 0
    exactly inside the table. The mass is interpolated linearly, clamped outside.
    """
    lo = table_c3[0]
    hi = table_c3[rows - 1]
    margin = min(c3 - lo, hi - c3)
    if c3 <= lo:
        return table_mass[0], margin
    if c3 >= hi:
        return table_mass[rows - 1], margin
    k = 1
    while table_c3[k] < c3:
        k += 1
    w = (c3 - table_c3[k - 1]) / (table_c3[k] - table_c3[k - 1])
    return table_mass[k - 1] + w * (table_mass[k] - table_mass[k - 1]), margin


@njit(cache=True)
def mass_ratio(dv, isp_s):
    """Final over initial mass after a burn of dv (km/s) at specific impulse isp_s (s)."""
    return np.exp(-dv / (G0_KM_S2 * isp_s))
