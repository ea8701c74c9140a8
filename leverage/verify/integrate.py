"""Numerical integration of spacecraft motion with scipy, for checking conic arcs.

* ``two_body``: the Sun alone, ``scipy.integrate.solve_ivp`` with the 8th-order
  Dormand-Prince method (DOP853; Hairer, Norsett & Wanner, Solving ODEs I) at
  rtol 1e-12. Same force model as the conics, different method: the difference
  measures the conic propagation and Lambert solutions, not the physics.
* ``PointMassField`` + ``integrate_point_masses``: the Sun and planets as point
  masses at positions from an ephemeris source (``leverage.precise_ephemeris``),
  solar-system-barycentric, ICRF axes. Planet states are tabulated on a fixed grid
  and interpolated with cubic Hermite splines (positions and velocities), which
  keeps the many right-hand-side calls away from the ephemeris code.

Units km, s, km/s; epochs TDB seconds past J2000.
"""

import copy

import numpy as np
from scipy.integrate import solve_ivp
from scipy.interpolate import CubicHermiteSpline

RTOL = 1e-12
ATOL_KM = 1e-6  # absolute tolerance on positions (km) ...
ATOL_KM_S = 1e-12  # ... and velocities (km/s)
METHOD = "DOP853"


def _atol():
    return np.array([ATOL_KM] * 3 + [ATOL_KM_S] * 3)


def two_body(mu: float, t0: float, r0, v0, t1: float, rtol: float = RTOL):
    """State (r km, v km/s) at t1 after Sun-only motion from (r0, v0) at t0."""

    def rhs(_t, y):
        r = y[:3]
        return np.concatenate([y[3:], -mu * r / np.dot(r, r) ** 1.5])

    y0 = np.concatenate([np.asarray(r0, float), np.asarray(v0, float)])
    sol = solve_ivp(rhs, (t0, t1), y0, method=METHOD, rtol=rtol, atol=_atol())
    if not sol.success:
        raise RuntimeError(f"two-body integration failed: {sol.message}")
    return sol.y[:3, -1].copy(), sol.y[3:, -1].copy()


class PointMassField:
    """Gravity of named bodies (point masses), barycentric ICRF axes.

    masses: {body name: GM km^3/s^2}; positions from ``source.barycentric`` tabulated
    every ``step_s`` over [t0, t1] (a little beyond each end).
    """

    def __init__(self, source, masses: dict, t0: float, t1: float, step_s: float = 43200.0):
        self.names = list(masses)
        self.gm = np.array([masses[n] for n in self.names], dtype=float)
        self.active = np.ones(len(self.names), dtype=bool)
        lo, hi = min(t0, t1) - 2 * step_s, max(t0, t1) + 2 * step_s
        grid = np.arange(lo, hi + step_s, step_s)
        rs, vs = [], []
        for name in self.names:
            r, v = source.barycentric(name, grid)
            rs.append(r)
            vs.append(v)
        self._spline = CubicHermiteSpline(grid, np.hstack(rs), np.hstack(vs), axis=0)
        self._rate = self._spline.derivative()
        self.t_range = (lo, hi)

    def positions(self, t: float) -> np.ndarray:
        """(m, 3) barycentric positions (km) of the field's bodies at t."""
        return self._spline(t).reshape(-1, 3)

    def state(self, name: str, t: float):
        """(r km, v km/s) of one of the field's bodies at t (from the table)."""
        k = self.names.index(name)
        r = self._spline(t)[3 * k : 3 * k + 3]
        v = self._rate(t)[3 * k : 3 * k + 3]
        return r, v

    def without(self, name: str) -> "PointMassField":
        """The same table with ``name``'s gravity switched off."""
        other = copy.copy(self)
        other.active = self.active.copy()
        other.active[self.names.index(name)] = False
        return other

    def acceleration(self, t: float, r) -> np.ndarray:
        """Sum of -GM d/|d|^3 over the active bodies (km/s^2), d = r - body."""
        d = r[None, :] - self.positions(t)[self.active]
        dist3 = np.einsum("ij,ij->i", d, d) ** 1.5
        return -(self.gm[self.active, None] * d / dist3[:, None]).sum(axis=0)


def integrate_point_masses(field: PointMassField, t0: float, r0, v0, t1: float, rtol: float = RTOL):
    """State (r km, v km/s), barycentric ICRF, at t1 from (r0, v0) at t0 in ``field``."""

    def rhs(t, y):
        return np.concatenate([y[3:], field.acceleration(t, y[:3])])

    y0 = np.concatenate([np.asarray(r0, float), np.asarray(v0, float)])
    sol = solve_ivp(rhs, (t0, t1), y0, method=METHOD, rtol=rtol, atol=_atol())
    if not sol.success:
        raise RuntimeError(f"point-mass integration failed: {sol.message}")
    return sol.y[:3, -1].copy(), sol.y[3:, -1].copy()
