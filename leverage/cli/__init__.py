"""The ``leverage`` command: ``main(argv)`` builds the subcommands and returns an exit code.

Each subcommand lives in its own module here with ``add_parser(subparsers)`` and
``main(args) -> int``; a new module with those two functions is a new subcommand.
Every failure is one line on stderr and a documented exit code, never a traceback
(``--debug`` or ``LEVERAGE_DEBUG=1`` shows the traceback too). Control characters in
anything printed are escaped (``leverage.errors.printable``), so a name or a record
cannot drive the terminal. SIGINT and SIGTERM end any command with exit 130 and one
line (a run or sweep takes over both signals while it searches).
"""

import argparse
import errno
import importlib
import os
import pkgutil
import signal
import sys
import time
import traceback

from leverage.about import __version__
from leverage.errors import NO_VALUE, ProblemError, WriteFault, free_space, printable

# When the command started (monotonic s), for a run's "whole run" time: the imports
# before the work count, as the analyst waited for them too.
STARTED = time.monotonic()

# Exit codes of every command (README "Exit codes").
EXIT_OK = 0
EXIT_FAILED = 1  # a sweep whose runs failed
EXIT_BAD_INPUT = 2  # problem file, command line, result folder or checkpoint refused
EXIT_INFEASIBLE = 3
EXIT_NOT_VERIFIED = 4  # holds in the search model, breaks a stated limit in the verification
EXIT_CANNOT_WRITE = 5  # disk full, a folder not writable: the machine refused a file
EXIT_NOT_CONVERGED = 6  # leverage refine: the n-body design misses a condition
EXIT_UNREACHABLE = 7  # leverage check: the feasibility screen says the goal is unreachable
EXIT_INTERNAL = 70  # a bug in leverage (one line; --debug for the traceback)
EXIT_INTERRUPTED = 130  # SIGINT or SIGTERM

EXIT_CODES_HELP = (
    "exit codes: 0 done (a run: its design holds in the search model and the "
    "verification); 1 a sweep had failed runs; 2 bad input (problem file, command line, "
    "result folder, checkpoint) or a folder in use by another run; 3 done, but no design "
    "met every limit; 4 the design breaks a stated limit in the verification (run, "
    "verify); 5 a file could not be written (disk full, folder not writable; the best "
    "design so far is kept where possible); 6 refine did not converge (the attempt is "
    "kept, marked so); 7 check: the feasibility screen finds the goal unreachable; 70 an internal error (please report; --debug shows the "
    "traceback); 130 interrupted (SIGINT or SIGTERM; what was written is kept)."
)


class _Parser(argparse.ArgumentParser):
    """argparse that reports a bad command line as one line (exit 2), like a bad file."""

    def error(self, message):
        raise ProblemError("command line", "", NO_VALUE, f"{message} (leverage -h for help)")


def command_modules():
    """The subcommand modules of this package, in name order."""
    for info in sorted(pkgutil.iter_modules(__path__), key=lambda m: m.name):
        module = importlib.import_module(f"{__name__}.{info.name}")
        if hasattr(module, "add_parser") and hasattr(module, "main"):
            yield module


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="leverage",
        description="Search v-infinity leveraging trajectories (launch, one deep-space "
        "maneuver, return flyby) in a patched-conic model. Preliminary designs "
        "only.",
        epilog=EXIT_CODES_HELP,
    )
    parser.add_argument("--version", action="version", version=f"leverage {__version__}")
    parser.add_argument(
        "--debug",
        action="store_true",
        help="show the Python traceback of a failure (also LEVERAGE_DEBUG=1)",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for module in command_modules():
        cmd = module.add_parser(sub)
        cmd.set_defaults(handler=module.main)
    return parser


class _Printable:
    """A text stream that escapes control characters (but tab, line end and, for a live
    progress line, carriage return) before they reach the terminal or a log."""

    def __init__(self, stream):
        self._stream = stream

    def write(self, text):
        if any(ord(ch) < 0x20 or 0x7F <= ord(ch) < 0xA0 for ch in text if ch not in "\t\n\r"):
            text = "\n".join(
                "\r".join(
                    "\t".join(printable(part) for part in piece.split("\t"))
                    for piece in line.split("\r")
                )
                for line in text.split("\n")
            )
        return self._stream.write(text)

    def __getattr__(self, name):
        return getattr(self._stream, name)


class _Signals:
    """SIGTERM (and SIGINT, unless ignored) raise KeyboardInterrupt once, outside the
    handlers a run or sweep installs for its own work; ``received`` names the signal."""

    def __init__(self):
        self.received = None
        self._old = {}

    def _handler(self, signum, frame):
        first = self.received is None
        self.received = signal.Signals(signum).name
        if first:
            raise KeyboardInterrupt

    def __enter__(self):
        for sig in (signal.SIGINT, signal.SIGTERM):
            try:
                if signal.getsignal(sig) is not signal.SIG_IGN:
                    self._old[sig] = signal.signal(sig, self._handler)
            except ValueError:  # not the main thread: leave signals alone
                pass
        try:  # a file-size limit (ulimit -f) gives EFBIG, a one-line write fault, not a kill
            self._old[signal.SIGXFSZ] = signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        except (ValueError, AttributeError):
            pass
        return self

    def __exit__(self, *exc):
        for sig, old in self._old.items():
            signal.signal(sig, old)
        return False


def print_warnings(problem) -> None:
    """One stderr line per value of the problem file that looks like a slip of units
    (``Problem.warnings``, from ``leverage.problem.plausibility``)."""
    for slip in getattr(problem, "warnings", ()):
        print(
            f"leverage: warning: {printable(problem.source, 200)}: {printable(slip, 600)}",
            file=sys.stderr,
        )


def _os_error_line(exc: OSError) -> str:
    where = exc.filename or "a file"
    reason = exc.strerror or str(exc)
    if exc.errno in (
        errno.ENOSPC,
        errno.EFBIG,
        errno.EDQUOT,
        errno.EROFS,
        errno.EACCES,
        errno.EPERM,
    ):
        return f"cannot write {printable(where, 200)} ({reason}; {free_space(where)})"
    return f"{printable(where, 200)}: {printable(reason, 200)}"


def main(argv=None) -> int:
    debug = os.environ.get("LEVERAGE_DEBUG", "") not in ("", "0")
    out, err = sys.stdout, sys.stderr
    sys.stdout, sys.stderr = _Printable(out), _Printable(err)
    try:
        with _Signals() as signals:
            return _main(argv, debug, signals)
    finally:
        sys.stdout, sys.stderr = out, err


def _main(argv, debug: bool, signals) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        debug = debug or args.debug
        return int(args.handler(args) or 0)
    except ProblemError as exc:
        return _fail(debug, f"{exc}", EXIT_BAD_INPUT)
    except WriteFault as exc:
        return _fail(debug, f"{exc}", EXIT_CANNOT_WRITE)
    except KeyboardInterrupt as exc:  # outside a run's own handling, or after its files
        how = signals.received or "SIGINT"
        detail = f": {exc}" if str(exc) else ""
        return _fail(debug, f"interrupted ({how}){detail}", EXIT_INTERRUPTED)
    except OSError as exc:
        return _fail(debug, _os_error_line(exc), EXIT_CANNOT_WRITE)
    except RecursionError:
        return _fail(debug, "input nested too deeply to read", EXIT_BAD_INPUT)
    except MemoryError:
        return _fail(debug, "out of memory", EXIT_CANNOT_WRITE)
    except Exception as exc:  # a bug: still one line, the traceback on request
        return _fail(
            debug,
            f"internal error ({type(exc).__name__}: {printable(exc, 200)}); "
            "please report it; --debug shows the traceback",
            EXIT_INTERNAL,
        )


def _fail(debug: bool, line: str, code: int) -> int:
    if debug:
        traceback.print_exc(file=sys.stderr)
    print(f"leverage: {line}", file=sys.stderr)
    return code
