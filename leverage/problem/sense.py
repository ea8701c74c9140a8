"""Limits of sense: what a problem file may say beyond each key's own range.

``check_text`` bounds the free-text keys (length, no control characters), and
``check_physics`` the numbers the physics gives meaning to: a flyby periapsis inside
the body's sphere of influence, a loop long enough to leave that sphere and come
back, and every date of every leg (launch, loop, target leg, arrival window) inside
the span of the ephemeris the search uses. Each refusal is one ``ProblemError``.

Sphere of influence (Laplace): r_SOI = a (mu / mu_Sun)^(2/5), with a the body's
mean semi-major axis (Standish Table 1); Earth: about 925,000 km. Leaving it takes
longer than r_SOI / v_inf at launch speed v_inf (on the escape hyperbola the speed is
above v_inf all the way), and the return flyby needs the same again on the way in.
"""

import math

from leverage.astro import bodies, times
from leverage.errors import ProblemError
from leverage.problem.schema import KEYS

MAX_PROBLEM_BYTES = 1_000_000  # a problem file is a few kB
MAX_TEXT_CHARS = 200  # names
MAX_DESCRIPTION_CHARS = 4000  # [study] description (copied into every summary)
_DESCRIPTION_KEYS = {("study", "description")}


def check_text(source: str, values: dict) -> None:
    """Free-text keys: at most ``MAX_TEXT_CHARS`` (a description ``MAX_DESCRIPTION_CHARS``)
    characters and no control characters (a description may hold tabs and line ends)."""
    for key in KEYS:
        if key.kind != "text" or values.get(key.section) is None:
            continue
        text = values[key.section].get(key.name)
        if not isinstance(text, str):
            continue
        description = (key.section, key.name) in _DESCRIPTION_KEYS
        limit = MAX_DESCRIPTION_CHARS if description else MAX_TEXT_CHARS
        if len(text) > limit:
            raise ProblemError(
                source, key.path, text, f"is {len(text):,} characters long; at most {limit:,}"
            )
        allowed = "\t\n" if description else ""
        bad = next(
            (ch for ch in text if (ord(ch) < 0x20 or 0x7F <= ord(ch) < 0xA0) and ch not in allowed),
            None,
        )
        if bad is not None:
            raise ProblemError(
                source,
                key.path,
                text,
                f"holds the control character U+{ord(bad):04X}; use plain printable text",
            )


def sphere_of_influence_km(body: bodies.Body) -> float:
    """Laplace's sphere-of-influence radius (km) from the body's mean semi-major axis."""
    a_km = body.mean_elements[0] * bodies.AU_KM
    return a_km * (body.gm_km3_s2 / bodies.GM_SUN_KM3_S2) ** 0.4


def check_physics(source: str, values: dict, body: bodies.Body, span_utc: tuple) -> None:
    """Flyby altitudes inside the sphere of influence, loops long enough to leave it,
    every leg's dates inside ``span_utc`` (first, last day of the ephemeris)."""
    launch, loop, flyby = values["launch"], values["loop"], values["flyby"]
    soi = sphere_of_influence_km(body)
    ceiling = soi - body.equatorial_radius_km
    for name in ("min_altitude_km", "max_altitude_km"):
        if flyby[name] >= ceiling:
            raise ProblemError(
                source,
                f"[flyby] {name}",
                flyby[name],
                f"is outside {body.name}'s sphere of influence (periapsis "
                f"altitude below {ceiling:,.0f} km); a patched-conic flyby "
                "has no meaning there",
            )
    if launch["max_c3_km2_s2"] > 0.0:
        vinf = math.sqrt(launch["max_c3_km2_s2"])
        shortest_days = 2.0 * soi / vinf / times.DAY_S
        if loop["duration_days"][0] < shortest_days:
            raise ProblemError(
                source,
                "[loop] duration_days",
                loop["duration_days"],
                f"the shortest loop must be at least {shortest_days:.1f} days: "
                f"leaving {body.name}'s sphere of influence ({soi:,.0f} km) at "
                f"the highest launch v-infinity ({vinf:.2f} km/s) and coming "
                "back takes that long, and the DSM must lie outside it",
            )
    first, last = (times.tdb_seconds(d) for d in span_utc)
    years = f"{span_utc[0][:4]}-{span_utc[1][:4]}"
    target = values.get("target")
    if target is not None:
        latest = (
            times.tdb_seconds(launch["window_close_utc"])
            + (loop["duration_days"][1] + target["leg_duration_days"][1]) * times.DAY_S
        )
        if latest > last:
            raise ProblemError(
                source,
                "[target] leg_duration_days",
                target["leg_duration_days"],
                f"the latest arrival (last launch + longest loop + longest leg) "
                f"is after {span_utc[1]}, outside the span of the ephemeris "
                f"({years})",
            )
        for name in ("arrival_open_utc", "arrival_close_utc"):
            if target[name] is not None and not first <= times.tdb_seconds(target[name]) <= last:
                raise ProblemError(
                    source,
                    f"[target] {name}",
                    target[name],
                    f"is outside the span of the ephemeris ({years})",
                )
