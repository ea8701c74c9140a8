"""One optimisation run: problem -> search -> polished champion -> files on disk.

Writes into the run folder, as it goes: ``problem.toml`` (a copy),
``convergence.csv`` (flushed after every evolution), and at the end ``best.json``
and ``summary.txt`` (atomically). Ctrl-C or SIGTERM stops the search; the best
design found so far is still written, marked "interrupted".
"""
import csv
import signal
import sys
import time
from dataclasses import asdict, fields
from pathlib import Path

from . import afterrun, summary
from .fronts import search_class
from .result import base_record, design_record, write_atomic, write_json
from .search import IslandRecord, Search, SearchSettings
from .udp import LeveragingUDP

EXIT_OK = 0
EXIT_INFEASIBLE = 3
EXIT_INTERRUPTED = 130

LOG_COLUMNS = [f.name for f in fields(IslandRecord)]


def settings_from(problem, overrides: dict | None = None) -> SearchSettings:
    values = dict(problem.values["search"])
    values.update({k: v for k, v in (overrides or {}).items() if v is not None})
    # Islands evolve whole migration intervals: never more per interval than asked in
    # all, and the total rounded up to whole intervals so the record says what ran.
    per = min(values["generations_per_migration"], values["generations"])
    values["generations_per_migration"] = per
    values["generations"] = -(-values["generations"] // per) * per
    return SearchSettings(**{f.name: values[f.name] for f in fields(SearchSettings)})


class Progress:
    """Progress on stderr: a live line on a terminal, one line per step otherwise."""

    def __init__(self, total: int, stream=None, enabled=True):
        self.total = total
        self.stream = stream or sys.stderr
        self.enabled = enabled
        self.tty = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.start = time.monotonic()

    def update(self, done: int, best: float, evaluations: int):
        if not self.enabled:
            return
        elapsed = time.monotonic() - self.start
        text = (f"evolution {done}/{self.total}  best {best:.6g}  "
                f"{evaluations:,} evaluations  {elapsed:.1f} s")
        if self.tty:
            self.stream.write("\r" + text.ljust(78))
            if done >= self.total:
                self.stream.write("\n")
        else:
            self.stream.write(text + "\n")
        self.stream.flush()

    def note(self, text: str):
        if self.enabled:
            if self.tty:
                self.stream.write("\n")
            self.stream.write(text + "\n")
            self.stream.flush()


class _Stop(Exception):
    pass


def _raise_stop(signum, frame):
    raise KeyboardInterrupt


def run(problem, settings: SearchSettings, out_dir: Path, progress: Progress | None = None,
        echo=print) -> int:
    """Run the search and write the run folder; returns the process exit code."""
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    # The text that was validated and hashed, not a re-read of a file that may change.
    write_atomic(out_dir / "problem.toml", problem.text)
    compiled = problem.compile()
    udp = LeveragingUDP.from_compiled(compiled, problem.name)
    progress = progress or Progress(settings.evolutions)
    status = "complete"
    old_term = signal.signal(signal.SIGTERM, _raise_stop)
    search = None
    try:
        # Several objectives: a FrontSearch (fronts.py), which logs a hypervolume column too.
        search = search_class(compiled, settings)(udp, settings)
        with open(out_dir / "convergence.csv", "w", newline="", encoding="utf-8") as fh:
            log = csv.DictWriter(fh, fieldnames=getattr(search, "log_columns", LOG_COLUMNS))
            log.writeheader()
            fh.flush()
            try:
                while not search.done:
                    rows = search.step()
                    for row in rows:
                        log.writerow(asdict(row))
                    fh.flush()
                    progress.update(search.state.evolution, search.champion()[1][0],
                                    search.state.evaluations)
            except KeyboardInterrupt:
                status = "interrupted"
                progress.note("interrupted: writing the best design found so far")
    finally:
        signal.signal(signal.SIGTERM, old_term)
    x, f = search.champion()
    polish_evals = 0
    if status == "complete":
        x, f, polish_evals = search.polish(x)
    record = base_record(problem, settings, status)
    record.update(design_record(compiled, udp, x))
    if hasattr(search, "write_front"):
        record["front"] = search.write_front(out_dir / "front.csv", compiled)
    record["run"] = {"evaluations": int(search.state.evaluations + polish_evals),
                     "polish_evaluations": int(polish_evals),
                     "evolutions": search.state.evolution,
                     "wall_time_s": round(time.monotonic() - search.start_time, 3)}
    write_json(out_dir / "best.json", record)
    text = summary.render(record)
    write_atomic(out_dir / "summary.txt", text)
    echo(text)
    if status == "complete":  # pictures and verification; a failure there is one line
        afterrun.pictures_and_verification(out_dir, record, echo)
    echo(f"results in {out_dir}")
    if status == "interrupted":
        return EXIT_INTERRUPTED
    return EXIT_OK if record["feasible"] else EXIT_INFEASIBLE
