"""Several result folders side by side: what each change to a problem file did.

``render(folders, records)`` makes a text table, one column per run (A, B, C, ...):
problem and goal, status, the key numbers of the design, every limit margin any of
the runs has, search effort and wall time; then the problem-file settings that
differ between the runs (read from each folder's problem.toml copy). Everything
comes from the folders alone.
"""

import math
import os
import textwrap
from pathlib import Path

import tomli

from leverage.about import CAUTION
from leverage.record import objective
from leverage.record.design import as_float
from leverage.reports.summary import fmt_number

# label, derived quantity, digits
KEY_NUMBERS = [
    ("C3 (km^2/s^2)", "c3", 3),
    ("launch v-inf (km/s)", "launch_vinf", 3),
    ("DLA (deg)", "dla", 2),
    ("DSM (km/s)", "dsm", 4),
    ("total dv (km/s)", "total_dv", 4),
    ("flyby v-inf in (km/s)", "flyby_vinf_in", 3),
    ("v-inf gain (km/s)", "vinf_gain", 3),
    ("flyby altitude (km)", "flyby_altitude", 0),
    ("turn (deg)", "turn_angle", 2),
    ("out inclination (deg)", "outgoing_inclination", 3),
    ("out aphelion (au)", "outgoing_aphelion", 4),
    ("arrival v-inf (km/s)", "arrival_vinf", 3),
]
WIDTH = 100  # the table never passes this column, whatever the number of runs
COL = 14  # widest column of one run
MIN_COL = 12  # narrowest; more runs than fit go to a further block of columns
LABEL = 28  # widest label column (6 runs x 12 + 28 = 100)
CUT = "~"  # ends a value cut to fit its column (one folder: `leverage show` prints it all)


def _num(value, digits) -> str:
    return fmt_number(value, digits, thousands=True)


def _event(record, name):
    return next((e for e in record["events"] if e["event"] == name), None)


def _short_ephemeris(record) -> str:
    """DE421, DE423, spk:<file>, mean-elements (one word, for a table cell)."""
    eph = record.get("ephemeris", {})
    name = eph.get("search", "")
    if eph.get("spk_file"):
        return "spk:" + Path(eph["spk_file"]).name
    for short in ("DE421", "DE423"):
        if short in name:
            return short
    return "mean-elements" if "mean elements" in name else "-"


def _verified(record) -> str:
    v = record.get("verification") or {}
    if v.get("holds") is None:
        return "not run"
    return "yes" if v["holds"] else "NO"


def _objective_row(records) -> tuple:
    """(label, values) of the first objective: in its own unit and sign when every record
    reads it the same way (e.g. "objective: total DSM (km/s)"), else as minimised."""
    shown = [objective.from_record(r)[0] for r in records]
    values = [as_float(r["objective"][0]) for r in records]
    if all(s == shown[0] for s in shown):
        s = shown[0]
        label = f"objective: {s.name}" + (f" ({s.unit})" if s.unit else "")
        return label, [_num(s.value(v), 3 if s.unit == "kg" else 6) for v in values]
    return "objective (minimised)", [_num(v, 6) for v in values]


def _rows(records) -> list:
    rows = [
        ("problem", [r["problem"]["name"] for r in records]),
        ("problem sha256", [r["problem"]["sha256"][:10] for r in records]),
        ("goal", [r["problem"]["goal"] for r in records]),
        ("flyby body", [r["problem"]["body"] for r in records]),
        ("status", [r.get("status", "") for r in records]),
        ("ephemeris", [_short_ephemeris(r) for r in records]),
        ("holds: search model", ["yes" if r.get("feasible") else "NO" for r in records]),
        ("holds: verification", [_verified(r) for r in records]),
        _objective_row(records),
        ("launch (UTC)", [_event(r, "launch")["utc"][:10] for r in records]),
        ("flyby (UTC)", [_event(r, "flyby")["utc"][:10] for r in records]),
    ]
    if any(_event(r, "arrival") for r in records):
        rows.append(
            ("arrival (UTC)", [(_event(r, "arrival") or {"utc": "-"})["utc"][:10] for r in records])
        )
    for label, name, digits in KEY_NUMBERS:
        if any(name in r["derived"] for r in records):
            rows.append(
                (
                    label,
                    [
                        _num(r["derived"][name]["value"], digits) if name in r["derived"] else "-"
                        for r in records
                    ],
                )
            )
    names = []
    for r in records:
        names += [n for n in r["margins"] if n not in names]
    if names:
        rows.append(("", []))
        rows.append(("limit margins (>= 0 holds)", []))
    for name in names:
        cells = []
        for r in records:
            m = r["margins"].get(name)
            if m is None:
                cells.append("not set")
            else:
                cells.append(_num(m["margin"], 4) + ("" if m["holds"] else " !"))
        unit = next(r["margins"][name]["unit"] for r in records if name in r["margins"])
        rows.append((f"  {name}" + (f" ({unit})" if unit else ""), cells))
    rows.append(("", []))
    rows.append(
        (
            "search",
            [
                f"{r['search']['algorithm']} {r['search']['islands']}x{r['search']['population']}"
                for r in records
            ],
        )
    )
    rows.append(
        (
            "generations / seed",
            [f"{r['search']['generations']} / {r['search']['seed']}" for r in records],
        )
    )
    rows.append(("evaluations", [f"{r.get('run', {}).get('evaluations', 0):,}" for r in records]))
    rows.append(
        (
            "search time (s)",
            [_num(r.get("run", {}).get("wall_time_s", math.nan), 1) for r in records],
        )
    )
    rows.append(
        (
            "whole run (s)",
            [_num(r.get("run", {}).get("whole_run_s", math.nan), 1) for r in records],
        )
    )
    return rows


def _flatten(table, prefix=""):
    out = {}
    for key, value in table.items():
        name = f"{prefix}{key}"
        if isinstance(value, dict):
            out.update(_flatten(value, f"{name}."))
        else:
            out[name] = value
    return out


def setting_differences(folders) -> list:
    """(key, [value per folder]) of problem.toml settings that differ between folders."""
    tables = []
    for folder in folders:
        path = Path(folder) / "problem.toml"
        try:
            tables.append(_flatten(tomli.loads(path.read_text(encoding="utf-8"))))
        except (OSError, tomli.TOMLDecodeError):
            tables.append(None)
    if any(t is None for t in tables):
        return []
    keys = []
    for t in tables:
        keys += [k for k in t if k not in keys]
    return [
        (k, [t.get(k, "(default)") for t in tables])
        for k in keys
        if len({repr(t.get(k, "(default)")) for t in tables}) > 1
    ]


def _cell(text, width: int) -> str:
    """``text`` right-aligned in ``width`` columns with one space before it, cut with
    CUT when it would touch its neighbour."""
    text = str(text)
    if len(text) > width - 1:
        text = text[: width - 2] + CUT
    return f"{text:>{width}}"


def _label(text, width: int) -> str:
    text = str(text)
    if len(text) > width - 1:
        text = text[: width - 2] + CUT
    return f"{text:<{width}}"


def _wrapped(text: str, indent: str = "  ") -> list:
    return textwrap.wrap(text, WIDTH, initial_indent=indent, subsequent_indent=indent + "    ") or [
        indent.rstrip()
    ]


def _folder_lines(letters, folders) -> list:
    """ "A = folder" lines, the folders' common parent said once; long names wrap."""
    paths = [str(f) for f in folders]
    try:
        parent = os.path.commonpath([os.path.dirname(os.path.abspath(p)) for p in paths])
    except ValueError:  # different drives
        parent = ""
    lines = []
    if parent and parent != os.sep and len(paths) > 1:
        lines += _wrapped(f"folders in {parent}{os.sep}:", "")
        paths = [os.path.relpath(os.path.abspath(p), parent) for p in paths]
    for letter, path in zip(letters, paths):
        lines += _wrapped(f"{letter} = {path}")
    return lines


def _layout(n: int, label_width: int) -> tuple:
    """(column width, runs per block) so a line stays within WIDTH columns."""
    col = max(MIN_COL, min(COL, (WIDTH - label_width) // max(n, 1)))
    return col, max(1, (WIDTH - label_width) // col)


def render(folders, records, refined=None) -> str:
    """The side-by-side text of several result folders (``refined``: each folder's
    refined.json or None). Every line fits in WIDTH columns: values too wide for their
    column end in CUT, and runs beyond what fits go to a further block of columns."""
    letters = [chr(ord("A") + k) if k < 26 else f"R{k}" for k in range(len(records))]
    lines = [f"leverage comparison of {len(records)} runs"]
    lines += _wrapped(f"CAUTION: {CAUTION}") + [""]
    lines += _folder_lines(letters, folders)
    rows = _rows(records)
    if refined and any(refined):
        rows.append(
            (
                "refined DSM (km/s)",
                [
                    "not yet"
                    if r is None
                    else f"{r.get('derived', {}).get('dsm', {}).get('value', float('nan')):.4f}"
                    + ("" if r.get("status") == "converged" else " !")
                    for r in refined
                ],
            )
        )
    diffs = setting_differences(folders)
    width = min(LABEL, max([len(label) for label, _ in rows] + [len(k) + 2 for k, _ in diffs]) + 2)
    col, per_block = _layout(len(records), width)
    cut = False
    for start in range(0, len(records), per_block):
        part = slice(start, start + per_block)
        if start:
            lines += ["", f"(runs {letters[part][0]}-{letters[part][-1]})"]
        lines += ["", " " * width + "".join(_cell(letter, col) for letter in letters[part])]
        for label, cells in rows:
            text = _label(label, width) + "".join(_cell(c, col) for c in cells[part])
            cut = cut or CUT in text
            lines.append(text.rstrip())
        lines += [
            "",
            "problem-file settings that differ"
            if diffs
            else "problem files: no setting differs (runs differ only by command-line options)",
        ]
        for key, values in diffs:
            text = _label(f"  {key}", width) + "".join(_cell(v, col) for v in values[part])
            cut = cut or CUT in text
            lines.append(text.rstrip())
    lines += ["", "! marks a violated limit."]
    if cut:
        lines.append(
            f"{CUT} ends a value cut to fit {WIDTH} columns; `leverage show FOLDER` prints one "
            "in full."
        )
    lines += _wrapped(f"CAUTION: {CAUTION}", "") + [""]
    return "\n".join(lines)
