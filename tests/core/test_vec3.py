"""Tests of leverage.core.vec3 (inline dot and cross products of 3-vectors).

Outside source: numpy (np.cross, np.dot in float64 and exact integer arithmetic).
"""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from numba import njit

from leverage.core.vec3 import cross, dot, fma, norm


@njit
def _fma(a, b, c):
    return fma(a, b, c)


FINITE = st.floats(-1e150, 1e150)
VEC = st.lists(FINITE, min_size=3, max_size=3)


@settings(deadline=None, max_examples=300)
@given(a=VEC, b=VEC)
def test_cross_is_numpys_cross_to_the_last_bit(a, b):
    a, b = np.array(a), np.array(b)
    assert np.array_equal(cross(a, b), np.cross(a, b), equal_nan=True)


@settings(deadline=None, max_examples=300)
@given(a=VEC, b=VEC)
def test_dot_agrees_with_numpy(a, b):
    a, b = np.array(a), np.array(b)
    scale = np.abs(a) @ np.abs(b)
    assert abs(dot(a, b) - float(np.dot(a, b))) <= 4e-16 * scale
    assert norm(a) == np.sqrt(dot(a, a))


def test_dot_of_integers_is_exact_and_fma_rounds_once():
    a = np.array([3.0, -4.0, 12.0])
    assert dot(a, a) == 169.0 and norm(a) == 13.0
    # (1 + 2^-30)^2 - 1 = 2^-29 + 2^-60: one rounding keeps 2^-60, two lose it.
    x = 1.0 + 2.0**-30
    assert _fma(x, x, -1.0) == 2.0**-29 + 2.0**-60
    assert x * x - 1.0 == 2.0**-29
