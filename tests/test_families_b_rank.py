"""mann-whitney and signed-rank: efficiency, Noether's formula, reference libraries and simulation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats
from statsmodels.stats import nonparametric as sm_nonparametric
from statsmodels.stats.power import TTestIndPower, TTestPower

from registry.power import InvalidDesign, design_from_params, power, sample_size
from registry.power.rank_efficiency import ARE, superiority_shift
from registry.power.simulate import simulated_power

_SCALED = {  # each shape with SD 1, as scipy distributions
    "normal": stats.norm(),
    "logistic": stats.logistic(scale=math.sqrt(3) / math.pi),
    "laplace": stats.laplace(scale=1 / math.sqrt(2)),
    "uniform": stats.uniform(loc=-math.sqrt(3), scale=2 * math.sqrt(3)),
}


@pytest.mark.parametrize(
    "shape, expected",
    [
        ("normal", 0.955),  # Hodges & Lehmann (1956), 3/pi = 0.955, from memory
        ("logistic", 1.097),  # Lehmann (1975) ch. 2, pi^2/9 = 1.097, from memory
        ("laplace", 1.5),  # Lehmann (1975) ch. 2, double exponential 3/2, from memory
        ("uniform", 1.0),  # Lehmann (1975) ch. 2, uniform 1, from memory
    ],
)
def test_are_values(shape, expected):
    assert ARE[shape] == pytest.approx(expected, abs=5e-4)
    # and independently from ARE = 12 sigma^2 (integral f^2)^2 (Lehmann 1975), by quadrature
    dist = _SCALED[shape]
    low, high = dist.ppf(1e-12), dist.ppf(1 - 1e-12)
    integral = integrate.quad(lambda x: dist.pdf(x) ** 2, low, high, points=[0.0], limit=200)[0]
    assert 12 * integral**2 == pytest.approx(ARE[shape], rel=1e-6)


@pytest.mark.parametrize("d", [0.3, 0.5, 0.8, 1.2])
@pytest.mark.parametrize("shape", list(ARE))
def test_mann_whitney_is_t_test_n_over_are(d, shape):
    # statsmodels TTestIndPower gives the two-sample t-test n (reference library); ceil(n_t / ARE)
    n_t = math.ceil(TTestIndPower().solve_power(effect_size=d, alpha=0.05, power=0.8) - 1e-9)
    assert sample_size("mann-whitney", d=d, distribution=shape).n_per_group == math.ceil(n_t / ARE[shape] - 1e-9)


@pytest.mark.parametrize("d", [0.4, 0.5, 0.8])
@pytest.mark.parametrize("shape", ["normal", "laplace"])
def test_signed_rank_is_paired_t_n_over_are(d, shape):
    # statsmodels TTestPower gives the one-sample / paired t-test n (reference library)
    n_t = math.ceil(TTestPower().solve_power(effect_size=d, alpha=0.05, power=0.8) - 1e-9)
    assert sample_size("signed-rank", d=d, distribution=shape).n_per_group == math.ceil(n_t / ARE[shape] - 1e-9)


@pytest.mark.parametrize(
    "p, ratio, expected_total",
    [
        # Noether (1987): N = (z_a + z_b)^2 / (12 c (1 - c) (p - 1/2)^2), by hand with 1.960 + 0.842:
        # p = 0.64, c = 1/2: 7.849 / (3 x 0.0196) = 133.5 -> 134, 67 per group
        (0.64, 1.0, 134),
        # p = 0.7, c = 1/2: 7.849 / (3 x 0.04) = 65.4 -> 33 per group, 66 in all
        (0.7, 1.0, 66),
    ],
)
def test_noether_formula(p, ratio, expected_total):
    assert sample_size("mann-whitney", p_superiority=p, ratio=ratio).n_total == expected_total


def test_noether_with_unequal_allocation():
    # Noether (1987) with c = 1/3: N = (z_a + z_b)^2 / (12 (2/9) (p - 1/2)^2), re-derived with scipy quantiles
    z = stats.norm.isf(0.025) + stats.norm.ppf(0.8)
    total = z**2 / (12 * (1 / 3) * (2 / 3) * 0.15**2)
    result = sample_size("mann-whitney", p_superiority=0.65, ratio=2.0)
    assert result.n_total >= total and result.n_per_group == math.ceil(total / 3 - 1e-9)


@pytest.mark.parametrize(
    "shape, d, rtol",
    [
        # statsmodels samplesize_rank_compare_onetail (Happ et al. 2019, variance under H1 from the data),
        # fed the distribution's quantiles: ARE sizes agree within 5% for these shapes ...
        ("normal", 0.5, 0.05),
        ("logistic", 0.5, 0.05),
        ("laplace", 0.5, 0.08),
        # ... and are about 10% optimistic for the short-tailed uniform, where ARE = 1 is reached slowly
        ("uniform", 0.5, 0.15),
    ],
)
def test_mann_whitney_against_statsmodels_happ(shape, d, rtol):
    u = (np.arange(2000) + 0.5) / 2000
    reference = _SCALED[shape].ppf(u)
    happ = sm_nonparametric.samplesize_rank_compare_onetail(reference + d, reference, 0.05, 0.8)
    ours = sample_size("mann-whitney", d=d, distribution=shape).n_per_group
    assert ours == pytest.approx(happ.nobs_ref, rel=rtol)


@pytest.mark.parametrize(
    "test, params, low, high",
    [
        # Seeded Monte Carlo with scipy's rank tests at the returned n. ARE and Noether's formula are
        # asymptotic, so the check is against the target power 0.80 with a measured, documented band
        # rather than 3 SE. Normal and logistic outcomes: within 0.03 of the target.
        ("mann-whitney", dict(d=0.5), 0.77, 0.83),
        ("mann-whitney", dict(d=0.5, distribution="logistic"), 0.77, 0.83),
        ("mann-whitney", dict(p_superiority=0.64, distribution="normal"), 0.77, 0.83),
        ("signed-rank", dict(d=0.5), 0.77, 0.83),
        ("signed-rank", dict(d=0.5, distribution="logistic"), 0.77, 0.83),
        # Laplace and uniform outcomes: the rank tests reach their ARE slowly, so the ARE size is
        # optimistic: simulated power falls short of the target (by 0.03-0.10 at these n; more at
        # smaller n, see docs/methods.md), never above it.
        ("mann-whitney", dict(d=0.5, distribution="laplace"), 0.70, 0.80),
        ("mann-whitney", dict(d=0.5, distribution="uniform"), 0.70, 0.80),
        ("signed-rank", dict(d=0.5, distribution="laplace"), 0.65, 0.80),
        ("signed-rank", dict(d=0.5, distribution="uniform"), 0.68, 0.80),
    ],
)
def test_simulated_power_near_target(test, params, low, high):
    result = sample_size(test, **params)
    simulated = simulated_power(design_from_params(test, **params), result.n_per_group, reps=3000, seed=5)
    assert low < simulated.power < high


def test_simulation_uses_the_assumed_distribution_by_default():
    design = design_from_params("mann-whitney", d=0.5, distribution="laplace")
    assert simulated_power(design, 10, reps=200).distribution == "laplace"


def test_power_is_zero_where_the_exact_test_cannot_reject():
    # scipy's exact signed-rank test: with 5 pairs the smallest two-sided p is 2 / 2^5 = 0.0625 > 0.05
    assert stats.wilcoxon([1.0, 2.0, 3.0, 4.0, 5.0]).pvalue == pytest.approx(0.0625)
    assert power("signed-rank", 5, d=3.0).power == 0.0
    assert power("signed-rank", 6, d=3.0).power > 0.9
    # scipy's exact rank-sum test: 3 vs 3 has smallest two-sided p 2 / C(6, 3) = 0.1
    assert stats.mannwhitneyu([4.0, 5.0, 6.0], [1.0, 2.0, 3.0]).pvalue == pytest.approx(0.1)
    assert power("mann-whitney", 3, d=5.0).power == 0.0


def test_superiority_shift_for_the_normal():
    # For normal outcomes P(Y > X) = Phi(d / sqrt(2)) (fact of the trade)
    for d in (0.2, 0.5, 1.0):
        assert superiority_shift("normal", stats.norm.cdf(d / math.sqrt(2))) == pytest.approx(d, abs=1e-8)


@pytest.mark.parametrize(
    "test, params, message",
    [
        ("mann-whitney", dict(p_superiority=0.6, d=0.3), "not both"),
        ("mann-whitney", dict(p_superiority=0.5), "must not be 0.5"),
        ("mann-whitney", dict(p_superiority=64), "did you mean 0.64"),
        ("mann-whitney", dict(d=0.3, distribution="cauchy"), "distribution"),
        ("signed-rank", dict(sd=0.3), "difference is missing"),
    ],
)
def test_bad_effects_are_explained(test, params, message):
    with pytest.raises(InvalidDesign, match=message):
        sample_size(test, **params)


@settings(max_examples=25, deadline=None)
@given(
    test=st.sampled_from(["mann-whitney", "signed-rank"]),
    d=st.floats(0.2, 1.5),
    shape=st.sampled_from(list(ARE)),
    power_=st.floats(0.6, 0.95),
)
def test_properties(test, d, shape, power_):
    base = dict(distribution=shape, power=power_)
    n = sample_size(test, d=d, **base).n_per_group
    assert power(test, n, d=d, **base).power >= power_ > power(test, n - 1, d=d, **base).power
    assert sample_size(test, d=d * 1.2, **base).n_per_group <= n
    assert sample_size(test, d=d, distribution=shape, power=min(power_ + 0.04, 0.99)).n_per_group >= n
    assert sample_size(test, d=d, alpha=0.01, **base).n_per_group >= n


@settings(max_examples=25, deadline=None)
@given(p=st.floats(0.55, 0.85), power_=st.floats(0.6, 0.95))
def test_noether_properties(p, power_):
    n = sample_size("mann-whitney", p_superiority=p, power=power_).n_per_group
    at = power("mann-whitney", n, p_superiority=p, power=power_)
    assert at.power >= power_ > power("mann-whitney", n - 1, p_superiority=p, power=power_).power
    assert sample_size("mann-whitney", p_superiority=min(p + 0.05, 0.95), power=power_).n_per_group <= n
