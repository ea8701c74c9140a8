"""The run checkpoint: what a search needs to continue exactly where it stopped.

Written after every evolution to ``checkpoint.pickle`` in the run folder, by writing
a temporary file in the same folder and renaming it over the old one, so the file
on disk is always a whole checkpoint, whenever the process is stopped or killed.
``Checkpointer`` also forces the file to the disk (fsync) at most every
``SYNC_EVERY_S`` seconds and after the last evolution: an fsync costs about 7 ms
here, a quarter of a demo evolution, and only an operating-system crash (not a
killed run) could lose the unsynced last seconds. Format: a Python pickle
(protocol 4) of a dict

- ``format``: ``"leverage-checkpoint/1"``;
- ``problem_sha256``, ``problem_name``: the problem text it belongs to;
- ``settings``: the search settings (``SearchSettings`` fields);
- ``island_seeds``: the seeds the islands' populations and algorithms started from;
- ``search_class``: ``module.Class`` of the search that wrote it;
- ``state``: the search's ``state`` object as it is (for ``search.Search``: the
  pygmo populations and algorithms, whose pickles carry each algorithm's random-engine
  state, the evolution count, evaluation count and convergence history), so any
  search class with a picklable ``state`` checkpoints the same way;
- ``champion``: ``{"x": [...], "f": [...]}``, the search's best so far (for people
  reading a checkpoint; a resume takes it from the state);
- ``elapsed_s``: search wall time so far (s); ``saved_utc``.

A pickle runs code when loaded: only resume from checkpoints you wrote yourself.
"""
import pickle
import time
from dataclasses import asdict
from pathlib import Path

from leverage.errors import NO_VALUE, ProblemError
from leverage.fileio import write_bytes_atomic
from leverage.search.single import island_seed

FILE_NAME = "checkpoint.pickle"
FORMAT = "leverage-checkpoint/1"
SYNC_EVERY_S = 10.0


def island_seeds(settings) -> list:
    """The seeds of the islands' populations and algorithms (see ``search.Search``)."""
    return [island_seed(settings.seed, i) for i in range(settings.islands)]


def save(folder, problem, settings, search, sync: bool = True) -> Path:
    """Checkpoint ``search`` into ``folder``; returns the file path."""
    data = {
        "format": FORMAT,
        "problem_sha256": problem.sha256,
        "problem_name": problem.name,
        "settings": asdict(settings),
        "island_seeds": island_seeds(settings),
        "search_class": f"{type(search).__module__}.{type(search).__qualname__}",
        "state": search.state,
        "champion": {k: [float(v) for v in a] for k, a in zip(("x", "f"), search.champion())},
        "elapsed_s": time.monotonic() - search.start_time,
        "saved_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
    }
    path = Path(folder) / FILE_NAME
    write_bytes_atomic(path, pickle.dumps(data, protocol=4), sync)
    return path


class Checkpointer:
    """Saves a run's checkpoint after every evolution, syncing it to disk at most every
    ``sync_every_s`` seconds and always when ``final``."""

    def __init__(self, folder, problem, settings, sync_every_s: float = SYNC_EVERY_S):
        self.folder, self.problem, self.settings = folder, problem, settings
        self.sync_every_s = sync_every_s
        self._last_sync = time.monotonic()

    def save(self, search, final: bool = False) -> Path:
        now = time.monotonic()
        sync = final or now - self._last_sync >= self.sync_every_s
        path = save(self.folder, self.problem, self.settings, search, sync)
        if sync:
            self._last_sync = now
        return path


def load(folder) -> dict:
    """The checkpoint dict of a run folder, or a one-line ProblemError."""
    path = Path(folder) / FILE_NAME
    if not path.is_file():
        raise ProblemError(str(folder), "", NO_VALUE,
                           f"no {FILE_NAME} here: not a run folder this version can resume")
    try:
        data = pickle.loads(path.read_bytes())
    except Exception as exc:
        raise ProblemError(str(path), "", NO_VALUE, f"unreadable checkpoint ({exc})") from None
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise ProblemError(str(path), "format", data.get("format", NO_VALUE)
                           if isinstance(data, dict) else NO_VALUE,
                           f"not a {FORMAT} checkpoint")
    return data


def restore(search, data: dict) -> None:
    """Put a loaded checkpoint's state into a freshly made search of the same class."""
    kind = f"{type(search).__module__}.{type(search).__qualname__}"
    if kind != data["search_class"]:
        raise ValueError(f"checkpoint was written by {data['search_class']}, not {kind}")
    search.state = data["state"]
    search.start_time = time.monotonic() - float(data["elapsed_s"])
