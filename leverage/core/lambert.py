"""Lambert's problem through poliastro's numba kernel of Izzo's method.

Izzo, D. (2015) "Revisiting Lambert's problem", Celestial Mechanics and Dynamical
Astronomy 121, 1-15; implemented in ``poliastro.core.iod.izzo``. Every branch is
reachable: ``revs`` full revolutions (M), and for M >= 1 the two roots selected by
``low_path``. Units: km, s, km/s. Never raises: a failure (collinear points, no
solution with M revolutions in that time, non-convergence) returns ok=False.
"""

import numpy as np
from numba import njit
from poliastro.core.iod import izzo as _izzo

_NUMITER = 35
_RTOL = 1e-10


@njit(cache=True)
def lambert(mu, r1, r2, tof, revs, prograde, low_path):
    """Velocities (v1, v2) in km/s at r1 and r2 for a transfer of ``tof`` seconds.

    mu: km^3/s^2; r1, r2: km; revs: whole revolutions M >= 0; prograde: transfer
    angular momentum along +z of the frame; low_path: which of the two M >= 1 roots.
    Returns (v1, v2, ok).
    """
    if tof <= 0.0 or revs < 0:
        return np.zeros(3), np.zeros(3), False
    try:
        v1, v2 = _izzo(mu, r1, r2, tof, revs, prograde, low_path, _NUMITER, _RTOL)
    except Exception:
        return np.zeros(3), np.zeros(3), False
    if not (np.all(np.isfinite(v1)) and np.all(np.isfinite(v2))):
        return np.zeros(3), np.zeros(3), False
    return v1, v2, True


@njit(cache=True)
def branch_revs(branch):
    """Revolutions M and root of Lambert branch number ``branch`` (0, 1, 2, ...).

    Branch 0 is the single M = 0 solution; branches 2M-1 and 2M are the low-path
    and high-path roots with M revolutions. Returns (revs, low_path).
    """
    if branch <= 0:
        return 0, True
    return (branch + 1) // 2, branch % 2 == 1


@njit(cache=True)
def branch_range(rev_min, rev_max):
    """First and last branch numbers covering M = rev_min .. rev_max."""
    first = 0 if rev_min <= 0 else 2 * rev_min - 1
    return first, 2 * rev_max
