"""Sampled conic arcs of a design, made from its result record (best.json) alone.

Each leg of a patched-conic design is a two-body (Sun-only) conic between events:

* launch -> DSM: propagated from the launch state (position, velocity just after launch);
* DSM -> flyby: propagated from the post-DSM state;
* after the flyby: the outgoing orbit for one period (at most ``MAX_OUTGOING_DAYS``;
  ``HYPERBOLIC_OUTGOING_DAYS`` if unbound), or, when the record has an ``arrival``
  event, the flyby -> arrival leg instead.

Every sample is propagated directly from the arc's initial state with
``leverage.core.kepler.propagate`` (universal variables, Vallado 2013 Algorithm 8), so
errors do not pile up along an arc. Frame: heliocentric ecliptic J2000; units km,
km/s; epochs TDB seconds past J2000. Shared by the pictures, the verification and
the export.
"""

import math
from dataclasses import dataclass

import numpy as np

from leverage.astro import bodies
from leverage.core.constants import DAY_S
from leverage.core.ephemeris import body_state
from leverage.core.kepler import elements_from_state, propagate
from leverage.record.design import as_float

FRAME = "heliocentric ecliptic J2000"
MAX_OUTGOING_DAYS = 4.0 * 365.25  # longest outgoing span drawn/exported
HYPERBOLIC_OUTGOING_DAYS = 365.25  # span of an unbound outgoing orbit
DEFAULT_SAMPLES = 400
# Largest sizes a design's event states can have: epoch (s past J2000, about +-300
# years), position (km, about 700 au), velocity (km/s).
STATE_LIMITS = {"t": 1e10, "r": 1e11, "v": 1e3}


@dataclass
class Arc:
    """One conic leg: ``key`` (machine name), ``label`` (for people), samples.

    t_tdb_s: (n,) TDB seconds past J2000; r_km: (n, 3); v_km_s: (n, 3), in ``FRAME``.
    """

    key: str
    label: str
    t_tdb_s: np.ndarray
    r_km: np.ndarray
    v_km_s: np.ndarray
    frame: str = FRAME

    @property
    def start_s(self) -> float:
        return float(self.t_tdb_s[0])

    @property
    def stop_s(self) -> float:
        return float(self.t_tdb_s[-1])


def _vec(values) -> np.ndarray:
    return np.array([as_float(v) for v in values], dtype=float)


def event_states(record) -> dict:
    """Events of a record as floats: name -> dict(t, r, and the velocities it has).

    Velocity fields renamed from best.json: ``velocity_X_km_s`` -> ``v_X`` and
    ``Y_velocity_km_s`` -> ``v_Y``: launch ``v``; dsm ``v_before``/``v_after``; flyby
    ``v_in``/``v_out``/``v_body``; arrival ``v`` (its first velocity field if it has no
    plain one).
    """
    out = {}
    for ev in record["events"]:
        item = {
            "t": as_float(ev["epoch_tdb_s"]),
            "r": _vec(ev["position_km"]),
            "utc": ev.get("utc", ""),
        }
        for key, value in ev.items():
            if "velocity" in key and isinstance(value, list):
                # velocity_in_km_s -> v_in; body_velocity_km_s -> v_body
                prefix, _, rest = key.replace("_km_s", "").partition("velocity")
                item["v" + rest + ("_" + prefix.rstrip("_") if prefix else "")] = _vec(value)
        if ev["event"] == "arrival" and "v" not in item:
            vel = [k for k in item if k.startswith("v_")]
            if vel:
                item["v"] = item[vel[0]]
        out[ev["event"]] = item
    return out


def check_record(record, source: str) -> None:
    """ProblemError (one line) unless ``record`` has solved launch, DSM and flyby events."""
    from leverage.errors import NO_VALUE, ProblemError

    try:
        names = [e["event"] for e in record["events"]]
        solved = record.get("margins", {}).get("lambert_solved", {}).get("margin", 0.0)
        states = event_states(record)
    except (KeyError, TypeError, ValueError, AttributeError) as exc:
        raise ProblemError(
            source, "", NO_VALUE, f"not a leverage result record ({type(exc).__name__}: {exc})"
        ) from None
    for name, item in states.items():  # numbers a design can have, before any sampling
        for field, value in item.items():
            if field == "utc":
                continue
            limit = STATE_LIMITS["t" if field == "t" else field[0]]
            arr = np.atleast_1d(np.asarray(value, dtype=float))
            if (
                (field != "t" and arr.shape != (3,))
                or not np.all(np.isfinite(arr))
                or np.max(np.abs(arr)) > limit
            ):
                raise ProblemError(
                    source,
                    f"events.{name}.{field}",
                    value.tolist() if hasattr(value, "tolist") else value,
                    f"not a state of a design (finite, 3 components, each at "
                    f"most {limit:g} in size)",
                )
    missing = [n for n in ("launch", "dsm", "flyby") if n not in names]
    if missing:
        raise ProblemError(source, "events", NO_VALUE, f"no {missing[0]} event")
    if solved is not None and float(solved) < 0:
        raise ProblemError(
            source,
            "margins.lambert_solved",
            solved,
            "the best point has an unsolved leg: nothing to draw, check or export",
        )


def sample_times(t0: float, t1: float, n: int | None = None, step_s: float | None = None):
    """Epochs from t0 to t1 inclusive: ``n`` evenly spaced, or every ``step_s`` plus t1."""
    if step_s is not None:
        if step_s <= 0:
            raise ValueError("step must be positive")
        times = np.arange(t0, t1, step_s)
        # End exactly at t1; drop a regular sample that would sit within 1 s of it.
        if times.size > 1 and t1 - times[-1] < 1.0:
            times = times[:-1]
        return np.append(times, t1)
    return np.linspace(t0, t1, max(2, int(n or DEFAULT_SAMPLES)))


def conic_states(mu: float, t0: float, r0, v0, times):
    """Two-body states (km, km/s) at ``times`` from (r0, v0) at t0; each directly."""
    r0 = np.asarray(r0, dtype=float)
    v0 = np.asarray(v0, dtype=float)
    rs = np.empty((len(times), 3))
    vs = np.empty((len(times), 3))
    for k, t in enumerate(times):
        r, v, ok = propagate(mu, r0, v0, float(t - t0))
        if not ok:
            raise RuntimeError(f"two-body propagation failed {t - t0:.0f} s from the arc start")
        rs[k] = r
        vs[k] = v
    return rs, vs


def outgoing_span_s(r, v, mu=bodies.GM_SUN_KM3_S2) -> float:
    """Span drawn after the flyby: one period of the outgoing orbit, capped."""
    a, ecc, *_ = elements_from_state(mu, np.asarray(r, float), np.asarray(v, float))
    if ecc < 1.0 and a > 0:
        period = 2.0 * math.pi * math.sqrt(a**3 / mu)
        return min(period, MAX_OUTGOING_DAYS * DAY_S)
    return HYPERBOLIC_OUTGOING_DAYS * DAY_S


def design_arcs(
    record,
    n: int | None = None,
    step_s: float | None = None,
    outgoing_s: float | None = None,
    mu=bodies.GM_SUN_KM3_S2,
) -> list:
    """The conic arcs of a record, in time order (see module docstring).

    n: samples per arc (default ``DEFAULT_SAMPLES``) unless ``step_s`` is given;
    outgoing_s: span after the flyby when there is no arrival event (default
    ``outgoing_span_s``).
    """
    ev = event_states(record)
    launch, dsm, flyby = ev["launch"], ev["dsm"], ev["flyby"]
    legs = [
        ("launch_dsm", "launch to DSM", launch["t"], launch["r"], launch["v"], dsm["t"]),
        ("dsm_flyby", "DSM to flyby", dsm["t"], dsm["r"], dsm["v_after"], flyby["t"]),
    ]
    if "arrival" in ev:
        legs.append(
            (
                "flyby_arrival",
                "flyby to arrival",
                flyby["t"],
                flyby["r"],
                flyby["v_out"],
                ev["arrival"]["t"],
            )
        )
    else:
        span = (
            outgoing_s
            if outgoing_s is not None
            else outgoing_span_s(flyby["r"], flyby["v_out"], mu)
        )
        legs.append(
            (
                "outgoing",
                "outgoing orbit",
                flyby["t"],
                flyby["r"],
                flyby["v_out"],
                flyby["t"] + span,
            )
        )
    arcs = []
    for key, label, t0, r0, v0, t1 in legs:
        times = sample_times(t0, t1, n, step_s)
        rs, vs = conic_states(mu, t0, r0, v0, times)
        arcs.append(Arc(key, label, times, rs, vs))
    return arcs


def body_orbit(
    name: str, t_start: float, n: int = DEFAULT_SAMPLES, span_s: float | None = None
) -> Arc:
    """One period (or ``span_s``) of a planet's mean-element orbit from t_start.

    States from Standish's mean elements (``leverage.core.ephemeris``), the same
    model the search uses.
    """
    body = bodies.planet(name)
    eph = body.ephemeris_array()
    if span_s is None:
        a_km = body.mean_elements[0] * bodies.AU_KM
        span_s = 2.0 * math.pi * math.sqrt(a_km**3 / bodies.GM_SUN_KM3_S2)
    times = np.linspace(t_start, t_start + span_s, n)
    rs = np.empty((n, 3))
    vs = np.empty((n, 3))
    for k, t in enumerate(times):
        r, v = body_state(eph, float(t))
        rs[k] = r
        vs[k] = v
    return Arc(f"body_{body.name.lower()}", f"{body.name} orbit", times, rs, vs)


def target_orbit(record, n: int = DEFAULT_SAMPLES, mu=bodies.GM_SUN_KM3_S2) -> Arc | None:
    """One period of the target's orbit, two-body from its state at arrival (if known).

    Needs an ``arrival`` event with the target's velocity; exact for a small body on
    fixed elements, a close stand-in for a planet over one period. None otherwise.
    """
    ev = event_states(record).get("arrival")
    if ev is None or "v_target" not in ev:
        return None
    a, ecc, *_ = elements_from_state(mu, ev["r"], ev["v_target"])
    if not (ecc < 1.0 and a > 0):
        return None
    period = 2.0 * math.pi * math.sqrt(a**3 / mu)
    times = np.linspace(ev["t"], ev["t"] + period, n)
    rs, vs = conic_states(mu, ev["t"], ev["r"], ev["v_target"], times)
    name = record["problem"].get("target") or "target"
    return Arc("target", f"{name} orbit", times, rs, vs)
