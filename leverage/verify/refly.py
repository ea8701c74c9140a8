"""Re-fly a design independently of the search's kernels and re-check every stated limit.

The design is handed over as an analyst would hand it on: the launch epoch and launch
asymptote (C3, DLA, RLA), the DSM epoch, the flyby epoch, periapsis altitude and
B-plane angle (or, with a target, the arrival epoch). Everything else is recomputed
here on a separate code path, so that a bug in ``leverage.core`` cannot hide:

- planet states from an outside ephemeris (``leverage.astro.ephemerides``: jplephem's
  own readers of the DE packages or an SPK file, or astropy's built-in model), never the
  search's compiled Chebyshev tables;
- the launch-to-DSM coast propagated by poliastro's unit-aware ``Orbit.propagate``
  (its default propagator, Farnocchia 2013), not ``core.kepler``;
- the DSM-to-flyby arc (and a target leg) re-solved by poliastro's unit-aware Lambert
  solver (``poliastro.iod.izzo.lambert``, Izzo 2015) to the outside ephemeris's planet
  positions, not ``core.lambert``;
- the unpowered flyby turned by poliastro's ``threebody.flybys.compute_flyby`` (its T, R
  B-plane axes are ours: T = S x ecliptic north); a flyby joining a target leg is sized
  with the powered-flyby relation solved here with scipy's brentq;
- the outgoing heliocentric orbit from poliastro's ``Orbit.from_vectors`` elements.

Limits are the stated ones (``best.json`` margins' ``limit``), not the tightened ones the
search used: a design margin exists to absorb exactly these differences. Frame:
heliocentric ecliptic J2000, km, km/s; epochs TDB seconds past J2000.
"""

import math

import numpy as np

from leverage.astro import bodies
from leverage.astro.ephemerides import equatorial_to_ecliptic, heliocentric_ecliptic
from leverage.astro.poliastro_cache import cache_poliastro_kernels
from leverage.core.constants import AU_KM
from leverage.record.arcs import event_states
from leverage.record.design import as_float


def _poliastro():
    """poliastro's unit-aware layer and a Sun with the project's GM (DE440 value in
    ``bodies``; poliastro's own Sun differs by 2e-10, about 0.1 km a year)."""
    import astropy.units as u
    from poliastro.bodies import Body

    sun = Body(None, bodies.GM_SUN_KM3_S2 * u.km**3 / u.s**2, "Sun (leverage GM)")
    return u, sun


def _derived(record, name) -> float:
    item = record["derived"].get(name)
    return math.nan if item is None else as_float(item["value"])


def launch_vinf_vector(c3, dla_deg, rla_deg) -> np.ndarray:
    """Launch v-infinity (km/s, ecliptic J2000) from the launch asymptote (EME2000 DLA/RLA),
    the standard hand-off of a departure: |v| = sqrt(C3)."""
    d, a = math.radians(dla_deg), math.radians(rla_deg)
    eq = math.sqrt(c3) * np.array(
        [math.cos(d) * math.cos(a), math.cos(d) * math.sin(a), math.sin(d)]
    )
    return equatorial_to_ecliptic(eq[None, :])[0]


def _propagate(r, v, tof_s):
    u, sun = _poliastro()
    from poliastro.twobody import Orbit

    orbit = Orbit.from_vectors(sun, r * u.km, v * u.km / u.s)
    later = orbit.propagate(tof_s * u.s)
    r1, v1 = later.rv()
    return r1.to_value(u.km), v1.to_value(u.km / u.s)


def _lambert(r0, r1, tof_s, revs=0, low_path=True):
    u, sun = _poliastro()
    from poliastro.iod import izzo

    v0, v1 = izzo.lambert(
        sun.k, r0 * u.km, r1 * u.km, tof_s * u.s, M=revs, prograde=True, lowpath=low_path
    )
    return v0.to_value(u.km / u.s), v1.to_value(u.km / u.s)


def _elements(r, v) -> dict:
    u, sun = _poliastro()
    from poliastro.twobody import Orbit

    orbit = Orbit.from_vectors(sun, r * u.km, v * u.km / u.s)
    a = orbit.a.to_value(u.km)
    ecc = float(orbit.ecc.value)
    aphelion = a * (1.0 + ecc) if ecc < 1.0 else math.inf
    return {
        "outgoing_sma_au": a / AU_KM,
        "outgoing_eccentricity": ecc,
        "outgoing_inclination_deg": math.degrees(orbit.inc.to_value(u.rad)),
        "outgoing_aphelion_au": aphelion / AU_KM,
    }


def _turn(mu, vinf, rp) -> float:
    """Unpowered turn (rad) of a hyperbola: 2 asin(1/e), e = 1 + rp vinf^2 / mu."""
    return 2.0 * math.asin(1.0 / (1.0 + rp * vinf * vinf / mu))


def _powered_periapsis(mu, v_in, v_out, turn) -> float:
    """Periapsis radius (km) whose two half-hyperbolas (v_in, v_out) turn by ``turn``:
    asin(1/e_in) + asin(1/e_out) = turn (the powered-flyby relation), by brentq."""
    from scipy.optimize import brentq

    def gap(log_rp):
        rp = math.exp(log_rp)
        return (
            math.asin(1.0 / (1.0 + rp * v_in**2 / mu))
            + math.asin(1.0 / (1.0 + rp * v_out**2 / mu))
            - turn
        )

    lo, hi = math.log(1e-3), math.log(1e12)
    if gap(lo) < 0.0:  # more turn than any periapsis gives
        return 1e-3
    if gap(hi) > 0.0:
        return 1e12
    return math.exp(brentq(gap, lo, hi, xtol=1e-14, rtol=1e-14))


def refly(record, source) -> dict:
    """The design of ``record`` re-flown with ``source``'s planet states (see module doc).

    Returns {"quantities": {name: {"design", "check", "unit"}}, "limits": [rows]} where a
    row is {"limit", "unit", "stated", "required_margin", "design", "check", "holds"};
    margins >= 0 hold. ``"problem"`` names what could not be re-flown.
    """
    cache_poliastro_kernels()
    body = bodies.planet(record["problem"]["body"])
    name = body.name.lower()
    ev = event_states(record)
    t_launch, t_dsm, t_flyby = ev["launch"]["t"], ev["dsm"]["t"], ev["flyby"]["t"]
    rb_l, vb_l = (a[0] for a in heliocentric_ecliptic(source, name, t_launch))
    rb_f, vb_f = (a[0] for a in heliocentric_ecliptic(source, name, t_flyby))
    c3, dla, rla = (_derived(record, k) for k in ("c3", "dla", "rla"))
    vinf_launch = launch_vinf_vector(c3, dla, rla)
    r_dsm, v_before = _propagate(rb_l, vb_l + vinf_launch, t_dsm - t_launch)
    revs = int(round(_derived(record, "lambert_revolutions")))
    low = bool(_derived(record, "lambert_low_path"))
    v1, v2 = _lambert(r_dsm, rb_f, t_flyby - t_dsm, revs, low)
    dsm = float(np.linalg.norm(v1 - v_before))
    vinf_in = v2 - vb_f
    speed_in = float(np.linalg.norm(vinf_in))
    check = {
        "c3": c3,
        "dla": dla,
        "dsm": dsm,
        "flyby_vinf_in": speed_in,
        "dsm_position_change_km": float(np.linalg.norm(r_dsm - ev["dsm"]["r"])),
        "body_position_change_at_flyby_km": float(np.linalg.norm(rb_f - ev["flyby"]["r"])),
    }
    mu_b, radius = body.gm_km3_s2, body.equatorial_radius_km
    limits = {k: v for k, v in record["margins"].items()}
    min_alt = limits.get("min_flyby_altitude", {}).get("limit")
    min_alt = body.default_min_flyby_altitude_km if min_alt is None else float(min_alt)
    flyby_burn = 0.0
    if "arrival" in ev:
        arrival = ev["arrival"]
        t_arr = arrival["t"]
        target = record["problem"].get("target") or ""
        if target.lower() in bodies.PLANETS:
            r_t, v_t = (a[0] for a in heliocentric_ecliptic(source, target.lower(), t_arr))
        else:  # a small body on its own two-body elements: the design's state is exact
            r_t, v_t = arrival["r"], arrival["v_target"]
        v_leg, v_arr = _lambert(rb_f, r_t, t_arr - t_flyby, 0, True)
        vinf_out = v_leg - vb_f
        speed_out = float(np.linalg.norm(vinf_out))
        turn = math.acos(max(-1.0, min(1.0, float(vinf_in @ vinf_out) / (speed_in * speed_out))))
        rp = _powered_periapsis(mu_b, speed_in, speed_out, turn)
        powered = _derived(record, "flyby_burn") > 0.0 or "vinf_match" not in limits
        if powered:
            rp_burn = max(rp, radius + min_alt)
            flyby_burn = abs(
                math.sqrt(speed_out**2 + 2 * mu_b / rp_burn)
                - math.sqrt(speed_in**2 + 2 * mu_b / rp_burn)
            )
        arrival_vinf = float(np.linalg.norm(v_arr - v_t))
        rp_min = radius + min_alt
        max_turn = math.asin(1.0 / (1.0 + rp_min * speed_in**2 / mu_b)) + math.asin(
            1.0 / (1.0 + rp_min * speed_out**2 / mu_b)
        )
        check.update(
            {
                "flyby_altitude": rp - radius,
                "flyby_vinf_out": speed_out,
                "turn_angle": math.degrees(turn),
                "max_turn_angle": math.degrees(max_turn),
                "flyby_burn": flyby_burn,
                "arrival_vinf": arrival_vinf,
            }
        )
    else:
        import astropy.units as u
        from poliastro.threebody.flybys import compute_flyby

        alt = _derived(record, "flyby_altitude")
        rp = radius + alt
        v_out, turn_q = compute_flyby(
            v2 * u.km / u.s,
            vb_f * u.km / u.s,
            mu_b * u.km**3 / u.s**2,
            rp * u.km,
            _derived(record, "bplane_angle") * u.deg,
        )
        v_out = v_out.to_value(u.km / u.s)
        turn = float(turn_q.to_value(u.rad))
        check.update(
            {
                "flyby_altitude": alt,
                "flyby_vinf_out": speed_in,
                "turn_angle": math.degrees(turn),
                "max_turn_angle": math.degrees(_turn(mu_b, speed_in, radius + min_alt)),
            }
        )
        check.update(_elements(rb_f, v_out))
    check["total_dv"] = (
        dsm
        + flyby_burn
        + (check.get("arrival_vinf", 0.0) if _derived(record, "arrival_burn") > 0.0 else 0.0)
    )
    return {"quantities": _pairs(record, check), "limits": _limit_rows(record, check)}


# quantity name -> unit of the check dict (design value from record["derived"])
_UNITS = {
    "c3": "km^2/s^2",
    "dla": "deg",
    "dsm": "km/s",
    "flyby_vinf_in": "km/s",
    "flyby_vinf_out": "km/s",
    "flyby_altitude": "km",
    "turn_angle": "deg",
    "max_turn_angle": "deg",
    "flyby_burn": "km/s",
    "arrival_vinf": "km/s",
    "total_dv": "km/s",
    "outgoing_sma_au": "au",
    "outgoing_eccentricity": "",
    "outgoing_inclination_deg": "deg",
    "outgoing_aphelion_au": "au",
}
_DESIGN_NAME = {
    "outgoing_sma_au": "outgoing_sma",
    "outgoing_inclination_deg": "outgoing_inclination",
    "outgoing_aphelion_au": "outgoing_aphelion",
}


def _pairs(record, check) -> dict:
    out = {}
    for key, value in check.items():
        if key not in _UNITS:
            out[key] = {"check": value, "unit": "km"}
            continue
        design = _derived(record, _DESIGN_NAME.get(key, key))
        out[key] = {"design": design, "check": value, "change": value - design, "unit": _UNITS[key]}
    return out


def _limit_rows(record, check) -> list:
    """Every stated limit's margin in the design and in the re-flown check (>= 0 holds)."""
    rows = []
    for name, entry in record["margins"].items():
        stated = entry.get("limit")
        value = _margin_of(name, stated, check)
        if value is None:
            continue
        rows.append(
            {
                "limit": name,
                "unit": entry["unit"],
                "stated": stated,
                "required_margin": entry.get("required_margin", 0.0),
                "design": as_float(entry["margin"]),
                "check": value,
                "holds": bool(value >= 0.0),
            }
        )
    return rows


def _margin_of(name, stated, check):
    """A stated limit's margin from the re-flown numbers (None: not re-checked here)."""
    if name == "max_c3":
        return float(stated) - check["c3"]
    if name == "dla_band":
        return min(check["dla"] - stated[0], stated[1] - check["dla"])
    if name == "min_flyby_altitude":
        return check["flyby_altitude"] - float(stated)
    if name == "max_turn":
        return check["max_turn_angle"] - check["turn_angle"]
    if name == "dsm_budget":
        return float(stated) - check["dsm"]
    if name == "min_outgoing_vinf":
        return check["flyby_vinf_out"] - float(stated)
    if name == "min_outgoing_inclination" and "outgoing_inclination_deg" in check:
        return check["outgoing_inclination_deg"] - float(stated)
    if name == "min_outgoing_aphelion" and "outgoing_aphelion_au" in check:
        return check["outgoing_aphelion_au"] - float(stated)
    if name == "max_arrival_vinf" and "arrival_vinf" in check:
        return float(stated) - check["arrival_vinf"]
    if name == "vinf_match" and "flyby_vinf_out" in check:
        return float(stated) - abs(check["flyby_vinf_out"] - check["flyby_vinf_in"])
    return None
