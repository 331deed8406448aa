"""The one-n-at-a-time size search against an exhaustive scan, the definition of the answer.

``smallest_n_pointwise`` serves families whose power costs a separate computation per n (repeated
measures with an expected epsilon, assurance integrals). Its answer must be the smallest n in
[lo, hi] whose power reaches the target, whatever the start; the reference here is a scan of every
n, which needs no cleverness to be right.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import special

from registry.power import InfeasibleDesign, design_from_params
from registry.power.assurance import assurance_of, design_assurance
from registry.power.solve import smallest_n, smallest_n_pointwise, solve_sample_size

Z_975 = 1.959963984540054  # two-sided 5% normal quantile (normal table, common practice)


def _scan(power_of, target, lo, hi):
    """The definition: the first n from lo whose power reaches the target."""
    ns = np.arange(lo, hi + 1)
    p = power_of(ns)
    hits = np.flatnonzero(p >= target)
    if hits.size == 0:
        return None
    return int(ns[hits[0]]), float(p[hits[0]])


class _Counted:
    """A power curve that counts how many n it was asked for."""

    def __init__(self, curve):
        self.curve, self.calls = curve, 0

    def __call__(self, ns):
        ns = np.asarray(ns)
        self.calls += ns.size
        return self.curve(ns)


def _z_power(d):
    # two-sample z-test power per group n: the shape of every smooth power curve prespec solves
    return lambda n: special.ndtr(d * np.sqrt(np.asarray(n, dtype=float) / 2) - Z_975)


@settings(max_examples=300, deadline=None)
@given(d=st.floats(0.05, 3.0), target=st.floats(0.5, 0.99), start=st.floats(-50, 20_000), lo=st.integers(2, 5))
def test_same_answer_as_a_scan_on_smooth_curves(d, target, start, lo):
    hi = 20_000
    curve = _z_power(d)
    expected = _scan(curve, target, lo, hi)
    if expected is None:
        with pytest.raises(InfeasibleDesign):
            smallest_n_pointwise(curve, target, start, lo, hi)
    else:
        assert smallest_n_pointwise(curve, target, start, lo, hi) == expected


@settings(max_examples=300, deadline=None)
@given(
    steps=st.lists(st.integers(1, 400), min_size=1, max_size=6, unique=True),
    target=st.floats(0.05, 0.95),
    start=st.floats(0, 3_000),
)
def test_same_answer_as_a_scan_on_flat_and_stepped_curves(steps, target, start):
    # plateaus and jumps: interpolation has nothing straight to lean on, bisection must still land
    edges = np.array(sorted(steps))
    heights = np.linspace(0.1, 1.0, edges.size + 1)

    def curve(n):
        return heights[np.searchsorted(edges, np.asarray(n), side="right")]

    expected = _scan(curve, target, 1, 5_000)
    assert smallest_n_pointwise(curve, target, start, 1, 5_000) == expected


@settings(max_examples=200, deadline=None)
@given(
    steps=st.lists(st.integers(1, 400), min_size=1, max_size=6, unique=True),
    level=st.integers(1, 6),  # a plateau above the first, so it starts past lo
    start=st.floats(0, 3_000),
)
def test_a_plateau_exactly_at_the_target_counts_as_reaching_it(steps, level, start):
    # "reaches" means power >= target: the first n of a plateau whose height equals the target is
    # the answer, not the first n of the plateau above it
    edges = np.array(sorted(steps))
    heights = np.linspace(0.1, 1.0, edges.size + 1)
    target = float(heights[min(level, edges.size)])

    def curve(n):
        return heights[np.searchsorted(edges, np.asarray(n), side="right")]

    expected = _scan(curve, target, 1, 5_000)
    assert curve(expected[0]) == target
    assert smallest_n_pointwise(curve, target, start, 1, 5_000) == expected


@pytest.mark.parametrize(
    "d, target, start, lo, hi",
    [
        (0.5, 0.8, 64.0, 2, 10_000),  # a start on the answer: 0.5 SD at 80% needs 63.8 -> 64 (z approximation)
        (0.5, 0.8, 2.0, 2, 10_000),  # a start far below
        (0.5, 0.8, 9_000.0, 2, 10_000),  # a start far above
        (0.2, 0.9, 500.0, 2, 10_000),
    ],
)
def test_same_answer_as_the_block_search(d, target, start, lo, hi):
    # smallest_n (the vectorized block search) has the same definition; both must agree with the scan
    curve = _z_power(d)
    expected = _scan(curve, target, lo, hi)
    assert smallest_n_pointwise(curve, target, start, lo, hi) == expected
    assert smallest_n(curve, target, start, lo, hi) == expected


def test_a_good_start_costs_two_evaluations():
    curve = _Counted(_z_power(0.5))
    n, _ = _scan(curve, 0.8, 2, 1_000)
    curve.calls = 0
    assert smallest_n_pointwise(curve, 0.8, float(n) - 0.3, 2) == _scan(_z_power(0.5), 0.8, 2, 1_000)
    assert curve.calls == 2  # the answer and the n below it, nothing else


@pytest.mark.parametrize("start", [2.0, 100_000.0, 999_999.0])
def test_a_bad_start_costs_a_logarithmic_number_of_evaluations(start):
    curve = _Counted(_z_power(0.01))  # answer near 157,000 per group
    answer = _scan(_z_power(0.01), 0.8, 150_000, 170_000)
    assert smallest_n_pointwise(curve, 0.8, start, 2) == answer
    # doubling to bracket (about 20 steps from n = 2) plus a narrowing no worse than bisection
    assert curve.calls <= 2 * math.ceil(math.log2(1_000_000)) + 2


@pytest.mark.parametrize("start", [math.inf, math.nan])
def test_no_usable_start_begins_at_hi(start):
    curve = _z_power(0.5)
    assert smallest_n_pointwise(curve, 0.8, start, 2, 10_000) == _scan(curve, 0.8, 2, 10_000)


def test_reaching_the_target_at_lo_returns_lo():
    curve = _z_power(3.0)
    assert smallest_n_pointwise(curve, 0.8, 50.0, 2) == (2, float(curve(np.array([2]))[0]))


def test_unreachable_target_says_so_like_the_block_search():
    curve = lambda n: np.full(np.shape(n), 0.5)  # noqa: E731
    with pytest.raises(InfeasibleDesign) as pointwise:
        smallest_n_pointwise(curve, 0.8, 10.0, 2, 1_000)
    with pytest.raises(InfeasibleDesign) as block:
        smallest_n(curve, 0.8, 10.0, 2, 1_000)
    assert str(pointwise.value) == str(block.value)


# ------------------------------------------------------------ the families that use it


@pytest.mark.parametrize(
    "kw",
    [
        dict(means=[[20.0, 22.0, 23.0, 23.0]], sd=5.0, correlation=0.6, sphericity="greenhouse-geisser"),
        dict(means=[[20.0, 21.0, 21.5, 22.0]], sd=5.0, correlation=0.3, sphericity="greenhouse-geisser"),
        dict(means=[[10.0, 11.0, 13.0]], sd=4.0, correlation=0.6, structure="ar1", sphericity="none"),
    ],
)
def test_repeated_measures_size_is_the_smallest_reaching_n(kw):
    # the definition, checked on the family's own power at the answer and the n below it
    design = design_from_params("repeated-measures", **kw)
    size = solve_sample_size(design)
    n, family = size.n_per_group, design.family
    assert family.power(design, np.array([n]))[0] >= design.power
    assert n == family.min_n or family.power(design, np.array([n - 1]))[0] < design.power
    assert size.achieved_power == pytest.approx(float(family.power(design, np.array([n]))[0]), rel=1e-12)


@pytest.mark.parametrize("prior_sd, target", [(1.5, 0.7), (0.5, 0.85), (2.5, 0.6)])
def test_assurance_target_size_is_the_smallest_reaching_n(prior_sd, target):
    design = design_from_params("two-sample-t", difference=4.0, sd=5.0,
                                assurance={"effect_prior": {"mean": 4.0, "sd": prior_sd}, "target": target})
    found = design_assurance(design, 26).n_for_target
    # the definition, on the assurance integral itself
    assert assurance_of(design, found) >= target > assurance_of(design, found - 1)
