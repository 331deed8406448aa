"""Factorial ANOVA against statsmodels (power and anova_lm) and a seeded simulation."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.power import FTestAnovaPower, ftest_power

from registry.power import InvalidDesign, design_from_params, power, sample_size
from registry.power.factorial_anova import term_f_pvalues

TWO_BY_TWO = [{"name": "genotype", "levels": 2}, {"name": "diet", "levels": 2}]
THREE_BY_FOUR = [{"name": "A", "levels": 3}, {"name": "B", "levels": 4}]
INTERACTION = dict(factors=TWO_BY_TWO, primary="genotype:diet", means=[10.0, 10.0, 10.0, 14.0], sd=4.0)


@pytest.mark.parametrize("factors, primary, f, n, df1", [
    # statsmodels ftest_power(effect_size, df2, df1, alpha, ncc) with ncc = cells - df1, so that its
    # lambda = f^2 (df1 + df2 + ncc) is f^2 N (note its argument order: denominator df first)
    (TWO_BY_TWO, "genotype:diet", 0.25, 32, 1),
    (THREE_BY_FOUR, "A", 0.25, 14, 2),
    (THREE_BY_FOUR, "A:B", 0.2, 29, 6),
    (THREE_BY_FOUR + [{"name": "C", "levels": 2}], "A:B:C", 0.3, 9, 6),
])
def test_term_power_matches_statsmodels(factors, primary, f, n, df1):
    cells = int(np.prod([x["levels"] for x in factors]))
    ours = power("factorial-anova", n, factors=factors, primary=primary, f={primary: f}).power
    reference = ftest_power(f, cells * n - cells, df1, 0.05, ncc=cells - df1)
    assert ours == pytest.approx(reference, rel=1e-9)


@pytest.mark.parametrize("levels, f", [(3, 0.25), (4, 0.4)])
def test_one_factor_is_the_one_way_anova(levels, f):
    # statsmodels FTestAnovaPower (one-way, k groups) and our one-way-anova family
    factors = [{"name": "dose", "levels": levels}]
    n = sample_size("factorial-anova", factors=factors, primary="dose", f={"dose": f}).n_per_group
    assert n == sample_size("one-way-anova", f=f, groups=levels).n_per_group
    ours = power("factorial-anova", n, factors=factors, primary="dose", f={"dose": f}).power
    assert ours == pytest.approx(FTestAnovaPower().power(f, levels * n, 0.05, k_groups=levels), rel=1e-9)


def test_cohens_f_from_cell_means():
    # balanced 2 x 2 decomposition by hand (common practice): a single raised cell (+4 of SD 4) puts
    # +-1 in every term component, so each term's f is 1/4
    design = design_from_params("factorial-anova", **INTERACTION)
    for term in ("genotype", "diet", "genotype:diet"):
        assert design.effect.cohens_f(term) == pytest.approx(0.25, rel=1e-12)


@pytest.mark.parametrize("term", ["A", "B", "A:B"])
def test_simulated_f_matches_anova_lm(term):
    # our vectorized term F test against statsmodels ols + anova_lm on one balanced dataset
    rng = np.random.default_rng(8)
    data = rng.normal(size=(1, 3, 4, 5)) + np.arange(12).reshape(1, 3, 4, 1) * 0.1
    a, b, r = np.meshgrid(range(3), range(4), range(5), indexing="ij")
    frame = pd.DataFrame({"y": data[0].ravel(), "A": a.ravel(), "B": b.ravel()})
    table = anova_lm(smf.ols("y ~ C(A) * C(B)", data=frame).fit(), typ=2)
    row = {"A": "C(A)", "B": "C(B)", "A:B": "C(A):C(B)"}[term]
    axes = {"A": (0,), "B": (1,), "A:B": (0, 1)}[term]
    assert term_f_pvalues(data, axes)[0] == pytest.approx(table.loc[row, "PR(>F)"], rel=1e-8)


@pytest.mark.parametrize("kw", [INTERACTION, dict(factors=THREE_BY_FOUR, primary="A:B", f={"A:B": 0.3})])
def test_size_confirmed_by_simulated_factorial_anova(kw):
    design = design_from_params("factorial-anova", **kw)
    result = sample_size("factorial-anova", **kw)
    from registry.power.simulate import simulated_power
    sim = simulated_power(design, result.n_per_group, reps=10000, seed=21)
    assert sim.power == pytest.approx(result.achieved_power, abs=3 * sim.standard_error)
    assert power("factorial-anova", result.n_per_group - 1, **kw).power < 0.8


@pytest.mark.parametrize("kw, message", [
    (dict(factors=TWO_BY_TWO, primary="diet:genotype", f={"diet:genotype": 0.2}), "not a term"),
    (dict(factors=TWO_BY_TWO, primary="diet", means=[1.0, 2.0, 3.0], sd=1.0), "lists 3 cells"),
    (dict(factors=TWO_BY_TWO, primary="genotype:diet", means=[1.0, 2.0, 1.0, 2.0], sd=1.0), "no genotype:diet"),
    (dict(factors=TWO_BY_TWO, primary="diet", f={"genotype": 0.2}), "primary term"),
])
def test_bad_factorial_inputs(kw, message):
    with pytest.raises(InvalidDesign, match=message):
        design_from_params("factorial-anova", **kw)


NEW_FAMILIES = ["ancova", "crossover-2x2", "mcnemar", "poisson-rate", "negative-binomial-rate", "many-to-one",
                "factorial-anova", "repeated-measures", "logistic-regression", "mixed-design"]


@pytest.mark.parametrize("test", NEW_FAMILIES)
def test_new_template_passes_check(tmp_path, run, test):
    # a new user's first step: the template of every family is a valid, adequately sized spec
    assert run("new", "first-try", "--dir", tmp_path, "--test", test).status == 0
    result = run("check", tmp_path / "first-try.yaml", "--json", "--no-history")
    spec = result.json()["specs"][0]
    assert result.status == 0, spec["findings"]
    assert spec["required_per_group"] == spec["planned_per_group"]
