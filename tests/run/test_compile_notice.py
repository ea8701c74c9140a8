"""run.compile_notice.warm_up: every compiled entry point a search calls in the parent
is loaded before the search's clock starts (and before worker processes fork).

Checked against numba itself: a dispatcher lists a signature once it has compiled or
loaded it (``Dispatcher.signatures``). In a fresh process, because this test session
has already loaded the kernels.
"""

import subprocess
import sys

SCRIPT = """
import numpy as np
from pathlib import Path
from leverage.core import trajectory
from leverage.problem.load import load_problem
from leverage.run.compile_notice import warm_up
from leverage.search.udp import LeveragingUDP

c = load_problem(Path("problems/demo.toml")).compile()
udp = LeveragingUDP.from_compiled(c, "demo")
names = ("fitness", "details", "batch_details", "batch_scores_one_thread", "batch_scores")
before = [bool(getattr(trajectory, n).signatures) for n in names]
warm_up(udp, (c.lower + c.upper) / 2.0, batch={batch}, enabled=False)
after = [bool(getattr(trajectory, n).signatures) for n in names]
print(before, after)
"""


def loaded(batch: bool):
    out = subprocess.run(
        [sys.executable, "-c", SCRIPT.format(batch=batch)],
        capture_output=True,
        text=True,
        check=True,
    ).stdout
    return out.strip().splitlines()[-1]


def test_warm_up_loads_what_a_search_calls():
    # fitness, details, batch_details (log rows' violations, a front's archive) and the
    # one-thread batch scoring (log rows' objectives) always; the parallel batch
    # evaluation only for a front search.
    none = "[False, False, False, False, False]"
    assert loaded(False) == f"{none} [True, True, True, True, False]"
    assert loaded(True) == f"{none} [True, True, True, True, True]"
