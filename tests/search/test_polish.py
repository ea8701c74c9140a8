"""The polish lands inside the limits; the widened box of the islands clips to the true one."""

import math

import numpy as np

from leverage.core import layout as L
from leverage.problem.load import load_problem
from leverage.record.design import feasible
from leverage.run.runner import make_search, settings_from
from leverage.search.islands import SerialIslands
from leverage.search.single import inside_limits
from leverage.search.udp import LeveragingUDP, WidenedUDP

# A demo design with its launch C3 on the limit (24 km^2/s^2 less the 0.1 design margin):
# a search's champion, launch v-infinity sqrt(23.9) km/s.
DEMO_ON_C3 = [
    11670.499036450636,
    math.sqrt(23.9),
    0.38333597320456647,
    0.01215447857464369,
    694.3781831804919,
    0.3171387970692708,
    3899.3093077630774,
    -175.34360462188036,
]


def demo_udp(demo_path):
    problem = load_problem(demo_path)
    return problem, LeveragingUDP.from_compiled(problem.compile(), problem.name)


def test_inside_limits_moves_only_the_set_limits_inward(demo_path):
    _, udp = demo_udp(demo_path)
    p, q = udp.params, inside_limits(udp.params, inside=1e-6, weight_factor=1000.0)
    assert q[L.P_C3_MAX] == p[L.P_C3_MAX] - 1e-6 * p[L.P_C3_MAX]
    assert q[L.P_MIN_ALT_KM] == p[L.P_MIN_ALT_KM] + 1e-6 * p[L.P_MIN_ALT_KM]
    assert q[L.P_DLA_MIN] > p[L.P_DLA_MIN] and q[L.P_DLA_MAX] < p[L.P_DLA_MAX]
    assert q[L.P_REQ_VINF_OUT_KMS] > p[L.P_REQ_VINF_OUT_KMS] > 0.0
    assert q[L.P_DSM_BUDGET_KMS] == p[L.P_DSM_BUDGET_KMS] == math.inf  # unset stays unset
    assert q[L.P_REQ_INC_RAD] == p[L.P_REQ_INC_RAD] == 0.0
    assert q[L.P_PENALTY_WEIGHT] == 1000.0 * p[L.P_PENALTY_WEIGHT]
    assert not np.shares_memory(p, q)


def test_polish_from_a_point_past_the_limit_ends_inside(demo_path):
    """The C3 margin of the start is about -1e-12: the polished design meets every
    limit (the record's exact rule) and costs well under 1 m/s."""
    problem, udp = demo_udp(demo_path)
    x = np.array(DEMO_ON_C3)
    x[1] *= 1.0 + 1e-13
    assert udp.details(x)[L.Q_MARGIN_C3] < 0.0
    settings = settings_from(problem, {"population": 8, "islands": 1, "generations": 1})
    search = make_search(problem.compile(), udp, settings, SerialIslands())
    xp, f, used = search.polish(x)
    q = udp.details(xp)
    assert feasible(q) and used > 0
    assert f[0] == udp.fitness(xp)[0] < udp.fitness(x)[0] + 0.001


def test_widened_box_evaluates_the_clipped_point(demo_path):
    _, udp = demo_udp(demo_path)
    wide = WidenedUDP.around(udp, 0.05)
    low, high = wide.get_bounds()
    span = udp.upper - udp.lower
    assert np.allclose(low, udp.lower - 0.05 * span) and np.allclose(high, udp.upper + 0.05 * span)
    x = np.array(DEMO_ON_C3)
    x[1] = udp.lower[1] - 0.02 * span[1]  # launch v-infinity below its bound
    clipped = x.copy()
    clipped[1] = udp.lower[1]
    assert np.array_equal(wide.clip(x), clipped)
    assert wide.fitness(x)[0] == udp.fitness(clipped)[0]
    assert wide.batch_fitness(np.concatenate([x, clipped]))[0] == udp.fitness(clipped)[0]
    assert np.array_equal(wide.details(x), udp.details(clipped), equal_nan=True)
