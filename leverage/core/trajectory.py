"""The compiled leveraging model: launch, one DSM, return flyby of the same body.

One evaluation (all km, s, km/s, rad; heliocentric ecliptic J2000):
body state at launch -> launch state (body velocity + v_inf in the direction given
by two angles in the body's velocity/orbit-normal frame) -> two-body propagation
to the DSM epoch -> Lambert arc from the DSM point to the body at the return
epoch (every allowed revolution count and root is tried; the branch with the best
first objective is kept) -> DSM = velocity change -> incoming v_inf -> unpowered
flyby turned by the periapsis and B-plane angle -> outgoing v_inf and heliocentric
orbit. Limits become penalties (see ``penalties``); margins are kept in ``q``.
"""
import numpy as np
from numba import njit, prange

from . import layout as L
from .ephemeris import DAY_S, EPHEMERIS_SIZE, body_state
from .flyby import max_turn, outgoing_vinf, turn_angle
from .frames import direction_from_angles, launch_asymptote, rtn_components, velocity_frame
from .kepler import elements_from_state, propagate
from .lambert import branch_range, branch_revs, lambert
from .penalties import total_penalty

FAIL_OBJECTIVE = 1.0e3  # objective value of a point whose legs could not be solved
_ECLIPTIC_POLE = np.array([0.0, 0.0, 1.0])
_DEG = np.pi / 180.0


@njit(cache=True)
def _put(q, slot, vec):
    q[slot] = vec[0]
    q[slot + 1] = vec[1]
    q[slot + 2] = vec[2]


@njit(cache=True)
def _norm(v):
    return np.sqrt(v @ v)


@njit(cache=True)
def objectives(q, p, f):
    """Fill f with the objective(s) of the evaluated point ``q`` (lower is better).

    One objective: W_DSM*DSM - W_GAIN*gain - W_INC*inclination_deg + penalty.
    Several: (DSM, -gain[, -inclination_deg]), each plus the same penalty, which
    keeps infeasible points off a front.
    """
    if q[L.Q_OK] != 1.0:
        for k in range(f.shape[0]):
            f[k] = FAIL_OBJECTIVE
        return
    pen = q[L.Q_PENALTY]
    inc_deg = q[L.Q_OUT_INC] / _DEG
    if f.shape[0] == 1:
        f[0] = (p[L.P_W_DSM] * q[L.Q_TOTAL_DV] - p[L.P_W_GAIN] * q[L.Q_GAIN]
                - p[L.P_W_INC] * inc_deg + pen)
        return
    f[0] = q[L.Q_TOTAL_DV] + pen
    f[1] = -q[L.Q_GAIN] + pen
    if f.shape[0] > 2:
        f[2] = -inc_deg + pen


@njit(cache=True)
def _launch(x, p, q):
    """Launch state and the legs up to the DSM point; fills q, returns states."""
    eph = p[L.P_BODY_EPH:L.P_BODY_EPH + EPHEMERIS_SIZE]
    t0 = x[L.X_LAUNCH_DAY] * DAY_S
    t_loop = x[L.X_LOOP_DAYS] * DAY_S
    t1 = t0 + x[L.X_DSM_FRACTION] * t_loop
    r0, vb0 = body_state(eph, t0)
    along, out, normal = velocity_frame(r0, vb0)
    u = direction_from_angles(along, out, normal, x[L.X_AZIMUTH_DEG] * _DEG,
                              x[L.X_ELEVATION_DEG] * _DEG)
    vinf0 = x[L.X_VINF_KMS] * u
    v0 = vb0 + vinf0
    c3, dla, rla = launch_asymptote(vinf0, p[L.P_POLE_RA], p[L.P_POLE_DEC])
    q[L.Q_T_LAUNCH] = t0
    q[L.Q_T_DSM] = t1
    q[L.Q_T_FLYBY] = t0 + t_loop
    q[L.Q_C3] = c3
    q[L.Q_DLA] = dla
    q[L.Q_RLA] = rla
    q[L.Q_VINF_LAUNCH] = x[L.X_VINF_KMS]
    q[L.Q_MARGIN_C3] = p[L.P_C3_MAX] - c3
    q[L.Q_MARGIN_DLA_RAD] = min(dla - p[L.P_DLA_MIN], p[L.P_DLA_MAX] - dla)
    _put(q, L.Q_R_LAUNCH, r0)
    _put(q, L.Q_V_LAUNCH, v0)
    r1, v1m, ok = propagate(p[L.P_MU_SUN], r0, v0, t1 - t0)
    _put(q, L.Q_R_DSM, r1)
    _put(q, L.Q_V_DSM_BEFORE, v1m)
    return r1, v1m, ok


@njit(cache=True)
def _no_target_requirements(p, q):
    """Margins of the outgoing-condition requirements (inf where none is set)."""
    q[L.Q_MARGIN_VINF_OUT_KMS] = (q[L.Q_VINF_OUT] - p[L.P_REQ_VINF_OUT_KMS]
                                  if p[L.P_REQ_VINF_OUT_KMS] > 0.0 else np.inf)
    q[L.Q_MARGIN_INC_RAD] = (q[L.Q_OUT_INC] - p[L.P_REQ_INC_RAD]
                             if p[L.P_REQ_INC_RAD] > 0.0 else np.inf)
    q[L.Q_MARGIN_APHELION_KM] = (q[L.Q_OUT_APO] - p[L.P_REQ_APHELION_KM]
                                 if p[L.P_REQ_APHELION_KM] > 0.0 else np.inf)


@njit(cache=True)
def _return_flyby(x, p, q, branch, r1, v1m):
    """Lambert arc on ``branch`` to the body, DSM, and the unpowered flyby."""
    eph = p[L.P_BODY_EPH:L.P_BODY_EPH + EPHEMERIS_SIZE]
    mu_sun = p[L.P_MU_SUN]
    mu_b = p[L.P_BODY_MU]
    t1 = q[L.Q_T_DSM]
    t2 = q[L.Q_T_FLYBY]
    r2, vb2 = body_state(eph, t2)
    revs, low = branch_revs(branch)
    v1p, v2, ok = lambert(mu_sun, r1, r2, t2 - t1, revs, True, low)
    if not ok:
        return False
    dsm = v1p - v1m
    dsm_r, dsm_t, dsm_n = rtn_components(r1, v1m, dsm)
    vinf_in = v2 - vb2
    speed_in = _norm(vinf_in)
    rp_min = p[L.P_BODY_RADIUS_KM] + p[L.P_MIN_ALT_KM]
    alt = x[L.X_FLYBY_ALT_KM]
    rp = p[L.P_BODY_RADIUS_KM] + alt
    turn = turn_angle(mu_b, speed_in, rp)
    turn_lim = max_turn(mu_b, speed_in, rp_min)
    theta = x[L.X_BPLANE_DEG] * _DEG
    vinf_out = outgoing_vinf(vinf_in, turn, theta, _ECLIPTIC_POLE)
    v_out = vb2 + vinf_out
    a, ecc, inc, _, _, _ = elements_from_state(mu_sun, r2, v_out)
    dsm_mag = _norm(dsm)
    q[L.Q_DSM] = dsm_mag
    q[L.Q_DSM_R] = dsm_r
    q[L.Q_DSM_T] = dsm_t
    q[L.Q_DSM_N] = dsm_n
    q[L.Q_VINF_IN] = speed_in
    q[L.Q_VINF_OUT] = speed_in
    q[L.Q_GAIN] = speed_in - q[L.Q_VINF_LAUNCH]
    q[L.Q_LEVERAGE] = q[L.Q_GAIN] / dsm_mag if dsm_mag > 0.0 else np.nan
    q[L.Q_TURN] = turn
    q[L.Q_TURN_MAX] = turn_lim
    q[L.Q_ALT] = alt
    q[L.Q_RP] = rp
    q[L.Q_BPLANE] = theta % (2.0 * np.pi)
    q[L.Q_OUT_A] = a
    q[L.Q_OUT_E] = ecc
    q[L.Q_OUT_INC] = inc
    q[L.Q_OUT_PERI] = a * (1.0 - ecc) if ecc < 1.0 else np.abs(a) * (ecc - 1.0)
    q[L.Q_OUT_APO] = a * (1.0 + ecc) if ecc < 1.0 else np.inf
    q[L.Q_REVS] = revs
    q[L.Q_LOW_PATH] = 1.0 if low else 0.0
    q[L.Q_FLYBY_DV] = 0.0
    q[L.Q_TOTAL_DV] = dsm_mag
    q[L.Q_MARGIN_ALT_KM] = alt - p[L.P_MIN_ALT_KM]
    q[L.Q_MARGIN_TURN_RAD] = turn_lim - turn
    q[L.Q_MARGIN_DSM_KMS] = p[L.P_DSM_BUDGET_KMS] - dsm_mag
    q[L.Q_MARGIN_LAMBERT] = 0.0
    q[L.Q_MARGIN_VINF_MATCH_KMS] = np.inf
    q[L.Q_MARGIN_ARRIVAL_VINF_KMS] = np.inf
    _no_target_requirements(p, q)
    _put(q, L.Q_R_FLYBY, r2)
    _put(q, L.Q_V_DSM_AFTER, v1p)
    _put(q, L.Q_V_FLYBY_IN, v2)
    _put(q, L.Q_V_FLYBY_OUT, v_out)
    _put(q, L.Q_V_BODY_FLYBY, vb2)
    return True


@njit(cache=True)
def _mark_failed(q):
    q[L.Q_OK] = 0.0
    for k in range(L.N_MARGINS):
        q[L.Q_MARGIN_ALT_KM + k] = np.inf
    q[L.Q_MARGIN_LAMBERT] = -1.0
    q[L.Q_PENALTY] = np.inf


@njit(cache=True)
def evaluate(x, p, q, f):
    """Evaluate decision vector x with parameters p; fill q (N_Q) and f (objectives).

    Every Lambert branch allowed by p (revolutions P_REV_MIN..P_REV_MAX, both roots
    for M >= 1) is tried, and the one with the lowest f[0] is kept in q and f.
    """
    for k in range(q.shape[0]):
        q[k] = 0.0
    r1, v1m, ok = _launch(x, p, q)
    if not ok:
        _mark_failed(q)
        objectives(q, p, f)
        return
    first, last = branch_range(int(p[L.P_REV_MIN]), int(p[L.P_REV_MAX]))
    trial = q.copy()
    f_trial = np.empty_like(f)
    best = np.inf
    for branch in range(first, last + 1):
        if not _return_flyby(x, p, trial, branch, r1, v1m):
            continue
        trial[L.Q_OK] = 1.0
        trial[L.Q_PENALTY] = total_penalty(trial, p[L.P_PENALTY_WEIGHT])
        objectives(trial, p, f_trial)
        if f_trial[0] < best:
            best = f_trial[0]
            q[:] = trial
            f[:] = f_trial
    if best == np.inf:
        _mark_failed(q)
        objectives(q, p, f)


@njit(cache=True)
def fitness(x, p):
    """Objective vector of one decision vector (length P_N_OBJ)."""
    q = np.empty(L.N_Q)
    f = np.empty(int(p[L.P_N_OBJ]))
    evaluate(x, p, q, f)
    return f


@njit(cache=True, parallel=True)
def batch_fitness(xs, p):
    """Objectives of many decision vectors (rows of xs), in parallel threads."""
    n = xs.shape[0]
    n_obj = int(p[L.P_N_OBJ])
    out = np.empty((n, n_obj))
    for i in prange(n):
        q = np.empty(L.N_Q)
        f = np.empty(n_obj)
        evaluate(xs[i], p, q, f)
        out[i, :] = f
    return out


@njit(cache=True)
def details(x, p):
    """All derived quantities (length N_Q, slots in ``layout``) of one point."""
    q = np.empty(L.N_Q)
    f = np.empty(int(p[L.P_N_OBJ]))
    evaluate(x, p, q, f)
    return q
