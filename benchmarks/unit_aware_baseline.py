"""The leveraging evaluation written the straightforward way, without `leverage`.

What an analyst might write with poliastro's unit-aware objects and astropy
quantities: planet states from the same Standish mean elements (JPL, "Keplerian
Elements for Approximate Positions of the Major Planets", Table 1) through
``Orbit.from_classical``; the launch state as ``Orbit.from_vectors`` and
``Orbit.propagate`` to the DSM epoch; ``poliastro.iod.izzo.lambert`` from the DSM
point to the planet at the return epoch; the flyby through
``poliastro.threebody.flybys.compute_flyby``. Limits become the same penalties as
``leverage.core.penalties`` (v + v^2 per margin, same scales) so the objective is
comparable. Frame: heliocentric ecliptic J2000; epochs TDB.

Used only as the slow reference of ``benchmarks/eval_cost.py``; targets with a
final leg are not covered.
"""

import warnings

import numpy as np
from astropy import units as u
from astropy.time import Time
from poliastro.bodies import Body, Sun
from poliastro.frames import Planes
from poliastro.iod import izzo
from poliastro.threebody.flybys import compute_flyby
from poliastro.twobody import Orbit
from poliastro.twobody.angles import E_to_nu, M_to_E

from leverage.core import layout as L

J2000 = Time(2451545.0, format="jd", scale="tdb")
OBLIQUITY = (84381.448 * u.arcsec).to(u.rad)  # IAU 1976, the ecliptic-of-J2000 tilt
CENTURY = 36525.0 * u.day
# Same normalising scales as leverage.core.penalties.MARGIN_SCALES (repeated here on purpose:
# this file stands for code written without leverage).
SCALES = {
    "alt": 100.0 * u.km,
    "turn": 0.1 * u.rad,
    "c3": 1.0 * u.km**2 / u.s**2,
    "dla": 1.0 * u.deg,
    "dsm": 0.1 * u.km / u.s,
    "vinf_out": 0.1 * u.km / u.s,
    "inc": 1.0 * u.deg,
    "aphelion": 0.1 * u.AU,
}


class Setting:
    """The constants of one problem as astropy quantities (from its compiled parameters)."""

    def __init__(self, compiled, body):
        p = compiled.params
        self.row = body.mean_elements
        self.k_body = p[L.P_BODY_MU] * u.km**3 / u.s**2
        self.radius = p[L.P_BODY_RADIUS_KM] * u.km
        self.pole_ra = p[L.P_POLE_RA] * u.rad
        self.pole_dec = p[L.P_POLE_DEC] * u.rad
        self.min_alt = p[L.P_MIN_ALT_KM] * u.km
        self.c3_max = p[L.P_C3_MAX] * u.km**2 / u.s**2
        self.dla_min = p[L.P_DLA_MIN] * u.rad
        self.dla_max = p[L.P_DLA_MAX] * u.rad
        self.dsm_budget = p[L.P_DSM_BUDGET_KMS] * u.km / u.s
        self.req_vinf = p[L.P_REQ_VINF_OUT_KMS] * u.km / u.s
        self.req_inc = p[L.P_REQ_INC_RAD] * u.rad
        self.req_aphelion = p[L.P_REQ_APHELION_KM] * u.km
        self.rev_min, self.rev_max = int(p[L.P_REV_MIN]), int(p[L.P_REV_MAX])
        self.w_dsm, self.w_gain = p[L.P_W_DSM], p[L.P_W_GAIN]
        self.w_inc, self.penalty_weight = p[L.P_W_INC], p[L.P_PENALTY_WEIGHT]


def planet_orbit(row, epoch) -> Orbit:
    """The planet's heliocentric orbit at ``epoch`` from Standish's elements and rates.

    Standish's recipe gives a position; its velocity is the time derivative of that
    position at the mean motion dL/dt, which is the two-body velocity about a centre
    of GM = n^2 a^3. So the planet's Orbit is built about such a centre, and both tools
    then see the same planet velocity (about 1e-5 apart from Sun.k otherwise).
    """
    cent = ((epoch - J2000).to(u.day) / CENTURY).decompose().value
    a = (row[0] + row[6] * cent) * u.AU
    ecc = (row[1] + row[7] * cent) * u.one
    inc = (row[2] + row[8] * cent) * u.deg
    mean_lon = (row[3] + row[9] * cent) * u.deg
    varpi = (row[4] + row[10] * cent) * u.deg
    node = (row[5] + row[11] * cent) * u.deg
    argp = varpi - node
    if inc < 0 * u.deg:  # Standish's Earth row has I < 0: same plane, node moved by 180 deg
        inc, node, argp = -inc, node + 180 * u.deg, argp - 180 * u.deg
    mean_anom = (mean_lon - varpi + 180 * u.deg) % (360 * u.deg) - 180 * u.deg
    nu = E_to_nu(M_to_E(mean_anom.to(u.rad), ecc), ecc)
    nu = (nu + np.pi * u.rad) % (2 * np.pi * u.rad) - np.pi * u.rad
    mean_motion = (row[9] * u.deg / CENTURY).to(u.rad / u.s).value / u.s
    centre = Body(None, (mean_motion**2 * a**3).to(u.km**3 / u.s**2), "Sun (Standish mean motion)")
    return Orbit.from_classical(
        centre,
        a,
        ecc,
        inc,
        node.to(u.rad) % (2 * np.pi * u.rad),
        argp.to(u.rad) % (2 * np.pi * u.rad),
        nu,
        epoch=epoch,
        plane=Planes.EARTH_ECLIPTIC,
    )


def _unit(v):
    return v / np.linalg.norm(v)


def _to_body_equator(vec, s: Setting):
    """Ecliptic J2000 -> EME2000 -> the body's equator frame (Earth: EME2000 itself)."""
    c, sn = np.cos(OBLIQUITY), np.sin(OBLIQUITY)
    eq = u.Quantity([vec[0], c * vec[1] - sn * vec[2], sn * vec[1] + c * vec[2]])
    if abs((s.pole_dec - 90 * u.deg).to_value(u.rad)) > 1e-12:
        ra, dec = s.pole_ra, s.pole_dec
        z = u.Quantity([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)])
        x = u.Quantity([-np.sin(ra), np.cos(ra), 0.0])
        y = np.cross(z, x)
        eq = u.Quantity([eq @ x, eq @ y, eq @ z])
    return eq


def _penalty(margins: dict, weight: float) -> float:
    total = 0.0
    for name, margin in margins.items():
        v = max(0.0, (-margin / SCALES[name]).decompose().value)
        total += v + v * v
    return weight * total


def evaluate(x, s: Setting) -> dict:
    """DSM (km/s) and objective of decision vector x (leverage's layout), or None if unsolved."""
    t0 = J2000 + x[L.X_LAUNCH_EPOCH_DAYS] * u.day
    loop = x[L.X_LOOP_DURATION_DAYS] * u.day
    t1 = t0 + x[L.X_DSM_FRACTION] * loop
    t2 = t0 + loop
    planet0 = planet_orbit(s.row, t0)
    r0, vb0 = planet0.r, planet0.v
    along = _unit(vb0)
    normal = _unit(np.cross(r0, vb0))
    out = np.cross(along, normal)
    az, el = x[L.X_LAUNCH_IN_PLANE_ANGLE_DEG] * u.deg, x[L.X_LAUNCH_OUT_OF_PLANE_ANGLE_DEG] * u.deg
    vinf0 = (
        x[L.X_LAUNCH_VINF_KM_S]
        * u.km
        / u.s
        * (np.cos(el) * np.cos(az) * along + np.cos(el) * np.sin(az) * out + np.sin(el) * normal)
    )
    c3 = vinf0 @ vinf0
    eq = _to_body_equator(vinf0, s)
    dla = np.arcsin(eq[2] / np.linalg.norm(eq)).to(u.rad)
    craft = Orbit.from_vectors(Sun, r0, vb0 + vinf0, epoch=t0, plane=Planes.EARTH_ECLIPTIC)
    at_dsm = craft.propagate(t1 - t0)
    r1, v1_before = at_dsm.r, at_dsm.v
    planet2 = planet_orbit(s.row, t2)
    r2, vb2 = planet2.r, planet2.v
    best = None
    for revs in range(s.rev_min, s.rev_max + 1):
        for low in (True,) if revs == 0 else (True, False):
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    v1_after, v2 = izzo.lambert(
                        Sun.k, r1, r2, (t2 - t1).to(u.s), M=revs, prograde=True, lowpath=low
                    )
            except Exception:  # no solution with this many revolutions
                continue
            dsm = np.linalg.norm(v1_after - v1_before).to(u.km / u.s)
            vinf_in = v2 - vb2
            speed = np.linalg.norm(vinf_in)
            alt = x[L.X_FLYBY_ALTITUDE_KM] * u.km
            rp = s.radius + alt
            turn = 2 * np.arcsin(1 / (1 + rp * speed**2 / s.k_body)).to(u.rad)
            rp_min = s.radius + s.min_alt
            turn_max = 2 * np.arcsin(1 / (1 + rp_min * speed**2 / s.k_body)).to(u.rad)
            v_out, _ = compute_flyby(v2, vb2, s.k_body, rp, x[L.X_BPLANE_ANGLE_DEG] * u.deg)
            outgoing = Orbit.from_vectors(Sun, r2, v_out, epoch=t2, plane=Planes.EARTH_ECLIPTIC)
            vinf_out = np.linalg.norm(v_out - vb2)
            gain = speed - x[L.X_LAUNCH_VINF_KM_S] * u.km / u.s
            margins = {
                "alt": alt - s.min_alt,
                "turn": turn_max - turn,
                "c3": s.c3_max - c3,
                "dla": min(dla - s.dla_min, s.dla_max - dla),
            }
            if np.isfinite(s.dsm_budget):
                margins["dsm"] = s.dsm_budget - dsm
            if s.req_vinf > 0:
                margins["vinf_out"] = vinf_out - s.req_vinf
            if s.req_inc > 0:
                margins["inc"] = outgoing.inc - s.req_inc
            if s.req_aphelion > 0 and outgoing.ecc < 1:
                margins["aphelion"] = outgoing.r_a - s.req_aphelion
            objective = (
                s.w_dsm * dsm.value
                - s.w_gain * gain.to_value(u.km / u.s)
                - s.w_inc * outgoing.inc.to_value(u.deg)
                + _penalty(margins, s.penalty_weight)
            )
            if best is None or objective < best["objective"]:
                best = {"dsm_kms": dsm.value, "objective": objective}
    return best
