"""The fitness of a point seen through a box wider than the bounds: the point is
clipped to the bounds first (``leverage.search.udp.WidenedUDP``), in one compiled call
(clipping with numpy before the kernel cost 1.3 us per evaluation, a quarter of it)."""

import numpy as np
from numba import njit

from . import trajectory


@njit(cache=True)
def clip_to(x, lower, upper):
    """A copy of ``x`` with each component moved into [lower, upper]."""
    y = np.empty(x.shape[0])
    for i in range(x.shape[0]):
        y[i] = min(max(x[i], lower[i]), upper[i])
    return y


@njit(cache=True)
def fitness_clipped(x, lower, upper, p):
    """``trajectory.fitness`` of ``x`` clipped to [lower, upper]."""
    return trajectory.fitness(clip_to(x, lower, upper), p)
