"""The compiled NSGA-II (leverage.core.nsga2) against outside references.

Outside sources, beside each check:
- Front numbers: pygmo.fast_non_dominated_sorting (pygmo 2.19.5, the reference
  library), on random sets with and without ties and repeated rows, two and three
  objectives (the kernel sorts two objectives by a sweep and more by Deb's pairwise
  method, so both are checked).
- Crowding distance: pygmo.crowding_distance, front by front.
- SBX: with the bounds far away the children's spread factor beta = |c1 - c2| / |p1 - p2|
  has the density 0.5 (eta + 1) beta^eta for beta <= 1 and 0.5 (eta + 1) / beta^(eta + 2)
  above (Deb and Agrawal 1995, Complex Systems 9, 115-148; from memory), and the
  children's mean is the parents' (same paper).
- Polynomial mutation: a variable in the middle of its range moves by delta times the
  range, delta with density 0.5 (eta + 1) (1 - |delta|)^eta on [-1, 1] (Deb and Goyal
  1996, Computer Science and Informatics 26(4); from memory; the bounded form's
  correction is (1/2)^(eta + 1) there, below 1e-15 for eta = 50).
- Near a bound, both operators in the bounded form of Deb's NSGA-II code (Deb 2001,
  Multi-Objective Optimization using Evolutionary Algorithms, Wiley, sec. 4.2; from
  memory) draw from those distributions truncated at the bound (derived in the tests'
  docstrings from the formulas).
- Front quality: ZDT1 (Zitzler, Deb and Thiele 2000, Evolutionary Computation 8(2)),
  whose Pareto front is f2 = 1 - sqrt(f1), f1 in [0, 1]. With the settings of Deb et al.
  2002 (IEEE Trans. Evol. Comput. 6(2), Table III and Sec. V: population 100, 250
  generations, crossover probability 0.9, eta_c 20, mutation 1/n, eta_m 20) they report a
  mean convergence metric (mean distance to 500 points spread on the true front) of
  0.033482 for real-coded NSGA-II on ZDT1 (from memory).
- The whole-evolution kernel ``evolve`` is checked against the same pieces driven one
  generation at a time from Python (numba's generator is shared by the compiled
  functions of a thread), which is how the ZDT1 run drives them with another fitness;
  its archive against the non-dominated set, by pygmo.fast_non_dominated_sorting, of
  every child whose margins from ``trajectory.batch_details`` all hold.
- The archive's thinning keeps the members of largest pygmo.crowding_distance.
The trade-front problem used for ``evolve`` is invented (problems/trade-front.toml).
"""

from pathlib import Path

import numpy as np
import pygmo as pg
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from leverage.core import layout as L
from leverage.core import nsga2, trajectory
from leverage.problem.load import load_problem

TRADE_FRONT = Path(__file__).resolve().parents[2] / "problems" / "trade-front.toml"


def objective_sets(min_rows=2, max_rows=60):
    """(rows, objectives, seed, ties): random objective sets; ties draws small integers,
    so equal values and repeated rows are common."""
    return st.tuples(
        st.integers(min_rows, max_rows),
        st.sampled_from([2, 3]),
        st.integers(0, 2**32 - 1),
        st.booleans(),
    )


def draw_set(case):
    n, m, seed, ties = case
    rng = np.random.default_rng(seed)
    if ties:
        return rng.integers(0, 4, (n, m)).astype(float)
    return rng.normal(size=(n, m))


@settings(max_examples=300, deadline=None)
@given(objective_sets())
def test_front_numbers_match_pygmo(case):
    f = draw_set(case)
    expected = pg.fast_non_dominated_sorting(f)[3]
    np.testing.assert_array_equal(nsga2.non_dominated_ranks(f), expected)


@settings(max_examples=200, deadline=None)
@given(objective_sets(min_rows=2, max_rows=40))
def test_crowding_distance_matches_pygmo_front_by_front(case):
    n, m, seed, _ = case
    f = draw_set((n, m, seed, False))  # distinct values: no tie in any sort order
    rank = nsga2.non_dominated_ranks(f)
    ours = nsga2.crowding_distances(f, rank)
    for front in np.unique(rank):
        members = np.flatnonzero(rank == front)
        if len(members) < 2:  # pygmo needs two points; one alone is at the extremes
            assert ours[members[0]] == np.inf
            continue
        np.testing.assert_allclose(
            ours[members], pg.crowding_distance(f[members]), rtol=1e-12, atol=0.0
        )


def spread_factor_cdf(beta, eta):
    """CDF of the SBX spread factor (Deb and Agrawal 1995)."""
    beta = np.asarray(beta)
    low = 0.5 * beta ** (eta + 1.0)
    high = 1.0 - 0.5 * beta ** -(eta + 1.0)
    return np.where(beta <= 1.0, low, high)


@pytest.mark.parametrize("eta_c", [2.0, 10.0])
def test_sbx_spread_factor_has_the_published_distribution(eta_c):
    n = 4000
    rng = np.random.default_rng(3)
    p1 = rng.uniform(-1.0, 1.0, (n, 1))
    p2 = p1 + rng.uniform(0.1, 1.0, (n, 1))
    lower, upper = np.full(1, -1e9), np.full(1, 1e9)  # bounds far away: plain SBX
    c1, c2 = np.empty((n, 1)), np.empty((n, 1))
    nsga2.seed(11)
    for i in range(n):
        nsga2.sbx_pair(p1[i], p2[i], lower, upper, 1.0, eta_c, c1[i], c2[i])
    crossed = (c1 != p1)[:, 0]
    # each variable is crossed with probability 1/2: 5 binomial sigmas (common practice)
    assert abs(crossed.mean() - 0.5) < 5 * np.sqrt(0.25 / n)
    assert np.all(c1[~crossed] == p1[~crossed]) and np.all(c2[~crossed] == p2[~crossed])
    np.testing.assert_allclose((c1 + c2)[crossed], (p1 + p2)[crossed], rtol=0, atol=1e-9)
    beta = (np.abs(c1 - c2) / (p2 - p1))[crossed, 0]
    assert stats.kstest(beta, lambda b: spread_factor_cdf(b, eta_c)).pvalue > 1e-3


@pytest.mark.parametrize("eta_c", [2.0, 10.0])
def test_bounded_sbx_is_the_published_distribution_cut_at_the_bounds(eta_c):
    """Near a bound each child's spread factor (its distance from the parents' mean over
    half their gap) follows the SBX distribution truncated where the child would pass
    the bound: F(beta) / F(beta_max), beta_max = 1 + 2 (room to the bound) / gap (the
    bounded form of Deb's NSGA-II code, Deb 2001, Multi-Objective Optimization using
    Evolutionary Algorithms, sec. 4.2; from memory; the truncation derived here from its
    formulas). So each child's F(beta) / F(beta_max) must be uniform on [0, 1]."""
    n = 6000
    rng = np.random.default_rng(12)
    lower, upper = np.zeros(1), np.ones(1)
    p1 = rng.uniform(0.0, 0.1, (n, 1))  # near the lower bound: beta_max 1 to 3
    p2 = p1 + rng.uniform(0.1, 0.3, (n, 1))
    c1, c2 = np.empty((n, 1)), np.empty((n, 1))
    nsga2.seed(13)
    for i in range(n):
        nsga2.sbx_pair(p1[i], p2[i], lower, upper, 1.0, eta_c, c1[i], c2[i])
    crossed = (np.minimum(c1, c2) != p1)[:, 0]
    y1, y2 = p1[crossed, 0], p2[crossed, 0]
    low, high = np.minimum(c1, c2)[crossed, 0], np.maximum(c1, c2)[crossed, 0]
    gap, mean = y2 - y1, 0.5 * (y1 + y2)
    for child, room in ((mean - low, y1 - lower[0]), (high - mean, upper[0] - y2)):
        beta, beta_max = 2.0 * child / gap, 1.0 + 2.0 * room / gap
        u = spread_factor_cdf(beta, eta_c) / spread_factor_cdf(beta_max, eta_c)
        assert stats.kstest(u, "uniform").pvalue > 1e-3


def test_sbx_crossover_probability_and_bounds():
    n, nv = 2000, 6
    rng = np.random.default_rng(4)
    lower, upper = np.zeros(nv), np.ones(nv)
    p1, p2 = rng.random((n, nv)), rng.random((n, nv))
    p1[:, 0], p2[:, 1] = 0.0, 1.0  # parents on the bounds too
    c1, c2 = np.empty((n, nv)), np.empty((n, nv))
    nsga2.seed(5)
    for i in range(n):
        nsga2.sbx_pair(p1[i], p2[i], lower, upper, 0.7, 10.0, c1[i], c2[i])
    touched = np.any(c1 != p1, axis=1) | np.any(c2 != p2, axis=1)
    # a crossed pair changes some variable unless none of its 6 is picked (1/64)
    expected = 0.7 * (1.0 - 0.5**nv)
    assert abs(touched.mean() - expected) < 5 * np.sqrt(expected * (1 - expected) / n)
    for c in (c1, c2):
        assert np.all(c >= lower) and np.all(c <= upper)


def mutation_cdf(delta, eta):
    """CDF of the polynomial-mutation step over the range (Deb and Goyal 1996)."""
    delta = np.asarray(delta)
    return np.where(
        delta < 0.0, 0.5 * (1.0 + delta) ** (eta + 1.0), 1.0 - 0.5 * (1.0 - delta) ** (eta + 1.0)
    )


def test_polynomial_mutation_has_the_published_distribution():
    n, nv, eta_m, m = 3000, 4, 50.0, 0.25
    lower, upper = np.full(nv, -2.0), np.full(nv, 6.0)
    x = np.full((n, nv), 2.0)  # the middle of the range
    nsga2.seed(8)
    for i in range(n):
        nsga2.polynomial_mutation(x[i], lower, upper, m, eta_m)
    moved = x != 2.0
    assert abs(moved.mean() - m) < 5 * np.sqrt(m * (1 - m) / (n * nv))
    delta = (x[moved] - 2.0) / (upper - lower)[0]
    assert stats.kstest(delta, lambda d: mutation_cdf(d, eta_m)).pvalue > 1e-3


def test_bounded_polynomial_mutation_is_the_published_distribution_cut_at_the_bounds():
    """Near a bound a move toward it (probability 1/2) follows the left half of the
    published distribution truncated at the bound, and a move away the right half
    (the bounded form of Deb's NSGA-II code, Deb 2001, sec. 4.2; from memory; the
    truncation derived here from its formulas): G(delta) rescaled over the kept part
    must be uniform."""
    n, eta_m, start = 6000, 20.0, 0.03
    lower, upper = np.zeros(1), np.ones(1)
    x = np.full((n, 1), start)
    nsga2.seed(14)
    for i in range(n):
        nsga2.polynomial_mutation(x[i], lower, upper, 1.0, eta_m)
    delta = x[:, 0] - start  # the range is 1
    left = delta < 0.0
    assert abs(left.mean() - 0.5) < 5 * np.sqrt(0.25 / n)
    g = mutation_cdf(delta, eta_m)
    g_low, g_high = mutation_cdf(-start, eta_m), mutation_cdf(1.0 - start, eta_m)
    assert g_low > 0.1  # the bound cuts off a good part of the left half
    assert stats.kstest((g[left] - g_low) / (0.5 - g_low), "uniform").pvalue > 1e-3
    assert stats.kstest((g[~left] - 0.5) / (g_high - 0.5), "uniform").pvalue > 1e-3


@settings(max_examples=100, deadline=None)
@given(st.integers(0, 2**32 - 1), st.floats(0.0, 100.0), st.floats(0.0, 1.0))
def test_mutated_points_stay_in_bounds(seed, eta_m, m):
    rng = np.random.default_rng(seed)
    lower = rng.uniform(-5, 5, 5)
    upper = lower + rng.uniform(0.0, 3.0, 5)
    upper[0] = lower[0]  # a fixed variable stays put
    x = lower + rng.random(5) * (upper - lower)
    x[1] = upper[1]
    nsga2.seed(seed)
    nsga2.polynomial_mutation(x, lower, upper, m, eta_m)
    assert np.all(x >= lower) and np.all(x <= upper)


def drive(x, f, lower, upper, fitness, generations, cr, eta_c, m, eta_m, seed32):
    """NSGA-II one generation at a time from Python, with any batch fitness; returns
    the final (x, f) and every child made (rows)."""
    nsga2.seed(seed32)
    rank = nsga2.non_dominated_ranks(f)
    crowd = nsga2.crowding_distances(f, rank)
    made = []
    for _ in range(generations):
        children = nsga2.offspring(x, rank, crowd, lower, upper, cr, eta_c, m, eta_m)
        made.append(children)
        x, f, rank, crowd = nsga2.next_generation(x, f, children, fitness(children))
    return x, f, np.vstack(made)


def pygmo_front(f):
    """Rows of f in pygmo's first front, duplicates dropped, as a set of tuples."""
    fronts = pg.fast_non_dominated_sorting(f)[0]
    return {tuple(row) for row in f[np.asarray(fronts[0], dtype=int)]}


@pytest.fixture(scope="module")
def trade_front():
    compiled = load_problem(TRADE_FRONT).compile()
    rng = np.random.default_rng(2)
    x = compiled.lower + rng.random((32, len(compiled.lower))) * (compiled.upper - compiled.lower)
    return compiled, x, trajectory.batch_fitness_one_thread(x, compiled.params)


def test_evolve_is_the_pieces_generation_by_generation(trade_front):
    c, x0, f0 = trade_front
    args = (c.lower, c.upper, c.params, 12, 0.95, 10.0, 0.125, 50.0, 1234)
    x, f, met_x, met_f = nsga2.evolve(x0, f0, *args, 1000)
    x_ref, f_ref, children = drive(
        x0,
        f0,
        c.lower,
        c.upper,
        lambda xs: trajectory.batch_fitness_one_thread(xs, c.params),
        12,
        0.95,
        10.0,
        0.125,
        50.0,
        1234,
    )
    np.testing.assert_array_equal(x, x_ref)
    np.testing.assert_array_equal(f, f_ref)
    # the objectives handed back are those of the decision vectors handed back
    np.testing.assert_array_equal(f, trajectory.batch_fitness_one_thread(x, c.params))
    assert np.all(x >= c.lower) and np.all(x <= c.upper)
    # the archive: the feasible children's non-dominated set (never full here), with
    # each member's own objectives
    q = trajectory.batch_details(children, c.params)
    feasible = (q[:, L.Q_OK] == 1.0) & np.all(
        q[:, L.Q_MARGIN_ALT_KM : L.Q_MARGIN_ALT_KM + L.N_MARGINS] >= 0.0, axis=1
    )
    assert 0 < feasible.sum() < len(children)  # the check means something
    f_children = trajectory.batch_fitness_one_thread(children, c.params)
    assert {tuple(r) for r in met_f} == pygmo_front(f_children[feasible])
    assert len(met_f) == len({tuple(r) for r in met_f})
    np.testing.assert_array_equal(met_f, trajectory.batch_fitness_one_thread(met_x, c.params))
    # an archive just big enough merges its buffer of offers many times: the same set
    rows = len(met_f)
    assert feasible.sum() > 3 * rows
    _, _, _, met_f_small = nsga2.evolve(x0, f0, *args, rows)
    np.testing.assert_array_equal(met_f_small, met_f)
    # numba's threads give the same batches, so the same evolution
    x_threads, _, _, met_f_threads = nsga2.evolve_in_threads(x0, f0, *args, 1000)
    np.testing.assert_array_equal(x_threads, x)
    np.testing.assert_array_equal(met_f_threads, met_f)
    # the same seed repeats it; another seed does not
    np.testing.assert_array_equal(nsga2.evolve(x0, f0, *args, 1000)[0], x)
    other = args[:-1] + (1235,)
    assert not np.array_equal(nsga2.evolve(x0, f0, *other, 1000)[0], x)


@settings(max_examples=200, deadline=None)
@given(objective_sets(min_rows=2, max_rows=80), st.integers(1, 9))
def test_archive_keeps_the_non_dominated_set_of_what_it_was_offered(case, batch):
    n, _, seed, ties = case
    f = draw_set((n, 2, seed, ties))
    x = np.arange(n, dtype=float)[:, None] * np.ones((1, 3))  # row number, to trace
    ax, af = np.empty((n + 1, 3)), np.empty((n + 1, 2))
    count = 0
    for start in range(0, n, batch):  # offered a few at a time, merged each time
        stop = min(n, start + batch)
        count = nsga2.archive_merge(ax, af, count, x[start:stop], f[start:stop], stop - start)
    assert {tuple(r) for r in af[:count]} == pygmo_front(f)
    assert count == len({tuple(r) for r in af[:count]})  # an equal design is dropped
    np.testing.assert_array_equal(af[:count], f[ax[:count, 0].astype(int)])


def test_a_full_archive_keeps_its_most_spread_members():
    """Points on the front f2 = 1 - f1 (all non-dominated), unevenly spaced, merged
    into an archive of 16 rows: it keeps the 12 (3/4) with the largest pygmo crowding
    distance, the two extremes among them."""
    rng = np.random.default_rng(5)
    f1 = np.sort(rng.random(20))
    f = np.column_stack((f1, 1.0 - f1))
    shuffled = rng.permutation(20)
    ax, af = np.empty((16, 1)), np.empty((16, 2))
    count = nsga2.archive_merge(ax, af, 0, shuffled[:, None].astype(float), f[shuffled], 20)
    kept = set(ax[:count, 0].astype(int))
    assert count == 12
    assert kept == set(np.argsort(-pg.crowding_distance(f), kind="stable")[:12])
    assert {0, 19} <= kept
    np.testing.assert_array_equal(af[:count], f[ax[:count, 0].astype(int)])


def test_no_archive_beyond_two_objectives():
    ax, af, bx, bf, counts = nsga2.new_archive(600, 8, 3)
    assert ax.shape == (0, 8) and bx.shape[0] == 0
    assert nsga2.new_archive(600, 8, 2)[0].shape == (600, 8)


def test_survivors_are_whole_fronts_then_the_least_crowded():
    """Deb et al. 2002, Sec. III-C: fronts in order, the cut front by crowding distance."""
    rng = np.random.default_rng(9)
    f = rng.normal(size=(40, 2))
    keep, rank = nsga2.survivors(f, 20)
    expected_rank = pg.fast_non_dominated_sorting(f)[3]
    np.testing.assert_array_equal(rank, expected_rank)
    kept_ranks = rank[keep]
    cut = kept_ranks.max()
    assert np.all(np.sort(kept_ranks) == kept_ranks)  # fronts in order
    assert np.sum(rank < cut) == np.sum(kept_ranks < cut)  # every better front whole
    members = np.flatnonzero(rank == cut)
    crowd = pg.crowding_distance(f[members]) if len(members) > 1 else np.array([np.inf])
    chosen = np.isin(members, keep)
    assert crowd[chosen].min() >= crowd[~chosen].max()
    assert len(np.unique(keep)) == 20


def zdt1(x):
    """ZDT1 objectives of each row of x (Zitzler, Deb and Thiele 2000)."""
    f1 = x[:, 0]
    g = 1.0 + 9.0 * x[:, 1:].sum(axis=1) / (x.shape[1] - 1)
    return np.column_stack([f1, g * (1.0 - np.sqrt(f1 / g))])


def convergence_metric(f, samples=500):
    """Mean distance from each member to the nearest of `samples` points spread evenly
    in f1 on the true ZDT1 front (the metric of Deb et al. 2002, Sec. V)."""
    t = np.linspace(0.0, 1.0, samples)
    front = np.column_stack([t, 1.0 - np.sqrt(t)])
    d = np.linalg.norm(f[:, None, :] - front[None, :, :], axis=2)
    return float(d.min(axis=1).mean())


def zdt1_fronts(seed32):
    """Final populations' objectives on ZDT1 (30 variables) at the settings of Deb et al.
    2002, from this kernel and from pygmo's nsga2 (each from its own random start)."""
    n_var, size, generations = 30, 100, 250
    settings = dict(cr=0.9, eta_c=20.0, m=1.0 / n_var, eta_m=20.0)
    rng = np.random.default_rng(seed32)
    x0 = rng.random((size, n_var))
    ours = drive(
        x0, zdt1(x0), np.zeros(n_var), np.ones(n_var), zdt1, generations, *settings.values(), seed32
    )[1]
    pop = pg.population(pg.problem(pg.zdt(1, n_var)), size, seed=seed32)
    pop = pg.algorithm(pg.nsga2(gen=generations, seed=seed32, **settings)).evolve(pop)
    return ours, pop.get_f()


def zdt1_hypervolume(f):
    return pg.hypervolume(f[np.all(f < 1.0, axis=1)]).compute([1.0, 1.0])


def test_zdt1_front_as_good_as_pygmo_and_the_published_figure():
    runs = [zdt1_fronts(seed32) for seed32 in range(1, 6)]
    metric = np.array([[convergence_metric(f) for f in run] for run in runs])
    hv = np.array([[zdt1_hypervolume(f) for f in run] for run in runs])
    ours, theirs = np.median(metric, axis=0)
    # Deb et al. report 0.033482 on average; measured here (seeds 1-5) 0.0016-0.0020
    # for this kernel and 0.0018-0.0020 for pygmo's nsga2
    assert metric[:, 0].max() < 0.033482
    assert ours < 1.25 * theirs
    # hypervolume against (1, 1); the true front's is the integral of sqrt(f1), 2/3.
    # Measured medians 0.6595 (this kernel) and 0.6593 (pygmo), seed spread 0.0008.
    assert np.median(hv[:, 0]) > np.median(hv[:, 1]) - 0.0005
    assert np.all(hv[:, 0] > 2.0 / 3.0 - 0.01) and np.all(hv[:, 0] <= 2.0 / 3.0)
    for f, _ in runs:
        assert np.all(nsga2.non_dominated_ranks(f) == 0)
        # the population spans the front (measured: f1 from 0.000 to 0.999 or more)
        assert f[:, 0].min() < 0.01 and f[:, 0].max() > 0.99


def test_a_population_not_a_multiple_of_four_is_refused():
    x = np.random.default_rng(0).random((10, 3))
    f = zdt1(x)
    rank = nsga2.non_dominated_ranks(f)
    with pytest.raises(ValueError, match="multiple of 4"):
        nsga2.offspring(
            x,
            rank,
            nsga2.crowding_distances(f, rank),
            np.zeros(3),
            np.ones(3),
            0.9,
            20.0,
            0.3,
            20.0,
        )


def test_equal_rows_share_a_front_and_do_not_dominate():
    f = np.array([[1.0, 2.0], [1.0, 2.0], [2.0, 3.0]])
    assert nsga2.non_dominated_ranks(f).tolist() == [0, 0, 1]
    three = nsga2.non_dominated_ranks(np.array([[1.0, 2.0, 3.0]] * 3))
    assert three.tolist() == [0, 0, 0]
