"""Crossover, ANCOVA, McNemar and count-rate families against outside references and simulation."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.power import TTestIndPower
from statsmodels.stats.rates import power_negbin_ratio_2indep, power_poisson_ratio_2indep

from registry.power import InvalidDesign, design_from_params, power, sample_size
from registry.power.ancova import ancova_t
from registry.power.simulate import simulated_power

_SM_ALTERNATIVE = {"two-sided": "two-sided", "greater": "larger", "less": "smaller"}


# ------------------------------------------------------------------ crossover-2x2

@pytest.mark.parametrize("n, d, ratio, alternative, rtol", [
    # statsmodels TTestIndPower on the period differences (SD sigma_w / sqrt(2), effect sqrt(2) d)
    (17, 0.5, 1.0, "two-sided", 1e-9),
    (33, 0.5, 1.0, "two-sided", 1e-9),
    (10, 0.8, 1.5, "greater", 1e-9),
    (40, -0.3, 1.0, "less", 1e-9),
])
def test_crossover_power_matches_statsmodels_on_period_differences(n, d, ratio, alternative, rtol):
    ours = power("crossover-2x2", n, d=d, ratio=ratio, alternative=alternative).power
    n2 = math.ceil(ratio * n - 1e-9)
    reference = TTestIndPower().power(math.sqrt(2) * d, n, 0.05, ratio=n2 / n,
                                      alternative=_SM_ALTERNATIVE[alternative])
    assert ours == pytest.approx(reference, rel=rtol)


def test_crossover_total_close_to_the_normal_formula():
    # Julious (2004) normal-approximation total N = 2 (z_a + z_b)^2 sigma_w^2 / delta^2 (from memory);
    # the t-based answer lies within one or two subjects per sequence above it
    z = stats.norm.isf(0.025) + stats.norm.ppf(0.8)
    normal_total = 2 * z**2 * 10.0**2 / 5.0**2
    result = sample_size("crossover-2x2", difference=5, sd_within=10)
    assert normal_total <= result.n_total <= normal_total + 4


def test_crossover_period_difference_t_is_the_anova_treatment_t():
    # the t-test on period differences equals the treatment t of OLS on subject + period + treatment
    # (Senn 2002, ch. 3; checked with statsmodels OLS)
    rng = np.random.default_rng(11)
    n = 7
    y = rng.normal(size=(2 * n, 2)) + rng.normal(size=(2 * n, 1))
    y[:n, 0] += 1.0
    y[n:, 1] += 1.0
    half = (y[:, 0] - y[:, 1]) / 2
    t_diff = stats.ttest_ind(half[:n], half[n:]).statistic
    subject = np.repeat(np.eye(2 * n), 2, axis=0)
    period = np.tile([0.0, 1.0], 2 * n)
    treat = np.array([1.0 if (s < n) == (p == 0) else 0.0 for s in range(2 * n) for p in range(2)])
    fit = sm.OLS(y.ravel(), np.column_stack([subject, period, treat])).fit()
    assert fit.tvalues[-1] == pytest.approx(t_diff, rel=1e-9)


# ------------------------------------------------------------------ ancova

def test_ancova_t_statistic_matches_statsmodels_ols():
    # our vectorized ANCOVA t against statsmodels OLS outcome ~ group + baseline, one dataset
    rng = np.random.default_rng(3)
    x = rng.normal(size=(1, 23))
    y = 0.6 * x + rng.normal(size=(1, 23))
    y[:, 10:] += 0.7
    group = np.r_[np.zeros(10), np.ones(13)]
    fit = sm.OLS(y[0], sm.add_constant(np.column_stack([group, x[0]]))).fit()
    assert ancova_t(x, y, 10)[0] == pytest.approx(fit.tvalues[1], rel=1e-9)


@pytest.mark.parametrize("rho", [0.0, 0.5, 0.8])
def test_ancova_n_is_about_one_minus_rho_squared_of_the_t_test(rho):
    # Borm, Fransen & Lemmens (2007): n_ANCOVA ~ (1 - rho^2) n_t-test, plus about one for the lost df
    t_test = TTestIndPower().solve_power(0.5, power=0.8, alpha=0.05)  # statsmodels
    n = sample_size("ancova", d=0.5, correlation=rho).n_per_group
    assert (1 - rho**2) * t_test <= n <= (1 - rho**2) * t_test + 3


@pytest.mark.parametrize("kw", [
    dict(difference=4.0, sd=8.0, correlation=0.6),
    dict(d=0.6, correlation=0.4, alternative="greater"),
])
def test_ancova_size_confirmed_by_simulated_ancova(kw):
    # seeded simulation of the ANCOVA fit (least squares, t on N - 3 df) at the returned n
    design = design_from_params("ancova", **kw)
    n = sample_size("ancova", **kw).n_per_group
    at_n = simulated_power(design, n, reps=20000, seed=7)
    assert at_n.power == pytest.approx(power("ancova", n, **kw).power, abs=3 * at_n.standard_error)
    assert at_n.power >= 0.8 - 3 * at_n.standard_error
    assert power("ancova", n - 1, **kw).power < 0.8


# ------------------------------------------------------------------ mcnemar

def _mcnemar_enumerated(n, p10, p01, alpha=0.05):
    """Exact rejection probability of the uncorrected McNemar z test, by summing the binomial laws."""
    z = stats.norm.isf(alpha / 2)
    psi = p10 + p01
    total = 0.0
    for m in range(1, n + 1):
        c = np.arange(m + 1)
        reject = np.abs(2 * c - m) / math.sqrt(m) > z
        total += stats.binom.pmf(m, n, psi) * stats.binom.pmf(c, m, p01 / psi)[reject].sum()
    return total


@pytest.mark.parametrize("n, p10, p01", [
    (120, 0.10, 0.25),  # worked example of the module docstring
    (60, 0.05, 0.20),
    (200, 0.20, 0.30),
])
def test_mcnemar_approximation_against_enumeration(n, p10, p01):
    # enumeration of the test (binomial number of discordant pairs, binomial split), not from memory;
    # Connor's normal approximation stays within 0.025 of it
    approx = power("mcnemar", n, p10=p10, p01=p01).power
    assert approx == pytest.approx(_mcnemar_enumerated(n, p10, p01), abs=0.025)


def test_mcnemar_size_matches_connor_formula_and_simulation():
    # Connor (1987): n = (z_a sqrt(psi) + z_b sqrt(psi - delta^2))^2 / delta^2 (from memory)
    z_a, z_b = stats.norm.isf(0.025), stats.norm.ppf(0.8)
    psi, delta = 0.35, 0.15
    connor = (z_a * math.sqrt(psi) + z_b * math.sqrt(psi - delta**2)) ** 2 / delta**2
    result = sample_size("mcnemar", p10=0.10, p01=0.25)
    assert result.n_per_group == math.ceil(connor)
    design = design_from_params("mcnemar", p10=0.10, p01=0.25)
    sim = simulated_power(design, result.n_per_group, reps=20000, seed=5)
    assert sim.power >= 0.8 - 3 * sim.standard_error  # the test the lab runs reaches the target


def test_mcnemar_direction_and_effect():
    assert sample_size("mcnemar", p10=0.25, p01=0.10, alternative="less").n_per_group < \
        sample_size("mcnemar", p10=0.25, p01=0.10).n_per_group
    with pytest.raises(InvalidDesign, match="sum to less than 1"):
        design_from_params("mcnemar", p10=0.6, p01=0.5)


# ------------------------------------------------------------------ count rates

@pytest.mark.parametrize("n, rate1, rate2, exposure, ratio, alternative", [
    # statsmodels.stats.rates.power_poisson_ratio_2indep, method_var="alt" (dispersion 1 = Poisson)
    (111, 2.0, 1.5, 1.0, 1.0, "two-sided"),
    (30, 0.4, 0.8, 3.0, 2.0, "two-sided"),
    (50, 5.0, 4.0, 0.5, 1.0, "less"),
])
def test_poisson_power_matches_statsmodels(n, rate1, rate2, exposure, ratio, alternative):
    ours = power("poisson-rate", n, rate1=rate1, rate2=rate2, exposure=exposure, ratio=ratio,
                 alternative=alternative).power
    # statsmodels' effect is log(rate1 / rate2): our 'less' (rate2 < rate1) is its 'larger'
    sm_alt = {"two-sided": "two-sided", "less": "larger", "greater": "smaller"}[alternative]
    reference = power_poisson_ratio_2indep(rate1, rate2, n, nobs_ratio=math.ceil(ratio * n) / n, exposure=exposure,
                                           value=1, alpha=0.05, dispersion=1, alternative=sm_alt,
                                           method_var="alt").power
    assert ours == pytest.approx(float(reference), rel=1e-9)


@pytest.mark.parametrize("n, rate1, rate2, exposure, dispersion, ratio, alternative", [
    # statsmodels.stats.rates.power_negbin_ratio_2indep, method_var="alt"
    (206, 2.0, 1.5, 1.0, 0.5, 1.0, "two-sided"),
    (50, 2.0, 3.0, 2.5, 0.3, 2.0, "greater"),
    (80, 1.2, 0.6, 1.0, 1.5, 1.0, "two-sided"),
])
def test_negative_binomial_power_matches_statsmodels(n, rate1, rate2, exposure, dispersion, ratio, alternative):
    ours = power("negative-binomial-rate", n, rate1=rate1, rate2=rate2, exposure=exposure, dispersion=dispersion,
                 ratio=ratio, alternative=alternative).power
    sm_alt = {"two-sided": "two-sided", "less": "larger", "greater": "smaller"}[alternative]
    reference = power_negbin_ratio_2indep(rate1, rate2, n, nobs_ratio=math.ceil(ratio * n) / n, exposure=exposure,
                                          dispersion=dispersion, alpha=0.05, alternative=sm_alt,
                                          method_var="alt").power
    assert ours == pytest.approx(float(reference), rel=1e-9)


def test_zero_dispersion_is_poisson():
    assert sample_size("negative-binomial-rate", rate1=2.0, rate2=1.5, dispersion=0.0).n_per_group == \
        sample_size("poisson-rate", rate1=2.0, rate2=1.5).n_per_group


@pytest.mark.parametrize("test, kw", [
    ("poisson-rate", dict(rate1=2.0, rate2=1.5)),
    ("negative-binomial-rate", dict(rate1=2.0, rate2=1.5, dispersion=0.5)),
])
def test_count_sizes_confirmed_by_simulated_regression(test, kw):
    # seeded simulation of the Wald test of the log rate ratio (Poisson counts; gamma-Poisson mixture)
    design = design_from_params(test, **kw)
    n = sample_size(test, **kw).n_per_group
    sim = simulated_power(design, n, reps=10000, seed=13)
    assert sim.power >= 0.8 - 3 * sim.standard_error
    assert sim.power == pytest.approx(power(test, n, **kw).power, abs=0.02)


def test_poisson_wald_se_is_the_glm_one():
    # our Wald z for the log rate ratio against statsmodels' Poisson GLM on one dataset
    rng = np.random.default_rng(2)
    y = np.r_[rng.poisson(2.0, 15), rng.poisson(3.0, 15)]
    group = np.r_[np.zeros(15), np.ones(15)]
    fit = sm.GLM(y, sm.add_constant(group), family=sm.families.Poisson()).fit()
    from registry.power.catalog import get_family
    family = get_family("poisson-rate")
    se = family._log_ratio_se(y[None, :15], y[None, 15:])[0]
    assert se == pytest.approx(fit.bse[1], rel=1e-5)  # GLM fitted by IRLS to its default tolerance
    assert math.log(y[15:].mean() / y[:15].mean()) == pytest.approx(fit.params[1], rel=1e-6)


def test_count_minimum_detectable_rate_ratio():
    at = power("poisson-rate", 111, rate1=2.0, rate2=1.5)
    # the minimum detectable effect at the solved n gives back (about) the stated rate
    assert at.minimum_detectable_natural["rate2"] == pytest.approx(1.5, abs=0.01)
