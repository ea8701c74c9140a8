"""Hand-off files of a design: a sampled state table (CSV) and a CCSDS OEM (KVN).

States are the design's conic arcs (``leverage.arcs``), sampled every ``step_s``
seconds plus each arc's end, Sun-centred. Frames:

* ``eme2000`` (default): the ecliptic J2000 states rotated about x by the J2000
  obliquity 84381.448 arcsec onto the mean equator and equinox of J2000, which the
  OEM names ``REF_FRAME = EME2000`` (the ~0.02 arcsec frame bias to ICRF is below the
  accuracy of a patched-conic design);
* ``ecliptic`` (CSV only): heliocentric ecliptic J2000 as computed. CCSDS has no
  common name for a Sun-centred ecliptic frame, so the OEM is always written in
  EME2000.

Epochs: TDB (the model's time scale) and UTC (through astropy, leap seconds from its
table). The OEM states ``TIME_SYSTEM = TDB``. One OEM segment per arc: the DSM and
the flyby change the velocity, so a reader must not interpolate across them.
"""

import csv
import io
from datetime import datetime, timezone

import numpy as np

from leverage.about import CAUTION, __version__
from leverage.core.constants import DAY_S, J2000_JD
from leverage.fileio import write_atomic
from leverage.reports import oem

# astropy (Time, and the frames through astro.ephemerides) and the arcs' kernels load in
# the functions that use them: `leverage export --help` and the other commands that
# build the command line need only FRAMES and DEFAULT_STEP_HOURS from here.

FRAMES = {
    "eme2000": "heliocentric EME2000 (mean equator and equinox of J2000)",
    "ecliptic": "heliocentric ecliptic J2000",
}
CSV_COLUMNS = [
    "arc",
    "epoch_utc",
    "epoch_tdb",
    "tdb_seconds_past_j2000",
    "x_km",
    "y_km",
    "z_km",
    "vx_km_s",
    "vy_km_s",
    "vz_km_s",
    "frame",
]
DEFAULT_STEP_HOURS = 24.0


def iso_epochs(t_tdb_s, scale: str) -> list:
    """ISO 'YYYY-MM-DDThh:mm:ss.ffffff' strings of TDB seconds past J2000, in ``scale``."""
    from leverage.astro.times import Time  # astro.times sets astropy's offline IERS use

    t = np.atleast_1d(np.asarray(t_tdb_s, dtype=float))
    when = Time(np.full(t.shape, J2000_JD), t / DAY_S, format="jd", scale="tdb")
    when = getattr(when, scale)
    when.precision = 6
    return list(np.atleast_1d(when.isot))


def tdb_seconds(epochs) -> np.ndarray:
    """TDB seconds past J2000 of ISO epochs given in TDB."""
    from leverage.astro.times import Time

    when = Time(list(epochs), format="isot", scale="tdb")
    return (when.jd1 - J2000_JD) * DAY_S + when.jd2 * DAY_S


def sampled_arcs(record, step_s: float, frame: str = "eme2000") -> list:
    """The record's arcs sampled every step_s, states rotated into ``frame``."""
    if frame not in FRAMES:
        raise ValueError(f"unknown frame {frame!r}; known: {', '.join(FRAMES)}")
    from leverage.astro.ephemerides import ecliptic_to_equatorial
    from leverage.record.arcs import design_arcs

    arcs = design_arcs(record, step_s=step_s)
    if frame == "eme2000":
        for arc in arcs:
            arc.r_km = ecliptic_to_equatorial(arc.r_km)
            arc.v_km_s = ecliptic_to_equatorial(arc.v_km_s)
            arc.frame = FRAMES["eme2000"]
    return arcs


def csv_text(record, step_s: float, frame: str = "eme2000") -> str:
    """The state table as CSV text (columns ``CSV_COLUMNS``)."""
    buf = io.StringIO()
    out = csv.writer(buf, lineterminator="\n")
    out.writerow(CSV_COLUMNS)
    for arc in sampled_arcs(record, step_s, frame):
        utc = iso_epochs(arc.t_tdb_s, "utc")
        tdb = iso_epochs(arc.t_tdb_s, "tdb")
        for k in range(arc.t_tdb_s.size):
            out.writerow(
                [arc.label, utc[k], tdb[k], f"{arc.t_tdb_s[k]:.6f}"]
                + [f"{v:.6f}" for v in arc.r_km[k]]
                + [f"{v:.9f}" for v in arc.v_km_s[k]]
                + [FRAMES[frame]]
            )
    return buf.getvalue()


def oem_text(record, step_s: float, created: datetime | None = None) -> str:
    """The design as a CCSDS OEM (KVN), one segment per arc, EME2000, TDB."""
    created = created or datetime.now(timezone.utc)
    problem = record["problem"]
    header = [
        ("CCSDS_OEM_VERS", "2.0"),
        (
            "COMMENT",
            f"leverage design for problem '{problem['name']}' "
            f"(sha256 {problem['sha256'][:12]}), status {record.get('status', '')}",
        ),
        ("COMMENT", CAUTION),
        (
            "COMMENT",
            "Two-body (Sun-only) conic arcs of a patched-conic design; "
            "velocities jump at the DSM and the flyby between segments.",
        ),
        ("CREATION_DATE", created.strftime("%Y-%m-%dT%H:%M:%S")),
        ("ORIGINATOR", f"leverage {__version__}"),
    ]
    segments = []
    for arc in sampled_arcs(record, step_s, "eme2000"):
        epochs = iso_epochs(arc.t_tdb_s, "tdb")
        meta = [
            ("OBJECT_NAME", f"{problem['name']} design"),
            ("OBJECT_ID", f"LEVERAGE-{problem['sha256'][:12]}"),
            ("CENTER_NAME", "SUN"),
            ("REF_FRAME", "EME2000"),
            ("TIME_SYSTEM", "TDB"),
            ("START_TIME", epochs[0]),
            ("STOP_TIME", epochs[-1]),
        ]
        comments = [f"{arc.label}: conic arc, {len(epochs)} states"]
        segments.append(oem.Segment(meta, epochs, np.hstack([arc.r_km, arc.v_km_s]), comments))
    return oem.write(header, segments)


def export(
    record,
    folder,
    fmt: str,
    step_hours: float = DEFAULT_STEP_HOURS,
    frame: str = "eme2000",
    path=None,
):
    """Write states.csv or states.oem into ``folder`` (or ``path``); return the path."""
    from pathlib import Path

    step_s = float(step_hours) * 3600.0
    if fmt == "csv":
        text = csv_text(record, step_s, frame)
        path = Path(path) if path else Path(folder) / "states.csv"
    elif fmt == "oem":
        if frame != "eme2000":
            raise ValueError("the OEM is written in EME2000 only")
        text = oem_text(record, step_s)
        path = Path(path) if path else Path(folder) / "states.oem"
    else:
        raise ValueError(f"unknown format {fmt!r}")
    write_atomic(path, text)
    return path
