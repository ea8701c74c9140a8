"""The compiled leveraging model: launch, one DSM, return flyby of the same body.

One evaluation (all km, s, km/s, rad; heliocentric ecliptic J2000):
body state at launch -> launch state (body velocity + v_inf in the direction given
by two angles in the body's velocity/orbit-normal frame) -> two-body propagation
to the DSM epoch -> Lambert arc from the DSM point to the body at the return
epoch (every allowed revolution count and root is tried; the branch with the best
first objective is kept) -> DSM = velocity change -> incoming v_inf -> flyby ->
outgoing v_inf and heliocentric orbit. Without a target the flyby is unpowered and
turned by the periapsis and B-plane angle in x. With a target, a Lambert leg (M = 0)
from the flyby to the target fixes the outgoing v_inf; the flyby then needs the
periapsis that gives the turn between incoming and outgoing v_inf (powered-flyby
relation, ``flyby.powered_periapsis``) and either a periapsis burn (powered) or a
|v_inf| match within a tolerance (unpowered). With a launch-vehicle table, the
delivered mass is the injected mass at the launch C3 times the rocket-equation
factor of every burn. Limits become penalties (see ``penalties``); margins are kept
in ``q``.
"""

import numpy as np
from numba import njit, prange

from . import layout as L
from .ephemeris import DAY_S, body_state_in
from .flyby import (
    bplane_angle_of,
    max_turn,
    outgoing_vinf,
    periapsis_burn,
    powered_periapsis,
    powered_turn,
    turn_angle,
)
from .frames import direction_from_angles, launch_asymptote, rtn_components, velocity_frame
from .kepler import orbit_shape, propagate
from .lambert import branch_range, branch_revs, lambert
from .mass import injected_mass, mass_ratio
from .penalties import all_limits_hold, total_penalty
from .vec3 import dot, norm

FAIL_OBJECTIVE = 1.0e3  # objective value of a point whose legs could not be solved
_ECLIPTIC_POLE = np.array([0.0, 0.0, 1.0])
_DEG = np.pi / 180.0


@njit(cache=True)
def _put(q, slot, vec):
    q[slot] = vec[0]
    q[slot + 1] = vec[1]
    q[slot + 2] = vec[2]


@njit(cache=True)
def objective_value(code, q):
    """One objective of a front (lower is better), by its OBJ_* code in ``layout``."""
    if code == L.OBJ_TOTAL_DV:
        return q[L.Q_TOTAL_DV]
    if code == L.OBJ_GAIN:
        return -q[L.Q_GAIN]
    if code == L.OBJ_INCLINATION:
        return -q[L.Q_OUT_INC] / _DEG
    if code == L.OBJ_ARRIVAL_VINF:
        return q[L.Q_VINF_ARRIVAL]
    return -1.0e-3 * q[L.Q_M_DELIVERED]  # OBJ_MASS, tonnes


@njit(cache=True)
def objectives(q, p, f):
    """Fill f with the objective(s) of the evaluated point ``q`` (lower is better).

    One objective: W_DSM*total_dv - W_GAIN*gain - W_INC*inclination_deg
    [+ W_ARRIVAL*arrival_vinf] [- W_MASS*delivered_mass] + penalty. Several: the
    quantities named by the P_OBJ_CODES slots, each plus the same penalty, which
    keeps infeasible points off a front.
    """
    if q[L.Q_OK] != 1.0:
        for k in range(f.shape[0]):
            f[k] = FAIL_OBJECTIVE
        return
    pen = q[L.Q_PENALTY]
    if f.shape[0] == 1:
        value = (
            p[L.P_W_DSM] * q[L.Q_TOTAL_DV]
            - p[L.P_W_GAIN] * q[L.Q_GAIN]
            - p[L.P_W_INC] * q[L.Q_OUT_INC] / _DEG
        )
        # Weights of quantities that may be absent (nan) are only applied when set.
        if p[L.P_W_ARRIVAL] > 0.0:
            value += p[L.P_W_ARRIVAL] * q[L.Q_VINF_ARRIVAL]
        if p[L.P_W_MASS] > 0.0:
            value -= p[L.P_W_MASS] * q[L.Q_M_DELIVERED]
        f[0] = value + pen
        return
    for k in range(f.shape[0]):
        f[k] = objective_value(int(p[L.P_OBJ_CODES + k]), q) + pen


@njit(cache=True)
def _launch(x, p, q, full):
    """Launch state and the legs up to the DSM point; fills q, returns states.

    ``full``: also the event states, which only the record needs."""
    t0 = x[L.X_LAUNCH_EPOCH_DAYS] * DAY_S
    t_loop = x[L.X_LOOP_DURATION_DAYS] * DAY_S
    t1 = t0 + x[L.X_DSM_FRACTION] * t_loop
    r0, vb0 = body_state_in(p, L.P_BODY_EPH, t0)  # NaN off a table: propagate fails
    along, out, normal = velocity_frame(r0, vb0)
    u = direction_from_angles(
        along,
        out,
        normal,
        x[L.X_LAUNCH_IN_PLANE_ANGLE_DEG] * _DEG,
        x[L.X_LAUNCH_OUT_OF_PLANE_ANGLE_DEG] * _DEG,
    )
    vinf0 = x[L.X_LAUNCH_VINF_KM_S] * u
    v0 = vb0 + vinf0
    c3, dla, rla = launch_asymptote(vinf0, p[L.P_POLE_RA], p[L.P_POLE_DEC])
    q[L.Q_T_LAUNCH] = t0
    q[L.Q_T_DSM] = t1
    q[L.Q_T_FLYBY] = t0 + t_loop
    q[L.Q_C3] = c3
    q[L.Q_DLA] = dla
    q[L.Q_RLA] = rla
    q[L.Q_VINF_LAUNCH] = x[L.X_LAUNCH_VINF_KM_S]
    q[L.Q_MARGIN_C3] = p[L.P_C3_MAX] - c3
    q[L.Q_MARGIN_DLA_RAD] = min(dla - p[L.P_DLA_MIN], p[L.P_DLA_MAX] - dla)
    r1, v1m, ok = propagate(p[L.P_MU_SUN], r0, v0, t1 - t0)
    if full:
        _put(q, L.Q_R_LAUNCH, r0)
        _put(q, L.Q_V_LAUNCH, v0)
        _put(q, L.Q_R_DSM, r1)
        _put(q, L.Q_V_DSM_BEFORE, v1m)
    return r1, v1m, ok


@njit(cache=True)
def _no_target_requirements(p, q):
    """Margins of the outgoing-condition requirements (inf where none is set)."""
    q[L.Q_MARGIN_VINF_OUT_KMS] = (
        q[L.Q_VINF_OUT] - p[L.P_REQ_VINF_OUT_KMS] if p[L.P_REQ_VINF_OUT_KMS] > 0.0 else np.inf
    )
    q[L.Q_MARGIN_INC_RAD] = (
        q[L.Q_OUT_INC] - p[L.P_REQ_INC_RAD] if p[L.P_REQ_INC_RAD] > 0.0 else np.inf
    )
    q[L.Q_MARGIN_APHELION_KM] = (
        q[L.Q_OUT_APO] - p[L.P_REQ_APHELION_KM] if p[L.P_REQ_APHELION_KM] > 0.0 else np.inf
    )


@njit(cache=True)
def _target_leg(x, p, q, r2):
    """Lambert leg (M = 0, prograde) from the body at the flyby (r2, km) to the target.

    Fills the arrival quantities of q; returns (departure velocity km/s, ok).
    """
    t2 = q[L.Q_T_FLYBY]
    t3 = t2 + x[L.X_TARGET_LEG_DAYS] * DAY_S
    r3, v3_body = body_state_in(p, L.P_TARGET_EPH, t3)
    if not np.isfinite(r3[0]):  # outside the target's ephemeris table
        return v3_body, False
    # Typed, not literal, arguments: literal ones made numba compile a second copy of
    # the whole Izzo solver for this one call (cold compile, benchmarks/README.md).
    v_dep, v_arr, ok = lambert(
        p[L.P_MU_SUN], r2, r3, t3 - t2, np.int64(0), np.bool_(True), np.bool_(True)
    )
    if not ok:
        return v_dep, False
    vinf_arr = norm(v_arr - v3_body)
    q[L.Q_T_ARRIVAL] = t3
    q[L.Q_VINF_ARRIVAL] = vinf_arr
    q[L.Q_ARRIVAL_DV] = vinf_arr if p[L.P_ARRIVAL_BURN] == 1.0 else 0.0
    q[L.Q_MARGIN_ARRIVAL_VINF_KMS] = p[L.P_ARRIVAL_VINF_MAX_KMS] - vinf_arr
    q[L.Q_MARGIN_ARRIVAL_DAYS] = (
        min(t3 - p[L.P_ARRIVAL_OPEN_S], p[L.P_ARRIVAL_CLOSE_S] - t3) / DAY_S
    )
    _put(q, L.Q_R_ARRIVAL, r3)
    _put(q, L.Q_V_ARRIVAL, v_arr)
    _put(q, L.Q_V_TARGET_ARRIVAL, v3_body)
    return v_dep, True


@njit(cache=True)
def _no_target(q):
    q[L.Q_VINF_ARRIVAL] = np.nan
    q[L.Q_ARRIVAL_DV] = 0.0
    q[L.Q_MARGIN_ARRIVAL_VINF_KMS] = np.inf
    q[L.Q_MARGIN_ARRIVAL_DAYS] = np.inf
    for k in range(3):
        q[L.Q_R_ARRIVAL + k] = np.nan
        q[L.Q_V_ARRIVAL + k] = np.nan
        q[L.Q_V_TARGET_ARRIVAL + k] = np.nan


@njit(cache=True)
def _loop_arc(p, q, branch, r1, v1m, r2, vb2, full):
    """Lambert arc on ``branch`` from the DSM point to the body (at r2 with velocity
    vb2 at the flyby), and the DSM.

    Fills the DSM and incoming quantities; returns (incoming v_inf, ok). ``full``:
    also the DSM's RTN components, the leverage ratio and the event states, which
    only the record needs.
    """
    t1 = q[L.Q_T_DSM]
    t2 = q[L.Q_T_FLYBY]
    revs, low = branch_revs(branch)
    v1p, v2, ok = lambert(p[L.P_MU_SUN], r1, r2, t2 - t1, revs, True, low)
    if not ok:
        return v2, False
    dsm = v1p - v1m
    vinf_in = v2 - vb2
    speed_in = norm(vinf_in)
    dsm_mag = norm(dsm)
    q[L.Q_DSM] = dsm_mag
    q[L.Q_VINF_IN] = speed_in
    q[L.Q_GAIN] = speed_in - q[L.Q_VINF_LAUNCH]
    q[L.Q_MARGIN_DSM_KMS] = p[L.P_DSM_BUDGET_KMS] - dsm_mag
    q[L.Q_MARGIN_LAMBERT] = 0.0
    if full:
        dsm_r, dsm_t, dsm_n = rtn_components(r1, v1m, dsm)
        q[L.Q_DSM_R] = dsm_r
        q[L.Q_DSM_T] = dsm_t
        q[L.Q_DSM_N] = dsm_n
        q[L.Q_LEVERAGE] = q[L.Q_GAIN] / dsm_mag if dsm_mag > 0.0 else np.nan
        q[L.Q_REVS] = revs
        q[L.Q_LOW_PATH] = 1.0 if low else 0.0
        _put(q, L.Q_R_FLYBY, r2)
        _put(q, L.Q_V_DSM_AFTER, v1p)
        _put(q, L.Q_V_FLYBY_IN, v2)
        _put(q, L.Q_V_BODY_FLYBY, vb2)
    return vinf_in, True


@njit(cache=True)
def _free_flyby(x, p, q, vinf_in):
    """Unpowered flyby turned by the periapsis altitude and B-plane angle in x."""
    speed_in = q[L.Q_VINF_IN]
    rp_min = p[L.P_BODY_RADIUS_KM] + p[L.P_MIN_ALT_KM]
    alt = x[L.X_FLYBY_ALTITUDE_KM]
    rp = p[L.P_BODY_RADIUS_KM] + alt
    turn = turn_angle(p[L.P_BODY_MU], speed_in, rp)
    theta = x[L.X_BPLANE_ANGLE_DEG] * _DEG
    q[L.Q_VINF_OUT] = speed_in
    q[L.Q_TURN] = turn
    q[L.Q_TURN_MAX] = max_turn(p[L.P_BODY_MU], speed_in, rp_min)
    q[L.Q_ALT] = alt
    q[L.Q_RP] = rp
    q[L.Q_BPLANE] = theta % (2.0 * np.pi)
    q[L.Q_FLYBY_DV] = 0.0
    q[L.Q_MARGIN_VINF_MATCH_KMS] = np.inf
    return outgoing_vinf(vinf_in, turn, theta, _ECLIPTIC_POLE)


@njit(cache=True)
def _target_flyby(p, q, vinf_in, vinf_out):
    """Flyby joining a given incoming and outgoing v_inf (target problems).

    The turn between them fixes the periapsis (powered-flyby relation); a speed
    mismatch is a periapsis burn (powered) or a limit (unpowered).
    """
    mu_b = p[L.P_BODY_MU]
    speed_in = q[L.Q_VINF_IN]
    speed_out = norm(vinf_out)
    cos_turn = dot(vinf_in, vinf_out) / (speed_in * speed_out)
    turn = np.arccos(min(1.0, max(-1.0, cos_turn)))
    rp = powered_periapsis(mu_b, speed_in, speed_out, turn)
    rp_min = p[L.P_BODY_RADIUS_KM] + p[L.P_MIN_ALT_KM]
    powered = p[L.P_POWERED_FLYBY] == 1.0
    q[L.Q_VINF_OUT] = speed_out
    q[L.Q_TURN] = turn
    q[L.Q_TURN_MAX] = powered_turn(mu_b, speed_in, speed_out, rp_min)
    q[L.Q_RP] = rp
    q[L.Q_ALT] = rp - p[L.P_BODY_RADIUS_KM]
    q[L.Q_BPLANE] = bplane_angle_of(vinf_in, vinf_out, _ECLIPTIC_POLE)
    q[L.Q_FLYBY_DV] = periapsis_burn(mu_b, speed_in, speed_out, max(rp, rp_min)) if powered else 0.0
    q[L.Q_MARGIN_VINF_MATCH_KMS] = (
        np.inf if powered else p[L.P_VINF_MATCH_TOL_KMS] - abs(speed_out - speed_in)
    )


@njit(cache=True)
def _finish(p, q, r2, v_out, full):
    """Outgoing orbit, burn totals, delivered mass and the remaining margins."""
    a, ecc, inc = orbit_shape(p[L.P_MU_SUN], r2, v_out)
    q[L.Q_OUT_A] = a
    q[L.Q_OUT_E] = ecc
    q[L.Q_OUT_INC] = inc
    q[L.Q_OUT_PERI] = a * (1.0 - ecc) if ecc < 1.0 else np.abs(a) * (ecc - 1.0)
    q[L.Q_OUT_APO] = a * (1.0 + ecc) if ecc < 1.0 else np.inf
    q[L.Q_TOTAL_DV] = q[L.Q_DSM] + q[L.Q_FLYBY_DV] + q[L.Q_ARRIVAL_DV]
    rows = int(p[L.P_LV_ROWS])
    if rows > 0:
        m0, margin = injected_mass(
            q[L.Q_C3], p[L.P_LV_C3 : L.P_LV_C3 + rows], p[L.P_LV_MASS : L.P_LV_MASS + rows], rows
        )
        q[L.Q_M_INJECTED] = m0
        q[L.Q_M_DELIVERED] = m0 * mass_ratio(q[L.Q_TOTAL_DV], p[L.P_ISP_S])
        q[L.Q_MARGIN_LV_C3] = margin
    else:
        q[L.Q_M_INJECTED] = np.nan
        q[L.Q_M_DELIVERED] = np.nan
        q[L.Q_MARGIN_LV_C3] = np.inf
    q[L.Q_MARGIN_ALT_KM] = q[L.Q_ALT] - p[L.P_MIN_ALT_KM]
    q[L.Q_MARGIN_TURN_RAD] = q[L.Q_TURN_MAX] - q[L.Q_TURN]
    _no_target_requirements(p, q)
    if full:
        _put(q, L.Q_V_FLYBY_OUT, v_out)


@njit(cache=True)
def _mark_failed(q):
    q[L.Q_OK] = 0.0
    for k in range(L.N_MARGINS):
        q[L.Q_MARGIN_ALT_KM + k] = np.inf
    q[L.Q_MARGIN_LAMBERT] = -1.0
    q[L.Q_PENALTY] = np.inf
    q[L.Q_FEASIBLE] = 0.0


@njit(cache=True)
def evaluate(x, p, q, f, full):
    """Evaluate decision vector x with parameters p; fill q (N_Q) and f (objectives).

    Every Lambert branch allowed by p (revolutions P_REV_MIN..P_REV_MAX, both roots
    for M >= 1) is tried, and the one with the lowest f[0] is kept in q and f.

    ``full=False`` is the scoring pass of a search: f is the same to the last bit,
    but q is only scratch (quantities that no objective or limit uses, such as the
    event states and the DSM's components, are not computed; ``details`` computes
    them) except ``q[Q_FEASIBLE]``, the kept branch's feasibility in either pass. Callers pass ``full`` as ``np.bool_``, a run-time value: a literal
    True/False made numba compile this function and its callees twice (measured:
    cold compile 28 -> 24 s, the scoring pass's speed unchanged, results bit-identical).
    """
    for k in range(q.shape[0]):
        q[k] = 0.0
    r1, v1m, ok = _launch(x, p, q, full)
    # The body at the flyby is the same for every branch: one ephemeris call.
    r2, vb2 = body_state_in(p, L.P_BODY_EPH, q[L.Q_T_FLYBY])
    ok = ok and np.isfinite(r2[0])  # NaN: flyby outside the body's ephemeris table
    has_target = p[L.P_HAS_TARGET] == 1.0
    v_dep = vb2  # placeholder of the right type; used only with a target
    if ok and has_target:
        v_dep, ok = _target_leg(x, p, q, r2)
    elif ok:
        _no_target(q)
    if not ok:
        _mark_failed(q)
        objectives(q, p, f)
        return
    first, last = branch_range(int(p[L.P_REV_MIN]), int(p[L.P_REV_MAX]))
    # Each branch is worked out in ``trial`` (every slot a score reads is written
    # afresh by each solved branch); the full pass keeps the best branch's q.
    trial = q.copy() if full else q
    f_trial = np.empty_like(f)
    best = np.inf
    best_feasible = 0.0
    for branch in range(first, last + 1):
        vinf_in, solved = _loop_arc(p, trial, branch, r1, v1m, r2, vb2, full)
        if not solved:
            continue
        if has_target:
            _target_flyby(p, trial, vinf_in, v_dep - vb2)
            _finish(p, trial, r2, v_dep, full)
        else:
            _finish(p, trial, r2, vb2 + _free_flyby(x, p, trial, vinf_in), full)
        trial[L.Q_OK] = 1.0
        trial[L.Q_PENALTY] = total_penalty(trial, p[L.P_PENALTY_WEIGHT])
        trial[L.Q_FEASIBLE] = all_limits_hold(trial)
        objectives(trial, p, f_trial)
        if f_trial[0] < best:
            best = f_trial[0]
            best_feasible = trial[L.Q_FEASIBLE]
            if full:
                q[:] = trial
            f[:] = f_trial
    if best == np.inf:
        _mark_failed(q)
        objectives(q, p, f)
    else:
        q[L.Q_FEASIBLE] = best_feasible  # the scoring pass's q holds the last branch


@njit(cache=True)
def fitness(x, p):
    """Objective vector of one decision vector (length P_N_OBJ)."""
    q = np.empty(L.N_Q)
    f = np.empty(int(p[L.P_N_OBJ]))
    evaluate(x, p, q, f, np.bool_(False))
    return f


@njit(cache=True, parallel=True)
def batch_scores(xs, p):
    """Objectives of many decision vectors (rows of xs), in parallel threads, and
    whether each is feasible (``q[Q_FEASIBLE]`` of its scoring pass, as a bool)."""
    n = xs.shape[0]
    n_obj = int(p[L.P_N_OBJ])
    out = np.empty((n, n_obj))
    feasible = np.empty(n, np.bool_)
    for i in prange(n):
        q = np.empty(L.N_Q)
        f = np.empty(n_obj)
        evaluate(xs[i], p, q, f, np.bool_(False))
        out[i, :] = f
        feasible[i] = q[L.Q_FEASIBLE] == 1.0
    return out, feasible


@njit(cache=True)
def batch_scores_one_thread(xs, p):
    """``batch_scores`` on this thread only (no thread pool is started): for worker
    processes that each evolve one island, and for a parent that will fork them."""
    n = xs.shape[0]
    n_obj = int(p[L.P_N_OBJ])
    out = np.empty((n, n_obj))
    feasible = np.empty(n, np.bool_)
    q = np.empty(L.N_Q)
    f = np.empty(n_obj)
    for i in range(n):
        evaluate(xs[i], p, q, f, np.bool_(False))
        out[i, :] = f
        feasible[i] = q[L.Q_FEASIBLE] == 1.0
    return out, feasible


# Plain Python on purpose: a cached compiled function that calls a numba-parallel one
# segfaults when a later process loads it from the cache (numba issue #8578;
# reproduced here with numba 0.68.1), so only Python calls ``batch_scores``.
def batch_fitness(xs, p):
    """Objectives of many decision vectors (rows of xs), in parallel threads."""
    return batch_scores(xs, p)[0]


def batch_fitness_one_thread(xs, p):
    """``batch_fitness`` on this thread only (``batch_scores_one_thread``)."""
    return batch_scores_one_thread(xs, p)[0]


@njit(cache=True)
def details(x, p):
    """All derived quantities (length N_Q, slots in ``layout``) of one point."""
    q = np.empty(L.N_Q)
    f = np.empty(int(p[L.P_N_OBJ]))
    evaluate(x, p, q, f, np.bool_(True))
    return q


@njit(cache=True)
def batch_details(xs, p):
    """``details`` of every row of xs (one row of N_Q quantities each), on this thread."""
    out = np.empty((xs.shape[0], L.N_Q))
    f = np.empty(int(p[L.P_N_OBJ]))
    for i in range(xs.shape[0]):
        evaluate(xs[i], p, out[i], f, np.bool_(True))
    return out
