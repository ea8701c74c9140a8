"""Slot numbers of the flat arrays passed to and returned by the compiled model.

The compiled fitness takes plain float64 arrays (picklable, no Python objects in
the hot path). Module-level integers are frozen as constants by numba.

- ``x``, the decision vector: ``X_*`` slots, named like the problem-file keys that bound
  them and like ``best.json``'s ``decision_vector.names`` (slot name lower-cased without
  ``X_``), units in the name.
- ``p``, the parameter array: ``P_*`` slots (limits, weights, body data).
- ``q``, the derived quantities of one evaluation: ``Q_*`` slots, units in the comments
  (``leverage.record.design`` names each one, with its unit, for people).
"""

# Slots of one body's ephemeris header (core.ephemeris describes them); defined here so
# the slot table loads without numba (the commands that only read results stay quick).
EPHEMERIS_SIZE = 14

# --- decision vector -------------------------------------------------------
X_LAUNCH_EPOCH_DAYS = 0  # launch epoch, days TDB past J2000
X_LAUNCH_VINF_KM_S = 1  # launch v-infinity magnitude, km/s
X_LAUNCH_IN_PLANE_ANGLE_DEG = 2  # launch direction in the orbit plane, from the body's
# velocity toward "out", deg ([launch] in_plane_angle_deg)
X_LAUNCH_OUT_OF_PLANE_ANGLE_DEG = 3  # launch direction out of the orbit plane, toward the
# orbit normal, deg ([launch] out_of_plane_angle_deg)
X_LOOP_DURATION_DAYS = 4  # launch to return flyby, days
X_DSM_FRACTION = 5  # DSM epoch as a fraction of the loop, 0..1
X_FLYBY_ALTITUDE_KM = 6  # return flyby periapsis altitude, km (loop problems)
X_BPLANE_ANGLE_DEG = 7  # return flyby B-plane angle, deg (loop problems)
N_X_LOOP = 8  # decision vector length without a target leg
# With a target leg the flyby geometry follows from the leg: the vector is 7 long and its
# last slot is the flyby-to-arrival duration instead (slot 6 is the first slot that
# depends on the problem kind; compiled.names says which it is).
X_TARGET_LEG_DAYS = 6
N_X_TARGET = 7
X_NAMES_LOOP = (
    "launch_epoch_days",
    "launch_vinf_km_s",
    "launch_in_plane_angle_deg",
    "launch_out_of_plane_angle_deg",
    "loop_duration_days",
    "dsm_fraction",
    "flyby_altitude_km",
    "bplane_angle_deg",
)
X_NAMES_TARGET = X_NAMES_LOOP[:X_TARGET_LEG_DAYS] + ("target_leg_days",)

# --- parameters --------------------------------------------------------------
P_MU_SUN = 0
P_BODY_MU = 1
P_BODY_RADIUS_KM = 2
P_POLE_RA = 3  # rad, EME2000
P_POLE_DEC = 4  # rad, EME2000
P_MIN_ALT_KM = 5
P_C3_MAX = 6  # km^2/s^2 (inf: no cap)
P_DLA_MIN = 7  # rad
P_DLA_MAX = 8  # rad
P_DSM_BUDGET_KMS = 9  # inf: no budget
P_REV_MIN = 10
P_REV_MAX = 11
P_REQ_VINF_OUT_KMS = 12  # 0: none
P_REQ_INC_RAD = 13  # 0: none
P_REQ_APHELION_KM = 14  # 0: none
P_W_DSM = 15  # weight of DSM (per km/s)
P_W_GAIN = 16  # weight of v-infinity gain (per km/s)
P_W_INC = 17  # weight of outgoing inclination (per deg)
P_PENALTY_WEIGHT = 18  # objective units per unit of normalised violation
P_N_OBJ = 19  # 1: weighted sum; 2: (DSM, -gain); 3: (DSM, -gain, -inclination)
P_BODY_EPH = 20  # EPHEMERIS_SIZE slots
P_HAS_TARGET = P_BODY_EPH + EPHEMERIS_SIZE
P_TARGET_EPH = P_HAS_TARGET + 1  # EPHEMERIS_SIZE slots
P_TARGET_MU = P_TARGET_EPH + EPHEMERIS_SIZE
P_ARRIVAL_VINF_MAX_KMS = P_TARGET_MU + 1  # inf: no limit
P_POWERED_FLYBY = P_ARRIVAL_VINF_MAX_KMS + 1  # 1: periapsis burn allowed
P_W_ARRIVAL = P_POWERED_FLYBY + 1  # weight of arrival v-infinity (per km/s)
P_ARRIVAL_BURN = P_W_ARRIVAL + 1  # 1: a burn of the arrival v-infinity is counted (rendezvous)
P_ARRIVAL_OPEN_S = P_ARRIVAL_BURN + 1  # earliest arrival, s TDB past J2000 (-inf: none)
P_ARRIVAL_CLOSE_S = P_ARRIVAL_OPEN_S + 1  # latest arrival (inf: none)
P_VINF_MATCH_TOL_KMS = P_ARRIVAL_CLOSE_S + 1  # unpowered target flyby: allowed | |v_in|-|v_out| |
P_OBJ_CODES = P_VINF_MATCH_TOL_KMS + 1  # MAX_OBJ slots: OBJ_* code of each objective (P_N_OBJ > 1)
MAX_OBJ = 3
P_W_MASS = P_OBJ_CODES + MAX_OBJ  # weight of delivered mass (per kg)
P_ISP_S = P_W_MASS + 1  # spacecraft engine specific impulse, s
P_LV_ROWS = P_ISP_S + 1  # rows of the launch-vehicle table (0: no vehicle)
MAX_LV_ROWS = 32
P_LV_C3 = P_LV_ROWS + 1  # MAX_LV_ROWS slots, km^2/s^2, increasing
P_LV_MASS = P_LV_C3 + MAX_LV_ROWS  # MAX_LV_ROWS slots, injected mass at that C3, kg
N_PARAMS = P_LV_MASS + MAX_LV_ROWS

# --- objective codes (several objectives, P_N_OBJ > 1; each minimised) -----------
OBJ_TOTAL_DV = 0  # total_dv, km/s
OBJ_GAIN = 1  # -v-infinity gain, km/s
OBJ_INCLINATION = 2  # -outgoing inclination, deg
OBJ_ARRIVAL_VINF = 3  # arrival v-infinity, km/s
OBJ_MASS = 4  # -delivered mass, t

# --- derived quantities (one evaluation) -------------------------------------
Q_OK = 0  # 1 if every leg solved
Q_T_LAUNCH = 1  # s TDB past J2000
Q_T_DSM = 2
Q_T_FLYBY = 3
Q_T_ARRIVAL = 4
Q_C3 = 5  # km^2/s^2
Q_DLA = 6  # rad
Q_RLA = 7  # rad
Q_VINF_LAUNCH = 8  # km/s
Q_DSM = 9  # km/s
Q_DSM_R = 10  # km/s, radial
Q_DSM_T = 11  # km/s, along-track
Q_DSM_N = 12  # km/s, normal
Q_VINF_IN = 13  # km/s, at the return flyby
Q_VINF_OUT = 14  # km/s, after the flyby
Q_GAIN = 15  # km/s, |v_inf in at return| - launch v_inf
Q_LEVERAGE = 16  # gain per km/s of DSM (nan for DSM = 0)
Q_TURN = 17  # rad
Q_TURN_MAX = 18  # rad, at the minimum periapsis
Q_ALT = 19  # km, flyby periapsis altitude
Q_RP = 20  # km, flyby periapsis radius
Q_BPLANE = 21  # rad
Q_OUT_A = 22  # km, outgoing heliocentric orbit
Q_OUT_E = 23
Q_OUT_INC = 24  # rad, to the ecliptic J2000
Q_OUT_PERI = 25  # km
Q_OUT_APO = 26  # km (inf if unbound)
Q_REVS = 27  # Lambert revolutions of the DSM-to-flyby arc
Q_LOW_PATH = 28  # 1 low-path root, 0 high-path
Q_FLYBY_DV = 29  # km/s, periapsis burn of a powered flyby
Q_VINF_ARRIVAL = 30  # km/s, at the target
Q_TOTAL_DV = 31  # km/s, DSM + flyby burn (+ arrival burn if counted)
Q_ARRIVAL_DV = 32  # km/s, arrival burn counted for a rendezvous (0 otherwise)
Q_M_INJECTED = 33  # kg, launch-vehicle injected mass at the launch C3 (nan: no vehicle)
Q_M_DELIVERED = 34  # kg, injected mass after every burn (rocket equation)
Q_M_VIOL_START = 35
# limit margins, in the physical unit named; >= 0 means the limit holds
Q_MARGIN_ALT_KM = 35
Q_MARGIN_TURN_RAD = 36
Q_MARGIN_C3 = 37
Q_MARGIN_DLA_RAD = 38
Q_MARGIN_DSM_KMS = 39
Q_MARGIN_VINF_OUT_KMS = 40
Q_MARGIN_INC_RAD = 41
Q_MARGIN_APHELION_KM = 42
Q_MARGIN_LAMBERT = 43  # 0 if solved, -1 if not
Q_MARGIN_VINF_MATCH_KMS = 44  # unpowered target flyby: tolerance - | |v_in| - |v_out| |
Q_MARGIN_ARRIVAL_VINF_KMS = 45
Q_MARGIN_LV_C3 = 46  # launch C3 inside the launch-vehicle table, km^2/s^2
Q_MARGIN_ARRIVAL_DAYS = 47  # arrival inside the arrival window, days
N_MARGINS = 13
# state vectors at events (ecliptic J2000, km and km/s)
Q_R_LAUNCH = 48
Q_V_LAUNCH = 51  # spacecraft heliocentric velocity just after launch
Q_R_DSM = 54
Q_V_DSM_BEFORE = 57
Q_V_DSM_AFTER = 60
Q_R_FLYBY = 63
Q_V_FLYBY_IN = 66  # heliocentric, before the flyby
Q_V_FLYBY_OUT = 69  # heliocentric, after the flyby
Q_V_BODY_FLYBY = 72  # the body's heliocentric velocity at the flyby
Q_R_ARRIVAL = 75
Q_V_ARRIVAL = 78  # spacecraft heliocentric velocity arriving at the target
Q_V_TARGET_ARRIVAL = 81  # the target's heliocentric velocity at arrival
Q_PENALTY = 84  # total penalty added to each objective
Q_FEASIBLE = 85  # 1 if every leg solved and every limit margin >= 0 (penalties.all_limits_hold)
N_Q = 86

# --- limits ----------------------------------------------------------------
# The way that tightens each limit slot of ``p``: +1 raises a minimum, -1 lowers a
# maximum. The outgoing requirements count only when set (> 0; 0 means none).
LIMIT_INWARD = {
    P_MIN_ALT_KM: 1.0,
    P_C3_MAX: -1.0,
    P_DLA_MIN: 1.0,
    P_DLA_MAX: -1.0,
    P_DSM_BUDGET_KMS: -1.0,
    P_ARRIVAL_VINF_MAX_KMS: -1.0,
    P_ARRIVAL_OPEN_S: 1.0,
    P_ARRIVAL_CLOSE_S: -1.0,
    P_VINF_MATCH_TOL_KMS: -1.0,
    P_REQ_VINF_OUT_KMS: 1.0,
    P_REQ_INC_RAD: 1.0,
    P_REQ_APHELION_KM: 1.0,
}
REQUIREMENT_SLOTS = (P_REQ_VINF_OUT_KMS, P_REQ_INC_RAD, P_REQ_APHELION_KM)


def tighten_limits(p, amounts) -> None:
    """Move the limits of ``p`` inward in place by ``amounts`` ({slot: amount >= 0},
    each in its slot's kernel unit); an unset requirement stays unset."""
    for slot, amount in amounts.items():
        if slot in REQUIREMENT_SLOTS and not p[slot] > 0.0:
            continue
        p[slot] += LIMIT_INWARD[slot] * amount
