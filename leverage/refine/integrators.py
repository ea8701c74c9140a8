"""Propagators of a massless spacecraft among the DE421 point masses (``forces``).

Both take and give states in solar-system-barycentric ICRF axes (km, km/s) at TDB
seconds past J2000, forward or backward in time.

* ``Ias15`` (main): REBOUND's IAS15 (Rein & Spiegel 2015, MNRAS 446, 1424; 15th-order
  Gauss-Radau, adaptive step, error below double-precision round-off), REBOUND 5.2.2.
  The ten bodies are massive particles (G = 1, masses = GM in km^3/s^2) started from
  DE421 at the segment's first epoch and integrated with the spacecraft (a test
  particle, ``N_active`` = 10). They then drift from DE421 because the model leaves out
  what DE421 has (relativity, asteroids, figure effects). Measured with
  ``planet_drift`` from 2031-01-02 over 694 days (the demo loop), distance from DE421:
  Mercury 604 km, Venus 161 km, Earth 120 km, Moon 135 km, Mars 33 km, Jupiter 2.2 km,
  Saturn..Neptune below 0.2 km, Sun 0.8 km. Mostly the missing relativity (it changes
  the mean motions by ~3 GM/(c^2 a), 3e-8 for the Earth) and asteroids. It does not
  reach the spacecraft much: every segment restarts the bodies from DE421 at its first
  epoch, which is where the spacecraft is close to the Earth (departure and flyby
  periapsis); far from the Earth only the Sun's 0.8 km matters.
* ``Dop853`` (cross-check): scipy ``solve_ivp`` DOP853 (Hairer, Norsett & Wanner) at
  rtol 1e-12, bodies at DE421 positions interpolated by cubic Hermite splines from a
  table every 1.5 hours (position and velocity at each node, DE421 read with the
  whole and fractional day apart). Measured against DE421 over 350 days: at most
  2 cm for any body. A close flyby magnifies a body's position error: with a 0.25-day
  table and one-float Julian dates (1 m of jitter) the refined demo's flyby ->
  DSM segment differed from IAS15 by 107 km; now 1.7 km.

Choice (measured on the refined demo design, this machine, two shared cores):
departure periapsis -> DSM (223 days, starting 200 km above the Earth) takes IAS15
0.023 s and DOP853 0.24 s; flyby periapsis -> DSM backward (470 days) 0.030 s and
0.027 s. DOP853's own error, from rtol 1e-12 vs 1e-13, is 0.23 km and 0.014 km at the
DSM on those two; IAS15 is at round-off (two-body test: energy 4e-16 over 5 years).
The two integrators differ by 0.024 km / 0.005 mm/s and 0.30 km / 0.025 mm/s at the
DSM on the test fixture's design (1.7 km at most on the five refined bundled designs),
which is the IAS15 bodies' drift plus DOP853's error. IAS15 is the main integrator: up
to 10x faster on the near-Earth segments that dominate the finite-difference
Jacobians, and exact at the close passes, where the bodies have not drifted yet;
DOP853 on DE421 positions is the independent cross-check (``crosscheck``).
"""

import signal
import threading

import numpy as np
from scipy.integrate import solve_ivp
from scipy.interpolate import CubicHermiteSpline

from leverage.refine.forces import BODY_NAMES, acceleration

DOP853_RTOL = 1e-12
DOP853_ATOL_KM = 1e-6
DOP853_ATOL_KM_S = 1e-12
TABLE_STEP_S = 5400.0
IAS15_MIN_DT_S = 1.0
IAS15_EPSILON = 1e-9  # REBOUND's default; IAS15 then keeps errors at round-off level


def _integrate(sim, t):
    """``sim.integrate(t)``, then Python's SIGINT handler put back: REBOUND installs its
    own C handler for SIGINT during ``integrate`` and leaves it installed, so a Ctrl-C
    between integrations was swallowed (measured: refine ran to its end with exit 0)."""
    handler = signal.getsignal(signal.SIGINT)
    try:
        sim.integrate(t, exact_finish_time=1)
    finally:
        if handler is not None and threading.current_thread() is threading.main_thread():
            signal.signal(signal.SIGINT, handler)


class Ias15:
    """REBOUND IAS15 with the bodies integrated from DE421 (see module docstring).

    ``de``: anything with ``gm`` (m,) and ``states(t) -> (r, v)`` (m, 3, 1) like
    ``forces.De421`` (tests use a single planet).
    """

    name = "REBOUND 5.2.2 IAS15, bodies integrated from DE421 at each segment start"

    def __init__(self, de):
        self.de = de

    def _simulation(self, t0, with_craft=None):
        import rebound

        sim = rebound.Simulation()
        sim.G = 1.0
        sim.integrator = "ias15"
        sim.integrator.epsilon = IAS15_EPSILON
        # A trial step of the solver can aim the spacecraft through a planet's centre,
        # where IAS15's step would shrink without end (seen: one least_squares
        # evaluation ran for minutes). One second is far below the steps of any real
        # arc here (minutes at a 200 km periapsis), so real arcs are untouched.
        sim.integrator.min_dt = IAS15_MIN_DT_S
        sim.exit_max_distance = 0  # never stop on distance
        r, v = self.de.states_at(t0) if hasattr(self.de, "states_at") else self.de.states(t0)
        n = len(self.de.gm)
        for k in range(n):
            sim.add(
                m=float(self.de.gm[k]),
                x=r[k, 0, 0],
                y=r[k, 1, 0],
                z=r[k, 2, 0],
                vx=v[k, 0, 0],
                vy=v[k, 1, 0],
                vz=v[k, 2, 0],
            )
        sim.N_active = n
        sim.testparticle_type = 0
        if with_craft is not None:
            r0, v0 = with_craft
            sim.add(m=0.0, x=r0[0], y=r0[1], z=r0[2], vx=v0[0], vy=v0[1], vz=v0[2])
        sim.t = 0.0
        return sim

    def propagate(self, t0, r0, v0, t1, samples=None):
        """Spacecraft state (r, v) at t1 from (r0, v0) at t0.

        samples: optional epochs between t0 and t1 (in the direction of travel); then
        returns (r1, v1, rs (n, 3), vs (n, 3), bodies_r (n, 10, 3)).
        """
        sim = self._simulation(t0, (np.asarray(r0, float), np.asarray(v0, float)))
        sim.dt = 60.0 if t1 >= t0 else -60.0
        n = len(self.de.gm)
        craft = sim.particles[n]
        if samples is None:
            _integrate(sim, t1 - t0)
            return np.array(craft.xyz), np.array(craft.vxyz)
        rs, vs, bs = [], [], []
        for t in samples:
            _integrate(sim, t - t0)
            rs.append(craft.xyz)
            vs.append(craft.vxyz)
            bs.append([sim.particles[k].xyz for k in range(n)])
        _integrate(sim, t1 - t0)
        return (np.array(craft.xyz), np.array(craft.vxyz), np.array(rs), np.array(vs), np.array(bs))

    def planet_drift(self, t0, t1) -> dict:
        """Distance (km) of each integrated body from DE421 at t1, started at t0.

        Positions relative to the solar-system barycentre of each (integrated: the
        initial one, which stays put up to the model's momentum error).
        """
        sim = self._simulation(t0)
        sim.dt = 3600.0 if t1 >= t0 else -3600.0
        _integrate(sim, t1 - t0)
        r, _ = self.de.states(t1)
        return {
            name: float(np.linalg.norm(np.array(sim.particles[k].xyz) - r[k, :, 0]))
            for k, name in enumerate(BODY_NAMES[: len(self.de.gm)])
        }


class Dop853:
    """scipy DOP853 with DE421 positions from a Hermite table (see module docstring)."""

    name = "scipy DOP853 rtol 1e-12, DE421 positions from a 1.5-hour Hermite table"

    def __init__(self, de, t_start, t_stop):
        self.de = de
        lo, hi = min(t_start, t_stop) - 2 * TABLE_STEP_S, max(t_start, t_stop) + 2 * TABLE_STEP_S
        grid = np.arange(lo, hi + TABLE_STEP_S, TABLE_STEP_S)
        r, v = de.states(grid)  # (10, 3, n)
        n = len(BODY_NAMES)
        self._spline = CubicHermiteSpline(
            grid, r.reshape(3 * n, -1).T, v.reshape(3 * n, -1).T, axis=0
        )
        self.t_range = (lo, hi)

    def body_positions(self, t):
        return self._spline(t).reshape(len(BODY_NAMES), 3)

    def propagate(self, t0, r0, v0, t1, samples=None):
        """As ``Ias15.propagate`` (bodies_r of the samples from the table)."""
        if not (self.t_range[0] <= min(t0, t1) and max(t0, t1) <= self.t_range[1]):
            raise ValueError("epoch outside the DOP853 body table")
        gm = self.de.gm

        def rhs(t, y):
            return np.concatenate([y[3:], acceleration(y[:3], self.body_positions(t), gm)])

        y0 = np.concatenate([np.asarray(r0, float), np.asarray(v0, float)])
        atol = np.array([DOP853_ATOL_KM] * 3 + [DOP853_ATOL_KM_S] * 3)
        sol = solve_ivp(
            rhs,
            (t0, t1),
            y0,
            method="DOP853",
            rtol=DOP853_RTOL,
            atol=atol,
            t_eval=None if samples is None else np.asarray(samples),
        )
        if not sol.success:
            raise RuntimeError(f"DOP853 integration failed: {sol.message}")
        r1, v1 = sol.y[:3, -1].copy(), sol.y[3:, -1].copy()
        if samples is None:
            return r1, v1
        bs = np.array([self.body_positions(t) for t in samples])
        return r1, v1, sol.y[:3].T.copy(), sol.y[3:].T.copy(), bs
