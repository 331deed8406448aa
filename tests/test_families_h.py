"""Mixed designs (blocks, split plots, nested clusters) against statsmodels and seeded simulations."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy import stats
from statsmodels.stats.anova import anova_lm

from registry.power import InvalidDesign, design_from_params, power, sample_size
from registry.power.mixed_design import _two_way_interaction_f, split_plot_pvalues
from registry.power.simulate import simulated_power

SPLIT = dict(layout="split-plot", means=[[10.0, 11.0, 12.0], [11.0, 12.0, 15.0]], sd_residual=1.5, sd_whole_plot=1.0)
NESTED = dict(layout="nested", means=[10.0, 12.0], sd_residual=3.0, sd_cluster=1.0, cluster_size=4)


def test_block_f_matches_anova_lm():
    # randomised complete blocks: treatment F of OLS y ~ treatment + block (statsmodels anova_lm)
    rng = np.random.default_rng(1)
    y = rng.normal(size=(1, 6, 3)) + rng.normal(size=(1, 6, 1)) + np.array([0.0, 0.4, 0.9])
    frame = pd.DataFrame([(b, t, y[0, b, t]) for b in range(6) for t in range(3)], columns=["b", "t", "y"])
    table = anova_lm(smf.ols("y ~ C(t) + C(b)", data=frame).fit())
    assert _two_way_interaction_f(y, 6, 3)[0] == pytest.approx(table.loc["C(t)", "PR(>F)"], rel=1e-8)


@pytest.mark.parametrize("term", ["whole-plot", "subplot", "interaction"])
def test_split_plot_f_matches_anova_lm_strata(term):
    # split plot in blocks: subplot terms against the residual of OLS with block x whole-plot fitted,
    # the whole-plot term against the block x whole-plot mean square (Montgomery 2017, ch. 14; statsmodels)
    rng = np.random.default_rng(2)
    b, a, c = 5, 2, 3
    y = (rng.normal(size=(1, b, 1, 1)) + rng.normal(size=(1, b, a, 1)) + rng.normal(size=(1, b, a, c))
         + np.array([[0.0, 0.3, 0.6], [0.5, 0.7, 1.4]]))
    rows = [(i, j, k, y[0, i, j, k]) for i in range(b) for j in range(a) for k in range(c)]
    frame = pd.DataFrame(rows, columns=["blk", "A", "B", "y"])
    table = anova_lm(smf.ols("y ~ C(blk) + C(A) + C(blk):C(A) + C(B) + C(A):C(B)", data=frame).fit())
    if term == "whole-plot":
        ms = table["sum_sq"] / table["df"]
        f = ms["C(A)"] / ms["C(blk):C(A)"]
        expected = stats.f.sf(f, table.loc["C(A)", "df"], table.loc["C(blk):C(A)", "df"])
    else:
        expected = table.loc["C(B)" if term == "subplot" else "C(A):C(B)", "PR(>F)"]
    assert split_plot_pvalues(y, term)[0] == pytest.approx(expected, rel=1e-6)


def test_nested_treatment_test_is_the_mixed_model_wald_test():
    # clusters nested in treatment: statsmodels MixedLM (REML, random cluster intercepts) on balanced data
    # gives the treatment estimate and standard error of the t-test on cluster means
    rng = np.random.default_rng(5)
    t, k, m = 2, 8, 4
    cluster = rng.normal(0, 1.0, size=(t, k, 1))
    y = np.array([10.0, 12.0])[:, None, None] + cluster + rng.normal(0, 3.0, size=(t, k, m))
    rows = [(i, f"{i}-{j}", y[i, j, r]) for i in range(t) for j in range(k) for r in range(m)]
    frame = pd.DataFrame(rows, columns=["treat", "cage", "y"])
    fit = smf.mixedlm("y ~ treat", frame, groups=frame["cage"]).fit(reml=True)
    means = y.mean(axis=2)
    se = np.sqrt(means.var(axis=1, ddof=1).mean() * 2 / k)
    assert fit.fe_params["treat"] == pytest.approx(means[1].mean() - means[0].mean(), rel=1e-6)
    assert fit.bse_fe["treat"] == pytest.approx(se, rel=1e-3)


@pytest.mark.parametrize("kw", [
    NESTED,
    dict(layout="block", means=[10.0, 12.0, 13.0], sd_residual=2.0),
    dict(SPLIT, term="whole-plot"),
    dict(layout="split-plot", means=[[10.0, 11.0, 12.0], [11.0, 12.0, 13.0]], sd_residual=2.5, sd_whole_plot=1.0,
         term="subplot"),
    dict(SPLIT, term="interaction"),
])
def test_size_confirmed_by_simulated_stratum_f(kw):
    design = design_from_params("mixed-design", **kw)
    result = sample_size("mixed-design", **kw)
    sim = simulated_power(design, result.n_per_group, reps=10000, seed=4)
    assert sim.power == pytest.approx(result.achieved_power, abs=3 * sim.standard_error)
    assert power("mixed-design", result.n_per_group - 1, **kw).power < 0.8


def test_one_unit_per_cluster_is_the_one_way_anova_on_cluster_means():
    # with cluster means as the units, the nested design is the one-way ANOVA with SD sqrt(sc^2 + se^2/m)
    ours = sample_size("mixed-design", **NESTED).n_per_group
    sd = (1.0**2 + 3.0**2 / 4) ** 0.5
    assert ours == sample_size("one-way-anova", means=[10.0, 12.0], sd=sd).n_per_group


@pytest.mark.parametrize("kw, message", [
    (dict(layout="nested", means=[1.0, 2.0], sd_residual=1.0), "sd_cluster"),
    (dict(layout="split-plot", means=[1.0, 2.0], sd_residual=1.0, sd_whole_plot=1.0, term="subplot"), "two rows"),
    (dict(layout="block", means=[1.0, 2.0], sd_residual=1.0, term="subplot"), "applies to split-plot"),
    (dict(layout="block", means=[2.0, 2.0], sd_residual=1.0), "no treatment effect"),
])
def test_bad_mixed_inputs(kw, message):
    with pytest.raises(InvalidDesign, match=message):
        design_from_params("mixed-design", **kw)
