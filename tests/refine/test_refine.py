"""Tests of ``leverage refine`` (n-body refinement of a patched-conic design).

Outside sources checked:
- H. D. Curtis, Orbital Mechanics for Engineering Students, Example 8.6 (Venus flyby
  on the way in from a Hohmann-like Earth departure: v-infinity 3.7345 km/s, periapsis
  altitude 300 km over a 6052 km radius, mu 324 900 km^3/s^2, turn angle 103.6 deg,
  heliocentric velocity after a dark-side approach (V, S) = (31.73, 1.766) km/s); the
  same numbers ``tests/test_flyby.py`` checks the conic relations with.
- Conic relations of a departure hyperbola: C3 = v_inf^2 = v_p^2 - 2 mu / r_p (vis-viva,
  Vallado, Fundamentals of Astrodynamics and Applications, 4th ed., eq. 2-80 /
  Curtis eq. 2.103 and sec. 8.8), DLA = asin of the asymptote's EME2000 z component.
- Two-body energy v^2/2 - mu/r and angular momentum r x v are constants of Kepler motion.
- Earth GM and radius: DE421 header (GMB, EMRAT) and IAU 2015 B3 (via leverage.bodies).
- The patched-conic design itself (best.json, re-flown with DE421 by `leverage run`'s
  verification): a differential correction of a patched-conic guess into the n-body
  model should change it by days and m/s, not weeks and tens of m/s (common practice).

Measured on this machine (bounds are about 10x, or just above, what was measured):
Curtis flyby: turn angle 103.580 deg (-0.019% from the book's rounded 103.6), outgoing
speed 31.7820 km/s (+0.009%); two-body energy
4.4e-16 and angular momentum 3.7e-16 relative over 5 years; IAS15 vs DOP853 on the
refined demo: 1.0 / 3.6 / 0.014 km and 0.10 / 0.27 / 0.04 mm/s at the segment ends.
"""

import hashlib
import json
import math
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from leverage.cli import EXIT_INTERRUPTED
from leverage.core import flyby
from leverage.core.kepler import state_from_elements
from leverage.refine.integrators import Ias15
from leverage.reports import oem

FIXTURE = Path(__file__).parent / "refine_demo"  # best.json + problem.toml of the demo run
# The demo's design from the search's default (DE) settings, 2026-12-02: DSM 0.811183
# km/s with the flyby at 6,957 km, one point of a direction along which the
# patched-conic DSM does not change (flyby 3,900-26,550 km).
FLAT_FIXTURE = Path(__file__).parent / "demo_flyby_6957km"
MU_VENUS = 324_900.0  # Curtis Example 8.6 / Table A.2
MU_SUN_CURTIS = 1.3271e11  # Curtis Example 8.6
MU_SUN = 1.32712440041279419e11
AU = 149_597_870.7
# The refined demo design (unknowns in Refiner.names order) found by
# `leverage refine tests/refine/refine_demo` on this branch.
REFINED_DEMO_Z = [
    -0.9280451710153803,
    -4.81078231090574,
    -0.9253248381610617,
    -0.012144997371222679,
    3.141006577427875,
    -0.5901812666511763,
    -0.5443173563783942,
    -0.0117643185227364,
    -0.2962256496865946,
    0.26064702116091365,
    -1.6046405558731789,
    2.0628035559702003,
    -8.529009409930596,
    -3.40344856658763,
    -1.569829901762065,
]


class _OneBody:
    """A single point mass fixed at the origin, in the ``forces.De421`` interface."""

    def __init__(self, mu):
        self.gm = np.array([mu])

    def states(self, t):
        return np.zeros((1, 3, 1)), np.zeros((1, 3, 1))


def _curtis_8_6_arrival():
    """As tests/test_flyby.py: heliocentric state at Venus in the book's axes
    (x = Venus's velocity V, y = toward the Sun S, z = orbit pole)."""
    r_earth, r_venus = 149.6e6, 108.2e6
    nu = np.radians(-30.0)
    ecc = (r_earth - r_venus) / (r_earth + r_venus * np.cos(nu))
    h = np.sqrt(MU_SUN_CURTIS * r_earth * (1.0 - ecc))
    v_sc = np.array([h / r_venus, -MU_SUN_CURTIS / h * ecc * np.sin(nu), 0.0])
    v_venus = np.array([np.sqrt(MU_SUN_CURTIS / r_venus), 0.0, 0.0])
    return np.array([0.0, -r_venus, 0.0]), v_venus, v_sc


def test_integrated_flyby_reproduces_curtis_example_8_6():
    r_v, v_v, v_sc = _curtis_8_6_arrival()
    vin = v_sc - v_v
    speed = np.linalg.norm(vin)
    rp = 6052.0 + 300.0
    # Dark-side approach (Curtis 8.6 (a)): B points away from the Sun.
    s, t, r = flyby.bplane_frame(vin, np.array([0.0, 0.0, 1.0]))
    theta = 0.0 if t @ (-r_v) < 0 else np.pi
    vout_conic = flyby.outgoing_vinf(
        vin, flyby.turn_angle(MU_VENUS, speed, rp), theta, np.array([0.0, 0.0, 1.0])
    )
    # Periapsis state of that hyperbola (as Refiner's start), then integrate both ways
    # with Venus alone for 3e8 s (~1e9 km out: the velocity is on the asymptote to 2e-5).
    p_hat = vin / speed - vout_conic / speed
    p_hat /= np.linalg.norm(p_hat)
    q_hat = vin / speed + vout_conic / speed
    q_hat /= np.linalg.norm(q_hat)
    r0 = rp * p_hat
    v0 = math.sqrt(speed**2 + 2 * MU_VENUS / rp) * q_hat
    prop = Ias15(_OneBody(MU_VENUS))
    _, v_before = prop.propagate(0.0, r0, v0, -3.0e8)
    _, v_after = prop.propagate(0.0, r0, v0, 3.0e8)
    turn = math.degrees(
        math.acos(v_before @ v_after / np.linalg.norm(v_before) / np.linalg.norm(v_after))
    )
    assert turn == pytest.approx(103.6, rel=1e-3)  # Curtis: 103.6 deg
    v_helio = v_v + v_after
    book = np.hypot(31.73, 1.766)  # Curtis 8.6 (a)
    assert np.linalg.norm(v_helio) == pytest.approx(book, rel=1e-3)
    np.testing.assert_allclose(v_helio[:2], (31.73, 1.766), atol=0.01)


def test_two_body_energy_and_angular_momentum_conserved_over_five_years():
    r0, v0 = state_from_elements(MU_SUN, 1.8 * AU, 0.5, 0.3, 0.2, 0.1, 0.0)
    r1, v1 = Ias15(_OneBody(MU_SUN)).propagate(0.0, r0, v0, 5 * 365.25 * 86400.0)
    energy = lambda r, v: v @ v / 2 - MU_SUN / np.linalg.norm(r)  # noqa: E731
    h0, h1 = np.cross(r0, v0), np.cross(r1, v1)
    assert abs(energy(r1, v1) / energy(r0, v0) - 1.0) < 5e-15  # measured 4.4e-16
    assert np.linalg.norm(h1 - h0) / np.linalg.norm(h0) < 5e-15  # measured 3.7e-16


@pytest.fixture(scope="module")
def demo_refiner():
    from leverage.refine.forces import De421
    from leverage.refine.limits import read_limits
    from leverage.refine.shooting import Refiner

    record = json.loads((FIXTURE / "best.json").read_text())
    de = De421()
    return Refiner(record, read_limits(FIXTURE), de, Ias15(de))


def test_matching_changes_the_patched_conic_design_by_days_and_m_s():
    from leverage.refine.forces import De421
    from leverage.refine.limits import read_limits
    from leverage.refine.shooting import Refiner

    record = json.loads((FLAT_FIXTURE / "best.json").read_text())
    de = De421()
    ref = Refiner(record, read_limits(FLAT_FIXTURE), de, Ias15(de))
    start = ref.evaluate(ref.z0)
    assert start.errors["dsm_join_position"][0] > 1e6  # the conic misses by 1.6e6 km
    matched = ref.evaluate(ref.match(ref.z0))
    assert ref.worst(matched) is None
    shift = dict(zip(ref.names, matched.z - ref.z0, strict=True))
    # Measured +0.12 / +0.18 / -0.41 days and +3.2 m/s of DSM, no out-of-plane DSM.
    # With scipy's Jacobian step scaling the DSM moved -23.4 days, the DSM gained a
    # 153 m/s normal component and the DSM grew 35.9 m/s (0.8112 -> 0.8471 km/s).
    for name in ("launch_epoch_shift", "dsm_epoch_shift", "periapsis_epoch_shift"):
        assert abs(shift[name]) < 1.0, (name, shift[name])
    assert abs(matched.objective - start.objective) < 0.006
    assert abs(matched.z[7] - ref.z0[7]) < 0.01  # DSM z (ecliptic normal), km/s


@pytest.mark.slow
def test_refine_of_the_6957_km_design_settles_within_its_budget(tmp_path):
    folder = tmp_path / "demo"
    shutil.copytree(FLAT_FIXTURE, folder)
    proc = subprocess.run(
        [sys.executable, "-m", "leverage", "refine", str(folder)],
        capture_output=True,
        text=True,
        timeout=900,
    )
    assert proc.returncode == 0, proc.stderr[-500:]
    assert proc.stdout.startswith("converged in ") and "iteration limit" not in proc.stdout
    rec = json.loads((folder / "refined" / "refined.json").read_text())
    assert rec["feasible"] and all(m["holds"] for m in rec["margins"].values())
    assert rec["iterations"] < 200 and not rec["stopped_at_iteration_limit"]
    # Measured 0.8141 km/s in 164 iterations (both passes settled). Before: 0.8318 km/s
    # at the 200-iteration limit, from a matched start of 0.8471 km/s.
    dsm = rec["derived"]["dsm"]
    assert dsm["patched_conic"] == pytest.approx(0.811183, abs=1e-6)
    assert dsm["value"] < dsm["patched_conic"] + 0.006


def test_departure_c3_and_dla_follow_the_conic_relations(demo_refiner):
    ref = demo_refiner
    z = np.array(REFINED_DEMO_Z)
    best = ref.evaluate(z)
    r0, v0, r_rel, v_rel = ref.departure_state(z, best.epochs["launch"])
    mu = ref.gm_body
    vinf = z[1:4]
    c3, dla = ref.departure_c3_dla(r_rel, v_rel)
    # Vallado eq. 2-80 / Curtis 2.103: C3 = v_p^2 - 2 mu/r_p = |v_inf|^2.
    assert np.linalg.norm(r_rel) == pytest.approx(6378.1 + 200.0, rel=1e-12)
    assert c3 == pytest.approx(
        np.linalg.norm(v_rel) ** 2 - 2 * mu / np.linalg.norm(r_rel), rel=1e-12
    )
    assert c3 == pytest.approx(vinf @ vinf, rel=1e-10)
    eps = math.radians(84381.448 / 3600.0)
    z_eq = math.sin(eps) * vinf[1] + math.cos(eps) * vinf[2]
    assert dla == pytest.approx(math.degrees(math.asin(z_eq / np.linalg.norm(vinf))), abs=1e-8)
    # Flown with the Earth alone, the departure leaves along the asymptote at v_inf.
    _, v_far = Ias15(_OneBody(mu)).propagate(0.0, r_rel, v_rel, 3.0e7)
    assert np.linalg.norm(v_far) ** 2 == pytest.approx(c3, rel=1e-3)
    assert (
        math.degrees(math.acos(v_far @ vinf / np.linalg.norm(v_far) / np.linalg.norm(vinf))) < 0.05
    )


def test_ias15_and_dop853_agree_on_the_refined_demo(demo_refiner):
    from leverage.refine.crosscheck import cross_check

    best = demo_refiner.evaluate(np.array(REFINED_DEMO_Z))
    check = cross_check(demo_refiner, best)
    pos = [s["position_km"] for s in check["segments"]]
    vel = [s["velocity_m_s"] for s in check["segments"]]
    # Measured 0.024 / 0.30 / 0.00005 km and 0.005 / 0.025 / 0.0002 mm/s (with one-float
    # Julian dates in the DOP853 body table it was 1.0 / 3.6 / 0.014 km): the IAS15
    # bodies' drift from DE421 and DOP853's rtol (see leverage/refine/integrators.py).
    assert max(pos) < 2.0
    assert max(vel) < 2.5e-4
    # The refined design itself: joins closed in the main integrator.
    assert best.errors["dsm_join_position"][0] < 0.05
    assert best.errors["dsm_join_velocity"][0] < 1e-5


@pytest.mark.slow
def test_refine_converges_the_demo(tmp_path):
    folder = tmp_path / "demo"
    shutil.copytree(FIXTURE, folder)
    proc = subprocess.run(
        [sys.executable, "-m", "leverage", "refine", str(folder), "--max-steps", "3"],
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert proc.returncode == 0, proc.stderr[-500:]
    assert "refine: matching" in proc.stderr and "km/s" in proc.stderr
    # 3 steps do not even finish the matching: feasible, but the line must say that the
    # budget, not a settled optimiser, ended it.
    assert proc.stdout.startswith("converged (joins and limits met)")
    assert "stopped at its iteration limit (--max-steps 3)" in proc.stdout
    assert "not a proven optimum" in proc.stdout
    assert json.loads((folder / "refined" / "refined.json").read_text())[
        "stopped_at_iteration_limit"
    ]
    out = folder / "refined"
    assert sorted(p.name for p in out.iterdir()) == [
        "refined.json",
        "states.oem",
        "summary.txt",
        "trajectory.png",
    ]
    rec = json.loads((out / "refined.json").read_text())
    assert rec["status"] == "converged" and rec["feasible"]
    assert all(m["holds"] for m in rec["margins"].values())
    assert set(rec["margins"]) >= {"max_c3", "dla_band", "min_flyby_altitude", "min_outgoing_vinf"}
    assert rec["largest_constraint_error"]["dsm_join_position"]["value"] < 1.0
    dsm = rec["derived"]["dsm"]
    assert dsm["unit"] == "km/s" and dsm["patched_conic"] == pytest.approx(0.8127, abs=1e-4)
    # Measured on this machine: 0.8128 km/s after these 3 steps (the matching alone;
    # 0.8227 when the matching scaled its steps by the Jacobian), 0.7964 km/s after the
    # full run (at the 200-iteration limit).
    assert abs(dsm["value"] - dsm["patched_conic"]) < 0.003
    summary = (out / "summary.txt").read_text()
    assert "0.8127 km/s" in summary and "CAUTION" in summary
    msg = oem.read((out / "states.oem").read_text())
    assert len(msg.segments) == 3
    assert not list(folder.glob(".refined*"))  # no temporary folder left behind


@pytest.mark.slow
def test_refine_reports_a_limit_it_cannot_meet(tmp_path):
    folder = tmp_path / "demo"
    shutil.copytree(FIXTURE, folder)
    problem = folder / "problem.toml"
    problem.write_text(
        problem.read_text().replace("min_outgoing_vinf_km_s = 7.5", "min_outgoing_vinf_km_s = 9.5")
    )
    proc = subprocess.run(
        [sys.executable, "-m", "leverage", "refine", str(folder), "--max-steps", "1"],
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert proc.returncode == 6
    last = proc.stderr.strip().splitlines()[-1]
    # 9.5 km/s asked of a loop built for 7.5: the miss is above 0 and at most the 2 km/s
    # raise (measured 1.725 km/s: the matching stays inside its box, MATCH_BOX; 0.55
    # before that box).
    prefix = "leverage refine: not converged: min_outgoing_vinf missed by "
    assert last.startswith(prefix)
    assert 0.0 < float(last[len(prefix) :].split()[0]) <= 2.0
    assert "Traceback" not in proc.stderr
    rec = json.loads((folder / "refined" / "refined.json").read_text())
    assert rec["status"] == "not converged" and not rec["margins"]["min_outgoing_vinf"]["holds"]


def _tree_digest(folder: Path) -> dict:
    """{relative path: SHA-256} of every file under folder."""
    return {
        str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


@pytest.mark.parametrize("earlier_refine", [False, True])
def test_sigint_during_refine_exits_130_and_leaves_the_folder_as_it_was(tmp_path, earlier_refine):
    # Outside source: POSIX/Python signal semantics; 130 = 128 + SIGINT is common
    # practice for "stopped by Ctrl-C" (README "Exit codes").
    folder = tmp_path / "demo"
    shutil.copytree(FIXTURE, folder)
    if earlier_refine:  # an earlier refinement's folder must survive untouched
        (folder / "refined").mkdir()
        (folder / "refined" / "refined.json").write_text('{"status": "converged"}\n')
    before = _tree_digest(folder)
    proc = subprocess.Popen(
        [sys.executable, "-m", "leverage", "refine", str(folder), "--max-steps", "5"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    seen = []
    # Wait for the solver to be at work (its second progress line): a hang guard only.
    deadline = time.monotonic() + 300
    while time.monotonic() < deadline:
        line = proc.stderr.readline()
        seen.append(line)
        if "refine: matching 2" in line or not line:
            break
    assert "refine: matching 2" in seen[-1], "".join(seen)
    sent = time.monotonic()
    proc.send_signal(signal.SIGINT)
    _, rest = proc.communicate(timeout=300)
    stopped_s = time.monotonic() - sent
    err = "".join(seen) + rest
    assert proc.returncode == EXIT_INTERRUPTED, err
    assert "Traceback" not in err
    assert err.strip().splitlines()[-1].startswith("leverage refine: interrupted")
    # The matching alone runs for several seconds after "matching 2" (measured 3-5 s,
    # then the optimisation for tens of seconds): stopping well inside that shows the
    # signal got through. Measured 0.1-0.3 s; 60 s only guards a loaded machine.
    assert stopped_s < 60.0
    assert _tree_digest(folder) == before  # best.json, problem.toml byte-identical
    assert not list(folder.glob(".refined*"))  # no temporary folder left behind
    if not earlier_refine:
        assert not (folder / "refined").exists()
