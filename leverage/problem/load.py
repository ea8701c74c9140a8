"""Problem files: read TOML, validate every key, and compile to flat arrays.

Data path: problem file -> ``load_problem`` (a validated ``Problem``) ->
``Problem.compile()`` (a ``CompiledProblem``: parameter array, bounds and names for
the compiled fitness). Every refusal is a ``ProblemError`` whose text is one line
naming the file, the key and the value.
"""
import datetime as _dt
import hashlib
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import tomli

from leverage.astro import bodies, times
from leverage.core import layout as L
from leverage.errors import NO_VALUE, ProblemError
from leverage.problem import sense
from leverage.problem.schema import FRONT_ALGORITHMS, OPTIONAL_SECTIONS, REQUIRED, keys_by_section
from leverage.problem.target import Target, arrival_window_s, target_from_values
from leverage.problem.vehicle import LaunchVehicle, vehicle_from_values


@dataclass
class Problem:
    """A validated problem: ``values[section][key]`` with defaults filled in."""

    source: str
    text: str
    values: dict
    name: str = ""
    body: bodies.Body = None
    extra: dict = field(default_factory=dict)
    target: Target | None = None          # [target] section, if any
    vehicle: LaunchVehicle | None = None  # [vehicle] section, if any

    def get(self, section: str, key: str):
        return self.values[section][key]

    @property
    def sha256(self) -> str:
        return hashlib.sha256(self.text.encode()).hexdigest()

    def compile(self) -> "CompiledProblem":
        return compile_problem(self)


@dataclass
class CompiledProblem:
    """What the optimizer needs: parameters, bounds, names and units of x."""

    params: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    names: list
    units: list
    n_obj: int


# ---------------------------------------------------------------- reading

def read_toml(path) -> tuple[str, dict]:
    """(text, table) of a TOML file; ProblemError with one line on failure."""
    source = str(path)
    try:
        if Path(path).is_file() and Path(path).stat().st_size > sense.MAX_PROBLEM_BYTES:
            raise ProblemError(source, "", NO_VALUE, f"larger than {sense.MAX_PROBLEM_BYTES:,} "
                               "bytes: not a problem file")
        with open(path, encoding="utf-8", newline="") as fh:  # line ends as they are
            text = fh.read()
    except FileNotFoundError:
        raise ProblemError(source, "", NO_VALUE, "no such file") from None
    except IsADirectoryError:
        raise ProblemError(source, "", NO_VALUE, "is a directory, not a problem file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ProblemError(source, "", NO_VALUE, f"cannot read ({exc})") from None
    return text, parse_toml(source, text)


def parse_toml(source: str, text: str) -> dict:
    """The table of TOML text; ProblemError naming ``source`` when it is not TOML."""
    if len(text) > sense.MAX_PROBLEM_BYTES:
        raise ProblemError(source, "", NO_VALUE, f"{len(text):,} characters long; a problem "
                           f"file may hold at most {sense.MAX_PROBLEM_BYTES:,}")
    lone_cr = re.search("\r(?!\n)", text)
    if lone_cr:
        line = text[:lone_cr.start()].count("\n") + 1
        raise ProblemError(source, "", NO_VALUE, f"not valid TOML: a lone carriage return "
                           f"(line {line}); TOML lines end in LF or CR LF")
    try:
        return tomli.loads(text)
    except tomli.TOMLDecodeError as exc:
        raise ProblemError(source, "", NO_VALUE, f"not valid TOML: {exc}") from None
    except RecursionError:
        raise ProblemError(source, "", NO_VALUE,
                           "not a problem file: arrays or tables nested too deeply") from None


def _number(source, key, value):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ProblemError(source, key.path, value, "expected a number")
    value = float(value)
    if not math.isfinite(value):
        raise ProblemError(source, key.path, value, "expected a finite number")
    return value


def _within(source, key, value, shown=None):
    shown = value if shown is None else shown
    if key.minimum is not None and value < key.minimum:
        raise ProblemError(source, key.path, shown, f"must be at least {key.minimum:g}")
    if key.maximum is not None and value > key.maximum:
        raise ProblemError(source, key.path, shown, f"must be at most {key.maximum:g}")
    return value


def _date(source, key, value):
    if isinstance(value, (_dt.date, _dt.datetime)):
        text = value.isoformat()
    elif isinstance(value, str):
        text = value.strip()
    else:
        raise ProblemError(source, key.path, value, "expected a date like 2031-01-01")
    try:
        parsed = _dt.datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError:
        raise ProblemError(source, key.path, value,
                           "expected a date like 2031-01-01 or 2031-01-01T12:00:00") from None
    if parsed.tzinfo is not None:
        # astropy takes no UTC offset: hand it the same instant as naive UTC.
        text = parsed.astimezone(_dt.timezone.utc).replace(tzinfo=None).isoformat()
    return text


def convert(source: str, key, value):
    """Check one raw TOML value against its Key; return the Python value."""
    kind = key.kind
    if kind == "number":
        return _within(source, key, _number(source, key, value))
    if kind == "integer":
        if isinstance(value, bool) or not isinstance(value, int):
            raise ProblemError(source, key.path, value, "expected a whole number")
        return int(_within(source, key, value))
    if kind == "text":
        if not isinstance(value, str):
            raise ProblemError(source, key.path, value, "expected text in quotes")
        return value
    if kind == "boolean":
        if not isinstance(value, bool):
            raise ProblemError(source, key.path, value, "expected true or false")
        return value
    if kind == "date":
        return _date(source, key, value)
    if kind == "choice":
        if not isinstance(value, str) or value.strip().lower() not in key.choices:
            raise ProblemError(source, key.path, value, f"expected one of {', '.join(key.choices)}")
        return value.strip().lower()
    if kind == "range":
        if not isinstance(value, list) or len(value) != 2:
            raise ProblemError(source, key.path, value, "expected two numbers [low, high]")
        low, high = (_number(source, key, v) for v in value)
        _within(source, key, low, value)
        _within(source, key, high, value)
        if low > high:
            raise ProblemError(source, key.path, value, "low end is above high end")
        return [low, high]
    if kind == "revolutions":
        if isinstance(value, str) and value.strip().lower() == "any":
            return "any"
        if isinstance(value, int) and not isinstance(value, bool):
            if not 0 <= value <= 10:
                raise ProblemError(source, key.path, value, "must be from 0 to 10")
            return [value, value]
        if (isinstance(value, list) and len(value) == 2
                and all(isinstance(v, int) and not isinstance(v, bool) for v in value)):
            if not (0 <= value[0] <= value[1] <= 10):
                raise ProblemError(source, key.path, value, "expected 0 <= min <= max <= 10")
            return list(value)
        raise ProblemError(source, key.path, value,
                           'expected a whole number, [min, max] or "any"')
    if kind == "numbers":
        if not isinstance(value, list) or len(value) < 2:
            raise ProblemError(source, key.path, value, "expected a list of two or more numbers")
        for v in value:
            _within(source, key, _number(source, key, v), value)
        return [float(v) for v in value]
    if kind == "names":
        if (not isinstance(value, list) or not value
                or not all(isinstance(v, str) and v.strip().lower() in key.choices for v in value)):
            raise ProblemError(source, key.path, value,
                               f"expected a list of names from {', '.join(key.choices)}")
        names = [v.strip().lower() for v in value]
        if len(set(names)) != len(names):
            raise ProblemError(source, key.path, value, "names a quantity twice")
        return names
    raise AssertionError(f"schema kind {kind!r} has no converter")


def validate(source: str, table: dict, schema: dict | None = None) -> dict:
    """Values of every known key, defaults filled; refuse unknown or missing keys."""
    schema = schema or keys_by_section()
    for section, content in table.items():
        if section not in schema and not isinstance(content, dict):
            raise ProblemError(source, section, content,
                               f"key outside any section; sections: {', '.join(schema)}")
        if section not in schema:
            raise ProblemError(source, f"[{section}]", NO_VALUE,
                               f"unknown section; known: {', '.join(schema)}")
        if not isinstance(content, dict):
            raise ProblemError(source, section, content, "expected a [section] table")
        for name in content:
            if name not in schema[section]:
                raise ProblemError(source, f"[{section}] {name}", content[name],
                                   f"unknown key; known: {', '.join(schema[section])}")
    values = {}
    for section, keys in schema.items():
        if section in OPTIONAL_SECTIONS and section not in table:
            values[section] = None  # not used by this problem
            continue
        given = table.get(section, {})
        values[section] = {}
        for name, key in keys.items():
            if name in given:
                values[section][name] = convert(source, key, given[name])
            elif key.default is REQUIRED:
                raise ProblemError(source, key.path, NO_VALUE, f"missing: {key.meaning}")
            else:
                default = key.default
                values[section][name] = list(default) if isinstance(default, list) else default
    return values


# Standish's Table 1 elements are fitted for 1800 AD - 2050 AD.
MEAN_ELEMENTS_SPAN_UTC = ("1800-01-01", "2050-12-31")


def _check_relations(source: str, values: dict, body: bodies.Body) -> None:
    launch, loop, flyby, goal = (values[s] for s in ("launch", "loop", "flyby", "goal"))
    t_open = times.tdb_seconds(launch["window_open_utc"])
    t_close = times.tdb_seconds(launch["window_close_utc"])
    if t_close < t_open:
        raise ProblemError(source, "[launch] window_close_utc", launch["window_close_utc"],
                           f"is before window_open_utc ({launch['window_open_utc']})")
    first, last = (times.tdb_seconds(d) for d in MEAN_ELEMENTS_SPAN_UTC)
    if t_open < first:
        raise ProblemError(source, "[launch] window_open_utc", launch["window_open_utc"],
                           f"is before {MEAN_ELEMENTS_SPAN_UTC[0]}, outside the span of the "
                           "planets' mean elements (Standish Table 1, 1800-2050)")
    if t_close + loop["duration_days"][1] * times.DAY_S > last:
        raise ProblemError(source, "[launch] window_close_utc", launch["window_close_utc"],
                           f"plus the longest loop ({loop['duration_days'][1]:g} days) ends after "
                           f"{MEAN_ELEMENTS_SPAN_UTC[1]}, outside the span of the planets' mean "
                           "elements (Standish Table 1, 1800-2050)")
    if launch["min_c3_km2_s2"] > launch["max_c3_km2_s2"]:
        raise ProblemError(source, "[launch] min_c3_km2_s2", launch["min_c3_km2_s2"],
                           f"is above max_c3_km2_s2 ({launch['max_c3_km2_s2']:g})")
    if launch["min_dla_deg"] > launch["max_dla_deg"]:
        raise ProblemError(source, "[launch] min_dla_deg", launch["min_dla_deg"],
                           f"is above max_dla_deg ({launch['max_dla_deg']:g})")
    if loop["revolutions"] == "any":
        loop["revolutions"] = [0, loop["max_revolutions"]]
    if flyby["min_altitude_km"] is None:
        flyby["min_altitude_km"] = body.default_min_flyby_altitude_km
    if flyby["max_altitude_km"] is None:
        flyby["max_altitude_km"] = max(flyby["min_altitude_km"], 10.0 * body.equatorial_radius_km)
    if flyby["max_altitude_km"] < flyby["min_altitude_km"]:
        raise ProblemError(source, "[flyby] max_altitude_km", flyby["max_altitude_km"],
                           f"is below min_altitude_km ({flyby['min_altitude_km']:g})")
    if goal["kind"] == "max_gain" and goal["dsm_budget_km_s"] is None:
        raise ProblemError(source, "[goal] dsm_budget_km_s", NO_VALUE,
                           "missing: a max_gain goal needs a DSM budget (km/s)")
    if goal["kind"] == "min_dsm":
        for name in ("gain_weight", "inclination_weight_per_deg"):
            if goal[name]:
                raise ProblemError(source, f"[goal] {name}", goal[name],
                                   "not used by kind = \"min_dsm\" (state requirements as "
                                   "min_outgoing_* keys, or use max_gain or weighted)")
    if goal["kind"] != "weighted" and goal["dsm_weight"] is not None:
        raise ProblemError(source, "[goal] dsm_weight", goal["dsm_weight"],
                           "only used with kind = \"weighted\"")


def load_problem(path) -> Problem:
    """Read and validate a problem file; ProblemError (one line) if anything is off."""
    source = str(path)
    text, table = read_toml(path)
    return _problem(source, text, table, Path(path).stem)


def load_problem_text(text: str, source: str = "<text>", name: str = "problem") -> Problem:
    """A problem from TOML text (``source`` names it in messages; ``name`` is the study
    name when the text gives none)."""
    return _problem(source, text, parse_toml(source, text), name)


def _problem(source: str, text: str, table: dict, stem: str) -> Problem:
    values = validate(source, table)
    body = bodies.planet(values["body"]["name"])
    _check_relations(source, values, body)
    target = (target_from_values(source, values["target"])
              if values.get("target") is not None else None)
    vehicle = (vehicle_from_values(source, values["vehicle"])
               if values.get("vehicle") is not None else None)
    _check_trade_relations(source, values, target, vehicle)
    sense.check_text(source, values)
    sense.check_physics(source, values, body, MEAN_ELEMENTS_SPAN_UTC)
    name = values["study"]["name"] or stem
    return Problem(source=source, text=text, values=values, name=name, body=body,
                   target=target, vehicle=vehicle)


def _check_trade_relations(source: str, values: dict, target, vehicle) -> None:
    """Relations of the front, target and vehicle keys; fills the algorithm default."""
    goal, search = values["goal"], values["search"]
    kind = goal["kind"]
    front = kind == "front"
    if search["algorithm"] is None:
        search["algorithm"] = "nsga2" if front else "sade"
    if front:
        search["polish"] = "none"  # a single-objective polish does not apply to a front
    check_algorithm(source, "[search] algorithm", search["algorithm"], front, search["population"])
    if kind == "max_delivered_mass" and vehicle is None:
        raise ProblemError(source, "[goal] kind", kind, "needs a [vehicle] section")
    if goal["arrival_vinf_weight"] > 0.0 and target is None:
        raise ProblemError(source, "[goal] arrival_vinf_weight", goal["arrival_vinf_weight"],
                           "needs a [target] section")
    if front:
        objectives = goal["objectives"]
        if not 2 <= len(objectives) <= L.MAX_OBJ:
            raise ProblemError(source, "[goal] objectives", objectives,
                               f"a front trades 2 to {L.MAX_OBJ} quantities")
        if "total_dv" in objectives and goal["dsm_budget_km_s"] is None:
            raise ProblemError(source, "[goal] dsm_budget_km_s", NO_VALUE,
                               "missing: a front with total_dv needs a DSM budget (km/s), the "
                               "hypervolume reference")
        if "arrival_vinf" in objectives and (target is None
                                             or values["target"]["max_arrival_vinf_km_s"] is None):
            raise ProblemError(source, "[goal] objectives", objectives,
                               "arrival_vinf needs [target] max_arrival_vinf_km_s (the "
                               "hypervolume reference)")
        if "delivered_mass" in objectives and vehicle is None:
            raise ProblemError(source, "[goal] objectives", objectives,
                               "delivered_mass needs a [vehicle] section")
    if target is not None:
        arrival_window_s(source, values["target"])


def check_algorithm(source: str, key: str, algorithm: str, front: bool, population: int) -> None:
    """Refuse a single-objective algorithm for a front goal and the other way round."""
    if front and algorithm not in FRONT_ALGORITHMS:
        raise ProblemError(source, key, algorithm,
                           f"a front goal needs one of {', '.join(FRONT_ALGORITHMS)}")
    if not front and algorithm in FRONT_ALGORITHMS:
        raise ProblemError(source, key, algorithm,
                           "is multi-objective; use it with [goal] kind = \"front\"")
    if algorithm == "nsga2" and (population % 4 or population < 8):
        raise ProblemError(source, "[search] population", population,
                           "nsga2 needs a multiple of 4, at least 8")


# ---------------------------------------------------------------- compiling

X_NAMES = list(L.X_NAMES_LOOP)
X_UNITS = ["days TDB past J2000", "km/s", "deg", "deg", "days", "fraction of loop", "km", "deg"]


def compile_problem(problem: Problem) -> CompiledProblem:
    """Parameter array and decision bounds of a validated problem (see core.layout)."""
    v = problem.values
    launch, loop, flyby, goal = v["launch"], v["loop"], v["flyby"], v["goal"]
    body = problem.body
    p = np.zeros(L.N_PARAMS)
    p[L.P_MU_SUN] = bodies.GM_SUN_KM3_S2
    p[L.P_BODY_MU] = body.gm_km3_s2
    p[L.P_BODY_RADIUS_KM] = body.equatorial_radius_km
    p[L.P_POLE_RA] = math.radians(body.pole_ra_deg)
    p[L.P_POLE_DEC] = math.radians(body.pole_dec_deg)
    p[L.P_MIN_ALT_KM] = flyby["min_altitude_km"]
    p[L.P_C3_MAX] = launch["max_c3_km2_s2"]
    p[L.P_DLA_MIN] = math.radians(launch["min_dla_deg"])
    p[L.P_DLA_MAX] = math.radians(launch["max_dla_deg"])
    budget = goal["dsm_budget_km_s"]
    p[L.P_DSM_BUDGET_KMS] = math.inf if budget is None else budget
    p[L.P_REV_MIN], p[L.P_REV_MAX] = loop["revolutions"]
    p[L.P_REQ_VINF_OUT_KMS] = goal["min_outgoing_vinf_km_s"]
    p[L.P_REQ_INC_RAD] = math.radians(goal["min_outgoing_inclination_deg"])
    p[L.P_REQ_APHELION_KM] = goal["min_outgoing_aphelion_au"] * bodies.AU_KM
    kind = goal["kind"]
    p[L.P_W_DSM] = {"min_dsm": 1.0, "max_gain": 0.0}.get(
        kind, goal["dsm_weight"] if goal["dsm_weight"] is not None else 1.0)  # 0 is a weight
    p[L.P_W_GAIN] = 0.0 if kind == "min_dsm" else (goal["gain_weight"] if goal["gain_weight"]
                                                   is not None else 1.0)
    p[L.P_W_INC] = 0.0 if kind == "min_dsm" else goal["inclination_weight_per_deg"]
    p[L.P_PENALTY_WEIGHT] = goal["penalty_weight"]
    p[L.P_N_OBJ] = 1
    p[L.P_BODY_EPH:L.P_BODY_EPH + len(body.ephemeris_array())] = body.ephemeris_array()
    p[L.P_ARRIVAL_VINF_MAX_KMS] = math.inf
    lower = np.array([
        times.tdb_days(launch["window_open_utc"]),
        math.sqrt(launch["min_c3_km2_s2"]),
        launch["in_plane_angle_deg"][0],
        launch["out_of_plane_angle_deg"][0],
        loop["duration_days"][0],
        loop["dsm_fraction"][0],
        flyby["min_altitude_km"],
        flyby["bplane_angle_deg"][0],
    ])
    upper = np.array([
        times.tdb_days(launch["window_close_utc"]),
        math.sqrt(launch["max_c3_km2_s2"]),
        launch["in_plane_angle_deg"][1],
        launch["out_of_plane_angle_deg"][1],
        loop["duration_days"][1],
        loop["dsm_fraction"][1],
        flyby["max_altitude_km"],
        flyby["bplane_angle_deg"][1],
    ])
    compiled = CompiledProblem(params=p, lower=lower, upper=upper, names=list(X_NAMES),
                               units=list(X_UNITS), n_obj=1)
    _compile_trade(problem, compiled)
    return compiled


OBJECTIVE_CODES = {"total_dv": L.OBJ_TOTAL_DV, "gain": L.OBJ_GAIN,
                   "inclination": L.OBJ_INCLINATION, "arrival_vinf": L.OBJ_ARRIVAL_VINF,
                   "delivered_mass": L.OBJ_MASS}


def _compile_trade(problem: Problem, compiled: CompiledProblem) -> None:
    """Target leg, launch vehicle and objective slots (fronts, delivered mass)."""
    p, goal = compiled.params, problem.values["goal"]
    target = problem.target
    p[L.P_ARRIVAL_OPEN_S], p[L.P_ARRIVAL_CLOSE_S] = -math.inf, math.inf
    if target is not None:
        t = problem.values["target"]
        p[L.P_HAS_TARGET] = 1.0
        p[L.P_TARGET_EPH:L.P_TARGET_EPH + target.ephemeris.size] = target.ephemeris
        p[L.P_TARGET_MU] = target.gm_km3_s2
        limit = t["max_arrival_vinf_km_s"]
        p[L.P_ARRIVAL_VINF_MAX_KMS] = math.inf if limit is None else limit
        p[L.P_POWERED_FLYBY] = 1.0 if t["flyby"] == "powered" else 0.0
        p[L.P_VINF_MATCH_TOL_KMS] = t["vinf_match_tolerance_km_s"]
        p[L.P_ARRIVAL_BURN] = 1.0 if t["arrival_burn"] else 0.0
        p[L.P_ARRIVAL_OPEN_S], p[L.P_ARRIVAL_CLOSE_S] = arrival_window_s(problem.source, t)
        # The leg fixes the flyby geometry: x[6] becomes the leg duration, x[7] goes.
        n = L.N_X_TARGET
        compiled.lower = np.append(compiled.lower[:n - 1], t["leg_duration_days"][0])
        compiled.upper = np.append(compiled.upper[:n - 1], t["leg_duration_days"][1])
        compiled.names = list(L.X_NAMES_TARGET)
        compiled.units = compiled.units[:n - 1] + ["days"]
    p[L.P_W_ARRIVAL] = goal["arrival_vinf_weight"]
    if problem.vehicle is not None:
        problem.vehicle.pack(p)
    if goal["kind"] == "max_delivered_mass":
        p[L.P_W_DSM] = p[L.P_W_GAIN] = 0.0
        p[L.P_W_MASS] = 1.0 / problem.vehicle.max_mass_kg  # objective ~ -1 at the best
    if goal["kind"] == "front":
        codes = [OBJECTIVE_CODES[name] for name in goal["objectives"]]
        p[L.P_N_OBJ] = len(codes)
        p[L.P_OBJ_CODES:L.P_OBJ_CODES + len(codes)] = codes
        compiled.n_obj = len(codes)
