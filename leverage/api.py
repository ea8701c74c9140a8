"""The Python interface, for notebooks and scripts: the command's work without the command.

    import leverage
    problem = leverage.load_problem("problems/demo.toml")
    design = leverage.solve(problem, seed=1, generations=400)
    print(design.summary())
    design.margins["c3_max"]        # {"margin": ..., "unit": "km^2/s^2", ...}
    design.plot("pictures/")        # trajectory.png, convergence.png, ... in that folder
    again = leverage.open_result("results/demo-20310101T000000Z")

Bad input raises ``leverage.ProblemError`` whose message is the one line the command
prints; nothing here exits the process or writes to stderr except the optional progress
lines. Designs are preliminary patched-conic designs (``leverage.CAUTION``).
"""

import tempfile
from dataclasses import dataclass
from pathlib import Path

from leverage.fileio import load_record
from leverage.problem.load import Problem, load_problem_text
from leverage.problem.load import load_problem as _load_problem_file
from leverage.reports import summary as _summary
from leverage.run.runner import Progress, run, settings_from
from leverage.search.islands import local_evolver


def load_problem(path_or_text) -> Problem:
    """A validated problem from a TOML file path, or from TOML text itself (a string
    holding a newline or a ``[section]`` header is read as text)."""
    if isinstance(path_or_text, Path):
        return _load_problem_file(path_or_text)
    text = str(path_or_text)
    if "\n" in text or text.lstrip().startswith("["):
        return load_problem_text(text, source="<text>")
    return _load_problem_file(text)


@dataclass
class Design:
    """One design as the result folder records it (``best.json``), with its folder
    (``None`` when it was solved without one)."""

    record: dict
    folder: Path | None = None

    @property
    def feasible(self) -> bool:
        """Every limit holds (with its margin) in the search model."""
        return bool(self.record["feasible"])

    @property
    def objective(self) -> list:
        return list(self.record["objective"])

    @property
    def margins(self) -> dict:
        """Each limit's margin: ``{name: {"margin": value, "unit": ..., ...}}``; a margin
        >= 0 means the limit holds."""
        return dict(self.record["margins"])

    @property
    def quantities(self) -> dict:
        """Every derived quantity: ``{name: {"value": ..., "unit": ..., "meaning": ...}}``."""
        return dict(self.record["derived"])

    def summary(self) -> str:
        """The text summary (the same as ``summary.txt`` and ``leverage show``)."""
        return _summary.render(self.record)

    def plot(self, folder=None) -> list:
        """Draw the pictures into ``folder`` (default: the design's own folder) and
        return their paths."""
        from leverage.reports import plots

        where = Path(folder) if folder is not None else self.folder
        if where is None:
            raise ValueError("this design has no result folder; give plot() a folder")
        where.mkdir(parents=True, exist_ok=True)
        return [picture.path for picture in plots.all_pictures(self.record, where)]

    def __repr__(self) -> str:
        d = self.record["derived"]
        where = f", folder={str(self.folder)!r}" if self.folder else ""
        return (
            f"Design({self.record['problem']['name']!r}, feasible={self.feasible}, "
            f"dsm={d['dsm']['value']:.4f} km/s, c3={d['c3']['value']:.3f} km^2/s^2"
            f"{where})"
        )


def solve(
    problem,
    *,
    seed=None,
    generations=None,
    islands=None,
    population=None,
    algorithm=None,
    out=None,
    workers=1,
    progress=False,
    after=False,
) -> Design:
    """Search ``problem`` (a Problem, a path or TOML text) and return the best design.

    The keyword arguments override the problem's ``[search]`` keys. ``out`` names a
    result folder to write (as ``leverage run --out``); without it the run goes to a
    temporary folder that is removed afterwards. ``workers`` processes evolve the
    islands (1: in this process). ``progress`` prints progress lines on stderr;
    ``after`` also draws the pictures and runs the verification into ``out``. An
    interrupted search (Ctrl-C) returns the best design so far, its record's
    ``status`` "interrupted".
    """
    if not isinstance(problem, Problem):
        problem = load_problem(problem)
    overrides = {
        "seed": seed,
        "generations": generations,
        "islands": islands,
        "population": population,
        "algorithm": algorithm,
    }
    settings = settings_from(problem, overrides)
    evolver = local_evolver(settings.islands, workers)
    progress_lines = Progress(settings.evolutions, enabled=bool(progress))
    if out is not None:
        outcome = run(
            problem, settings, Path(out), progress_lines, echo=_quiet, evolver=evolver, after=after
        )
        return Design(outcome.record, Path(out)) if outcome.record else _not_started()
    with tempfile.TemporaryDirectory(prefix="leverage-") as folder:
        outcome = run(
            problem,
            settings,
            Path(folder),
            progress_lines,
            echo=_quiet,
            evolver=evolver,
            after=False,
        )
    return Design(outcome.record) if outcome.record else _not_started()


def open_result(folder) -> Design:
    """The design of a result folder (its ``best.json``)."""
    return Design(load_record(folder), Path(folder))


def _quiet(*_args) -> None:
    pass


def _not_started():
    raise KeyboardInterrupt("interrupted before the search started")
