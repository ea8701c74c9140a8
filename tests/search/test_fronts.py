"""Tests of trade fronts (leverage.fronts): non-dominated sets, hypervolume, knee, and a
small multi-objective run of the trade-front template.

Outside sources: hypervolume of a three-point staircase computed by hand (the area of
the union of the boxes each point dominates up to the reference point), and of random
two-objective clouds by an independent sweep written in this file; Pareto
dominance as defined by Deb et al. 2002 (NSGA-II, IEEE Trans. Evol. Comput. 6(2);
from memory); the knee as the point farthest from the line through the extreme
points (Das 1999, Structural Optimization 18; from memory); the archive's truncation
against pygmo.select_best_N_mo on one front (pygmo 2.19.5). The template problem is
invented (problems/trade-front.toml).
"""

import csv
import io
import json

import numpy as np
import pygmo as pg
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from leverage.core import layout as L
from leverage.errors import ProblemError
from leverage.problem.load import load_problem
from leverage.record.design import feasible
from leverage.run.runner import Progress, run, settings_from
from leverage.search.fronts import (
    hypervolume,
    hypervolume_unit,
    knee,
    most_spread,
    non_dominated,
    reference_point,
)
from leverage.search.udp import LeveragingUDP


def dominates(a, b) -> bool:
    """a dominates b (minimisation): no worse everywhere, better somewhere."""
    return bool(np.all(a <= b) and np.any(a < b))


def test_non_dominated_keeps_exactly_the_undominated_rows():
    rng = np.random.default_rng(4)
    f = rng.random((60, 2))
    keep = set(non_dominated(f).tolist())
    for i in range(len(f)):
        undominated = not any(dominates(f[j], f[i]) for j in range(len(f)) if j != i)
        assert (i in keep) == undominated


@settings(max_examples=200, deadline=None)
@given(
    st.integers(2, 3),
    st.lists(
        st.tuples(st.integers(0, 6), st.integers(0, 6), st.integers(0, 6)), min_size=1, max_size=40
    ),
)
def test_non_dominated_is_pygmos_first_front(n_obj, rows):
    """Against pygmo's fast non-dominated sorting (Deb et al. 2002), on small integer
    grids so ties and equal rows are common (the two-objective sweep has its own code)."""
    f = np.array(rows, dtype=float)[:, :n_obj]
    keep = non_dominated(f)
    _, first = np.unique(f, axis=0, return_index=True)
    first = np.sort(first)
    expected = (
        first[np.sort(np.asarray(pg.fast_non_dominated_sorting(f[first])[0][0], dtype=int))]
        if len(first) > 1
        else first
    )
    assert keep.tolist() == expected.tolist()


def test_non_dominated_drops_duplicates():
    f = np.array([[1.0, 2.0], [1.0, 2.0], [2.0, 1.0], [3.0, 3.0]])
    assert non_dominated(f).tolist() == [0, 2]


@settings(max_examples=60, deadline=None)
@given(st.sampled_from([2, 3]), st.integers(5, 120), st.integers(0, 2**32 - 1))
def test_most_spread_picks_as_pygmo_select_best_n_mo_on_one_front(n_obj, size, seed):
    # a non-dominated set: random points on the plane sum(f) = 1 (no ties)
    rng = np.random.default_rng(seed)
    f = rng.dirichlet(np.ones(n_obj), size)
    n = int(rng.integers(2 * n_obj, size + 1)) if size > 2 * n_obj else size
    expected = np.sort(np.asarray(pg.select_best_N_mo(f, n), dtype=int))
    np.testing.assert_array_equal(most_spread(f, n), expected)


def test_hypervolume_of_a_staircase_by_hand():
    f = np.array([[1.0, 3.0], [2.0, 2.0], [3.0, 1.0]])
    # Union of boxes up to (4, 4): strips x in [1,2): 1, [2,3): 2, [3,4]: 3 -> 6.
    assert hypervolume(f, np.array([4.0, 4.0])) == pytest.approx(6.0)
    # Points not strictly inside the reference box add nothing.
    assert hypervolume(np.array([[5.0, 0.0]]), np.array([4.0, 4.0])) == 0.0


def _area_by_sweep(f, ref):
    """2-objective hypervolume by the textbook sweep (sort by the first objective, add
    the rectangle each non-dominated point adds), written here independently."""
    pts = sorted(tuple(p) for p in f if p[0] < ref[0] and p[1] < ref[1])
    area, best_y = 0.0, ref[1]
    for x, y in pts:
        if y >= best_y:
            continue
        area += (ref[0] - x) * (best_y - y)
        best_y = y
    return area


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_hypervolume_matches_an_independent_sweep(seed):
    """Random clouds (dominated points, points outside the reference box) against the
    sweep above; leverage's value comes from pygmo.hypervolume after its own filtering."""
    rng = np.random.default_rng(seed)
    f = rng.uniform(0.0, 1.2, (80, 2))
    ref = np.array([1.0, 1.0])
    assert hypervolume(f, ref) == pytest.approx(_area_by_sweep(f, ref), rel=1e-12)


def test_knee_is_the_bulge_of_a_convex_front():
    t = np.linspace(0.0, 1.0, 41)
    f = np.column_stack([t, (1.0 - np.sqrt(t)) ** 2])  # bulges toward the origin
    k, distance = knee(f)
    # Farthest from the line f1 + f2 = 1 on this curve: d/dt of t + (1-sqrt t)^2 = 0 at t = 1/4.
    assert f[k, 0] == pytest.approx(0.25, abs=0.0126)
    assert distance > 0.2
    straight = np.column_stack([t, 1.0 - t])
    assert abs(knee(straight)[1]) < 1e-12


def test_reference_point_is_the_budget_and_zero_gain(problems_dir):
    problem = load_problem(problems_dir / "trade-front.toml")
    p = problem.compile().params
    # the file's DSM budget, 1.5 km/s, less its 0.01 km/s design margin
    assert reference_point(p).tolist() == [1.49, 0.0]


@pytest.mark.parametrize(
    "edit, message",
    [
        ("dsm_budget_km_s = 1.5", "needs a DSM budget"),
        ("population = 64", "nsga2 needs a multiple of 4"),
        ('algorithm = "nsga2"', "a front goal needs one of"),
        ('objectives = ["total_dv", "gain"]', "delivered_mass needs a [vehicle] section"),
    ],
)
def test_bad_front_files_are_refused_in_one_line(problems_dir, tmp_path, edit, message):
    replace = {
        "dsm_budget_km_s = 1.5": "",
        "population = 64": "population = 30",
        'algorithm = "nsga2"': 'algorithm = "sade"',
        'objectives = ["total_dv", "gain"]': 'objectives = ["total_dv", "delivered_mass"]',
    }
    path = tmp_path / "bad.toml"
    path.write_text((problems_dir / "trade-front.toml").read_text().replace(edit, replace[edit]))
    with pytest.raises(ProblemError) as err:
        load_problem(path)
    assert "\n" not in str(err.value) and message in str(err.value)


@pytest.mark.slow
@pytest.mark.parametrize("algorithm", ["nsga2", "pygmo_nsga2", "moead", "nspso"])
def test_front_run_writes_a_feasible_non_dominated_front(
    problems_dir, tmp_path, full_size, algorithm
):
    problem = load_problem(problems_dir / "trade-front.toml")
    small = {"algorithm": algorithm}
    if not full_size:
        small.update(generations=150, population=32, islands=1)
    settings = settings_from(problem, small)
    out = tmp_path / "run"
    shown = io.StringIO()
    progress = Progress(settings.evolutions, stream=shown)
    outcome = run(problem, settings, out, progress, echo=lambda *a: None)
    assert outcome.status == "complete" and outcome.feasible
    rows = list(csv.DictReader((out / "front.csv").open()))
    assert len(rows) >= 5
    f = np.array(
        [[float(r["objective_total_dv_km_s"]), float(r["objective_minus_gain_km_s"])] for r in rows]
    )
    for i in range(len(f)):
        for j in range(len(f)):
            assert i == j or not dominates(f[j], f[i])
    udp = LeveragingUDP.from_compiled(problem.compile())
    x_cols = list(rows[0])[4 : 4 + 8]  # after member, knee and the two objectives
    assert x_cols[0] == "x_launch_epoch_days" and x_cols[-1] == "x_bplane_angle_deg"
    header = (out / "front.csv").read_text().splitlines()[0].split(",")
    assert len(set(header)) == len(header)  # no column name repeats (issue 13)
    for r, fi in zip(rows, f):
        x = np.array([float(r[c]) for c in x_cols])
        q = udp.details(x)
        assert feasible(q)
        assert q[L.Q_TOTAL_DV] == pytest.approx(fi[0], rel=1e-9)
        assert -q[L.Q_GAIN] == pytest.approx(fi[1], rel=1e-9, abs=1e-12)
    assert sum(int(r["knee"]) for r in rows) == 1
    record = json.loads((out / "best.json").read_text())
    knee_row = next(r for r in rows if r["knee"] == "1")
    assert record["decision_vector"]["values"][0] == float(knee_row[x_cols[0]])
    assert record["front"]["members"] == len(rows) and record["front"]["hypervolume"] > 0.0
    log = list(csv.DictReader((out / "convergence.csv").open()))
    front_rows = [r for r in log if r["island"] == "front"]
    assert len(front_rows) == settings.evolutions
    assert float(front_rows[-1]["hypervolume"]) == pytest.approx(record["front"]["hypervolume"])
    # hypervolume of total DV (km/s) and minus gain (km/s): (km/s)^2, everywhere it is shown
    assert record["front"]["hypervolume_unit"] == "(km/s)^2"
    hv = record["front"]["hypervolume"]
    assert f"hypervolume {hv:.6f} (km/s)^2" in (out / "summary.txt").read_text()
    # the progress line shows the front, not a "best" (the knee may jump along it)
    last_line = shown.getvalue().splitlines()[-1]
    assert f"front {len(rows)} designs, hypervolume {hv:.6g} (km/s)^2" in last_line
    assert "best" not in shown.getvalue()


def test_hypervolume_unit_is_the_product_of_the_objectives_units():
    assert hypervolume_unit([L.OBJ_TOTAL_DV, L.OBJ_GAIN]) == "(km/s)^2"
    assert hypervolume_unit([L.OBJ_TOTAL_DV, L.OBJ_INCLINATION]) == "(km/s)(deg)"
    assert hypervolume_unit([L.OBJ_TOTAL_DV, L.OBJ_GAIN, L.OBJ_MASS]) == "(km/s)(km/s)(t)"
