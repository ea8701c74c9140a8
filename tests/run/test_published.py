"""The main job checked end to end against published v-infinity leveraging results.

Outside sources (each problem file in tests/run/published/ names its own in its header):

1. Juno's flown Earth leveraging loop (read, not from memory; NASA/JPL releases, and a
   secondary page quoting mission reporting for the orbits and C3, see the file header):
   DSM-1 344 m/s + DSM-2 388 m/s = 732 m/s; heliocentric orbit 0.88 x 2.26 au before
   the 2013-10-09 Earth flyby and 0.98 x 5.44 au after it. ``juno_earth_loop.toml`` fixes
   what the mission fixed (launch day and C3, flyby date, minimum flyby altitude, Jupiter
   arrival date) and lets `leverage` find the least DSM.
2. The classical analytic leveraging relation on a circular, coplanar planet orbit
   (Hollenbeck 1975; Sims, Longuski and Staugler 1997, J. Guidance, Control and Dynamics
   20(3); both from memory): tangential launch at perihelion, tangential DSM at aphelion,
   return where the new orbit crosses the planet's; the DSM is the one that makes the
   planet be there (phasing). Computed here in closed form plus one scipy root find,
   independently of `leverage`'s kernels (no Lambert solver, no propagator).

Model differences and the tolerances they justify are stated beside each check.
"""

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from leverage.astro import bodies
from leverage.core import layout as L
from leverage.core.ephemeris import EPHEMERIS_SIZE
from leverage.core.kepler import elements_from_state
from leverage.problem.load import load_problem
from leverage.run.runner import make_search, settings_from
from leverage.search.islands import SerialIslands
from leverage.search.udp import LeveragingUDP

HERE = Path(__file__).resolve().parent / "published"
AU = bodies.AU_KM
MU_SUN = bodies.GM_SUN_KM3_S2
V_EARTH = math.sqrt(MU_SUN / AU)  # circular speed at 1 au, km/s
YEAR_DAYS = 2.0 * math.pi * math.sqrt(AU**3 / MU_SUN) / 86400.0


def optimum(compiled, problem):
    """Design of the problem file's own search (islands in turn, this process), every
    epoch's champion polished as a run does."""
    udp = LeveragingUDP.from_compiled(compiled, problem.name)
    search = make_search(compiled, udp, settings_from(problem), SerialIslands())
    while not search.done:
        search.step()
    x, _, _ = search.polish_candidates()
    return x, udp.details(x)


def vec(q, slot):
    return np.array(q[slot : slot + 3])


def peri_apo_au(r, v):
    a, e, *_ = elements_from_state(MU_SUN, r, v)
    return a * (1.0 - e) / AU, a * (1.0 + e) / AU


# ------------------------------------------------------------------ 1. Juno, flown


@pytest.fixture(scope="module")
def juno():
    problem = load_problem(HERE / "juno_earth_loop.toml")
    compiled = problem.compile()
    x, q = optimum(compiled, problem)
    return x, q


@pytest.mark.slow
def test_juno_least_dsm_matches_the_flown_dsms(juno):
    """Published: 344 + 388 = 732 m/s in two burns 15 days apart near aphelion.

    Ours: one impulsive DSM, Earth and Jupiter from Standish's mean elements (Earth
    ~6000 km, Jupiter ~600 000 km from the real ephemeris), no constraint on the
    arrival geometry at Jupiter or on the flyby's B-plane (Juno's flyby also set up its
    polar arrival), so ours may be a little below the flown total; splitting one burn
    into two along nearly the same direction costs little, and DSM-2 flown 10 days late
    cost ~2 m/s (planned 345 + 385 m/s, secondary page). Measured: 0.7159 km/s (seeds 1-3: 0.7153-0.7159),
    0.016 below the flown total. Tolerance 0.05 km/s (7%, 3x the measured difference):
    the model differences above, not the optimizer (its seed scatter is < 0.001 km/s)."""
    _, q = juno
    assert q[L.Q_OK] == 1.0
    margins = q[L.Q_MARGIN_ALT_KM : L.Q_MARGIN_ALT_KM + L.N_MARGINS]
    assert np.all(margins >= -1e-6), margins  # feasible, up to the polish's last digits
    assert q[L.Q_DSM] == pytest.approx(0.732, abs=0.05)


@pytest.mark.slow
def test_juno_orbits_before_and_after_the_flyby_match_the_published_ones(juno):
    """Published (rounded to 0.01 au): 0.88 x 2.26 au before, 0.98 x 5.44 au after.

    Measured: 0.8835 x 2.2666 and 0.9817 x 5.4468 au (largest difference 0.007 au).
    Tolerance 0.015 au: the rounding of the published figures (0.005) plus the
    mean-element Earth and Jupiter (the outgoing aphelion is set by the Jupiter leg)."""
    _, q = juno
    before = peri_apo_au(vec(q, L.Q_R_DSM), vec(q, L.Q_V_DSM_AFTER))
    after = peri_apo_au(vec(q, L.Q_R_FLYBY), vec(q, L.Q_V_FLYBY_OUT))
    assert before == pytest.approx((0.88, 2.26), abs=0.015)
    assert after == pytest.approx((0.98, 5.44), abs=0.015)


@pytest.mark.slow
def test_juno_dsm_epoch_and_flyby_boost_near_the_flown_ones(juno):
    """Published DSM dates 2012-08-30 and 2012-09-14 (the second planned for 09-04, i.e.
    around aphelion); the flyby "boosted the velocity relative to the Sun by 7.3 km/s".

    DSM epoch: ours is one burn, measured 2012-09-20 to 09-24 over seeds 1-3, 14-18 days
    after the mid-point of the flown burns: near aphelion the least DSM hardly depends
    on the epoch (the seeds' 4-day spread changes it by 0.6 m/s), so the limit is 30 days,
    a twelfth of the orbit, far from a burn on the wrong side of the orbit.
    Boost: |v_out - v_in| heliocentric, measured 7.05 km/s. Tolerance 0.4 km/s: our flyby
    passes at 825 km, the flown one at 559 km (a smaller turn by the same v-infinity),
    and the published figure has two digits."""
    _, q = juno
    mid = (4624.5 + 4639.5) / 2  # 2012-08-30 and 2012-09-14 at 0h UTC, days TDB past J2000
    assert abs(q[L.Q_T_DSM] / 86400.0 - mid) < 30.0
    boost = np.linalg.norm(vec(q, L.Q_V_FLYBY_OUT) - vec(q, L.Q_V_FLYBY_IN))
    assert boost == pytest.approx(7.3, abs=0.4)


# ----------------------------------------------- 2. the analytic leveraging relation


def _mean_anomaly(nu, ecc):
    ecc_anomaly = 2.0 * math.atan(math.sqrt((1.0 - ecc) / (1.0 + ecc)) * math.tan(0.5 * nu))
    return ecc_anomaly - ecc * math.sin(ecc_anomaly)


def leveraging_2to1_plus(vinf_launch_kms):
    """(DSM km/s, return v-infinity km/s, launch-to-flyby days, aphelion au) of the
    2:1(1)+ loop in the circular, coplanar theory (units: 1 au, circular speed 1).

    Launch tangential at r = 1 with speed 1 + v0: perihelion there, aphelion ra. At
    aphelion a retrograde tangential burn dv lowers perihelion below 1; the orbit then
    crosses r = 1 outbound at true anomaly nu*. Time: half the first orbit plus aphelion
    to nu* of the second; the planet (mean motion 1) must have moved 2 pi * 2 + nu*.
    """
    v0 = vinf_launch_kms / V_EARTH
    h0 = 1.0 + v0
    a0 = 1.0 / (2.0 - h0 * h0)
    ra = 2.0 * a0 - 1.0

    def after(dv):
        va = h0 / ra - dv
        h1 = ra * va
        a1 = 1.0 / (2.0 / ra - va * va)
        p1 = h1 * h1
        e1 = 1.0 - p1 / ra
        nu = math.acos((p1 - 1.0) / e1)
        t = math.pi * a0**1.5 + a1**1.5 * (math.pi + _mean_anomaly(nu, e1))
        vr2 = 2.0 / 1.0 - 1.0 / a1 - h1 * h1
        vinf = math.sqrt((h1 - 1.0) ** 2 + vr2)
        return t - (4.0 * math.pi + nu), vinf, t

    dv = brentq(lambda d: after(d)[0], 1e-6, 0.05, xtol=1e-15)
    _, vinf, t = after(dv)
    return dv * V_EARTH, vinf * V_EARTH, t / (2.0 * math.pi) * YEAR_DAYS, ra


@pytest.mark.slow
@pytest.mark.parametrize("vinf_launch", [5.2, 5.3])
def test_optimum_on_a_circular_planet_is_the_analytic_leveraging_dsm(vinf_launch, tmp_path):
    """Model differences: none in the dynamics (both two-body about the Sun, the planet
    on the same circle); ours is free to place and point the DSM anywhere, the theory's
    is tangential at aphelion, so ours could be lower; it is the same (measured
    -4.9e-6 and +5.5e-6 km/s): the apsidal tangential burn is the optimum. Those
    differences are the requirement written with 4 decimals (7.6829 for 7.68293, 9.6830
    for 9.68297; the DSM changes by ~0.16 km/s per km/s of it). Tolerance 2e-5 km/s.
    The loop length (measured within 4e-4 days), the DSM's place (aphelion radius within
    1e-9 au) and direction (along-track, backwards) are checked too."""
    dsm, vinf_return, days, ra = leveraging_2to1_plus(vinf_launch)
    text = (HERE / "leveraging_2to1.toml").read_text()
    # The file is written for 5.2 km/s; the second case edits its two launch-dependent lines.
    text = text.replace("= 27.04", f"= {vinf_launch**2:.4f}").replace(
        "min_outgoing_vinf_km_s = 7.6829", f"min_outgoing_vinf_km_s = {vinf_return:.4f}"
    )
    text = text.replace("[707.0, 827.0]", f"[{days - 60:.1f}, {days + 60:.1f}]")
    path = tmp_path / "leveraging.toml"
    path.write_text(text)
    if vinf_launch == 5.2:  # the file's own numbers are the theory's
        assert f"= {vinf_return:.4f}" in (HERE / "leveraging_2to1.toml").read_text()
    problem = load_problem(path)
    compiled = problem.compile()
    compiled.params[L.P_BODY_EPH : L.P_BODY_EPH + EPHEMERIS_SIZE] = bodies.osculating_array(
        AU, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0
    )
    x, q = optimum(compiled, problem)
    assert q[L.Q_PENALTY] < 1e-9
    assert q[L.Q_DSM] == pytest.approx(dsm, abs=2e-5)
    assert x[L.X_LOOP_DURATION_DAYS] == pytest.approx(days, abs=0.004)
    # at aphelion (radius ra), along-track and backwards
    assert np.linalg.norm(vec(q, L.Q_R_DSM)) / AU == pytest.approx(ra, abs=1e-8)
    assert q[L.Q_DSM_T] == pytest.approx(-dsm, abs=2e-5)
