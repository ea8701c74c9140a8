"""leverage plot RESULT_DIR: (re)draw the pictures of a result folder."""

from pathlib import Path


def add_parser(sub):
    p = sub.add_parser(
        "plot",
        help="draw the pictures of a result folder",
        description="Write trajectory.png and convergence.png into RESULT_DIR, "
        "plus front.png when it has front.csv and launch_window.png "
        "when it has a launch-window sweep table.",
    )
    p.add_argument("results", help="result folder (with best.json)")
    return p


def main(args) -> int:
    # Imported here, not at the top: building the command imports every subcommand
    # module, and `show`, `new` and friends must not pay for what they never use.
    from leverage.fileio import check_writable, load_record
    from leverage.record.arcs import check_record
    from leverage.reports.plots import all_pictures
    from leverage.run.lock import folder_lock

    record = load_record(args.results)
    check_record(record, str(Path(args.results) / "best.json"))
    check_writable(args.results, create=False)  # a read-only folder: one line, no work
    with folder_lock(args.results, "leverage plot"):
        pictures = all_pictures(record, args.results)
    for picture in pictures:
        print(picture.path)
    return 0
