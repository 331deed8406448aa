"""registry.power.roots.brentq against scipy.optimize.brentq, the reference implementation of Brent's method."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, special

from registry.power.roots import NoBracket, NotConverged, brentq

# (function, bracket, xtol, rtol): scipy.optimize.brentq's answer is the reference for each row
# (the same algorithm, so the same iterates: the answers must agree to the last bit).
CASES = [
    (lambda x: x * x - 2.0, (0.0, 2.0), 2e-12, 4 * 2.220446049250313e-16),
    (lambda x: math.cos(x) - x, (0.0, 1.0), 1e-10, 1e-10),
    (lambda x: math.exp(x) - 5.0, (-3.0, 4.0), 1e-13, 1e-14),
    (lambda x: math.atan(x - 7.5), (-40.0, 40.0), 1e-12, 1e-12),
    (lambda x: 1e-8 * (x - 0.1), (0.0, 1.0), 2e-12, 1e-15),
    (lambda x: math.erf(x) - 0.999, (0.0, 6.0), 1e-6, 1e-8),
    # the kind of function prespec solves: power of a z-test against the effect, at 80%
    (lambda d: float(special.ndtr(d * math.sqrt(32) - 1.959963984540054)) - 0.8, (0.0, 5.0), 1e-10, 1e-10),
]


@pytest.mark.parametrize("f, bracket, xtol, rtol", CASES)
def test_same_root_as_scipy(f, bracket, xtol, rtol):
    assert brentq(f, *bracket, xtol=xtol, rtol=rtol) == optimize.brentq(f, *bracket, xtol=xtol, rtol=rtol)


@settings(max_examples=300, deadline=None)
@given(centre=st.floats(-5, 5), scale=st.floats(0.01, 100), power=st.sampled_from([1, 3, 5]))
def test_same_root_as_scipy_on_monotone_functions(centre, scale, power):
    def f(x: float) -> float:
        return scale * (x - centre) ** power + 0.1 * (x - centre)

    assert brentq(f, -10.0, 10.0) == optimize.brentq(f, -10.0, 10.0)


def test_the_root_holds_to_the_tolerance():
    # sqrt(2) to 12 decimals (common practice)
    assert abs(brentq(lambda x: x * x - 2.0, 0.0, 2.0) - math.sqrt(2.0)) < 2e-12


def test_an_end_that_is_a_root_is_returned_as_is():
    assert brentq(lambda x: x - 1.0, 1.0, 3.0) == 1.0
    assert brentq(lambda x: x - 3.0, 1.0, 3.0) == 3.0


def test_no_sign_change_is_refused_like_scipy():
    with pytest.raises(ValueError):
        optimize.brentq(lambda x: x * x + 1.0, -1.0, 1.0)
    with pytest.raises(NoBracket, match="different signs"):
        brentq(lambda x: x * x + 1.0, -1.0, 1.0)


def test_too_few_steps_is_an_error_like_scipy():
    def f(x: float) -> float:
        return (x - 0.3) ** 3

    with pytest.raises(RuntimeError):
        optimize.brentq(f, -1.0, 1.0, xtol=1e-13, rtol=1e-14, maxiter=5)
    with pytest.raises(NotConverged, match="within 5 steps"):
        brentq(f, -1.0, 1.0, xtol=1e-13, rtol=1e-14, maxiter=5)


@pytest.mark.parametrize("xtol, rtol", [(0.0, 1e-10), (1e-10, 1e-17)])
def test_tolerances_scipy_refuses_are_refused(xtol, rtol):
    with pytest.raises(ValueError):
        optimize.brentq(lambda x: x, -1.0, 1.0, xtol=xtol, rtol=rtol)
    with pytest.raises(ValueError):
        brentq(lambda x: x, -1.0, 1.0, xtol=xtol, rtol=rtol)
