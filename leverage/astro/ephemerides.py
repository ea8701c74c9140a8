"""Planet positions from outside ephemerides, for checking a design (never the search).

Two sources with one interface, ``barycentric(body, t_tdb_s) -> (r_km, v_km_s)``
((n, 3) arrays, solar-system-barycentric, ICRF axes):

* ``BuiltinEphemeris``: astropy's built-in model,
  ``astropy.coordinates.get_body_barycentric_posvel(..., ephemeris='builtin')``
  (ERFA ``epv00`` for the Earth and Sun, ``plan94`` for the other planets; no files,
  no downloads);
* ``SpkEphemeris``: a JPL SPK kernel file on disk (``.bsp``, Chebyshev types 2/3)
  read with ``jplephem``; segment chains are followed to the planet's centre when
  the kernel has it (e.g. 0->3->399 for the Earth), else to its system barycentre.

``heliocentric_ecliptic`` turns either into the model's frame: body minus Sun, then
rotated from the ICRF axes to the ecliptic J2000 by the obliquity 84381.448 arcsec
(``leverage.core.frames``). As in JPL's own ecliptic frame, the ICRF axes are taken as
the mean equator and equinox of J2000; the ~0.02 arcsec frame bias between them is
ignored. Epochs are TDB seconds past J2000.
"""

from pathlib import Path

import numpy as np

from leverage.astro.times import J2000_JD
from leverage.core.constants import AU_KM, DAY_S, OBLIQUITY_J2000_RAD, PLANET_NAMES  # noqa: F401
from leverage.errors import NO_VALUE, ProblemError

_c, _s = np.cos(OBLIQUITY_J2000_RAD), np.sin(OBLIQUITY_J2000_RAD)
# Rows applied to column vectors: equatorial (ICRF axes) -> ecliptic J2000.
EQUATORIAL_TO_ECLIPTIC = np.array([[1.0, 0.0, 0.0], [0.0, _c, _s], [0.0, -_s, _c]])


def _as_times(t_tdb_s) -> np.ndarray:
    return np.atleast_1d(np.asarray(t_tdb_s, dtype=float))


class BuiltinEphemeris:
    """astropy's built-in planetary ephemeris (ERFA epv00 / plan94)."""

    name = "astropy builtin (ERFA epv00 and plan94)"

    def barycentric(self, body: str, t_tdb_s):
        from astropy.coordinates import get_body_barycentric_posvel
        from astropy.time import Time

        t = _as_times(t_tdb_s)
        when = Time(np.full(t.shape, J2000_JD), t / DAY_S, format="jd", scale="tdb")
        pos, vel = get_body_barycentric_posvel(body.lower(), when, ephemeris="builtin")
        r = pos.xyz.to_value("km").T.reshape(-1, 3)
        v = vel.xyz.to_value("km/s").T.reshape(-1, 3)
        return r, v


# NAIF integer codes: solar-system barycentre 0, Sun 10, planet barycentres 1..8,
# planet centres N99 (NAIF "NAIF IDs" required reading).
_NAIF_BARYCENTRE = {name: k + 1 for k, name in enumerate(PLANET_NAMES)}


class SpkEphemeris:
    """A JPL SPK kernel file on disk, read with jplephem (no downloads)."""

    def __init__(self, path):
        from jplephem.spk import SPK

        self.path = str(path)
        if not Path(path).is_file():
            raise ProblemError("command line", "--spk", self.path, "no such file")
        try:
            self.kernel = SPK.open(self.path)
        except Exception as exc:  # jplephem raises ValueError/struct errors on bad files
            raise ProblemError(
                self.path, "", NO_VALUE, f"not a readable SPK kernel ({exc})"
            ) from None
        self.pairs = set(self.kernel.pairs)
        self.name = f"JPL SPK kernel {Path(self.path).name} (jplephem)"

    def close(self):
        self.kernel.close()

    def chain(self, body: str) -> list:
        """Segments (centre, target) from the barycentre 0 to ``body``."""
        body = body.lower()
        if body == "sun":
            path = [(0, 10)]
        elif body in _NAIF_BARYCENTRE:
            bary = _NAIF_BARYCENTRE[body]
            centre = bary * 100 + 99
            path = [(0, bary)]
            if (bary, centre) in self.pairs:
                path.append((bary, centre))
            elif body == "earth":
                # The Earth-Moon barycentre is ~4,700 km from the geocentre: never a stand-in.
                path.append((3, 399))
        else:
            raise ProblemError(self.path, "", body, "no NAIF code known for this body")
        missing = [p for p in path if p not in self.pairs]
        if missing:
            raise ProblemError(
                self.path, "", body, f"kernel has no segment {missing[0][0]} -> {missing[0][1]}"
            )
        return path

    def barycentric(self, body: str, t_tdb_s):
        from jplephem.exceptions import OutOfRangeError

        t = _as_times(t_tdb_s)
        r = np.zeros((t.size, 3))
        v = np.zeros((t.size, 3))
        for pair in self.chain(body):
            try:
                pos, vel = self.kernel[pair].compute_and_differentiate(
                    np.full(t.shape, J2000_JD), t / DAY_S
                )
            except OutOfRangeError as exc:
                raise ProblemError(
                    self.path, "", body, f"epoch outside the kernel: {exc}"
                ) from None
            r += np.asarray(pos).T.reshape(-1, 3)
            v += np.asarray(vel).T.reshape(-1, 3) / DAY_S  # km/day -> km/s
        return r, v


class PackagedEphemeris:
    """A JPL DE ephemeris from its registry package (``de421``, ``de423``), evaluated by
    jplephem's own ``Ephemeris`` reader: a path apart from the search's compiled tables
    (``leverage.astro.de_tables``), so a bug there cannot hide from a check made here.

    The Earth is the geocentre: EMB - Moon_geocentric * earth_share, jplephem's
    ``earth_share`` = 1/(1 + EMRAT) (EMRAT the ephemeris's Earth/Moon mass ratio,
    81.30056 for DE421, Folkner et al. 2008, quoted from memory); the other planets are
    their system barycentres.
    """

    def __init__(self, package: str):
        import importlib

        from jplephem import Ephemeris

        self.package = package
        self.ephemeris = Ephemeris(importlib.import_module(package))
        self.name = f"JPL {package.upper()} ({package} package, jplephem Ephemeris)"

    def close(self):
        pass

    def barycentric(self, body: str, t_tdb_s):
        t = _as_times(t_tdb_s)
        # Whole and fractional day apart (jplephem's tdb, tdb2): one float JD rounds
        # the time to 40 us, about 1 m of the Earth's motion.
        jd, frac = np.full(t.shape, J2000_JD), t / DAY_S
        eph = self.ephemeris
        body = body.lower()
        try:
            if body == "earth":
                r_emb, v_emb = eph.position_and_velocity("earthmoon", jd, frac)
                r_moon, v_moon = eph.position_and_velocity("moon", jd, frac)
                r, v = r_emb - r_moon * eph.earth_share, v_emb - v_moon * eph.earth_share
            else:
                r, v = eph.position_and_velocity(body, jd, frac)
        except Exception as exc:  # jplephem: DateError outside the span, KeyError for names
            raise ProblemError(self.name, "", body, f"cannot evaluate ({exc})") from None
        # jplephem's packaged reader gives km and km/day, rows x, y, z.
        return (np.asarray(r).T.reshape(-1, 3), np.asarray(v).T.reshape(-1, 3) / DAY_S)


def heliocentric_ecliptic(source, body: str, t_tdb_s):
    """(r km, v km/s), (n, 3): ``body`` relative to the Sun, ecliptic J2000 axes."""
    rb, vb = source.barycentric(body, t_tdb_s)
    rs, vs = source.barycentric("sun", t_tdb_s)
    return (rb - rs) @ EQUATORIAL_TO_ECLIPTIC.T, (vb - vs) @ EQUATORIAL_TO_ECLIPTIC.T


def ecliptic_to_equatorial(vectors) -> np.ndarray:
    """(n, 3) vectors from ecliptic J2000 to EME2000 axes (inverse of the above)."""
    return np.asarray(vectors, dtype=float) @ EQUATORIAL_TO_ECLIPTIC


def equatorial_to_ecliptic(vectors) -> np.ndarray:
    """(n, 3) vectors from EME2000/ICRF axes to ecliptic J2000."""
    return np.asarray(vectors, dtype=float) @ EQUATORIAL_TO_ECLIPTIC.T
