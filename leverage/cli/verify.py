"""leverage verify RESULT_DIR: re-fly the best design apart from the search's kernels,
re-check every stated limit, integrate its arcs; writes verification.txt and
verification.json there and records the verdict in best.json and summary.txt."""

import sys
from pathlib import Path

from . import EXIT_NOT_VERIFIED, EXIT_OK


def add_parser(sub):
    p = sub.add_parser(
        "verify",
        help="re-fly a result's design independently and re-check its limits",
        description="Re-fly the best design of RESULT_DIR on a code path apart "
        "from the search's kernels (planets read by jplephem from "
        "the search's JPL ephemeris, or DE421 for a mean-element "
        "search, and from a JPL SPK kernel file if given; poliastro "
        "propagation, Lambert and flyby), re-check every stated "
        "limit, integrate its arcs numerically, fly it with the Sun "
        "and planets as point masses, and write verification.txt and "
        "verification.json into RESULT_DIR. Exit 4 when a stated "
        "limit breaks there.",
    )
    p.add_argument("results", help="result folder (with best.json)")
    p.add_argument("--spk", help="JPL SPK kernel file on disk (.bsp); nothing is downloaded")
    return p


def main(args) -> int:
    # Imported here, not at the top: building the command imports every subcommand
    # module, and `show`, `new` and friends must not pay for what they never use.
    from leverage.fileio import check_writable, load_record
    from leverage.record.arcs import check_record
    from leverage.run.lock import folder_lock
    from leverage.run.runner import write_record
    from leverage.verify.report import attach, render, verify_record, write

    record = load_record(args.results)
    check_record(record, str(Path(args.results) / "best.json"))
    check_writable(args.results, create=False)  # before the work, not after it
    with folder_lock(args.results, "leverage verify"):
        report = verify_record(record, spk_path=args.spk)
        txt, _ = write(args.results, report)
        write_record(Path(args.results), attach(record, report))
    print(render(report))
    print(f"written to {txt} and verification.json; verdict recorded in best.json")
    if not report["verdict"]["holds"]:
        broken = ", ".join(b["limit"] for b in report["verdict"]["broken"])
        print(
            f"leverage: {Path(args.results) / 'best.json'}: the design breaks {broken} in "
            "the verification",
            file=sys.stderr,
        )
        return EXIT_NOT_VERIFIED
    return EXIT_OK
