"""One optimisation run: problem -> search -> polished champion -> files on disk.

Writes into the run folder, as it goes: ``problem.toml`` (a copy),
``convergence.csv`` (flushed after every evolution), ``checkpoint.pickle`` (after the
first evolution, every few seconds, the last and an interrupted run's last whole
evolution, atomically; see ``checkpoint.py``), and at the end ``best.json``
and ``summary.txt`` (atomically). Ctrl-C or SIGTERM stops the search within moments
(worker processes are killed, cluster evolutions already sent are awaited); the best
design found so far is still written, marked "interrupted" (``RunOutcome.status``).
``run(..., resume=checkpoint.load(folder))`` continues a run exactly where its last
checkpoint left it: the same champion as a run that was never stopped.
"""

import csv
import inspect
import io
import signal
import sys
import threading
import time
from contextlib import contextmanager
from dataclasses import asdict, dataclass, fields
from pathlib import Path

from leverage.errors import ProblemError, WriteFault
from leverage.fileio import write_atomic
from leverage.problem.load import check_algorithm
from leverage.record import objective
from leverage.record.design import base_record, design_record
from leverage.reports import summary
from leverage.run import afterrun, compile_notice, rescue
from leverage.search import checkpoint, cluster
from leverage.search.fronts import search_class
from leverage.search.islands import ClusterIslands, local_evolver
from leverage.search.single import IslandRecord, SearchSettings, algorithm_warm_up
from leverage.search.udp import LeveragingUDP
from leverage.search.workers import WorkerLost
from leverage.verify import report as verify

LOG_COLUMNS = [f.name for f in fields(IslandRecord)]


def settings_from(problem, overrides: dict | None = None) -> SearchSettings:
    values = dict(problem.values["search"])
    given = {k: v for k, v in (overrides or {}).items() if v is not None}
    values.update(given)
    if "algorithm" in given or "population" in given:  # the file's own pair was checked
        check_algorithm(
            "command line",
            "--algorithm" if "algorithm" in given else "--population",
            given.get("algorithm", values["algorithm"]),
            problem.values["goal"]["kind"] == "front",
            values["population"],
        )
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
        # How the (first) objective reads: its own unit and sign (set by ``run``).
        self.shown = None

    def update(
        self,
        done: int,
        best: float,
        evaluations: int,
        search_s: float | None = None,
        headline: str | None = None,
    ):
        """``search_s``: seconds since the search started, the clock of convergence.csv's
        wall_time_s and of the summary's "search" time (default: since this line began);
        ``headline``: shown instead of "best ..." (a front search's size and hypervolume)."""
        if not self.enabled:
            return
        elapsed = time.monotonic() - self.start if search_s is None else search_s
        if headline is None:
            best_text = self.shown.text(best) if self.shown is not None else f"{best:.6g}"
            headline = f"best {best_text}"
        text = (
            f"evolution {done}/{self.total}  {headline}  "
            f"{evaluations:,} evaluations  search {elapsed:.1f} s"
        )
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


class StopSignals:
    """While active, SIGTERM (and SIGINT, unless this process was started with SIGINT
    ignored, as background jobs of a shell script are) raise KeyboardInterrupt once in
    the main thread; later signals are only noted, so the cleanup that follows the first
    one is not cut short. Outside the main thread it does nothing."""

    def __init__(self):
        self.armed = False
        self.received = None
        self._old = {}

    def _handler(self, signum, frame):
        self.received = signal.Signals(signum).name
        if self.armed:
            self.armed = False
            raise KeyboardInterrupt

    def __enter__(self):
        if threading.current_thread() is threading.main_thread():
            for sig in (signal.SIGINT, signal.SIGTERM):
                if signal.getsignal(sig) is not signal.SIG_IGN:
                    self._old[sig] = signal.signal(sig, self._handler)
        self.armed = True
        return self

    def hold(self):
        """Note signals from now on instead of raising."""
        self.armed = False

    def arm(self):
        """Raise on the next signal again (only if none came while held)."""
        self.armed = self.received is None

    @contextmanager
    def deferred(self):
        """A block that a signal does not cut in two: one arriving inside it is raised
        (as KeyboardInterrupt) when the block ends."""
        was_armed = self.armed
        self.armed = False
        yield
        if was_armed and self.received is not None:
            raise KeyboardInterrupt
        self.armed = was_armed

    def __exit__(self, *exc):
        self.armed = False
        for sig, old in self._old.items():
            signal.signal(sig, old)
        return False


class ConvergenceLog:
    """convergence.csv: header and any earlier rows written atomically, then one flushed
    write per evolution."""

    def __init__(self, path: Path, columns: list, earlier_rows=()):
        buf = io.StringIO()
        writer = csv.DictWriter(buf, fieldnames=columns)
        writer.writeheader()
        for row in earlier_rows:
            writer.writerow(asdict(row))
        write_atomic(path, buf.getvalue())
        self._fh = open(path, "a", newline="", encoding="utf-8")
        self._writer = csv.DictWriter(self._fh, fieldnames=columns)

    def write(self, rows):
        for row in rows:
            self._writer.writerow(asdict(row))
        self._fh.flush()

    def close(self):
        self._fh.close()


def _checkpoint_last(saver):
    """Write the checkpoint of an interrupted run's last logged evolution if it is not
    on disk yet (the one there may be a few seconds older); a failed write leaves that
    older one."""
    try:
        saver.flush()
    except OSError:
        pass


def make_search(compiled, udp, settings: SearchSettings, evolver=None):
    """The search for this problem (Search, or FrontSearch for several objectives), its
    islands evolved by ``evolver`` (default: in this process)."""
    cls = search_class(compiled, settings)
    if evolver is not None and "evolver" in inspect.signature(cls).parameters:
        return cls(udp, settings, evolver=evolver)
    return cls(udp, settings)


def write_record(out_dir: Path, record: dict, fault: OSError | None = None) -> str:
    """best.json and summary.txt of a record (atomically; ``rescue.write_results`` keeps
    the design somewhere when the folder refuses it); returns the summary text."""
    text = summary.render(record)
    rescue.write_results(out_dir, record, text, fault)
    return text


def prepare(problem, settings: SearchSettings, evolver, compiled=None):
    """(compiled problem, pygmo problem, search) for a run; ``where`` the islands evolve
    goes in the record as ``run.islands_evolved``."""
    compiled = compiled if compiled is not None else problem.compile()
    udp = LeveragingUDP.from_compiled(compiled, problem.name)
    search = make_search(compiled, udp, settings, evolver)
    return compiled, udp, search


def islands_evolved(search) -> str:
    """Where the islands evolved, for the record (a front search says it itself: in this
    process its batches spread over the cores)."""
    return getattr(search, "where", None) or search.evolver.name


def finish(
    problem,
    settings: SearchSettings,
    compiled,
    udp,
    search,
    status: str,
    front_path: Path | None = None,
    run_info: dict | None = None,
) -> dict:
    """Polish the champion (only when the search completed) and build the result record."""
    x, f = search.champion()
    polish_evals = 0
    if status == "complete":
        # every epoch's champion where the search keeps them (search.single)
        polish_all = getattr(search, "polish_candidates", None)
        x, f, polish_evals = polish_all() if polish_all else search.polish(x)
    record = base_record(problem, settings, status)
    if hasattr(search, "epoch_sectors_deg"):
        record["search"]["epoch_sectors_deg"] = search.epoch_sectors_deg()
    record.update(design_record(compiled, udp, x))
    if hasattr(search, "write_front") and front_path is not None:
        record["front"] = search.write_front(front_path, compiled)
    record["run"] = {
        "evaluations": int(search.state.evaluations + polish_evals),
        "polish_evaluations": int(polish_evals),
        "evolutions": search.state.evolution,
        "wall_time_s": round(time.monotonic() - search.start_time, 3),
    }
    record["run"].update(run_info or {})
    return record


def evolver_for(
    settings: SearchSettings, workers: int | None = None, cluster_spec: str | None = None
):
    """Where the islands evolve: ipyparallel engines (``--cluster``, checked first), else
    worker processes on this machine (``--workers``, default one per core up to the
    island count), else this process."""
    if cluster_spec:
        client = cluster.connect(cluster_spec)
        client.close()
        return ClusterIslands(cluster.client_kwargs(cluster_spec))
    return local_evolver(settings.islands, workers)


def resumed_settings(saved: dict, overrides: dict, done_evolutions: int) -> SearchSettings:
    """The checkpoint's settings; --generations may extend the run, any other search
    option that differs is refused in one line."""
    values = dict(saved)
    for name, value in overrides.items():
        if value is None or name == "generations" or value == values.get(name):
            continue
        raise ProblemError(
            "command line",
            f"--{name}",
            value,
            f"the run being resumed used {values.get(name)}; a resumed run "
            "keeps its search settings (only --generations may grow)",
        )
    if overrides.get("generations") is not None:
        per = values["generations_per_migration"]
        wanted = -(-overrides["generations"] // per) * per
        if wanted < done_evolutions * per:
            raise ProblemError(
                "command line",
                "--generations",
                overrides["generations"],
                f"the run already did {done_evolutions * per} generations",
            )
        values["generations"] = wanted
    return SearchSettings(**{f.name: values[f.name] for f in fields(SearchSettings)})


@dataclass
class RunOutcome:
    """How a run ended: ``status`` "complete", "interrupted" or "not started" (interrupted
    before the search began: nothing written but the problem copy), and the record
    written to ``folder/best.json`` (None when not started)."""

    folder: Path
    status: str
    record: dict | None

    @property
    def feasible(self) -> bool:
        """Every limit holds, with its margin, in the search model."""
        return bool(self.record and self.record["feasible"])

    @property
    def verified(self) -> bool | None:
        """Every stated limit holds in the verification (None: not verified)."""
        return (self.record or {}).get("verification", {}).get("holds")

    def broken_in_verification(self) -> str:
        """The limits the verification breaks, as one line."""
        broken = (self.record or {}).get("verification", {}).get("broken", [])
        return ", ".join(
            f"{b['limit']} (margin {b['check']:.6g} {b['unit']})".replace(" )", ")")
            if isinstance(b.get("check"), float)
            else b["limit"]
            for b in broken
        )


def run(
    problem,
    settings: SearchSettings,
    out_dir: Path,
    progress: Progress | None = None,
    echo=print,
    evolver=None,
    resume: dict | None = None,
    after: bool = True,
    started: float | None = None,
) -> RunOutcome:
    """Run the search and write the run folder.

    ``evolver`` (``leverage.search.islands``) says where islands evolve (default: worker
    processes on this machine when there are several islands); ``resume`` is a loaded
    checkpoint (``checkpoint.load``) to continue from; ``after`` makes the pictures and
    the verification of a complete run; ``started`` (``time.monotonic()``, default now)
    starts the whole run's clock (record ``run.whole_run_s``; the command passes its own
    start, so its imports count).
    """
    started = time.monotonic() if started is None else started
    out_dir = Path(out_dir)
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
        # The text that was validated and hashed, not a re-read of a file that may change.
        write_atomic(out_dir / "problem.toml", problem.text)
    except OSError as exc:
        raise WriteFault(exc.filename or out_dir, exc, "nothing was run") from None
    progress = progress or Progress(settings.evolutions)
    evolver = evolver or local_evolver(settings.islands)
    status = "complete"
    search = None
    fault = None  # an OSError (disk full, folder gone read-only) that stopped the search
    run_info = {}
    logged = None  # evolutions whose log rows are written (and checkpoint, when due)
    saver = None
    with StopSignals() as stop:
        try:
            try:
                compiled = problem.compile()
                compile_s = compile_notice.warm_up(
                    LeveragingUDP.from_compiled(compiled, problem.name),
                    (compiled.lower + compiled.upper) / 2.0,
                    batch=compiled.n_obj > 1,
                    stream=progress.stream,
                    enabled=progress.enabled,
                    algorithm_warm_up=algorithm_warm_up(settings.algorithm),
                )
                if compile_s:
                    run_info["compile_s"] = round(compile_s, 1)
                compiled, udp, search = prepare(problem, settings, evolver, compiled)
                run_info["start_s"] = round(time.monotonic() - started, 3)
                progress.shown = objective.shown_objectives(compiled.params)[0]
                run_info["islands_evolved"] = islands_evolved(search)
                if resume is not None:
                    checkpoint.restore(search, resume)
                    run_info["resumed_from_evolution"] = search.state.evolution
                    progress.note(
                        f"resuming at evolution {search.state.evolution}/"
                        f"{settings.evolutions} from {out_dir / checkpoint.FILE_NAME}"
                    )
                log = ConvergenceLog(
                    out_dir / "convergence.csv",
                    getattr(search, "log_columns", LOG_COLUMNS),
                    search.state.history,
                )
                saver = checkpoint.Checkpointer(out_dir, problem, settings)
                try:
                    logged = search.state.evolution
                    while not search.done:
                        rows = search.step()
                        # An evolution counts once its log rows (and checkpoint, when
                        # one is due) are written.
                        with stop.deferred():
                            log.write(rows)
                            saver.save(search, final=search.done)
                            logged = search.state.evolution
                        progress.update(
                            search.state.evolution,
                            search.champion()[1][0],
                            search.state.evaluations,
                            time.monotonic() - search.start_time,
                            # a front has no "best": its size and hypervolume instead
                            search.headline() if hasattr(search, "headline") else None,
                        )
                finally:
                    log.close()
            except (KeyboardInterrupt, WorkerLost, OSError) as exc:
                stop.hold()
                status = "interrupted"
                evolver.abort()
                fault = exc if isinstance(exc, OSError) else None
                why = (
                    f"worker lost: {exc}"
                    if isinstance(exc, WorkerLost)
                    else (
                        f"cannot write {exc.filename or out_dir}: {exc.strerror or exc}"
                        if fault
                        else f"{stop.received or 'SIGINT'} received"
                    )
                )
                if search is None and fault is not None:
                    raise WriteFault(exc.filename or out_dir, exc, "nothing was run") from None
                if search is None:
                    progress.note(
                        f"interrupted ({why}) before the search started; nothing to write"
                    )
                    return RunOutcome(out_dir, "not started", None)
                if logged is not None and search.state.evolution != logged:
                    # cut inside an evolution: the record counts what the log and the
                    # checkpoint hold (the champion may still come from the cut one)
                    run_info["evolutions"] = logged
                if saver is not None and fault is None:
                    _checkpoint_last(saver)
                progress.note(
                    f"interrupted ({why}) at evolution {search.state.evolution}: "
                    "writing the best design found so far"
                )
        finally:
            stop.hold()  # shutting the workers down is not to be cut short
            evolver.close()
        if status == "complete" and stop.received:
            status = "interrupted"  # asked to stop while the workers shut down: no polish
        stop.arm()
        try:
            record = finish(
                problem, settings, compiled, udp, search, status, out_dir / "front.csv", run_info
            )
        except KeyboardInterrupt:  # during the polish: keep the unpolished champion
            stop.hold()
            status = "interrupted"
            progress.note("interrupted during the polish: writing the unpolished best design")
            record = finish(
                problem, settings, compiled, udp, search, status, out_dir / "front.csv", run_info
            )
        stop.hold()
        text = write_record(out_dir, record, fault)  # WriteFault after a fault
    if status == "complete" and after:  # pictures and verification; a failure is one line
        report = afterrun.pictures_and_verification(out_dir, record, echo)
        if report is not None:  # the verdict goes into the record and its summary
            record = verify.attach(record, report)
    if record.get("run") is not None and fault is None:
        # Start-up, search, polish, pictures and verification: the time the analyst waited.
        record["run"]["whole_run_s"] = round(time.monotonic() - started, 1)
        text = write_record(out_dir, record)
    echo(text)
    echo(f"results in {out_dir}")
    return RunOutcome(out_dir, status, record)
