"""Frame rotations and local frames (unit vectors, angles in rad).

Ecliptic J2000 <-> Earth mean equator and equinox of J2000 (EME2000): a rotation
about x by the J2000 obliquity 84381.448 arcsec (IAU 1976 value, the one JPL uses
for its "ecliptic of J2000" frame; Standish's elements are referred to it).
"""

import numpy as np
from numba import njit

from .constants import OBLIQUITY_J2000_RAD
from .vec3 import cross, dot


@njit(cache=True)
def unit(v):
    """v / |v| (a zero vector stays zero)."""
    n = np.sqrt(dot(v, v))
    if n == 0.0:
        return v.copy()
    return v / n


@njit(cache=True)
def ecliptic_to_equatorial(v):
    """Vector from ecliptic J2000 to EME2000 (rotation about x by +obliquity)."""
    c, s = np.cos(OBLIQUITY_J2000_RAD), np.sin(OBLIQUITY_J2000_RAD)
    out = np.empty(3)
    out[0] = v[0]
    out[1] = c * v[1] - s * v[2]
    out[2] = s * v[1] + c * v[2]
    return out


@njit(cache=True)
def equatorial_to_ecliptic(v):
    """Vector from EME2000 to ecliptic J2000."""
    c, s = np.cos(OBLIQUITY_J2000_RAD), np.sin(OBLIQUITY_J2000_RAD)
    out = np.empty(3)
    out[0] = v[0]
    out[1] = c * v[1] + s * v[2]
    out[2] = -s * v[1] + c * v[2]
    return out


@njit(cache=True)
def launch_asymptote(vinf_ecliptic, pole_ra, pole_dec):
    """C3 (km^2/s^2), declination DLA and right ascension RLA (rad) of a departure.

    vinf_ecliptic: departure v-infinity (km/s) in ecliptic J2000. The angles are in
    the departure body's equatorial frame: for a pole at dec = 90 deg in EME2000
    (Earth) that is EME2000 itself; otherwise the IAU body-equator frame whose x
    axis is the ascending node of the body equator on the EME2000 equator
    (RA = pole_ra + 90 deg; IAU WGCCRE convention). RLA is in [0, 2 pi).
    """
    eq = ecliptic_to_equatorial(vinf_ecliptic)
    if abs(pole_dec - 0.5 * np.pi) > 1e-12:
        z = np.array(
            [
                np.cos(pole_dec) * np.cos(pole_ra),
                np.cos(pole_dec) * np.sin(pole_ra),
                np.sin(pole_dec),
            ]
        )
        x = np.array([-np.sin(pole_ra), np.cos(pole_ra), 0.0])
        y = cross(z, x)
        eq = np.array([dot(eq, x), dot(eq, y), dot(eq, z)])
    speed = np.sqrt(dot(eq, eq))
    c3 = speed * speed
    if speed == 0.0:
        return 0.0, 0.0, 0.0
    dla = np.arcsin(min(1.0, max(-1.0, eq[2] / speed)))
    rla = np.arctan2(eq[1], eq[0]) % (2.0 * np.pi)
    if rla >= 2.0 * np.pi:  # x % 2 pi rounds to 2 pi for a tiny negative x
        rla = 0.0
    return c3, dla, rla


@njit(cache=True)
def velocity_frame(r, v):
    """Unit vectors (along, out, normal) tied to a body's velocity and orbit normal.

    along = v/|v|; normal = (r x v)/|r x v|; out = along x normal, which points
    away from the Sun for a near-circular orbit.
    """
    along = unit(v)
    normal = unit(cross(r, v))
    out = cross(along, normal)
    return along, out, normal


@njit(cache=True)
def direction_from_angles(along, out, normal, in_plane, out_of_plane):
    """Unit vector at ``in_plane`` from ``along`` toward ``out`` and elevated by
    ``out_of_plane`` toward ``normal`` (rad)."""
    ce = np.cos(out_of_plane)
    return (
        (ce * np.cos(in_plane)) * along
        + (ce * np.sin(in_plane)) * out
        + np.sin(out_of_plane) * normal
    )


@njit(cache=True)
def rtn_components(r, v, vec):
    """Radial, transverse (along-track) and normal components of ``vec``.

    R = r/|r|, N = (r x v)/|r x v|, T = N x R (the RTN or RSW frame, Vallado 2013
    sec. 3.3).
    """
    rad = unit(r)
    nrm = unit(cross(r, v))
    trn = cross(nrm, rad)
    return dot(vec, rad), dot(vec, trn), dot(vec, nrm)
