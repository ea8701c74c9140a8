"""Re-evaluate a design's return flyby with an outside planetary ephemeris.

The search places the flyby body by Standish's mean elements. Here the body's
state comes from a precise source (``leverage.precise_ephemeris``); the launch leg
and the DSM point are kept as designed, and:

1. the launch v-infinity is recomputed against the precise body velocity;
2. the DSM-to-flyby Lambert arc (same revolutions and root; Izzo 2015 through
   ``leverage.core.lambert``) is re-solved from the designed DSM point to the precise
   body position at the designed flyby epoch, giving a new DSM and arrival v-infinity;
3. the flyby is re-flown with the designed periapsis altitude and B-plane angle
   (unpowered, ``leverage.core.flyby``), giving a new turn and outgoing orbit; the
   altitude that would give the designed turn at the new v-infinity is also reported.

Frame: heliocentric ecliptic J2000 (km, km/s). Numbers come back as a plain dict of
{"design", "check", "change"} entries with the unit in each key.
"""
import math

import numpy as np

from leverage.astro import bodies
from leverage.astro.ephemerides import heliocentric_ecliptic
from leverage.core.constants import AU_KM
from leverage.core.ephemeris import body_state
from leverage.core.flyby import max_turn, outgoing_vinf, periapsis_for_turn, turn_angle
from leverage.core.kepler import elements_from_state
from leverage.core.lambert import lambert
from leverage.record.arcs import event_states
from leverage.record.design import as_float

_POLE = np.array([0.0, 0.0, 1.0])  # B-plane reference pole of the model (ecliptic north)


def _derived(record, name):
    item = record["derived"].get(name)
    return math.nan if item is None else as_float(item["value"])


def _pair(design, check, scale=1.0):
    """{"design", "check", "change"} with values multiplied by ``scale``."""
    d, c = float(design) * scale, float(check) * scale
    return {"design": d, "check": c, "change": c - d}


def _min_altitude_km(record) -> float:
    alt = _derived(record, "flyby_altitude")
    margin = record["margins"].get("min_flyby_altitude")
    if margin is not None:
        return alt - as_float(margin["margin"])
    return bodies.planet(record["problem"]["body"]).default_min_flyby_altitude_km


def _outgoing(mu_sun, r, v):
    a, ecc, inc, *_ = elements_from_state(mu_sun, r, v)
    aphelion = a * (1.0 + ecc) if ecc < 1.0 else math.inf
    return {"sma_au": a / AU_KM, "eccentricity": ecc, "inclination_deg": math.degrees(inc),
            "aphelion_au": aphelion / AU_KM}


def check_with_ephemeris(record, source) -> dict:
    """Re-evaluate ``record`` with the body states of ``source`` (see module doc)."""
    body = bodies.planet(record["problem"]["body"])
    mu_sun = bodies.GM_SUN_KM3_S2
    ev = event_states(record)
    launch, dsm, flyby = ev["launch"], ev["dsm"], ev["flyby"]
    name = body.name.lower()
    r_l, v_l = (a[0] for a in heliocentric_ecliptic(source, name, launch["t"]))
    r_f, v_f = (a[0] for a in heliocentric_ecliptic(source, name, flyby["t"]))
    eph = body.ephemeris_array()
    rm_l, vm_l = body_state(eph, launch["t"])
    out = {"source": source.name, "body": body.name,
           "body_position_offset_at_launch_km": float(np.linalg.norm(r_l - rm_l)),
           "body_velocity_offset_at_launch_m_s": float(np.linalg.norm(v_l - vm_l) * 1e3),
           "body_position_offset_at_flyby_km": float(np.linalg.norm(r_f - flyby["r"])),
           "body_velocity_offset_at_flyby_m_s":
               float(np.linalg.norm(v_f - flyby["v_body"]) * 1e3)}
    if name == "earth":
        out["note"] = ("the search's Earth row (Standish) is the Earth-Moon barycentre; the "
                       "check uses the geocentre, where the flyby happens")
    vinf_launch = float(np.linalg.norm(launch["v"] - v_l))
    out["launch_vinf_km_s"] = _pair(_derived(record, "launch_vinf"), vinf_launch)
    out["launch_c3_km2_s2"] = _pair(_derived(record, "c3"), vinf_launch ** 2)

    revs = int(round(_derived(record, "lambert_revolutions")))
    low = bool(_derived(record, "lambert_low_path"))
    v1, v2, ok = lambert(mu_sun, dsm["r"], r_f, flyby["t"] - dsm["t"], revs, True, low)
    out["lambert_solved"] = bool(ok)
    if not ok:
        out["problem"] = "the DSM-to-flyby Lambert arc has no solution to the precise position"
        return out
    dsm_vec = v1 - dsm["v_before"]
    out["dsm_km_s"] = _pair(_derived(record, "dsm"), np.linalg.norm(dsm_vec))
    out["dsm_vector_change_m_s"] = float(
        np.linalg.norm(dsm_vec - (dsm["v_after"] - dsm["v_before"])) * 1e3)
    vinf_in = v2 - v_f
    speed = float(np.linalg.norm(vinf_in))
    out["flyby_vinf_in_km_s"] = _pair(_derived(record, "flyby_vinf_in"), speed)
    out["vinf_gain_km_s"] = _pair(_derived(record, "vinf_gain"), speed - vinf_launch)
    if "arrival" in ev:
        # With a target leg the flyby geometry follows from that leg, which this
        # check does not re-solve (the target's precise position is not used).
        out["outgoing"] = "not re-flown: the design has a target leg"
        return out

    alt = _derived(record, "flyby_altitude")
    rp = body.equatorial_radius_km + alt
    turn = turn_angle(body.gm_km3_s2, speed, rp)
    theta = math.radians(_derived(record, "bplane_angle"))
    vinf_out = outgoing_vinf(vinf_in, turn, theta, _POLE)
    v_out = v_f + vinf_out
    out["turn_deg_same_altitude"] = _pair(_derived(record, "turn_angle"), math.degrees(turn))
    min_alt = _min_altitude_km(record)
    turn_lim = max_turn(body.gm_km3_s2, speed, body.equatorial_radius_km + min_alt)
    out["max_turn_deg"] = _pair(_derived(record, "max_turn_angle"), math.degrees(turn_lim))
    design_turn = math.radians(_derived(record, "turn_angle"))
    alt_same_turn = periapsis_for_turn(body.gm_km3_s2, speed, design_turn) \
        - body.equatorial_radius_km
    out["altitude_for_design_turn_km"] = _pair(alt, alt_same_turn)
    out["outgoing_velocity_change_m_s"] = float(np.linalg.norm(v_out - flyby["v_out"]) * 1e3)
    design_out = _outgoing(mu_sun, flyby["r"], flyby["v_out"])
    check_out = _outgoing(mu_sun, r_f, v_out)
    out["outgoing"] = {key: _pair(design_out[key], check_out[key]) for key in design_out}
    return out
