"""Force model of the refinement: point masses at JPL DE421 states.

Bodies: the Sun, Mercury, Venus, the Earth, the Moon, and the Mars, Jupiter, Saturn,
Uranus and Neptune system barycentres, each a point mass. States come from the
``de421`` package read with ``jplephem`` (``Ephemeris(de421)``; no download):
solar-system-barycentric, ICRF axes, km and km/day (turned into km/s). DE421 gives the
Earth-Moon barycentre and the geocentric Moon; the Earth is EMB - Moon/(1 + EMRAT) and
the barycentric Moon EMB + Moon EMRAT/(1 + EMRAT).

GMs are DE421's own header constants (GM1..GM8, GMS, GMB, EMRAT in au^3/day^2, turned
into km^3/s^2 with the header's AU in km): the Earth is GMB EMRAT/(1 + EMRAT), the Moon
GMB/(1 + EMRAT); Mars..Neptune are system GMs (planet and moons) at their system
barycentres. Using the ephemeris' own GMs keeps the force model consistent with the
positions it was fitted with (Folkner et al. 2009, IPN Progress Report 42-178).

Left out: finite burns (every burn is an impulse), solar radiation pressure,
non-spherical gravity (Earth J2 and the rest: it matters within a few Earth radii of
the flyby periapsis), relativity (Sun's 1PN term: ~1e-8 relative), asteroids, Pluto,
and outgassing or thrusting. Launch is an impulse at the periapsis of the departure
hyperbola; no ascent.
"""

import numpy as np

from leverage.core.constants import DAY_S, J2000_JD

# Order of the bodies in every array of this package. "earth" and "moon" are their
# centres; the outer planets are system barycentres (DE421 has no planet centres).
BODY_NAMES = (
    "sun",
    "mercury",
    "venus",
    "earth",
    "moon",
    "mars",
    "jupiter",
    "saturn",
    "uranus",
    "neptune",
)
_DE_NAME = {
    "sun": "sun",
    "mercury": "mercury",
    "venus": "venus",
    "mars": "mars",
    "jupiter": "jupiter",
    "saturn": "saturn",
    "uranus": "uranus",
    "neptune": "neptune",
}
_GM_KEY = {
    "sun": "GMS",
    "mercury": "GM1",
    "venus": "GM2",
    "mars": "GM4",
    "jupiter": "GM5",
    "saturn": "GM6",
    "uranus": "GM7",
    "neptune": "GM8",
}

FORCE_MODEL = (
    "point masses at JPL DE421 states (jplephem): Sun, Mercury, Venus, Earth, "
    "Moon, Mars..Neptune system barycentres; GMs from the DE421 header"
)
LEFT_OUT = (
    "finite burns (impulses instead), solar radiation pressure, non-spherical "
    "gravity (J2 and higher), relativity, asteroids and Pluto"
)


class De421:
    """DE421 states of ``BODY_NAMES`` and their GMs (km^3/s^2).

    ``states(t)`` -> (r km, v km/s), each (len(BODY_NAMES), 3, n) for an array of
    TDB seconds past J2000 (solar-system barycentre, ICRF axes).
    """

    name = "JPL DE421 (de421 package, jplephem)"

    def __init__(self):
        import de421
        from jplephem import Ephemeris

        self.eph = Ephemeris(de421)
        e = self.eph
        self.au_km = float(e.AU)
        to_km3_s2 = self.au_km**3 / DAY_S**2
        emrat = float(e.EMRAT)
        self.emrat = emrat
        gm = {k: float(getattr(e, key)) * to_km3_s2 for k, key in _GM_KEY.items()}
        gm_emb = float(e.GMB) * to_km3_s2
        gm["earth"] = gm_emb * emrat / (1.0 + emrat)
        gm["moon"] = gm_emb / (1.0 + emrat)
        self.gm = np.array([gm[n] for n in BODY_NAMES])
        self.t_range = ((e.jalpha - J2000_JD) * DAY_S, (e.jomega - J2000_JD) * DAY_S)
        # The shooting asks for the same few epochs over and over (every finite-difference
        # column, every segment start): 196 000 jplephem calls, 14% of a demo refine.
        self._memo = {}

    def gm_of(self, body: str) -> float:
        return float(self.gm[BODY_NAMES.index(body)])

    def states(self, t_tdb_s):
        """(r, v) arrays (10, 3, n): km and km/s, barycentric ICRF, at TDB seconds."""
        t = np.atleast_1d(np.asarray(t_tdb_s, dtype=float))
        if t.min() < self.t_range[0] or t.max() > self.t_range[1]:
            raise ValueError("epoch outside DE421 (1899-07-29 .. 2053-10-09)")
        # Whole and fractional day apart: one float JD near 2.46e6 rounds the time to
        # 40 us (measured: about 1 m of jitter in every body's position).
        jd, frac = np.full(t.shape, J2000_JD), t / DAY_S
        r = np.empty((len(BODY_NAMES), 3, t.size))
        v = np.empty_like(r)
        for k, name in enumerate(BODY_NAMES):
            if name in ("earth", "moon"):
                continue
            pos, vel = self.eph.position_and_velocity(_DE_NAME[name], jd, frac)
            r[k], v[k] = pos, vel / DAY_S
        emb_r, emb_v = self.eph.position_and_velocity("earthmoon", jd, frac)
        moon_r, moon_v = self.eph.position_and_velocity("moon", jd, frac)  # geocentric
        f = 1.0 / (1.0 + self.emrat)
        ie, im = BODY_NAMES.index("earth"), BODY_NAMES.index("moon")
        r[ie], v[ie] = emb_r - f * moon_r, (emb_v - f * moon_v) / DAY_S
        r[im], v[im] = emb_r + (1.0 - f) * moon_r, (emb_v + (1.0 - f) * moon_v) / DAY_S
        return r, v

    def states_at(self, t: float):
        """``states`` at one epoch, memoised (the arrays are shared: do not modify)."""
        t = float(t)
        hit = self._memo.get(t)
        if hit is None:
            if len(self._memo) > 4096:
                self._memo.clear()
            hit = self._memo[t] = self.states(t)
        return hit

    def state(self, body: str, t: float):
        """(r km, v km/s) of one body at one epoch, barycentric ICRF, (3,) each."""
        r, v = self.states_at(t)
        k = BODY_NAMES.index(body)
        return r[k, :, 0].copy(), v[k, :, 0].copy()


def acceleration(r, body_r, gm):
    """Point-mass acceleration (km/s^2) at r (3,) from bodies at body_r (m, 3)."""
    d = r[None, :] - body_r
    dist3 = np.einsum("ij,ij->i", d, d) ** 1.5
    return -(gm[:, None] * d / dist3[:, None]).sum(axis=0)
