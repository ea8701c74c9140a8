"""Run the `leverage` command and note when its first evaluation starts (for startup.py).

``python -m benchmarks.first_evaluation MARKER_FILE leverage-arguments...`` runs
``leverage.cli.main`` with the given arguments unchanged; the only addition is that the
first call of the pygmo problem's fitness or batch fitness writes two wall-clock times
(``time.time()``, s) to MARKER_FILE, once: when it started and when it returned (the
first call loads, or on a cold cache compiles, the kernels). The parent process
compares them with the wall-clock time at which it started this process.
"""

import sys
import time

from leverage.search.udp import LeveragingUDP

_marker = sys.argv[1]
_noted = False


def _wrap(method):
    def wrapper(self, *args):
        global _noted
        if _noted:
            return method(self, *args)
        _noted = True
        start = time.time()
        out = method(self, *args)
        with open(_marker, "w", encoding="utf-8") as fh:
            fh.write(f"{start!r} {time.time()!r}")
        return out

    wrapper.__name__ = method.__name__
    wrapper.__doc__ = method.__doc__
    return wrapper


LeveragingUDP.fitness = _wrap(LeveragingUDP.fitness)
LeveragingUDP.batch_fitness = _wrap(LeveragingUDP.batch_fitness)

if __name__ == "__main__":
    from leverage.cli import main

    sys.exit(main(sys.argv[2:]))
