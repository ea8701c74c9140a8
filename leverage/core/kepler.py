"""Two-body motion: Kepler's equation, orbital elements <-> state, propagation.

Units: km, s, km/s, rad. Frame: whatever frame the input state is in.
Propagation solves the universal-variable Kepler equation (Vallado, Fundamentals of
Astrodynamics and Applications, Algorithm 8; Curtis, Orbital Mechanics for
Engineering Students, Algorithm 3.4) by Newton's method safeguarded with bisection on
a bracket, and never raises: a failure comes back as ``ok=False``.
(poliastro 0.17's ``vallado`` kernel, retried in equal sub-steps, was used before: it
loops forever when its hyperbolic starting guess is NaN (its Stumpff series never
ends on NaN), stops at an absolute 1e-7 step in the universal anomaly and evaluates
the Lagrange coefficients one iterate behind, ~1e-8 relative error on hyperbolas.)
"""

import numpy as np
from numba import njit
from poliastro.core.elements import coe2rv, rv2coe

from .vec3 import cross, dot, norm

TWO_PI = 2.0 * np.pi
_KEPLER_TOL = 1e-13
_MAX_ITER = 50
_PROPAGATION_ITER = 200
_RV2COE_TOL = 1e-8  # elements_from_state's tolerance for circular and equatorial orbits


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
    return 2.0 * np.arctan2(
        np.sqrt(1.0 + ecc) * np.sin(0.5 * e_anom), np.sqrt(1.0 - ecc) * np.cos(0.5 * e_anom)
    )


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
    poliastro.core.elements.rv2coe. A rectilinear state (zero angular momentum)
    gives NaN for every element instead of raising.
    """
    try:
        p, ecc, inc, raan, argp, nu = rv2coe(mu, r, v, _RV2COE_TOL)
    except Exception:
        # rv2coe divides by |h|: a rectilinear state has no plane; never raise here.
        return np.nan, np.nan, np.nan, np.nan, np.nan, np.nan
    a = p / (1.0 - ecc * ecc) if abs(1.0 - ecc) > 1e-12 else np.inf
    return a, ecc, inc, raan, argp, nu


@njit(cache=True)
def orbit_shape(mu, r, v):
    """(a km, e, i rad) of a state (km, km/s): ``elements_from_state``'s first three.

    The same arithmetic as poliastro's rv2coe (h = r x v, the eccentricity vector,
    i = acos(h_z / |h|)) without the node, periapsis and anomaly, which a fitness does
    not need; the values are bit for bit ``elements_from_state``'s (NaN for all three
    exactly where rv2coe would raise: r = 0, h = 0, e = 1, or a zero divisor in its
    true-anomaly formulas).
    """
    nan3 = (np.nan, np.nan, np.nan)
    rn = norm(r)
    vv = dot(v, v)
    if rn == 0.0:
        return nan3
    h = cross(r, v)
    rv = dot(r, v)
    c1 = vv - mu / rn
    e = np.empty(3)
    for k in range(3):
        e[k] = (c1 * r[k] - rv * v[k]) / mu
    ecc = norm(e)
    p = dot(h, h) / mu
    hn = norm(h)
    if hn == 0.0:
        return nan3
    inc = np.arccos(h[2] / hn)
    circular = ecc < _RV2COE_TOL
    equatorial = abs(inc) < _RV2COE_TOL
    if not (circular or equatorial):
        # rv2coe's general branch divides by 1 - e^2, sqrt(+-k a) and e_ch - e_sh.
        one_minus = 1 - (ecc**2)
        if one_minus == 0.0:
            return nan3
        ka = mu * (p / one_minus)
        if p / one_minus > 0:
            if np.sqrt(ka) == 0.0:
                return nan3
        else:
            root = np.sqrt(-ka)
            if root == 0.0:
                return nan3
            e_sh = rv / root
            e_ch = rn * (norm(v) ** 2) / mu - 1
            if e_ch - e_sh == 0.0:
                return nan3
    a = p / (1.0 - ecc * ecc) if abs(1.0 - ecc) > 1e-12 else np.inf
    return a, ecc, inc


@njit(cache=True)
def _stumpff(psi):
    """Stumpff functions C(psi), S(psi) (Curtis eqs. 3.52-3.53); series for |psi| <= 1."""
    if psi > 1.0:
        sq = np.sqrt(psi)
        return (1.0 - np.cos(sq)) / psi, (sq - np.sin(sq)) / (psi * sq)
    if psi < -1.0:
        sq = np.sqrt(-psi)
        return (np.cosh(sq) - 1.0) / (-psi), (np.sinh(sq) - sq) / (-psi * sq)
    c = 0.0
    s = 0.0
    term_c = 0.5
    term_s = 1.0 / 6.0
    for k in range(12):  # C = sum (-psi)^k/(2k+2)!, S = sum (-psi)^k/(2k+3)!
        c += term_c
        s += term_s
        term_c *= -psi / ((2 * k + 3) * (2 * k + 4))
        term_s *= -psi / ((2 * k + 4) * (2 * k + 5))
    return c, s


@njit(cache=True)
def _universal_time(chi, r0n, sigma0, alpha):
    """sqrt(mu) * time to universal anomaly chi, and its derivative (the radius)."""
    psi = alpha * chi * chi
    c, s = _stumpff(psi)
    chi2 = chi * chi
    f_val = sigma0 * chi2 * c + (1.0 - alpha * r0n) * chi2 * chi * s + r0n * chi
    radius = chi2 * c + sigma0 * chi * (1.0 - psi * s) + r0n * (1.0 - psi * c)
    return f_val, radius


@njit(cache=True)
def propagate(mu, r0, v0, tof):
    """State after ``tof`` seconds of two-body motion (km, km/s), and an ok flag.

    Universal-variable Lagrange coefficients (Vallado 2013, Algorithm 8). Any number
    of revolutions (an ellipse's time is first reduced modulo its period); tof may
    be negative. Never raises: on failure returns zeros and ok=False.
    """
    r = np.zeros(3)
    v = np.zeros(3)
    if tof == 0.0:
        return r0.copy(), v0.copy(), True
    r0n = np.sqrt(dot(r0, r0))
    if not (
        np.isfinite(tof) and np.isfinite(r0n) and np.all(np.isfinite(v0)) and r0n > 0.0 and mu > 0.0
    ):
        return r, v, False
    sqrt_mu = np.sqrt(mu)
    sigma0 = dot(r0, v0) / sqrt_mu
    alpha = 2.0 / r0n - dot(v0, v0) / mu
    t = tof
    if alpha * r0n > 1e-12:
        # Ellipse: reduce to |t| <= P/2; then |delta E| < 2 pi brackets chi = dE/sqrt(alpha).
        period = TWO_PI / (sqrt_mu * alpha * np.sqrt(alpha))
        t = tof - period * np.round(tof / period)
        hi = TWO_PI / np.sqrt(alpha)
        lo = -hi
        chi = sqrt_mu * t * alpha
    else:
        # Parabola or hyperbola: F(chi) increases monotonically (dF/dchi = r > 0) and
        # without bound; start from Vallado's hyperbolic guess when it is defined,
        # else sqrt(mu) t / r0, and double until the root is bracketed.
        chi = sqrt_mu * t / r0n
        if alpha < 0.0:
            sign_t = 1.0 if t > 0.0 else -1.0
            arg = (-2.0 * mu * alpha * t) / (
                dot(r0, v0) + sign_t * np.sqrt(-mu / alpha) * (1.0 - r0n * alpha)
            )
            if arg > 0.0 and np.isfinite(arg):
                guess = sign_t * np.sqrt(-1.0 / alpha) * np.log(arg)
                if np.isfinite(guess) and guess * t > 0.0:
                    chi = guess
        lo = min(0.0, chi)
        hi = max(0.0, chi)
        for _ in range(200):
            f_end, _r = _universal_time(chi, r0n, sigma0, alpha)
            past = (not np.isfinite(f_end)) or (
                f_end >= sqrt_mu * t if t > 0.0 else f_end <= sqrt_mu * t
            )
            if past:
                break
            if t > 0.0:
                lo = chi
            else:
                hi = chi
            chi *= 2.0
        if t > 0.0:
            hi = chi
        else:
            lo = chi
    target = sqrt_mu * t
    if not (lo <= chi <= hi):
        chi = 0.5 * (lo + hi)
    # Newton's method kept inside the bracket, bisecting when a Newton step would
    # leave it or shrink slower than bisection ("rtsafe", Press et al., Numerical
    # Recipes, sec. 9.4).
    dx = hi - lo
    dx_old = dx
    converged = False
    for _ in range(_PROPAGATION_ITER):
        f_val, radius = _universal_time(chi, r0n, sigma0, alpha)
        dx_old = dx
        if not (np.isfinite(f_val) and np.isfinite(radius)):
            if chi > 0.0:
                hi = chi
            else:
                lo = chi
            dx = 0.5 * (hi - lo)
            chi = lo + dx
            continue
        resid = f_val - target
        if resid > 0.0:
            hi = chi
        else:
            lo = chi
        newton = chi - resid / radius if radius > 0.0 else np.inf
        if lo <= newton <= hi and abs(2.0 * resid) <= abs(dx_old * radius):
            dx = chi - newton
            chi = newton
        else:
            dx = 0.5 * (hi - lo)
            chi = lo + dx
        if abs(dx) <= 1e-12 * abs(chi) or dx == 0.0:
            converged = True
            break
    if not converged:
        return r, v, False
    psi = alpha * chi * chi
    c, s = _stumpff(psi)
    _f, rn = _universal_time(chi, r0n, sigma0, alpha)
    f = 1.0 - chi * chi / r0n * c
    g = t - chi * chi * chi / sqrt_mu * s
    fdot = sqrt_mu / (rn * r0n) * chi * (psi * s - 1.0)
    gdot = 1.0 - chi * chi / rn * c
    if not (np.isfinite(f) and np.isfinite(g) and np.isfinite(fdot) and np.isfinite(gdot)):
        return r, v, False
    for k in range(3):
        r[k] = f * r0[k] + g * v0[k]
        v[k] = fdot * r0[k] + gdot * v0[k]
    return r, v, True


@njit(cache=True)
def orbit_energy(mu, r, v):
    """Specific orbital energy (km^2/s^2): v^2/2 - mu/r."""
    return 0.5 * dot(v, v) - mu / np.sqrt(dot(r, r))
