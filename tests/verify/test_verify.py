"""Verification of a design (leverage.verify, ephemeris_check, nbody_check, integrate,
precise_ephemeris, afterrun).

Outside sources:
- astropy's built-in planetary ephemeris (ERFA epv00/plan94) as the outside planet
  positions, and scipy's solve_ivp (DOP853) as an independent integrator: the conic
  arcs must agree with it to a small fraction of a kilometre;
- the JPL SPK file layout (NAIF "SPK Required Reading" and "DAF Required Reading":
  a DAF file record, summary/name records, type 2 Chebyshev segments with MID, RADIUS,
  coefficients and a trailer INIT, INTLEN, RSIZE, N), recalled from memory: a small
  synthetic kernel is written here with jplephem's DAF writer from astropy's builtin
  positions and must be read back through the SPK path to the same positions;
- the Earth-Moon barycentre lies about 4,700 km from the geocentre (from memory), and
  Standish's mean elements are good to some thousands of km for the EMB (his stated
  accuracy, from memory): bounds below are generous multiples of these.
The fixture is a real small run of the (invented) demo problem.
"""
import json
import math
import shutil
import struct

import numpy as np
import pytest
from numpy.polynomial import chebyshev

from leverage.astro import bodies
from leverage.astro.ephemerides import (
    BuiltinEphemeris,
    SpkEphemeris,
    ecliptic_to_equatorial,
    equatorial_to_ecliptic,
    heliocentric_ecliptic,
)
from leverage.cli import main
from leverage.core.kepler import propagate
from leverage.errors import ProblemError
from leverage.fileio import read_json
from leverage.record.arcs import event_states
from leverage.run import afterrun
from leverage.verify.ephemeris_check import check_with_ephemeris
from leverage.verify.integrate import PointMassField, integrate_point_masses
from leverage.verify.nbody_check import departure_periapsis
from leverage.verify.report import render, verify_record

DAY = 86400.0


# ------------------------------------------------------------------ synthetic SPK

def _empty_daf(path, nd=2, ni=6):
    """A DAF/SPK file with no arrays: file record, one empty summary and name record."""
    ftpstr = b"FTPSTR:\r:\n:\r\n:\r\x00:\x81:\x10\xce:ENDFTP"
    record = struct.pack("<8sII60sIII8s603s28s297s", b"DAF/SPK ", nd, ni,
                         b"leverage synthetic test kernel".ljust(60), 2, 2, 3 * 128 + 1,
                         b"LTL-IEEE", b"\0" * 603, ftpstr, b"\0" * 297)
    summary = struct.pack("<ddd", 0.0, 0.0, 0.0).ljust(1024, b"\0")
    names = b" " * 1024
    path.write_bytes(record + summary + names)


def write_synthetic_spk(path, t0, t1, interval_days=8.0, degree=13, skip=()):
    """Type 2 SPK segments fitted to astropy's builtin positions over [t0, t1] (TDB s).

    Segments: 0->10 (Sun), 0->1..8 (planet positions as 'barycentres'), 0->3 (EMB),
    3->399 (Earth). Chebyshev fits on ``interval_days`` records, ``degree``.
    """
    from jplephem.daf import DAF

    src = BuiltinEphemeris()
    n_rec = int(math.ceil((t1 - t0) / (interval_days * DAY)))
    intlen = interval_days * DAY
    nodes = np.cos(np.pi * (np.arange(degree + 1) + 0.5) / (degree + 1))  # Chebyshev nodes
    mids = t0 + intlen * (np.arange(n_rec) + 0.5)
    times = (mids[:, None] + nodes[None, :] * intlen / 2).ravel()

    def positions(name):
        return src.barycentric(name, times)[0].reshape(n_rec, degree + 1, 3)

    emb = positions("earth-moon-barycenter")
    bodies_pos = {(0, 10): positions("sun"), (0, 3): emb,
                  (3, 399): positions("earth") - emb}
    for k, name in enumerate(["mercury", "venus", "earth", "mars", "jupiter", "saturn",
                              "uranus", "neptune"], start=1):
        if k != 3:
            bodies_pos[(0, k)] = positions(name)
    _empty_daf(path)
    with open(path, "r+b") as fh:
        daf = DAF(fh)
        for (center, target), pos in bodies_pos.items():
            if (center, target) in skip:
                continue
            rows = []
            for j in range(n_rec):
                coef = [chebyshev.chebfit(nodes, pos[j, :, c], degree) for c in range(3)]
                rows.append(np.concatenate([[mids[j], intlen / 2], *coef]))
            rsize = 2 + 3 * (degree + 1)
            data = np.concatenate([np.ravel(rows), [t0, intlen, rsize, n_rec]])
            daf.add_array(f"synthetic {center}->{target}".encode(),
                          (t0, t0 + n_rec * intlen, target, center, 1, 2), data)
    return path


# ------------------------------------------------------------------ fixtures

@pytest.fixture(scope="module")
def record(demo_result):
    return read_json(demo_result / "best.json")


@pytest.fixture(scope="module")
def spk_file(record, tmp_path_factory):
    ev = event_states(record)
    path = tmp_path_factory.mktemp("spk") / "synthetic.bsp"
    return write_synthetic_spk(path, ev["launch"]["t"] - 10 * DAY, ev["flyby"]["t"] + 10 * DAY)


@pytest.fixture(scope="module")
def report(record):
    return verify_record(record)


def _finite_numbers(value):
    if isinstance(value, dict):
        for v in value.values():
            yield from _finite_numbers(v)
    elif isinstance(value, list):
        for v in value:
            yield from _finite_numbers(v)
    elif isinstance(value, float):
        yield value


# ------------------------------------------------------------------ tests

def test_a_run_writes_its_verification(demo_result):
    text = (demo_result / "verification.txt").read_text()
    data = json.loads((demo_result / "verification.json").read_text())
    assert "CAUTION" in text and "It does not cover" in text
    assert data["ephemeris"][0]["source"].startswith("astropy builtin")


def test_every_number_is_finite(report):
    numbers = list(_finite_numbers(report))
    assert len(numbers) > 40
    assert all(math.isfinite(v) for v in numbers)


def test_conic_arcs_agree_with_scipy_two_body_integration(report):
    """Kepler propagation / Lambert arcs vs solve_ivp DOP853 (rtol 1e-12): tiny mismatch."""
    arcs = report["two_body"]["arcs"]
    assert [a["end"] for a in arcs] == ["DSM", "flyby", "end of outgoing span"]
    for arc in arcs:
        assert arc["position_mismatch_km"] < 0.05, arc   # 50 m over hundreds of days
        assert arc["velocity_mismatch_m_s"] < 1e-3, arc


def test_outside_ephemeris_moves_the_design_a_little(report, record):
    eph = report["ephemeris"][0]
    # the "design" column is the record's own numbers
    assert eph["dsm_km_s"]["design"] == record["derived"]["dsm"]["value"]
    assert eph["flyby_vinf_in_km_s"]["design"] == record["derived"]["flyby_vinf_in"]["value"]
    # EMB (search) vs geocentre (check) plus Standish's error: thousands of km, not millions
    # (a frame mistake, e.g. an equatorial/ecliptic mix-up, would give ~1e7 km).
    for key in ("body_position_offset_at_launch_km", "body_position_offset_at_flyby_km"):
        assert 100.0 < eph[key] < 30_000.0, (key, eph[key])
    for key in ("body_velocity_offset_at_launch_m_s", "body_velocity_offset_at_flyby_m_s"):
        assert eph[key] < 50.0, (key, eph[key])
    assert eph["lambert_solved"]
    assert abs(eph["dsm_km_s"]["change"]) < 0.05
    assert abs(eph["flyby_vinf_in_km_s"]["change"]) < 0.05



def test_limits_are_rechecked_with_the_changed_numbers(report, record):
    limits = {row["limit"]: row for row in report["ephemeris"][0]["limits"]}
    eph = report["ephemeris"][0]
    assert "min_outgoing_vinf" in limits  # the demo requires 7.5 km/s outgoing
    row = limits["min_outgoing_vinf"]
    assert row["check"] == pytest.approx(row["design"] + eph["flyby_vinf_in_km_s"]["change"])
    assert row["holds"] == (row["check"] >= 0)


def test_point_mass_cases_are_reported_and_retargeted(report):
    pm = report["point_masses"]
    assert pm["other_planets"]["left_out"] == "Earth"
    for case in (pm["other_planets"], pm["all_planets"]):
        assert case["retarget_end_miss_km"] < 1.0 and case["retarget_converged"]
        assert 0.0 < case["end_position_difference_km"] < 1.0e8
        assert abs(case["retargeted_dsm_km_s"]["change"]) < 0.5
    # ~0.9 million km for the Earth: Laplace radius a (m/M)^(2/5) (Curtis, sec. 8.4)
    assert pm["all_planets"]["soi_radius_km"] == pytest.approx(9.25e5, rel=0.01)


def test_text_says_what_is_and_is_not_covered(report):
    text = render(report)
    for phrase in ("This check covers", "It does not cover", "finite burns",
                   "solar radiation pressure", "Sun and planets as point masses"):
        assert phrase in text


def test_point_mass_integration_with_only_a_fixed_sun_is_two_body(record):
    """The point-mass machinery (table, splines, integrator) reproduces a conic when the
    only mass is a Sun held at the origin."""
    class FixedSun:
        name = "fixed Sun"

        def barycentric(self, body, t):
            n = np.atleast_1d(t).size
            return np.zeros((n, 3)), np.zeros((n, 3))

    ev = event_states(record)
    t0, t1 = ev["launch"]["t"], ev["dsm"]["t"]
    field = PointMassField(FixedSun(), {"sun": bodies.GM_SUN_KM3_S2}, t0, t1)
    r, v = integrate_point_masses(field, t0, ev["launch"]["r"], ev["launch"]["v"], t1)
    assert np.linalg.norm(r - ev["dsm"]["r"]) < 0.05
    assert np.linalg.norm(v - ev["dsm"]["v_before"]) < 1e-8


def test_departure_periapsis_leaves_along_the_asymptote():
    """Two-body check of the departure hyperbola: periapsis, speed, far-field velocity."""
    mu = bodies.planet("earth").gm_km3_s2
    vinf = np.array([3.0, -2.0, 1.0])
    rp = 6578.0
    r, v = departure_periapsis(mu, vinf, rp)
    assert np.linalg.norm(r) == pytest.approx(rp)
    assert abs(r @ v) < 1e-6 * rp * np.linalg.norm(v)
    # vis-viva on a hyperbola: v^2 = v_inf^2 + 2 mu / r
    assert v @ v == pytest.approx(vinf @ vinf + 2 * mu / rp)
    far_r, far_v, ok = propagate(mu, r, v, 400 * DAY)
    assert ok
    cos = far_v @ vinf / np.linalg.norm(far_v) / np.linalg.norm(vinf)
    assert math.degrees(math.acos(min(1.0, cos))) < 0.05


def test_frame_rotation_round_trip():
    vec = np.array([[1.0, 2.0, 3.0], [-4.0, 0.5, 0.25]])
    assert np.allclose(equatorial_to_ecliptic(ecliptic_to_equatorial(vec)), vec)
    # the ecliptic pole is at declination 90 - 23.439 deg in EME2000 (IAU 1976 obliquity)
    pole = ecliptic_to_equatorial(np.array([[0.0, 0.0, 1.0]]))[0]
    assert math.degrees(math.asin(pole[2])) == pytest.approx(90 - 84381.448 / 3600, abs=1e-9)


def test_builtin_earth_is_near_the_search_earth(record):
    ev = event_states(record)
    r, v = heliocentric_ecliptic(BuiltinEphemeris(), "earth", ev["launch"]["t"])
    assert r.shape == (1, 3)
    assert np.linalg.norm(r[0] - ev["launch"]["r"]) < 30_000.0
    assert np.linalg.norm(r[0]) / bodies.AU_KM == pytest.approx(1.0, abs=0.02)


def test_synthetic_spk_reads_back_to_the_positions_it_was_made_from(spk_file, record):
    spk = SpkEphemeris(spk_file)
    try:
        assert spk.chain("earth") == [(0, 3), (3, 399)]
        assert spk.chain("mars") == [(0, 4)]
        t = np.linspace(event_states(record)["launch"]["t"], event_states(record)["flyby"]["t"],
                        7)
        builtin = BuiltinEphemeris()
        for body in ("sun", "earth", "venus", "jupiter"):
            r_spk, v_spk = spk.barycentric(body, t)
            r_ref, _ = builtin.barycentric(body, t)
            assert np.max(np.linalg.norm(r_spk - r_ref, axis=1)) < 1.0, body       # km
            # velocity (km/day in the file -> km/s) against a central difference of the
            # builtin positions (plan94's own velocities differ from that by ~1 m/s)
            h = 600.0
            v_ref = (builtin.barycentric(body, t + h)[0] - builtin.barycentric(body, t - h)[0]) \
                / (2 * h)
            assert np.max(np.linalg.norm(v_spk - v_ref, axis=1)) < 1e-5, body      # km/s
    finally:
        spk.close()


def test_verification_through_an_spk_kernel_matches_the_builtin_one(spk_file, record):
    spk = SpkEphemeris(spk_file)
    try:
        with_spk = check_with_ephemeris(record, spk)
    finally:
        spk.close()
    builtin = check_with_ephemeris(record, BuiltinEphemeris())
    assert with_spk["source"].startswith("JPL SPK kernel synthetic.bsp")
    assert with_spk["body_position_offset_at_flyby_km"] == pytest.approx(
        builtin["body_position_offset_at_flyby_km"], abs=2.0)
    assert with_spk["dsm_km_s"]["check"] == pytest.approx(builtin["dsm_km_s"]["check"],
                                                         abs=1e-5)
    assert with_spk["flyby_vinf_in_km_s"]["check"] == pytest.approx(
        builtin["flyby_vinf_in_km_s"]["check"], abs=1e-5)


def test_verify_command_with_spk(spk_file, demo_result, tmp_path, capsys):
    folder = tmp_path / "run"
    shutil.copytree(demo_result, folder)
    (folder / "verification.txt").unlink()
    assert main(["verify", str(folder), "--spk", str(spk_file)]) == 0
    text = (folder / "verification.txt").read_text()
    assert "astropy builtin" in text and "JPL SPK kernel synthetic.bsp" in text
    data = json.loads((folder / "verification.json").read_text())
    assert len(data["ephemeris"]) == 2
    assert data["point_masses"]["source"].startswith("JPL SPK kernel")


def test_bad_spk_inputs_are_one_line_errors(tmp_path, demo_result, record, spk_file, capsys):
    not_spk = tmp_path / "notes.bsp"
    not_spk.write_text("not a kernel\n" * 200)
    assert main(["verify", str(demo_result), "--spk", str(not_spk)]) == 2
    err = capsys.readouterr().err.strip()
    assert "not a readable SPK kernel" in err and len(err.splitlines()) == 1
    assert main(["verify", str(demo_result), "--spk", str(tmp_path / "missing.bsp")]) == 2
    assert "no such file" in capsys.readouterr().err
    no_earth = write_synthetic_spk(tmp_path / "no_earth.bsp", 0.0, 40 * DAY, skip={(3, 399)})
    spk = SpkEphemeris(no_earth)
    with pytest.raises(ProblemError, match="no segment 3 -> 399"):
        spk.chain("earth")
    # epochs outside the kernel's span
    with pytest.raises(ProblemError, match="outside the kernel"):
        spk.barycentric("sun", [1.0e10])
    spk.close()


def test_after_run_failures_are_one_line_and_keep_the_results(record, tmp_path, monkeypatch):
    def boom(*args, **kwargs):
        raise RuntimeError("boom")

    monkeypatch.setattr(afterrun.plots, "all_pictures", boom)
    monkeypatch.setattr(afterrun.verify, "verify_record", boom)
    (tmp_path / "best.json").write_text(json.dumps(record))
    lines = []
    afterrun.pictures_and_verification(tmp_path, record, lines.append)
    assert lines == [f"pictures not made (RuntimeError: boom); try: leverage plot {tmp_path}",
                     f"verification not made (RuntimeError: boom); try: leverage verify "
                     f"{tmp_path}"]
    assert (tmp_path / "best.json").is_file()


def test_after_run_ctrl_c_is_one_line(record, tmp_path, monkeypatch):
    def interrupt(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(afterrun.plots, "all_pictures", interrupt)
    lines = []
    afterrun.pictures_and_verification(tmp_path, record, lines.append)
    assert len(lines) == 1 and lines[0].startswith("pictures skipped (interrupted)")


def test_a_point_mass_case_that_cannot_be_set_up_is_reported_not_fatal(record, monkeypatch):
    from leverage.verify import nbody_check

    def no_crossing(*args, **kwargs):
        raise ValueError("f(a) and f(b) must have different signs")

    monkeypatch.setattr(nbody_check, "_crossing", no_crossing)
    report = verify_record(record)
    assert report["point_masses"]["all_planets"] == {
        "skipped": "ValueError: f(a) and f(b) must have different signs"}
    assert "end_position_difference_km" in report["point_masses"]["other_planets"]
    assert "all planets: not computed (ValueError" in render(report)


def test_after_run_skips_a_design_with_an_unsolved_leg(record, tmp_path):
    broken = json.loads(json.dumps(record))
    broken["margins"]["lambert_solved"] = {"margin": -1.0, "unit": "", "holds": False,
                                           "meaning": "0 when every arc was solved"}
    lines = []
    afterrun.pictures_and_verification(tmp_path, broken, lines.append)
    assert lines == ["pictures and verification skipped: the best point has an unsolved leg"]
    assert not any(tmp_path.iterdir())


@pytest.mark.parametrize("command", [["plot"], ["verify"], ["export", "--format", "csv"]])
def test_commands_refuse_a_record_without_a_solved_design(record, tmp_path, capsys, command):
    broken = json.loads(json.dumps(record))
    broken["margins"]["lambert_solved"] = {"margin": -1.0, "unit": "", "holds": False,
                                           "meaning": "0 when every arc was solved"}
    (tmp_path / "best.json").write_text(json.dumps(broken))
    assert main([command[0], str(tmp_path), *command[1:]]) == 2
    err = capsys.readouterr().err.strip()
    assert "unsolved leg" in err and len(err.splitlines()) == 1
    del broken["events"][1]
    (tmp_path / "best.json").write_text(json.dumps(broken))
    assert main([command[0], str(tmp_path), *command[1:]]) == 2
    assert "no dsm event" in capsys.readouterr().err
