"""Differential evolution compiled with the fitness: a whole evolution in one call.

DE/rand/1/exp (Storn and Price 1997, "Differential evolution - a simple and efficient
heuristic for global optimization over continuous spaces", J. Global Optimization 11):
for each member i a trial vector starts as a copy of member i; from a random component
on, consecutive components (cyclically) are taken from the mutant
``x[r1] + weight * (x[r2] - x[r3])`` (r1, r2, r3 distinct and not i) for as long as a
uniform draw stays below ``crossover``, at most every component. A trial component
outside the search box is drawn again uniformly inside it. Each trial replaces its
member when its fitness is lower or equal; generations are synchronous (every trial of
a generation is built from the previous generation).

The fitness is ``trajectory.evaluate``'s first objective of the trial clipped to
[lower, upper] (the search box may be wider than the bounds: ``search.udp.WidenedUDP``
for why). Evaluating in the same compiled call removes the per-member call from the
optimiser into Python (about 2.5 us a point when the point itself costs 2.5 us).

Random numbers come from numba's generator, seeded at the start of every call: the
same inputs and seed give the same result on every machine that runs numba.
"""

import numpy as np
from numba import njit

from . import layout as L
from .trajectory import evaluate


@njit(cache=True)
def _distinct(n, avoid0, avoid1, avoid2):
    """A uniform index in [0, n) other than the three given (n >= 4)."""
    r = np.random.randint(0, n)
    while r == avoid0 or r == avoid1 or r == avoid2:
        r = np.random.randint(0, n)
    return r


@njit(cache=True)
def trial_vector(old, i, weight, crossover, box_lo, box_hi, trial):
    """Fill ``trial`` with DE/rand/1/exp's trial vector for member ``i`` of ``old``
    (rows are members; at least 4): exponential crossover of member i with the mutant
    ``old[r1] + weight * (old[r2] - old[r3])``, components outside the box drawn again
    uniformly inside it. Returns how many components came from the mutant."""
    n, d = old.shape
    r1 = _distinct(n, i, i, i)
    r2 = _distinct(n, i, r1, r1)
    r3 = _distinct(n, i, r1, r2)
    trial[:] = old[i]
    j = np.random.randint(0, d)
    taken = 0
    while True:
        trial[j] = old[r1, j] + weight * (old[r2, j] - old[r3, j])
        j = (j + 1) % d
        taken += 1
        if taken >= d or np.random.random() >= crossover:
            break
    for j in range(d):
        if trial[j] < box_lo[j] or trial[j] > box_hi[j]:
            trial[j] = box_lo[j] + np.random.random() * (box_hi[j] - box_lo[j])
    return taken


@njit(cache=True)
def evolve(x, f, generations, weight, crossover, box_lo, box_hi, lower, upper, p, seed):
    """Run ``generations`` generations of DE/rand/1/exp on the population.

    x: (n, d) members (n >= 4), inside [box_lo, box_hi]; f: (n,) their fitness (first
    objective of each member clipped to [lower, upper]). p: compiled problem
    parameters (``core.layout``); seed: 32-bit seed of this call's random numbers.
    Returns new arrays (x, f, evaluations); the inputs are not changed.
    """
    np.random.seed(seed)
    n, d = x.shape
    old = x.copy()
    new = x.copy()
    f_old = f.copy()
    f_new = f.copy()
    trial = np.empty(d)
    point = np.empty(d)
    q = np.empty(L.N_Q)
    f_trial = np.empty(int(p[L.P_N_OBJ]))
    for _ in range(generations):
        for i in range(n):
            trial_vector(old, i, weight, crossover, box_lo, box_hi, trial)
            for j in range(d):
                point[j] = min(max(trial[j], lower[j]), upper[j])
            evaluate(point, p, q, f_trial, np.bool_(False))
            if f_trial[0] <= f_old[i]:
                new[i, :] = trial
                f_new[i] = f_trial[0]
        old[:, :] = new
        f_old[:] = f_new
    return old, f_old, generations * n
