"""Logistic regression on one predictor: the Wald formula against statsmodels and seeded simulations."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from registry.power import InvalidDesign, design_from_params, power, sample_size
from registry.power.logistic_regression import logistic_wald_z, slope_variance
from registry.power.simulate import simulated_power


def test_vectorized_fit_matches_statsmodels_logit():
    # our Newton fit's Wald z against statsmodels Logit on one dataset
    rng = np.random.default_rng(3)
    x = rng.normal(size=60)
    y = (rng.random(60) < 1 / (1 + np.exp(-(0.3 + 0.8 * x)))).astype(float)
    fit = sm.Logit(y, sm.add_constant(x)).fit(disp=0)
    assert logistic_wald_z(x[None], y[None])[0] == pytest.approx(fit.tvalues[1], rel=1e-8)


@pytest.mark.parametrize("baseline, log_or", [(0.2, math.log(1.5)), (0.5, math.log(0.6)), (0.05, math.log(2.0))])
def test_normal_predictor_information_against_statsmodels(baseline, log_or):
    # the inverse Fisher information of statsmodels' Logit at the true parameters on a large sample of a
    # standard normal predictor (law of large numbers), against our quadrature
    rng = np.random.default_rng(0)
    x = rng.normal(size=400_000)
    b0 = math.log(baseline / (1 - baseline))
    model = sm.Logit(np.zeros_like(x), sm.add_constant(x))
    info = -model.hessian(np.array([b0, log_or])) / x.size
    assert slope_variance(baseline, log_or, "continuous", 0.5) == pytest.approx(np.linalg.inv(info)[1, 1], rel=0.01)


def test_binary_predictor_is_the_log_odds_ratio_of_a_two_by_two_table():
    # Woolf's variance of the log odds ratio (common practice): sum of reciprocal expected cell counts
    p0, odds_ratio, exposed = 0.3, 2.5, 0.4
    p1 = odds_ratio * p0 / (1 - p0) / (1 + odds_ratio * p0 / (1 - p0))
    woolf = 1 / ((1 - exposed) * p0) + 1 / ((1 - exposed) * (1 - p0)) + 1 / (exposed * p1) + 1 / (exposed * (1 - p1))
    assert slope_variance(p0, math.log(odds_ratio), "binary", exposed) == pytest.approx(woolf, rel=1e-12)
    n = 200
    expected = stats.norm.cdf(math.log(odds_ratio) / math.sqrt(woolf / n) - stats.norm.isf(0.025))
    ours = power("logistic-regression", n, baseline=p0, odds_ratio=odds_ratio, exposed_fraction=exposed).power
    assert ours == pytest.approx(expected, abs=1e-6)  # the far tail adds below 1e-6 here


@pytest.mark.parametrize("kw", [
    dict(baseline=0.2, odds_ratio=1.5, predictor="continuous"),
    dict(baseline=0.3, odds_ratio=2.5),
    dict(baseline=0.1, odds_ratio=3.0, exposed_fraction=0.3),
    dict(baseline=0.5, odds_ratio=0.6, predictor="continuous", alternative="less"),
])
def test_size_confirmed_by_simulated_logistic_fit(kw):
    # seeded simulation of the fitted logistic regression's Wald test at the returned n: the target is
    # reached, and the formula is within 0.04 of the simulated power (conservative when it differs)
    design = design_from_params("logistic-regression", **kw)
    result = sample_size("logistic-regression", **kw)
    sim = simulated_power(design, result.n_per_group, reps=6000, seed=4)
    assert sim.power >= 0.8 - 3 * sim.standard_error
    assert sim.power == pytest.approx(result.achieved_power, abs=0.04)


def test_bad_logistic_inputs():
    with pytest.raises(InvalidDesign, match="odds_ratio is 1"):
        design_from_params("logistic-regression", baseline=0.2, odds_ratio=1.0)
    with pytest.raises(InvalidDesign, match="baseline"):
        design_from_params("logistic-regression", baseline=1.2, odds_ratio=2.0)
