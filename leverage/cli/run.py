"""leverage run PROBLEM: optimise and write a result folder."""

import shlex
import sys
import time
from pathlib import Path

from leverage.errors import NO_VALUE, ProblemError
from leverage.fileio import check_writable, safe_folder_name

from . import EXIT_INFEASIBLE, EXIT_INTERRUPTED, EXIT_NOT_VERIFIED, EXIT_OK, STARTED, print_warnings
from .options import add_search_options, search_overrides
from .parallel import add_parallel_options, workers_option


def add_parser(sub):
    p = sub.add_parser(
        "run",
        help="optimise a problem file and write results",
        description="Optimise PROBLEM and write convergence.csv, best.json, "
        "summary.txt and a copy of the problem to the output folder.",
    )
    p.add_argument("problem", help="problem file (TOML)")
    p.add_argument("--out", help="output folder (default results/<name>-<UTC time>)")
    p.add_argument(
        "--force", action="store_true", help="write into an existing, non-empty output folder"
    )
    p.add_argument("--quiet", action="store_true", help="no progress lines")
    p.add_argument(
        "--resume",
        metavar="RESULT_DIR",
        help="continue the interrupted run in RESULT_DIR from its checkpoint "
        "(same problem file; results go to RESULT_DIR)",
    )
    add_search_options(p)
    add_parallel_options(
        p,
        "processes evolving the islands (default: one per core, at most "
        "one per island; 1: in this process)",
    )
    return p


def default_out(name: str) -> Path:
    stamp = time.strftime("%Y%m%dT%H%M%SZ", time.gmtime())
    return Path("results") / f"{safe_folder_name(name)}-{stamp}"


def resume_point(args, problem):
    """(folder, settings, checkpoint) of a --resume, refused in one line if it does not fit."""
    folder = Path(args.resume)
    if args.out and Path(args.out).resolve() != folder.resolve():
        raise ProblemError(
            "command line",
            "--out",
            args.out,
            "a resumed run writes into its own folder (--resume); drop --out",
        )
    from leverage.run.runner import resumed_settings
    from leverage.search import checkpoint

    saved = checkpoint.load(folder)
    if saved["problem_sha256"] != problem.sha256:
        raise ProblemError(
            args.problem,
            "",
            NO_VALUE,
            f"differs from the problem of the run in {folder} (sha256 "
            f"{problem.sha256[:12]}, checkpoint {saved['problem_sha256'][:12]})",
        )
    settings = resumed_settings(saved["settings"], search_overrides(args), saved["state"].evolution)
    return folder, settings, saved


def exit_code(outcome, problem: str = "PROBLEM") -> int:
    """0 holds in the search model and the verification; 3 complete but no design met
    every limit; 4 the design holds in the search model but breaks a stated limit in the
    verification (named on stderr); 130 interrupted: one line on stderr says what was
    kept and, when a checkpoint was written, the command that continues the run."""
    if outcome.status != "complete":
        from leverage.search import checkpoint

        kept = "the best design so far is in best.json" if outcome.record else "nothing written"
        if (Path(outcome.folder) / checkpoint.FILE_NAME).is_file():
            how = (
                f"continue with: leverage run {shlex.quote(str(problem))} "
                f"--resume {shlex.quote(str(outcome.folder))}"
            )
        else:
            how = "no checkpoint yet, nothing to resume; run it again"
        print(f"leverage: interrupted; {kept}; {how}", file=sys.stderr)
        return EXIT_INTERRUPTED
    if not outcome.feasible:
        return EXIT_INFEASIBLE
    if outcome.verified is False:
        print(
            f"leverage: {outcome.folder / 'best.json'}: the design breaks "
            f"{outcome.broken_in_verification()} in the verification",
            file=sys.stderr,
        )
        return EXIT_NOT_VERIFIED
    return EXIT_OK


def main(args) -> int:
    # Imported here, not at the top: building the command imports every subcommand
    # module, and `show`, `new` and friends must not pay for what they never use.
    from leverage.problem.load import load_problem
    from leverage.run.lock import folder_lock
    from leverage.run.runner import Progress, evolver_for, run, settings_from

    problem = load_problem(args.problem)
    print_warnings(problem)
    workers = workers_option(args)
    if args.resume:
        check_writable(args.resume, create=False)  # a read-only folder: one line, no work
        with folder_lock(args.resume, "a resumed run"):
            out, settings, saved = resume_point(args, problem)
            evolver = evolver_for(settings, workers, args.cluster)
            return exit_code(
                run(
                    problem,
                    settings,
                    out,
                    Progress(settings.evolutions, enabled=not args.quiet),
                    evolver=evolver,
                    resume=saved,
                    started=STARTED,
                ),
                args.problem,
            )
    settings = settings_from(problem, search_overrides(args))
    out = Path(args.out) if args.out else default_out(problem.name)
    if out.exists() and not out.is_dir():
        raise ProblemError("command line", "--out", str(out), "is a file, not a folder")
    if out.exists() and any(out.iterdir()) and not args.force:
        raise ProblemError(
            "command line",
            "--out",
            str(out),
            "folder exists and is not empty; pick another or add --force",
        )
    check_writable(out)  # before any work: a folder that takes files, or one line
    with folder_lock(out):
        evolver = evolver_for(settings, workers, args.cluster)
        return exit_code(
            run(
                problem,
                settings,
                out,
                Progress(settings.evolutions, enabled=not args.quiet),
                evolver=evolver,
                started=STARTED,
            ),
            args.problem,
        )
