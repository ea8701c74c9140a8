"""A design as data: derived quantities with units, limit margins, events.

``design_record(problem, udp, x)`` turns one decision vector into plain dicts (the
single source for the JSON file, the summary and the pictures); ``leverage.fileio``
writes them.
"""

import math
import platform

import numpy as np

from leverage.about import CAUTION, __version__
from leverage.core import layout as L
from leverage.core.constants import AU_KM
from leverage.record import objective

# name, slot, unit, factor from the kernel's unit, meaning
DERIVED = [
    ("c3", L.Q_C3, "km^2/s^2", 1.0, "launch energy C3"),
    ("dla", L.Q_DLA, "deg", math.degrees(1.0), "declination of the launch asymptote"),
    ("rla", L.Q_RLA, "deg", math.degrees(1.0), "right ascension of the launch asymptote"),
    ("launch_vinf", L.Q_VINF_LAUNCH, "km/s", 1.0, "launch v-infinity"),
    ("dsm", L.Q_DSM, "km/s", 1.0, "deep-space maneuver size"),
    ("dsm_radial", L.Q_DSM_R, "km/s", 1.0, "DSM radial component"),
    ("dsm_along_track", L.Q_DSM_T, "km/s", 1.0, "DSM along-track component"),
    ("dsm_normal", L.Q_DSM_N, "km/s", 1.0, "DSM orbit-normal component"),
    ("flyby_vinf_in", L.Q_VINF_IN, "km/s", 1.0, "v-infinity arriving at the return flyby"),
    ("flyby_vinf_out", L.Q_VINF_OUT, "km/s", 1.0, "v-infinity leaving the return flyby"),
    ("vinf_gain", L.Q_GAIN, "km/s", 1.0, "return v-infinity minus launch v-infinity"),
    ("leverage_ratio", L.Q_LEVERAGE, "km/s per km/s", 1.0, "v-infinity gain per km/s of DSM"),
    ("turn_angle", L.Q_TURN, "deg", math.degrees(1.0), "flyby turn angle"),
    (
        "max_turn_angle",
        L.Q_TURN_MAX,
        "deg",
        math.degrees(1.0),
        "largest turn at the minimum flyby altitude",
    ),
    ("flyby_altitude", L.Q_ALT, "km", 1.0, "flyby periapsis altitude"),
    ("flyby_periapsis_radius", L.Q_RP, "km", 1.0, "flyby periapsis radius"),
    ("bplane_angle", L.Q_BPLANE, "deg", math.degrees(1.0), "B-plane angle (T toward R)"),
    ("outgoing_sma", L.Q_OUT_A, "au", 1.0 / AU_KM, "outgoing heliocentric semi-major axis"),
    ("outgoing_eccentricity", L.Q_OUT_E, "", 1.0, "outgoing heliocentric eccentricity"),
    (
        "outgoing_inclination",
        L.Q_OUT_INC,
        "deg",
        math.degrees(1.0),
        "outgoing inclination to the ecliptic J2000",
    ),
    ("outgoing_perihelion", L.Q_OUT_PERI, "au", 1.0 / AU_KM, "outgoing perihelion distance"),
    ("outgoing_aphelion", L.Q_OUT_APO, "au", 1.0 / AU_KM, "outgoing aphelion distance"),
    ("lambert_revolutions", L.Q_REVS, "", 1.0, "revolutions of the DSM-to-flyby arc"),
    ("lambert_low_path", L.Q_LOW_PATH, "", 1.0, "1: low-path root, 0: high-path root"),
    ("flyby_burn", L.Q_FLYBY_DV, "km/s", 1.0, "periapsis burn of a powered flyby"),
    ("total_dv", L.Q_TOTAL_DV, "km/s", 1.0, "all burns after launch"),
    ("arrival_vinf", L.Q_VINF_ARRIVAL, "km/s", 1.0, "v-infinity at the target (n/a: no target)"),
    ("arrival_burn", L.Q_ARRIVAL_DV, "km/s", 1.0, "arrival burn counted for a rendezvous"),
    (
        "injected_mass",
        L.Q_M_INJECTED,
        "kg",
        1.0,
        "launch-vehicle injected mass at the launch C3 (n/a: no vehicle)",
    ),
    (
        "delivered_mass",
        L.Q_M_DELIVERED,
        "kg",
        1.0,
        "injected mass left after every burn (rocket equation)",
    ),
    ("penalty", L.Q_PENALTY, "objective units", 1.0, "total limit penalty"),
]

# limit name, slot, unit, factor, meaning of the limit
MARGINS = [
    ("min_flyby_altitude", L.Q_MARGIN_ALT_KM, "km", 1.0, "flyby altitude above the minimum"),
    ("max_turn", L.Q_MARGIN_TURN_RAD, "deg", math.degrees(1.0), "turn below the largest turn"),
    ("max_c3", L.Q_MARGIN_C3, "km^2/s^2", 1.0, "C3 below the cap"),
    ("dla_band", L.Q_MARGIN_DLA_RAD, "deg", math.degrees(1.0), "DLA inside the allowed band"),
    ("dsm_budget", L.Q_MARGIN_DSM_KMS, "km/s", 1.0, "DSM below the budget"),
    ("min_outgoing_vinf", L.Q_MARGIN_VINF_OUT_KMS, "km/s", 1.0, "v-infinity above the requirement"),
    (
        "min_outgoing_inclination",
        L.Q_MARGIN_INC_RAD,
        "deg",
        math.degrees(1.0),
        "inclination above the requirement",
    ),
    (
        "min_outgoing_aphelion",
        L.Q_MARGIN_APHELION_KM,
        "au",
        1.0 / AU_KM,
        "aphelion above the requirement",
    ),
    ("lambert_solved", L.Q_MARGIN_LAMBERT, "", 1.0, "0 when every arc was solved"),
    ("vinf_match", L.Q_MARGIN_VINF_MATCH_KMS, "km/s", 1.0, "unpowered flyby |v-inf| match"),
    (
        "max_arrival_vinf",
        L.Q_MARGIN_ARRIVAL_VINF_KMS,
        "km/s",
        1.0,
        "arrival v-infinity below the limit",
    ),
    (
        "vehicle_c3_table",
        L.Q_MARGIN_LV_C3,
        "km^2/s^2",
        1.0,
        "launch C3 inside the launch-vehicle table",
    ),
    ("arrival_window", L.Q_MARGIN_ARRIVAL_DAYS, "days", 1.0, "arrival inside the arrival window"),
]

# Below this distance from the line (plane) through a front's extreme members, in
# objectives scaled to [0, 1], no member stands out as a knee: the summary says so and
# front.png circles none (search.fronts picks the knee).
KNEE_MIN_DISTANCE = 0.02


def feasible_rows(qs) -> np.ndarray:
    """Feasible rows of the kernel's derived quantities ``qs``: every leg solved and every
    limit margin >= 0, as the kernel marked them (``core.penalties.all_limits_hold``,
    where the rule is written); one bool per row."""
    qs = np.asarray(qs, dtype=float).reshape(-1, L.N_Q)
    return qs[:, L.Q_FEASIBLE] == 1.0


def feasible(q) -> bool:
    """``feasible_rows`` of one derived-quantity array ``q``."""
    return bool(feasible_rows(q)[0])


def clean(value):
    """A JSON-safe float: NaN -> None, +-inf -> 'inf'/'-inf' strings."""
    value = float(value)
    if math.isnan(value):
        return None
    if math.isinf(value):
        return "inf" if value > 0 else "-inf"
    return value


def as_float(value) -> float:
    """Inverse of ``clean`` for reading back."""
    if value is None:
        return math.nan
    return float(value)


def _vec(q, slot, factor=1.0):
    return [clean(q[slot + k] * factor) for k in range(3)]


def design_record(compiled, udp, x) -> dict:
    """Everything about one design, as plain data with units."""
    from leverage.astro import times  # astropy: only where a record is made

    x = np.asarray(x, dtype=float)
    q = udp.details(x)
    f = udp.fitness(x)
    derived = {
        name: {"value": clean(q[slot] * factor), "unit": unit, "meaning": meaning}
        for name, slot, unit, factor, meaning in DERIVED
    }
    margins = {}
    limits = getattr(compiled, "limits", {})
    for name, slot, unit, factor, meaning in MARGINS:
        value = q[slot]
        if math.isinf(value) and value > 0:
            continue  # limit not set by this problem
        stated = limits.get(name, {"limit": None, "required_margin": 0.0})
        required = stated["required_margin"]
        # The kernel measures against the limit tightened by the design margin; people
        # read the margin from the stated limit, next to the margin asked for.
        margins[name] = {
            "margin": clean(value * factor + required),
            "unit": unit,
            "meaning": meaning,
            "limit": stated["limit"],
            "required_margin": required,
            "holds": bool(value >= 0),
        }
    events = [
        {
            "event": "launch",
            "epoch_tdb_s": clean(q[L.Q_T_LAUNCH]),
            "utc": times.utc_iso(q[L.Q_T_LAUNCH]),
            "position_km": _vec(q, L.Q_R_LAUNCH),
            "velocity_km_s": _vec(q, L.Q_V_LAUNCH),
        },
        {
            "event": "dsm",
            "epoch_tdb_s": clean(q[L.Q_T_DSM]),
            "utc": times.utc_iso(q[L.Q_T_DSM]),
            "position_km": _vec(q, L.Q_R_DSM),
            "velocity_before_km_s": _vec(q, L.Q_V_DSM_BEFORE),
            "velocity_after_km_s": _vec(q, L.Q_V_DSM_AFTER),
        },
        {
            "event": "flyby",
            "epoch_tdb_s": clean(q[L.Q_T_FLYBY]),
            "utc": times.utc_iso(q[L.Q_T_FLYBY]),
            "position_km": _vec(q, L.Q_R_FLYBY),
            "velocity_in_km_s": _vec(q, L.Q_V_FLYBY_IN),
            "velocity_out_km_s": _vec(q, L.Q_V_FLYBY_OUT),
            "body_velocity_km_s": _vec(q, L.Q_V_BODY_FLYBY),
        },
    ]
    if udp.params[L.P_HAS_TARGET] == 1.0 and q[L.Q_OK] == 1.0:
        events.append(
            {
                "event": "arrival",
                "epoch_tdb_s": clean(q[L.Q_T_ARRIVAL]),
                "utc": times.utc_iso(q[L.Q_T_ARRIVAL]),
                "position_km": _vec(q, L.Q_R_ARRIVAL),
                "velocity_km_s": _vec(q, L.Q_V_ARRIVAL),
                "target_velocity_km_s": _vec(q, L.Q_V_TARGET_ARRIVAL),
            }
        )
    return {
        "decision_vector": {
            "names": list(compiled.names),
            "units": list(compiled.units),
            "values": [float(v) for v in x],
            "lower": [float(v) for v in compiled.lower],
            "upper": [float(v) for v in compiled.upper],
        },
        "objective": [clean(v) for v in f],  # as minimised (the CSV columns' values)
        "objective_shown": objective.as_records(objective.shown_objectives(udp.params)),
        "feasible": feasible(q),
        "ephemeris": {
            "search": getattr(compiled, "ephemeris", ""),
            "spk_file": getattr(compiled, "ephemeris_file", None),
        },
        "verification": {"holds": None, "status": "not run yet"},
        "derived": derived,
        "margins": margins,
        "events": events,
        "frame": "heliocentric ecliptic J2000; epochs TDB seconds past J2000 and UTC",
    }


def package_versions() -> dict:
    import astropy
    import numba
    import poliastro
    import pygmo
    import scipy

    return {
        "leverage": __version__,
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "numba": numba.__version__,
        "poliastro": poliastro.__version__,
        "pygmo": pygmo.__version__,
        "astropy": astropy.__version__,
    }


def base_record(problem, settings, status: str) -> dict:
    """The run-level part of best.json (problem identity, seed, versions, caution)."""
    return {
        "caution": CAUTION,
        "status": status,
        "problem": {
            "name": problem.name,
            "file": problem.source,
            "sha256": problem.sha256,
            "description": problem.values["study"]["description"],
            "body": problem.body.name,
            "goal": problem.values["goal"]["kind"],
            "target": problem.target.name if problem.target is not None else None,
            "vehicle": (problem.vehicle.name or "unnamed") if problem.vehicle is not None else None,
        },
        "search": {
            "algorithm": settings.algorithm,
            "islands": settings.islands,
            "population": settings.population,
            "generations": settings.generations,
            "generations_per_migration": settings.generations_per_migration,
            "seed": settings.seed,
            "polish": settings.polish,
        },
        "package_versions": package_versions(),
    }
