"""leverage plot RESULT_DIR: (re)draw the pictures of a result folder."""

from pathlib import Path

from leverage.errors import NO_VALUE, ProblemError


def add_parser(sub):
    p = sub.add_parser(
        "plot",
        help="draw the pictures of a result folder",
        description="Write trajectory.png and convergence.png into RESULT_DIR, "
        "plus front.png when it has front.csv and launch_window.png "
        "when it has a launch-window sweep table. A sweep folder (leverage "
        "sweep): launch_window.png.",
    )
    p.add_argument("results", help="result folder (with best.json) or sweep folder")
    return p


def main(args) -> int:
    # Imported here, not at the top: building the command imports every subcommand
    # module, and `show`, `new` and friends must not pay for what they never use.
    from leverage.fileio import check_writable, load_record
    from leverage.record.arcs import check_record
    from leverage.reports import sweep_table
    from leverage.reports.plots import all_pictures, launch_window
    from leverage.run.lock import folder_lock

    if sweep_table.is_sweep_folder(args.results):  # a sweep: its launch-window picture
        check_writable(args.results, create=False)
        with folder_lock(args.results, "leverage plot"):
            picture = launch_window({}, args.results)
        if picture is None:
            raise ProblemError(
                str(Path(args.results) / "sweep.csv"), "", NO_VALUE, "no finished slice to draw"
            )
        print(picture.path)
        return 0
    record = load_record(args.results)
    check_record(record, str(Path(args.results) / "best.json"))
    check_writable(args.results, create=False)  # a read-only folder: one line, no work
    with folder_lock(args.results, "leverage plot"):
        pictures = all_pictures(record, args.results)
    for picture in pictures:
        print(picture.path)
    return 0
