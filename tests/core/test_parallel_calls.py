"""No cached compiled kernel calls a numba-parallel one.

Outside source: numba issue #8578 ("Segfault when calling nested parallel function
with caching", open): a ``cache=True`` function that calls a ``parallel=True`` one
crashes when a later process loads it from the cache. Reproduced here with numba
0.68.1: a process compiled ``trajectory.batch_scores``, a second compiled a cached
function calling it, and the third, loading that function, died with SIGSEGV. So the
parallel kernels are called from Python only; this test reads core's source (ast) and
fails on any compiled function that names one.
"""

import ast
from pathlib import Path

CORE = Path(__file__).resolve().parents[2] / "leverage" / "core"


def compiled_functions(tree):
    """(function node, parallel?) of each function decorated with njit(...)."""
    for node in ast.walk(tree):
        if not isinstance(node, ast.FunctionDef):
            continue
        for dec in node.decorator_list:
            call = dec if isinstance(dec, ast.Call) else None
            name = call.func if call else dec
            if getattr(name, "id", getattr(name, "attr", None)) != "njit":
                continue
            parallel = any(
                k.arg == "parallel" and getattr(k.value, "value", False) is True
                for k in (call.keywords if call else [])
            )
            yield node, parallel


def called_names(fn):
    out = set()
    for node in ast.walk(fn):
        if isinstance(node, ast.Call):
            f = node.func
            out.add(f.id if isinstance(f, ast.Name) else getattr(f, "attr", None))
    return out


def test_no_compiled_kernel_calls_a_parallel_one():
    found = [
        (path.name, fn, parallel)
        for path in sorted(CORE.glob("*.py"))
        for fn, parallel in compiled_functions(ast.parse(path.read_text(encoding="utf-8")))
    ]
    parallel = {fn.name for _, fn, is_parallel in found if is_parallel}
    assert "batch_scores" in parallel  # the check sees the parallel kernel it guards
    offenders = [
        f"{name}:{fn.name} calls {sorted(called_names(fn) & parallel)}"
        for name, fn, _ in found
        if called_names(fn) & parallel
    ]
    assert not offenders, offenders
