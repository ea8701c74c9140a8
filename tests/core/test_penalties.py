"""Tests of leverage.core.penalties: a penalty is zero exactly when its limit holds.

Outside sources: none numeric. The checks are the properties the model promises
(issue 3, "a penalty is zero exactly when its limit holds"; DEVELOPERS.md, "Limits
and penalties"): the margin penalty v + v^2, v = -m/s, is zero iff m >= 0 and grows
with the violation, and over random decision vectors of the demo problem
(problems/demo.toml, an invented scenario) the total penalty in q is zero exactly
when every margin slot is >= 0, and the kernel's feasibility flag (``Q_FEASIBLE``, in
the scoring pass too) says exactly that, also where several Lambert branches compete
(problems/multi-year-loops.toml, invented). The penalty's size inside the objective is compared with
an independent re-implementation (benchmarks/unit_aware_baseline.py) in
tests/core/test_unit_aware.py.
"""

import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from leverage.core import layout as L
from leverage.core.penalties import (
    MARGIN_SCALES,
    SMALLEST_PENALTY,
    margin_penalty,
    total_penalty,
)
from leverage.core.trajectory import batch_details, batch_scores_one_thread, details
from leverage.problem.load import load_problem

MARGINS = st.floats(allow_nan=True, allow_infinity=True)
SCALES = st.floats(min_value=1e-6, max_value=1e12)


@settings(deadline=None, max_examples=400)
@given(m=MARGINS, s=SCALES)
@example(m=-5e-324, s=100.0)  # a violation that underflows in -m/s: found by this test
def test_margin_penalty_is_zero_iff_the_margin_holds(m, s):
    pen = margin_penalty(m, s)
    assert (pen == 0.0) == (m >= 0.0), (m, s, pen)
    assert pen >= 0.0


@settings(deadline=None, max_examples=300)
@given(
    m1=st.floats(min_value=-1e6, max_value=0.0),
    m2=st.floats(min_value=-1e6, max_value=0.0),
    s=st.floats(min_value=1e-3, max_value=1e9),
)
# Found by this test: both violations so small that v + v^2 is below the floor value
# SMALLEST_PENALTY, where both penalties are the floor and "twice" cannot hold.
@example(m1=-2.2250738585072014e-308, m2=-2.225073858507e-311, s=1.0)
def test_margin_penalty_grows_with_the_violation(m1, m2, s):
    worse, better = min(m1, m2), max(m1, m2)
    assert margin_penalty(worse, s) >= margin_penalty(better, s)
    if better < 0.0 and worse <= 2.0 * better and -better / s > 2.0 * SMALLEST_PENALTY:
        # at least twice the violation: by the v + v^2 form at least twice the penalty,
        # wherever the better one is above the floor (below it both are the floor value)
        assert margin_penalty(worse, s) >= 2.0 * margin_penalty(better, s)


@pytest.mark.parametrize("slot", range(L.N_MARGINS))
def test_each_violated_margin_alone_costs_its_formula(slot):
    """A violation of one scale in one margin, every other limit holding: the penalty is
    exactly weight * (1 + 1) (v = 1), whichever margin it is; half a scale, 0.5 + 0.25."""
    for v, cost in ((1.0, 2.0), (0.5, 0.75)):
        q = np.zeros(L.N_Q)
        q[L.Q_MARGIN_ALT_KM : L.Q_MARGIN_ALT_KM + L.N_MARGINS] = np.inf
        q[L.Q_MARGIN_ALT_KM + slot] = -v * MARGIN_SCALES[slot]
        assert total_penalty(q, 10.0) == pytest.approx(10.0 * cost, rel=1e-12)


def test_margin_penalty_is_continuous_at_the_limit():
    for s in MARGIN_SCALES:
        assert margin_penalty(-1e-9 * s, s) < 2e-9
        assert margin_penalty(0.0, s) == 0.0


@settings(deadline=None, max_examples=300)
@given(
    margins=st.lists(
        st.one_of(st.floats(allow_nan=False), st.just(math.inf)),
        min_size=L.N_MARGINS,
        max_size=L.N_MARGINS,
    ),
    weight=st.floats(min_value=1e-30, max_value=1e3),
)
@example(margins=[-5e-324] + [math.inf] * (L.N_MARGINS - 1), weight=1e-30)
def test_total_penalty_is_zero_iff_every_margin_holds(margins, weight):
    q = np.zeros(L.N_Q)
    q[L.Q_MARGIN_ALT_KM : L.Q_MARGIN_ALT_KM + L.N_MARGINS] = margins
    pen = total_penalty(q, weight)
    assert pen >= 0.0
    assert (pen == 0.0) == all(m >= 0.0 for m in margins), (margins, pen)


_DEMO = {}


def _demo():
    if not _DEMO:
        demo = Path(__file__).resolve().parents[2] / "problems" / "demo.toml"
        compiled = load_problem(demo).compile()
        _DEMO["c"] = compiled
    return _DEMO["c"]


@settings(deadline=None, max_examples=400)
@given(
    u=st.lists(st.floats(min_value=-0.2, max_value=1.2), min_size=L.N_X_LOOP, max_size=L.N_X_LOOP)
)
def test_demo_penalty_is_zero_exactly_when_every_margin_holds(u):
    """End to end: points a little beyond the bounds too, so limits do get violated."""
    c = _demo()
    x = c.lower + np.asarray(u[: len(c.lower)]) * (c.upper - c.lower)
    q = details(x, c.params)
    margins = q[L.Q_MARGIN_ALT_KM : L.Q_MARGIN_ALT_KM + L.N_MARGINS]
    assert (q[L.Q_PENALTY] == 0.0) == bool(np.all(margins >= 0.0)), (x, margins)
    if q[L.Q_OK] != 1.0:
        assert q[L.Q_PENALTY] > 0.0


@pytest.mark.parametrize("name", ["demo.toml", "multi-year-loops.toml"])
def test_feasible_flag_is_every_margin_holding_in_both_passes(name):
    """The scoring pass keeps only the best branch's objectives, not its q; its flag
    must still be that branch's (the full pass keeps the best branch's q)."""
    path = Path(__file__).resolve().parents[2] / "problems" / name
    c = load_problem(path).compile()
    rng = np.random.default_rng(11)
    xs = c.lower + rng.uniform(-0.1, 1.1, (2000, len(c.lower))) * (c.upper - c.lower)
    qs = batch_details(xs, c.params)
    margins = qs[:, L.Q_MARGIN_ALT_KM : L.Q_MARGIN_ALT_KM + L.N_MARGINS]
    by_margins = (qs[:, L.Q_OK] == 1.0) & np.all(margins >= 0.0, axis=1)
    assert 20 < by_margins.sum() < len(xs) - 20  # both cases occur
    np.testing.assert_array_equal(qs[:, L.Q_FEASIBLE] == 1.0, by_margins)
    _, flags = batch_scores_one_thread(xs, c.params)
    np.testing.assert_array_equal(flags, by_margins)


def test_demo_sample_has_both_feasible_and_violating_points():
    """The property above is only worth something if both cases occur in the sample."""
    c = _demo()
    rng = np.random.default_rng(7)
    zero = violated = 0
    for _ in range(3000):
        x = c.lower + rng.uniform(-0.2, 1.2, c.lower.shape) * (c.upper - c.lower)
        q = details(x, c.params)
        if q[L.Q_PENALTY] == 0.0:
            zero += 1
        else:
            violated += 1
    assert zero > 0 and violated > 0, (zero, violated)
