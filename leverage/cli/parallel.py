"""Command-line options saying where the work runs: --workers and --cluster."""

from leverage.errors import ProblemError


def add_parallel_options(parser, workers_help: str):
    parser.add_argument("--workers", type=int, help=workers_help)
    parser.add_argument(
        "--cluster",
        metavar="PROFILE_OR_FILE",
        help="run on an ipyparallel cluster: a profile name or the path of "
        "the controller's ipcontroller-client.json (see README)",
    )


def workers_option(args) -> int | None:
    """--workers, checked: a whole number >= 1, and not together with --cluster."""
    workers = getattr(args, "workers", None)
    if workers is None:
        return None
    if workers < 1:
        raise ProblemError("command line", "--workers", workers, "must be at least 1")
    if getattr(args, "cluster", None):
        raise ProblemError(
            "command line",
            "--workers",
            workers,
            "cannot be used with --cluster (the engines are the workers)",
        )
    return workers
