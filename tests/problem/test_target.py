"""Tests of the final leg to a target: a target with a known answer, flyby relations,
the arrival event, and one-line refusals of incomplete [target] sections.

Outside sources: none numeric. The known answer is built: the small body "known" is
placed on the outgoing heliocentric orbit of a fixed loop design of the invented demo
problem (problems/demo.toml), so a leg of any duration along that orbit needs no extra
burn: arrival v-infinity 0, the same DSM, and the same flyby (altitude and B-plane
angle) as the loop design. Two-body elements from the state by
leverage.core.kepler.elements_from_state (poliastro's rv2coe).
"""

import json
import math

import numpy as np
import pytest

from leverage.astro import bodies, times
from leverage.core import ephemeris as E
from leverage.core import layout as L
from leverage.core.kepler import elements_from_state
from leverage.errors import ProblemError
from leverage.problem.load import load_problem
from leverage.reports.summary import render
from leverage.run.runner import Progress, run, settings_from
from leverage.search.udp import LeveragingUDP

# A loop design of the demo problem (launch 2031-01-02, C3 24, DSM 0.81 km/s); an input.
LOOP_X = np.array(
    [
        11324.242769311377,
        4.898979421815853,
        0.5322180159120646,
        0.0030776171387154904,
        694.204620302563,
        0.3162039673292123,
        3796.914319294155,
        -89.87353521951206,
    ]
)
LEG_DAYS = 250.0

BASE = """
[study]
name = "known-target"
[body]
name = "earth"
[launch]
window_open_utc = "{open}"
window_close_utc = "{close}"
max_c3_km2_s2 = 24.0
min_c3_km2_s2 = 23.0
min_dla_deg = -28.5
max_dla_deg = 28.5
in_plane_angle_deg = [-10.0, 10.0]
out_of_plane_angle_deg = [-5.0, 5.0]
[loop]
duration_days = [684.0, 704.0]
dsm_fraction = [0.26, 0.36]
revolutions = 0
[flyby]
min_altitude_km = 300.0
[goal]
kind = "weighted"
dsm_weight = 0.0
gain_weight = 0.0
arrival_vinf_weight = 1.0
dsm_budget_km_s = 0.85
[target]
name = "known"
semi_major_axis_au = {a!r}
eccentricity = {e!r}
inclination_deg = {i!r}
ascending_node_deg = {raan!r}
argument_of_perihelion_deg = {argp!r}
mean_anomaly_deg = {m!r}
elements_epoch_tdb = "{epoch}"
leg_duration_days = [200.0, 300.0]
flyby = "{flyby}"
[search]
islands = 1
population = 24
generations = 300
generations_per_migration = 100
seed = 3
"""


def loop_design(demo_path):
    problem = load_problem(demo_path)
    udp = LeveragingUDP.from_compiled(problem.compile())
    return udp.details(LOOP_X)


def known_target_file(tmp_path, demo_path, flyby="unpowered"):
    """Problem file whose target sits on the loop design's outgoing orbit."""
    q = loop_design(demo_path)
    r = q[L.Q_R_FLYBY : L.Q_R_FLYBY + 3]
    v = q[L.Q_V_FLYBY_OUT : L.Q_V_FLYBY_OUT + 3]
    a, e, i, raan, argp, nu = elements_from_state(bodies.GM_SUN_KM3_S2, r, v)
    ecc_anom = 2.0 * math.atan(math.sqrt((1 - e) / (1 + e)) * math.tan(nu / 2))
    mean_anom = ecc_anom - e * math.sin(ecc_anom)
    epoch = times.from_tdb_seconds(q[L.Q_T_FLYBY]).isot
    text = BASE.format(
        open=times.utc_date((LOOP_X[0] - 5) * 86400.0),
        close=times.utc_date((LOOP_X[0] + 5) * 86400.0),
        a=a / bodies.AU_KM,
        e=e,
        i=math.degrees(i),
        raan=math.degrees(raan),
        argp=math.degrees(argp),
        m=math.degrees(mean_anom),
        epoch=epoch,
        flyby=flyby,
    )
    path = tmp_path / f"known-{flyby}.toml"
    path.write_text(text)
    return path, q


@pytest.mark.parametrize("flyby", ["unpowered", "powered"])
def test_known_target_needs_no_extra_burn(tmp_path, demo_path, flyby):
    path, q_loop = known_target_file(tmp_path, demo_path, flyby)
    problem = load_problem(path)
    compiled = problem.compile()
    assert compiled.names[-1] == "target_leg_days" and len(compiled.names) == L.N_X_TARGET
    udp = LeveragingUDP.from_compiled(compiled)
    x = np.append(LOOP_X[:6], LEG_DAYS)
    q = udp.details(x)
    assert q[L.Q_OK] == 1.0
    assert q[L.Q_VINF_ARRIVAL] < 1e-6  # km/s
    assert q[L.Q_DSM] == pytest.approx(q_loop[L.Q_DSM], abs=1e-12)
    # The periapsis the flyby needs (powered-flyby relation) is the loop design's.
    assert q[L.Q_ALT] == pytest.approx(q_loop[L.Q_ALT], abs=1e-3)  # km
    assert q[L.Q_BPLANE] == pytest.approx(q_loop[L.Q_BPLANE], abs=1e-8)  # rad
    assert q[L.Q_FLYBY_DV] < 1e-8
    assert abs(q[L.Q_VINF_OUT] - q[L.Q_VINF_IN]) < 1e-8
    assert q[L.Q_T_ARRIVAL] == pytest.approx(q[L.Q_T_FLYBY] + LEG_DAYS * 86400.0)
    assert q[L.Q_PENALTY] == 0.0
    if flyby == "unpowered":
        assert q[L.Q_MARGIN_VINF_MATCH_KMS] > 0.0
    else:
        assert q[L.Q_MARGIN_VINF_MATCH_KMS] == math.inf


@pytest.mark.parametrize("flyby", ["unpowered", "powered"])
def test_a_target_flyby_below_the_minimum_altitude_is_penalised(tmp_path, demo_path, flyby):
    """The known design flies by at ~3797 km; with a 5000 km minimum the same design
    violates it by ~1203 km: margin = altitude - minimum (not periapsis radius - minimum,
    which would be ~5175 km and hold), costing at least weight * (v + v^2), v = 1203/100.
    Earth's equatorial radius 6378.1 km: IAU 2015 Resolution B3 nominal value (from
    memory), so altitude = periapsis radius - 6378.1 km."""
    path, q_loop = known_target_file(tmp_path, demo_path, flyby)
    path.write_text(path.read_text().replace("min_altitude_km = 300.0", "min_altitude_km = 5000.0"))
    udp = LeveragingUDP.from_compiled(load_problem(path).compile())
    q = udp.details(np.append(LOOP_X[:6], LEG_DAYS))
    assert q[L.Q_ALT] == pytest.approx(q[L.Q_RP] - 6378.1, abs=1e-6)
    assert q[L.Q_ALT] == pytest.approx(q_loop[L.Q_ALT], abs=1e-3)
    margin = q[L.Q_ALT] - 5000.0
    assert -1300.0 < margin < -1100.0
    assert q[L.Q_MARGIN_ALT_KM] == pytest.approx(margin, abs=1e-6)
    v = -margin / 100.0  # the altitude margin's scale (leverage.core.penalties, 100 km)
    # penalty_weight 10; the turn limit (the turn reachable at 5000 km) fails as well.
    assert q[L.Q_PENALTY] >= 10.0 * (v + v * v) * (1.0 - 1e-12)


def test_speed_mismatch_is_a_burn_when_powered_and_a_violation_when_not(tmp_path, demo_path):
    x = np.append(LOOP_X[:6], LEG_DAYS)
    x[L.X_DSM_FRACTION] = 0.4  # another DSM: the incoming speed changes, the leg does not
    for flyby in ("unpowered", "powered"):
        path, _ = known_target_file(tmp_path, demo_path, flyby)
        udp = LeveragingUDP.from_compiled(load_problem(path).compile())
        q = udp.details(x)
        mismatch = abs(q[L.Q_VINF_OUT] - q[L.Q_VINF_IN])
        assert mismatch > 0.01
        if flyby == "powered":
            assert q[L.Q_FLYBY_DV] > 0.0
            assert q[L.Q_TOTAL_DV] == pytest.approx(q[L.Q_DSM] + q[L.Q_FLYBY_DV])
        else:
            assert q[L.Q_FLYBY_DV] == 0.0
            assert q[L.Q_MARGIN_VINF_MATCH_KMS] == pytest.approx(0.005 - mismatch)


@pytest.mark.slow
def test_search_reaches_the_known_target(tmp_path, demo_path, full_size):
    path, q_loop = known_target_file(tmp_path, demo_path)
    problem = load_problem(path)
    # 1000 generations: at 300 the demo's search (compiled de, and sade before it) ended
    # 0.01-0.27 km/s short of the known answer in 4 of 5 seeds; at 1000 both reached it
    # in 5 of 5 (sade 4), and 1000 compiled generations take well under a second
    settings = settings_from(problem, None if full_size else {"generations": 1000})
    out = tmp_path / "run"
    outcome = run(problem, settings, out, Progress(1, enabled=False), echo=lambda *a: None)
    record = json.loads((out / "best.json").read_text())
    assert outcome.status == "complete" and outcome.feasible and record["feasible"]
    assert record["derived"]["arrival_vinf"]["value"] < 0.05  # km/s; the known answer is 0
    events = [e["event"] for e in record["events"]]
    assert events == ["launch", "dsm", "flyby", "arrival"]
    text = render(record)
    assert "  arrival  " in text and "target    known" in text


def test_target_template_loads_with_seven_variables(problems_dir):
    problem = load_problem(problems_dir / "target-leg.toml")
    compiled = problem.compile()
    assert len(compiled.lower) == L.N_X_TARGET
    assert not problem.target.is_planet and "invented" in problem.target.name


def test_planet_target_uses_its_mean_elements(tmp_path, demo_path):
    text = demo_path.read_text() + '\n[target]\nname = "mars"\nleg_duration_days = [150.0, 300.0]\n'
    path = tmp_path / "mars.toml"
    path.write_text(text)
    problem = load_problem(path)
    assert problem.target.is_planet and problem.target.name == "Mars"
    compiled = problem.compile()
    # the default ephemeris (DE421) gives the target a Chebyshev table of Mars (NAIF 4)
    header = compiled.params[L.P_TARGET_EPH : L.P_TARGET_EPH + E.EPHEMERIS_SIZE]
    assert header[0] == E.KIND_CHEBYSHEV and header[E.CHEB_NAIF_ID] == 4
    assert "DE421" in compiled.ephemeris
    # asked for mean elements, it has Standish's Mars row
    path.write_text(text + '\n[ephemeris]\nsource = "mean_elements"\n')
    p = load_problem(path).compile().params
    assert np.array_equal(
        p[L.P_TARGET_EPH : L.P_TARGET_EPH + E.EPHEMERIS_SIZE],
        bodies.planet("mars").ephemeris_array(),
    )


@pytest.mark.parametrize(
    "section, missing",
    [
        ('name = "rock"\nleg_duration_days = [100.0, 200.0]', "[target] name"),
        (
            'name = "rock"\nsemi_major_axis_au = 1.5\nleg_duration_days = [100.0, 200.0]',
            "[target] eccentricity",
        ),
        (
            'name = "mars"\nleg_duration_days = [100.0, 200.0]\narrival_open_utc = "2034-01-01"\n'
            'arrival_close_utc = "2033-01-01"',
            "[target] arrival_close_utc",
        ),
        ('name = "mars"', "[target] leg_duration_days"),
    ],
)
def test_incomplete_targets_are_refused_in_one_line(tmp_path, demo_path, section, missing):
    path = tmp_path / "bad.toml"
    path.write_text(demo_path.read_text() + "\n[target]\n" + section + "\n")
    with pytest.raises(ProblemError) as err:
        load_problem(path)
    msg = str(err.value)
    assert "\n" not in msg and missing in msg and str(path) in msg


def test_arrival_weight_without_target_is_refused(tmp_path, demo_path):
    path = tmp_path / "bad.toml"
    path.write_text(
        demo_path.read_text().replace(
            'kind = "min_dsm"', 'kind = "min_dsm"\narrival_vinf_weight = 1.0'
        )
    )
    with pytest.raises(ProblemError, match="arrival_vinf_weight .*needs a \\[target\\]"):
        load_problem(path)
