"""Repeated measures: exact special cases, statsmodels AnovaRM, and seeded simulations."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from statsmodels.stats.anova import AnovaRM
from statsmodels.stats.power import TTestPower

from registry.power import InvalidDesign, design_from_params, power, sample_size
from registry.power.repeated_measures import rm_anova_pvalues
from registry.power.simulate import simulated_power


@pytest.mark.parametrize("sphericity", ["none", "greenhouse-geisser"])
@pytest.mark.parametrize("means, sd, rho", [([10.0, 12.0], 4.0, 0.5), ([0.0, -3.0], 6.0, 0.8), ([5.0, 6.0], 2.0, 0.0)])
def test_two_measurements_are_the_paired_t(means, sd, rho, sphericity):
    # compound symmetry with m = 2: the within F is the square of the paired t (df n - 1); with two
    # measurements epsilon is 1 whatever the data, so the correction changes nothing
    kw = dict(means=[means], sd=sd, correlation=rho, sphericity=sphericity)
    difference = means[1] - means[0]
    sd_diff = sd * math.sqrt(2 * (1 - rho))
    ours = sample_size("repeated-measures", **kw)
    paired = sample_size("paired-t", difference=difference, sd=sd_diff)
    assert ours.n_per_group == paired.n_per_group
    assert ours.achieved_power == pytest.approx(paired.achieved_power, rel=1e-9)
    # statsmodels TTestPower (one-sample t on the differences) at the same n
    assert power("repeated-measures", 15, **kw).power == pytest.approx(
        TTestPower().power(abs(difference) / sd_diff, 15, 0.05), rel=1e-9)


@pytest.mark.parametrize("structure", ["compound-symmetry", "ar1"])
def test_between_term_is_the_one_way_anova_on_subject_means(structure):
    # the between-group test is the one-way ANOVA of subject means, SD sqrt(1' Sigma 1) / m (exact)
    means = [[10.0, 11.0, 12.0], [12.0, 13.0, 14.0], [11.0, 11.0, 11.0]]
    kw = dict(means=means, sd=4.0, correlation=0.5, structure=structure, term="between")
    design = design_from_params("repeated-measures", **kw)
    sigma = 16.0 * design.effect.covariance()
    sd_mean = math.sqrt(sigma.sum()) / 3
    ours = sample_size("repeated-measures", **kw)
    anova = sample_size("one-way-anova", means=[float(np.mean(row)) for row in means], sd=sd_mean)
    assert ours.n_per_group == anova.n_per_group
    assert ours.achieved_power == pytest.approx(anova.achieved_power, rel=1e-9)


def test_change_score_is_the_paired_t_on_last_minus_first():
    kw = dict(means=[[10.0, 11.0, 13.0]], sd=4.0, correlation=0.6, structure="ar1", term="change")
    sd_change = 4.0 * math.sqrt(2 - 2 * 0.6**2)  # ar1: corr(first, last) = rho^2
    assert sample_size("repeated-measures", **kw).n_per_group == \
        sample_size("paired-t", difference=3.0, sd=sd_change).n_per_group


def test_simulated_f_matches_statsmodels_anova_rm():
    # our vectorized within F against statsmodels AnovaRM on one dataset (uncorrected p-value)
    rng = np.random.default_rng(6)
    y = rng.normal(size=(1, 1, 9, 4)) + np.array([0.0, 0.5, 0.8, 1.0])
    frame = pd.DataFrame([(s, t, y[0, 0, s, t]) for s in range(9) for t in range(4)], columns=["s", "t", "y"])
    table = AnovaRM(frame, "y", "s", within=["t"]).fit().anova_table
    assert rm_anova_pvalues(y, "within", False)[0] == pytest.approx(table["Pr > F"].iloc[0], rel=1e-8)


@pytest.mark.parametrize("kw, tolerance", [
    # compound symmetry: the F is exact, the Greenhouse-Geisser critical value uses the expected epsilon
    (dict(means=[[20.0, 22.0, 23.0, 23.0]], sd=5.0, correlation=0.6), 3),
    (dict(means=[[20.0, 21.0, 22.0, 23.0], [20.0, 20.0, 20.0, 20.0]], sd=5.0, correlation=0.5), 3),
    # ar1: the Muller-Barton-type approximation; measured about 0.01 optimistic, allowed 0.02
    (dict(means=[[20.0, 22.0, 23.0, 23.0]], sd=5.0, correlation=0.6, structure="ar1"), None),
    (dict(means=[[20.0, 21.0, 22.0, 25.0]], sd=5.0, correlation=0.5, structure="ar1", term="contrast",
          contrast=[-1.0, -1.0, 1.0, 1.0]), 3),
])
def test_size_confirmed_by_simulated_analysis(kw, tolerance):
    # seeded simulation of the analysis the lab runs (GG epsilon estimated from each data set)
    design = design_from_params("repeated-measures", **kw)
    result = sample_size("repeated-measures", **kw)
    sim = simulated_power(design, result.n_per_group, reps=10000, seed=2)
    allowed = 0.02 if tolerance is None else tolerance * sim.standard_error
    assert sim.power == pytest.approx(result.achieved_power, abs=allowed)
    assert power("repeated-measures", result.n_per_group - 1, **kw).power < 0.8


@pytest.mark.parametrize("kw, message", [
    (dict(means=[[1.0, 2.0], [1.0]], sd=1.0, correlation=0.5), "same number"),
    (dict(means=[[1.0, 2.0]], sd=1.0, correlation=0.5, term="between"), "at least two rows"),
    (dict(means=[[1.0, 2.0, 3.0]], sd=1.0, correlation=0.5, term="contrast", contrast=[1.0, 1.0, 1.0]), "sum to 0"),
    (dict(means=[[1.0, 2.0]], sd=1.0, correlation=1.0), "[0, 1)"),
])
def test_bad_repeated_inputs(kw, message):
    with pytest.raises(InvalidDesign, match=message.replace("[", r"\[").replace(")", r"\)")):
        design_from_params("repeated-measures", **kw)


def test_more_measurements_than_subjects():
    # 40 measurements, a handful of subjects: the contrasts' covariance estimate is singular (df < 39),
    # so the expected Greenhouse-Geisser epsilon cannot come from the Bartlett decomposition; the size
    # (formerly skipped to n = 40, and power at n = 10 crashed) is confirmed by simulating the test
    kw = dict(means=[[float(i % 5) for i in range(40)]], sd=3.0, correlation=0.5)
    design = design_from_params("repeated-measures", **kw)
    result = sample_size("repeated-measures", **kw)
    assert result.n_per_group < 10
    for n in (result.n_per_group - 1, result.n_per_group):
        sim = simulated_power(design, n, reps=3000, seed=4)
        assert sim.power == pytest.approx(power("repeated-measures", n, **kw).power, abs=4 * sim.standard_error)
    assert power("repeated-measures", result.n_per_group - 1, **kw).power < 0.8 <= result.achieved_power
    assert math.isfinite(power("repeated-measures", 10, **kw).power)


def test_many_measurements_stay_quick():
    # with many contrasts the expected epsilon uses fewer fixed draws (each costs k^3); its value stays
    # within Monte Carlo error of an independent estimate from scipy's Wishart sampler
    from scipy import stats

    from registry.power.repeated_measures import contrast_basis, expected_epsilon

    m, rho = 60, 0.5
    idx = np.arange(m)
    c = contrast_basis(m)
    a = c @ (4 * rho ** np.abs(idx[:, None] - idx[None, :])) @ c.T
    df = 80
    w = stats.wishart(df=df, scale=a).rvs(size=400, random_state=1) / df
    tr, tr2 = np.trace(w, axis1=1, axis2=2), np.einsum("rij,rji->r", w, w)
    independent = tr**2 / ((m - 1) * tr2)
    se = independent.std() / np.sqrt(len(independent))
    assert expected_epsilon(a, df) == pytest.approx(independent.mean(), abs=5 * se + 1e-3)


@pytest.mark.parametrize("m", [1, 2, 3, 4, 7, 12, 40])
def test_contrast_basis_is_scipys_helmert_basis(m):
    # reference library: scipy.linalg.helmert(m, full=False), the orthonormal Helmert contrasts
    from scipy.linalg import helmert

    from registry.power.repeated_measures import contrast_basis

    basis = contrast_basis(m)
    np.testing.assert_allclose(basis, helmert(m, full=False), rtol=0, atol=1e-15)
    np.testing.assert_allclose(basis @ basis.T, np.eye(m - 1), atol=1e-12)  # orthonormal rows
    np.testing.assert_allclose(basis.sum(axis=1), 0.0, atol=1e-12)  # each row a contrast
