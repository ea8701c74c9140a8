"""JPL DE Chebyshev tables for the compiled model (``core.ephemeris.KIND_CHEBYSHEV``).

``build_table(source, body, t_start_s, t_end_s)`` copies the part of a JPL DE
ephemeris covering a date span into one flat float64 table of Chebyshev
coefficients of the body's heliocentric position in ecliptic J2000 axes (km), and
the ``EPHEMERIS_SIZE`` header describing it; ``with_de_ephemeris(p, source, ...)``
appends such tables to a compiled parameter array and points the flyby body's (and a
planet target's) header at them. Epochs are TDB seconds past J2000.

Sources (never downloaded):

* ``"de421"``: the ``de421`` package (JPL DE421, Folkner, Williams and Boggs 2008,
  "The Planetary and Lunar Ephemeris DE 421", JPL IOM 343R-08-003 / IPN Progress
  Report 42-178; citations quoted from memory), read with ``jplephem.Ephemeris``
  (the packaged, "DEPRECATED" jplephem format: sets 'earthmoon' (Earth-Moon
  barycentre, solar-system barycentric), 'moon' (geocentric), 'sun', 'mercury' ...
  'neptune' (system barycentres), km, TDB Julian dates, ICRF axes; EMRAT among its
  constants);
* ``"de423"``: the ``de423`` package (JPL DE423, Folkner 2010, JPL IOM 343R-10-001,
  quoted from memory), same format;
* a path to an SPK kernel (``.bsp``, segment types 2 and 3) read with
  ``jplephem.spk.SPK``: chains 0->3->399 for the Earth, 0->N(->N99 when the file has
  the planet's centre) for the others, 0->10 for the Sun.

What a table holds:

* Earth: the Earth itself, not the Earth-Moon barycentre. Packaged:
  Earth = EMB - Moon_geocentric / (1 + EMRAT) (the definition of the barycentre with
  EMRAT = M_earth / M_moon); SPK: 0->3 plus 3->399. Other planets: their system
  barycentre (or centre, SPK) minus the Sun.
* Axes: ICRF rotated to ecliptic J2000 about x by the obliquity 84381.448 arcsec
  (``core.frames.OBLIQUITY_J2000_RAD``; the ~0.02 arcsec ICRF frame bias ignored, as
  in ``precise_ephemeris``).

Combination at build time (one series per body), not at evaluation time: the DE
granules of the terms are nested (DE421 Earth: EMB and Sun 16 days, Moon 4 days, all
starting at the ephemeris start), so on the finest granule every term is a
polynomial of degree < n (n the largest coefficient count) and the sum, rotated,
is re-expressed exactly (to rounding) as one Chebyshev series by interpolation at
the n Chebyshev-Gauss nodes (discrete orthogonality; Press et al., Numerical Recipes
sec. 5.8). Measured with ``benchmarks/de_design.py`` (DE421 Earth, 2-core EPYC): 123
ns per state from the one combined series against 357-374 ns for EMB, Moon and Sun
summed per evaluation (two runs), the two agreeing to 5e-7 km. Granules that do not
nest are refused.

Memory (measured, ``table_bytes``): ten years of the Earth from DE421 or DE423 is
914 granules x 3 components x 13 coefficients = 0.285 MB; of Venus, Mars, Jupiter or
Neptune 229 x 3 x 11 = 0.061 MB.
"""

import datetime as _dt
import importlib
from pathlib import Path
from typing import NamedTuple

import numpy as np

from leverage.astro.ephemerides import EQUATORIAL_TO_ECLIPTIC as ICRF_TO_ECLIPTIC
from leverage.core import layout as L
from leverage.core.constants import DAY_S, J2000_JD
from leverage.core.ephemeris import (
    CHEB_DE_NUMBER,
    CHEB_GRANULE_S,
    CHEB_GRANULES,
    CHEB_NAIF_ID,
    CHEB_NCOEF,
    CHEB_T_END,
    CHEB_T_START,
    CHEB_TABLE,
    EPHEMERIS_SIZE,
    KIND_CHEBYSHEV,
    KIND_MEAN_ELEMENTS,
)
from leverage.errors import NO_VALUE, ProblemError

PACKAGES = {"de421": 421, "de423": 423}
# NAIF codes (NAIF IDs required reading): system barycentres 1..8, Earth 399, Sun 10.
NAIF_IDS = {
    "mercury": 1,
    "venus": 2,
    "earth": 399,
    "mars": 4,
    "jupiter": 5,
    "saturn": 6,
    "uranus": 7,
    "neptune": 8,
}
_NAMES_BY_NAIF = {
    **{v: k for k, v in NAIF_IDS.items()},
    **{100 * v + 99: k for k, v in NAIF_IDS.items() if v < 10},
    3: "earth-moon",
}


class DeTable(NamedTuple):
    """A KIND_CHEBYSHEV header (its CHEB_TABLE slot still 0) and its flat table."""

    header: np.ndarray  # EPHEMERIS_SIZE slots, see core.ephemeris
    coefficients: np.ndarray  # (granules * 3 * ncoef,) float64, km


class _Series:
    """One Chebyshev position series: coefficients (granules, 3, n) km, uniform granules."""

    def __init__(self, coefficients, start_s, granule_s, label):
        self.c = np.asarray(coefficients, dtype=float)
        self.start_s = float(start_s)
        self.granule_s = float(granule_s)
        self.label = label

    @property
    def end_s(self):
        return self.start_s + self.c.shape[0] * self.granule_s

    def position(self, t_whole_s, dt_s):
        """(len(t), 3) km at interior epochs t_whole_s + dt_s (s TDB past J2000).

        t_whole_s on a granule boundary of a nested grid (whole seconds) and dt_s the
        small rest: the offset into this series' granule is then exact and s keeps
        full precision (one sum t - start of ~4e9 s would lose ~5e-7 s, 2e-5 km at
        30 km/s). Clenshaw's recurrence.
        """
        whole = np.asarray(t_whole_s, dtype=float) - self.start_s  # exact: whole seconds
        k = np.minimum(np.floor(whole / self.granule_s).astype(int), self.c.shape[0] - 1)
        s = (2.0 * ((whole - k * self.granule_s) + dt_s) / self.granule_s - 1.0)[:, None]
        coef = self.c[k]  # (len(t), 3, n)
        b1 = np.zeros(coef.shape[:2])
        b2 = np.zeros_like(b1)
        for j in range(coef.shape[2] - 1, 0, -1):
            b1, b2 = coef[:, :, j] + 2.0 * s * b1 - b2, b1
        return coef[:, :, 0] + s * b1 - b2


def _calendar(t_s: float) -> str:
    """Date of an epoch (TDB seconds past J2000), for messages."""
    return (_dt.datetime(2000, 1, 1, 12) + _dt.timedelta(seconds=float(t_s))).strftime("%Y-%m-%d")


def _span_text(a_s, b_s) -> str:
    return f"{_calendar(a_s)} .. {_calendar(b_s)} TDB"


def _planet_key(body_name: str, source: str) -> str:
    key = body_name.strip().lower()
    if key not in NAIF_IDS:
        raise ProblemError(
            source, "", body_name, f"no DE table for this body; known: {', '.join(NAIF_IDS)}"
        )
    return key


def _packaged_terms(module_name: str, body: str):
    """(weight, series) terms of the body's heliocentric position, and EMRAT."""
    from jplephem import Ephemeris

    try:
        module = importlib.import_module(module_name)
    except ImportError:
        raise ProblemError(
            module_name,
            "",
            NO_VALUE,
            f"ephemeris package not installed (pip install {module_name})",
        ) from None
    eph = Ephemeris(module)

    def series(name):
        c = eph.load(name)
        granule_days = (eph.jomega - eph.jalpha) / c.shape[0]
        return _Series(
            c, (eph.jalpha - J2000_JD) * DAY_S, granule_days * DAY_S, f"{module_name} {name}"
        )

    sun = series("sun")
    if body == "earth":
        terms = [
            (1.0, series("earthmoon")),
            (-1.0 / (1.0 + eph.EMRAT), series("moon")),
            (-1.0, sun),
        ]
    else:
        terms = [(1.0, series(body)), (-1.0, sun)]
    return terms, NAIF_IDS[body], PACKAGES[module_name]


def _spk_terms(path: str, body: str, t_start_s: float, t_end_s: float):
    """(weight, series) terms from an SPK kernel: chain to the body minus 0->10 (Sun)."""
    from jplephem.spk import SPK

    if not Path(path).is_file():
        raise ProblemError(path, "", NO_VALUE, "no such SPK file")
    try:
        kernel = SPK.open(path)
    except Exception as exc:  # jplephem raises ValueError/struct errors on bad files
        raise ProblemError(path, "", NO_VALUE, f"not a readable SPK kernel ({exc})") from None
    try:
        pairs = {(s.center, s.target) for s in kernel.segments}
        if body == "earth":
            chain, naif = [(0, 3), (3, 399)], 399
        else:
            bary = NAIF_IDS[body]
            centre = 100 * bary + 99
            chain, naif = (
                ([(0, bary), (bary, centre)], centre)
                if (bary, centre) in pairs
                else ([(0, bary)], bary)
            )
        terms = [(1.0, _spk_series(kernel, pair, path, body, t_start_s, t_end_s)) for pair in chain]
        terms.append((-1.0, _spk_series(kernel, (0, 10), path, body, t_start_s, t_end_s)))
        de_number = 0
        text = kernel.segments[0].source.decode("ascii", "replace")
        if text.upper().startswith("DE-"):
            digits = text[3:7]
            de_number = int(digits) if digits.isdigit() else 0
    finally:
        kernel.close()
    return terms, naif, de_number


def _spk_series(kernel, pair, path, body, t_start_s, t_end_s) -> _Series:
    segments = [s for s in kernel.segments if (s.center, s.target) == pair]
    if not segments:
        # The Earth-Moon barycentre is ~4,700 km from the geocentre: never a stand-in.
        raise ProblemError(path, "", body, f"kernel has no segment {pair[0]} -> {pair[1]}")
    covering = [s for s in segments if s.start_second <= t_start_s and s.end_second >= t_end_s]
    if not covering:
        spans = ", ".join(_span_text(s.start_second, s.end_second) for s in segments)
        raise ProblemError(
            path,
            "",
            body,
            f"{_span_text(t_start_s, t_end_s)} is outside segment {pair[0]} -> {pair[1]} ({spans})",
        )
    seg = covering[-1]
    if seg.data_type not in (2, 3):
        raise ProblemError(
            path,
            "",
            body,
            f"segment {pair[0]} -> {pair[1]} is SPK type "
            f"{seg.data_type}; only Chebyshev types 2 and 3 are read",
        )
    start_jd, granule_days, coef = seg.load_array()  # coef: (components, granules, n)
    c = np.ascontiguousarray(np.transpose(coef[:3], (1, 0, 2)))  # type 3: positions only
    return _Series(
        c,
        (start_jd - J2000_JD) * DAY_S,
        granule_days * DAY_S,
        f"{Path(path).name} {pair[0]}->{pair[1]}",
    )


def _combine(terms, t_start_s, t_end_s, source: str):
    """One Chebyshev table (granules, 3, n) of sum(weight * series) in ecliptic axes."""
    fine = min(terms, key=lambda wt: wt[1].granule_s)[1]
    g = fine.granule_s
    for _, ser in terms:
        ratio = ser.granule_s / g
        shift = (ser.start_s - fine.start_s) / g
        if abs(ratio - round(ratio)) > 1e-9 or abs(shift - round(shift)) > 1e-9:
            raise ProblemError(
                source,
                "",
                NO_VALUE,
                f"granules of {ser.label} and {fine.label} do not nest; "
                "cannot combine them into one table",
            )
    cover_start = max(s.start_s for _, s in terms)
    cover_end = min(s.end_s for _, s in terms)
    if not (t_start_s >= cover_start and t_end_s <= cover_end and t_start_s < t_end_s):
        raise ProblemError(
            source,
            "",
            NO_VALUE,
            f"{_span_text(t_start_s, t_end_s)} is outside the ephemeris span "
            f"{_span_text(cover_start, cover_end)}",
        )
    k0 = int(np.floor((t_start_s - fine.start_s) / g))
    k1 = int(np.ceil((t_end_s - fine.start_s) / g))
    n_gran = k1 - k0
    start = fine.start_s + k0 * g
    if start < cover_start or start + n_gran * g > cover_end:  # ends off the granule grid
        raise ProblemError(
            source,
            "",
            NO_VALUE,
            f"{_span_text(t_start_s, t_end_s)} rounded out to whole granules "
            f"leaves the ephemeris span {_span_text(cover_start, cover_end)}",
        )
    n = max(s.c.shape[2] for _, s in terms)
    theta = np.pi * (np.arange(n) + 0.5) / n
    nodes = np.cos(theta)  # Chebyshev-Gauss nodes on [-1, 1]
    t_whole = np.repeat(start + np.arange(n_gran) * g, n)
    dt = np.tile(0.5 * (nodes + 1.0) * g, n_gran)
    pos = sum(w * s.position(t_whole, dt) for w, s in terms) @ ICRF_TO_ECLIPTIC.T
    values = pos.reshape(n_gran, n, 3)
    # c_m = (2/n) sum_j f(x_j) cos(m theta_j); c_0 halved. Exact for degree < n.
    cos_mt = np.cos(np.outer(np.arange(n), theta))  # (m, j)
    coef = (2.0 / n) * np.einsum("mj,gjc->gcm", cos_mt, values)
    coef[:, :, 0] *= 0.5
    return np.ascontiguousarray(coef), start, g


def build_table(source, body_name: str, t_start_s: float, t_end_s: float) -> DeTable:
    """Header and coefficient table of ``body_name`` over [t_start_s, t_end_s].

    source: "de421", "de423" (installed packages) or a path to an SPK ``.bsp`` file.
    The table covers whole granules, so it may start a little before t_start_s and
    end a little after t_end_s (at most one granule, 4 days for the DE421 Earth).
    Output: heliocentric ecliptic J2000 position coefficients, km (the velocity is
    their derivative, evaluated in ``core.ephemeris.chebyshev_state``).
    ProblemError (one line) for an unknown source or body, or dates outside the
    ephemeris.
    """
    source = str(source)
    label = Path(source).name if source not in PACKAGES else source
    body = _planet_key(body_name, label)
    if source in PACKAGES:
        terms, naif, de_number = _packaged_terms(source, body)
    elif source.lower().endswith(".bsp") or Path(source).exists():
        terms, naif, de_number = _spk_terms(source, body, t_start_s, t_end_s)
    else:
        raise ProblemError(
            source,
            "",
            NO_VALUE,
            f"unknown ephemeris source; use {', '.join(PACKAGES)} or a path to an SPK .bsp file",
        )
    coef, start, granule = _combine(terms, float(t_start_s), float(t_end_s), label)
    header = np.zeros(EPHEMERIS_SIZE)
    header[0] = KIND_CHEBYSHEV
    header[CHEB_GRANULES] = coef.shape[0]
    header[CHEB_NCOEF] = coef.shape[2]
    header[CHEB_T_START] = start
    header[CHEB_GRANULE_S] = granule
    header[CHEB_T_END] = start + coef.shape[0] * granule
    header[CHEB_NAIF_ID] = naif
    header[CHEB_DE_NUMBER] = de_number
    return DeTable(header, coef.ravel())


def table_bytes(table: DeTable) -> int:
    """Memory of one table in the parameter array, bytes (header included)."""
    return table.coefficients.nbytes + table.header.nbytes


def problem_span_s(compiled, margin_days: float = 1.0) -> tuple:
    """(start, end) s TDB past J2000 that a compiled problem's decision bounds can reach.

    Launch window open to window close + longest loop (+ longest target leg), widened
    by ``margin_days`` either side.
    """
    lo, hi = compiled.lower, compiled.upper
    end_days = hi[L.X_LAUNCH_EPOCH_DAYS] + hi[L.X_LOOP_DURATION_DAYS]
    if compiled.params[L.P_HAS_TARGET] == 1.0:
        end_days += hi[L.X_TARGET_LEG_DAYS]
    return ((lo[L.X_LAUNCH_EPOCH_DAYS] - margin_days) * DAY_S, (end_days + margin_days) * DAY_S)


def _body_in_header(header) -> str | None:
    """The planet a header describes: by its NAIF code (DE table) or its Standish row."""
    if header[0] == KIND_CHEBYSHEV:
        return _NAMES_BY_NAIF.get(int(header[CHEB_NAIF_ID]))
    if header[0] == KIND_MEAN_ELEMENTS:
        from leverage.astro import bodies

        for name, body in bodies.PLANETS.items():
            if np.array_equal(header, body.ephemeris_array()):
                return name
    return None


def with_de_ephemeris(
    p, source, t_start_s: float, t_end_s: float, body: str | None = None, target: str | None = None
) -> np.ndarray:
    """A new parameter array: ``p`` with the flyby body (and a planet target) on DE tables.

    The fixed slots of ``p`` are kept; any tables already appended are dropped and
    rebuilt. ``body`` / ``target`` name the planets; when None they are recognised
    from their headers (Standish mean elements of ``bodies.PLANETS``, or an earlier
    DE table). A target that is not a planet (osculating elements) is left as it is.
    Evaluations outside [t_start_s, t_end_s] (rounded out to whole granules) fail.
    """
    base = np.array(p[: L.N_PARAMS], dtype=float)
    label = Path(str(source)).name
    slots = [(L.P_BODY_EPH, body, "flyby body")]
    if base[L.P_HAS_TARGET] == 1.0:
        slots.append((L.P_TARGET_EPH, target, "target"))
    tables = []
    offset = L.N_PARAMS
    for slot, name, role in slots:
        header = base[slot : slot + EPHEMERIS_SIZE]
        name = name or _body_in_header(header)
        if name is None:
            if role == "target":
                continue  # a small body on its own elements
            raise ProblemError(
                label, "", NO_VALUE, f"the {role} of this parameter array is not a known planet"
            )
        table = build_table(source, name, t_start_s, t_end_s)
        table.header[CHEB_TABLE] = offset
        base[slot : slot + EPHEMERIS_SIZE] = table.header
        tables.append(table.coefficients)
        offset += table.coefficients.size
    return np.concatenate([base, *tables])
