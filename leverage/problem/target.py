"""The target of a final leg: a planet, or a small body given by its own elements.

A planet uses the same Standish mean elements as the flyby body (``bodies.py``). A
small body is given in the problem file by classical heliocentric elements in the
ecliptic J2000 frame at an epoch (TDB) and moves on that fixed two-body orbit about
the Sun (``core.ephemeris.KIND_OSCULATING``). Lengths in km, angles in degrees unless
named otherwise.
"""

import math
from dataclasses import dataclass

import numpy as np

from leverage.astro import bodies, times
from leverage.errors import NO_VALUE, ProblemError

ELEMENT_KEYS = (
    "semi_major_axis_au",
    "eccentricity",
    "inclination_deg",
    "ascending_node_deg",
    "argument_of_perihelion_deg",
    "mean_anomaly_deg",
    "elements_epoch_tdb",
)


@dataclass(frozen=True)
class Target:
    """A target body: its name, packed ephemeris and the shape of its orbit."""

    name: str
    ephemeris: np.ndarray  # core.ephemeris packed slots
    gm_km3_s2: float  # 0 for a small body
    semi_major_axis_km: float
    eccentricity: float
    inclination_deg: float
    is_planet: bool

    @property
    def perihelion_km(self) -> float:
        return self.semi_major_axis_km * (1.0 - self.eccentricity)

    @property
    def aphelion_km(self) -> float:
        return self.semi_major_axis_km * (1.0 + self.eccentricity)


def target_from_values(source: str, section: dict) -> Target:
    """The Target described by a validated [target] section; ProblemError if incomplete."""
    name = section["name"].strip()
    given = [k for k in ELEMENT_KEYS if section[k] is not None]
    if not given:
        if name.lower() not in bodies.PLANETS:
            raise ProblemError(
                source,
                "[target] name",
                section["name"],
                "not a planet; give a planet name or the small body's elements "
                f"({', '.join(ELEMENT_KEYS)})",
            )
        body = bodies.planet(name)
        row = body.mean_elements
        return Target(
            name=body.name,
            ephemeris=body.ephemeris_array(),
            gm_km3_s2=body.gm_km3_s2,
            semi_major_axis_km=row[0] * bodies.AU_KM,
            eccentricity=row[1],
            inclination_deg=row[2],
            is_planet=True,
        )
    missing = [k for k in ELEMENT_KEYS if section[k] is None]
    if missing:
        raise ProblemError(
            source,
            f"[target] {missing[0]}",
            NO_VALUE,
            f"missing: a small body needs every element ({', '.join(ELEMENT_KEYS)})",
        )
    if name.lower() in bodies.PLANETS:
        raise ProblemError(
            source,
            "[target] name",
            section["name"],
            "is a planet, which uses its own ephemeris; drop the element keys or "
            "give the small body another name",
        )
    a_km = section["semi_major_axis_au"] * bodies.AU_KM
    epoch = times.tdb_seconds(section["elements_epoch_tdb"], scale="tdb")
    eph = bodies.osculating_array(
        a_km,
        section["eccentricity"],
        section["inclination_deg"],
        section["ascending_node_deg"],
        section["argument_of_perihelion_deg"],
        section["mean_anomaly_deg"],
        epoch,
    )
    return Target(
        name=name,
        ephemeris=eph,
        gm_km3_s2=0.0,
        semi_major_axis_km=a_km,
        eccentricity=section["eccentricity"],
        inclination_deg=section["inclination_deg"],
        is_planet=False,
    )


def arrival_window_s(source: str, section: dict) -> tuple[float, float]:
    """(earliest, latest) arrival in TDB seconds past J2000; -inf/inf where not set."""
    lo = (
        times.tdb_seconds(section["arrival_open_utc"])
        if section["arrival_open_utc"] is not None
        else -math.inf
    )
    hi = (
        times.tdb_seconds(section["arrival_close_utc"])
        if section["arrival_close_utc"] is not None
        else math.inf
    )
    if lo > hi:
        raise ProblemError(
            source,
            "[target] arrival_close_utc",
            section["arrival_close_utc"],
            f"is before arrival_open_utc ({section['arrival_open_utc']})",
        )
    return lo, hi
