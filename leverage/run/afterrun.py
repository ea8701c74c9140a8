"""What a finished run adds to its folder after best.json and summary.txt: the
pictures (``leverage.plots``) and the verification (``leverage.verify``).

Both work from the record and the folder alone, like ``leverage plot`` and
``leverage verify``. Neither may cost the run its results: each failure is reported
in one line and the run's files stay as written. A file that cannot be written (disk
full, folder gone read-only) ends the run with a ``WriteFault``, and SIGINT/SIGTERM
with ``KeyboardInterrupt`` saying what is kept (exit 130 from the command).
"""

from leverage.errors import WriteFault
from leverage.reports import plots
from leverage.verify import report as verify


def _stopped(what: str, command: str, out_dir) -> str:
    return (
        f"during the {what}; best.json and summary.txt are written; "
        f"continue with: leverage {command} {out_dir}"
    )


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
        raise KeyboardInterrupt(_stopped("pictures", "plot", out_dir)) from None
    except OSError as exc:
        raise WriteFault(
            exc.filename or out_dir, exc, _stopped("pictures", "plot", out_dir).split("; ", 1)[1]
        ) from None
    except Exception as exc:  # a picture must never cost the run its results
        echo(f"pictures not made ({type(exc).__name__}: {exc}); try: leverage plot {out_dir}")
    try:
        report = verify.verify_record(record)
        verify.write(out_dir, report)
        echo(verify.headline(report) + " (details in verification.txt)")
        return report
    except KeyboardInterrupt:
        raise KeyboardInterrupt(_stopped("verification", "verify", out_dir)) from None
    except OSError as exc:
        raise WriteFault(
            exc.filename or out_dir,
            exc,
            _stopped("verification", "verify", out_dir).split("; ", 1)[1],
        ) from None
    except Exception as exc:  # nor may the check
        echo(f"verification not made ({type(exc).__name__}: {exc}); try: leverage verify {out_dir}")
    return None
