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
from .vec3 import cross, dot


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
    t = unit(cross(s, pole))
    r = cross(s, t)
    return s, t, r


@njit(cache=True)
def outgoing_vinf(vinf_in, turn, bplane_angle, pole):
    """Outgoing v_inf (km/s): incoming v_inf turned by ``turn`` (rad) toward -B,
    with B at ``bplane_angle`` (rad) from T toward R. |v_inf| is unchanged."""
    s, t, r = bplane_frame(vinf_in, pole)
    speed = np.sqrt(dot(vinf_in, vinf_in))
    b_hat = np.cos(bplane_angle) * t + np.sin(bplane_angle) * r
    return speed * (np.cos(turn) * s - np.sin(turn) * b_hat)


@njit(cache=True)
def bplane_angle_of(vinf_in, vinf_out, pole):
    """B-plane angle (rad, [0, 2 pi)) of the flyby that turns vinf_in into vinf_out."""
    s, t, r = bplane_frame(vinf_in, pole)
    minus_b = vinf_out - dot(vinf_out, s) * s
    angle = np.arctan2(-dot(minus_b, r), -dot(minus_b, t)) % (2.0 * np.pi)
    # x % 2 pi rounds to exactly 2 pi for a tiny negative x: keep [0, 2 pi).
    return angle if angle < 2.0 * np.pi else 0.0


@njit(cache=True)
def tisserand(a_body, a, ecc, inc):
    """Tisserand's parameter of an orbit (a km, e, i rad) w.r.t. a body on a
    circular orbit of radius a_body (km): a_body/a + 2 cos i sqrt(a/a_body (1-e^2))."""
    return a_body / a + 2.0 * np.cos(inc) * np.sqrt(a / a_body * (1.0 - ecc * ecc))


# --- powered flyby -----------------------------------------------------------
# Two hyperbolas sharing one periapsis (radius rp): the incoming one with excess
# speed v_in, the outgoing one with v_out, joined by a tangential burn at
# periapsis. Each half turns the velocity by asin(1/e), e = 1 + rp v^2/mu, so
#   turn = asin(1/e_in) + asin(1/e_out)
# and the burn is the difference of the periapsis speeds (vis-viva),
#   dv = | sqrt(v_out^2 + 2 mu/rp) - sqrt(v_in^2 + 2 mu/rp) |.
# This is the powered swing-by model of Vasile, M. and De Pascale, P. (2006),
# "Preliminary design of multiple gravity-assist trajectories", J. Spacecraft and
# Rockets 43(4) (recalled from memory); with v_in = v_out it is the unpowered turn.
_RP_ITER = 60
_RP_RTOL = 1e-12


@njit(cache=True)
def powered_turn(mu, vinf_in, vinf_out, rp):
    """Turn (rad) of a powered flyby with periapsis rp (km): asin(1/e_in) + asin(1/e_out)."""
    return np.arcsin(1.0 / hyperbola_ecc(mu, vinf_in, rp)) + np.arcsin(
        1.0 / hyperbola_ecc(mu, vinf_out, rp)
    )


@njit(cache=True)
def _half_turn_slope(mu, vinf, rp):
    """d/drp of asin(1/e) with e = 1 + rp v^2/mu (rad/km, negative)."""
    e = hyperbola_ecc(mu, vinf, rp)
    return -(vinf * vinf / mu) / (e * e * np.sqrt(1.0 - 1.0 / (e * e)))


@njit(cache=True)
def powered_periapsis(mu, vinf_in, vinf_out, turn):
    """Periapsis radius (km) at which a powered flyby turns by ``turn`` (rad).

    Solves powered_turn(rp) = turn by Newton's method in log(rp), kept inside a
    bracket that shrinks with every step (bisection when a Newton step leaves it);
    the turn falls monotonically from pi at rp -> 0 to 0 at rp -> inf. Returns inf
    for a zero turn and 0 for a turn of pi or more.
    """
    if turn <= 0.0:
        return np.inf
    if turn >= np.pi:
        return 0.0
    # Start from the unpowered relation at the mean speed.
    v_mean = 0.5 * (vinf_in + vinf_out)
    rp = periapsis_for_turn(mu, v_mean, turn)
    lo, hi = 0.0, np.inf
    for _ in range(_RP_ITER):
        g = powered_turn(mu, vinf_in, vinf_out, rp) - turn
        if g > 0.0:
            lo = rp  # too much turn: periapsis must rise
        else:
            hi = rp
        slope = rp * (_half_turn_slope(mu, vinf_in, rp) + _half_turn_slope(mu, vinf_out, rp))
        step = -g / slope if slope != 0.0 else 0.0
        new = rp * np.exp(step)
        if not (new > lo and new < hi):
            new = 0.5 * (lo + hi) if np.isfinite(hi) else 2.0 * rp
        if abs(new - rp) <= _RP_RTOL * rp:
            return new
        rp = new
    return rp


@njit(cache=True)
def periapsis_burn(mu, vinf_in, vinf_out, rp):
    """Size (km/s) of the periapsis burn joining the two hyperbolas (vis-viva)."""
    k = 2.0 * mu / rp
    return abs(np.sqrt(vinf_out * vinf_out + k) - np.sqrt(vinf_in * vinf_in + k))
