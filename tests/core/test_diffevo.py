"""Tests of leverage.core.diffevo: differential evolution compiled with the fitness.

Outside sources: Storn and Price (1997), "Differential evolution - a simple and
efficient heuristic for global optimization over continuous spaces", J. Global
Optimization 11, 341-359: DE/rand/1/exp builds the mutant x[r1] + F (x[r2] - x[r3])
from three distinct members other than the target, and its exponential crossover
takes L consecutive components (cyclically, from a random start) with
P(L >= k) = CR^(k-1), k = 1..D. The trial vectors are checked against those rules on a
population whose rows decode which members were drawn. The whole evolution is checked
against the model's own fitness (``trajectory.fitness`` of the clipped point, bit for
bit) on the demo problem (problems/demo.toml, an invented scenario); search quality
against best-known answers is measured in benchmarks/ (search_quality.py), not here.
"""

from collections import Counter
from itertools import permutations

import numpy as np
import pytest
from numba import njit
from scipy import stats

from leverage.core import diffevo, trajectory
from leverage.problem.load import load_problem

N, D = 4, 6
WEIGHT = 0.5


@njit
def _trials(old, i, weight, crossover, box_lo, box_hi, count, seed):
    np.random.seed(seed)
    out = np.empty((count, old.shape[1]))
    taken = np.empty(count, dtype=np.int64)
    trial = np.empty(old.shape[1])
    for k in range(count):
        taken[k] = diffevo.trial_vector(old, i, weight, crossover, box_lo, box_hi, trial)
        out[k] = trial
    return out, taken


MEMBER_VALUES = np.array([0.0, 1.0, 10.0, 100.0])


def decoding_population():
    """Member k has every component MEMBER_VALUES[k]: with F = 0.5 every ordered triple
    of members gives a different mutant value, so a trial decodes its r1, r2, r3."""
    return np.repeat(MEMBER_VALUES[:, None], D, axis=1)


def mutant_value(r1, r2, r3):
    v = MEMBER_VALUES
    return v[r1] + WEIGHT * (v[r2] - v[r3])


WIDE_LO, WIDE_HI = np.full(D, -200.0), np.full(D, 200.0)


def test_mutant_uses_three_distinct_members_other_than_the_target():
    old = decoding_population()
    triples = {mutant_value(*r): r for r in permutations(range(N), 3)}
    assert len(triples) == 24 and old[0, 0] not in triples
    seen = Counter()
    trials, _ = _trials(old, 0, WEIGHT, 0.9, WIDE_LO, WIDE_HI, 3000, 11)
    for trial in trials:
        mutant = trial[trial != old[0, 0]]
        assert len(set(mutant)) == 1  # one mutant per trial
        r = triples[mutant[0]]
        assert 0 not in r and len(set(r)) == 3
        seen[r] += 1
    # all 6 ordered triples of members 1..3, each about 1/6 of the time
    assert len(seen) == 6
    assert all(abs(c / 3000 - 1 / 6) < 0.03 for c in seen.values())


@pytest.mark.parametrize("crossover", [0.3, 0.9])
def test_exponential_crossover_takes_a_cyclic_run_of_geometric_length(crossover):
    old = decoding_population()
    count = 20000
    trials, taken = _trials(old, 2, WEIGHT, crossover, WIDE_LO, WIDE_HI, count, 5)
    starts = Counter()
    for trial, length in zip(trials, taken):
        changed = np.flatnonzero(trial != old[2, 0])
        assert len(changed) == length
        # consecutive, wrapping from the last component to the first
        start = next(j for j in changed if (j - 1) % D not in changed) if length < D else 0
        assert sorted(changed) == sorted((start + k) % D for k in range(length))
        starts[start] += length < D
    # P(L >= k) = CR^(k-1), capped at D (Storn and Price 1997)
    for k in range(1, D + 1):
        expected = crossover ** (k - 1)
        assert np.mean(taken >= k) == pytest.approx(expected, abs=0.015)
    # the run starts at every component alike
    n_runs = sum(starts.values())
    assert all(abs(starts[j] / n_runs - 1 / D) < 0.02 for j in range(D))


def test_components_outside_the_box_are_drawn_again_uniformly_inside_it():
    old = decoding_population()
    lo, hi = np.full(D, 200.0), np.full(D, 201.0)  # every member and mutant lies below it
    trials, _ = _trials(old, 0, WEIGHT, 0.9, lo, hi, 2000, 3)
    assert trials.min() >= 200.0 and trials.max() <= 201.0
    # uniform on the box (Kolmogorov-Smirnov against scipy's uniform distribution)
    assert stats.kstest(trials.ravel() - 200.0, "uniform").pvalue > 1e-3


@pytest.fixture(scope="module")
def demo(problems_dir):
    compiled = load_problem(problems_dir / "demo.toml").compile()
    rng = np.random.default_rng(4)
    span = compiled.upper - compiled.lower
    box_lo, box_hi = compiled.lower - 0.03 * span, compiled.upper + 0.03 * span
    x = box_lo + rng.random((12, span.size)) * (box_hi - box_lo)
    f = np.array(
        [
            trajectory.fitness(np.clip(v, compiled.lower, compiled.upper), compiled.params)[0]
            for v in x
        ]
    )
    return compiled, x, f, box_lo, box_hi


def _evolve(demo, generations, seed):
    compiled, x, f, box_lo, box_hi = demo
    return diffevo.evolve(
        x,
        f,
        generations,
        0.8,
        0.9,
        box_lo,
        box_hi,
        compiled.lower,
        compiled.upper,
        compiled.params,
        seed,
    )


def test_evolution_scores_the_clipped_point_and_never_loses_a_member(demo):
    compiled, x0, f0, box_lo, box_hi = demo
    x, f, used = _evolve(demo, 30, 9)
    assert used == 30 * len(x0)
    assert np.all(f <= f0) and f.min() < f0.min()  # elitist per member, and it moved
    assert np.all((x >= box_lo) & (x <= box_hi))
    assert np.any((x0 < compiled.lower) | (x0 > compiled.upper))  # clipping is exercised
    for v, fv in zip(x, f):
        clipped = np.clip(v, compiled.lower, compiled.upper)
        assert trajectory.fitness(clipped, compiled.params)[0] == fv
    assert np.array_equal(x0, demo[1])  # inputs untouched


def test_same_seed_same_population_and_another_seed_another(demo):
    x1, f1, _ = _evolve(demo, 20, 9)
    x2, f2, _ = _evolve(demo, 20, 9)
    x3, _, _ = _evolve(demo, 20, 10)
    assert np.array_equal(x1, x2) and np.array_equal(f1, f2)
    assert not np.array_equal(x1, x3)
