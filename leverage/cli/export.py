"""leverage export RESULT_DIR --format csv|oem: hand-off files of the best design."""

import math
from pathlib import Path

from leverage.errors import ProblemError
from leverage.reports.export import DEFAULT_STEP_HOURS, FRAMES


def add_parser(sub):
    p = sub.add_parser(
        "export",
        help="write the design's states as CSV or a CCSDS OEM",
        description="Sample the best design's conic arcs and write them to "
        "RESULT_DIR/states.csv (epochs UTC and TDB, km, km/s, frame "
        "named) or RESULT_DIR/states.oem (CCSDS OEM, KVN, one "
        "segment per arc, EME2000, TDB).",
    )
    p.add_argument("results", help="result folder (with best.json)")
    p.add_argument("--format", required=True, choices=["csv", "oem"], help="file format")
    p.add_argument(
        "--step-hours",
        type=float,
        default=DEFAULT_STEP_HOURS,
        help=f"sample spacing in hours (default {DEFAULT_STEP_HOURS:g})",
    )
    p.add_argument(
        "--frame",
        choices=sorted(FRAMES),
        default="eme2000",
        help="frame of the CSV states (the OEM is always EME2000)",
    )
    p.add_argument("--output", help="file to write (default: in RESULT_DIR)")
    return p


def main(args) -> int:
    # Imported here, not at the top: building the command imports every subcommand
    # module, and `show`, `new` and friends must not pay for what they never use.
    from leverage.fileio import check_writable, load_record
    from leverage.record.arcs import check_record
    from leverage.reports.export import export
    from leverage.run.lock import folder_lock

    if not math.isfinite(args.step_hours) or args.step_hours <= 0:
        raise ProblemError(
            "command line", "--step-hours", args.step_hours, "must be a positive number of hours"
        )
    if args.format == "oem" and args.frame != "eme2000":
        raise ProblemError(
            "command line",
            "--frame",
            args.frame,
            "the OEM is written in EME2000 only (CCSDS has no common name for a "
            "Sun-centred ecliptic frame)",
        )
    record = load_record(args.results)
    check_record(record, str(Path(args.results) / "best.json"))
    check_writable(Path(args.output).parent if args.output else args.results, create=False)
    with folder_lock(args.results, "leverage export"):
        path = export(record, args.results, args.format, args.step_hours, args.frame, args.output)
    print(path)
    return 0
