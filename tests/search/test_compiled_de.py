"""Tests of leverage.search.compiled_de: the compiled DE as a pygmo algorithm.

Outside sources: pygmo's own population bookkeeping
(evaluation count, champion) for the wrapper. The demo problem (problems/demo.toml)
is an invented scenario.
"""

import pickle

import numpy as np
import pygmo as pg
import pytest

from leverage.problem.load import load_problem
from leverage.search.compiled_de import CompiledDE
from leverage.search.udp import LeveragingUDP, WidenedUDP


@pytest.fixture(scope="module")
def problem(demo_path):
    udp = LeveragingUDP.from_compiled(load_problem(demo_path).compile())
    return pg.problem(WidenedUDP.around(udp, 0.03))


def test_evolve_counts_evaluations_and_keeps_pygmo_champion(problem):
    pop = pg.population(problem, 10, seed=3)
    before = pop.problem.get_fevals()
    best_before = pop.champion_f[0]
    pop = pg.algorithm(CompiledDE(gen=15, seed=4)).evolve(pop)
    assert pop.problem.get_fevals() - before == 15 * 10
    assert pop.champion_f[0] == pop.get_f()[:, 0].min() < best_before
    # every member's stored fitness is the problem's fitness of its decision vector
    for x, f in zip(pop.get_x(), pop.get_f()):
        assert problem.fitness(x)[0] == f[0]


def test_evolve_leaves_the_given_population_as_it_was(problem):
    # as pygmo's own algorithms do (they evolve a copy); pygmo gives a Python
    # algorithm the caller's population itself
    pop = pg.population(problem, 8, seed=2)
    x, f = pop.get_x().copy(), pop.get_f().copy()
    out = pg.algorithm(CompiledDE(gen=5, seed=4)).evolve(pop)
    np.testing.assert_array_equal(pop.get_x(), x)
    np.testing.assert_array_equal(pop.get_f(), f)
    assert not np.array_equal(out.get_x(), x)


def test_a_pickled_algorithm_goes_on_as_the_original(problem):
    straight = pg.algorithm(CompiledDE(gen=5, seed=4))
    pop = pg.population(problem, 8, seed=1)
    pop = straight.evolve(pop)
    copy_pop = pickle.loads(pickle.dumps(pop))
    restored = pickle.loads(pickle.dumps(straight))
    snapshot = pickle.dumps(pop)
    a = straight.evolve(pop)
    b = restored.evolve(copy_pop)
    np.testing.assert_array_equal(a.get_x(), b.get_x())
    # the call count matters: a fresh algorithm with the same seed evolves differently
    fresh = pg.algorithm(CompiledDE(gen=5, seed=4)).evolve(pickle.loads(snapshot))
    assert not np.array_equal(a.get_x(), fresh.get_x())


def test_refuses_a_foreign_problem_and_too_small_a_population(problem):
    with pytest.raises(TypeError, match="only leverage problems"):
        pg.algorithm(CompiledDE(gen=1, seed=1)).evolve(
            pg.population(pg.problem(pg.rosenbrock(3)), 8)
        )
    with pytest.raises(ValueError, match="at least 4 individuals"):
        pg.algorithm(CompiledDE(gen=1, seed=1)).evolve(pg.population(problem, 3))


def test_the_run_loads_the_kernel_of_a_compiled_algorithm_before_forking(problem):
    """``single.algorithm_warm_up`` names the kernel to load for the compiled
    algorithms (both run it once) and none for pygmo's own."""
    from leverage.core import diffevo, nsga2
    from leverage.search.single import algorithm_warm_up

    assert algorithm_warm_up("sade") is None and algorithm_warm_up("pygmo_de") is None
    udp = problem.extract(WidenedUDP)
    x = (udp.lower + udp.upper) / 2.0
    for name, kernel in (("de", diffevo.evolve), ("nsga2", nsga2.evolve)):
        algorithm_warm_up(name)(udp, x)
        assert kernel.signatures, name  # compiled or loaded for the arguments a run passes
