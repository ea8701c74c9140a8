"""What a finished run adds to its folder after best.json and summary.txt: the
pictures (``leverage.plots``) and the verification (``leverage.verify``).

Both work from the record and the folder alone, like ``leverage plot`` and
``leverage verify``. Neither may cost the run its results: each failure, or a Ctrl-C
while they are made, is reported in one line and the run's files stay as written.
"""
from leverage.reports import plots
from leverage.verify import report as verify


def pictures_and_verification(out_dir, record, echo=print):
    """Write the pictures and verification.txt/.json into ``out_dir``; one line each.
    Returns the verification report (None when it was not made)."""
    solved = record.get("margins", {}).get("lambert_solved", {}).get("margin", 0.0)
    if solved is not None and float(solved) < 0:
        echo("pictures and verification skipped: the best point has an unsolved leg")
        return None
    try:
        pictures = plots.all_pictures(record, out_dir)
        echo("pictures: " + ", ".join(p.path.name for p in pictures))
    except KeyboardInterrupt:
        echo("pictures skipped (interrupted); make them with: leverage plot " + str(out_dir))
        return None
    except Exception as exc:  # a picture must never cost the run its results
        echo(f"pictures not made ({type(exc).__name__}: {exc}); "
             f"try: leverage plot {out_dir}")
    try:
        report = verify.verify_record(record)
        verify.write(out_dir, report)
        echo(verify.headline(report) + " (details in verification.txt)")
        return report
    except KeyboardInterrupt:
        echo("verification skipped (interrupted); run it with: leverage verify " + str(out_dir))
    except Exception as exc:  # nor may the check
        echo(f"verification not made ({type(exc).__name__}: {exc}); "
             f"try: leverage verify {out_dir}")
    return None
