"""The run checkpoint: what a search needs to continue exactly where it stopped.

Written to ``checkpoint.pickle`` in the run folder after the first evolution, then at
most every ``WRITE_EVERY_S`` seconds, after the last evolution, and when a run is
interrupted (its last whole evolution), by writing a temporary file in the same folder
and renaming it over the old one, so the file on disk is always a whole checkpoint,
whenever the process is stopped or killed. ``Checkpointer`` also forces the file to
the disk (fsync) at most every ``SYNC_EVERY_S`` seconds and after the last evolution:
an fsync costs about 7 ms here, and only an operating-system crash (not a killed run)
could lose the unsynced last seconds. Format: one header line

    leverage-checkpoint/2 sha256=<64 hex digits> bytes=<length>\n

then a Python pickle (protocol 4) of that length and SHA-256 digest. ``load`` checks
the header, the length and the digest before unpickling anything, so a truncated,
foreign or bit-flipped file is refused in one line, never resumed to another design;
then the dict's keys and their types. The dict:

- ``format``: ``"leverage-checkpoint/2"``;
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

import copy
import hashlib
import pickle
import re
import time
from dataclasses import asdict, fields
from pathlib import Path

from leverage.errors import NO_VALUE, ProblemError
from leverage.fileio import write_bytes_atomic
from leverage.search.single import SearchSettings, island_seed

FILE_NAME = "checkpoint.pickle"
FORMAT = "leverage-checkpoint/2"
_HEADER = re.compile(rb"leverage-checkpoint/(\d+) sha256=([0-9a-f]{64}) bytes=(\d+)\n")
# Keys a checkpoint must hold, with their types (checked before any is used).
REQUIRED_KEYS = {
    "format": str,
    "problem_sha256": str,
    "problem_name": str,
    "settings": dict,
    "island_seeds": list,
    "search_class": str,
    "state": object,
    "elapsed_s": (int, float),
}
SYNC_EVERY_S = 10.0
# A checkpoint costs the parent 2-4 ms (pickle, write, rename on ext4), a third of a
# 50-generation evolution of the compiled DE on the demo; written at most this often,
# a killed run loses at most these seconds (an interrupted one writes its last
# evolution: ``run.runner``).
WRITE_EVERY_S = 2.0


def island_seeds(settings) -> list:
    """The seeds of the islands' populations and algorithms (see ``search.Search``)."""
    return [island_seed(settings.seed, i) for i in range(settings.islands)]


def contents(problem, settings, search, settings_dict=None) -> dict:
    """The checkpoint dict of ``search`` now. Its state is a shallow copy (its lists
    copied too): a search's step assigns new algorithm and population objects and
    never changes the old ones, so the dict stays this evolution's while the search
    goes on, and can be written later (``Checkpointer``)."""
    state = copy.copy(search.state)
    state.history = list(state.history)
    state.kept = list(getattr(state, "kept", []))
    return {
        "format": FORMAT,
        "problem_sha256": problem.sha256,
        "problem_name": problem.name,
        "settings": settings_dict if settings_dict is not None else asdict(settings),
        "island_seeds": island_seeds(settings),
        "search_class": f"{type(search).__module__}.{type(search).__qualname__}",
        "state": state,
        "champion": {k: [float(v) for v in a] for k, a in zip(("x", "f"), search.champion())},
        "elapsed_s": time.monotonic() - search.start_time,
        "saved_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()),
    }


def write(folder, data: dict, sync: bool = True) -> Path:
    """Write a checkpoint dict into ``folder`` atomically; returns the file path."""
    path = Path(folder) / FILE_NAME
    write_bytes_atomic(path, encode(data), sync)
    return path


def save(folder, problem, settings, search, sync: bool = True) -> Path:
    """Checkpoint ``search`` into ``folder``; returns the file path."""
    return write(folder, contents(problem, settings, search), sync)


def encode(data: dict) -> bytes:
    """The file's bytes: the header line (format, SHA-256, length) and the pickle."""
    body = pickle.dumps(data, protocol=4)
    head = f"{FORMAT} sha256={hashlib.sha256(body).hexdigest()} bytes={len(body)}\n"
    return head.encode("ascii") + body


class Checkpointer:
    """Checkpoints a run: written after its first evolution, then at most every
    ``write_every_s`` seconds (default ``WRITE_EVERY_S``), and always when ``final``;
    synced to disk at most every ``sync_every_s`` seconds and when ``final``. An
    evolution not yet written is kept in memory (``contents``) so ``flush`` can write
    it when the run is interrupted. ``written``: the evolution on disk (None before
    the first)."""

    def __init__(
        self, folder, problem, settings, sync_every_s: float = SYNC_EVERY_S, write_every_s=None
    ):
        self.folder, self.problem, self.settings = folder, problem, settings
        self.sync_every_s = sync_every_s
        self.write_every_s = WRITE_EVERY_S if write_every_s is None else float(write_every_s)
        self._settings_dict = asdict(settings)
        self._last_sync = time.monotonic()
        self._last_write = None
        self._pending = None
        self.written = None

    def save(self, search, final: bool = False) -> Path | None:
        """Checkpoint this evolution: written if due (or ``final``), else kept for
        ``flush``. Returns the path when written, else None."""
        data = contents(self.problem, self.settings, search, self._settings_dict)
        now = time.monotonic()
        if (
            not final
            and self._last_write is not None
            and now - self._last_write < self.write_every_s
        ):
            self._pending = data
            return None
        return self._write(data, final, now)

    def flush(self) -> Path | None:
        """Write the evolution kept by the last ``save``, if it is not on disk yet."""
        if self._pending is None:
            return None
        return self._write(self._pending, True, time.monotonic())

    def _write(self, data, final, now):
        sync = final or now - self._last_sync >= self.sync_every_s
        path = write(self.folder, data, sync)
        self._pending = None
        self._last_write = now
        self.written = data["state"].evolution
        if sync:
            self._last_sync = now
        return path


def load(folder) -> dict:
    """The checkpoint dict of a run folder, or a one-line ProblemError."""
    path = Path(folder) / FILE_NAME
    if not path.is_file():
        raise ProblemError(
            str(folder),
            "",
            NO_VALUE,
            f"no {FILE_NAME} here: not a run folder this version can resume",
        )
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise ProblemError(
            str(path), "", NO_VALUE, f"unreadable checkpoint ({exc.strerror or exc})"
        ) from None
    head = _HEADER.match(raw[:200])
    if head is None:
        raise ProblemError(
            str(path),
            "",
            NO_VALUE,
            f"unreadable checkpoint: not a {FORMAT} file (no header with a "
            "checksum; written by another program or an older version)",
        )
    if int(head.group(1)) != int(FORMAT.rsplit("/", 1)[1]):
        raise ProblemError(
            str(path),
            "format",
            f"leverage-checkpoint/{int(head.group(1))}",
            f"unreadable checkpoint: this version reads {FORMAT}",
        )
    body = raw[head.end() :]
    if len(body) != int(head.group(3)) or hashlib.sha256(body).hexdigest() != head.group(2).decode(
        "ascii"
    ):
        raise ProblemError(
            str(path),
            "",
            NO_VALUE,
            f"damaged checkpoint: {len(body):,} bytes whose SHA-256 does not "
            f"match its header ({int(head.group(3)):,} bytes); not resumed",
        )
    try:
        data = pickle.loads(body)
    except Exception as exc:
        raise ProblemError(
            str(path), "", NO_VALUE, f"unreadable checkpoint ({type(exc).__name__}: {exc})"
        ) from None
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise ProblemError(
            str(path),
            "format",
            data.get("format", NO_VALUE) if isinstance(data, dict) else NO_VALUE,
            f"not a {FORMAT} checkpoint",
        )
    for key, kind in REQUIRED_KEYS.items():
        if key not in data:
            raise ProblemError(str(path), key, NO_VALUE, "missing from the checkpoint")
        if not isinstance(data[key], kind):
            raise ProblemError(str(path), key, data[key], "has the wrong type")
    missing = [f.name for f in fields(SearchSettings) if f.name not in data["settings"]]
    if missing:
        raise ProblemError(
            str(path),
            f"settings.{missing[0]}",
            NO_VALUE,
            "missing from the checkpoint's search settings",
        )
    state = data["state"]
    if not all(hasattr(state, a) for a in ("evolution", "evaluations", "history")):
        raise ProblemError(
            str(path),
            "state",
            NO_VALUE,
            "is not a search state (no evolution, evaluations, history)",
        )
    return data


def restore(search, data: dict) -> None:
    """Put a loaded checkpoint's state into a freshly made search of the same class."""
    kind = f"{type(search).__module__}.{type(search).__qualname__}"
    if kind != data["search_class"]:
        raise ProblemError(
            FILE_NAME,
            "search_class",
            data["search_class"],
            f"the checkpoint was written by another search than {kind}",
        )
    search.state = data["state"]
    search.start_time = time.monotonic() - float(data["elapsed_s"])
