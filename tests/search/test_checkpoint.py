"""Checkpoints (leverage/checkpoint.py), resumed settings and search determinism.

Outside sources: none numeric. What is checked is reproducibility: pygmo's
documentation states that its algorithms and populations pickle with their full
state, including the random engine (pygmo 2.19 docs, "Serialization"), and Python's
``os.replace`` documentation that the rename is atomic on POSIX; the checks below
hold the code to both (same champion after a save/load/continue as without one).
"""

import pickle

import numpy as np
import pytest

from leverage.cli import main as cli_main
from leverage.core import layout as L
from leverage.errors import ProblemError
from leverage.problem.load import load_problem
from leverage.run.runner import make_search, resumed_settings, settings_from
from leverage.search import checkpoint
from leverage.search.islands import ProcessIslands, SerialIslands, shares
from leverage.search.udp import LeveragingUDP, WidenedUDP

SMALL = {
    "islands": 2,
    "population": 10,
    "generations": 60,
    "generations_per_migration": 10,
    "seed": 7,
}


def small_search(problem, evolver=None, **over):
    settings = settings_from(problem, {**SMALL, **over})
    compiled = problem.compile()
    udp = LeveragingUDP.from_compiled(compiled, problem.name)
    return make_search(compiled, udp, settings, evolver or SerialIslands()), settings


def run_out(search):
    while not search.done:
        search.step()
    return search.champion()


def run_in_workers(problem):
    """``run_out`` of the small search with its 2 islands in 2 worker processes."""
    pool = ProcessIslands(2)
    try:
        return run_out(small_search(problem, pool)[0])
    finally:
        pool.close()


@pytest.mark.slow
def test_save_load_continue_gives_the_same_champion(demo_path, tmp_path):
    problem = load_problem(demo_path)
    straight, _ = small_search(problem)
    x_ref, f_ref = run_out(straight)

    first, settings = small_search(problem)
    first.step()
    first.step()
    path = checkpoint.save(tmp_path, problem, settings, first)
    assert path.name == checkpoint.FILE_NAME
    assert [p.name for p in tmp_path.iterdir()] == [checkpoint.FILE_NAME]  # no temp left
    data = checkpoint.load(tmp_path)
    assert data["problem_sha256"] == problem.sha256
    assert data["island_seeds"] == [7000, 7001]
    assert data["state"].evolution == 2
    assert data["champion"]["f"] == first.champion()[1].tolist()

    resumed, _ = small_search(problem)
    checkpoint.restore(resumed, data)
    assert resumed.state.evolution == 2
    x, f = run_out(resumed)
    np.testing.assert_array_equal(x, x_ref)
    np.testing.assert_array_equal(f, f_ref)
    # the history continues too: same rows as the straight run, wall time aside
    strip = [
        (r.evolution, r.island, r.evaluations, r.best_objective, r.median_objective)
        for r in resumed.state.history
    ]
    assert strip == [
        (r.evolution, r.island, r.evaluations, r.best_objective, r.median_objective)
        for r in straight.state.history
    ]


@pytest.mark.slow
def test_same_seed_and_islands_same_champion_whatever_the_evolver(demo_path):
    problem = load_problem(demo_path)
    x1, f1 = run_out(small_search(problem)[0])
    x2, f2 = run_out(small_search(problem)[0])
    x3, f3 = run_in_workers(problem)
    np.testing.assert_array_equal(x1, x2)
    np.testing.assert_array_equal(x1, x3)
    assert f1[0] == f2[0] == f3[0]
    # and a different seed gives a different search (the check above can fail)
    x4, _ = run_out(small_search(problem, seed=8)[0])
    assert not np.array_equal(x1, x4)


@pytest.mark.slow
def test_checkpoints_are_written_first_then_when_due_and_at_the_end(demo_path, tmp_path):
    problem = load_problem(demo_path)
    search, settings = small_search(problem)
    saver = checkpoint.Checkpointer(tmp_path, problem, settings, write_every_s=3600.0)
    on_disk = []
    while not search.done:
        search.step()
        wrote = saver.save(search, final=search.done)
        on_disk.append((wrote is not None, checkpoint.load(tmp_path)["state"].evolution))
    # 6 evolutions: the first written, the next four not yet due, the last one final
    assert on_disk == [(True, 1), (False, 1), (False, 1), (False, 1), (False, 1), (True, 6)]
    assert saver.written == 6 and saver.flush() is None  # nothing left to write


@pytest.mark.slow
def test_an_unwritten_evolution_is_flushed_as_it_was_and_resumes_exactly(demo_path, tmp_path):
    """A stop mid-run writes the last logged evolution (kept in memory when its
    checkpoint was not due), unchanged by the evolution begun after it."""
    problem = load_problem(demo_path)
    x_ref, f_ref = run_out(small_search(problem)[0])
    search, settings = small_search(problem)
    saver = checkpoint.Checkpointer(tmp_path, problem, settings, write_every_s=3600.0)
    for _ in range(3):
        search.step()
        saver.save(search)
    search.step()  # evolution 4 runs, as if a stop came while it was logged
    assert checkpoint.load(tmp_path)["state"].evolution == 1
    saver.flush()
    data = checkpoint.load(tmp_path)
    assert data["state"].evolution == 3 and saver.written == 3
    resumed, _ = small_search(problem)
    checkpoint.restore(resumed, data)
    x, f = run_out(resumed)
    np.testing.assert_array_equal(x, x_ref)
    np.testing.assert_array_equal(f, f_ref)
    every = checkpoint.Checkpointer(tmp_path, problem, settings, write_every_s=0.0)
    assert every.save(search) is not None and every.save(search) is not None


def test_load_refuses_missing_and_foreign_files(tmp_path):
    with pytest.raises(ProblemError, match="no checkpoint.pickle here"):
        checkpoint.load(tmp_path)
    (tmp_path / checkpoint.FILE_NAME).write_bytes(b"not a pickle")
    with pytest.raises(ProblemError, match="unreadable checkpoint") as err:
        checkpoint.load(tmp_path)
    assert "\n" not in str(err.value)
    (tmp_path / checkpoint.FILE_NAME).write_bytes(pickle.dumps({"format": "something else"}))
    with pytest.raises(ProblemError, match="not a leverage-checkpoint/2 file"):
        checkpoint.load(tmp_path)


def test_write_bytes_atomic_replaces_whole_file(tmp_path):
    path = tmp_path / "x.bin"
    checkpoint.write_bytes_atomic(path, b"first version, longer")
    checkpoint.write_bytes_atomic(path, b"second")
    assert path.read_bytes() == b"second"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["x.bin"]


def test_resumed_settings_keep_the_run_and_only_grow_generations(demo_path):
    saved = {
        "algorithm": "sade",
        "islands": 2,
        "population": 24,
        "generations": 400,
        "generations_per_migration": 50,
        "seed": 1,
        "polish": "bobyqa",
    }
    same = resumed_settings(saved, {"seed": 1}, 3)
    assert same.generations == 400 and same.seed == 1
    longer = resumed_settings(saved, {"generations": 520}, 3)
    assert longer.generations == 550  # whole migration intervals
    with pytest.raises(ProblemError, match="--seed = 2: the run being resumed used 1"):
        resumed_settings(saved, {"seed": 2}, 3)
    with pytest.raises(ProblemError, match="already did 150 generations"):
        resumed_settings(saved, {"generations": 100}, 3)


@pytest.mark.slow
def test_resume_refuses_another_problem_in_one_line(demo_path, tmp_path, capsys):
    out = tmp_path / "run"
    assert cli_main(
        [
            "run",
            str(demo_path),
            "--out",
            str(out),
            "--quiet",
            "--generations",
            "50",
            "--population",
            "8",
            "--islands",
            "1",
        ]
    ) in (0, 3)
    capsys.readouterr()
    other = tmp_path / "other.toml"
    other.write_text(demo_path.read_text().replace("max_c3_km2_s2 = 24.0", "max_c3_km2_s2 = 25.0"))
    assert cli_main(["run", str(other), "--resume", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert "differs from the problem of the run in" in err and str(other) in err
    assert cli_main(["run", str(demo_path), "--resume", str(out), "--islands", "3"]) == 2
    assert "--islands = 3: the run being resumed used 1" in capsys.readouterr().err


def small_front(problems_dir, algorithm):
    """The trade-front template and small search settings with ``algorithm``."""
    problem = load_problem(problems_dir / "trade-front.toml")
    over = {"islands": 2, "population": 16, "generations": 30, "generations_per_migration": 10}
    return problem, {**over, "algorithm": algorithm}


@pytest.mark.slow
@pytest.mark.parametrize("algorithm", ["nsga2", "pygmo_nsga2"])
def test_a_front_search_checkpoints_the_same_way(problems_dir, tmp_path, algorithm):
    # FrontSearch (leverage/fronts.py) keeps an archive in its state; the checkpoint
    # pickles whatever the state holds, so a resumed front search ends the same.
    problem, over = small_front(problems_dir, algorithm)

    def fresh():
        settings = settings_from(problem, over)
        compiled = problem.compile()
        udp = LeveragingUDP.from_compiled(compiled, problem.name)
        return make_search(compiled, udp, settings, SerialIslands()), settings

    straight, _ = fresh()
    x_ref, f_ref = run_out(straight)
    first, settings = fresh()
    first.step()
    checkpoint.save(tmp_path, problem, settings, first)
    resumed, _ = fresh()
    checkpoint.restore(resumed, checkpoint.load(tmp_path))
    x, f = run_out(resumed)
    np.testing.assert_array_equal(x, x_ref)
    np.testing.assert_array_equal(f, f_ref)
    np.testing.assert_array_equal(resumed.state.archive_f, straight.state.archive_f)


def test_the_largest_allowed_seed_and_island_fit_pygmo():
    """pygmo seeds are 32-bit unsigned (its docs): island i of seed s starts from
    1000 s + i, so the schema's largest seed with its largest island count must fit, and
    the next seed would not."""
    import pygmo as pg

    from leverage.problem.schema import MAX_ISLANDS, MAX_SEED
    from leverage.search.single import island_seed

    largest = island_seed(MAX_SEED, MAX_ISLANDS - 1)
    assert largest <= 2**32 - 1 < island_seed(MAX_SEED + 1, MAX_ISLANDS - 1)
    pop = pg.population(pg.problem(pg.rosenbrock(2)), 8, seed=largest)
    assert len(pop) == 8
    algo = pg.algorithm(pg.sade(gen=1, seed=largest))
    assert algo.evolve(pop).champion_f[0] <= pop.champion_f[0]


@pytest.mark.slow
@pytest.mark.parametrize("algorithm", ["nsga2", "pygmo_nsga2"])
def test_a_front_search_gives_the_same_front_in_worker_processes(problems_dir, tmp_path, algorithm):
    # In worker processes each island evolves on one thread (one-thread batches); in
    # this process each batch is spread over the cores. Same seed, same front and log.
    problem, over = small_front(problems_dir, algorithm)
    serial, _ = small_search(problem, SerialIslands(), **over)
    x_ref, f_ref = run_out(serial)
    pool = ProcessIslands(2)
    try:
        in_workers, settings = small_search(problem, pool, **over)
        in_workers.step()  # the next evolution now runs in the workers meanwhile
        checkpoint.save(tmp_path, problem, settings, in_workers)
        x, f = run_out(in_workers)
    finally:
        pool.close()
    assert in_workers.where == "processes" and serial.where.startswith("this process")
    np.testing.assert_array_equal(x, x_ref)
    np.testing.assert_array_equal(f, f_ref)
    np.testing.assert_array_equal(in_workers.state.archive_f, serial.state.archive_f)
    assert [r.best_violation for r in in_workers.state.history] == [
        r.best_violation for r in serial.state.history
    ]
    # the checkpoint written while the workers evolved holds the first evolution
    assert checkpoint.load(tmp_path)["state"].evolution == 1


@pytest.mark.slow
def test_more_islands_than_workers_give_the_same_champion(demo_path):
    """3 islands on 2 workers (one worker evolves two of them in turn, ``shares``)."""
    problem = load_problem(demo_path)
    x1, f1 = run_out(small_search(problem, islands=3)[0])
    pool = ProcessIslands(2)
    try:
        x2, f2 = run_out(small_search(problem, pool, islands=3)[0])
    finally:
        pool.close()
    np.testing.assert_array_equal(x1, x2)
    assert f1[0] == f2[0]


def test_shares_cut_the_islands_in_order_and_evenly():
    for n_items in range(0, 9):
        for n in range(1, 5):
            items = list(range(n_items))
            got = shares(items, n)
            assert [i for share in got for i in share] == items
            assert len(got) <= n and (len(got) == min(n, n_items) or n_items == 0)
            sizes = [len(share) for share in got]
            assert not sizes or max(sizes) - min(sizes) <= 1


def test_worker_pool_submit_returns_at_once_and_collect_keeps_the_order():
    from leverage.search.workers import WorkerPool

    pool = WorkerPool(2)
    try:
        items = [3, 1, 2]
        pool.submit(abs, items)
        with pytest.raises(RuntimeError):
            pool.submit(abs, items)  # one run at a time
        items.append(4)  # the items were sent: changing the list changes nothing
        assert pool.collect() == [3, 1, 2]
        with pytest.raises(RuntimeError):
            pool.collect()
        assert pool.map(abs, [-5, 6]) == [5, 6]
    finally:
        pool.close()


@pytest.mark.slow
def test_a_restart_gives_the_same_champion_in_workers_and_after_a_resume(
    demo_path, tmp_path, monkeypatch
):
    """Two restart epochs of 3 evolutions each: the restart must replace the populations
    before the workers start the next evolution, and a checkpoint taken right after it
    must resume to the same answer."""
    from leverage.search import single

    monkeypatch.setattr(single, "MIN_EPOCH_GENERATIONS", 30)
    problem = load_problem(demo_path)
    straight, _ = small_search(problem)
    x_ref, f_ref = run_out(straight)
    assert len(straight.state.kept) == 1  # the first epoch's champion, kept aside

    x_w, f_w = run_in_workers(problem)
    np.testing.assert_array_equal(x_w, x_ref)
    assert f_w[0] == f_ref[0]

    def resumed_after(evolutions: int):
        """A search checkpointed after ``evolutions`` evolutions, resumed and run out."""
        first, settings = small_search(problem)
        for _ in range(evolutions):
            first.step()
        checkpoint.save(tmp_path, problem, settings, first)
        resumed, _ = small_search(problem)
        checkpoint.restore(resumed, checkpoint.load(tmp_path))
        x_r, f_r = run_out(resumed)
        np.testing.assert_array_equal(x_r, x_ref)
        assert f_r[0] == f_ref[0]
        assert resumed.state.evaluations == straight.state.evaluations
        return first

    first = resumed_after(3)
    assert len(first.state.kept) == 1  # restarted at the end of evolution 3
    # right after the first evolution: its populations were just scored again with the
    # settle phase's penalty (search.single.phase_of); resumed, the search goes on with
    # that penalty and ends on the same champion
    early = resumed_after(1)
    penalty = early.state.populations[0].problem.extract(WidenedUDP).params[L.P_PENALTY_WEIGHT]
    assert penalty == pytest.approx(
        single.SETTLE_PENALTY_FACTOR * early.udp.params[L.P_PENALTY_WEIGHT]
    )
