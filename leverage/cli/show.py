"""leverage show RESULT_DIR [RESULT_DIR ...]: the summary of a run, or several side by side."""

from pathlib import Path

from leverage.errors import NO_VALUE, ProblemError
from leverage.fileio import load_record, load_refined
from leverage.reports import compare
from leverage.reports.summary import refined_line, render


def add_parser(sub):
    p = sub.add_parser(
        "show",
        help="print the summary of a result folder, or compare several",
        description="One folder: print its summary. Several: lay them side by "
        "side (goal, key numbers, margins, evaluations, search and whole-run times, "
        "problem-file settings that differ), within 100 columns. A sweep folder "
        "(leverage sweep): its table of slices and launch period.",
    )
    p.add_argument("results", nargs="+", help="result folder(s) or sweep folder(s)")
    return p


def main(args) -> int:
    from leverage.reports import sweep_table

    sweeps = [f for f in args.results if sweep_table.is_sweep_folder(f)]
    for folder in sweeps:  # a sweep folder: its table and launch period
        print(sweep_table.folder_text(folder))
    args.results = [f for f in args.results if f not in sweeps]
    if not args.results:
        return 0
    if len(args.results) > 1:
        # Several folders: one side-by-side table (leverage.compare).
        records = [load_record(folder) for folder in args.results]
        try:
            text = compare.render(
                args.results, records, [load_refined(folder) for folder in args.results]
            )
        except (KeyError, TypeError, ValueError, AttributeError) as exc:
            bad = next(
                (f for f, r in zip(args.results, records) if not _renders(r)), args.results[0]
            )
            raise ProblemError(
                str(Path(bad) / "best.json"),
                "",
                NO_VALUE,
                f"not a leverage result record ({type(exc).__name__}: {exc})",
            ) from None
        print(text)
        return 0
    for folder in args.results:
        record = load_record(folder)
        try:
            text = render(record)
        except (KeyError, TypeError, ValueError, AttributeError) as exc:
            raise ProblemError(
                str(Path(folder) / "best.json"),
                "",
                NO_VALUE,
                f"not a leverage result record ({type(exc).__name__}: {exc})",
            ) from None
        print(text)
        print(refined_line(load_refined(folder)))
    return 0


def _renders(record) -> bool:
    try:
        compare.render(["."], [record])
        return True
    except (KeyError, TypeError, ValueError, AttributeError):
        return False
