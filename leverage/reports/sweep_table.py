"""The sweep table and the launch period, made from the run folders' best.json files.

One row per launch slice: its dates, how many of its seed runs are done, and the best
of them (a design meeting every limit beats one that does not; then the lower first
objective). The launch period is each stretch of consecutive slices whose best design
meets every limit (and, when the analyst gives one, has an objective at or below
``max_objective``): the dates over which the goal stays within budget, known to the
width of a slice.

Objectives are shown in their own unit and natural sign (``record.objective``; the
sweep's ``sweep.json`` holds ``objective_shown``): the ``best_objective`` column of
sweep.csv is the minimised value, as in convergence.csv, and ``objective_value`` beside
it the same in its unit (``objective_unit``). ``--max-objective`` is compared with
the minimised value; the text says what that means in the natural one.
"""

import csv
import io
import math

from leverage.about import CAUTION
from leverage.core.constants import DAY_S
from leverage.fileio import read_json
from leverage.record import objective
from leverage.record.design import as_float

COLUMNS = [
    "slice",
    "start_utc",
    "end_utc",
    "runs_done",
    "runs_planned",
    "best_objective",
    "objective_value",
    "objective_unit",
    "feasible",
    "launch_utc",
    "c3_km2_s2",
    "dla_deg",
    "dsm_km_s",
    "flyby_vinf_out_km_s",
    "flyby_altitude_km",
    "total_dv_km_s",
    "best_seed",
    "result_folder",
]

# table column -> derived quantity in best.json
KEY_NUMBERS = {
    "c3_km2_s2": "c3",
    "dla_deg": "dla",
    "dsm_km_s": "dsm",
    "flyby_vinf_out_km_s": "flyby_vinf_out",
    "flyby_altitude_km": "flyby_altitude",
    "total_dv_km_s": "total_dv",
}


def finished_record(folder, sha256: str, search: dict) -> dict | None:
    """best.json of a run folder if that run completed for this problem text and these
    search settings (``SearchSettings`` as a dict, seed included)."""
    path = folder / "best.json"
    if not path.is_file():
        return None
    try:
        record = read_json(path)
        ok = (
            record.get("status") == "complete"
            and record["problem"]["sha256"] == sha256
            and all(record["search"].get(k) == v for k, v in search.items())
        )
    except (ValueError, KeyError, TypeError, OSError):
        return None
    return record if ok else None


def _objective(record) -> float:
    value = as_float(record["objective"][0])
    return value if math.isfinite(value) else math.inf


def best_of(records: list) -> tuple:
    """(record, index) of the best run of a slice, or (None, None)."""
    if not records:
        return None, None
    index = min(
        range(len(records)), key=lambda i: (not records[i]["feasible"], _objective(records[i]))
    )
    return records[index], index


def slice_row(sl, planned: int, done: list, sweep_dir) -> dict:
    """A table row; ``done`` is [(seed, folder, record)] of the slice's finished runs."""
    row = {c: "" for c in COLUMNS}
    row.update(
        slice=sl.number,
        start_utc=sl.start_utc,
        end_utc=sl.end_utc,
        runs_done=len(done),
        runs_planned=planned,
    )
    record, i = best_of([r for _, _, r in done])
    if record is None:
        return row
    seed, folder, _ = done[i]
    launch = {e["event"]: e for e in record["events"]}["launch"]
    shown = objective.from_record(record)[0]
    row.update(
        best_objective=repr(_objective(record)),
        objective_value=repr(shown.value(_objective(record))),
        objective_unit=shown.unit,
        feasible=int(record["feasible"]),
        launch_utc=launch["utc"][:19].replace(" ", "T"),
        best_seed=seed,
        result_folder=str(folder.relative_to(sweep_dir)),
    )
    for column, name in KEY_NUMBERS.items():
        item = record["derived"].get(name)
        if item is not None and item["value"] is not None:
            row[column] = repr(as_float(item["value"]))
    return row


def within_budget(row: dict, max_objective: float | None) -> bool:
    if row["best_objective"] == "" or not int(row["feasible"]):
        return False
    return max_objective is None or float(row["best_objective"]) <= max_objective


def launch_periods(rows: list, max_objective: float | None) -> list:
    """[(first row, last row)] of each stretch of consecutive within-budget slices."""
    periods, start = [], None
    for k, row in enumerate(rows):
        if within_budget(row, max_objective):
            start = k if start is None else start
        elif start is not None:
            periods.append((rows[start], rows[k - 1]))
            start = None
    if start is not None:
        periods.append((rows[start], rows[-1]))
    return periods


def table_csv(rows: list) -> str:
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=COLUMNS, lineterminator="\n")
    writer.writeheader()
    writer.writerows(rows)
    return buf.getvalue()


def _num(text, digits):
    return "" if text == "" else f"{float(text):.{digits}f}"


def _days(a: str, b: str) -> float:
    from leverage.astro.times import parse_utc  # astropy: not for `leverage show`

    return (parse_utc(b) - parse_utc(a)).total_seconds() / DAY_S


def shown_of(meta: dict) -> objective.Shown:
    """How the sweep's objective reads (sweep.json ``objective_shown``; unnamed when an
    older sweep did not say)."""
    return objective.from_record({"objective_shown": meta.get("objective_shown")})[0]


def budget_text(shown: objective.Shown, max_objective: float) -> str:
    """--max-objective in the objective's own terms, e.g. "total DSM at most 1 km/s"."""
    unit = f" {shown.unit}" if shown.unit else ""
    bound = "at least" if shown.factor < 0 else "at most"
    return f"{shown.name} {bound} {shown.value(max_objective):g}{unit}"


def period_lines(rows: list, max_objective: float | None, slice_days: float, shown=None) -> list:
    shown = shown or objective.from_record({})[0]
    rule = "best design meets every limit" + (
        f" and {budget_text(shown, max_objective)} (--max-objective {max_objective:g})"
        if max_objective is not None
        else ""
    )
    periods = launch_periods(rows, max_objective)
    if not periods:
        return [f"launch period ({rule}): none among the finished slices"]
    lines = [f"launch period ({rule}):"]
    for first, last in periods:
        lines.append(
            f"  {first['start_utc'][:10]} to {last['end_utc'][:10]} "
            f"({_days(first['start_utc'], last['end_utc']):.0f} days, slices "
            f"{first['slice']}-{last['slice']})"
        )
    lines.append(
        f"  Ends known to the slice width ({slice_days:g} days). A slice counts when "
        "the best design found launching in it qualifies; the search is stochastic, "
        "so more seeds can only widen a period."
    )
    return lines


def render(meta: dict, rows: list, status: str, max_objective: float | None) -> str:
    """sweep.txt: heading, table, launch period, caution."""
    s = meta["search"]
    shown = shown_of(meta)
    unit = f", {shown.unit}" if shown.unit else ""
    better = "higher is better" if shown.maximised else "lower is better"
    done = sum(int(r["runs_done"]) for r in rows)
    planned = sum(int(r["runs_planned"]) for r in rows)
    lines = [
        f"leverage sweep: {meta['problem']['name']} ({status}, {done}/{planned} runs)",
        f"  CAUTION: {CAUTION}",
        "",
        f"problem   {meta['problem']['file']}  (sha256 {meta['problem']['sha256'][:12]})",
        f"window    {meta['window'][0]} to {meta['window'][1]} UTC in {len(rows)} slices "
        f"of {meta['slice_days']:g} days",
        f"search    {s['algorithm']}, {s['islands']} islands x {s['population']}, "
        f"{s['generations']} generations, seeds {', '.join(map(str, meta['seeds']))}",
        f"objective {shown.name}{unit} ({better})",
        "",
        f"  {'slice':>5}  {'from':<10}  {'to':<10}  {'runs':>5}  {'objective':>10}  "
        f"{'limits':<6}  {'launch (UTC)':<16}  {'C3 km2/s2':>9}  {'DSM km/s':>8}  "
        f"{'vinf out km/s':>13}  folder",
    ]
    for r in rows:
        limits = "" if r["feasible"] == "" else ("met" if int(r["feasible"]) else "NOT")
        lines.append(
            f"  {r['slice']:>5}  {r['start_utc'][:10]:<10}  {r['end_utc'][:10]:<10}  "
            f"{r['runs_done']:>2}/{r['runs_planned']:<2}  {_num(r['objective_value'], 4):>10}  "
            f"{limits:<6}  {r['launch_utc'][:16].replace('T', ' '):<16}  "
            f"{_num(r['c3_km2_s2'], 3):>9}  {_num(r['dsm_km_s'], 4):>8}  "
            f"{_num(r['flyby_vinf_out_km_s'], 3):>13}  {r['result_folder']}"
        )
    lines += [""] + period_lines(rows, max_objective, meta["slice_days"], shown)
    best = [r for r in rows if r["best_objective"] != ""]
    if best:
        top = min(best, key=lambda r: (not int(r["feasible"]), float(r["best_objective"])))
        lines.append(
            f"best overall: slice {top['slice']}, "
            f"{shown.text(float(top['best_objective']))}, launch {top['launch_utc'][:19]} UTC, "
            f"{top['result_folder']}"
        )
    lines += ["", f"CAUTION: {CAUTION}", ""]
    return "\n".join(lines)


def is_sweep_folder(folder) -> bool:
    """A folder written by ``leverage sweep`` (sweep.json, no best.json of its own)."""
    from pathlib import Path

    folder = Path(folder)
    return (folder / "sweep.json").is_file() and not (folder / "best.json").is_file()


def folder_text(folder) -> str:
    """sweep.txt of a sweep folder rendered again from its sweep.json and sweep.csv (so an
    older sweep reads in the objective's own unit too); a one-line ProblemError for a
    folder that is not a readable sweep."""
    from pathlib import Path

    from leverage.errors import NO_VALUE, ProblemError

    folder = Path(folder)
    try:
        meta = read_json(folder / "sweep.json")
        with open(folder / "sweep.csv", encoding="utf-8", newline="") as fh:
            rows = [dict(r) for r in csv.DictReader(fh)]
        for r in rows:
            for column in COLUMNS:
                r.setdefault(column, "")
            if r["objective_value"] == "" and r["best_objective"] != "":
                shown = shown_of(meta)
                r["objective_value"] = repr(shown.value(float(r["best_objective"])))
        done = sum(int(r["runs_done"] or 0) for r in rows)
        planned = sum(int(r["runs_planned"] or 0) for r in rows)
        status = "complete" if done == planned else "unfinished"
        return render(meta, rows, status, meta.get("max_objective"))
    except (OSError, ValueError, KeyError, TypeError) as exc:
        raise ProblemError(
            str(folder), "", NO_VALUE, f"not a readable sweep folder ({type(exc).__name__}: {exc})"
        ) from None
