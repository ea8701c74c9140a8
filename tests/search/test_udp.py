"""Tests of leverage.search.udp's kernel calls under a signal.

Outside source: CPython's rule that a C function returning a result with an exception
set is reported as a SystemError whose ``__cause__`` is that exception (Python/C API,
``_Py_CheckFunctionResult``; from memory). numba's dispatcher is such a function when a
signal handler runs inside the compiled code (measured: 11 of 12 SIGTERMs during a
one-process demo run ended in such a SystemError before this was handled).
"""

import pytest

from leverage.search.udp import call_kernel


def _failing_with(cause):
    def kernel(*args):
        try:
            raise cause
        except BaseException as inner:
            raise SystemError("CPUDispatcher returned a result with an exception set") from inner

    return kernel


def test_an_interrupt_inside_a_kernel_comes_out_as_itself():
    nested = SystemError("_PyEval_EvalFrameDefault returned a result with an exception set")
    nested.__cause__ = KeyboardInterrupt()
    with pytest.raises(KeyboardInterrupt):
        call_kernel(_failing_with(nested))
    with pytest.raises(KeyboardInterrupt):
        call_kernel(_failing_with(KeyboardInterrupt()))


def test_other_system_errors_and_results_pass_through():
    with pytest.raises(SystemError, match="CPUDispatcher"):
        call_kernel(_failing_with(ValueError("no solution")))
    assert call_kernel(lambda a, b: a + b, 2, 3) == 5
