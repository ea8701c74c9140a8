"""The ``leverage`` command: ``main(argv)`` builds the subcommands and returns an exit code.

Each subcommand lives in its own module here with ``add_parser(subparsers)`` and
``main(args) -> int``; a new module with those two functions is a new subcommand.
Bad input is reported as one line on stderr (exit 2).
"""
import argparse
import importlib
import pkgutil
import sys

from leverage.about import __version__
from leverage.errors import NO_VALUE, ProblemError

# Exit codes of every command (README "Exit codes").
EXIT_OK = 0
EXIT_FAILED = 1          # a sweep whose runs failed
EXIT_BAD_INPUT = 2
EXIT_INFEASIBLE = 3
EXIT_NOT_VERIFIED = 4    # holds in the search model, breaks a stated limit in the verification
EXIT_NOT_CONVERGED = 5   # leverage refine: the n-body design misses a condition
EXIT_INTERRUPTED = 130


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
                    "only.")
    parser.add_argument("--version", action="version", version=f"leverage {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for module in command_modules():
        cmd = module.add_parser(sub)
        cmd.set_defaults(handler=module.main)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        return int(args.handler(args) or 0)
    except ProblemError as exc:
        print(f"leverage: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:  # Ctrl-C before a run or sweep took over its signals
        print("leverage: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
