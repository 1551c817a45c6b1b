"""The bracketing root refinement every solve of the engine ends with.

References
----------
M. Dowell, P. Jarratt, "A modified regula falsi method for computing the
root of an equation", BIT 11 (1971) 168-174 (the Illinois method).
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

import supplycfg.circuit as circuit
from supplycfg.circuit import refine_bracketed_roots


def test_cube_roots_to_rounding():
    """Closed form: the real root of x**3 - q is q**(1/3); the refinement stops once the residual is
    within ``RESIDUAL_STOP_V`` (1e-11), about 1e-12 relative in x here."""
    q = np.array([2.0, 10.0, 0.5, 1e3])
    fun = lambda x: x ** 3 - q  # noqa: E731
    a, b = np.zeros(4), np.full(4, 20.0)
    for few in (0, 10**6):  # the array route and the float route
        with pytest.MonkeyPatch.context() as mp:
            mp.setattr(circuit, "FEW_BRACKETS", few)
            assert_allclose(refine_bracketed_roots(fun, a, b, fun(a), 60), np.cbrt(q), rtol=1e-11)


def _functions(rng):
    """Residuals with the shapes the engine meets: smooth, a kink, flat steps with no root, a tiny
    slope, a flat zero stretch; brackets with equal ends and NaN ends."""
    for trial in range(600):
        n = int(rng.integers(1, 12))
        p = rng.normal(size=n)
        fun = (lambda x, p=p: np.tanh(x - p) * (1 + 0.3 * np.abs(x)),
               lambda x, p=p: np.where(x > p, (x - p) ** 3, 1e-3 * (x - p)),
               lambda x, p=p: np.floor((x - p) * 4) / 4 + 0.1,
               lambda x, p=p: (x - p) * 1e-12,
               lambda x, p=p: np.where(np.abs(x - p) < 0.1, 0.0, x - p))[trial % 5]
        a, b = p - rng.uniform(0, 2, n), p + rng.uniform(0, 2, n)
        if trial % 7 == 0:
            a[0] = b[0]
        if trial % 11 == 0:
            a[-1] = np.nan
        yield fun, a, b, int(rng.integers(1, 80))


def test_float_route_is_the_array_route_bit_for_bit():
    """A few brackets are refined in Python floats (:data:`FEW_BRACKETS`); the roots must be the
    array route's bits, NaN and the sign of zero included."""
    rng = np.random.default_rng(12)
    for fun, a, b, steps in _functions(rng):
        got = {}
        for few in (0, 10**6):
            with pytest.MonkeyPatch.context() as mp, np.errstate(all="ignore"):
                mp.setattr(circuit, "FEW_BRACKETS", few)
                got[few] = refine_bracketed_roots(fun, a, b, fun(a), steps)
        assert_array_equal(got[0], got[10**6])
        assert_array_equal(np.signbit(got[0]), np.signbit(got[10**6]))
