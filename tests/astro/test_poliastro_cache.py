"""poliastro's kernels are compiled once and then loaded from the disk cache.

Outside reference: numba's own dispatcher statistics (``stats.cache_hits`` /
``cache_misses``), read in two fresh processes sharing one empty cache folder. The
Lambert answer itself is checked against Vallado's example elsewhere
(tests/core/test_lambert.py); here it only has to be the same in both processes.
"""

import os
import subprocess
import sys

SCRIPT = """
from leverage.astro.poliastro_cache import cache_poliastro_kernels
import numpy as np
from poliastro.core.iod import izzo
switched = cache_poliastro_kernels()
v0, v1 = izzo(1.32712440018e11, np.array([1.5e8, 0.0, 0.0]), np.array([0.0, 1.6e8, 0.0]),
              1.0e7, 0, True, True, 35, 1e-8)
print(switched, izzo.stats.cache_hits.get(izzo.signatures[0], 0) if izzo.signatures else -1,
      repr(float(v0[0])))
"""


def _run(cache_dir):
    env = dict(os.environ, NUMBA_CACHE_DIR=str(cache_dir))
    out = subprocess.run(
        [sys.executable, "-c", SCRIPT], env=env, capture_output=True, text=True, timeout=600
    )
    assert out.returncode == 0, out.stderr[-2000:]
    switched, hits, v0 = out.stdout.split()
    return int(switched), int(hits), v0


def test_second_process_loads_the_lambert_kernel_from_the_cache(tmp_path):
    switched1, hits1, v1 = _run(tmp_path)
    switched2, hits2, v2 = _run(tmp_path)
    assert switched1 > 50 and switched2 == switched1  # every kernel, in each new process
    assert hits1 == 0  # empty folder: compiled
    assert hits2 == 1  # same folder: loaded
    assert v1 == v2


def test_a_second_call_switches_nothing():
    from leverage.astro.poliastro_cache import cache_poliastro_kernels

    cache_poliastro_kernels()
    assert cache_poliastro_kernels() == 0
