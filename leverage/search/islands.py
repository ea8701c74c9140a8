"""Where the islands of a search evolve: in this process, in worker processes, or on a cluster.

An evolver takes the islands' pygmo algorithms and populations, evolves each pair
once (``algorithm.evolve(population)``) and returns the new algorithms (their
random-engine state has moved on) and populations, in island order. The islands
never talk to each other inside an evolution (the search migrates between
evolutions, in a fixed order), so every evolver gives the same answer for the same
seed and island count; only the wall time differs.

- ``SerialIslands``: one after the other in this process (no extra processes).
- ``ProcessIslands``: a ``workers.WorkerPool`` on this machine's cores.
- ``ClusterIslands``: ipyparallel engines through pygmo's ``ipyparallel_island``
  (see ``leverage.cluster`` for connecting).

``close()`` releases processes or connections; ``abort()`` does so without waiting
for work in progress (used when a run is interrupted).

``ProcessIslands`` can also start an evolution and return at once (``submit``, then
``collect``): a search starts the next evolution as soon as it has migrated, and
writes its log row and checkpoint while the workers evolve (``evolve_ahead``). The
islands the workers get are copies sent before the call returns, so the parent's own
state stays that of the evolution just logged and checkpointed. Islands that never
migrate (a front search) go further: ``stream`` starts all their evolutions at once,
and each worker sends its islands after every evolution and goes straight on with the
next (``evolve_on``).
"""

import copy
import os
import time

import pygmo as pg

from leverage.search.workers import WorkerPool


def _evolve_pair(pair):
    """Evolve one island once (runs in a worker process)."""
    algorithm, population = pair
    population = algorithm.evolve(population)
    return algorithm, population


class SerialIslands:
    """Evolve the islands in turn, in this process."""

    name = "serial"

    def evolve(self, algorithms, populations):
        # Copies, so an interruption halfway leaves the caller's state untouched.
        pairs = [_evolve_pair((copy.deepcopy(a), p)) for a, p in zip(algorithms, populations)]
        return [a for a, _ in pairs], [p for _, p in pairs]

    def close(self):
        pass

    def abort(self):
        pass


def _evolve_pairs(pairs):
    """Evolve several islands once, in turn (runs in a worker process)."""
    return [_evolve_pair(pair) for pair in pairs]


def _evolve_pairs_on(job):
    """Evolve several islands ``evolutions`` times (runs in a worker process), yielding
    them after each evolution (a stream, ``workers.WorkerPool.submit_stream``)."""
    pairs, evolutions = job
    for _ in range(evolutions):
        pairs = _evolve_pairs(pairs)
        yield pairs


def shares(items: list, n: int) -> list:
    """``items`` cut into at most ``n`` consecutive runs of near-equal length, in order."""
    n = max(1, min(n, len(items)))
    size, extra = divmod(len(items), n)
    out, start = [], 0
    for k in range(n):
        end = start + size + (k < extra)
        out.append(items[start:end])
        start = end
    return out


class ProcessIslands:
    """Evolve the islands in worker processes on this machine (started on first use).

    Each worker gets its share of the islands in one task (``shares``), all sent at
    once, so with more islands than workers none waits for the parent (busy with the
    log rows and a front's archive while the workers evolve, ``evolve_ahead``) to hand
    it the next; the trade-front run (4 islands, 2 workers) measured the same either
    way (6.28 and 6.33 us/evaluation/core): its parent's own work is what costs."""

    name = "processes"

    def __init__(self, workers: int):
        self.workers = int(workers)
        self._pool = None

    def _tasks(self, algorithms, populations):
        if self._pool is None:
            self._pool = WorkerPool(self.workers)
        return shares(list(zip(algorithms, populations)), self.workers)

    @staticmethod
    def _flat(results):
        pairs = [pair for share in results for pair in share]
        return [a for a, _ in pairs], [p for _, p in pairs]

    def evolve(self, algorithms, populations):
        tasks = self._tasks(algorithms, populations)
        return self._flat(self._pool.map(_evolve_pairs, tasks))

    def submit(self, algorithms, populations):
        """Start one evolution of every island and return at once (``collect`` waits)."""
        tasks = self._tasks(algorithms, populations)
        self._pool.submit(_evolve_pairs, tasks)

    def stream(self, algorithms, populations, evolutions: int):
        """Start ``evolutions`` evolutions of every island and return at once, each worker
        going from one evolution of its islands to the next without waiting for this
        process (islands that never migrate); each ``collect`` returns the next."""
        tasks = self._tasks(algorithms, populations)
        self._pool.submit_stream(_evolve_pairs_on, [(t, evolutions) for t in tasks], evolutions)

    def collect(self):
        """The algorithms and populations of the submitted (or next streamed) evolution,
        in island order."""
        return self._flat(self._pool.collect())

    def close(self):
        if self._pool is not None:
            self._pool.close()
            self._pool = None

    def abort(self):
        if self._pool is not None:
            self._pool.abort()
            self._pool = None


def evolved(evolver, submitted: bool, algorithms, populations):
    """The islands after one more evolution: the submitted one's (``submitted``), else
    evolved now."""
    if submitted:
        return evolver.collect()
    return evolver.evolve(algorithms, populations)


def evolve_ahead(evolver, algorithms, populations) -> bool:
    """Start the next evolution where the evolver can run it while this process goes
    on (worker processes); False where it cannot (this process, a cluster)."""
    if not hasattr(evolver, "submit"):
        return False
    evolver.submit(algorithms, populations)
    return True


class ClusterIslands:
    """Evolve the islands on ipyparallel engines through pygmo's ``ipyparallel_island``.

    ``client_kwargs`` are ``ipyparallel.Client`` arguments (``leverage.cluster``
    builds them from a profile name or connection file and checks the engines first).
    """

    name = "cluster"

    def __init__(self, client_kwargs: dict):
        pg.ipyparallel_island.shutdown_view()
        pg.ipyparallel_island.init_view(client_kwargs=dict(client_kwargs))

    def evolve(self, algorithms, populations):
        archi = pg.archipelago(t=pg.topology(pg.unconnected()))
        for algorithm, population in zip(algorithms, populations):
            archi.push_back(udi=pg.ipyparallel_island(), algo=algorithm, pop=population)
        archi.evolve()
        try:
            # Short sleeps instead of one blocking wait, so SIGINT/SIGTERM are seen at once.
            while archi.status in (pg.evolve_status.busy, pg.evolve_status.busy_error):
                time.sleep(0.05)
        except KeyboardInterrupt:
            # Evolutions already on the engines cannot be recalled; wait for them so the
            # archipelago's threads end before it is destroyed, then stop.
            archi.wait()
            raise
        archi.wait_check()
        return [isl.get_algorithm() for isl in archi], [isl.get_population() for isl in archi]

    def close(self):
        pg.ipyparallel_island.shutdown_view()

    def abort(self):
        self.close()


def evolve_on(evolver, algorithms, populations, evolutions: int) -> bool:
    """Start ``evolutions`` evolutions of islands that never migrate, where the evolver
    can run them while this process goes on (worker processes: ``ProcessIslands.stream``);
    ``evolved(evolver, True, ...)`` then returns each in turn. False where it cannot."""
    if not hasattr(evolver, "stream"):
        return False
    evolver.stream(algorithms, populations, evolutions)
    return True


def cpu_count() -> int:
    """Cores this process may run on."""
    if hasattr(os, "sched_getaffinity"):
        return len(os.sched_getaffinity(0))
    return os.cpu_count() or 1


def local_evolver(islands: int, workers: int | None = None):
    """Serial for one island or one worker, else worker processes (default: one per core,
    at most one per island)."""
    if workers is None:
        workers = min(islands, cpu_count())
    workers = min(int(workers), islands)
    return SerialIslands() if workers <= 1 else ProcessIslands(workers)
