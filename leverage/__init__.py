"""leverage: global search for v-infinity leveraging trajectories.

Preliminary patched-conic designs only: verify any result with high-fidelity tools,
flyby-safety and planetary-protection review, and licensed practice before flight use.

The Python interface (``leverage.api``) is here too: ``load_problem``, ``solve``,
``open_result``, ``Design`` and ``ProblemError``. They load on first use, so that
``import leverage`` and the commands that do not search stay quick.
"""

from leverage.about import CAUTION, __version__

_API = ("load_problem", "solve", "open_result", "Design")
__all__ = ["CAUTION", "ProblemError", "__version__", *_API]


def __getattr__(name):
    if name in _API:
        from leverage import api

        return getattr(api, name)
    if name == "ProblemError":
        from leverage.errors import ProblemError

        return ProblemError
    raise AttributeError(f"module 'leverage' has no attribute {name!r}")
