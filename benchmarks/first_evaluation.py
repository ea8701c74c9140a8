"""Run the `leverage` command and note when its first evaluation starts (for startup.py).

``python -m benchmarks.first_evaluation MARKER_FILE leverage-arguments...`` runs
``leverage.cli.main`` with the given arguments unchanged; the only addition is that the
first call of the pygmo problem's fitness or batch fitness writes the wall-clock time
(``time.time()``, s) to MARKER_FILE, once. The parent process compares it with the
wall-clock time at which it started this process.
"""
import sys
import time

from leverage.udp import LeveragingUDP

_marker = sys.argv[1]
_noted = False


def _note():
    global _noted
    if not _noted:
        _noted = True
        with open(_marker, "w", encoding="utf-8") as fh:
            fh.write(repr(time.time()))


def _wrap(method):
    def wrapper(self, *args):
        _note()
        return method(self, *args)
    wrapper.__name__ = method.__name__
    wrapper.__doc__ = method.__doc__
    return wrapper


LeveragingUDP.fitness = _wrap(LeveragingUDP.fitness)
LeveragingUDP.batch_fitness = _wrap(LeveragingUDP.batch_fitness)

if __name__ == "__main__":
    from leverage.cli import main

    sys.exit(main(sys.argv[2:]))
