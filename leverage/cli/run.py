"""leverage run PROBLEM: optimise and write a result folder."""
import time
from pathlib import Path

from ..errors import NO_VALUE, ProblemError
from ..problem import load_problem
from ..runner import Progress, run, settings_from
from .options import add_search_options, search_overrides


def add_parser(sub):
    p = sub.add_parser("run", help="optimise a problem file and write results",
                       description="Optimise PROBLEM and write convergence.csv, best.json, "
                                   "summary.txt and a copy of the problem to the output folder.")
    p.add_argument("problem", help="problem file (TOML)")
    p.add_argument("--out", help="output folder (default results/<name>-<UTC time>)")
    p.add_argument("--force", action="store_true",
                   help="write into an existing, non-empty output folder")
    p.add_argument("--quiet", action="store_true", help="no progress lines")
    add_search_options(p)
    return p


def default_out(name: str) -> Path:
    stamp = time.strftime("%Y%m%dT%H%M%SZ", time.gmtime())
    return Path("results") / f"{name}-{stamp}"


def main(args) -> int:
    problem = load_problem(args.problem)
    settings = settings_from(problem, search_overrides(args))
    out = Path(args.out) if args.out else default_out(problem.name)
    if out.exists() and not out.is_dir():
        raise ProblemError("command line", "--out", str(out), "is a file, not a folder")
    if out.exists() and any(out.iterdir()) and not args.force:
        raise ProblemError("command line", "--out", str(out),
                           "folder exists and is not empty; pick another or add --force")
    return run(problem, settings, out, Progress(settings.evolutions, enabled=not args.quiet))
