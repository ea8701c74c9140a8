"""Launch-window sweep: every slice of the window, several seeds each, each a normal run.

A sweep folder holds

- ``sweep.json``: what was asked (problem hash, slice width, seeds, search settings,
  the slices); a resume must ask the same;
- ``slices/slice-NN.toml``: the problem file of each slice (``leverage run`` takes it);
- ``runs/slice-NN-seed-S/``: one normal run folder per slice and seed (problem.toml,
  convergence.csv, best.json, summary.txt), written by this process when the run
  comes back, best.json last: a run folder whose best.json says "complete" is done and
  is skipped by a resume;
- ``sweep.csv``, ``sweep.txt`` (see ``sweep_report``) and ``launch_window.png``,
  rewritten after every finished run, so an interrupted sweep keeps its table.

Each run evolves its islands in turn in one process (``islands.SerialIslands``), so a
slice run gives exactly the champion ``leverage run slices/slice-NN.toml --seed S``
gives, and runs spread over worker processes on this machine (``--workers``) or over
ipyparallel engines (``--cluster``) without nesting process pools. A run interrupted
mid-way is lost (it restarts on resume); finished runs never are.
"""

import socket
import tempfile
import time
from dataclasses import asdict, dataclass, replace
from pathlib import Path

from leverage.about import CAUTION
from leverage.errors import NO_VALUE, ProblemError
from leverage.fileio import read_json, safe_folder_name, write_atomic, write_json
from leverage.problem.schema import MAX_SEED
from leverage.record import objective
from leverage.reports import summary
from leverage.reports import sweep_table as sweep_report
from leverage.run import compile_notice
from leverage.run.runner import LOG_COLUMNS, StopSignals, finish, islands_evolved, prepare
from leverage.run.slices import window_slices, write_slice_problems
from leverage.search import cluster
from leverage.search.fronts import search_class
from leverage.search.islands import SerialIslands, cpu_count
from leverage.search.single import SearchSettings, algorithm_warm_up
from leverage.search.udp import LeveragingUDP
from leverage.search.workers import WorkerLost, WorkerPool

FORMAT = "leverage-sweep/1"
POLL_S = 0.2
ABORT_WAIT_S = 5.0


@dataclass
class Task:
    """One run of a sweep: a slice problem with one seed."""

    slice_number: int
    seed: int
    folder: str  # relative to the sweep folder
    problem: object  # leverage.problem.Problem of the slice
    settings: SearchSettings
    threads: int | None = None  # numba threads in a worker (None: leave as is)


def solve(task: Task) -> dict:
    """Run one task start to end in memory (in this process, a worker or an engine).

    Returns the result record, the convergence rows and any front table text, or
    ``{"error": text}`` if the run raised (a sweep reports it and goes on).
    """
    try:
        if task.threads:
            import numba

            numba.set_num_threads(max(1, min(task.threads, numba.config.NUMBA_NUM_THREADS)))
        problem, settings = task.problem, task.settings
        evolver = SerialIslands()
        compiled, udp, search = prepare(problem, settings, evolver)
        while not search.done:
            search.step()
        where = islands_evolved(search)
        with tempfile.TemporaryDirectory() as tmp:
            front_path = Path(tmp) / "front.csv"
            record = finish(
                problem,
                settings,
                compiled,
                udp,
                search,
                "complete",
                front_path,
                {"islands_evolved": where, "host": socket.gethostname()},
            )
            front = front_path.read_text(encoding="utf-8") if front_path.exists() else None
        return {
            "record": record,
            "columns": getattr(search, "log_columns", LOG_COLUMNS),
            "rows": [asdict(r) for r in search.state.history],
            "front_csv": front,
        }
    except Exception as exc:  # reported by the parent; KeyboardInterrupt passes
        return {"error": f"{type(exc).__name__}: {exc}"}


def write_run(sweep_dir: Path, task: Task, result: dict) -> dict:
    """A normal run folder from a solved task; best.json last (it marks the run done)."""
    import csv
    import io

    folder = sweep_dir / task.folder
    folder.mkdir(parents=True, exist_ok=True)
    write_atomic(folder / "problem.toml", task.problem.text)
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=result["columns"])
    writer.writeheader()
    writer.writerows(result["rows"])
    write_atomic(folder / "convergence.csv", buf.getvalue())
    record = result["record"]
    if result.get("front_csv") is not None:
        write_atomic(folder / "front.csv", result["front_csv"])
    write_atomic(folder / "summary.txt", summary.render(record))
    write_json(folder / "best.json", record)
    return record


class SweepProgress:
    """One stderr line per finished run: runs and slices done, best so far."""

    def __init__(self, total_runs: int, total_slices: int, stream=None, enabled=True, shown=None):
        import sys

        self.total_runs, self.total_slices = total_runs, total_slices
        # How the objective reads (record.objective.Shown; set by Sweep.run).
        self.shown = shown
        self.stream = stream or sys.stderr
        self.enabled = enabled
        self.start = time.monotonic()

    def line(self, text: str):
        if self.enabled:
            self.stream.write(text + "\n")
            self.stream.flush()

    def update(self, runs_done: int, rows: list):
        slices_done = sum(1 for r in rows if int(r["runs_done"]) == int(r["runs_planned"]))
        best = [r for r in rows if r["best_objective"] != ""]
        text = (
            f"sweep: runs {runs_done}/{self.total_runs}, slices done "
            f"{slices_done}/{self.total_slices}"
        )
        if best:
            top = min(best, key=lambda r: (not int(r["feasible"]), float(r["best_objective"])))
            limits = "meets every limit" if int(top["feasible"]) else "limits NOT met"
            best = float(top["best_objective"])
            shown = self.shown or objective.from_record({})[0]
            text += (
                f", best so far {shown.text(best)} (slice {top['slice']}, "
                f"{top['start_utc'][:10]}, {limits})"
            )
        self.line(text + f"  sweep {time.monotonic() - self.start:.1f} s")


class Sweep:
    """A sweep folder: its plan (slices, tasks), what is done, and its table."""

    def __init__(
        self,
        problem,
        settings: SearchSettings,
        slice_days: float,
        seeds: int,
        out_dir: Path,
        max_objective: float | None = None,
    ):
        if seeds < 1:
            raise ProblemError("command line", "--seeds", seeds, "must be at least 1")
        if settings.seed + seeds - 1 > MAX_SEED:
            raise ProblemError(
                "command line",
                "--seeds",
                seeds,
                f"seeds {settings.seed}..{settings.seed + seeds - 1} pass the "
                f"largest seed, {MAX_SEED}",
            )
        self.problem, self.settings = problem, settings
        self.slice_days, self.max_objective = float(slice_days), max_objective
        self.out_dir = Path(out_dir)
        self.slices = window_slices(problem, slice_days)
        self.seeds = [settings.seed + k for k in range(seeds)]
        launch = problem.values["launch"]
        self.meta = {
            "format": FORMAT,
            "caution": CAUTION,
            "problem": {"name": problem.name, "file": problem.source, "sha256": problem.sha256},
            "window": [launch["window_open_utc"], launch["window_close_utc"]],
            "slice_days": self.slice_days,
            "seeds": self.seeds,
            "search": asdict(settings),
            "slices": [asdict(s) for s in self.slices],
        }

    # ---------------------------------------------------------------- folder
    def check_resumable(self):
        """Refuse in one line if the folder's sweep.json asked for something else."""
        path = self.out_dir / "sweep.json"
        if not path.is_file():
            raise ProblemError(
                str(self.out_dir), "", NO_VALUE, "no sweep.json here: not a sweep folder"
            )
        try:
            old = read_json(path)
        except ValueError as exc:
            raise ProblemError(str(path), "", NO_VALUE, f"unreadable JSON ({exc})") from None
        for key, label in (
            ("problem", "problem file"),
            ("slice_days", "--slice-days"),
            ("seeds", "--seeds/--seed"),
            ("search", "search settings"),
        ):
            mine = self.meta[key]["sha256"] if key == "problem" else self.meta[key]
            theirs = old.get(key, {}).get("sha256") if key == "problem" else old.get(key)
            if mine != theirs:
                raise ProblemError(
                    str(path),
                    key,
                    theirs if key != "problem" else str(theirs)[:12],
                    f"the sweep being resumed differs in its {label} "
                    f"(now {mine if key != 'problem' else str(mine)[:12]})",
                )

    def prepare(self):
        """Write sweep.json and the slice problem files; make the tasks."""
        # A settings mismatch (e.g. --algorithm for the wrong goal) is one line here,
        # before anything is written, not one failure per run.
        compiled = self.problem.compile()
        search_class(compiled, self.settings)
        # How the objective reads (its unit and sign) and the launch-period budget, for
        # sweep.txt, the progress lines and launch_window.png (not part of a resume check).
        self.meta["objective_shown"] = objective.as_records(
            objective.shown_objectives(compiled.params)
        )
        self.meta["max_objective"] = self.max_objective
        self.out_dir.mkdir(parents=True, exist_ok=True)
        write_json(self.out_dir / "sweep.json", self.meta)
        problems = write_slice_problems(self.problem, self.slices, self.out_dir / "slices")
        self.tasks = [
            Task(
                sl.number,
                seed,
                f"runs/{sl.name}-seed-{seed}",
                prob,
                replace(self.settings, seed=seed),
            )
            for sl, prob in zip(self.slices, problems)
            for seed in self.seeds
        ]
        self._done = {}  # folder -> record of a finished run
        self._redo = False  # True: runs already on disk do not count (--force)

    def finished(self, task: Task) -> dict | None:
        """The record of a finished run (read from disk once, then kept)."""
        record = self._done.get(task.folder)
        if record is None and not self._redo:
            record = sweep_report.finished_record(
                self.out_dir / task.folder, task.problem.sha256, asdict(task.settings)
            )
            if record is not None:
                self._done[task.folder] = record
        return record

    def rows(self) -> list:
        out = []
        for sl in self.slices:
            mine = [t for t in self.tasks if t.slice_number == sl.number]
            done = [
                (t.seed, self.out_dir / t.folder, r)
                for t in mine
                if (r := self.finished(t)) is not None
            ]
            out.append(sweep_report.slice_row(sl, len(mine), done, self.out_dir))
        return out

    def write_table(self, status: str, picture: bool = False) -> str:
        """sweep.csv and sweep.txt (and launch_window.png if asked) from the run folders;
        returns the text."""
        rows = self.rows()
        write_atomic(self.out_dir / "sweep.csv", sweep_report.table_csv(rows))
        text = sweep_report.render(self.meta, rows, status, self.max_objective)
        write_atomic(self.out_dir / "sweep.txt", text)
        self._rows = rows
        if picture:
            try:
                from leverage.reports import plots

                plots.launch_window({"problem": self.meta["problem"]}, self.out_dir)
            except Exception as exc:  # a picture must never cost the sweep its table
                return text + f"\n(launch_window.png not made: {type(exc).__name__}: {exc})\n"
        return text

    # ---------------------------------------------------------------- running
    def run(
        self,
        workers: int | None = None,
        cluster_spec: str | None = None,
        progress: SweepProgress | None = None,
        redo: bool = False,
        echo=print,
    ) -> str:
        """Run every task not already done; returns how the sweep ended: "interrupted",
        "incomplete" (some runs failed), "feasible" or "infeasible" (no slice's best
        design meets every limit)."""
        self._redo = redo
        pending = [t for t in self.tasks if self.finished(t) is None]
        progress = progress or SweepProgress(len(self.tasks), len(self.slices))
        if progress.shown is None:
            progress.shown = sweep_report.shown_of(self.meta)
        done = len(self.tasks) - len(pending)
        if done:
            progress.line(
                f"sweep: {done} of {len(self.tasks)} runs already done, {len(pending)} to go"
            )
        status, failures = "complete", []

        def on_result(task, result):
            nonlocal done
            if "error" in result:
                failures.append(task)
                progress.line(f"sweep: {task.folder} failed: {result['error']}")
                return
            self._done[task.folder] = write_run(self.out_dir, task, result)
            done += 1
            self.write_table("running")
            progress.update(done, self._rows)

        with StopSignals() as stop:
            try:
                if cluster_spec:
                    self._run_cluster(pending, cluster_spec, on_result, progress)
                else:
                    self._run_local(pending, workers, on_result, progress)
            except (KeyboardInterrupt, WorkerLost) as exc:
                stop.hold()
                status = "interrupted"
                why = (
                    f"worker lost: {exc}"
                    if isinstance(exc, WorkerLost)
                    else f"{stop.received or 'SIGINT'} received"
                )
                progress.line(
                    f"sweep interrupted ({why}): finished runs are kept; "
                    f"continue with --resume {self.out_dir}"
                )
            stop.hold()
            if status == "complete" and failures:
                status = "incomplete"
            text = self.write_table(status, picture=True)
        echo(text)
        echo(f"sweep results in {self.out_dir}")
        if status in ("interrupted", "incomplete"):
            return status
        feasible = any(r["feasible"] != "" and int(r["feasible"]) for r in self._rows)
        return "feasible" if feasible else "infeasible"

    @staticmethod
    def _warm_cache(task: Task, progress=None):
        """Evaluate one point here first, so a cold numba cache is compiled once, by this
        process, instead of by every worker or same-machine engine at the same time (and
        say so while it compiles: ``compile_notice``)."""
        compiled = task.problem.compile()
        udp = LeveragingUDP.from_compiled(compiled, task.problem.name)
        x = (compiled.lower + compiled.upper) / 2.0
        # no batch_fitness: its numba threads must not exist before a fork
        compile_notice.warm_up(
            udp,
            x,
            stream=getattr(progress, "stream", None),
            enabled=getattr(progress, "enabled", True),
            algorithm_warm_up=algorithm_warm_up(task.settings.algorithm),
        )

    def _run_local(self, pending, workers, on_result, progress):
        workers = max(1, min(workers or cpu_count(), len(pending) or 1))
        if pending:
            self._warm_cache(pending[0], progress)
        if workers == 1:
            for task in pending:
                on_result(task, solve(task))
            return
        threads = max(1, cpu_count() // workers)
        tasks = [replace(t, threads=threads) for t in pending]
        progress.line(f"sweep: {len(tasks)} runs on {workers} worker processes")
        pool = WorkerPool(workers)
        try:
            for index, result in pool.imap_unordered(solve, tasks):
                on_result(tasks[index], result)
        except BaseException:
            pool.abort()
            raise
        pool.close()

    def _run_cluster(self, pending, spec, on_result, progress):
        client = cluster.connect(spec)
        try:
            if pending:
                self._warm_cache(pending[0], progress)
            progress.line(f"sweep: {len(pending)} runs on {cluster.describe(client)}")
            view = client.load_balanced_view()
            waiting = [(view.apply_async(solve, task), task) for task in pending]
            try:
                while waiting:
                    still = []
                    for handle, task in waiting:
                        if handle.ready():
                            try:
                                result = handle.get()
                            except Exception as exc:  # engine died, remote import failed...
                                result = {"error": f"{type(exc).__name__}: {exc}"}
                            on_result(task, result)
                        else:
                            still.append((handle, task))
                    waiting = still
                    if waiting:
                        time.sleep(POLL_S)
            except BaseException:
                # Runs not started are withdrawn (the engines confirm within seconds); runs
                # already on engines finish there and are dropped.
                try:
                    reply = client.abort([h for h, _ in waiting], block=False)
                    reply.wait(ABORT_WAIT_S)
                except Exception:
                    pass
                raise
        finally:
            client.close()


def default_out(name: str) -> Path:
    stamp = time.strftime("%Y%m%dT%H%M%SZ", time.gmtime())
    return Path("results") / f"{safe_folder_name(name)}-sweep-{stamp}"
