"""Heliocentric states of bodies from orbital elements (ecliptic J2000, km, km/s).

Two encodings of a body's motion, packed in one float64 array of length
``EPHEMERIS_SIZE`` so that compiled code can take either:

* ``KIND_MEAN_ELEMENTS``: Standish's mean elements and their rates, E. M. Standish,
  "Keplerian Elements for Approximate Positions of the Major Planets", JPL,
  Table 1 (valid 1800-2050): a (au), e, I, L, long. of perihelion, long. of node
  (deg), each followed by its rate per Julian century. Slot layout:
  [kind, au_km, a, e, I, L, varpi, Omega, a', e', I', L', varpi', Omega'].
* ``KIND_OSCULATING``: fixed two-body elements at an epoch, for a body given by the
  user: [kind, mu_central, a_km, e, i, raan, argp, M0 (rad), epoch (s TDB past
  J2000), 0, ...].

Time is TDB seconds past J2000 (2000-01-01 12:00 TDB); Standish's T_eph is treated
as TDB, which his stated accuracy allows.
"""
import numpy as np
from numba import njit

from .constants import DAY_S, JULIAN_CENTURY_S  # noqa: F401 (DAY_S re-exported)
from .kepler import eccentric_from_mean, state_from_elements

EPHEMERIS_SIZE = 14
KIND_MEAN_ELEMENTS = 0.0
KIND_OSCULATING = 1.0

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
def body_state(eph, t):
    """Heliocentric ecliptic J2000 state (km, km/s) at t (s TDB past J2000)."""
    if eph[0] == KIND_OSCULATING:
        return osculating_state(eph, t)
    return mean_elements_state(eph, t)
