"""leverage new FILE [--template KIND]: write a commented problem file to start from.

Every key of ``schema.KEYS`` is written with its meaning, unit, default and allowed
values, so a study for a new target starts from a valid, documented file. Required
keys and the keys a template sets are active; every other key is commented out at
its default. Optional sections a template does not use are written commented out.
"""

import json
import textwrap
from pathlib import Path

from leverage.errors import ProblemError
from leverage.fileio import write_atomic
from leverage.problem.schema import OPTIONAL_SECTIONS, REQUIRED, SECTIONS, keys_by_section

PLACEHOLDER_NOTE = (
    "Starting values are placeholders for a study of your own (a made-up "
    "scenario), not data about any real mission, vehicle or body."
)

# template -> (what it is for, {(section, key): value}, optional sections it uses)
TEMPLATES = {
    "loop": (
        "one loop and return flyby: smallest DSM for a required outgoing v-infinity",
        {("goal", "min_outgoing_vinf_km_s"): 7.0},
        (),
    ),
    "front": (
        "a trade front of total DSM against v-infinity gain (multi-objective)",
        {
            ("goal", "kind"): "front",
            ("goal", "objectives"): ["total_dv", "gain"],
            ("goal", "dsm_budget_km_s"): 1.5,
            ("search", "algorithm"): "nsga2",
            ("search", "population"): 64,
            ("search", "generations"): 600,
            ("search", "generations_per_migration"): 150,  # 4 log rows (trade-front.toml)
        },
        (),
    ),
    "target": (
        "a final leg from the return flyby to a target small body",
        {
            ("target", "name"): "my-target",
            ("target", "semi_major_axis_au"): 1.4,
            ("target", "eccentricity"): 0.28,
            ("target", "inclination_deg"): 8.0,
            ("target", "ascending_node_deg"): 240.0,
            ("target", "argument_of_perihelion_deg"): 215.0,
            ("target", "mean_anomaly_deg"): -15.0,
            ("target", "elements_epoch_tdb"): "2032-12-01",
            ("target", "leg_duration_days"): [100.0, 450.0],
            ("target", "max_arrival_vinf_km_s"): 1.0,
            ("target", "flyby"): "powered",
        },
        ("target",),
    ),
    "mass": (
        "the most mass delivered on a launch vehicle, for a required outgoing v-infinity",
        {
            ("goal", "kind"): "max_delivered_mass",
            ("goal", "min_outgoing_vinf_km_s"): 7.0,
            ("launch", "max_c3_km2_s2"): 30.0,
            ("vehicle", "name"): "my-launcher",
            ("vehicle", "c3_km2_s2"): [0.0, 10.0, 20.0, 30.0],
            ("vehicle", "injected_mass_kg"): [2000.0, 1700.0, 1400.0, 1100.0],
            ("vehicle", "specific_impulse_s"): 320.0,
        },
        ("vehicle",),
    ),
    "multi-year": (
        "loops of two to three years, any number of revolutions before the return",
        {
            ("goal", "min_outgoing_vinf_km_s"): 7.0,
            ("loop", "duration_days"): [650.0, 1150.0],
            ("loop", "dsm_fraction"): [0.05, 0.95],
            ("loop", "revolutions"): "any",
            ("loop", "max_revolutions"): 2,
        },
        (),
    ),
}

_KIND_HINTS = {
    "number": "number",
    "integer": "whole number",
    "text": "text",
    "boolean": "true or false",
    "date": "date",
    "range": "[low, high]",
    "choice": "one of",
    "names": "list of",
    "revolutions": 'whole number, [min, max] or "any"',
    "numbers": "list of numbers",
}


def toml_value(value) -> str:
    """A Python value as TOML text (numbers, text, booleans, flat lists)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value)  # a JSON string is a valid TOML basic string
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    raise TypeError(f"no TOML form for {value!r}")


def _describe(key) -> list[str]:
    hint = _KIND_HINTS[key.kind]
    if key.choices:
        hint += " " + ", ".join(key.choices)
    limits = []
    if key.minimum is not None:
        limits.append(f">= {key.minimum:g}")
    if key.maximum is not None:
        limits.append(f"<= {key.maximum:g}")
    if key.default is REQUIRED:
        default = "required"
    elif key.default is None:
        default = "none (see above)"
    else:
        default = toml_value(key.default)
    text = f"{key.meaning} Type: {hint}{', ' + ', '.join(limits) if limits else ''}. Default: {default}."
    return ["# " + line for line in textwrap.wrap(text, 86)]


def render(kind: str) -> str:
    """The commented problem file of template ``kind``."""
    purpose, values, sections_used = TEMPLATES[kind]
    lines = [
        f"# leverage problem file, template {kind!r}: {purpose}.",
        "# Written by `leverage new`. Every key is listed with its meaning, type, limits "
        "and default;",
        "# units are in the key names. A commented-out key takes its default; a whole "
        "commented-out",
        "# section is not used. `leverage check` shows what the file means before a run.",
        "# " + "\n# ".join(textwrap.wrap(PLACEHOLDER_NOTE, 86)),
        "",
    ]
    for section, keys in keys_by_section().items():
        used = section not in OPTIONAL_SECTIONS or section in sections_used
        prefix = "" if used else "# "
        lines.append(f"# --- {SECTIONS[section]}")
        lines.append(f"{prefix}[{section}]")
        for name, key in keys.items():
            lines += _describe(key)
            if (section, name) in values:
                value = values[(section, name)]
            elif key.default is REQUIRED:
                value = key.example
            else:
                value = None
            if value is not None:
                lines.append(f"{prefix}{name} = {toml_value(value)}")
            elif key.default is not None and key.default is not REQUIRED:
                lines.append(f"# {name} = {toml_value(key.default)}")
            else:
                lines.append(f"# {name} = ")
        lines.append("")
    return "\n".join(lines)


def add_parser(sub):
    p = sub.add_parser(
        "new",
        help="write a commented problem file to start from",
        description="Write FILE: a problem file listing every key with its unit, "
        "default and meaning, set up for one kind of study.",
    )
    p.add_argument("file", help="problem file to write (TOML)")
    p.add_argument(
        "--template",
        default="loop",
        choices=sorted(TEMPLATES),
        help="kind of study: " + "; ".join(f"{k}: {v[0]}" for k, v in TEMPLATES.items()),
    )
    p.add_argument("--force", action="store_true", help="overwrite an existing file")
    return p


def main(args) -> int:
    path = Path(args.file)
    if path.exists() and not args.force:
        raise ProblemError(
            "command line",
            "FILE",
            str(path),
            "exists; pick another name or add --force to overwrite it",
        )
    if path.exists() and path.is_dir():
        raise ProblemError("command line", "FILE", str(path), "is a folder, not a file")
    if not path.parent.is_dir():
        raise ProblemError("command line", "FILE", str(path), "its folder does not exist")
    write_atomic(path, render(args.template))
    print(f"wrote {path} (template {args.template}); next: leverage check {path}")
    return 0
