"""Heliocentric states of bodies from orbital elements (ecliptic J2000, km, km/s).

Three encodings of a body's motion, each described by ``EPHEMERIS_SIZE`` slots
(a "header") so that compiled code can take any of them:

* ``KIND_MEAN_ELEMENTS``: Standish's mean elements and their rates, E. M. Standish,
  "Keplerian Elements for Approximate Positions of the Major Planets", JPL,
  Table 1 (valid 1800-2050): a (au), e, I, L, long. of perihelion, long. of node
  (deg), each followed by its rate per Julian century. Slot layout:
  [kind, au_km, a, e, I, L, varpi, Omega, a', e', I', L', varpi', Omega'].
* ``KIND_OSCULATING``: fixed two-body elements at an epoch, for a body given by the
  user: [kind, mu_central, a_km, e, i, raan, argp, M0 (rad), epoch (s TDB past
  J2000), 0, ...].
* ``KIND_CHEBYSHEV``: a JPL DE ephemeris over a date span, as Chebyshev series of the
  body's heliocentric ecliptic J2000 position (see ``chebyshev_state``). The header
  says where the coefficient table lies in the parameter array ``p`` (tables are
  appended after the fixed slots), so this kind is evaluated by
  ``body_state_in(p, slot, t)``; ``body_state(eph, t)`` on the header alone cannot
  and returns NaN.

Time is TDB seconds past J2000 (2000-01-01 12:00 TDB); Standish's T_eph is treated
as TDB, which his stated accuracy allows.
"""

import numpy as np
from numba import njit

from .constants import DAY_S, JULIAN_CENTURY_S  # noqa: F401 (DAY_S re-exported)
from .kepler import eccentric_from_mean, state_from_elements
from .layout import EPHEMERIS_SIZE  # noqa: F401 (re-exported)

KIND_MEAN_ELEMENTS = 0.0
KIND_OSCULATING = 1.0
KIND_CHEBYSHEV = 2.0

# Header slots of KIND_CHEBYSHEV (offsets from the header's first slot).
CHEB_TABLE = 1  # index in p of the first coefficient of the table
CHEB_GRANULES = 2  # number of granules (equal time intervals) in the table
CHEB_NCOEF = 3  # Chebyshev coefficients per component and granule
CHEB_T_START = 4  # start of the first granule, s TDB past J2000
CHEB_GRANULE_S = 5  # granule length, s
CHEB_T_END = 6  # end of the last granule, s TDB past J2000
CHEB_NAIF_ID = 7  # the body (NAIF code: 399 Earth, 1..8 system barycentres); for reports
CHEB_DE_NUMBER = 8  # DE number of the source (421, 423, ...; 0 if unknown); for reports

_DEG = np.pi / 180.0


@njit(cache=True)
def mean_elements_state(eph, t):
    """State (km, km/s) from Standish mean elements at t (s TDB past J2000).

    Follows Standish's recipe: elements at T centuries, M = L - varpi,
    omega = varpi - Omega, Kepler's equation, then rotation to the ecliptic.
    The velocity is the time derivative of that position with the mean motion
    dL/dt (slow rates of the other elements neglected), so position and velocity
    agree with each other rather than with a two-body GM.
    """
    au_km = eph[1]
    cent = t / JULIAN_CENTURY_S
    a = (eph[2] + eph[8] * cent) * au_km
    ecc = eph[3] + eph[9] * cent
    inc = (eph[4] + eph[10] * cent) * _DEG
    mean_lon = (eph[5] + eph[11] * cent) * _DEG
    varpi = (eph[6] + eph[12] * cent) * _DEG
    node = (eph[7] + eph[13] * cent) * _DEG
    argp = varpi - node
    e_anom = eccentric_from_mean(mean_lon - varpi, ecc)
    n = eph[11] * _DEG / JULIAN_CENTURY_S  # rad/s
    e_dot = n / (1.0 - ecc * np.cos(e_anom))
    b = np.sqrt(1.0 - ecc * ecc)
    xp = a * (np.cos(e_anom) - ecc)
    yp = a * b * np.sin(e_anom)
    vxp = -a * np.sin(e_anom) * e_dot
    vyp = a * b * np.cos(e_anom) * e_dot
    cw, sw = np.cos(argp), np.sin(argp)
    co, so = np.cos(node), np.sin(node)
    ci, si = np.cos(inc), np.sin(inc)
    # Standish eq. (8-4): perifocal -> ecliptic J2000.
    m11 = cw * co - sw * so * ci
    m12 = -sw * co - cw * so * ci
    m21 = cw * so + sw * co * ci
    m22 = -sw * so + cw * co * ci
    m31 = sw * si
    m32 = cw * si
    r = np.empty(3)
    v = np.empty(3)
    r[0] = m11 * xp + m12 * yp
    r[1] = m21 * xp + m22 * yp
    r[2] = m31 * xp + m32 * yp
    v[0] = m11 * vxp + m12 * vyp
    v[1] = m21 * vxp + m22 * vyp
    v[2] = m31 * vxp + m32 * vyp
    return r, v


@njit(cache=True)
def osculating_state(eph, t):
    """State (km, km/s) of a body on a fixed two-body orbit given at an epoch."""
    mu = eph[1]
    a = eph[2]
    n = np.sqrt(mu / (a * a * a))
    mean_anom = eph[7] + n * (t - eph[8])
    return state_from_elements(mu, a, eph[3], eph[4], eph[5], eph[6], mean_anom)


@njit(cache=True)
def chebyshev_state(p, slot, t):
    """State (km, km/s) at t (s TDB past J2000) from a Chebyshev table in ``p``.

    ``p[slot:slot + EPHEMERIS_SIZE]`` is a KIND_CHEBYSHEV header. The table holds, for
    each granule k (in order) and each component x, y, z of the heliocentric
    ecliptic J2000 position (km), ``n`` coefficients c_0..c_{n-1} of
    sum_j c_j T_j(s), s = 2 (t - t_k) / granule - 1 in [-1, 1] over the granule, as
    in the JPL DE files (Standish, "JPL Planetary and Lunar Ephemerides",
    documentation of the export files; the coefficients themselves are JPL DE421,
    Folkner et al. 2008, IPN Progress Report 42-178, or the file the table was built
    from; see ``leverage.astro.de_tables``). The series is summed by Clenshaw's
    recurrence; the velocity is its exact derivative (the recurrence differentiated
    term by term) times 2 / granule, so position and velocity are those of the
    ephemeris itself.

    Outside [t_start, t_end] (or for a NaN t) both vectors are NaN: the callers
    turn that into a failed evaluation.

    Why this form and not a dense table of states with cubic Hermite interpolation
    (measured with ``benchmarks/de_design.py``, Earth from DE421 over 2029-2037, 2-core
    EPYC): the copied coefficients are the ephemeris itself (1.2e-5 km, 1.8e-4 mm/s
    from jplephem's own evaluation, tests/test_de_tables.py) at 0.23 MB; a Hermite
    table of the same size (a state every 0.5 day) is off by up to 6 m and 0.44
    mm/s, and needs 0.25 day (0.56 MB) to get under 0.1 mm/s. Hermite is cheaper per
    state (50-80 ns against 123 ns, two runs), but both are below the mean-element
    kernel (235 ns) and a few tenths of a microsecond per evaluation do not show in
    a fitness of several microseconds.
    """
    r = np.empty(3)
    v = np.empty(3)
    n_gran = int(p[slot + CHEB_GRANULES])
    u = (t - p[slot + CHEB_T_START]) / p[slot + CHEB_GRANULE_S]
    if not (u >= 0.0 and u <= n_gran):  # also false for NaN
        for c in range(3):
            r[c] = np.nan
            v[c] = np.nan
        return r, v
    k = int(u)
    if k == n_gran:  # t exactly at the end: last granule, s = 1
        k -= 1
    s = 2.0 * (u - k) - 1.0
    s2 = 2.0 * s
    n = int(p[slot + CHEB_NCOEF])
    scale = 2.0 / p[slot + CHEB_GRANULE_S]
    base = int(p[slot + CHEB_TABLE]) + k * 3 * n
    for c in range(3):
        first = base + c * n
        # Clenshaw: b_j = c_j + 2 s b_{j+1} - b_{j+2}; f = c_0 + s b_1 - b_2, and its
        # derivative d_j = 2 b_{j+1} + 2 s d_{j+1} - d_{j+2}; f' = b_1 + s d_1 - d_2.
        b1 = 0.0
        b2 = 0.0
        d1 = 0.0
        d2 = 0.0
        for j in range(n - 1, 0, -1):
            d0 = 2.0 * b1 + s2 * d1 - d2
            b0 = p[first + j] + s2 * b1 - b2
            d2 = d1
            d1 = d0
            b2 = b1
            b1 = b0
        r[c] = p[first] + s * b1 - b2
        v[c] = (b1 + s * d1 - d2) * scale
    return r, v


@njit(cache=True)
def body_state(eph, t):
    """Heliocentric ecliptic J2000 state (km, km/s) at t (s TDB past J2000).

    For the two closed-form kinds given by their EPHEMERIS_SIZE slots alone; a
    KIND_CHEBYSHEV header needs its table: use ``body_state_in`` (NaN here).
    """
    if eph[0] == KIND_OSCULATING:
        return osculating_state(eph, t)
    if eph[0] == KIND_CHEBYSHEV:
        nan = np.full(3, np.nan)
        return nan, nan.copy()
    return mean_elements_state(eph, t)


@njit(cache=True)
def body_state_in(p, slot, t):
    """State (km, km/s) at t (s TDB past J2000) of the body whose header starts at
    ``p[slot]`` (any kind; heliocentric ecliptic J2000). NaN outside a table's span."""
    if p[slot] == KIND_CHEBYSHEV:
        return chebyshev_state(p, slot, t)
    return body_state(p[slot : slot + EPHEMERIS_SIZE], t)
