"""The t-test families against published tables, statsmodels and simulation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from statsmodels.stats.power import TTestIndPower, TTestPower

from registry.power import design_from_params, power, sample_size
from registry.power.noncentral_t import t_test_power
from registry.power.simulate import simulated_power


# ((test, params), expected n per group, rtol)
PUBLISHED = [
    # Cohen (1988) Table 2.4.1, from memory: alpha .05 two-sided, power .80. The table is
    # approximate; the exact noncentral-t answer for d = 0.2 is 394 (the table prints 393).
    (("two-sample-t", {"d": 0.2}), 393, 0.003),
    (("two-sample-t", {"d": 0.5}), 64, 0),
    (("two-sample-t", {"d": 0.8}), 26, 0),
    # Cohen (1988) Table 2.4.1, from memory: alpha .05 two-sided, power .90, d = 0.5 -> 86.
    (("two-sample-t", {"d": 0.5, "power": 0.9}), 86, 0),
]


@pytest.mark.parametrize(("inputs", "expected", "rtol"), PUBLISHED)
def test_published_sample_sizes(inputs, expected, rtol):
    test, params = inputs
    assert sample_size(test, **params).n_per_group == pytest.approx(expected, rel=rtol)


def test_exact_answer_for_small_effect_is_394():
    # Exact noncentral t: 393 per group falls just short of 0.80 (Cohen's 393 is rounded from an
    # approximation); statsmodels' solve_power gives 393.4, whose ceiling is 394.
    assert sample_size("two-sample-t", d=0.2).n_per_group == 394
    assert power("two-sample-t", 393, d=0.2).power < 0.8 <= power("two-sample-t", 394, d=0.2).power


def test_critical_value_convention():
    # t table (common practice): the two-sided 5% critical t for 14 df is 2.145; with no effect the
    # rejection rate is exactly alpha, split over both tails.
    assert stats.t.isf(0.025, 14) == pytest.approx(2.145, abs=5e-4)
    assert float(t_test_power(0.0, 14, 0.05, "two-sided")) == pytest.approx(0.05, abs=1e-12)
    assert float(t_test_power(0.0, 14, 0.05, "greater")) == pytest.approx(0.05, abs=1e-12)


def test_more_power_costs_the_usual_proportion():
    # Common practice: 80% -> 90% power costs about 30% more units per group, 95% about 60% more.
    n80 = sample_size("two-sample-t", d=0.5, power=0.8).n_per_group
    n90 = sample_size("two-sample-t", d=0.5, power=0.9).n_per_group
    n95 = sample_size("two-sample-t", d=0.5, power=0.95).n_per_group
    assert 1.25 <= n90 / n80 <= 1.40
    assert 1.50 <= n95 / n80 <= 1.70


def test_conventional_defaults():
    # Common practice: alpha 0.05 two-sided and power 0.80 are the conventions (beta = 4 x alpha).
    design = design_from_params("two-sample-t", d=0.5)
    assert (design.alpha, design.power, design.alternative) == (0.05, 0.8, "two-sided")
    assert 1 - design.power == pytest.approx(4 * design.alpha)


# (d, n1, ratio, alpha, alternative) rows compared with statsmodels' TTestIndPower
IND_ROWS = [
    (0.5, 64, 1.0, 0.05, "two-sided"),
    (0.2, 394, 1.0, 0.05, "two-sided"),
    (0.8, 20, 2.0, 0.01, "two-sided"),
    (0.6, 30, 1.0, 0.05, "larger"),
    (-0.6, 30, 1.0, 0.05, "smaller"),
    (1.2, 5, 3.0, 0.10, "two-sided"),
]
_ALT = {"two-sided": "two-sided", "larger": "greater", "smaller": "less"}


@pytest.mark.parametrize(("d", "n1", "ratio", "alpha", "alternative"), IND_ROWS)
def test_two_sample_power_matches_statsmodels(d, n1, ratio, alpha, alternative):
    # statsmodels.stats.power.TTestIndPower (reference library), at integer group sizes
    expected = TTestIndPower().power(effect_size=d, nobs1=n1, alpha=alpha, ratio=ratio, alternative=alternative)
    ours = power("two-sample-t", n1, d=d, alpha=alpha, ratio=ratio, alternative=_ALT[alternative]).power
    assert ours == pytest.approx(expected, rel=1e-6)


@pytest.mark.parametrize(("d", "n", "alpha", "alternative"), [
    (0.5, 34, 0.05, "two-sided"), (0.3, 90, 0.05, "larger"), (-0.4, 40, 0.01, "smaller"), (1.0, 6, 0.1, "two-sided"),
])
@pytest.mark.parametrize("test", ["one-sample-t", "paired-t"])
def test_one_group_power_matches_statsmodels(test, d, n, alpha, alternative):
    # statsmodels.stats.power.TTestPower (reference library); paired-t is the one-sample test on differences
    expected = TTestPower().power(effect_size=d, nobs=n, alpha=alpha, alternative=alternative)
    assert power(test, n, d=d, alpha=alpha, alternative=_ALT[alternative]).power == pytest.approx(expected, rel=1e-6)


@pytest.mark.parametrize(("d", "target", "alpha", "ratio"), [
    (0.5, 0.8, 0.05, 1.0), (0.35, 0.9, 0.05, 1.0), (1.1, 0.8, 0.01, 1.0), (0.7, 0.85, 0.05, 2.0),
])
def test_two_sample_n_matches_statsmodels_solve_power(d, target, alpha, ratio):
    # statsmodels.stats.power.TTestIndPower.solve_power gives a real-valued n1; with ratio 1 its
    # ceiling is the smallest integer n reaching the target.
    n1 = TTestIndPower().solve_power(effect_size=d, alpha=alpha, power=target, ratio=ratio)
    ours = sample_size("two-sample-t", d=d, power=target, alpha=alpha, ratio=ratio)
    if ratio == 1.0:
        assert ours.n_per_group == math.ceil(n1)
    else:  # we round group 2 up to ceil(ratio * n1), so our n1 can be one lower than ceil(n1)
        assert ours.n_per_group in (math.ceil(n1) - 1, math.ceil(n1))


def test_paired_from_two_sds_and_correlation():
    # SD of differences = sqrt(s1^2 + s2^2 - 2 r s1 s2) (variance of a difference, common practice);
    # with s1 = s2 = 30 and r = 0.7 it is sqrt(540); the design equals one stated with that SD.
    via_correlation = sample_size("paired-t", difference=10, sd1=30, sd2=30, correlation=0.7)
    via_sd = sample_size("paired-t", difference=10, sd=math.sqrt(540))
    assert via_correlation.n_per_group == via_sd.n_per_group
    assert via_correlation.effect_size == pytest.approx(10 / math.sqrt(540))


def test_attrition_inflates_enrolment():
    # enrolment = ceil(n / (1 - attrition)): 64 analysable per group with 10% loss -> 72 enrolled
    result = sample_size("two-sample-t", d=0.5, attrition=0.1)
    assert (result.n_per_group, result.enrolment_per_group, result.enrolment_total) == (64, 72, 144)


@pytest.mark.parametrize(("test", "params"), [
    ("two-sample-t", {"d": 0.5}),
    ("two-sample-t", {"d": 0.8, "ratio": 2.0}),
    ("one-sample-t", {"d": 0.6, "alternative": "greater"}),
    ("paired-t", {"difference": -3.0, "sd": 5.0, "alternative": "less"}),
])
def test_simulated_power_at_the_answer(test, params):
    # Seeded Monte Carlo of the t-test itself (scipy.stats.ttest_ind / ttest_1samp) at the returned n:
    # within 3 standard errors of the exact power there, and so of the target.
    result = sample_size(test, **params)
    simulated = simulated_power(design_from_params(test, **params), result.n_per_group, reps=20_000, seed=7)
    assert abs(simulated.power - result.achieved_power) < 3 * simulated.standard_error
    assert simulated.power > result.target_power - 3 * simulated.standard_error


def test_results_repr_and_dict():
    result = sample_size("two-sample-t", d=0.5)
    assert repr(result) == "SampleSize(test='two-sample-t', n_per_group=64, n_total=128, achieved_power=0.8015)"
    assert {"n_per_group", "n_total", "achieved_power"} <= set(result.to_dict())


_effects = st.floats(min_value=0.15, max_value=2.0)
_powers = st.floats(min_value=0.55, max_value=0.97)
_tests = st.sampled_from(["one-sample-t", "paired-t", "two-sample-t"])


@settings(max_examples=40, deadline=None)
@given(test=_tests, d=_effects, target=_powers)
def test_answer_is_the_smallest_n(test, d, target):
    result = sample_size(test, d=d, power=target)
    n = result.n_per_group
    assert power(test, n, d=d, power=target).power >= target
    if n > 2:
        assert power(test, n - 1, d=d, power=target).power < target


@settings(max_examples=30, deadline=None)
@given(test=_tests, d=_effects, bigger=st.floats(min_value=1.05, max_value=2.0), target=_powers)
def test_n_falls_as_the_effect_grows(test, d, bigger, target):
    assert sample_size(test, d=d * bigger, power=target).n_per_group <= sample_size(test, d=d, power=target).n_per_group


@settings(max_examples=30, deadline=None)
@given(test=_tests, d=_effects, target=st.floats(min_value=0.55, max_value=0.9))
def test_n_rises_with_power_and_with_smaller_alpha(test, d, target):
    base = sample_size(test, d=d, power=target).n_per_group
    assert sample_size(test, d=d, power=target + 0.05).n_per_group >= base
    assert sample_size(test, d=d, power=target, alpha=0.01).n_per_group >= base


def test_power_array_is_vectorized():
    design = design_from_params("two-sample-t", d=0.5)
    values = design.family.power(design, np.array([10, 64, 200]))
    assert values.shape == (3,) and np.all(np.diff(values) > 0)


@pytest.mark.parametrize("params", [{"d": 150.0}, {"difference": 1e300, "sd": 1.0}, {"difference": 1.0, "sd": 5e-324}])
def test_absurd_effects_are_refused_with_a_reason(params):
    # A standardized effect beyond 100 SDs is a unit mistake, not a design: refused, never sized.
    from registry.power import InfeasibleDesign

    with pytest.raises(InfeasibleDesign, match="units of the effect"):
        sample_size("two-sample-t", **params)
