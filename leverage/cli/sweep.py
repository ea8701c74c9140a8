"""leverage sweep PROBLEM --slice-days N: optimise every slice of the launch window."""

from pathlib import Path

from leverage.errors import ProblemError

from . import EXIT_FAILED, EXIT_INFEASIBLE, EXIT_INTERRUPTED, EXIT_OK, print_warnings
from .options import add_search_options, search_overrides
from .parallel import add_parallel_options, workers_option


def add_parser(sub):
    p = sub.add_parser(
        "sweep",
        help="optimise every slice of the launch window and tabulate them",
        description="Split the launch window of PROBLEM into slices of N days, optimise each "
        "slice with K seeds (each a normal run folder), and write sweep.csv, "
        "sweep.txt (with the launch period) and launch_window.png.",
    )
    p.add_argument("problem", help="problem file (TOML)")
    p.add_argument(
        "--slice-days",
        type=float,
        required=True,
        metavar="N",
        help="width of each launch slice, days",
    )
    p.add_argument(
        "--seeds",
        type=int,
        default=1,
        metavar="K",
        help="seeds per slice: the search seed and the K-1 after it (default 1)",
    )
    p.add_argument(
        "--max-objective",
        type=float,
        metavar="X",
        help="a slice counts toward the launch period only if its best objective "
        "is at most X (besides meeting every limit)",
    )
    p.add_argument("--out", help="sweep folder (default results/<name>-sweep-<UTC time>)")
    p.add_argument(
        "--force",
        action="store_true",
        help="write into an existing, non-empty folder, redoing every run",
    )
    p.add_argument(
        "--resume",
        metavar="SWEEP_DIR",
        help="continue the sweep in SWEEP_DIR: finished runs are kept, the rest run",
    )
    p.add_argument("--quiet", action="store_true", help="no progress lines")
    add_search_options(p)
    add_parallel_options(p, "worker processes, one run each at a time (default: one per core)")
    return p


def main(args) -> int:
    # Imported here, not at the top: building the command imports every subcommand
    # module, and `show`, `new` and friends must not pay for what they never use.
    from leverage.fileio import check_writable
    from leverage.problem.load import load_problem
    from leverage.run.lock import folder_lock
    from leverage.run.runner import settings_from
    from leverage.run.sweep import Sweep, SweepProgress, default_out

    problem = load_problem(args.problem)
    print_warnings(problem)
    workers = workers_option(args)
    settings = settings_from(problem, search_overrides(args))
    if args.resume:
        out = Path(args.resume)
        if args.out and Path(args.out).resolve() != out.resolve():
            raise ProblemError(
                "command line",
                "--out",
                args.out,
                "a resumed sweep writes into its own folder (--resume); drop --out",
            )
    else:
        out = Path(args.out) if args.out else default_out(problem.name)
        if out.exists() and not out.is_dir():
            raise ProblemError("command line", "--out", str(out), "is a file, not a folder")
        if out.exists() and any(out.iterdir()) and not args.force:
            raise ProblemError(
                "command line",
                "--out",
                str(out),
                "folder exists and is not empty; pick another, add --force, "
                "or continue a sweep with --resume",
            )
    check_writable(out, create=not args.resume)  # before any work: one line if it cannot be
    with folder_lock(out, "a sweep"):
        sweep = Sweep(problem, settings, args.slice_days, args.seeds, out, args.max_objective)
        if args.resume:
            sweep.check_resumable()
        sweep.prepare()
        progress = SweepProgress(len(sweep.tasks), len(sweep.slices), enabled=not args.quiet)
        ended = sweep.run(
            workers, args.cluster, progress, redo=bool(args.force and not args.resume)
        )
    return {
        "interrupted": EXIT_INTERRUPTED,
        "incomplete": EXIT_FAILED,
        "feasible": EXIT_OK,
        "infeasible": EXIT_INFEASIBLE,
    }[ended]
