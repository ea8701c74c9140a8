"""Two-body motion: Kepler's equation, orbital elements <-> state, propagation.

Units: km, s, km/s, rad. Frame: whatever frame the input state is in.
Propagation calls poliastro's numba kernel for the universal-variable method
(Vallado, Fundamentals of Astrodynamics and Applications, Algorithm 8) and never
raises: a failure comes back as ``ok=False``.
"""
import numpy as np
from numba import njit
from poliastro.core.elements import coe2rv, rv2coe
from poliastro.core.propagation.vallado import vallado as _vallado_fg

TWO_PI = 2.0 * np.pi
_KEPLER_TOL = 1e-13
_MAX_ITER = 50
_PROPAGATION_ITER = 350
_MAX_SPLIT_STEPS = 16


@njit(cache=True)
def wrap_pi(angle):
    """Angle wrapped to [-pi, pi) (rad)."""
    return (angle + np.pi) % TWO_PI - np.pi


@njit(cache=True)
def eccentric_from_mean(mean_anomaly, ecc):
    """Eccentric anomaly E (rad) solving Kepler's equation M = E - e sin E, 0 <= e < 1.

    Newton's method from the starter E0 = M + e sin M (Danby 1988 style start),
    on M wrapped to [-pi, pi); converges to 1e-13 rad in a few steps for e < 0.99.
    """
    m = wrap_pi(mean_anomaly)
    e_anom = m + ecc * np.sin(m)
    for _ in range(_MAX_ITER):
        step = (e_anom - ecc * np.sin(e_anom) - m) / (1.0 - ecc * np.cos(e_anom))
        e_anom -= step
        if abs(step) < _KEPLER_TOL:
            break
    return e_anom


@njit(cache=True)
def true_from_eccentric(e_anom, ecc):
    """True anomaly (rad) from eccentric anomaly (rad), elliptic orbits."""
    return 2.0 * np.arctan2(np.sqrt(1.0 + ecc) * np.sin(0.5 * e_anom),
                            np.sqrt(1.0 - ecc) * np.cos(0.5 * e_anom))


@njit(cache=True)
def state_from_elements(mu, a, ecc, inc, raan, argp, mean_anomaly):
    """Position (km) and velocity (km/s) from classical elements of an ellipse.

    a in km, angles in rad, mean anomaly in rad; frame of the reference plane the
    angles are measured in. Uses poliastro.core.elements.coe2rv for the rotation.
    """
    e_anom = eccentric_from_mean(mean_anomaly, ecc)
    nu = true_from_eccentric(e_anom, ecc)
    p = a * (1.0 - ecc * ecc)
    rv = coe2rv(mu, p, ecc, inc, raan, argp, nu)
    return rv[0].copy(), rv[1].copy()


@njit(cache=True)
def elements_from_state(mu, r, v):
    """Classical elements (a km, e, i, raan, argp, nu rad) from a state (km, km/s).

    a is negative for hyperbolas (a = -mu / v_inf^2 convention). Uses
    poliastro.core.elements.rv2coe.
    """
    p, ecc, inc, raan, argp, nu = rv2coe(mu, r, v, 1e-8)
    a = p / (1.0 - ecc * ecc) if abs(1.0 - ecc) > 1e-12 else np.inf
    return a, ecc, inc, raan, argp, nu


@njit(cache=True)
def _propagate_once(mu, r0, v0, tof):
    """One universal-variable step (see ``propagate``); (r, v, ok)."""
    r = np.zeros(3)
    v = np.zeros(3)
    try:
        f, g, fdot, gdot = _vallado_fg(mu, r0, v0, tof, _PROPAGATION_ITER)
    except Exception:
        return r, v, False
    for k in range(3):
        r[k] = f * r0[k] + g * v0[k]
        v[k] = fdot * r0[k] + gdot * v0[k]
    return r, v, True


@njit(cache=True)
def propagate(mu, r0, v0, tof):
    """State after ``tof`` seconds of two-body motion (km, km/s), and an ok flag.

    Universal-variable Lagrange coefficients from poliastro.core.propagation.vallado
    (Vallado 2013, Algorithm 8). Any number of revolutions; tof may be negative.
    Never raises: on non-convergence returns zeros and ok=False.
    """
    if tof == 0.0:
        return r0.copy(), v0.copy(), True
    # The Newton iteration on the universal anomaly can fail to settle for some
    # near-parabolic ellipses at particular times; the same motion in 2, 4, ... equal
    # steps starts every iteration from another guess.
    steps = 1
    while steps <= _MAX_SPLIT_STEPS:
        r, v, ok = r0.copy(), v0.copy(), True
        for _ in range(steps):
            r, v, ok = _propagate_once(mu, r, v, tof / steps)
            if not ok:
                break
        if ok:
            return r, v, True
        steps *= 2
    return np.zeros(3), np.zeros(3), False


@njit(cache=True)
def orbit_energy(mu, r, v):
    """Specific orbital energy (km^2/s^2): v^2/2 - mu/r."""
    return 0.5 * (v @ v) - mu / np.sqrt(r @ r)
