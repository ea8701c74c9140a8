"""Keep poliastro's compiled kernels in leverage's numba cache folder.

poliastro compiles its core functions with a plain ``numba.njit`` (no ``cache=True``),
so every process that re-flies a design (``leverage run``, ``verify``) compiled them
again: rv2coe, coe2rv, the Farnocchia propagator, Izzo's Lambert solver and the flyby,
116 functions in all, 14 s measured on the 2 busy cores of the development machine
(load 3.3; benchmarks/README.md "Start-up"). ``enable()`` turns numba's file cache on for
them before their first call, in the folder ``leverage.core`` chose (keyed on the
numba and poliastro versions), so only the first verification after an install
compiles them. The numerical code is poliastro's, unchanged.
"""

import importlib

# The modules whose kernels the verification reaches through poliastro's unit-aware API.
MODULES = (
    "poliastro.core.angles",
    "poliastro.core.elements",
    "poliastro.core.flybys",
    "poliastro.core.iod",
    "poliastro.core.propagation.farnocchia",
    "poliastro.core.util",
)

_done = False


def enable() -> int:
    """Turn on numba's cache for every not yet compiled kernel of ``MODULES``; returns
    how many were turned on (0 on later calls)."""
    global _done
    if _done:
        return 0
    _done = True
    from numba.core.caching import NullCache
    from numba.core.dispatcher import Dispatcher

    import leverage.core  # noqa: F401 (sets NUMBA_CACHE_DIR before numba reads it)

    count = 0
    for name in MODULES:
        module = importlib.import_module(name)
        for obj in vars(module).values():
            if (
                isinstance(obj, Dispatcher)
                and isinstance(obj._cache, NullCache)
                and not obj.overloads
            ):
                obj.enable_caching()
                count += 1
    return count
