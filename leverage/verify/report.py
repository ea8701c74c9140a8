"""Verification of a finished design: outside ephemeris, integrated arcs, point masses.

``verify_record(record, spk_path=None)`` builds a plain report dict from best.json:

1. ``ephemeris``: the return flyby re-evaluated with astropy's built-in planetary
   ephemeris, and with a JPL SPK kernel when one is given (``leverage.ephemeris_check``),
   plus the limits re-checked with the changed numbers;
2. ``two_body``: each conic arc integrated numerically, Sun only (``leverage.integrate``,
   scipy DOP853, rtol 1e-12), and the position/velocity mismatch at each event;
3. ``point_masses``: the loop flown with the Sun and the planets as point masses
   (``leverage.nbody_check``; the SPK kernel's positions when given, else astropy's).

``render`` turns the report into text that says what was and was not checked;
``write`` puts verification.txt and verification.json in the result folder.
"""
import math
from pathlib import Path

from leverage.about import CAUTION
from leverage.astro import bodies
from leverage.astro.ephemerides import BuiltinEphemeris, SpkEphemeris
from leverage.core.constants import DAY_S
from leverage.fileio import write_atomic, write_json
from leverage.record.arcs import design_arcs, event_states
from leverage.record.design import as_float, clean
from leverage.verify.ephemeris_check import check_with_ephemeris
from leverage.verify.integrate import METHOD, RTOL, two_body
from leverage.verify.nbody_check import check_point_masses

COVERS = [
    "the flyby body's position and velocity from an outside ephemeris instead of the "
    "search's mean elements, at launch and at the return flyby, with the DSM-to-flyby "
    "Lambert arc re-solved to the precise position and the flyby re-flown at the same "
    "altitude and B-plane angle",
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
        rows.append({"arc": arc.label, "end": end, "days": (t1 - t0) / DAY_S,
                     "position_mismatch_km": float(math.dist(r_i, r_ref)),
                     "velocity_mismatch_m_s": float(math.dist(v_i, v_ref) * 1e3)})
    return rows


def _change(item, key):
    entry = item.get(key)
    return entry["change"] if isinstance(entry, dict) else None


def limits_after(record, eph: dict) -> list:
    """Design limits re-checked with the outside-ephemeris numbers (margins, >= 0 holds)."""
    margins = record["margins"]
    outgoing = eph.get("outgoing") if isinstance(eph.get("outgoing"), dict) else {}
    shifts = {  # margin name -> change of the margin implied by the check
        "max_c3": (-_change(eph, "launch_c3_km2_s2")) if "launch_c3_km2_s2" in eph else None,
        "dsm_budget": (-_change(eph, "dsm_km_s")) if "dsm_km_s" in eph else None,
        "min_outgoing_vinf": _change(eph, "flyby_vinf_in_km_s"),
        "min_outgoing_inclination": _change(outgoing, "inclination_deg"),
        "min_outgoing_aphelion": _change(outgoing, "aphelion_au"),
    }
    rows = []
    for name, shift in shifts.items():
        if name in margins and shift is not None:
            design = as_float(margins[name]["margin"])
            rows.append({"limit": name, "unit": margins[name]["unit"], "design": design,
                         "check": design + shift, "holds": design + shift >= 0})
    if "max_turn" in margins and "turn_deg_same_altitude" in eph:
        check = eph["max_turn_deg"]["check"] - eph["turn_deg_same_altitude"]["check"]
        rows.append({"limit": "max_turn", "unit": "deg",
                     "design": as_float(margins["max_turn"]["margin"]), "check": check,
                     "holds": check >= 0})
    return rows


def verify_record(record, spk_path=None) -> dict:
    """The verification report of a design record (see module docstring)."""
    sources = [BuiltinEphemeris()]
    spk = SpkEphemeris(spk_path) if spk_path else None
    if spk is not None:
        sources.append(spk)
    try:
        ephemeris = []
        for source in sources:
            eph = check_with_ephemeris(record, source)
            eph["limits"] = limits_after(record, eph)
            ephemeris.append(eph)
        report = {
            "caution": CAUTION,
            "problem": record["problem"]["name"],
            "status": record.get("status", ""),
            "frame": "heliocentric ecliptic J2000 for every comparison",
            "ephemeris": ephemeris,
            "two_body": {"method": f"scipy.integrate.solve_ivp {METHOD}", "rtol": RTOL,
                         "arcs": _two_body_checks(record)},
            "point_masses": check_point_masses(record, sources[-1]),
            "covers": COVERS,
            "does_not_cover": DOES_NOT_COVER,
        }
    finally:
        if spk is not None:
            spk.close()
    return report


# ------------------------------------------------------------------ text

def _num(value, digits=3):
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "n/a"
    return f"{value:,.{digits}f}"


def _pair_line(label, item, unit, scale=1.0, digits=3, change_unit=None, change_scale=1.0,
               change_digits=1):
    change_unit = change_unit or unit
    change = f"{item['change'] * change_scale:+,.{change_digits}f} {change_unit}".rstrip()
    return (f"  {label:<34}{_num(item['design'] * scale, digits):>14} -> "
            f"{_num(item['check'] * scale, digits):>14} {unit:<9}(change {change})")


def _ephemeris_lines(eph) -> list:
    lines = [f"Outside ephemeris: {eph['source']}",
             f"  {eph['body']} position differs from the search's by "
             f"{_num(eph['body_position_offset_at_launch_km'], 0)} km at launch and "
             f"{_num(eph['body_position_offset_at_flyby_km'], 0)} km at the flyby; velocity by "
             f"{_num(eph['body_velocity_offset_at_launch_m_s'], 1)} and "
             f"{_num(eph['body_velocity_offset_at_flyby_m_s'], 1)} m/s"]
    if eph.get("note"):
        lines.append(f"  ({eph['note']})")
    lines += ["  launch state kept; DSM point kept; DSM-to-flyby Lambert arc re-solved to the "
              "precise position", f"  {'':<34}{'design':>14}    {'check':>14}"]
    lines.append(_pair_line("launch v-infinity", eph["launch_vinf_km_s"], "km/s", digits=4,
                            change_unit="m/s", change_scale=1e3))
    lines.append(_pair_line("launch C3", eph["launch_c3_km2_s2"], "km^2/s^2", digits=3,
                            change_digits=3))
    if not eph.get("lambert_solved", False):
        lines.append(f"  {eph.get('problem', 'Lambert arc not solved')}")
        return lines
    lines.append(_pair_line("DSM", eph["dsm_km_s"], "km/s", digits=4, change_unit="m/s",
                            change_scale=1e3))
    lines.append(f"  {'DSM vector change':<34}{_num(eph['dsm_vector_change_m_s'], 1):>14} m/s")
    lines.append(_pair_line("flyby v-infinity in", eph["flyby_vinf_in_km_s"], "km/s", digits=4,
                            change_unit="m/s", change_scale=1e3))
    lines.append(_pair_line("v-infinity gain", eph["vinf_gain_km_s"], "km/s", digits=4,
                            change_unit="m/s", change_scale=1e3))
    if not isinstance(eph.get("outgoing"), dict):
        lines.append(f"  outgoing: {eph.get('outgoing')}")
    else:
        lines.append(_pair_line("turn at the designed altitude", eph["turn_deg_same_altitude"],
                                "deg", digits=3, change_digits=3))
        lines.append(_pair_line("largest turn at minimum altitude", eph["max_turn_deg"], "deg",
                                digits=3, change_digits=3))
        lines.append(_pair_line("altitude for the designed turn",
                                eph["altitude_for_design_turn_km"], "km", digits=1))
        lines.append(f"  {'outgoing heliocentric velocity':<34}"
                     f"{_num(eph['outgoing_velocity_change_m_s'], 1):>14} m/s change")
        out = eph["outgoing"]
        lines.append(_pair_line("outgoing semi-major axis", out["sma_au"], "au", digits=5,
                                change_unit="km", change_scale=bodies.AU_KM, change_digits=0))
        lines.append(_pair_line("outgoing eccentricity", out["eccentricity"], "", digits=5,
                                change_digits=5))
        lines.append(_pair_line("outgoing inclination", out["inclination_deg"], "deg", digits=4,
                                change_digits=4))
        lines.append(_pair_line("outgoing aphelion", out["aphelion_au"], "au", digits=5,
                                change_unit="km", change_scale=bodies.AU_KM, change_digits=0))
    if eph.get("limits"):
        lines.append("  limits with these numbers (margin >= 0 holds)")
        for row in eph["limits"]:
            state = "ok" if row["holds"] else "VIOLATED"
            lines.append(f"    {row['limit']:<30}{_num(row['design'], 4):>12} -> "
                         f"{_num(row['check'], 4):>12} {row['unit']:<9} {state}")
    return lines


def _case_lines(title, case) -> list:
    if "skipped" in case:
        return [f"  {title}: not computed ({case['skipped']})"]
    lines = [f"  {title}: {case['from']} to {case['to']}"]
    if case.get("note"):
        lines.append(f"    ({case['note']})")
    if "soi_radius_km" in case:
        lines.append(f"    sphere of influence {_num(case['soi_radius_km'], 0)} km, entered "
                     f"{_num(case['soi_entry_days_before_flyby'], 2)} days before the flyby "
                     "on the conic")
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
    return report["ephemeris"][0]["body"]


def render(report) -> str:
    """The text of verification.txt."""
    lines = [f"leverage verification: {report['problem']} ({report['status']})",
             f"  CAUTION: {report['caution']}", f"  {report['frame']}", ""]
    for eph in report["ephemeris"]:
        lines += _ephemeris_lines(eph) + [""]
    tb = report["two_body"]
    lines.append(f"Conic arcs integrated numerically, Sun only ({tb['method']}, "
                 f"rtol {tb['rtol']:g})")
    for row in tb["arcs"]:
        lines.append(f"  {row['arc']:<18} {row['days']:8.1f} days  mismatch at {row['end']}: "
                     f"{row['position_mismatch_km']:.3g} km, "
                     f"{row['velocity_mismatch_m_s']:.3g} m/s")
    pm = report["point_masses"]
    lines += ["", f"Sun and planets as point masses ({', '.join(pm['bodies'])}; positions from "
                  f"{pm['source']})",
              "  differences are from the patched-conic design; they are not errors of the "
              "integration"]
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
    """One line for the end of a run: the biggest moves found."""
    eph = report["ephemeris"][0]
    pm = report["point_masses"]
    parts = []
    if "dsm_km_s" in eph:
        parts.append(f"outside ephemeris moves the DSM {eph['dsm_km_s']['change'] * 1e3:+.1f} m/s "
                     f"and flyby v-inf {eph['flyby_vinf_in_km_s']['change'] * 1e3:+.1f} m/s")
    broken = [row["limit"] for row in eph.get("limits", []) if not row["holds"]]
    if broken:
        parts.append(f"with it {', '.join(broken)} no longer holds")
    moved = []
    if "skipped" not in pm["other_planets"]:
        moved.append(f"{pm['other_planets']['end_position_difference_km']:,.0f} km from the "
                     f"conic at the flyby epoch (without {record_body(report)})")
    if "skipped" not in pm["all_planets"]:
        moved.append(f"{pm['all_planets']['end_position_difference_km']:,.0f} km at "
                     "sphere-of-influence entry (all planets)")
    if moved:
        parts.append("point masses put the spacecraft " + ", ".join(moved))
    return "verification: " + "; ".join(parts)
