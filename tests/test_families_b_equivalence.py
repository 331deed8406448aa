"""equivalence-t (TOST) and noninferiority-t: Owen's Q, published sizes, statsmodels and simulation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats
from statsmodels.stats.power import TTestIndPower
from statsmodels.stats.weightstats import ttest_ind, ttost_ind

from registry.power import InfeasibleDesign, InvalidDesign, design_from_params, power, sample_size
from registry.power.equivalence_t import EquivalenceT
from registry.power.noninferiority_t import NonInferiorityT
from registry.power.owen import owens_q, tost_power
from registry.power.simulate import simulated_power


@pytest.mark.parametrize("df, t, delta", [(5, 1.5, 0.5), (20, 2.1, 2.5), (60, -1.2, -0.8), (300, 1.97, 3.0)])
def test_owens_q_over_the_half_line_is_the_noncentral_t_cdf(df, t, delta):
    # Owen (1965): Q_df(t, delta; 0, inf) = P(T_{df, delta} <= t); scipy's nct is the reference
    assert owens_q(df, t, delta, 0.0, math.inf) == pytest.approx(stats.nct.cdf(t, df, delta), abs=1e-10)


def test_owens_q_splits_additively():
    # Q over [0, R] plus Q over [R, inf) is Q over [0, inf) (definition as an integral)
    whole = owens_q(18, 1.7, 1.1, 0.0, math.inf)
    assert owens_q(18, 1.7, 1.1, 0.0, 3.9) + owens_q(18, 1.7, 1.1, 3.9, math.inf) == pytest.approx(whole, abs=1e-12)


def _tost_power_by_direct_integration(lower, upper, difference, n1, n2, alpha):
    """Independent computation: condition on the pooled variance (chi-square), integrate the
    normal probability that the estimate lies in the shrunken acceptance interval."""
    df = n1 + n2 - 2
    k = math.sqrt(1 / n1 + 1 / n2)
    t = stats.t.isf(alpha, df)

    def given_chi2(v):
        s = math.sqrt(v / df)
        low, high = lower + t * s * k, upper - t * s * k
        if high <= low:
            return 0.0
        return (stats.norm.cdf((high - difference) / k) - stats.norm.cdf((low - difference) / k)) * stats.chi2.pdf(v, df)

    return integrate.quad(given_chi2, 0, stats.chi2.isf(1e-14, df), limit=400, epsabs=1e-12)[0]


@pytest.mark.parametrize(
    "lower, upper, difference, n1, n2",
    [(-0.5, 0.5, 0.0, 70, 70), (-0.3, 0.5, 0.1, 40, 80), (-1.0, 1.0, 0.4, 12, 12), (-0.2, 0.2, 0.0, 400, 400)],
)
def test_tost_power_matches_direct_integration(lower, upper, difference, n1, n2):
    ours = tost_power(lower, upper, difference, np.array([n1]), np.array([n2]), 0.05)[0]
    assert ours == pytest.approx(_tost_power_by_direct_integration(lower, upper, difference, n1, n2, 0.05), abs=1e-8)


def test_tost_power_tends_to_the_normal_formula():
    # Julious (2004), large-sample TOST power with zero true difference: 2 Phi(margin / se - z_a) - 1
    n = 3000
    se = math.sqrt(2 / n)
    normal = 2 * stats.norm.cdf(0.1 / se - stats.norm.isf(0.05)) - 1
    assert tost_power(-0.1, 0.1, 0.0, np.array([n]), np.array([n]), 0.05)[0] == pytest.approx(normal, abs=1e-3)


@pytest.mark.parametrize(
    "cv, total",
    [
        # Average bioequivalence in a 2x2 crossover, GMR 0.95, limits 0.80-1.25, alpha 0.05, 80% power:
        # Diletti, Hauschke & Steinijans (1991) Int J Clin Pharmacol Ther Toxicol 29:1-8, Table 1, from memory.
        (0.20, 20),
        (0.25, 28),
        (0.30, 40),
    ],
)
def test_bioequivalence_crossover_sizes(cv, total):
    # A 2x2 crossover with within-subject SD s_w on the log scale has the same TOST statistic as a
    # parallel comparison of the two sequences with SD s_w / sqrt(2) and df = N - 2.
    sd_within = math.sqrt(math.log(1 + cv**2))
    result = sample_size("equivalence-t", lower=math.log(0.8), upper=math.log(1.25),
                         difference=math.log(0.95), sd=sd_within / math.sqrt(2))
    assert result.n_total == total


def test_tost_decision_matches_statsmodels():
    # The simulator's TOST decision equals statsmodels' ttost_ind (pooled variance) on the same data
    design = design_from_params("equivalence-t", lower=-0.4, upper=0.6, difference=0.1, sd=1.0)
    reps, n = 200, 60
    ours = EquivalenceT().simulate(design, n, reps, np.random.default_rng(3))
    rng = np.random.default_rng(3)
    control = rng.standard_normal((reps, n))
    treated = rng.standard_normal((reps, n)) + 0.1
    reference = np.array([ttost_ind(treated[i], control[i], -0.4, 0.6, usevar="pooled")[0] < 0.05
                          for i in range(reps)])
    assert 0 < reference.sum() < reps
    np.testing.assert_array_equal(ours, reference)


@pytest.mark.parametrize(
    "params",
    [dict(margin=0.5, sd=1.0), dict(lower=-0.3, upper=0.5, difference=0.1, sd=1.0, ratio=2.0),
     dict(margin=1.0, difference=0.3, sd=1.0, alpha=0.025)],
)
def test_tost_simulated_power_at_the_returned_n(params):
    # Seeded Monte Carlo of the actual TOST decision: within 3 SE of the exact power
    result = sample_size("equivalence-t", **params)
    simulated = simulated_power(design_from_params("equivalence-t", **params), result.n_per_group, reps=6000, seed=2)
    assert abs(simulated.power - result.achieved_power) < 3 * simulated.standard_error


@pytest.mark.parametrize(
    "params",
    [dict(margin=0.5, sd=1.0, alpha=0.025), dict(margin=2.0, difference=0.5, sd=4.0, ratio=1.5),
     dict(margin=0.3, difference=-0.1, sd=1.0, higher_is_better=False, power=0.9)],
)
def test_noninferiority_matches_statsmodels(params):
    # statsmodels TTestIndPower with the effect shifted by the margin, one-sided 'larger'
    effect = (params["margin"] + (1 if params.get("higher_is_better", True) else -1)
              * params.get("difference", 0.0)) / params["sd"]
    alpha, target, ratio = params.get("alpha", 0.05), params.get("power", 0.8), params.get("ratio", 1.0)
    result = sample_size("noninferiority-t", **params)
    if ratio == 1.0:  # statsmodels allows fractional group 2; compare sizes where n2 = n1
        expected = math.ceil(TTestIndPower().solve_power(effect, alpha=alpha, power=target, alternative="larger"))
        assert result.n_per_group == expected
    n1, n2 = result.group_sizes
    reference = TTestIndPower().power(effect, n1, alpha, ratio=n2 / n1, alternative="larger")
    assert result.achieved_power == pytest.approx(reference, rel=1e-9)


def test_noninferiority_at_one_sided_2_5_percent_equals_superiority_at_two_sided_5_percent():
    # Cohen (1988) Table 2.4.1: d = 0.5, two-sided 5%, 80% power needs 64 per group (from memory);
    # a margin of 0.5 SD at one-sided 2.5% is the same one-tailed test
    assert sample_size("noninferiority-t", margin=0.5, sd=1.0, alpha=0.025).n_per_group == 64


def test_noninferiority_decision_matches_statsmodels_and_simulation():
    design = design_from_params("noninferiority-t", margin=0.4, difference=0.1, sd=1.0)
    reps, n = 200, 20
    ours = NonInferiorityT().simulate(design, n, reps, np.random.default_rng(8))
    rng = np.random.default_rng(8)
    control = rng.standard_normal((reps, n))
    treated = rng.standard_normal((reps, n)) + 0.1
    # statsmodels' t-test of treated - control against -margin, one-sided
    reference = np.array([ttest_ind(treated[i], control[i], alternative="larger", value=-0.4)[1] < 0.05
                          for i in range(reps)])
    np.testing.assert_array_equal(ours, reference)
    result = sample_size("noninferiority-t", margin=0.4, difference=0.1, sd=1.0)
    simulated = simulated_power(design, result.n_per_group, reps=6000, seed=4)
    assert abs(simulated.power - result.achieved_power) < 3 * simulated.standard_error


def test_lower_is_better_mirrors_higher_is_better():
    higher = sample_size("noninferiority-t", margin=0.5, difference=0.1, sd=1.0)
    lower = sample_size("noninferiority-t", margin=0.5, difference=-0.1, sd=1.0, higher_is_better=False)
    assert (higher.n_per_group, higher.achieved_power) == (lower.n_per_group, lower.achieved_power)
    assert lower.alternative == "one-sided (lower is better)"


@pytest.mark.parametrize(
    "test, params, message",
    [
        ("equivalence-t", dict(margin=0.5, sd=1.0, difference=0.6), "not inside the margins"),
        ("equivalence-t", dict(lower=0.5, sd=1.0), "lower and upper go together"),
        ("equivalence-t", dict(lower=0.5, upper=-0.5, sd=1.0), "must be below upper"),
        ("equivalence-t", dict(margin=0.5, lower=-0.5, upper=0.5, sd=1.0), "not both"),
        ("equivalence-t", dict(margin=0.5), "sd"),
        ("noninferiority-t", dict(margin=0.5, sd=1.0, difference=-0.6), "at or below -margin"),
        ("noninferiority-t", dict(margin=-0.5, sd=1.0), "margin"),
    ],
)
def test_bad_effects_are_explained(test, params, message):
    with pytest.raises(InvalidDesign, match=message):
        sample_size(test, **params)


@pytest.mark.parametrize("test", ["equivalence-t", "noninferiority-t"])
def test_an_explicit_alternative_is_refused(test):
    with pytest.raises(InfeasibleDesign, match="remove it"):
        sample_size(test, margin=0.5, sd=1.0, alternative="greater")


@settings(max_examples=25, deadline=None)
@given(
    test=st.sampled_from(["equivalence-t", "noninferiority-t"]),
    margin=st.floats(0.3, 1.5),
    shift=st.floats(0.0, 0.5),
    power_=st.floats(0.6, 0.95),
)
def test_properties(test, margin, shift, power_):
    base = dict(sd=1.0, difference=shift * margin, power=power_)
    n = sample_size(test, margin=margin, **base).n_per_group
    assert power(test, n, margin=margin, **base).power >= power_ > power(test, n - 1, margin=margin, **base).power
    assert sample_size(test, margin=margin * 1.2, **base).n_per_group <= n
    bigger = dict(base, power=min(power_ + 0.04, 0.99))
    assert sample_size(test, margin=margin, **bigger).n_per_group >= n
    assert sample_size(test, margin=margin, alpha=0.01, **base).n_per_group >= n
