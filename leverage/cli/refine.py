"""leverage refine RESULT_DIR: converge the best patched-conic design of a result folder
in an n-body model (Sun, planets and Moon at DE421 states) and write RESULT_DIR/refined/.

Exit codes: 0 converged (every join and limit met; the line says when the iteration
budget, not a settled optimiser, ended the optimisation); 2 bad input (one line); 6 not
converged (one line naming the condition still missed and by how much; the best attempt
is written to refined/ marked "not converged"); 130 interrupted (refined/ left as it was).
"""

import sys
import time
from pathlib import Path

from leverage.errors import ProblemError
from leverage.refine import OPT_MAX_ITER

from . import EXIT_NOT_CONVERGED


def add_parser(sub):
    p = sub.add_parser(
        "refine",
        help="converge a result's design with the Sun, planets and Moon as point "
        "masses (n-body) and write RESULT_DIR/refined/",
        description="Refine the best design of RESULT_DIR in an n-body model (point masses at "
        "JPL DE421 states, REBOUND IAS15, cross-checked with scipy DOP853): "
        "multiple shooting from the departure periapsis through the flyby "
        "periapsis, least burns subject to the problem's limits measured on the "
        "integrated trajectory. Writes refined.json, summary.txt, states.oem and "
        "trajectory.png into RESULT_DIR/refined/ (all at once). Exit status: 0 "
        "converged, 2 bad input, 6 not converged (the best attempt is still "
        'written, marked "not converged"), 130 interrupted (nothing written).',
    )
    p.add_argument("results", help="result folder (with best.json and problem.toml)")
    p.add_argument(
        "--parking-altitude-km",
        type=float,
        default=None,
        help="altitude of the departure hyperbola's periapsis above the "
        "equatorial radius (km; default: the problem's [launch] "
        "parking_altitude_km, 200 unless set; common practice 185-200)",
    )
    p.add_argument(
        "--max-steps",
        type=int,
        default=OPT_MAX_ITER,
        help=f"most optimisation iterations (trust-constr; default {OPT_MAX_ITER}; it "
        "stops sooner once 15 iterations save less than 0.1 m/s)",
    )
    return p


def _say(line):
    print(line, file=sys.stderr, flush=True)


def main(args) -> int:
    # Imported here, not at the top: building the command imports every subcommand
    # module, and `show`, `new` and friends must not pay for what they never use.
    from leverage.fileio import load_record
    from leverage.record.arcs import check_record
    from leverage.refine import report
    from leverage.refine.crosscheck import cross_check
    from leverage.refine.forces import De421
    from leverage.refine.integrators import Ias15
    from leverage.refine.limits import check_folder, read_limits
    from leverage.refine.shooting import Refiner

    folder = Path(args.results)
    if args.parking_altitude_km is not None and not 0.0 < args.parking_altitude_km < 100_000.0:
        raise ProblemError(
            "command line",
            "--parking-altitude-km",
            args.parking_altitude_km,
            "must be between 0 and 100000 km",
        )
    check_folder(folder)
    record = load_record(folder)
    check_record(record, str(folder / "best.json"))
    limits = read_limits(folder)
    parking_km = (
        limits.parking_altitude_km if args.parking_altitude_km is None else args.parking_altitude_km
    )
    started = time.monotonic()
    try:
        de = De421()
        refiner = Refiner(
            record, limits, de, Ias15(de), parking_km, progress=lambda line: _say(f"refine: {line}")
        )
        best, missed = refiner.solve(max_iter=args.max_steps)
        _say("refine: cross-checking with DOP853")
        check = cross_check(refiner, best)
        wall = time.monotonic() - started
        rec = report.refined_record(refiner, best, missed, wall, check, record)
        arcs = report.refined_arcs(refiner, best)
        out = report.write_folder(folder, report.files(rec, record, arcs))
    except KeyboardInterrupt:
        print(f"leverage refine: interrupted; {folder / 'refined'} left as it was", file=sys.stderr)
        return 130
    except (ValueError, RuntimeError) as exc:
        print(f"leverage refine: {folder}: {exc}", file=sys.stderr)
        return 2
    if missed is not None:
        print(f"leverage refine: not converged: {missed}; best attempt in {out}", file=sys.stderr)
        return EXIT_NOT_CONVERGED
    q = rec["derived"]
    dsm = f"DSM {q['dsm']['patched_conic']:.4f} -> {q['dsm']['value']:.4f} km/s"
    if refiner.stopped_at_iteration_limit:
        # Feasible (every join and limit holds) but the optimiser was still moving.
        print(
            f"converged (joins and limits met) in {refiner.iterations} iterations, "
            f"{wall:.0f} s: {dsm}; the optimisation stopped at its iteration limit "
            f"(--max-steps {args.max_steps}), so this DSM is not a proven optimum "
            f"({refiner.stop_reason}); written to {out}"
        )
        return 0
    print(f"converged in {refiner.iterations} iterations, {wall:.0f} s: {dsm}; written to {out}")
    return 0
