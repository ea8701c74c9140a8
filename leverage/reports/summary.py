"""The plain-text best-solution summary, made from a result record (best.json).

Everything printed comes from the record, so the summary and the JSON cannot
disagree (a test re-derives the summary's numbers from the JSON).
"""

import math

from leverage.about import CAUTION
from leverage.core.constants import DAY_S
from leverage.record import objective
from leverage.record.design import KNEE_MIN_DISTANCE, as_float


def fmt_number(value, digits=3, thousands=False):
    """A record value as text: 'n/a' for missing, 'unbounded' for +inf."""
    v = as_float(value) if not isinstance(value, str) else float(value)
    if math.isnan(v):
        return "n/a"
    if math.isinf(v):
        return "unbounded" if v > 0 else "-inf"
    return f"{v:,.{digits}f}" if thousands else f"{v:.{digits}f}"


_fmt = fmt_number


def _d(record, name, digits=3):
    item = record["derived"][name]
    unit = f" {item['unit']}" if item["unit"] else ""
    return f"{_fmt(item['value'], digits)}{unit}"


def timeline(record) -> list[str]:
    ev = {e["event"]: e for e in record["events"]}
    der = record["derived"]
    t0 = as_float(ev["launch"]["epoch_tdb_s"])

    def day(e):
        return (as_float(e["epoch_tdb_s"]) - t0) / DAY_S

    rows = [
        ("launch", ev["launch"], f"C3 {_d(record, 'c3')}, v-inf {_d(record, 'launch_vinf')}"),
        ("DSM", ev["dsm"], f"{_d(record, 'dsm', 4)}"),
        (
            "return flyby",
            ev["flyby"],
            f"v-inf {_d(record, 'flyby_vinf_in')}, altitude {_d(record, 'flyby_altitude', 0)}",
        ),
    ]
    if "arrival" in ev:
        rows.append(
            (
                "arrival",
                ev["arrival"],
                f"v-inf {_d(record, 'arrival_vinf')}" if "arrival_vinf" in der else "",
            )
        )
    lines = [f"  {'event':<14}{'date (UTC)':<22}{'day':>8}  key numbers"]
    for label, e, text in rows:
        lines.append(f"  {label:<14}{e['utc'][:19]:<22}{day(e):>8.1f}  {text}")
    return lines


def verification_state(record) -> str:
    """'yes', 'NO: ...' or 'not run' for the record's verification verdict."""
    v = record.get("verification") or {}
    if v.get("holds") is None:
        return v.get("status") or "not run yet"
    if v["holds"]:
        return "yes"
    broken = ", ".join(b["limit"] for b in v.get("broken", []))
    return f"NO ({broken})"


def model_lines(record) -> list[str]:
    """Whether the design holds in each model it was checked in, said separately."""
    search = record.get("ephemeris", {}).get("search", "")
    search_state = "yes" if record["feasible"] else "NO (see the limits below)"
    v = record.get("verification") or {}
    lines = [f"holds in the search model:  {search_state}  (patched conics, {search})"]
    line = f"holds in the verification: {verification_state(record)}"
    if v.get("model"):
        line += f"  ({v['model']})"
    return lines + [line]


def _limit_text(m) -> str:
    limit = m.get("limit")
    if limit is None:
        return "-"
    if isinstance(limit, list):
        return " .. ".join(
            "open" if x is None else (x if isinstance(x, str) else f"{x:g}") for x in limit
        )
    return f"{limit:g}"


def limit_lines(record) -> list[str]:
    """Each limit: stated value, margin asked for, margin in the search model and in the
    verification (>= the margin asked: holds)."""
    checked = {b["limit"]: b for b in (record.get("verification") or {}).get("margins", [])}
    lines = [
        "limits (margin from the stated limit; the search must keep the margin asked)",
        f"  {'limit':<26}{'stated':>16} {'asked':>8} {'search model':>14} "
        f"{'verification':>14}  unit",
    ]
    for name, m in record["margins"].items():
        state = "ok" if m["holds"] else "VIOLATED"
        check = checked.get(name)
        if check is None:
            verified = "-"
        else:
            verified = _fmt(check["check"], 4) + ("" if check["holds"] else "!")
        lines.append(
            f"  {name:<26}{_limit_text(m):>16} {m.get('required_margin', 0.0):>8g} "
            f"{_fmt(m['margin'], 4):>14} {verified:>14}  {m['unit']:<10} {state}"
        )
    if any(not c["holds"] for c in checked.values()):
        lines.append("  (! : the stated limit is broken in the verification)")
    return lines


def refined_line(refined) -> str:
    """One line on a result's n-body refinement (``refined/refined.json``), or how to
    make one."""
    if refined is None:
        return "refined   not yet (leverage refine RESULT_DIR converges it in an n-body model)"
    dsm = refined.get("derived", {}).get("dsm", {})
    before, after = dsm.get("patched_conic"), dsm.get("value")
    change = ""
    if isinstance(before, (int, float)) and isinstance(after, (int, float)):
        change = f"; DSM {before:.4f} -> {after:.4f} km/s ({(after - before) * 1e3:+.1f} m/s)"
    if refined.get("stopped_at_iteration_limit"):
        # feasible, but the optimiser was still moving when its budget ran out
        change += "; stopped at its iteration limit, not a proven optimum"
    return f"refined   {refined.get('status', '?')} in an n-body model{change}; see refined/"


def time_text(run: dict) -> str:
    """The run's times, each named for what it measures (record ``run``, seconds):
    ``wall_time_s`` the search and polish (the clock of convergence.csv's wall_time_s
    and of the progress line), ``whole_run_s`` the whole run (start-up and any first
    compile, search, polish, pictures, verification), ``compile_s`` the first compile."""
    text = f"search {_fmt(run.get('wall_time_s', 0.0), 1)} s (incl. polish)"
    if run.get("whole_run_s") is not None:
        text += f", whole run {_fmt(run['whole_run_s'], 1)} s incl. start-up"
        if run.get("compile_s"):
            text += f" (compiling the model {_fmt(run['compile_s'], 1)} s)"
        text += ", pictures and verification"
    return text


def objective_line(record) -> str:
    """ "objective total DSM 0.811 km/s", "objective delivered mass 814.5 kg (maximised)":
    each objective in its own unit and natural sign (``leverage.record.objective``)."""
    shown = objective.from_record(record)
    parts = []
    for s, v in zip(shown, record["objective"]):
        unit = f" {s.unit}" if s.unit else ""
        number = _fmt(s.value(as_float(v)), 3 if s.unit == "kg" else 6)
        parts.append(f"{s.name} {number}{unit}" + (" (maximised)" if s.maximised else ""))
    line = "objective " + ", ".join(parts)
    if record.get("feasible") is False:
        line += " (penalty included: no design met every limit)"
    return line


def _count(value, noun: str) -> str:
    """ "1 revolution", "0 revolutions", "2 revolutions"."""
    n = int(as_float(value))
    return f"{n} {noun}" if n == 1 else f"{n} {noun}s"


def render(record) -> str:
    """The summary text of a result record."""
    p = record["problem"]
    s = record["search"]
    lines = [
        f"leverage summary: {p['name']} ({record['status']})",
        f"  CAUTION: {CAUTION}",
        "",
        f"problem   {p['file']}  (sha256 {p['sha256'][:12]})",
    ]
    if p.get("description"):
        lines.append(f"          {p['description']}")
    lines += [
        f"goal      {p['goal']}, flyby body {p['body']}"
        + (f", target {p['target']}" if p.get("target") else "")
        + (f", launch vehicle {p['vehicle']}" if p.get("vehicle") else ""),
        f"search    {s['algorithm']}, {s['islands']} islands x {s['population']}, "
        f"{s['generations']} generations, seed {s['seed']}, polish {s['polish']}",
    ]
    sectors = s.get("epoch_sectors_deg") or []
    if len(sectors) > 1:
        lines.append(
            f"          in {len(sectors)} epochs, each starting afresh over one sector of "
            "launch in-plane angles: "
            + ", ".join(f"{lo:.1f}..{hi:.1f}" for lo, hi in sectors)
            + " deg"
        )
    run = record.get("run", {})
    if run:
        lines.append(f"effort    {run.get('evaluations', 0):,} evaluations in {time_text(run)}")
    front = record.get("front")
    if front:
        hv_unit = f" {front['hypervolume_unit']}" if front.get("hypervolume_unit") else ""
        lines.append(
            f"front     {front['members']} feasible non-dominated designs trading "
            f"{', '.join(front['objectives'])}; hypervolume {_fmt(front['hypervolume'], 6)}"
            f"{hv_unit} (reference {', '.join(_fmt(v, 3) for v in front['reference_point'])});"
            f" below: its knee point; all members in {front['file']}"
        )
        if as_float(front.get("knee_distance")) < KNEE_MIN_DISTANCE:
            lines.append(
                "          no member stands out as a knee (knee distance "
                f"{_fmt(front['knee_distance'], 4)} of the front's scaled span: it "
                "does not bulge toward the ideal point); choose from front.csv"
            )
    lines += [objective_line(record)] + model_lines(record) + ["", "timeline"] + timeline(record)
    lines += [
        "",
        "launch    "
        + ", ".join(
            [f"C3 {_d(record, 'c3')}", f"DLA {_d(record, 'dla', 2)}", f"RLA {_d(record, 'rla', 2)}"]
        ),
        "DSM       " + f"{_d(record, 'dsm', 4)}  (radial {_d(record, 'dsm_radial', 4)}, "
        f"along-track {_d(record, 'dsm_along_track', 4)}, normal {_d(record, 'dsm_normal', 4)})",
        "          "
        + f"Lambert arc: {_count(record['derived']['lambert_revolutions']['value'], 'revolution')}, "
        + ("low-path" if as_float(record["derived"]["lambert_low_path"]["value"]) else "high-path")
        + " root",
        "flyby     "
        + f"altitude {_d(record, 'flyby_altitude', 1)}, turn {_d(record, 'turn_angle', 2)}"
        f" (largest allowed {_d(record, 'max_turn_angle', 2)}), B-plane angle "
        f"{_d(record, 'bplane_angle', 2)}",
        "v-inf     "
        + f"launch {_d(record, 'launch_vinf')}, flyby in {_d(record, 'flyby_vinf_in')},"
        f" out {_d(record, 'flyby_vinf_out')}, gain {_d(record, 'vinf_gain')}",
        "leverage  " + f"{_d(record, 'leverage_ratio', 2)}",
        "outgoing  "
        + f"a {_d(record, 'outgoing_sma', 4)}, e {_d(record, 'outgoing_eccentricity', 4)}, "
        f"i {_d(record, 'outgoing_inclination', 3)}, perihelion {_d(record, 'outgoing_perihelion', 4)}, "
        f"aphelion {_d(record, 'outgoing_aphelion', 4)}",
    ]
    if p.get("target"):
        lines.append(
            "target    " + f"{p['target']}: arrival v-inf {_d(record, 'arrival_vinf')}, "
            f"flyby burn {_d(record, 'flyby_burn', 4)}, arrival burn "
            f"{_d(record, 'arrival_burn', 4)}, total dv {_d(record, 'total_dv', 4)}"
        )
    if p.get("vehicle"):
        lines.append(
            "mass      " + f"injected {_d(record, 'injected_mass', 1)} at C3 "
            f"{_d(record, 'c3')}, delivered {_d(record, 'delivered_mass', 1)} after "
            f"{_d(record, 'total_dv', 4)}"
        )
    lines += [""] + limit_lines(record)
    lines += ["", f"CAUTION: {CAUTION}", ""]
    return "\n".join(lines)
