"""Tests of launch-vehicle tables, the rocket equation and delivered mass.

Outside sources:
- Standard gravity g0 = 9.80665 m/s^2 (3rd CGPM, 1901), as scipy.constants.g.
- Tsiolkovsky's rocket equation, m_final = m0 exp(-dv / (g0 Isp)) (Sutton and Biblarz,
  Rocket Propulsion Elements, ch. 4; from memory), checked against an independent
  numerical integration of constant-thrust flight (dm/dt = -F/(g0 Isp),
  dv/dt = F/m) with scipy.integrate.solve_ivp, and against its defining property
  that dv = g0 Isp leaves 1/e of the mass.
- The launch-vehicle table and the problem files are invented (problems/delivered-mass.toml).
"""

import math

import numpy as np
import pytest
import scipy.constants
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

from leverage.core import layout as L
from leverage.core.mass import G0_KM_S2, injected_mass, mass_ratio
from leverage.errors import ProblemError
from leverage.problem.load import load_problem
from leverage.problem.vehicle import LaunchVehicle, rocket_mass_ratio
from leverage.run.runner import Progress, run, settings_from
from leverage.search.udp import LeveragingUDP

TABLE = LaunchVehicle("invented", (0.0, 10.0, 20.0, 30.0), (2000.0, 1700.0, 1400.0, 1100.0), 320.0)


def test_standard_gravity_is_the_cgpm_value():
    assert G0_KM_S2 * 1000.0 == scipy.constants.g == 9.80665


def test_rocket_equation_matches_integrated_constant_thrust_flight():
    m0, isp, thrust_n = 1500.0, 320.0, 400.0
    g0 = scipy.constants.g
    dv_target = 1200.0  # m/s

    def rhs(t, y):  # y = (speed m/s, mass kg)
        return [thrust_n / y[1], -thrust_n / (g0 * isp)]

    def reached(t, y):
        return y[0] - dv_target

    reached.terminal = True
    sol = solve_ivp(rhs, (0.0, 1e6), [0.0, m0], events=reached, rtol=1e-11, atol=1e-9)
    m_final = sol.y_events[0][0][1]
    assert math.isclose(m0 * mass_ratio(dv_target / 1000.0, isp), m_final, rel_tol=1e-8)


def test_a_burn_of_g0_isp_leaves_one_over_e():
    for isp in (220.0, 320.0, 450.0):
        assert math.isclose(rocket_mass_ratio(G0_KM_S2 * isp, isp), math.exp(-1.0), rel_tol=1e-15)


@settings(deadline=None, max_examples=200)
@given(dv1=st.floats(0.0, 5.0), dv2=st.floats(0.0, 5.0), isp=st.floats(100.0, 500.0))
def test_delivered_mass_decreases_with_dsm(dv1, dv2, isp):
    lo, hi = min(dv1, dv2), max(dv1, dv2)
    assert TABLE.delivered_mass(15.0, hi) <= TABLE.delivered_mass(15.0, lo)
    if hi > lo + 1e-9:
        assert TABLE.delivered_mass(15.0, hi) < TABLE.delivered_mass(15.0, lo)


def test_table_interpolates_linearly_and_refuses_outside():
    assert TABLE.injected_mass(0.0) == 2000.0
    assert TABLE.injected_mass(30.0) == 1100.0
    assert math.isclose(TABLE.injected_mass(15.0), 1550.0)
    assert math.isclose(TABLE.injected_mass(27.5), 1175.0)
    assert math.isnan(TABLE.injected_mass(30.5))
    assert math.isnan(TABLE.injected_mass(-0.1))
    c3 = np.array(TABLE.c3_km2_s2)
    m = np.array(TABLE.injected_mass_kg)
    assert injected_mass(35.0, c3, m, 4) == (1100.0, -5.0)  # held at the end, margin -5


def _mass_problem(problems_dir):
    return load_problem(problems_dir / "delivered-mass.toml")


def test_model_delivered_mass_is_the_rocket_equation_and_falls_with_dsm(problems_dir):
    problem = _mass_problem(problems_dir)
    udp = LeveragingUDP.from_compiled(problem.compile())
    veh = problem.vehicle
    # One launch (fixed C3), the DSM epoch moved along the loop: DSM sizes differ.
    x = np.array([11685.0, 5.0, 0.0, 0.0, 694.0, 0.5, 5000.0, 0.0])
    rows = []
    for frac in np.linspace(0.2, 0.8, 25):
        x[L.X_DSM_FRACTION] = frac
        q = udp.details(x)
        assert q[L.Q_OK] == 1.0
        expect = veh.injected_mass(q[L.Q_C3]) * math.exp(
            -q[L.Q_TOTAL_DV] / (scipy.constants.g / 1000.0 * veh.specific_impulse_s)
        )
        assert math.isclose(q[L.Q_M_DELIVERED], expect, rel_tol=1e-12)
        rows.append((q[L.Q_TOTAL_DV], q[L.Q_M_DELIVERED]))
    rows.sort()
    dsm = np.array([r[0] for r in rows])
    mass = np.array([r[1] for r in rows])
    assert np.ptp(dsm) > 0.1  # the sweep really changes the DSM (by 0.19 km/s here)
    assert np.all(np.diff(mass)[np.diff(dsm) > 0] < 0.0)


def test_c3_outside_the_table_is_infeasible(problems_dir):
    problem = _mass_problem(problems_dir)
    udp = LeveragingUDP.from_compiled(problem.compile())
    x = np.array([11685.0, 5.0, 0.0, 0.0, 694.0, 0.5, 5000.0, 0.0])
    x[L.X_LAUNCH_VINF_KM_S] = math.sqrt(45.0)  # table ends at C3 = 40
    q = udp.details(x)
    assert q[L.Q_MARGIN_LV_C3] == pytest.approx(-5.0)
    assert q[L.Q_PENALTY] > 0.0


@pytest.mark.parametrize(
    "edit, key",
    [
        (
            "injected_mass_kg = [1500.0, 1250.0, 1020.0, 820.0, 640.0]",
            "injected_mass_kg = [1500.0, 1250.0]",
        ),
        ("c3_km2_s2 = [0.0, 10.0, 20.0, 30.0, 40.0]", "c3_km2_s2 = [0.0, 20.0, 10.0, 30.0, 40.0]"),
        ("specific_impulse_s = 320.0", "specific_impulse_s = -3.0"),
    ],
)
def test_bad_vehicle_tables_are_refused_in_one_line(problems_dir, tmp_path, edit, key):
    text = (problems_dir / "delivered-mass.toml").read_text().replace(edit, key)
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(ProblemError) as err:
        load_problem(path)
    msg = str(err.value)
    assert "\n" not in msg and "[vehicle]" in msg and str(path) in msg


def test_mass_goal_without_a_vehicle_is_refused(problems_dir, tmp_path):
    text = (problems_dir / "delivered-mass.toml").read_text()
    text = text[: text.index("[vehicle]")] + text[text.index("[search]") :]
    path = tmp_path / "novehicle.toml"
    path.write_text(text)
    with pytest.raises(ProblemError, match=r"\[goal\] kind .*needs a \[vehicle\] section"):
        load_problem(path)


@pytest.mark.slow
def test_delivered_mass_template_runs(problems_dir, tmp_path, full_size):
    problem = _mass_problem(problems_dir)
    small = None if full_size else {"generations": 300, "population": 24}
    settings = settings_from(problem, small)
    outcome = run(
        problem, settings, tmp_path / "out", Progress(1, enabled=False), echo=lambda *a: None
    )
    import json

    record = json.loads((tmp_path / "out" / "best.json").read_text())
    assert outcome.status == "complete" and outcome.feasible and record["feasible"]
    der = record["derived"]
    m0, dv = der["injected_mass"]["value"], der["total_dv"]["value"]
    assert der["delivered_mass"]["value"] == pytest.approx(
        m0 * math.exp(-dv / (G0_KM_S2 * 320.0)), rel=1e-9
    )
    assert "mass      injected" in (tmp_path / "out" / "summary.txt").read_text()
