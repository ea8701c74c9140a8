"""The files of a refinement: refined.json, summary.txt, states.oem, trajectory.png.

All four are made in memory and written together into ``RESULT_DIR/refined/`` by
``write_folder``: into a temporary sibling folder first, then renamed into place, so
an interruption or a crash never leaves a partial ``refined/`` (at worst the previous
one under a hidden ``.refined.old-*`` name, if the crash falls between the two
renames). Quantities carry their units as in best.json; event states are heliocentric
ecliptic J2000 (km, km/s), epochs TDB seconds past J2000 and UTC.
"""

import io
import json
import math
import os
import shutil
import tempfile
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from leverage.about import CAUTION, __version__
from leverage.astro import bodies, times
from leverage.astro.ephemerides import EQUATORIAL_TO_ECLIPTIC
from leverage.core.constants import AU_KM, DAY_S
from leverage.record.arcs import design_arcs
from leverage.record.design import clean
from leverage.refine import shooting
from leverage.refine.forces import BODY_NAMES, FORCE_MODEL, LEFT_OUT
from leverage.reports import oem
from leverage.reports.export import iso_epochs

OUTGOING_PLOT_DAYS = 365.0
SAMPLE_STEP_S = DAY_S
DENSE_STEP_S = 600.0  # near the Earth: 10-minute samples for 2 days
DENSE_SPAN_S = 2 * DAY_S

# Patched-conic margins of best.json that the refined limits correspond to.
MARGIN_NAMES = {
    "max_c3": "max_c3",
    "dla_band": "dla_band",
    "min_flyby_altitude": "min_flyby_altitude",
    "min_outgoing_vinf": "min_outgoing_vinf",
    "min_outgoing_inclination": "min_outgoing_inclination",
    "min_outgoing_aphelion": "min_outgoing_aphelion",
    "dsm_budget": "dsm_budget",
    "max_arrival_vinf": "max_arrival_vinf",
}
MARGIN_FACTOR = {"min_outgoing_aphelion": 1.0}


def _helio(de, t, r, v):
    """Barycentric ICRF -> heliocentric (ICRF axes) with DE421's Sun."""
    rs, vs = de.state("sun", t)
    return np.asarray(r) - rs, np.asarray(v) - vs


def _ecl(vec):
    return np.asarray(vec) @ EQUATORIAL_TO_ECLIPTIC.T


def _times(t0, t1, dense_start=False, dense_end=False):
    """Sample epochs from t0 to t1 (either direction): daily, 10-minute near an end."""
    sign = 1.0 if t1 >= t0 else -1.0
    span = abs(t1 - t0)
    offs = set(np.arange(0.0, span, SAMPLE_STEP_S))
    if dense_start:
        offs |= set(np.arange(0.0, min(DENSE_SPAN_S, span), DENSE_STEP_S))
    if dense_end:
        offs |= set(span - np.arange(0.0, min(DENSE_SPAN_S, span), DENSE_STEP_S))
    offs = np.array(sorted(o for o in offs if 0.0 <= o < span - 1.0) + [span])
    return t0 + sign * offs


def refined_arcs(refiner, best) -> list:
    """(key, label, t (n,), r (n,3), v (n,3), body_r (n,3)) of the refined trajectory,
    heliocentric ICRF axes, increasing epochs; body_r the flyby body (heliocentric)."""
    de, prop = refiner.de, refiner.prop
    ep, st = best.epochs, best.states
    k_body = BODY_NAMES.index(refiner.bname)
    legs = [
        (
            "launch_dsm",
            "departure periapsis to DSM",
            ep["launch"],
            st["launch"],
            ep["dsm"],
            True,
            False,
        ),
        (
            "dsm_flyby",
            "flyby periapsis back to DSM",
            ep["flyby"],
            st["periapsis_in"],
            ep["dsm"],
            True,
            False,
        ),
    ]
    if "arrival" in ep:
        legs.append(
            (
                "flyby_arrival",
                "flyby periapsis to arrival",
                ep["flyby"],
                st["periapsis_out"],
                ep["arrival"],
                True,
                False,
            )
        )
    else:
        legs.append(
            (
                "outgoing",
                "outgoing after the flyby periapsis",
                ep["flyby"],
                st["periapsis_out"],
                ep["flyby"] + OUTGOING_PLOT_DAYS * DAY_S,
                True,
                False,
            )
        )
    arcs = []
    for key, label, t0, (r0, v0), t1, d0, d1 in legs:
        ts = _times(t0, t1, d0, d1)
        _, _, rs, vs, bs = prop.propagate(t0, r0, v0, t1, samples=ts)
        rsun, vsun = de.states(ts)
        sun_r, sun_v = rsun[0].T, vsun[0].T
        order = np.argsort(ts)
        arcs.append(
            (
                key,
                label,
                ts[order],
                (rs - sun_r)[order],
                (vs - sun_v)[order],
                (bs[:, k_body] - bs[:, 0])[order],
            )
        )
    return arcs


def _event(name, t, **vectors):
    out = {"event": name, "epoch_tdb_s": clean(t), "utc": times.utc_iso(t)}
    for key, vec in vectors.items():
        out[key] = [clean(x) for x in vec]
    return out


def refined_record(refiner, best, missed, wall_s, cross_check, record) -> dict:
    """refined.json as a dict (see module docstring)."""
    de = refiner.de
    ep, st = best.epochs, best.states
    derived = record["derived"]
    quantities = {}
    for name, (value, unit) in best.quantities.items():
        item = {"value": clean(value), "unit": unit}
        if name in derived and derived[name].get("unit") == unit:
            item["patched_conic"] = derived[name]["value"]
        quantities[name] = item
    margins = {}
    ineq = dict(best.ineq)
    if "dla_band_low" in ineq:
        low, high = ineq.pop("dla_band_low"), ineq.pop("dla_band_high")
        ineq["dla_band"] = min(low, high)
    for name, (margin, unit, _) in ineq.items():
        conic = record.get("margins", {}).get(MARGIN_NAMES.get(name, name))
        # The refine's limits are the stated ones moved inward by the design margin (as
        # in the search): people read the margin from the stated limit, next to the
        # margin asked for, like best.json.
        asked = float((conic or {}).get("required_margin") or 0.0)
        item = {
            "margin": clean(margin + asked),
            "required_margin": asked,
            "unit": unit,
            "holds": bool(margin >= -shooting.LIMIT_TOL),
        }
        if conic is not None:
            item["patched_conic"] = conic["margin"]
        margins[name] = item
    conic_t = refiner.t_conic
    shifts = {k: {"value": (ep[k] - conic_t[k]) / DAY_S, "unit": "day"} for k in ep}
    events = []
    r, v = _helio(de, ep["launch"], *st["launch"])
    events.append(_event("launch", ep["launch"], position_km=_ecl(r), velocity_km_s=_ecl(v)))
    r, vb = _helio(de, ep["dsm"], *st["dsm_before"])
    _, va = _helio(de, ep["dsm"], *st["dsm_after"])
    events.append(
        _event(
            "dsm",
            ep["dsm"],
            position_km=_ecl(r),
            velocity_before_km_s=_ecl(vb),
            velocity_after_km_s=_ecl(va),
        )
    )
    r, vi = _helio(de, ep["flyby"], *st["periapsis_in"])
    _, vo = _helio(de, ep["flyby"], *st["periapsis_out"])
    rb, vbody = _helio(de, ep["flyby"], *de.state(refiner.bname, ep["flyby"]))
    events.append(
        _event(
            "flyby",
            ep["flyby"],
            position_km=_ecl(r),
            velocity_in_km_s=_ecl(vi),
            velocity_out_km_s=_ecl(vo),
            body_position_km=_ecl(rb),
            body_velocity_km_s=_ecl(vbody),
        )
    )
    if "arrival" in ep:
        r, v = _helio(de, ep["arrival"], *st["arrival"])
        rt, vt = _helio(de, ep["arrival"], *refiner.target_state(ep["arrival"]))
        events.append(
            _event(
                "arrival",
                ep["arrival"],
                position_km=_ecl(r),
                velocity_km_s=_ecl(v),
                target_velocity_km_s=_ecl(vt),
            )
        )
    else:
        t_o = ep["flyby"] + refiner.t_out_s
        r, v = _helio(de, t_o, *st["outgoing"])
        events.append(_event("outgoing_measure", t_o, position_km=_ecl(r), velocity_km_s=_ecl(v)))
    return {
        "caution": CAUTION + " The refined trajectory is preliminary too: it needs "
        "high-fidelity verification, planetary-protection and flyby-safety review.",
        "status": "converged" if missed is None else "not converged",
        "missed": missed,
        "problem": record.get("problem", {}),
        "method": {
            "unknowns": "launch epoch and v-infinity, DSM epoch and impulse, flyby periapsis "
            "epoch and state"
            + (", arrival epoch" if "arrival" in ep else "")
            + (", periapsis burn" if refiner.powered else ""),
            "segments": "departure periapsis -> DSM (forward), flyby periapsis -> DSM "
            "(backward), flyby periapsis -> "
            + (
                "arrival"
                if "arrival" in ep
                else f"{shooting.SOI_MULTIPLE:g} sphere-of-influence radii out"
            ),
            "solver": "scipy least_squares (trf) on the joins, then trust-constr on the "
            "least burns with joins and limits as constraints, then least_squares on the "
            "best point",
            "objective": "every burn after launch (total_dv)",
            "integrator": refiner.prop.name,
            "cross_check_integrator": cross_check.get("integrator"),
            "force_model": FORCE_MODEL,
            "left_out": LEFT_OUT,
            "parking_altitude_km": refiner.parking_altitude_km,
            "tolerances": {
                "join_position_km": shooting.POS_TOL_KM,
                "join_velocity_m_s": shooting.VEL_TOL_KM_S * 1e3,
                "limit_margin": shooting.LIMIT_TOL,
            },
        },
        "iterations": refiner.iterations,
        "optimisation_stopped": refiner.stop_reason,
        # True: feasible, but the iteration budget ended an optimisation pass.
        "stopped_at_iteration_limit": refiner.stopped_at_iteration_limit,
        "evaluations": refiner.evaluations,
        "wall_time": {"value": wall_s, "unit": "s"},
        "largest_constraint_error": {
            k: {"value": clean(val), "unit": u} for k, (val, u) in best.errors.items()
        },
        "derived": quantities,
        "margins": margins,
        "feasible": all(m["holds"] for m in margins.values()),
        "epoch_shifts": shifts,
        "cross_check": cross_check,
        "unknowns": {
            "names": refiner.names,
            "units": refiner.units,
            "values": [float(x) for x in best.z],
            "patched_conic_start": [float(x) for x in refiner.z0],
        },
        "events": events,
        "frame": "heliocentric ecliptic J2000 (DE421 Sun); epochs TDB seconds past J2000 and UTC",
        "leverage_version": __version__,
    }


def _fmt(value, unit, digits=4):
    if value is None:
        return "n/a"
    if isinstance(value, str):
        return value
    return f"{value:.{digits}f} {unit}".rstrip()


def render_summary(rec) -> str:
    """summary.txt: patched-conic and refined values side by side."""
    q, m = rec["derived"], rec["margins"]
    lines = [
        f"leverage refine: {rec['problem'].get('name', '')} ({rec['status']})",
        f"  CAUTION: {rec['caution']}",
        "",
    ]
    if rec["missed"]:
        lines += [f"NOT CONVERGED: {rec['missed']}", ""]
    meth = rec["method"]
    lines += [
        f"integrator   {meth['integrator']}",
        f"cross-check  {meth['cross_check_integrator']}",
        f"forces       {meth['force_model']}",
        f"left out     {meth['left_out']}",
        f"solver       {meth['solver']}",
        f"effort       {rec['iterations']} iterations, {rec['evaluations']} evaluations, "
        f"{rec['wall_time']['value']:.0f} s",
        f"stopped      {rec['optimisation_stopped']}",
        "",
    ]
    lines.append("largest constraint errors")
    for k, e in rec["largest_constraint_error"].items():
        lines.append(f"  {k.replace('_', ' '):28s} {e['value']:.3g} {e['unit']}")
    lines += ["", f"{'event':28s} {'refined (UTC)':22s} {'shift':>10s}"]
    ev = {e["event"]: e for e in rec["events"]}
    for k, s in rec["epoch_shifts"].items():
        lines.append(f"  {k:26s} {ev[k]['utc'] if k in ev else '':22s} {s['value']:+9.3f} d")
    lines += ["", f"{'quantity':28s} {'patched conic':>18s} {'refined':>18s}"]
    for name, item in q.items():
        conic = item.get("patched_conic")
        lines.append(
            f"  {name.replace('_', ' '):26s} {_fmt(conic, item['unit']):>18s} "
            f"{_fmt(item['value'], item['unit']):>18s}"
        )
    lines += [
        "",
        f"{'margin from the stated limit':28s} {'asked':>8s} {'patched conic':>18s} "
        f"{'refined':>18s}  (holds: at least the margin asked)",
    ]
    for name, item in m.items():
        lines.append(
            f"  {name.replace('_', ' '):26s} {item.get('required_margin', 0.0):>8g} "
            f"{_fmt(item.get('patched_conic'), item['unit']):>18s} "
            f"{_fmt(item['margin'], item['unit']):>18s}  "
            f"{'ok' if item['holds'] else 'MISSED'}"
        )
    cc = rec["cross_check"]
    if cc.get("segments"):
        lines += ["", f"cross-check ({cc['integrator']}): end-state differences"]
        for seg in cc["segments"]:
            lines.append(
                f"  {seg['segment']:40s} {seg['position_km']:.3g} km, {seg['velocity_m_s']:.3g} m/s"
            )
    lines += [
        "",
        "Outgoing v-infinity, aphelion and inclination are measured on the integrated "
        "trajectory where the conic hyperbola is 3 sphere-of-influence radii out "
        "(v-infinity from the body-relative energy).",
        "",
        f"CAUTION: {rec['caution']}",
        "",
    ]
    return "\n".join(lines)


def oem_text(rec, arcs) -> str:
    """CCSDS OEM (KVN) of the refined trajectory: one segment per arc, Sun-centred
    EME2000 (ICRF axes; the ~0.02 arcsec frame bias ignored), TDB."""
    created = datetime.now(timezone.utc)
    name = rec["problem"].get("name", "design")
    header = [
        ("CCSDS_OEM_VERS", "2.0"),
        ("COMMENT", f"leverage refine: n-body refined design of '{name}', status {rec['status']}"),
        ("COMMENT", rec["caution"]),
        ("COMMENT", f"Integrated: {rec['method']['integrator']}; {rec['method']['force_model']}."),
        ("CREATION_DATE", created.strftime("%Y-%m-%dT%H:%M:%S")),
        ("ORIGINATOR", f"leverage {__version__}"),
    ]
    segments = []
    for key, label, ts, rs, vs, _ in arcs:
        epochs = iso_epochs(ts, "tdb")
        meta = [
            ("OBJECT_NAME", f"{name} refined"),
            ("OBJECT_ID", f"LEVERAGE-{name}"),
            ("CENTER_NAME", "SUN"),
            ("REF_FRAME", "EME2000"),
            ("TIME_SYSTEM", "TDB"),
            ("START_TIME", epochs[0]),
            ("STOP_TIME", epochs[-1]),
        ]
        segments.append(
            oem.Segment(
                meta, epochs, np.hstack([rs, vs]), [f"{label}: integrated, {len(epochs)} states"]
            )
        )
    return oem.write(header, segments)


def plot_png(rec, record, arcs) -> bytes:
    """trajectory.png: both designs seen from ecliptic north, and the flyby close up."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    au = AU_KM
    fig = Figure(figsize=(12, 6), dpi=110)
    FigureCanvasAgg(fig)
    ax, ax2 = fig.add_subplot(1, 2, 1), fig.add_subplot(1, 2, 2)
    for k, arc in enumerate(design_arcs(record)):
        ax.plot(
            arc.r_km[:, 0] / au,
            arc.r_km[:, 1] / au,
            "--",
            color="black",
            lw=0.9,
            zorder=3,  # over the refined arcs, which it nearly covers
            label="patched conic" if k == 0 else None,
        )
    colours = ["tab:blue", "tab:orange", "tab:green"]
    for (key, label, ts, rs, vs, body), c in zip(arcs, colours):
        re = _ecl(rs)
        ax.plot(re[:, 0] / au, re[:, 1] / au, color=c, lw=1.3, label=f"refined: {label}")
        rel = _ecl(rs - body)
        near = np.linalg.norm(rel, axis=1) < 3.0e5
        ax2.plot(rel[near, 0] / 1e3, rel[near, 1] / 1e3, ".", ms=2, color=c, label=label)
    ev = {e["event"]: e for e in rec["events"]}
    for name in ("launch", "dsm", "flyby", "arrival"):
        if name in ev:
            p = np.array(ev[name]["position_km"]) / au
            ax.plot(p[0], p[1], "k^" if name != "dsm" else "r*", ms=7)
            ax.annotate(name, (p[0], p[1]), textcoords="offset points", xytext=(5, 5))
    ax.plot(0, 0, "o", color="gold", ms=9)
    ax.set_aspect("equal")
    ax.set_xlabel("x (au, ecliptic J2000)")
    ax.set_ylabel("y (au)")
    ax.set_title(
        f"{rec['problem'].get('name', '')}: patched conic vs n-body refined ({rec['status']})",
        fontsize=10,
    )
    ax.legend(fontsize=7, loc="lower left")
    planet = bodies.planet(record["problem"]["body"])
    circle = np.linspace(0, 2 * math.pi, 200)
    r_body = planet.equatorial_radius_km / 1e3
    ax2.plot(r_body * np.cos(circle), r_body * np.sin(circle), "k-", lw=1)
    ax2.set_aspect("equal")
    ax2.set_xlabel(f"x from {planet.name} (1000 km, ecliptic axes)")
    ax2.set_ylabel("y (1000 km)")
    ax2.set_title(
        f"within 300,000 km of {planet.name}: departure and return flyby (refined)",
        fontsize=10,
    )
    ax2.legend(fontsize=7)
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()


def write_folder(result_dir, files: dict) -> Path:
    """Write {name: bytes} as ``result_dir/refined/`` atomically (module docstring)."""
    result_dir = Path(result_dir)
    final = result_dir / "refined"
    tmp = Path(tempfile.mkdtemp(dir=result_dir, prefix=".refined.tmp-"))
    old = None
    try:
        for name, data in files.items():
            with open(tmp / name, "wb") as fh:
                fh.write(data)
                fh.flush()
                os.fsync(fh.fileno())
        os.chmod(tmp, 0o755)
        if final.exists():
            old = Path(tempfile.mkdtemp(dir=result_dir, prefix=".refined.old-"))
            os.rmdir(old)
            os.replace(final, old)
        os.replace(tmp, final)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        if old is not None and old.exists() and not final.exists():
            os.replace(old, final)
        raise
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)
    return final


def files(rec, record, arcs) -> dict:
    return {
        "refined.json": (json.dumps(rec, indent=2, allow_nan=False) + "\n").encode(),
        "summary.txt": render_summary(rec).encode(),
        "states.oem": oem_text(rec, arcs).encode(),
        "trajectory.png": plot_png(rec, record, arcs),
    }
