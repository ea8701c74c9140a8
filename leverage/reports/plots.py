"""Pictures of a result folder (PNG, matplotlib's Agg renderer, no display needed).

* ``trajectory.png``: top view of the ecliptic J2000 plane with the Sun, the flyby
  body's orbit, the loop and what follows the flyby, the DSM and flyby marked with
  their dates; beside it a side view along the outgoing orbit's line of nodes, where
  the outgoing orbit's tilt out of the ecliptic shows as a slope.
* ``convergence.png``: best objective against evaluations, one line per island, from
  convergence.csv; a second panel of the hypervolume when the log has that column.
* ``front.png`` (only if front.csv exists): DSM against v-infinity gain, coloured by
  outgoing inclination, with the knee marked.
* ``launch_window.png`` (only if a sweep table exists): best objective against
  launch date.

Every function returns a ``Picture``: the file written and ``artists``, the
matplotlib objects that carry the plotted data (so tests can compare what was drawn
with the record). Figures are made with ``matplotlib.figure.Figure`` (no pyplot
state) under a small style of our own.
"""

import csv
import io
import math
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path

import matplotlib
import numpy as np
from matplotlib import dates as mdates
from matplotlib.figure import Figure

from leverage.astro import times
from leverage.core.constants import AU_KM, DAY_S
from leverage.errors import NO_VALUE, ProblemError
from leverage.fileio import write_bytes_atomic
from leverage.record import objective
from leverage.record.arcs import body_orbit, design_arcs, event_states, target_orbit
from leverage.record.design import KNEE_MIN_DISTANCE, as_float

DPI = 120
FOOTER = "Preliminary patched-conic design: verify it before any flight use."

STYLE = {
    "font.size": 9.5,
    "axes.titlesize": 10.5,
    "axes.labelsize": 9.5,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "grid.color": "#e4e4e4",
    "grid.linewidth": 0.6,
    "legend.frameon": False,
    "legend.fontsize": 8.5,
    "savefig.facecolor": "white",
}
COLOURS = {
    "launch_dsm": "#2b6cb0",
    "dsm_flyby": "#c05621",
    "outgoing": "#2f855a",
    "flyby_arrival": "#6b46c1",
    "body": "#9a9a9a",
    "target": "#b7791f",
    "sun": "#e0a800",
    "text": "#333333",
}
# Islands: colour, line style and marker all differ, so lines that coincide stay visible.
ISLAND_COLOURS = ["#2b6cb0", "#c05621", "#2f855a", "#6b46c1", "#b83280", "#4a5568"]
ISLAND_LINES = ["-", "--", ":", "-."]
ISLAND_MARKERS = ["o", "s", "^", "v", "D", "x"]
EVENT_MARKERS = {"launch": "^", "dsm": "D", "flyby": "o", "arrival": "s"}
EVENT_NAMES = {"launch": "launch", "dsm": "DSM", "flyby": "flyby", "arrival": "arrival"}


@dataclass
class Picture:
    """A written picture and the artists holding its plotted data."""

    path: Path
    artists: dict = field(default_factory=dict)


def _new_figure(width, height) -> Figure:
    with matplotlib.rc_context(STYLE):
        return Figure(figsize=(width, height), dpi=DPI)


def _save(fig: Figure, path: Path) -> Path:
    fig.text(0.01, 0.005, FOOTER, fontsize=7.5, color="#777777", ha="left", va="bottom")
    buf = io.BytesIO()  # drawn in memory, then written atomically: never a truncated PNG
    fig.savefig(buf, dpi=DPI, format=Path(path).suffix.lstrip(".") or "png")
    write_bytes_atomic(path, buf.getvalue())
    return path


def _utc_datetime(t_tdb_s: float) -> datetime:
    return times.from_tdb_seconds(t_tdb_s).utc.to_datetime()


# ------------------------------------------------------------------ trajectory


def side_axes(record):
    """Unit vectors (horizontal, vertical, looking) of the side view, ecliptic J2000.

    The viewer looks along the ecliptic direction at right angles to the outgoing
    orbit's line of nodes k x h, so the node line runs across the picture and the
    outgoing orbit shows as an ellipse rising above and dipping below the ecliptic
    by its full height. If the outgoing orbit lies in the ecliptic, the node line is
    taken along x.
    """
    ev = event_states(record)
    after = ev["flyby"]
    h = np.cross(after["r"], after["v_out"])
    node = np.cross([0.0, 0.0, 1.0], h)
    norm = np.linalg.norm(node)
    node = node / norm if norm > 1e-9 * np.linalg.norm(h) else np.array([1.0, 0.0, 0.0])
    looking = np.cross([0.0, 0.0, 1.0], node)
    return node, np.array([0.0, 0.0, 1.0]), looking


def _event_label(name, ev, record) -> str:
    date = ev["utc"][:10]
    der = record["derived"]
    extra = ""
    if name == "dsm" and "dsm" in der:
        extra = f"\n{as_float(der['dsm']['value']):.3f} km/s"
    elif name == "flyby" and "flyby_altitude" in der:
        extra = f"\naltitude {as_float(der['flyby_altitude']['value']):,.0f} km"
    return f"{EVENT_NAMES[name]} {date}{extra}"


def _label_place(r_au, away_from=None) -> dict:
    """Text offset (points) and alignment that push a label away from the Sun, or, given
    ``away_from`` (another labelled point, au), sideways along the orbit away from it:
    toward the Sun the label covered the Sun once the view was zoomed out to 5 au."""
    u = np.asarray(r_au[:2], float)
    u = u / (np.linalg.norm(u) or 1.0)
    if away_from is not None:
        side = np.array([-u[1], u[0]])
        u = side if side @ (np.asarray(r_au[:2]) - np.asarray(away_from[:2])) >= 0 else -side
    ha = "left" if u[0] > 0.35 else "right" if u[0] < -0.35 else "center"
    va = "bottom" if u[1] > 0.35 else "top" if u[1] < -0.35 else "center"
    return {"xytext": (14 * u[0], 14 * u[1]), "ha": ha, "va": va}


def trajectory(record, folder) -> Picture:
    """trajectory.png: top view and side view of the design (see module docstring)."""
    folder = Path(folder)
    arcs = design_arcs(record)
    ev = event_states(record)
    body = record["problem"]["body"]
    orbit = body_orbit(body, ev["launch"]["t"])
    fig = _new_figure(12.0, 6.4)
    grid = fig.add_gridspec(
        1, 2, width_ratios=[1.25, 1.0], left=0.06, right=0.98, bottom=0.17, top=0.87, wspace=0.22
    )
    top = fig.add_subplot(grid[0, 0])
    side = fig.add_subplot(grid[0, 1])
    artists = {}
    with matplotlib.rc_context(STYLE):
        (artists["body orbit"],) = top.plot(
            orbit.r_km[:, 0] / AU_KM,
            orbit.r_km[:, 1] / AU_KM,
            ls="--",
            lw=1.0,
            color=COLOURS["body"],
            label=f"{orbit.label} (mean elements)",
        )
        target = target_orbit(record)
        if target is not None:
            (artists["target orbit"],) = top.plot(
                target.r_km[:, 0] / AU_KM,
                target.r_km[:, 1] / AU_KM,
                ls=":",
                lw=1.2,
                color=COLOURS["target"],
                label=target.label,
            )
        artists["sun"] = top.scatter(
            [0.0], [0.0], s=110, color=COLOURS["sun"], zorder=3, edgecolor="#a07800", label="Sun"
        )
        aphelion = (record.get("margins") or {}).get("min_outgoing_aphelion") or {}
        if aphelion.get("limit") is not None:
            # The goal as a circle: the outgoing orbit must reach it (in the top view, where
            # the ecliptic-plane distance is within cos(i) of the true one).
            turn = np.linspace(0.0, 2.0 * np.pi, 361)
            radius = float(aphelion["limit"])
            (artists["aphelion goal"],) = top.plot(
                radius * np.cos(turn),
                radius * np.sin(turn),
                ls=":",
                lw=1.0,
                color=COLOURS["outgoing"],
                label=f"required aphelion {radius:g} au",
            )
        horizontal, vertical, _ = side_axes(record)
        for arc in arcs:
            colour = COLOURS.get(arc.key, "#444444")
            x, y = arc.r_km[:, 0] / AU_KM, arc.r_km[:, 1] / AU_KM
            (artists[arc.key],) = top.plot(x, y, lw=1.8, color=colour, label=arc.label)
            (artists[f"side {arc.key}"],) = side.plot(
                arc.r_km @ horizontal / AU_KM,
                arc.r_km @ vertical / AU_KM,
                lw=1.8,
                color=colour,
                label=arc.label,
            )
        (artists["side body orbit"],) = side.plot(
            orbit.r_km @ horizontal / AU_KM,
            orbit.r_km @ vertical / AU_KM,
            ls="--",
            lw=1.0,
            color=COLOURS["body"],
        )
        side.scatter([0.0], [0.0], s=60, color=COLOURS["sun"], zorder=3, edgecolor="#a07800")
        for name in ("launch", "dsm", "flyby", "arrival"):
            if name not in ev:
                continue
            r = ev[name]["r"] / AU_KM
            artists[f"event {name}"] = top.scatter(
                [r[0]],
                [r[1]],
                marker=EVENT_MARKERS[name],
                s=55,
                color="black",
                zorder=4,
                label=EVENT_NAMES[name],
            )
            top.annotate(
                _event_label(name, ev[name], record),
                (r[0], r[1]),
                **_label_place(r, ev["launch"]["r"] / AU_KM if name == "flyby" else None),
                fontsize=8.5,
                color=COLOURS["text"],
                textcoords="offset points",
                bbox=dict(boxstyle="round,pad=0.2", fc="white", ec="none", alpha=0.85),
            )
            side.scatter(
                [r @ horizontal],
                [r @ vertical],
                marker=EVENT_MARKERS[name],
                s=40,
                color="black",
                zorder=4,
            )
        after = next(a for a in arcs if a.key in ("outgoing", "flyby_arrival"))
        height = after.r_km @ vertical / AU_KM
        k = int(np.argmax(np.abs(height)))
        # The label reads away from the nearer side edge, so it stays inside the figure.
        spread = np.concatenate(
            [arc.r_km @ horizontal / AU_KM for arc in arcs] + [orbit.r_km @ horizontal / AU_KM]
        )
        at = after.r_km[k] @ horizontal / AU_KM
        rightward = at - spread.min() <= 0.5 * (spread.max() - spread.min())
        side.annotate(
            f"{abs(height[k]):.2f} au {'above' if height[k] >= 0 else 'below'} "
            f"the ecliptic\n{_utc_datetime(after.t_tdb_s[k]):%Y-%m-%d}",
            (at, height[k]),
            xytext=(6 if rightward else -6, 5 if height[k] >= 0 else -5),
            textcoords="offset points",
            ha="left" if rightward else "right",
            va="bottom" if height[k] >= 0 else "top",
            fontsize=8.5,
            color=COLOURS["text"],
        )
        side.scatter(
            [after.r_km[k] @ horizontal / AU_KM],
            [height[k]],
            s=18,
            color=COLOURS[after.key],
            zorder=4,
        )
        top.margins(0.1)
        side.margins(0.08, 0.15)
        top.set_aspect("equal", adjustable="datalim")
        top.set_xlabel("x, toward the J2000 equinox (au)")
        top.set_ylabel("y (au)")
        top.set_title("top view of the ecliptic J2000 plane")
        side.axhline(0.0, color="#bbbbbb", lw=0.8)
        side.set_xlabel("along the outgoing orbit's line of nodes (au)")
        side.set_ylabel("height above the ecliptic (au)")
        side.set_title("side view, across the outgoing line of nodes\n(vertical scale enlarged)")
        inc = record["derived"].get("outgoing_inclination")
        if inc is not None:
            # Across from the height label (top or bottom), so the two never meet.
            up = height[k] < 0
            side.text(
                0.02,
                0.97 if up else 0.03,
                f"outgoing inclination {as_float(inc['value']):.2f} deg",
                transform=side.transAxes,
                va="top" if up else "bottom",
                fontsize=8.5,
                color=COLOURS["text"],
            )
        handles, labels = top.get_legend_handles_labels()
        fig.legend(
            handles,
            labels,
            loc="lower center",
            ncol=(len(labels) + 1) // 2,
            bbox_to_anchor=(0.5, 0.02),
        )
        fig.suptitle(
            f"{record['problem']['name']}: designed trajectory about the Sun "
            f"({record['problem']['body']} loop)",
            fontsize=12,
        )
    return Picture(_save(fig, folder / "trajectory.png"), artists)


# ------------------------------------------------------------------ convergence


def read_table(path) -> list[dict]:
    """Rows of a CSV file as dicts of strings."""
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def _float(text) -> float:
    try:
        return float(text)
    except (TypeError, ValueError):
        return math.nan


def _log_rows(path) -> list[dict]:
    """convergence.csv's rows, checked: a one-line ProblemError for a file that is not a
    convergence log (no island/evaluations/best_objective columns, a row that is cut
    short, a number that is not finite)."""
    try:
        rows = read_table(path)
    except (csv.Error, UnicodeDecodeError, OSError) as exc:
        raise ProblemError(str(path), "", NO_VALUE, f"unreadable log ({exc})") from None
    for n, row in enumerate(rows, start=2):
        for column in ("island", "evaluations", "best_objective"):
            value = row.get(column)
            if (
                value is None
                or None in row
                or (column != "island" and not math.isfinite(_float(value)))
            ):
                raise ProblemError(
                    str(path),
                    f"line {n} {column}",
                    value,
                    "not a convergence log row (finite numbers in island, "
                    "evaluations, best_objective)",
                )
    return rows


def restarts(rows, island: str) -> list:
    """Generations after which every island started again from a new population: where
    ``island``'s evaluation count falls back (search.single, restart epochs)."""
    mine = [r for r in rows if r["island"] == island]
    return [_float(a["generations"]) for a, b in zip(mine, mine[1:]) if _restarted(a, b)]


def _restarted(row, after) -> bool:
    """True when log row ``after`` follows a restart of ``row``'s island."""
    return _float(after["evaluations"]) < _float(row["evaluations"])


def convergence(record, folder) -> Picture | None:
    """convergence.png from convergence.csv (None when the log is missing or empty)."""
    folder = Path(folder)
    path = folder / "convergence.csv"
    if not path.is_file():
        return None
    rows = _log_rows(path)
    if not rows:
        return None
    islands = sorted({r["island"] for r in rows}, key=lambda s: (len(s), s))
    # Generations never go back; an island's evaluation count starts again from its new
    # population at each restart epoch (README, convergence.csv). Older logs: evaluations.
    along = "generations" if "generations" in rows[0] else "evaluations"
    has_hv = "hypervolume" in rows[0] and any(math.isfinite(_float(r["hypervolume"])) for r in rows)
    fig = _new_figure(8.0, 6.4 if has_hv else 4.6)
    artists = {}
    shown = objective.from_record(record)[0]  # the first objective, as people read it
    with matplotlib.rc_context(STYLE):
        axes = fig.subplots(2 if has_hv else 1, 1, sharex=True, squeeze=False)[:, 0]
        for n, island in enumerate(islands):
            look = dict(
                color=ISLAND_COLOURS[n % len(ISLAND_COLOURS)],
                ls=ISLAND_LINES[n % len(ISLAND_LINES)],
                marker=ISLAND_MARKERS[n % len(ISLAND_MARKERS)],
                ms=4,
                lw=1.4,
            )
            mine = [r for r in rows if r["island"] == island]
            x = np.array([_float(r[along]) for r in mine])
            y = shown.value(np.array([_float(r["best_objective"]) for r in mine]))
            if along == "generations":
                # a gap at each restart: a new population (in the next sector of launch
                # directions) does not go on from the last one's best
                cut = [k for k in range(1, len(mine)) if _restarted(mine[k - 1], mine[k])]
                x, y = np.insert(x, cut, np.nan), np.insert(y, cut, np.nan)
            label = f"island {island}" if island.isdigit() else island
            (artists[f"island {island}"],) = axes[0].plot(x, y, label=label, **look)
            if has_hv:
                hv = np.array([_float(r["hypervolume"]) for r in mine])
                (artists[f"hypervolume {island}"],) = axes[1].plot(x, hv, **look)
        several = len(record.get("objective") or []) > 1
        final = as_float(record["objective"][0]) if record.get("objective") else math.nan
        if math.isfinite(final) and not several:
            axes[0].axhline(
                shown.value(final),
                color="#555555",
                lw=0.9,
                ls=":",
                label=f"after polish: {shown.text(final)}",
            )
        for k, x in enumerate(restarts(rows, islands[0]) if along == "generations" else []):
            for ax in axes:
                first = k == 0 and ax is axes[0]
                line = ax.axvline(
                    x,
                    color="#999999",
                    lw=0.8,
                    ls="--",
                    label="restart: new populations, next sector of launch directions"
                    if first
                    else None,
                )
                if first:
                    artists["restart"] = line
        axes[-1].set_xlim(left=0)
        per_island = min(sum(r["island"] == i for r in rows) for i in islands)
        if per_island < 3:
            axes[0].text(
                0.02,
                0.5,
                f"{per_island} log row(s) per island: the log gets one "
                "row per island after each migration interval of "
                f"{rows[0].get('generations', '?')} generations",
                transform=axes[0].transAxes,
                fontsize=8,
                color="#777777",
            )
        best = "best" if not several else "best first objective:"
        axes[0].set_ylabel(f"{best} {shown.label()}")
        axes[0].set_title(
            f"{record['problem']['name']}: search progress "
            f"(goal {record['problem']['goal']}, {record['search']['algorithm']})"
        )
        axes[0].legend()
        if has_hv:
            unit = record.get("front", {}).get("hypervolume_unit")
            axes[1].set_ylabel("hypervolume of the front" + (f", {unit}" if unit else ""))
        axes[-1].set_xlabel(
            "generations per island"
            if along == "generations"
            else "objective evaluations per island"
            + (" (front: all islands together)" if "front" in islands else "")
        )
        fig.subplots_adjust(
            left=0.12, right=0.97, bottom=0.12 if not has_hv else 0.09, top=0.92, hspace=0.12
        )
    return Picture(_save(fig, folder / "convergence.png"), artists)


# ------------------------------------------------------------------ trade front


def _column(names, *wanted, exclude=()):
    """Column named exactly like one of ``wanted`` (spaces as underscores), else the
    first whose name contains every word of one of them (tried in order)."""
    for words in wanted:
        if words.replace(" ", "_") in names:
            return words.replace(" ", "_")
    for words in wanted:
        for name in names:
            low = name.lower()
            if all(w in low for w in words.split()) and not any(e in low for e in exclude):
                return name
    return None


def knee_index(dsm, gain) -> int:
    """Index of the front point farthest from the line joining its two ends.

    Both axes scaled to [0, 1] first; a common knee definition for a two-objective
    front (common practice).
    """
    x = np.asarray(dsm, float)
    y = np.asarray(gain, float)
    xs = (x - x.min()) / (np.ptp(x) or 1.0)
    ys = (y - y.min()) / (np.ptp(y) or 1.0)
    a, b = np.argmin(xs), np.argmax(xs)
    p, q = np.array([xs[a], ys[a]]), np.array([xs[b], ys[b]])
    d = q - p
    length = np.hypot(*d) or 1.0
    dist = np.abs(d[0] * (ys - p[1]) - d[1] * (xs - p[0])) / length
    return int(np.argmax(dist))


def front(record, folder) -> Picture | None:
    """front.png from front.csv: DSM vs gain coloured by outgoing inclination."""
    folder = Path(folder)
    path = folder / "front.csv"
    if not path.is_file():
        return None
    rows = read_table(path)
    if not rows:
        return None
    names = list(rows[0])
    # front.csv as written by the front search: one row per member, every derived
    # quantity in a column named <quantity>_<unit>, and a 0/1 "knee" column.
    c_dsm = _column(names, "dsm km s", "dsm km", "total dv km s")
    c_gain = _column(names, "vinf gain km s", "gain km")
    c_inc = _column(names, "outgoing inclination deg", "inclination deg")
    if c_dsm is None or c_gain is None:
        return None
    dsm = np.array([_float(r[c_dsm]) for r in rows])
    gain = np.array([_float(r[c_gain]) for r in rows])
    ok = np.isfinite(dsm) & np.isfinite(gain)
    if not ok.any():
        return None
    c_knee = _column(names, "knee")
    if c_knee is not None:
        flags = [str(r[c_knee]).strip().lower() in ("1", "true", "yes") for r in rows]
        knee = flags.index(True) if any(flags) else knee_index(dsm[ok], gain[ok])
    else:
        knee = int(np.flatnonzero(ok)[knee_index(dsm[ok], gain[ok])])
    fig = _new_figure(7.6, 5.4)
    artists = {}
    with matplotlib.rc_context(STYLE):
        ax = fig.add_subplot(1, 1, 1)
        order = np.argsort(dsm[ok])
        ax.plot(dsm[ok][order], gain[ok][order], color="#cccccc", lw=1.0, zorder=1)
        if c_inc is not None:
            inc = np.array([_float(r[c_inc]) for r in rows])
            artists["front"] = ax.scatter(
                dsm[ok], gain[ok], c=inc[ok], cmap="viridis", s=28, zorder=2
            )
            bar = fig.colorbar(artists["front"], ax=ax)
            bar.set_label("outgoing inclination (deg)")
        else:
            artists["front"] = ax.scatter(dsm[ok], gain[ok], color="#2b6cb0", s=28, zorder=2)
        distance = as_float((record.get("front") or {}).get("knee_distance"))
        if distance < KNEE_MIN_DISTANCE:  # the summary says no knee stands out: none circled
            artists["no knee"] = ax.text(
                0.97,
                0.06,
                # three short lines: one long line reached the front's far end
                f"no knee stands out\n(knee distance {distance:.4f} of the scaled span);\n"
                "choose from front.csv",
                transform=ax.transAxes,
                ha="right",
                fontsize=8.5,
                color="#555555",
            )
        else:
            artists["knee"] = ax.scatter(
                [dsm[knee]],
                [gain[knee]],
                s=170,
                facecolor="none",
                edgecolor="#c53030",
                lw=1.8,
                zorder=3,
            )
            # Lower right is empty on any front of a minimised DSM against a maximised gain.
            ax.annotate(
                f"knee: DSM {dsm[knee]:.3f} km/s, gain {gain[knee]:.3f} km/s",
                (dsm[knee], gain[knee]),
                xytext=(0.97, 0.06),
                textcoords="axes fraction",
                ha="right",
                fontsize=8.5,
                color="#c53030",
                arrowprops=dict(arrowstyle="-", color="#c53030", lw=0.8, shrinkA=2, shrinkB=7),
            )
        ax.set_xlabel("DSM (km/s)" if "dsm" in c_dsm.lower() else f"{c_dsm} (km/s)")
        ax.set_ylabel("v-infinity gain (km/s)")
        ax.set_title(f"{record['problem']['name']}: trade front ({int(ok.sum())} designs)")
        fig.subplots_adjust(left=0.12, right=0.97, bottom=0.13, top=0.92)
    return Picture(_save(fig, folder / "front.png"), artists)


# ------------------------------------------------------------------ launch window


def sweep_table(folder) -> Path | None:
    """The launch-window sweep table of a folder: sweep.csv, else one sweep*.csv."""
    folder = Path(folder)
    if (folder / "sweep.csv").is_file():
        return folder / "sweep.csv"
    found = sorted(folder.glob("sweep*.csv")) + sorted(folder.glob("*window*.csv"))
    return found[0] if found else None


def _launch_dates(rows, names):
    """Launch datetimes (UTC) of sweep rows, from a date column or TDB days past J2000."""
    c_date = _column(
        names, "launch utc", "launch date", "window open utc", "open utc", "utc", "date"
    )
    if c_date is not None:
        out = []
        for r in rows:
            try:
                out.append(
                    datetime.fromisoformat(
                        str(r[c_date]).strip().replace("Z", "").replace(" ", "T")
                    )
                )
            except ValueError:
                out.append(None)
        return out, c_date
    c_day = _column(names, "launch day", "launch tdb")
    if c_day is not None:
        out = []
        for r in rows:
            day = _float(r[c_day])
            out.append(_utc_datetime(day * DAY_S) if math.isfinite(day) else None)
        return out, c_day
    return None, None


EDGE_DAYS = 1e-3  # a best launch this close to its slice's first or last date is "on the edge"


def _sweep_meta(folder: Path) -> dict:
    """sweep.json of a sweep folder ({} when absent or unreadable)."""
    try:
        from leverage.fileio import read_json

        meta = read_json(folder / "sweep.json")
        return meta if isinstance(meta, dict) else {}
    except (OSError, ValueError):
        return {}


def _sweep_shown(meta: dict, rows, folder: Path):
    """How the sweep's objective reads: sweep.json, else the first slice's best.json."""
    if meta.get("objective_shown"):
        return objective.from_record(meta)[0]
    for r in rows:
        sub = str(r.get("result_folder") or "").strip()
        if sub and (folder / sub / "best.json").is_file():
            try:
                from leverage.fileio import read_json

                return objective.from_record(read_json(folder / sub / "best.json"))[0]
            except (OSError, ValueError):
                break
    return objective.from_record({})[0]


def _on_edge(row) -> bool:
    """The slice's best launch lies on its first or last launch date."""
    try:
        launch = datetime.fromisoformat(str(row["launch_utc"]).replace(" ", "T"))
        start = datetime.fromisoformat(str(row["start_utc"]).replace(" ", "T"))
        end = datetime.fromisoformat(str(row["end_utc"]).replace(" ", "T"))
    except (KeyError, ValueError):
        return False
    near = min(abs((launch - start).total_seconds()), abs((end - launch).total_seconds()))
    return near <= EDGE_DAYS * DAY_S


def launch_window(record, folder) -> Picture | None:
    """launch_window.png: each slice's best objective (in its own unit and sign) against
    launch date. A slice is drawn as a bar over the launch dates it covers, at the best
    design found launching in it, with a dot at that design's launch date: nothing
    joins slices, so unsampled dates stay empty. Shaded: the launch period (slices whose
    best meets every limit and the --max-objective budget, when the sweep had one, drawn
    as a dashed line). A triangle flags a best launch on its slice's first or last date
    (the optimum may lie beyond the slice)."""
    from leverage.reports import sweep_table as sweep_report

    folder = Path(folder)
    path = sweep_table(folder)
    if path is None:
        return None
    rows = read_table(path)
    if not rows:
        return None
    names = list(rows[0])
    dates, c_date = _launch_dates(rows, names)
    c_obj = _column(names, "best objective", "objective")
    if dates is None or c_obj is None:
        return None
    c_feas = _column(names, "feasible")
    keep = [
        i for i, d in enumerate(dates) if d is not None and math.isfinite(_float(rows[i][c_obj]))
    ]
    if not keep:
        return None
    meta = _sweep_meta(folder)
    shown = _sweep_shown(meta, [rows[i] for i in keep], folder)
    max_objective = meta.get("max_objective")
    x = [dates[i] for i in keep]
    y = np.array([shown.value(_float(rows[i][c_obj])) for i in keep])
    feasible = np.array(
        [
            str(rows[i][c_feas]).strip().lower() in ("1", "true", "yes") if c_feas else True
            for i in keep
        ]
    )
    spans = "start_utc" in names and "end_utc" in names
    fig = _new_figure(8.4, 4.8)
    artists = {}
    with matplotlib.rc_context(STYLE):
        ax = fig.add_subplot(1, 1, 1)
        if spans:
            periods = sweep_report.launch_periods(rows, max_objective)
            for k, (first, last) in enumerate(periods):
                artists.setdefault("period", []).append(
                    ax.axvspan(
                        datetime.fromisoformat(first["start_utc"]),
                        datetime.fromisoformat(last["end_utc"]),
                        color="#c6f6d5",
                        alpha=0.7,
                        zorder=0,
                        label="launch period" if k == 0 else None,
                    )
                )
            bars = []
            for n, i in enumerate(keep):
                start = datetime.fromisoformat(rows[i]["start_utc"])
                end = datetime.fromisoformat(rows[i]["end_utc"])
                bars.append(
                    ax.plot(
                        [start, end],
                        [y[n], y[n]],
                        color="#2b6cb0",
                        lw=2.2,
                        solid_capstyle="butt",
                        label="slice's launch dates" if n == 0 else None,
                    )[0]
                )
            artists["slices"] = bars
        (artists["scan"],) = ax.plot(
            x,
            y,
            linestyle="none",
            color="#2b6cb0",
            marker="o",
            ms=4,
            label="best design launching in the slice",
        )
        if c_feas and (~feasible).any():
            bad = [xi for xi, f in zip(x, feasible) if not f]
            artists["infeasible"] = ax.scatter(
                bad,
                y[~feasible],
                s=50,
                facecolor="white",
                edgecolor="#c53030",
                zorder=3,
                label="no design met every limit",
            )
        edge = [n for n, i in enumerate(keep) if spans and _on_edge(rows[i])]
        if edge:
            artists["edge"] = ax.scatter(
                [x[n] for n in edge],
                y[edge],
                marker="^",
                s=70,
                facecolor="none",
                edgecolor="#dd6b20",
                lw=1.4,
                zorder=5,
                label="best launch on its slice's edge",
            )
        score = np.where(feasible, -y if shown.maximised else y, np.inf)
        if not feasible.any():
            score = -y if shown.maximised else y
        best = int(np.argmin(score))
        on_edge = best in edge
        artists["best"] = ax.scatter(
            [x[best]],
            [y[best]],
            s=140,
            facecolor="none",
            edgecolor="black",
            lw=1.4,
            zorder=4,
            label=f"best: {x[best]:%Y-%m-%d}" + (" (on its slice's edge)" if on_edge else ""),
        )
        if max_objective is not None and math.isfinite(float(max_objective)):
            artists["budget"] = ax.axhline(
                shown.value(float(max_objective)),
                color="#4a5568",
                ls="--",
                lw=1.0,
                label=f"--max-objective: {sweep_report.budget_text(shown, float(max_objective))}",
            )
        locator = mdates.AutoDateLocator()
        ax.xaxis.set_major_locator(locator)
        ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator))
        ax.set_xlabel("launch date (UTC)")
        ax.set_ylabel(shown.label())
        name = (meta.get("problem") or record.get("problem") or {}).get("name", "")
        ax.set_title(f"{name}: best design per launch slice ({path.name})")
        # Below the axes: inside, it hid slices' bars wherever it went.
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.13), ncol=3, fontsize="small")
        fig.subplots_adjust(left=0.11, right=0.97, bottom=0.28, top=0.93)
    return Picture(_save(fig, folder / "launch_window.png"), artists)


def all_pictures(record, folder) -> list[Picture]:
    """Every picture this folder has data for."""
    out = [trajectory(record, folder)]
    for make in (convergence, front, launch_window):
        pic = make(record, folder)
        if pic is not None:
            out.append(pic)
    return out
