"""leverage verify RESULT_DIR: check the best design against an outside ephemeris and
numerical integration; writes verification.txt and verification.json there."""
from pathlib import Path

from leverage.fileio import check_writable, load_record
from leverage.record.arcs import check_record
from leverage.run.lock import folder_lock
from leverage.verify.report import render, verify_record, write


def add_parser(sub):
    p = sub.add_parser("verify", help="check a result's design with outside ephemerides and "
                                      "numerical integration",
                       description="Re-evaluate the best design of RESULT_DIR with astropy's "
                                   "built-in planetary ephemeris (and a JPL SPK kernel file if "
                                   "given), integrate its arcs numerically, fly it with the Sun "
                                   "and planets as point masses, and write verification.txt and "
                                   "verification.json into RESULT_DIR.")
    p.add_argument("results", help="result folder (with best.json)")
    p.add_argument("--spk", help="JPL SPK kernel file on disk (.bsp); nothing is downloaded")
    return p


def main(args) -> int:
    record = load_record(args.results)
    check_record(record, str(Path(args.results) / "best.json"))
    check_writable(args.results, create=False)  # before the work, not after it
    with folder_lock(args.results, "leverage verify"):
        report = verify_record(record, spk_path=args.spk)
        txt, _ = write(args.results, report)
    print(render(report))
    print(f"written to {txt} and verification.json")
    return 0
