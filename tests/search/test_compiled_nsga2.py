"""The compiled NSGA-II as a pygmo algorithm (leverage.search.compiled_nsga2).

Outside source: pygmo 2.19.5's behaviour for its own nsga2, which this algorithm must
match where the search relies on it: ``pygmo.algorithm.evolve`` leaves the caller's
population as it was and returns the evolved one, whose problem has counted every
evaluation (``get_fevals``); the same seed gives the same population; an algorithm
pickled between evolutions continues as the original does. The NSGA-II method itself
is checked in tests/core/test_nsga2.py. The problem is the invented
problems/trade-front.toml.
"""

import pickle

import numpy as np
import pygmo as pg
import pytest

from leverage.problem.load import load_problem
from leverage.search.compiled_nsga2 import CompiledNSGA2
from leverage.search.udp import LeveragingUDP, WidenedUDP


@pytest.fixture(scope="module")
def udp(problems_dir):
    return LeveragingUDP.from_compiled(load_problem(problems_dir / "trade-front.toml").compile())


def population(udp, size=16, seed=3):
    return pg.population(pg.problem(udp.with_one_thread()), size, b=pg.bfe(), seed=seed)


def test_evolve_counts_evaluations_and_leaves_the_callers_population(udp):
    pop = population(udp)
    x_before, f_before = pop.get_x().copy(), pop.get_f().copy()
    evolved = pg.algorithm(CompiledNSGA2(gen=7, seed=1)).evolve(pop)
    np.testing.assert_array_equal(pop.get_x(), x_before)
    np.testing.assert_array_equal(pop.get_f(), f_before)
    assert pop.problem.get_fevals() == 16
    assert evolved.problem.get_fevals() == 16 + 7 * 16
    x, f = evolved.get_x(), evolved.get_f()
    assert not np.array_equal(x, x_before)
    assert np.all(x >= udp.lower) and np.all(x <= udp.upper)
    np.testing.assert_array_equal(f, udp.batch_fitness(x).reshape(f.shape))
    # pygmo's own nsga2 leaves the caller's population too (the behaviour matched)
    reference = pg.nsga2(gen=2, seed=1)
    reference.set_bfe(pg.bfe())
    pg.algorithm(reference).evolve(pop)
    np.testing.assert_array_equal(pop.get_x(), x_before)


def test_a_pickled_algorithm_continues_as_the_original(udp):
    algo = pg.algorithm(CompiledNSGA2(gen=5, seed=42))
    first = algo.evolve(population(udp))
    saved = pickle.dumps(algo)
    second = algo.evolve(first)
    resumed = pickle.loads(saved).evolve(first)
    np.testing.assert_array_equal(resumed.get_x(), second.get_x())
    np.testing.assert_array_equal(resumed.get_f(), second.get_f())
    assert algo.extract(CompiledNSGA2).calls == 2
    # successive calls draw different numbers: the second differs from a fresh first
    again = pg.algorithm(CompiledNSGA2(gen=5, seed=42)).evolve(first)
    assert not np.array_equal(again.get_x(), second.get_x())


def test_the_seed_fixes_the_evolution(udp):
    pop = population(udp)
    a = pg.algorithm(CompiledNSGA2(gen=5, seed=9)).evolve(pop)
    b = pg.algorithm(CompiledNSGA2(gen=5, seed=9)).evolve(pop)
    c = pg.algorithm(CompiledNSGA2(gen=5, seed=10)).evolve(pop)
    np.testing.assert_array_equal(a.get_x(), b.get_x())
    assert not np.array_equal(a.get_x(), c.get_x())
    uda = CompiledNSGA2(gen=5, seed=10)
    uda.set_seed(9)
    np.testing.assert_array_equal(pg.algorithm(uda).evolve(pop).get_x(), a.get_x())


def test_it_refuses_other_problems_and_sizes(udp):
    algo = pg.algorithm(CompiledNSGA2(gen=1, seed=1))
    with pytest.raises(ValueError, match="multiple of 4"):
        algo.evolve(population(udp, size=10))
    widened = WidenedUDP.around(udp, 0.03)
    with pytest.raises(TypeError, match="LeveragingUDP"):
        algo.evolve(pg.population(pg.problem(widened), 8, seed=1))
    with pytest.raises(ValueError):
        CompiledNSGA2(cr=1.5)


def test_the_designs_met_are_feasible_non_dominated_and_taken_once(udp):
    from leverage.record.design import feasible_rows
    from leverage.search.fronts import non_dominated, taken_met

    algo = pg.algorithm(CompiledNSGA2(gen=20, seed=5))
    evolved = algo.evolve(population(udp, size=32))
    assert algo.extract(CompiledNSGA2).met is not None
    [(x, f)] = taken_met([algo])
    assert len(f) > 0
    assert np.all(feasible_rows(udp.batch_details(x)))  # checked in the full pass
    np.testing.assert_array_equal(f, udp.batch_fitness(x).reshape(f.shape))
    assert len(non_dominated(f)) == len(f)
    # taken: gone from the algorithm, so it does not travel with it to the next call
    assert algo.extract(CompiledNSGA2).take_met() is None and taken_met([algo]) == []
    # none from pygmo's algorithms
    reference = pg.nsga2(gen=1)
    reference.set_bfe(pg.bfe())
    assert taken_met([pg.algorithm(reference)]) == []
    # the final population's feasible members are no better than what was met
    q = udp.batch_details(evolved.get_x())
    for fp in evolved.get_f()[feasible_rows(q)]:
        assert np.any(np.all(f <= fp, axis=1))
