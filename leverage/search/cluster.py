"""Connecting to an ipyparallel cluster named on the command line (``--cluster``).

``--cluster`` takes either an ipyparallel profile name (the controller's connection
file is then found in that profile's ``security`` folder) or the path of the
controller's client connection file (``ipcontroller-client.json``, or
``ipcontroller-<cluster id>-client.json``), which is what a user copies to the
machine that runs ``leverage`` when the controller runs elsewhere.

``connect`` checks, with time limits, that the controller answers, that at least one
engine is registered, and that the engines can import this package (they unpickle
the problem by importing ``leverage``); each failure is one line naming ``--cluster``.
"""

from pathlib import Path

from leverage.errors import ProblemError

CONNECT_TIMEOUT_S = 20.0
ENGINE_WAIT_S = 30.0


def client_kwargs(spec: str) -> dict:
    """``ipyparallel.Client`` arguments for a profile name or a connection-file path."""
    path = Path(spec).expanduser()
    if path.suffix == ".json" or path.is_file() or "/" in spec:
        if not path.is_file():
            raise ProblemError("command line", "--cluster", spec, "no such connection file")
        # ipyparallel 9 reads a connection file from connection_info (its url_file is ignored)
        return {"connection_info": str(path.resolve())}
    return {"profile": spec}


def _probe():
    """Runs on an engine: the package version and numba cache folder it sees."""
    import numba

    import leverage.search.udp  # noqa: F401  (what unpickling a problem imports)
    from leverage.about import __version__

    return __version__, str(numba.config.CACHE_DIR)


def connect(spec: str, timeout_s: float = CONNECT_TIMEOUT_S, engine_wait_s: float = ENGINE_WAIT_S):
    """A connected ``ipyparallel.Client`` with working engines, or a one-line ProblemError."""
    import ipyparallel

    kwargs = client_kwargs(spec)
    try:
        client = ipyparallel.Client(**kwargs, timeout=timeout_s)
    except Exception as exc:  # ipyparallel raises OSError, TimeoutError, ValueError...
        reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise ProblemError(
            "command line", "--cluster", spec, f"cannot reach an ipyparallel controller ({reason})"
        ) from None
    try:
        try:
            client.wait_for_engines(1, timeout=engine_wait_s)
        except Exception:
            raise ProblemError(
                "command line",
                "--cluster",
                spec,
                f"controller answers but no engine registered within "
                f"{engine_wait_s:g} s; start engines with ipengine or "
                f"ipcluster",
            ) from None
        try:
            client[:].use_cloudpickle()
            client[:].apply_sync(_probe)
        except Exception as exc:
            reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
            raise ProblemError(
                "command line",
                "--cluster",
                spec,
                f"engines cannot import leverage ({reason}); install it in "
                f"the engines' Python or put it on their PYTHONPATH",
            ) from None
    except ProblemError:
        client.close()
        raise
    return client


def describe(client) -> str:
    """'N engines' for progress lines."""
    return f"{len(client.ids)} ipyparallel engines"
