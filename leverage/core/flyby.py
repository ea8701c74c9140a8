"""Unpowered hyperbolic flyby of a body, in its patched-conic sphere of influence.

Relations for a hyperbola about a body with gravitational parameter mu (km^3/s^2)
and hyperbolic excess speed v (km/s), e.g. Curtis, Orbital Mechanics for
Engineering Students, sec. 2.7 and 8.9:
a = -mu/v^2, e = 1 + r_p v^2/mu, turn angle delta = 2 asin(1/e).
The B-plane frame follows the usual S, T, R construction (S along the incoming
asymptote, T = unit(S x k) for a reference pole k, R = S x T). The B-plane angle
theta is measured from T toward R; the aim point B points along
cos(theta) T + sin(theta) R, and gravity turns the velocity toward -B.
"""
import numpy as np
from numba import njit

from .frames import unit


@njit(cache=True)
def hyperbola_sma(mu, vinf):
    """Semi-major axis (km, negative) of the flyby hyperbola: -mu/v_inf^2."""
    return -mu / (vinf * vinf)


@njit(cache=True)
def hyperbola_ecc(mu, vinf, rp):
    """Eccentricity of the hyperbola with periapsis radius rp (km): 1 + rp v^2/mu."""
    return 1.0 + rp * vinf * vinf / mu


@njit(cache=True)
def turn_angle(mu, vinf, rp):
    """Angle (rad) between incoming and outgoing asymptotes: 2 asin(1/e)."""
    return 2.0 * np.arcsin(1.0 / hyperbola_ecc(mu, vinf, rp))


@njit(cache=True)
def periapsis_for_turn(mu, vinf, turn):
    """Periapsis radius (km) that turns v_inf by ``turn`` (rad):
    r_p = mu/v^2 (1/sin(turn/2) - 1). Infinite for a zero turn."""
    s = np.sin(0.5 * turn)
    if s <= 0.0:
        return np.inf
    return mu / (vinf * vinf) * (1.0 / s - 1.0)


@njit(cache=True)
def max_turn(mu, vinf, rp_min):
    """Largest turn (rad) reachable without going below periapsis rp_min (km)."""
    return turn_angle(mu, vinf, rp_min)


@njit(cache=True)
def bplane_frame(vinf_in, pole):
    """Unit vectors (S, T, R) of the B-plane for incoming v_inf and reference pole."""
    s = unit(vinf_in)
    t = unit(np.cross(s, pole))
    r = np.cross(s, t)
    return s, t, r


@njit(cache=True)
def outgoing_vinf(vinf_in, turn, bplane_angle, pole):
    """Outgoing v_inf (km/s): incoming v_inf turned by ``turn`` (rad) toward -B,
    with B at ``bplane_angle`` (rad) from T toward R. |v_inf| is unchanged."""
    s, t, r = bplane_frame(vinf_in, pole)
    speed = np.sqrt(vinf_in @ vinf_in)
    b_hat = np.cos(bplane_angle) * t + np.sin(bplane_angle) * r
    return speed * (np.cos(turn) * s - np.sin(turn) * b_hat)


@njit(cache=True)
def bplane_angle_of(vinf_in, vinf_out, pole):
    """B-plane angle (rad, [0, 2 pi)) of the flyby that turns vinf_in into vinf_out."""
    s, t, r = bplane_frame(vinf_in, pole)
    minus_b = vinf_out - (vinf_out @ s) * s
    return np.arctan2(-(minus_b @ r), -(minus_b @ t)) % (2.0 * np.pi)


@njit(cache=True)
def tisserand(a_body, a, ecc, inc):
    """Tisserand's parameter of an orbit (a km, e, i rad) w.r.t. a body on a
    circular orbit of radius a_body (km): a_body/a + 2 cos i sqrt(a/a_body (1-e^2))."""
    return a_body / a + 2.0 * np.cos(inc) * np.sqrt(a / a_body * (1.0 - ecc * ecc))
