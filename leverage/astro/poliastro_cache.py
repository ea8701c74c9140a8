"""Keep poliastro's compiled kernels between processes.

poliastro 0.17 compiles its numba functions with ``njit`` and no cache, so every new
process that re-flies a design (``leverage run``'s verification, ``verify``, ``refine``)
compiled about 90 of them again: 10-25 s measured, against about 1 s for the whole
re-fly once they are compiled. ``enable_caching`` is the numba dispatcher method that
``njit(cache=True)`` itself calls; turning it on before the first call puts the machine
code in the project's numba cache folder (set in ``leverage.core``, keyed on the
numba and poliastro versions), so only the first process ever compiles them.

Call ``cache_poliastro_kernels()`` before the first call into poliastro's unit-aware
layer; calling it again costs a module scan (well under a millisecond) and changes
nothing. Kernels already compiled in this process stay as they are.
"""

import importlib
import sys

import leverage.core  # noqa: F401  (sets NUMBA_CACHE_DIR before numba is imported)

# The unit-aware modules the re-fly and the tests use; importing them imports the
# poliastro.core kernels they call.
_MODULES = (
    "poliastro.twobody",
    "poliastro.twobody.angles",
    "poliastro.twobody.propagation",
    "poliastro.iod.izzo",
    "poliastro.threebody.flybys",
)


def cache_poliastro_kernels() -> int:
    """Turn on numba's disk cache for every poliastro kernel not yet cached; returns
    how many were switched on by this call."""
    from numba.core.caching import NullCache
    from numba.core.registry import CPUDispatcher

    for name in _MODULES:
        importlib.import_module(name)
    switched = 0
    for name, module in list(sys.modules.items()):
        if module is None or not name.startswith("poliastro"):
            continue
        for value in list(vars(module).values()):
            if isinstance(value, CPUDispatcher) and isinstance(value._cache, NullCache):
                value.enable_caching()
                switched += 1
    return switched
