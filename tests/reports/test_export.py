"""Hand-off export (leverage.export, leverage.oem): CSV state table and CCSDS OEM.

Outside sources:
- CCSDS 502.0-B-2, Orbit Data Messages (Blue Book, 2009), section 5 (OEM in KVN):
  header keywords CCSDS_OEM_VERS, CREATION_DATE, ORIGINATOR (required, in that order,
  COMMENT allowed after the version line); metadata between META_START and
  META_STOP with OBJECT_NAME, OBJECT_ID, CENTER_NAME, REF_FRAME, TIME_SYSTEM,
  START_TIME, STOP_TIME required, in the standard's order (optional REF_FRAME_EPOCH,
  USEABLE_START/STOP_TIME, INTERPOLATION, INTERPOLATION_DEGREE in their places); data
  lines "epoch x y z x_dot y_dot z_dot" in km and km/s. Recalled from memory, written
  out below as the lists the test checks against;
- the J2000 obliquity 84381.448 arcsec (IAU 1976) between ecliptic and EME2000 axes;
- astropy's UTC/TDB conversion (leap seconds; TDB - UTC = 69.184 s + a periodic term
  under 2 ms since 2017, from memory).
The fixture is a real small run of the (invented) demo problem.
"""

import csv
import io
import math
from datetime import datetime

import numpy as np
import pytest

from leverage.astro.ephemerides import ecliptic_to_equatorial
from leverage.cli import main
from leverage.fileio import read_json
from leverage.record.arcs import design_arcs, event_states
from leverage.reports import oem
from leverage.reports.export import csv_text, oem_text, tdb_seconds

# From CCSDS 502.0-B-2 section 5 (from memory): required keywords in required order.
STANDARD_HEADER = ["CCSDS_OEM_VERS", "CREATION_DATE", "ORIGINATOR"]
STANDARD_METADATA = [
    "OBJECT_NAME",
    "OBJECT_ID",
    "CENTER_NAME",
    "REF_FRAME",
    "TIME_SYSTEM",
    "START_TIME",
    "STOP_TIME",
]
STEP_H = 24.0


@pytest.fixture(scope="module")
def record(demo_result):
    return read_json(demo_result / "best.json")


@pytest.fixture(scope="module")
def oem_file(record):
    return oem_text(record, STEP_H * 3600.0, created=datetime(2030, 1, 2, 3, 4, 5))


def _keywords(lines):
    return [ln.split("=")[0].strip() for ln in lines if "=" in ln]


def test_oem_header_and_metadata_follow_the_standard(oem_file):
    lines = oem_file.splitlines()
    assert lines[0] == "CCSDS_OEM_VERS = 2.0"
    first_meta = lines.index("META_START")
    header = [ln for ln in lines[:first_meta] if ln and not ln.startswith("COMMENT")]
    assert _keywords(header) == STANDARD_HEADER
    assert "CREATION_DATE = 2030-01-02T03:04:05" in header
    blocks = [k for k, ln in enumerate(lines) if ln == "META_START"]
    assert len(blocks) == 3  # one segment per arc: launch-DSM, DSM-flyby, outgoing
    for start in blocks:
        stop = lines.index("META_STOP", start)
        meta = [ln for ln in lines[start + 1 : stop] if not ln.startswith("COMMENT")]
        assert _keywords(meta) == STANDARD_METADATA
        values = dict(ln.split(" = ", 1) for ln in meta)
        assert values["CENTER_NAME"] == "SUN"
        assert values["REF_FRAME"] == "EME2000"
        assert values["TIME_SYSTEM"] == "TDB"
        # COMMENT lines of a metadata block come first
        comments = [k for k in range(start + 1, stop) if lines[k].startswith("COMMENT")]
        assert comments == list(range(start + 1, start + 1 + len(comments)))
    assert any("Preliminary patched-conic design" in ln for ln in lines[:first_meta])


def test_oem_data_lines_have_an_epoch_and_six_numbers(oem_file):
    lines = oem_file.splitlines()
    stop = lines.index("META_STOP")
    data = [ln for ln in lines[stop + 1 : lines.index("META_START", stop)] if ln]
    for ln in data:
        parts = ln.split()
        assert len(parts) == 7
        datetime.strptime(parts[0], "%Y-%m-%dT%H:%M:%S.%f")
        assert all(math.isfinite(float(p)) for p in parts[1:])


def test_oem_reads_back_to_the_same_states(oem_file, record):
    message = oem.read(oem_file)
    arcs = design_arcs(record, step_s=STEP_H * 3600.0)
    assert len(message.segments) == len(arcs)
    for seg, arc in zip(message.segments, arcs):
        t = tdb_seconds(seg.epochs)
        assert np.max(np.abs(t - arc.t_tdb_s)) < 2e-6  # microsecond epochs
        r = ecliptic_to_equatorial(arc.r_km)
        v = ecliptic_to_equatorial(arc.v_km_s)
        assert np.max(np.abs(seg.states[:, :3] - r)) < 1e-6  # 1 mm, written to 1 mm
        assert np.max(np.abs(seg.states[:, 3:] - v)) < 1e-9  # written to 1 mm/s / 1000
        assert seg.meta("START_TIME") == seg.epochs[0]
        assert seg.meta("STOP_TIME") == seg.epochs[-1]
        assert np.all(np.diff(t) > 0)
    # segments meet at the events: the DSM and flyby epochs end one and start the next
    ev = event_states(record)
    assert tdb_seconds([message.segments[0].epochs[-1]])[0] == pytest.approx(
        ev["dsm"]["t"], abs=2e-6
    )
    assert tdb_seconds([message.segments[1].epochs[-1]])[0] == pytest.approx(
        ev["flyby"]["t"], abs=2e-6
    )


def test_eme2000_states_are_the_ecliptic_ones_rotated_by_the_obliquity(oem_file, record):
    seg = oem.read(oem_file).segments[0]
    ev = event_states(record)
    eps = math.radians(84381.448 / 3600.0)
    x, y, z = ev["launch"]["r"]
    expected = [x, y * math.cos(eps) - z * math.sin(eps), y * math.sin(eps) + z * math.cos(eps)]
    assert np.allclose(seg.states[0, :3], expected, rtol=0, atol=1e-6)


@pytest.mark.parametrize(
    "broken, message",
    [
        (lambda t: t.replace("CCSDS_OEM_VERS = 2.0\n", ""), "must start with CCSDS_OEM_VERS"),
        (lambda t: t.replace("ORIGINATOR", "ORIGIN", 1), "missing required keyword ORIGINATOR"),
        (lambda t: t.replace("REF_FRAME = EME2000\n", "", 1), "missing required keyword REF_FRAME"),
        (lambda t: _swap(t, "CENTER_NAME = SUN", "REF_FRAME = EME2000"), "out of order"),
        (
            lambda t: t.replace("CENTER_NAME = SUN", "CENTER_NAME = SUN\nCOLOUR = RED", 1),
            "COLOUR not allowed",
        ),
        (lambda t: t.replace("META_STOP", "META_END", 1), "expected 'KEYWORD = value'"),
        (lambda t: _first_data_line_plus(t, " 1.0"), "bad data line"),
        (lambda t: _first_data_line_plus(t, " 1.0 2.0 3.0"), None),  # with accelerations: fine
    ],
)
def test_reader_refuses_broken_messages(oem_file, broken, message):
    if message is None:
        oem.read(broken(oem_file))
        return
    with pytest.raises(ValueError, match=message):
        oem.read(broken(oem_file))


def _first_data_line_plus(text, extra):
    lines = text.splitlines()
    k = lines.index("META_STOP") + 2
    lines[k] += extra
    return "\n".join(lines)


def _swap(text, a, b):
    return text.replace(a, "@@", 1).replace(b, a, 1).replace("@@", b, 1)


def test_reader_refuses_epochs_outside_start_stop(oem_file):
    lines = oem_file.splitlines()
    k = next(i for i, ln in enumerate(lines) if ln.startswith("STOP_TIME"))
    lines[k] = "STOP_TIME = 2000-01-01T00:00:00.000000"
    with pytest.raises(ValueError, match="outside START_TIME..STOP_TIME"):
        oem.read("\n".join(lines))


def test_csv_table_names_frame_and_both_time_scales(record):
    rows = list(csv.DictReader(io.StringIO(csv_text(record, 48 * 3600.0, "ecliptic"))))
    arcs = design_arcs(record, step_s=48 * 3600.0)
    assert len(rows) == sum(a.t_tdb_s.size for a in arcs)
    assert {r["frame"] for r in rows} == {"heliocentric ecliptic J2000"}
    first = rows[0]
    assert np.allclose(
        [float(first[c]) for c in ("x_km", "y_km", "z_km")], arcs[0].r_km[0], rtol=0, atol=1e-6
    )
    assert float(first["tdb_seconds_past_j2000"]) == pytest.approx(arcs[0].t_tdb_s[0], abs=1e-6)
    # TDB - UTC is 69.184 s (TAI-UTC 37 s + 32.184 s) give or take under 2 ms
    utc = datetime.fromisoformat(first["epoch_utc"])
    tdb = datetime.fromisoformat(first["epoch_tdb"])
    assert (tdb - utc).total_seconds() == pytest.approx(69.184, abs=0.002)
    assert first["epoch_utc"][:10] == event_states(record)["launch"]["utc"][:10]
    eme = list(csv.DictReader(io.StringIO(csv_text(record, 48 * 3600.0))))
    assert eme[0]["frame"].startswith("heliocentric EME2000")


def test_export_command_writes_files_and_refuses_bad_options(demo_result, tmp_path, capsys):
    out = tmp_path / "design.oem"
    assert main(["export", str(demo_result), "--format", "oem", "--output", str(out)]) == 0
    assert oem.read(out.read_text()).segments
    out_csv = tmp_path / "design.csv"
    assert (
        main(
            [
                "export",
                str(demo_result),
                "--format",
                "csv",
                "--step-hours",
                "12",
                "--output",
                str(out_csv),
            ]
        )
        == 0
    )
    assert out_csv.read_text().startswith("arc,epoch_utc,epoch_tdb")
    capsys.readouterr()
    assert main(["export", str(demo_result), "--format", "oem", "--step-hours", "0"]) == 2
    assert "--step-hours" in capsys.readouterr().err
    assert main(["export", str(demo_result), "--format", "oem", "--frame", "ecliptic"]) == 2
    assert "EME2000 only" in capsys.readouterr().err
    assert main(["export", str(tmp_path), "--format", "csv"]) == 2
    assert "no best.json" in capsys.readouterr().err
