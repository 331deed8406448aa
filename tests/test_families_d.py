"""Many-to-one (Dunnett) comparisons against scipy, published critical values and simulation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from registry.power import InvalidDesign, InfeasibleDesign, design_from_params, power, sample_size
from registry.power.many_to_one import dunnett_critical
from registry.power.simulate import simulated_power

DOSES = dict(differences=[4.0, 6.0, 8.0], sd=8.0)


@pytest.mark.parametrize("k, df, expected, rtol", [
    # Dunnett (1955) Table 1b / Dunnett (1964) two-sided 5% critical values, equal n, from memory
    (2, math.inf, 2.21, 3e-3),
    (3, math.inf, 2.35, 3e-3),
    (4, math.inf, 2.44, 3e-3),
    (5, math.inf, 2.51, 3e-3),
    (2, 20.0, 2.38, 3e-3),
    (3, 20.0, 2.54, 3e-3),
    (4, 20.0, 2.65, 3e-3),
])
def test_critical_values_match_dunnetts_tables(k, df, expected, rtol):
    assert dunnett_critical(k, 0.5, df, 0.05, True) == pytest.approx(expected, rel=rtol)


@pytest.mark.parametrize("df, two_sided", [(math.inf, True), (20.0, True), (5.0, True), (12.0, False)])
def test_one_comparison_is_the_t_quantile(df, two_sided):
    # scipy.stats.t: with k = 1 Dunnett's critical value is the t (or normal) quantile
    expected = stats.t.isf(0.025 if two_sided else 0.05, df)
    assert dunnett_critical(1, 0.5, df, 0.05, two_sided) == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize("k, rho, df", [(3, 0.5, 20.0), (4, 1 / (1 + 2.0), 30.0)])
def test_critical_value_against_scipy_multivariate_t(k, rho, df):
    # scipy.stats.multivariate_t (quasi-Monte Carlo): P(max |T_i| < c) = 0.95 at our c
    c = dunnett_critical(k, rho, df, 0.05, True)
    shape = np.full((k, k), rho) + (1 - rho) * np.eye(k)
    cdf = stats.multivariate_t(loc=np.zeros(k), shape=shape, df=df, seed=1).cdf(
        np.full(k, c), lower_limit=np.full(k, -c), maxpts=10**6)
    assert cdf == pytest.approx(0.95, abs=2e-4)


def test_simulated_analysis_agrees_with_scipy_dunnett():
    # our vectorized Dunnett decisions against scipy.stats.dunnett on the same simulated experiments
    design = design_from_params("many-to-one", **DOSES)
    family = design.family
    n, reps = 6, 60
    ours = family.simulate(design, n, reps, np.random.default_rng(4))
    # replay the simulator's draws (control block, then treatment block) and test each replicate with scipy
    rng = np.random.default_rng(4)
    control = rng.normal(0.0, 8.0, size=(reps, n))
    treated = rng.normal(0.0, 8.0, size=(reps, 3, n)) + np.array(DOSES["differences"])[None, :, None]
    agree = 0
    for i in range(reps):
        p = stats.dunnett(*treated[i], control=control[i], random_state=1).pvalue
        agree += bool((p < 0.05).any()) == bool(ours[i])
    assert agree >= reps - 1  # scipy's p-values carry quasi-Monte Carlo error at the boundary


@pytest.mark.parametrize("kw", [
    DOSES,
    dict(DOSES, control_allocation="sqrt-k"),
    dict(DOSES, goal="each"),
    dict(differences=[5.0, 5.0], sd=6.0, alternative="greater"),
])
def test_size_confirmed_by_simulated_dunnett_test(kw):
    # seeded simulation of Dunnett's test at the returned n; the computed power agrees within 3 SE
    design = design_from_params("many-to-one", **kw)
    result = sample_size("many-to-one", **kw)
    sim = simulated_power(design, result.n_per_group, reps=20000, seed=9)
    assert sim.power == pytest.approx(result.achieved_power, abs=3 * sim.standard_error)
    assert sim.power >= 0.8 - 3 * sim.standard_error
    assert power("many-to-one", result.n_per_group - 1, **kw).power < 0.8


def test_each_marginal_power_is_the_noncentral_t():
    # goal 'each': the least detectable comparison's power is scipy.stats.nct's tail beyond Dunnett's c
    n = 30
    c = dunnett_critical(3, 0.5, 3 * n + n - 4.0, 0.05, True)
    ncp = 4.0 / 8.0 / math.sqrt(2 / n)
    df = 4 * n - 4
    expected = stats.nct.sf(c, df, ncp) + stats.nct.cdf(-c, df, ncp)
    assert power("many-to-one", n, goal="each", **DOSES).power == pytest.approx(expected, rel=1e-9)


def test_one_treatment_is_the_two_sample_t():
    # k = 1: Dunnett's test is the pooled two-sample t-test (Cohen 1988 Table 2.4.1: d = 0.5 needs 64, from memory)
    assert sample_size("many-to-one", differences=[4.0], sd=8.0).n_per_group == 64


def test_sqrt_k_allocation_needs_fewer_units_in_total():
    # Dunnett (1955): a control of about sqrt(k) n maximises power for a given total (common practice)
    equal = sample_size("many-to-one", **DOSES)
    optimal = sample_size("many-to-one", control_allocation="sqrt-k", **DOSES)
    assert optimal.n_total < equal.n_total
    assert optimal.group_sizes[0] == math.ceil(math.sqrt(3) * optimal.n_per_group)


def test_bad_many_to_one_inputs():
    with pytest.raises(InvalidDesign, match="all 0"):
        design_from_params("many-to-one", differences=[0.0, 0.0], sd=1.0)
    with pytest.raises(InfeasibleDesign, match="point the other way"):
        sample_size("many-to-one", differences=[2.0, -1.0], sd=1.0, alternative="greater")
