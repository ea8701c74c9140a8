"""Products of 3-vectors (plain float64 arrays of length 3) without library calls.

Inside numba, ``a @ b`` on two 3-vectors calls the BLAS ``ddot`` of scipy's OpenBLAS
through a function pointer, and ``np.cross`` builds its result from zero-dimensional
array temporaries; each costs far more than the arithmetic (measured with
``benchmarks/eval_cost.py``: about 0.1 us per dot product against 0.015 us written
out). These functions do the same arithmetic inline:

- ``dot(a, b)`` accumulates a0 b0, a1 b1, a2 b2 in that order with fused
  multiply-adds from 0.0, which is what OpenBLAS's ``ddot`` does for fewer than 16
  elements on x86-64 processors with FMA (its scalar loop ``dot += y[i] * x[i]``,
  compiled with contraction): the results are bit for bit those of ``a @ b`` there
  (checked on 10^6 random pairs of wide dynamic range);
- ``cross(a, b)`` is numpy's formula (a1 b2 - a2 b1, a2 b0 - a0 b2, a0 b1 - a1 b0),
  so it equals ``np.cross`` exactly.

Units are whatever the vectors carry.
"""

import numpy as np
from llvmlite import ir
from numba import njit, types
from numba.core import cgutils
from numba.extending import intrinsic


@intrinsic
def fma(typingctx, a, b, c):
    """a * b + c rounded once (IEEE 754 fusedMultiplyAdd; LLVM's llvm.fma.f64)."""
    sig = types.float64(types.float64, types.float64, types.float64)

    def codegen(context, builder, signature, args):
        double = ir.DoubleType()
        fn = cgutils.get_or_insert_function(
            builder.module, ir.FunctionType(double, [double, double, double]), "llvm.fma.f64"
        )
        return builder.call(fn, args)

    return sig, codegen


@njit(cache=True)
def dot(a, b):
    """a . b of two 3-vectors (see the module docstring for its rounding)."""
    s = fma(a[0], b[0], 0.0)
    s = fma(a[1], b[1], s)
    return fma(a[2], b[2], s)


@njit(cache=True)
def norm(a):
    """|a| = sqrt(a . a)."""
    return np.sqrt(dot(a, a))


@njit(cache=True)
def cross(a, b):
    """a x b of two 3-vectors (a new array; numpy's formula)."""
    out = np.empty(3)
    out[0] = a[1] * b[2] - a[2] * b[1]
    out[1] = a[2] * b[0] - a[0] * b[2]
    out[2] = a[0] * b[1] - a[1] * b[0]
    return out
