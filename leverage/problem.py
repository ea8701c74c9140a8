"""Problem files: read TOML, validate every key, and compile to flat arrays.

Data path: problem file -> ``load_problem`` (a validated ``Problem``) ->
``Problem.compile()`` (a ``CompiledProblem``: parameter array, bounds and names for
the compiled fitness). Every refusal is a ``ProblemError`` whose text is one line
naming the file, the key and the value.
"""
import datetime as _dt
import hashlib
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import tomli

from . import bodies
from . import times
from .core import layout as L
from .errors import NO_VALUE, ProblemError
from .schema import REQUIRED, SECTIONS, keys_by_section


@dataclass
class Problem:
    """A validated problem: ``values[section][key]`` with defaults filled in."""

    source: str
    text: str
    values: dict
    name: str = ""
    body: bodies.Body = None
    extra: dict = field(default_factory=dict)

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
        text = Path(path).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ProblemError(source, "", NO_VALUE, "no such file") from None
    except IsADirectoryError:
        raise ProblemError(source, "", NO_VALUE, "is a directory, not a problem file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ProblemError(source, "", NO_VALUE, f"cannot read ({exc})") from None
    try:
        table = tomli.loads(text)
    except tomli.TOMLDecodeError as exc:
        raise ProblemError(source, "", NO_VALUE, f"not valid TOML: {exc}") from None
    return text, table


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


def _check_relations(source: str, values: dict, body: bodies.Body) -> None:
    launch, loop, flyby, goal = (values[s] for s in ("launch", "loop", "flyby", "goal"))
    t_open = times.tdb_seconds(launch["window_open_utc"])
    t_close = times.tdb_seconds(launch["window_close_utc"])
    if t_close < t_open:
        raise ProblemError(source, "[launch] window_close_utc", launch["window_close_utc"],
                           f"is before window_open_utc ({launch['window_open_utc']})")
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
    if goal["kind"] != "weighted" and goal["dsm_weight"] is not None:
        raise ProblemError(source, "[goal] dsm_weight", goal["dsm_weight"],
                           "only used with kind = \"weighted\"")


def load_problem(path) -> Problem:
    """Read and validate a problem file; ProblemError (one line) if anything is off."""
    source = str(path)
    text, table = read_toml(path)
    values = validate(source, table)
    body = bodies.planet(values["body"]["name"])
    _check_relations(source, values, body)
    name = values["study"]["name"] or Path(path).stem
    return Problem(source=source, text=text, values=values, name=name, body=body)


# ---------------------------------------------------------------- compiling

X_NAMES = ["launch_epoch", "launch_vinf", "launch_in_plane_angle", "launch_out_of_plane_angle",
           "loop_duration", "dsm_fraction", "flyby_altitude", "bplane_angle"]
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
    p[L.P_W_DSM] = {"min_dsm": 1.0, "max_gain": 0.0}.get(kind, goal["dsm_weight"] or 1.0)
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
    return CompiledProblem(params=p, lower=lower, upper=upper, names=list(X_NAMES),
                           units=list(X_UNITS), n_obj=1)
