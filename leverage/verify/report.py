"""Verification of a finished design: independent re-fly, integrated arcs, point masses.

``verify_record(record, spk_path=None)`` builds a plain report dict from best.json:

1. ``ephemeris``: the design re-flown on a code path apart from the search's kernels
   (``leverage.verify.refly``: jplephem's own reading of the search's ephemeris, or of
   DE421 when the search used mean elements, plus the SPK kernel given; poliastro's
   unit-aware propagation, Lambert and flyby), every stated limit re-checked. This is
   the verdict: ``report["verdict"]`` says whether every limit holds there and which
   do not;
2. ``two_body``: each conic arc integrated numerically, Sun only (``verify.integrate``,
   scipy DOP853, rtol 1e-12), and the position/velocity mismatch at each event;
3. ``point_masses``: the loop flown with the Sun and the planets as point masses
   (``verify.nbody_check``; reported, not part of the verdict: ``leverage refine``
   converges a design in that model).

``render`` turns the report into text that says what was and was not checked;
``write`` puts verification.txt and verification.json in the result folder.
"""

import math
from pathlib import Path

from leverage.about import CAUTION
from leverage.astro import bodies
from leverage.astro.ephemerides import PackagedEphemeris, SpkEphemeris
from leverage.core.constants import DAY_S
from leverage.fileio import write_atomic, write_json
from leverage.record.arcs import design_arcs, event_states
from leverage.record.design import as_float, clean
from leverage.verify.integrate import METHOD, RTOL, two_body
from leverage.verify.nbody_check import check_point_masses
from leverage.verify.refly import refly

COVERS = [
    "the design re-flown apart from the search's compiled kernels: planet states read by "
    "jplephem from the ephemeris files, the launch asymptote (C3, DLA, RLA) kept, the coast "
    "to the DSM propagated and the DSM-to-flyby (and target) arcs re-solved by poliastro's "
    "unit-aware propagation and Lambert solver, the flyby turned by poliastro's flyby "
    "routine; every stated limit re-checked with those numbers (the verdict)",
    "the numerical accuracy of each conic arc: two-body integration (scipy solve_ivp "
    f"{METHOD}, rtol {RTOL:g}) against the Kepler propagation and Lambert solutions",
    "the pull of the Sun's true motion and of the eight planets as point masses on the "
    "loop from launch to the return flyby, with the DSM as an impulse, and the DSM that "
    "would restore the flyby point in that model",
]
DOES_NOT_COVER = [
    "the return flyby itself: the 'all planets' case stops where the conic enters the "
    "body's sphere of influence (patched conics leave the body's gravity out of the "
    "heliocentric legs; the departure hyperbola's plane, not part of the design, is "
    "assumed)",
    "the Moon and other satellites, asteroids, relativity, and the bodies' non-spherical "
    "gravity (J2 and higher) during the flyby",
    "finite burns, burn execution errors, navigation and targeting errors",
    "solar radiation pressure and other non-gravitational forces",
    "the leg after the flyby in the point-mass model (only conic accuracy is checked there)",
    "the launch itself (ascent, parking orbit, launch period) and flyby safety "
    "(atmosphere, ground track, planetary protection)",
]


def _two_body_checks(record) -> list:
    """Each conic arc integrated; mismatch at its end event (km, m/s)."""
    mu = bodies.GM_SUN_KM3_S2
    ev = event_states(record)
    rows = []
    for arc in design_arcs(record, n=2):
        t0, t1 = arc.start_s, arc.stop_s
        r_i, v_i = two_body(mu, t0, arc.r_km[0], arc.v_km_s[0], t1)
        if arc.key == "launch_dsm":
            end, r_ref, v_ref = "DSM", ev["dsm"]["r"], ev["dsm"]["v_before"]
        elif arc.key == "dsm_flyby":
            end, r_ref, v_ref = "flyby", ev["flyby"]["r"], ev["flyby"]["v_in"]
        elif arc.key == "flyby_arrival":
            end, r_ref = "arrival", ev["arrival"]["r"]
            v_ref = ev["arrival"].get("v", arc.v_km_s[-1])
        else:
            end, r_ref, v_ref = "end of outgoing span", arc.r_km[-1], arc.v_km_s[-1]
        rows.append(
            {
                "arc": arc.label,
                "end": end,
                "days": (t1 - t0) / DAY_S,
                "position_mismatch_km": float(math.dist(r_i, r_ref)),
                "velocity_mismatch_m_s": float(math.dist(v_i, v_ref) * 1e3),
            }
        )
    return rows


def verification_sources(record, spk_path=None) -> list:
    """The outside ephemerides a design is re-flown with: the search's own ephemeris read
    by jplephem (DE421 when the search used mean elements, DE423 past 2050), and the SPK
    file given."""
    search = record.get("ephemeris", {}).get("search", "")
    spk_used = record.get("ephemeris", {}).get("spk_file")
    sources = []
    if "DE423" in search:
        sources.append(PackagedEphemeris("de423"))
    elif spk_used:
        sources.append(SpkEphemeris(spk_used))
    else:
        t_last = max(as_float(e["epoch_tdb_s"]) for e in record["events"])
        sources.append(PackagedEphemeris("de421" if t_last < 1.6e9 else "de423"))
    if spk_path:
        sources.append(SpkEphemeris(spk_path))
    return sources


def verdict(ephemeris_rows) -> dict:
    """Whether every stated limit holds in every re-fly, and the ones that do not."""
    broken = []
    for row in ephemeris_rows:
        for lim in row.get("limits", []):
            if not lim["holds"]:
                broken.append(
                    {
                        "limit": lim["limit"],
                        "check": lim["check"],
                        "unit": lim["unit"],
                        "source": row["source"],
                    }
                )
        if row.get("problem"):
            broken.append(
                {
                    "limit": "re-fly",
                    "check": None,
                    "unit": "",
                    "source": row["source"],
                    "problem": row["problem"],
                }
            )
    return {
        "holds": not broken,
        "broken": broken,
        "model": "patched conics re-flown with " + ", ".join(r["source"] for r in ephemeris_rows),
    }


def attach(record, report) -> dict:
    """``record`` with the verification's verdict in ``record["verification"]``: holds,
    the model, the broken limits and each limit's margin there (the worst over the
    ephemerides re-flown). Returns the record."""
    worst = {}
    for row in report["ephemeris"]:
        for lim in row.get("limits", []):
            if lim["limit"] not in worst or lim["check"] < worst[lim["limit"]]["check"]:
                worst[lim["limit"]] = {
                    "limit": lim["limit"],
                    "check": clean(lim["check"]),
                    "unit": lim["unit"],
                    "holds": lim["holds"],
                }
    v = report["verdict"]
    record["verification"] = {
        "holds": v["holds"],
        "status": "done",
        "model": v["model"],
        "broken": [
            {k: (clean(x) if isinstance(x, float) else x) for k, x in b.items()}
            for b in v["broken"]
        ],
        "margins": list(worst.values()),
    }
    return record


def verify_record(record, spk_path=None) -> dict:
    """The verification report of a design record (see module docstring)."""
    sources = verification_sources(record, spk_path)
    try:
        ephemeris = []
        for source in sources:
            try:
                row = refly(record, source)
            except (ValueError, RuntimeError) as exc:  # no Lambert solution, and the like
                row = {"problem": f"cannot re-fly ({type(exc).__name__}: {exc})"}
            row["source"] = source.name
            ephemeris.append(row)
        report = {
            "caution": CAUTION,
            "problem": record["problem"]["name"],
            "body": record["problem"]["body"],
            "status": record.get("status", ""),
            "frame": "heliocentric ecliptic J2000 for every comparison",
            "ephemeris": ephemeris,
            "verdict": verdict(ephemeris),
            "two_body": {
                "method": f"scipy.integrate.solve_ivp {METHOD}",
                "rtol": RTOL,
                "arcs": _two_body_checks(record),
            },
            "point_masses": check_point_masses(record, sources[0]),
            "covers": COVERS,
            "does_not_cover": DOES_NOT_COVER,
        }
    finally:
        for source in sources:
            source.close()
    return report


# ------------------------------------------------------------------ text


def _num(value, digits=3):
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "n/a"
    return f"{value:,.{digits}f}"


def _pair_line(
    label, item, unit, scale=1.0, digits=3, change_unit=None, change_scale=1.0, change_digits=1
):
    change_unit = change_unit or unit
    change = f"{item['change'] * change_scale:+,.{change_digits}f} {change_unit}".rstrip()
    return (
        f"  {label:<34}{_num(item['design'] * scale, digits):>14} -> "
        f"{_num(item['check'] * scale, digits):>14} {unit:<9}(change {change})"
    )


_QUANTITY_LABELS = [
    ("c3", "launch C3", 3),
    ("dla", "launch DLA", 3),
    ("dsm", "DSM", 5),
    ("flyby_vinf_in", "flyby v-infinity in", 5),
    ("flyby_vinf_out", "flyby v-infinity out", 5),
    ("flyby_altitude", "flyby altitude", 1),
    ("turn_angle", "turn", 4),
    ("max_turn_angle", "largest turn at minimum altitude", 4),
    ("flyby_burn", "flyby periapsis burn", 5),
    ("arrival_vinf", "arrival v-infinity", 5),
    ("total_dv", "total dv", 5),
    ("outgoing_sma_au", "outgoing semi-major axis", 6),
    ("outgoing_eccentricity", "outgoing eccentricity", 6),
    ("outgoing_inclination_deg", "outgoing inclination", 5),
    ("outgoing_aphelion_au", "outgoing aphelion", 6),
]


def _ephemeris_lines(eph) -> list:
    lines = [f"Re-flown apart from the search's kernels, planets from {eph['source']}"]
    if eph.get("problem"):
        return lines + [f"  {eph['problem']}"]
    q = eph["quantities"]
    lines.append(
        f"  DSM point moved {_num(q['dsm_position_change_km']['check'], 4)} km, "
        f"flyby body moved {_num(q['body_position_change_at_flyby_km']['check'], 4)} km "
        "from the design's"
    )
    lines.append(f"  {'':<34}{'design':>16}    {'re-flown':>16}")
    for key, label, digits in _QUANTITY_LABELS:
        if key in q:
            item = q[key]
            lines.append(
                f"  {label:<34}{_num(item['design'], digits):>16} -> "
                f"{_num(item['check'], digits):>16} {item['unit']}"
            )
    lines.append("  stated limits (margin >= 0 holds; design margin asked in brackets)")
    for row in eph["limits"]:
        state = "holds" if row["holds"] else "BROKEN"
        asked = f"[{row['required_margin']:g}]" if row.get("required_margin") else ""
        lines.append(
            f"    {row['limit']:<26}{_num(row['design'], 6):>14} -> "
            f"{_num(row['check'], 6):>14} {row['unit']:<9}{asked:>7} {state}"
        )
    return lines


def _case_lines(title, case) -> list:
    if "skipped" in case:
        return [f"  {title}: not computed ({case['skipped']})"]
    lines = [f"  {title}: {case['from']} to {case['to']}"]
    if case.get("note"):
        lines.append(f"    ({case['note']})")
    if "soi_radius_km" in case:
        lines.append(
            f"    sphere of influence {_num(case['soi_radius_km'], 0)} km, entered "
            f"{_num(case['soi_entry_days_before_flyby'], 2)} days before the flyby "
            "on the conic"
        )
    lines += [
        f"    at the DSM   position differs by "
        f"{_num(case['dsm_position_difference_km'], 0):>12} km, velocity by "
        f"{_num(case['dsm_velocity_difference_m_s'], 2)} m/s",
        f"    at the end   position differs by "
        f"{_num(case['end_position_difference_km'], 0):>12} km, velocity by "
        f"{_num(case['end_velocity_difference_m_s'], 2)} m/s",
        f"    DSM to restore the end point: {_num(case['retargeted_dsm_km_s']['check'], 4)} km/s "
        f"(design {_num(case['retargeted_dsm_km_s']['design'], 4)}; magnitude "
        f"{case['retargeted_dsm_km_s']['change'] * 1e3:+,.1f} m/s, vector change "
        f"{_num(case['retargeted_dsm_vector_change_m_s'], 1)} m/s; end miss "
        f"{_num(case['retarget_end_miss_km'], 2)} km after {case['retarget_iterations']} "
        f"iterations{'' if case['retarget_converged'] else ', NOT converged'})",
        f"    flyby v-infinity then {_num(case['retargeted_flyby_vinf_km_s']['check'], 4)} km/s "
        f"(design {_num(case['retargeted_flyby_vinf_km_s']['design'], 4)}, change "
        f"{case['retargeted_flyby_vinf_km_s']['change'] * 1e3:+,.1f} m/s)",
    ]
    return lines


def record_body(report) -> str:
    return report["body"]


def verdict_line(report) -> str:
    """One line: does every stated limit hold in the verification, and if not which."""
    v = report["verdict"]
    if v["holds"]:
        return "holds in the verification: yes (every stated limit, " + v["model"] + ")"
    parts = []
    for b in v["broken"]:
        if b.get("problem"):
            parts.append(f"{b['problem']} ({b['source']})")
        else:
            parts.append(f"{b['limit']} margin {b['check']:.6g} {b['unit']}".rstrip())
    return "holds in the verification: NO: " + "; ".join(parts)


def render(report) -> str:
    """The text of verification.txt."""
    lines = [
        f"leverage verification: {report['problem']} ({report['status']})",
        f"  CAUTION: {report['caution']}",
        f"  {report['frame']}",
        "",
        verdict_line(report),
        "",
    ]
    for eph in report["ephemeris"]:
        lines += _ephemeris_lines(eph) + [""]
    tb = report["two_body"]
    lines.append(
        f"Conic arcs integrated numerically, Sun only ({tb['method']}, rtol {tb['rtol']:g})"
    )
    for row in tb["arcs"]:
        lines.append(
            f"  {row['arc']:<18} {row['days']:8.1f} days  mismatch at {row['end']}: "
            f"{row['position_mismatch_km']:.3g} km, "
            f"{row['velocity_mismatch_m_s']:.3g} m/s"
        )
    pm = report["point_masses"]
    lines += [
        "",
        f"Sun and planets as point masses ({', '.join(pm['bodies'])}; positions from "
        f"{pm['source']})",
        "  differences are from the patched-conic design; they are not errors of the integration",
    ]
    lines += _case_lines(f"without {record_body(report)}", pm["other_planets"])
    lines += _case_lines("all planets", pm["all_planets"])
    lines += ["", "This check covers:"] + [f"  - {item}" for item in report["covers"]]
    lines += ["It does not cover:"] + [f"  - {item}" for item in report["does_not_cover"]]
    lines += ["", f"CAUTION: {report['caution']}", ""]
    return "\n".join(lines)


def _json_safe(value):
    if isinstance(value, dict):
        return {k: _json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json_safe(v) for v in value]
    if isinstance(value, bool) or value is None or isinstance(value, (str, int)):
        return value
    return clean(value)


def write(folder, report) -> tuple[Path, Path]:
    """Write verification.txt and verification.json into ``folder``; return their paths."""
    folder = Path(folder)
    txt, js = folder / "verification.txt", folder / "verification.json"
    write_atomic(txt, render(report))
    write_json(js, _json_safe(report))
    return txt, js


def headline(report) -> str:
    """One line for the end of a run: the verdict and the biggest moves found."""
    parts = [verdict_line(report)]
    eph = report["ephemeris"][0]
    if "quantities" in eph:
        q = eph["quantities"]
        parts.append(
            f"re-flown DSM {q['dsm']['change'] * 1e3:+.4f} m/s, flyby v-inf "
            f"{q['flyby_vinf_in']['change'] * 1e3:+.4f} m/s"
        )
    pm = report["point_masses"]
    moved = []
    if "skipped" not in pm["other_planets"]:
        moved.append(
            f"{pm['other_planets']['end_position_difference_km']:,.0f} km from the "
            f"conic at the flyby epoch (without {record_body(report)})"
        )
    if "skipped" not in pm["all_planets"]:
        moved.append(
            f"{pm['all_planets']['end_position_difference_km']:,.0f} km at "
            "sphere-of-influence entry (all planets)"
        )
    if moved:
        parts.append("point masses put the spacecraft " + ", ".join(moved))
    return "verification: " + "; ".join(parts)
