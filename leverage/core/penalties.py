"""Smooth penalties for limit margins.

A margin is in the physical unit of its limit and is >= 0 exactly when the limit
holds. The penalty of a margin m with scale s is v + v^2 with v = max(0, -m)/s:
zero exactly when the limit holds, continuous, and growing with the violation so
that a search started in the infeasible region can climb out.
"""

import numpy as np
from numba import njit

from . import layout as L
from .constants import AU_KM

NAN_PENALTY = 1.0e3
SMALLEST_PENALTY = 2.2250738585072014e-308  # smallest normal float64: "violated, barely"

# Normalising scale of each margin, in its unit (order as Q_MARGIN_* slots).
MARGIN_SCALES = np.array(
    [
        100.0,  # flyby altitude, km
        0.1,  # turn angle, rad
        1.0,  # C3, km^2/s^2
        np.radians(1.0),  # DLA, rad
        0.1,  # DSM budget, km/s
        0.1,  # required outgoing v-infinity, km/s
        np.radians(1.0),  # required inclination, rad
        0.1 * AU_KM,  # required aphelion, km
        1.0,  # Lambert solved (0 / -1)
        0.1,  # v-infinity match of an unpowered flyby, km/s
        0.1,  # arrival v-infinity, km/s
        1.0,  # launch C3 inside the launch-vehicle table, km^2/s^2
        1.0,  # arrival inside the arrival window, days
    ]
)


@njit(cache=True)
def margin_penalty(margin, scale):
    """v + v^2 with v = max(0, -margin)/scale (dimensionless); 0 iff margin >= 0."""
    if np.isnan(margin):
        return NAN_PENALTY  # an unknown margin is not a holding limit
    if margin >= 0.0:
        return 0.0
    v = -margin / scale
    # A violation so small that -margin/scale underflows to 0 still costs something.
    return max(v + v * v, SMALLEST_PENALTY)


@njit(cache=True)
def all_limits_hold(q):
    """The feasibility rule, the one place it is written: 1.0 if every leg solved and
    every limit margin is >= 0 (from the margins, not the penalty: a zero
    penalty_weight must not hide a violation; a NaN margin does not hold), else 0.0."""
    if q[L.Q_OK] != 1.0:
        return 0.0
    for k in range(L.N_MARGINS):
        if not q[L.Q_MARGIN_ALT_KM + k] >= 0.0:
            return 0.0
    return 1.0


@njit(cache=True)
def total_penalty(q, weight):
    """Weighted sum of the penalties of every margin slot in ``q`` (> 0 iff a limit
    fails, for weight > 0)."""
    s = 0.0
    for k in range(L.N_MARGINS):
        s += margin_penalty(q[L.Q_MARGIN_ALT_KM + k], MARGIN_SCALES[k])
    if s > 0.0 and weight > 0.0:
        return max(weight * s, SMALLEST_PENALTY)
    return weight * s
