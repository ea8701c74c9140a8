"""Launch-window slices: split ``[launch] window_open_utc .. window_close_utc`` into
consecutive spans of a fixed number of days, and write one problem file per slice.

Dates are UTC calendar dates (as in the problem file); a slice is ``[start, end]``
with ``end = min(start + N days, window close)``, so neighbouring slices share their
boundary instant and the last one may be shorter. A slice's problem file is the
original text with only the two window lines replaced, so its hash, its copy in
every run folder and ``leverage run`` on it all behave like any problem file.
"""

import math
import re
from dataclasses import dataclass
from datetime import datetime, timedelta
from pathlib import Path

from leverage.astro.times import parse_utc
from leverage.core.constants import DAY_S
from leverage.errors import NO_VALUE, ProblemError
from leverage.fileio import write_atomic
from leverage.problem.load import load_problem

MAX_SLICES = 10_000  # a guard against a typo such as --slice-days 0.001


@dataclass(frozen=True)
class Slice:
    """One launch span; ``number`` counts from 1."""

    number: int
    start_utc: str
    end_utc: str

    @property
    def name(self) -> str:
        return f"slice-{self.number:02d}"

    @property
    def days(self) -> float:
        return (parse_utc(self.end_utc) - parse_utc(self.start_utc)).total_seconds() / DAY_S


def _format(moment: datetime, dates_only: bool) -> str:
    return moment.strftime("%Y-%m-%d") if dates_only else moment.strftime("%Y-%m-%dT%H:%M:%S")


def window_slices(problem, slice_days: float) -> list[Slice]:
    """The launch window of ``problem`` cut into spans of ``slice_days`` days."""
    if not (isinstance(slice_days, (int, float)) and math.isfinite(slice_days) and slice_days > 0):
        raise ProblemError("command line", "--slice-days", slice_days, "must be a number above 0")
    launch = problem.values["launch"]
    t_open, t_close = parse_utc(launch["window_open_utc"]), parse_utc(launch["window_close_utc"])
    width = timedelta(days=slice_days)
    count = max(1, math.ceil((t_close - t_open) / width - 1e-9))
    if count > MAX_SLICES:
        raise ProblemError(
            "command line",
            "--slice-days",
            slice_days,
            f"gives {count} slices of the launch window (at most {MAX_SLICES})",
        )
    bounds = [min(t_open + k * width, t_close) for k in range(count)] + [t_close]
    dates_only = all(b.hour == b.minute == b.second == b.microsecond == 0 for b in bounds)
    return [
        Slice(k + 1, _format(bounds[k], dates_only), _format(bounds[k + 1], dates_only))
        for k in range(count)
    ]


_SECTION = re.compile(r"^\s*\[\s*([A-Za-z0-9_.-]+)\s*\]\s*(#.*)?$")


def replace_key(text: str, source: str, section: str, key: str, value: str) -> str:
    """``text`` with the line ``key = ...`` of ``[section]`` set to ``key = "value"``."""
    lines = text.splitlines(keepends=True)
    current, hits = None, []
    pattern = re.compile(rf"^(\s*){re.escape(key)}\s*=")
    for i, line in enumerate(lines):
        m = _SECTION.match(line)
        if m:
            current = m.group(1)
        elif current == section and pattern.match(line):
            hits.append(i)
    if len(hits) != 1:
        raise ProblemError(
            source,
            f"[{section}] {key}",
            NO_VALUE,
            "a sweep needs this key on its own line in the [launch] table "
            "(to write the slice problem files)",
        )
    i = hits[0]
    indent = pattern.match(lines[i]).group(1)
    ending = "\n" if lines[i].endswith("\n") else ""
    lines[i] = f'{indent}{key} = "{value}"  # slice of the original window{ending}'
    return "".join(lines)


def slice_text(problem, sl: Slice, total: int) -> str:
    """The problem file of one slice (see module docstring)."""
    text = replace_key(problem.text, problem.source, "launch", "window_open_utc", sl.start_utc)
    text = replace_key(text, problem.source, "launch", "window_close_utc", sl.end_utc)
    header = (
        f"# Launch slice {sl.number} of {total} of {problem.source}, written by "
        f"leverage sweep: launch from {sl.start_utc} to {sl.end_utc} UTC.\n"
    )
    return header + text


def write_slice_problems(problem, slices: list[Slice], folder: Path) -> list:
    """Write ``folder/<slice name>.toml`` for every slice; return the loaded problems."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    out = []
    for sl in slices:
        path = folder / f"{sl.name}.toml"
        write_atomic(path, slice_text(problem, sl, len(slices)))
        out.append(load_problem(path))
    return out
