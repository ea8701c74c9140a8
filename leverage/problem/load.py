"""Problem files: read TOML, validate every key, and compile to flat arrays.

Data path: problem file -> ``load_problem`` (a validated ``Problem``) ->
``Problem.compile()`` (a ``CompiledProblem``: parameter array, bounds and names for
the compiled fitness). Every refusal is a ``ProblemError`` whose text is one line
naming the file, the key and the value.
"""

import calendar
import datetime as _dt
import difflib
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
from leverage.problem import plausibility, sense
from leverage.problem.schema import (
    FRONT_ALGORITHMS,
    OPTIONAL_SECTIONS,
    POPULATION_IN_FOURS,
    REQUIRED,
    keys_by_section,
)
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
    target: Target | None = None  # [target] section, if any
    vehicle: LaunchVehicle | None = None  # [vehicle] section, if any
    # Values that look like a slip of units (problem.plausibility): warnings, not refusals.
    warnings: list = field(default_factory=list)

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
    # Each limit as stated in the file, before its design margin tightened it in params:
    # {margin name: {"limit": value or [low, high] or None, "unit", "required_margin"}}.
    limits: dict = field(default_factory=dict)
    ephemeris: str = ""  # the planet positions in params, for people
    ephemeris_file: str | None = None  # the SPK file they came from, if any


# ---------------------------------------------------------------- reading


def read_toml(path) -> tuple[str, dict]:
    """(text, table) of a TOML file; ProblemError with one line on failure."""
    source = str(path)
    try:
        if Path(path).is_file() and Path(path).stat().st_size > sense.MAX_PROBLEM_BYTES:
            raise ProblemError(
                source,
                "",
                NO_VALUE,
                f"larger than {sense.MAX_PROBLEM_BYTES:,} bytes: not a problem file",
            )
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
        raise ProblemError(
            source,
            "",
            NO_VALUE,
            f"{len(text):,} characters long; a problem "
            f"file may hold at most {sense.MAX_PROBLEM_BYTES:,}",
        )
    lone_cr = re.search("\r(?!\n)", text)
    if lone_cr:
        line = text[: lone_cr.start()].count("\n") + 1
        raise ProblemError(
            source,
            "",
            NO_VALUE,
            f"not valid TOML: a lone carriage return (line {line}); TOML lines end in LF or CR LF",
        )
    try:
        return tomli.loads(text)
    except tomli.TOMLDecodeError as exc:
        raise ProblemError(
            source, "", NO_VALUE, f"not valid TOML: {exc}{_toml_hint(text, exc)}"
        ) from None
    except RecursionError:
        raise ProblemError(
            source, "", NO_VALUE, "not a problem file: arrays or tables nested too deeply"
        ) from None


_DATE_LIKE = re.compile(r"(\d{4})-(\d{2})-(\d{2})")


def _calendar_slip(text: str) -> str | None:
    """Why a YYYY-MM-DD text that has the right format is no calendar date (None when
    the format is wrong or the date exists)."""
    match = _DATE_LIKE.match(text)
    if not match:
        return None
    year, month, day = (int(g) for g in match.groups())
    if not 1 <= month <= 12:
        return f"an impossible calendar date (the format is right, but there is no month {month})"
    last = calendar.monthrange(year, month)[1]
    if not 1 <= day <= last:
        return (
            f"an impossible calendar date (the format is right, but "
            f"{calendar.month_name[month]} {year} has {last} days)"
        )
    return None


def _toml_hint(text: str, exc) -> str:
    """A hint for the TOML errors a new user makes: an unquoted word (text needs quotes)
    and an unquoted date that does not exist."""
    pos = getattr(exc, "pos", None)
    if not isinstance(pos, int) or not 0 <= pos < len(text):
        return ""
    token = re.match(r"[^\s,\]}#]*", text[pos:]).group(0)
    msg = getattr(exc, "msg", "")
    if msg == "Invalid value" and re.match(r"[A-Za-z_]", token):
        return (
            f'; text values need quotes: write "{token}"' if token else "; text values need quotes"
        )
    if msg == "Invalid date or datetime":
        slip = _calendar_slip(token)
        if slip:
            return f"; {token} is {slip}"
    return ""


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
        slip = _calendar_slip(text)
        if slip:
            raise ProblemError(source, key.path, value, slip) from None
        raise ProblemError(
            source, key.path, value, "expected a date like 2031-01-01 or 2031-01-01T12:00:00"
        ) from None
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
        if (
            isinstance(value, list)
            and len(value) == 2
            and all(isinstance(v, int) and not isinstance(v, bool) for v in value)
        ):
            if not (0 <= value[0] <= value[1] <= 10):
                raise ProblemError(source, key.path, value, "expected 0 <= min <= max <= 10")
            return list(value)
        raise ProblemError(source, key.path, value, 'expected a whole number, [min, max] or "any"')
    if kind == "numbers":
        if not isinstance(value, list) or len(value) < 2:
            raise ProblemError(source, key.path, value, "expected a list of two or more numbers")
        for v in value:
            _within(source, key, _number(source, key, v), value)
        return [float(v) for v in value]
    if kind == "names":
        if (
            not isinstance(value, list)
            or not value
            or not all(isinstance(v, str) and v.strip().lower() in key.choices for v in value)
        ):
            raise ProblemError(
                source, key.path, value, f"expected a list of names from {', '.join(key.choices)}"
            )
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
            home = _sections_holding(schema, section)
            where = (
                f"it belongs in {' or '.join(home)}" if home else f"sections: {', '.join(schema)}"
            )
            raise ProblemError(source, section, content, f"key outside any section; {where}")
        if section not in schema:
            raise ProblemError(
                source,
                f"[{section}]",
                NO_VALUE,
                f"unknown section{_did_you_mean(section, schema)}; known: {', '.join(schema)}",
            )
        if not isinstance(content, dict):
            raise ProblemError(source, section, content, "expected a [section] table")
        for name in content:
            if name not in schema[section]:
                raise ProblemError(
                    source,
                    f"[{section}] {name}",
                    content[name],
                    _unknown_key(schema, section, name),
                )
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


def _sections_holding(schema: dict, name: str) -> list[str]:
    """The sections (as "[section]") that have a key called ``name``."""
    return [f"[{section}]" for section, keys in schema.items() if name in keys]


def _did_you_mean(name: str, known) -> str:
    """ "; did you mean X?" for the closest known name (difflib), or ""."""
    close = difflib.get_close_matches(name, list(known), n=1, cutoff=0.6)
    return f"; did you mean [{close[0]}]?" if close else ""


def _unknown_key(schema: dict, section: str, name: str) -> str:
    """The reason an unknown key is refused: the section it belongs in, else the closest
    key of this section (or of any section), else the keys this section knows."""
    home = _sections_holding(schema, name)
    if home:
        return f"unknown key in [{section}]; it belongs in {' or '.join(home)}"
    here = difflib.get_close_matches(name, list(schema[section]), n=1, cutoff=0.6)
    if here:
        return f"unknown key in [{section}]; did you mean {here[0]}?"
    everywhere = {key: sec for sec, keys in schema.items() for key in keys}
    there = difflib.get_close_matches(name, list(everywhere), n=1, cutoff=0.75)
    if there:
        return f"unknown key in [{section}]; did you mean [{everywhere[there[0]]}] {there[0]}?"
    return f"unknown key; known: {', '.join(schema[section])}"


# The spans each ephemeris source is used within (UTC dates, inclusive): Standish's Table 1
# elements are fitted for 1800-2050; DE421 is used for 1900-2050 and DE423 for 1800-2200
# (the spans their JPL releases state; the packaged files reach a little further).
EPHEMERIS_SPANS_UTC = {
    "mean_elements": ("1800-01-01", "2050-12-31"),
    "de421": ("1900-01-01", "2050-12-31"),
    "de423": ("1800-01-01", "2200-01-01"),
}
EPHEMERIS_NAMES = {
    "mean_elements": "Standish mean elements (JPL, Table 1)",
    "de421": "JPL DE421 (de421 package, read with jplephem)",
    "de423": "JPL DE423 (de423 package, read with jplephem)",
}


def _span_days(values: dict, with_target: bool = True) -> tuple:
    """(first, last) TDB days past J2000 the launch window and loops (and the target
    leg) can reach."""
    launch, loop, target = values["launch"], values["loop"], values.get("target")
    first = times.tdb_days(launch["window_open_utc"])
    last = times.tdb_days(launch["window_close_utc"]) + loop["duration_days"][1]
    if target is not None and with_target:
        last += target["leg_duration_days"][1]
    return first, last


def _check_margins(source: str, values: dict) -> None:
    """A design margin needs the limit it keeps away from."""
    m, goal, target = values["margins"], values["goal"], values.get("target")
    needs = {
        "dsm_km_s": ("[goal] dsm_budget_km_s", goal["dsm_budget_km_s"] is not None),
        "outgoing_vinf_km_s": (
            "[goal] min_outgoing_vinf_km_s",
            goal["min_outgoing_vinf_km_s"] > 0.0,
        ),
        "outgoing_inclination_deg": (
            "[goal] min_outgoing_inclination_deg",
            goal["min_outgoing_inclination_deg"] > 0.0,
        ),
        "outgoing_aphelion_au": (
            "[goal] min_outgoing_aphelion_au",
            goal["min_outgoing_aphelion_au"] > 0.0,
        ),
        "arrival_vinf_km_s": (
            "[target] max_arrival_vinf_km_s",
            target is not None and target["max_arrival_vinf_km_s"] is not None,
        ),
    }
    for name, (limit, is_set) in needs.items():
        if m[name] > 0.0 and not is_set:
            raise ProblemError(
                source, f"[margins] {name}", m[name], f"no {limit} to keep a margin from"
            )
    launch = values["launch"]
    if launch["min_dla_deg"] + m["dla_deg"] > launch["max_dla_deg"] - m["dla_deg"]:
        raise ProblemError(
            source,
            "[margins] dla_deg",
            m["dla_deg"],
            f"leaves no DLA band inside {launch['min_dla_deg']:g}..{launch['max_dla_deg']:g} deg",
        )
    if m["c3_km2_s2"] >= launch["max_c3_km2_s2"]:
        raise ProblemError(
            source,
            "[margins] c3_km2_s2",
            m["c3_km2_s2"],
            f"is not below [launch] max_c3_km2_s2 ({launch['max_c3_km2_s2']:g})",
        )


def _resolve_ephemeris(source: str, values: dict) -> None:
    """Fill ``values["ephemeris"]["used"]`` (a key of EPHEMERIS_SPANS_UTC, or "spk") and
    refuse dates outside the chosen ephemeris in one line naming the key and the span."""
    eph = values["ephemeris"]
    asked = eph["source"]
    # auto chooses for every leg; an ephemeris named outright is checked here for the
    # launch window and loops (problem.sense names a target leg that leaves it).
    first, last = _span_days(values, with_target=asked == "auto")
    dates = f"{times.utc_date(first * times.DAY_S)} .. {times.utc_date(last * times.DAY_S)}"
    legs = "launch window plus the longest loop" + (" and leg" if asked == "auto" else "")

    def fits(name):
        lo, hi = (times.tdb_days(d) for d in EPHEMERIS_SPANS_UTC[name])
        return lo <= first and last <= hi + 1.0

    if asked == "spk":
        if not eph["spk_file"]:
            raise ProblemError(
                source,
                "[ephemeris] spk_file",
                NO_VALUE,
                'missing: source = "spk" needs the path of a .bsp file',
            )
        path = Path(eph["spk_file"]).expanduser()
        if not path.is_absolute() and source not in ("<text>", ""):
            path = Path(source).resolve().parent / path
        if not path.is_file():
            raise ProblemError(
                source, "[ephemeris] spk_file", eph["spk_file"], f"no such file ({path})"
            )
        eph["spk_file"] = str(path)
        eph["used"] = "spk"
        return
    if eph["spk_file"]:
        raise ProblemError(
            source,
            "[ephemeris] spk_file",
            eph["spk_file"],
            f'only used with source = "spk" (source is {asked!r})',
        )
    if asked == "auto":
        choice = next((n for n in ("de421", "de423") if fits(n)), None)
        if choice is None:
            raise ProblemError(
                source,
                "[ephemeris] source",
                asked,
                f"the problem's dates ({dates}, {legs}) leave every bundled DE "
                "span (DE421 1900-2050, "
                "DE423 1800-2200); name an SPK file or ask for mean_elements",
            )
        eph["used"] = choice
        return
    if not fits(asked):
        span = " .. ".join(EPHEMERIS_SPANS_UTC[asked])
        raise ProblemError(
            source,
            "[ephemeris] source",
            asked,
            f"the problem's dates ({dates}, {legs}) leave its span ({span})",
        )
    eph["used"] = asked


def _check_relations(source: str, values: dict, body: bodies.Body) -> None:
    launch, loop, flyby, goal = (values[s] for s in ("launch", "loop", "flyby", "goal"))
    t_open = times.tdb_seconds(launch["window_open_utc"])
    t_close = times.tdb_seconds(launch["window_close_utc"])
    if t_close < t_open:
        raise ProblemError(
            source,
            "[launch] window_close_utc",
            launch["window_close_utc"],
            f"is before window_open_utc ({launch['window_open_utc']})",
        )
    if launch["min_c3_km2_s2"] > launch["max_c3_km2_s2"]:
        raise ProblemError(
            source,
            "[launch] min_c3_km2_s2",
            launch["min_c3_km2_s2"],
            f"is above max_c3_km2_s2 ({launch['max_c3_km2_s2']:g})",
        )
    if launch["min_dla_deg"] > launch["max_dla_deg"]:
        raise ProblemError(
            source,
            "[launch] min_dla_deg",
            launch["min_dla_deg"],
            f"is above max_dla_deg ({launch['max_dla_deg']:g})",
        )
    if loop["revolutions"] == "any":
        loop["revolutions"] = [0, loop["max_revolutions"]]
    if flyby["min_altitude_km"] is None:
        flyby["min_altitude_km"] = body.default_min_flyby_altitude_km
    if flyby["max_altitude_km"] is None:
        flyby["max_altitude_km"] = max(flyby["min_altitude_km"], 10.0 * body.equatorial_radius_km)
    if flyby["max_altitude_km"] < flyby["min_altitude_km"]:
        raise ProblemError(
            source,
            "[flyby] max_altitude_km",
            flyby["max_altitude_km"],
            f"is below min_altitude_km ({flyby['min_altitude_km']:g})",
        )
    if goal["kind"] == "max_gain" and goal["dsm_budget_km_s"] is None:
        raise ProblemError(
            source,
            "[goal] dsm_budget_km_s",
            NO_VALUE,
            "missing: a max_gain goal needs a DSM budget (km/s)",
        )
    if goal["kind"] == "min_dsm":
        for name in ("gain_weight", "inclination_weight_per_deg"):
            if goal[name]:
                raise ProblemError(
                    source,
                    f"[goal] {name}",
                    goal[name],
                    'not used by kind = "min_dsm" (state requirements as '
                    "min_outgoing_* keys, or use max_gain or weighted)",
                )
    if goal["kind"] != "weighted" and goal["dsm_weight"] is not None:
        raise ProblemError(
            source, "[goal] dsm_weight", goal["dsm_weight"], 'only used with kind = "weighted"'
        )


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
    slips = plausibility.warnings(values)
    try:
        problem = _checked_problem(source, text, values, stem)
    except ProblemError as exc:
        # A slip of units often breaks a limit of sense first: say what it likely is.
        slip = next((s for s in slips if s.key == exc.key), None)
        if slip is None:
            raise
        raise ProblemError(exc.source, exc.key, exc.value, f"{exc.reason} ({slip.hint})") from None
    problem.warnings = slips
    return problem


def _checked_problem(source: str, text: str, values: dict, stem: str) -> Problem:
    body = bodies.planet(values["body"]["name"])
    _check_relations(source, values, body)
    target = (
        target_from_values(source, values["target"]) if values.get("target") is not None else None
    )
    vehicle = (
        vehicle_from_values(source, values["vehicle"])
        if values.get("vehicle") is not None
        else None
    )
    _check_trade_relations(source, values, target, vehicle)
    sense.check_text(source, values)
    _resolve_ephemeris(source, values)
    _check_margins(source, values)
    # An SPK file's own span is checked when its tables are built (compile).
    span = EPHEMERIS_SPANS_UTC.get(values["ephemeris"]["used"], ("1800-01-01", "2200-01-01"))
    sense.check_physics(source, values, body, span)
    name = values["study"]["name"] or stem
    return Problem(
        source=source,
        text=text,
        values=values,
        name=name,
        body=body,
        target=target,
        vehicle=vehicle,
    )


def _check_trade_relations(source: str, values: dict, target, vehicle) -> None:
    """Relations of the front, target and vehicle keys; fills the algorithm default."""
    goal, search = values["goal"], values["search"]
    kind = goal["kind"]
    front = kind == "front"
    if search["algorithm"] is None:
        search["algorithm"] = "nsga2" if front else "de"
    if front:
        search["polish"] = "none"  # a single-objective polish does not apply to a front
    check_algorithm(source, "[search] algorithm", search["algorithm"], front, search["population"])
    if kind == "max_delivered_mass" and vehicle is None:
        raise ProblemError(source, "[goal] kind", kind, "needs a [vehicle] section")
    if goal["arrival_vinf_weight"] > 0.0 and target is None:
        raise ProblemError(
            source,
            "[goal] arrival_vinf_weight",
            goal["arrival_vinf_weight"],
            "needs a [target] section",
        )
    if front:
        objectives = goal["objectives"]
        if not 2 <= len(objectives) <= L.MAX_OBJ:
            raise ProblemError(
                source,
                "[goal] objectives",
                objectives,
                f"a front trades 2 to {L.MAX_OBJ} quantities",
            )
        if "total_dv" in objectives and goal["dsm_budget_km_s"] is None:
            raise ProblemError(
                source,
                "[goal] dsm_budget_km_s",
                NO_VALUE,
                "missing: a front with total_dv needs a DSM budget (km/s), the "
                "hypervolume reference",
            )
        if "arrival_vinf" in objectives and (
            target is None or values["target"]["max_arrival_vinf_km_s"] is None
        ):
            raise ProblemError(
                source,
                "[goal] objectives",
                objectives,
                "arrival_vinf needs [target] max_arrival_vinf_km_s (the hypervolume reference)",
            )
        if "delivered_mass" in objectives and vehicle is None:
            raise ProblemError(
                source, "[goal] objectives", objectives, "delivered_mass needs a [vehicle] section"
            )
    if target is not None:
        arrival_window_s(source, values["target"])


def check_algorithm(source: str, key: str, algorithm: str, front: bool, population: int) -> None:
    """Refuse a single-objective algorithm for a front goal and the other way round."""
    if front and algorithm not in FRONT_ALGORITHMS:
        raise ProblemError(
            source, key, algorithm, f"a front goal needs one of {', '.join(FRONT_ALGORITHMS)}"
        )
    if not front and algorithm in FRONT_ALGORITHMS:
        raise ProblemError(
            source, key, algorithm, 'is multi-objective; use it with [goal] kind = "front"'
        )
    if algorithm in POPULATION_IN_FOURS and (population % 4 or population < 8):
        raise ProblemError(
            source,
            "[search] population",
            population,
            f"{algorithm} needs a multiple of 4, at least 8",
        )


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
        kind, goal["dsm_weight"] if goal["dsm_weight"] is not None else 1.0
    )  # 0 is a weight
    p[L.P_W_GAIN] = (
        0.0
        if kind == "min_dsm"
        else (goal["gain_weight"] if goal["gain_weight"] is not None else 1.0)
    )
    p[L.P_W_INC] = 0.0 if kind == "min_dsm" else goal["inclination_weight_per_deg"]
    p[L.P_PENALTY_WEIGHT] = goal["penalty_weight"]
    p[L.P_N_OBJ] = 1
    p[L.P_BODY_EPH : L.P_BODY_EPH + len(body.ephemeris_array())] = body.ephemeris_array()
    p[L.P_ARRIVAL_VINF_MAX_KMS] = math.inf
    lower = np.array(
        [
            times.tdb_days(launch["window_open_utc"]),
            math.sqrt(launch["min_c3_km2_s2"]),
            launch["in_plane_angle_deg"][0],
            launch["out_of_plane_angle_deg"][0],
            loop["duration_days"][0],
            loop["dsm_fraction"][0],
            flyby["min_altitude_km"],
            flyby["bplane_angle_deg"][0],
        ]
    )
    upper = np.array(
        [
            times.tdb_days(launch["window_close_utc"]),
            math.sqrt(launch["max_c3_km2_s2"]),
            launch["in_plane_angle_deg"][1],
            launch["out_of_plane_angle_deg"][1],
            loop["duration_days"][1],
            loop["dsm_fraction"][1],
            flyby["max_altitude_km"],
            flyby["bplane_angle_deg"][1],
        ]
    )
    compiled = CompiledProblem(
        params=p, lower=lower, upper=upper, names=list(X_NAMES), units=list(X_UNITS), n_obj=1
    )
    _compile_trade(problem, compiled)
    compiled.limits = stated_limits(problem)
    _tighten_by_margins(problem, compiled.params)
    _use_ephemeris(problem, compiled)
    return compiled


def stated_limits(problem: Problem) -> dict:
    """Every limit the problem sets, in its file unit, with the design margin asked for
    (named like the margins of ``leverage.record.design.MARGINS``)."""
    v = problem.values
    launch, flyby, goal, m = v["launch"], v["flyby"], v["goal"], v["margins"]
    limits = {
        "min_flyby_altitude": (flyby["min_altitude_km"], "km", m["flyby_altitude_km"]),
        "max_turn": (None, "deg", 0.0),  # the largest turn at the minimum altitude
        "max_c3": (launch["max_c3_km2_s2"], "km^2/s^2", m["c3_km2_s2"]),
        "dla_band": ([launch["min_dla_deg"], launch["max_dla_deg"]], "deg", m["dla_deg"]),
        "lambert_solved": (None, "", 0.0),
    }
    if goal["dsm_budget_km_s"] is not None:
        limits["dsm_budget"] = (goal["dsm_budget_km_s"], "km/s", m["dsm_km_s"])
    for name, key, unit, margin in (
        ("min_outgoing_vinf", "min_outgoing_vinf_km_s", "km/s", "outgoing_vinf_km_s"),
        (
            "min_outgoing_inclination",
            "min_outgoing_inclination_deg",
            "deg",
            "outgoing_inclination_deg",
        ),
        ("min_outgoing_aphelion", "min_outgoing_aphelion_au", "au", "outgoing_aphelion_au"),
    ):
        if goal[key] > 0.0:
            limits[name] = (goal[key], unit, m[margin])
    t = v.get("target")
    if t is not None:
        if t["max_arrival_vinf_km_s"] is not None:
            limits["max_arrival_vinf"] = (
                t["max_arrival_vinf_km_s"],
                "km/s",
                m["arrival_vinf_km_s"],
            )
        if t["flyby"] != "powered":
            limits["vinf_match"] = (t["vinf_match_tolerance_km_s"], "km/s", 0.0)
        if t["arrival_open_utc"] is not None or t["arrival_close_utc"] is not None:
            limits["arrival_window"] = ([t["arrival_open_utc"], t["arrival_close_utc"]], "UTC", 0.0)
    if problem.vehicle is not None:
        c3 = v["vehicle"]["c3_km2_s2"]
        limits["vehicle_c3_table"] = ([min(c3), max(c3)], "km^2/s^2", 0.0)
    return {
        name: {"limit": limit, "unit": unit, "required_margin": float(margin)}
        for name, (limit, unit, margin) in limits.items()
    }


def _tighten_by_margins(problem: Problem, p: np.ndarray) -> None:
    """Move each limit in ``p`` inward by its design margin, so the penalties and the
    kernel's margins measure against the tightened limit."""
    m = problem.values["margins"]
    L.tighten_limits(  # an unlimited one (inf) stays unlimited
        p,
        {
            L.P_C3_MAX: m["c3_km2_s2"],
            L.P_MIN_ALT_KM: m["flyby_altitude_km"],
            L.P_DLA_MIN: math.radians(m["dla_deg"]),
            L.P_DLA_MAX: math.radians(m["dla_deg"]),
            L.P_DSM_BUDGET_KMS: m["dsm_km_s"],
            L.P_ARRIVAL_VINF_MAX_KMS: m["arrival_vinf_km_s"],
            L.P_REQ_VINF_OUT_KMS: m["outgoing_vinf_km_s"],
            L.P_REQ_INC_RAD: math.radians(m["outgoing_inclination_deg"]),
            L.P_REQ_APHELION_KM: m["outgoing_aphelion_au"] * bodies.AU_KM,
        },
    )


def _use_ephemeris(problem: Problem, compiled: CompiledProblem) -> None:
    """Put the chosen ephemeris's tables for the problem's dates into ``params``."""
    eph = problem.values["ephemeris"]
    used = eph["used"]
    if used == "mean_elements":
        compiled.ephemeris = EPHEMERIS_NAMES[used]
        return
    from leverage.astro.de_tables import problem_span_s, with_de_ephemeris

    source = eph["spk_file"] if used == "spk" else used
    start, end = problem_span_s(compiled)
    target = problem.target.name.lower() if problem.target is not None else None
    try:
        compiled.params = with_de_ephemeris(
            compiled.params,
            source,
            start,
            end,
            body=problem.body.name.lower(),
            target=target if target in bodies.PLANETS else None,
        )
    except ProblemError as exc:
        key = "[ephemeris] spk_file" if used == "spk" else "[ephemeris] source"
        raise ProblemError(
            problem.source, key, eph["spk_file"] if used == "spk" else used, exc.reason
        ) from None
    compiled.ephemeris = (
        EPHEMERIS_NAMES.get(used) or f"JPL SPK file {eph['spk_file']} (read with jplephem)"
    )
    compiled.ephemeris_file = eph["spk_file"] if used == "spk" else None


OBJECTIVE_CODES = {
    "total_dv": L.OBJ_TOTAL_DV,
    "gain": L.OBJ_GAIN,
    "inclination": L.OBJ_INCLINATION,
    "arrival_vinf": L.OBJ_ARRIVAL_VINF,
    "delivered_mass": L.OBJ_MASS,
}


def _compile_trade(problem: Problem, compiled: CompiledProblem) -> None:
    """Target leg, launch vehicle and objective slots (fronts, delivered mass)."""
    p, goal = compiled.params, problem.values["goal"]
    target = problem.target
    p[L.P_ARRIVAL_OPEN_S], p[L.P_ARRIVAL_CLOSE_S] = -math.inf, math.inf
    if target is not None:
        t = problem.values["target"]
        p[L.P_HAS_TARGET] = 1.0
        p[L.P_TARGET_EPH : L.P_TARGET_EPH + target.ephemeris.size] = target.ephemeris
        p[L.P_TARGET_MU] = target.gm_km3_s2
        limit = t["max_arrival_vinf_km_s"]
        p[L.P_ARRIVAL_VINF_MAX_KMS] = math.inf if limit is None else limit
        p[L.P_POWERED_FLYBY] = 1.0 if t["flyby"] == "powered" else 0.0
        p[L.P_VINF_MATCH_TOL_KMS] = t["vinf_match_tolerance_km_s"]
        p[L.P_ARRIVAL_BURN] = 1.0 if t["arrival_burn"] else 0.0
        p[L.P_ARRIVAL_OPEN_S], p[L.P_ARRIVAL_CLOSE_S] = arrival_window_s(problem.source, t)
        # The leg fixes the flyby geometry: x[6] becomes the leg duration, x[7] goes.
        n = L.N_X_TARGET
        compiled.lower = np.append(compiled.lower[: n - 1], t["leg_duration_days"][0])
        compiled.upper = np.append(compiled.upper[: n - 1], t["leg_duration_days"][1])
        compiled.names = list(L.X_NAMES_TARGET)
        compiled.units = compiled.units[: n - 1] + ["days"]
    p[L.P_W_ARRIVAL] = goal["arrival_vinf_weight"]
    if problem.vehicle is not None:
        problem.vehicle.pack(p)
    if goal["kind"] == "max_delivered_mass":
        p[L.P_W_DSM] = p[L.P_W_GAIN] = 0.0
        p[L.P_W_MASS] = 1.0 / problem.vehicle.max_mass_kg  # objective ~ -1 at the best
    if goal["kind"] == "front":
        codes = [OBJECTIVE_CODES[name] for name in goal["objectives"]]
        p[L.P_N_OBJ] = len(codes)
        p[L.P_OBJ_CODES : L.P_OBJ_CODES + len(codes)] = codes
        compiled.n_obj = len(codes)
