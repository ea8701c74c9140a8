"""How far a patched-conic design is from motion under the Sun and planets as point masses.

The design's loop is flown again by numerical integration (``leverage.integrate``)
with the Sun and the eight planets as point masses at positions from an outside
ephemeris (``leverage.precise_ephemeris``), GMs from ``leverage.bodies``, with the
design's DSM applied as an impulse at its epoch. Two cases:

* ``other planets``: every body except the launch/flyby body, from launch to the
  flyby epoch. The design starts and ends at that body's centre, where its point
  mass is singular, so its gravity is left out (as the patched-conic heliocentric
  legs leave it out); this isolates the pull of the Sun's motion and the other planets.
* ``all planets``: every body including the launch/flyby body, from the periapsis of
  a departure hyperbola at the launch epoch (``PARKING_ALTITUDE_KM`` above the body,
  outgoing asymptote = the design's launch v-infinity; ``departure_periapsis``) to
  the epoch the DSM-to-flyby conic enters the body's sphere of influence (Laplace
  radius a (m/M_sun)^(2/5), e.g. Curtis, Orbital Mechanics for Engineering Students,
  sec. 8.4), where the comparison stops: the conic aims at the body's centre, which a
  point mass cannot reach. The flyby v-infinity there comes from the body-relative
  energy, v^2 - 2 GM/d.

For each case the report gives the position and velocity differences from the
conics at the DSM and at the end, and the DSM that would restore the end point in
the point-mass model: a Newton iteration on the DSM vector whose Jacobian is the
two-body one (finite differences of ``leverage.core.kepler.propagate``), which
converges because the perturbations are small. Frames: integration in
solar-system-barycentric ICRF axes; comparisons heliocentric ecliptic J2000.
"""

import math

import numpy as np
from scipy.optimize import brentq

from leverage.astro import bodies
from leverage.astro.ephemerides import PLANET_NAMES, ecliptic_to_equatorial, equatorial_to_ecliptic
from leverage.core.constants import DAY_S
from leverage.core.ephemeris import body_state
from leverage.core.kepler import propagate
from leverage.record.arcs import event_states
from leverage.verify.integrate import PointMassField, integrate_point_masses

PARKING_ALTITUDE_KM = 200.0  # departure periapsis altitude: a low parking orbit (common practice)
GRID_STEP_S = 43200.0  # planet table spacing (cubic Hermite; see leverage.integrate)
RETARGET_TOL_KM = 1.0  # end-point miss at which the DSM re-targeting stops
RETARGET_MAX_ITER = 8
_FD_STEP_KM_S = 1e-4  # finite-difference step of the two-body Jacobian


def masses() -> dict:
    """GM (km^3/s^2) of the Sun and the planets, keyed by ephemeris body name."""
    out = {"sun": bodies.GM_SUN_KM3_S2}
    for name in PLANET_NAMES:
        out[name] = bodies.planet(name).gm_km3_s2
    return out


def soi_radius_km(body) -> float:
    """Laplace sphere-of-influence radius a (GM/GM_sun)^(2/5), a from mean elements."""
    a_km = body.mean_elements[0] * bodies.AU_KM
    return a_km * (body.gm_km3_s2 / bodies.GM_SUN_KM3_S2) ** 0.4


class _Frames:
    """Heliocentric ecliptic <-> barycentric ICRF states, with the field's Sun."""

    def __init__(self, field):
        self.field = field

    def to_bary(self, t, r, v):
        rs, vs = self.field.state("sun", t)
        return (ecliptic_to_equatorial(r[None])[0] + rs, ecliptic_to_equatorial(v[None])[0] + vs)

    def to_helio(self, t, r, v):
        rs, vs = self.field.state("sun", t)
        return (
            equatorial_to_ecliptic((r - rs)[None])[0],
            equatorial_to_ecliptic((v - vs)[None])[0],
        )


def _conic(t0, r0, v0, t):
    r, v, ok = propagate(bodies.GM_SUN_KM3_S2, r0, v0, float(t - t0))
    if not ok:
        raise RuntimeError("two-body propagation failed")
    return r, v


def _two_body_jacobian(r0, v0, tof):
    """d r(tof) / d v0 of two-body motion, central differences (3x3)."""
    jac = np.empty((3, 3))
    for k in range(3):
        dv = np.zeros(3)
        dv[k] = _FD_STEP_KM_S
        rp, _ = _conic(0.0, r0, v0 + dv, tof)
        rm, _ = _conic(0.0, r0, v0 - dv, tof)
        jac[:, k] = (rp - rm) / (2 * _FD_STEP_KM_S)
    return jac


def _retarget(field, frames, t_dsm, r_dsm_b, v_before_b, dsm_vec_ecl, t_end, r_target):
    """DSM vector (ecliptic, km/s) reaching heliocentric r_target at t_end.

    Returns (dsm vector, end miss km, iterations, barycentric end state (r, v)).
    """
    r_h, v_h = frames.to_helio(t_dsm, r_dsm_b, v_before_b)
    jac = _two_body_jacobian(r_h, v_h + dsm_vec_ecl, t_end - t_dsm)
    dsm = dsm_vec_ecl.copy()
    for it in range(1, RETARGET_MAX_ITER + 1):
        v_b = v_before_b + ecliptic_to_equatorial(dsm[None])[0]
        r_e, v_e = integrate_point_masses(field, t_dsm, r_dsm_b, v_b, t_end)
        err = frames.to_helio(t_end, r_e, v_e)[0] - r_target
        miss = float(np.linalg.norm(err))
        if miss < RETARGET_TOL_KM or it == RETARGET_MAX_ITER:
            return dsm, miss, it, (r_e, v_e)
        dsm = dsm - np.linalg.solve(jac, err)


def departure_periapsis(mu, vinf_vec, rp):
    """Body-relative periapsis state (km, km/s) of the departure hyperbola whose outgoing
    asymptote is ``vinf_vec`` (km/s), periapsis radius rp (km), ecliptic axes.

    e = 1 + rp v^2/mu and the asymptote's true anomaly nu = acos(-1/e) (e.g. Curtis,
    sec. 2.7 and 8.8). The hyperbola's plane holds the asymptote and the part of
    ecliptic north at right angles to it (x if the asymptote points north): the plane
    is not part of a patched-conic design, and it moves the far path by about the
    impact parameter only.
    """
    speed = float(np.linalg.norm(vinf_vec))
    v_hat = vinf_vec / speed
    north = np.array([0.0, 0.0, 1.0])
    h_hat = north - (north @ v_hat) * v_hat
    if np.linalg.norm(h_hat) < 1e-6:
        h_hat = np.array([1.0, 0.0, 0.0]) - v_hat[0] * v_hat
    h_hat /= np.linalg.norm(h_hat)
    w_hat = np.cross(h_hat, v_hat)
    ecc = 1.0 + rp * speed**2 / mu
    nu = math.acos(-1.0 / ecc)
    p_hat = math.cos(nu) * v_hat - math.sin(nu) * w_hat  # periapsis direction
    q_hat = math.cos(nu) * w_hat + math.sin(nu) * v_hat  # velocity direction there
    return rp * p_hat, math.sqrt(speed**2 + 2.0 * mu / rp) * q_hat


def _crossing(frames, field, body, t0, r0, v0, t_lo, t_hi, radius):
    """Epoch in [t_lo, t_hi] where the conic from (t0, r0, v0) is ``radius`` from body."""

    def gap(t):
        r, v = _conic(t0, r0, v0, t)
        rb, _ = frames.to_bary(t, r, v)
        return float(np.linalg.norm(rb - field.state(body, t)[0])) - radius

    return brentq(gap, t_lo, t_hi, xtol=1.0)


def _leg_report(
    frames, field, ev, t_start, r_start_b, v_start_b, t_end, r_end_conic, v_end_conic, vinf_at_end
):
    """Integrate start -> DSM -> t_end; differences from the conics; re-targeted DSM.

    vinf_at_end(r_b, v_b): the flyby v-infinity (km/s) implied by a barycentric end state.
    """
    dsm_ev = ev["dsm"]
    out = {}
    r_d, v_d = integrate_point_masses(field, t_start, r_start_b, v_start_b, dsm_ev["t"])
    r_dh, v_dh = frames.to_helio(dsm_ev["t"], r_d, v_d)
    out["dsm_position_difference_km"] = float(np.linalg.norm(r_dh - dsm_ev["r"]))
    out["dsm_velocity_difference_m_s"] = float(np.linalg.norm(v_dh - dsm_ev["v_before"]) * 1e3)
    dsm_vec = dsm_ev["v_after"] - dsm_ev["v_before"]
    v_after_b = v_d + ecliptic_to_equatorial(dsm_vec[None])[0]
    r_e, v_e = integrate_point_masses(field, dsm_ev["t"], r_d, v_after_b, t_end)
    r_eh, v_eh = frames.to_helio(t_end, r_e, v_e)
    out["end_position_difference_km"] = float(np.linalg.norm(r_eh - r_end_conic))
    out["end_velocity_difference_m_s"] = float(np.linalg.norm(v_eh - v_end_conic) * 1e3)
    new_dsm, miss, iters, (r_hit, v_hit) = _retarget(
        field, frames, dsm_ev["t"], r_d, v_d, dsm_vec, t_end, r_end_conic
    )
    design_dsm = float(np.linalg.norm(dsm_vec))
    out["retargeted_dsm_km_s"] = {
        "design": design_dsm,
        "check": float(np.linalg.norm(new_dsm)),
        "change": float(np.linalg.norm(new_dsm)) - design_dsm,
    }
    out["retargeted_dsm_vector_change_m_s"] = float(np.linalg.norm(new_dsm - dsm_vec) * 1e3)
    out["retarget_end_miss_km"] = miss
    out["retarget_iterations"] = iters
    out["retarget_converged"] = bool(miss < RETARGET_TOL_KM)
    design_vinf = float(np.linalg.norm(ev["flyby"]["v_in"] - ev["flyby"]["v_body"]))
    check_vinf = vinf_at_end(r_hit, v_hit)
    out["retargeted_flyby_vinf_km_s"] = {
        "design": design_vinf,
        "check": check_vinf,
        "change": check_vinf - design_vinf,
    }
    return out


def _without_body(ev, body, field, frames) -> dict:
    """Case 1: the flyby body's gravity left out, launch to the flyby epoch."""
    launch, flyby = ev["launch"], ev["flyby"]
    others = field.without(body.name.lower())
    r0b, v0b = frames.to_bary(launch["t"], launch["r"], launch["v"])
    case = {"from": "launch", "to": "flyby epoch", "left_out": body.name}

    def vinf_design_body(r_b, v_b):
        # The end point is the design's flyby point; v-infinity against the design's body.
        return float(np.linalg.norm(frames.to_helio(flyby["t"], r_b, v_b)[1] - flyby["v_body"]))

    case.update(
        _leg_report(
            frames,
            others,
            ev,
            launch["t"],
            r0b,
            v0b,
            flyby["t"],
            flyby["r"],
            flyby["v_in"],
            vinf_design_body,
        )
    )
    return case


def _all_bodies(ev, body, field, frames) -> dict:
    """Case 2: all bodies, from a departure hyperbola's periapsis to the SOI entry."""
    name = body.name.lower()
    launch, dsm, flyby = ev["launch"], ev["dsm"], ev["flyby"]
    radius = soi_radius_km(body)
    mu_b = body.gm_km3_s2
    t_entry = _crossing(
        frames, field, name, dsm["t"], dsm["r"], dsm["v_after"], dsm["t"], flyby["t"], radius
    )
    rm, vm = body_state(body.ephemeris_array(), launch["t"])
    rp = body.equatorial_radius_km + PARKING_ALTITUDE_KM
    r_rel, v_rel = departure_periapsis(mu_b, launch["v"] - vm, rp)
    rb, vb = field.state(name, launch["t"])
    r0b = rb + ecliptic_to_equatorial(r_rel[None])[0]
    v0b = vb + ecliptic_to_equatorial(v_rel[None])[0]
    r_n, v_n = _conic(dsm["t"], dsm["r"], dsm["v_after"], t_entry)
    case = {
        "from": f"departure periapsis ({PARKING_ALTITUDE_KM:g} km altitude)",
        "note": "starts from the outside ephemeris' body state, so the launch-state "
        "difference of the ephemeris check is in these numbers too",
        "to": "sphere-of-influence entry",
        "soi_radius_km": radius,
        "soi_entry_days_before_flyby": (flyby["t"] - t_entry) / DAY_S,
    }

    def vinf_energy(r_b, v_b):
        # Hyperbolic excess speed from the body-relative energy: v^2 - 2 GM/d = v_inf^2.
        rb_e, vb_e = field.state(name, t_entry)
        rel_v = float(np.linalg.norm(v_b - vb_e))
        return math.sqrt(max(0.0, rel_v**2 - 2 * mu_b / float(np.linalg.norm(r_b - rb_e))))

    case.update(
        _leg_report(frames, field, ev, launch["t"], r0b, v0b, t_entry, r_n, v_n, vinf_energy)
    )
    return case


def check_point_masses(record, source, grid_step_s: float = GRID_STEP_S) -> dict:
    """Both point-mass cases (see module docstring) for a design record."""
    ev = event_states(record)
    body = bodies.planet(record["problem"]["body"])
    field = PointMassField(source, masses(), ev["launch"]["t"], ev["flyby"]["t"], grid_step_s)
    frames = _Frames(field)
    report = {
        "source": source.name,
        "bodies": ["Sun"] + [bodies.planet(n).name for n in PLANET_NAMES],
    }

    for key, case in (("other_planets", _without_body), ("all_planets", _all_bodies)):
        try:
            report[key] = case(ev, body, field, frames)
        except (ValueError, RuntimeError, np.linalg.LinAlgError) as exc:
            # e.g. no sphere-of-influence crossing, an integration that fails: say so
            report[key] = {"skipped": f"{type(exc).__name__}: {exc}"}
    return report
