"""Two binary groups: exact power by enumerating every table, checked against scipy's own tests."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from registry.power import design_from_params, power, sample_size
from registry.power.binary_tables import exact_power, fisher_pvalues, rejects

SMALL = [(3, 3), (5, 5), (4, 7), (8, 8), (6, 9), (12, 10)]


def _scipy_rejects(test: str, a: int, b: int, n1: int, n2: int, alpha: float, alternative: str) -> bool:
    """scipy's decision on the table with a of n1 (group 1) and b of n2 (group 2) with the outcome.

    The table's first row is group 2, so scipy's odds ratio > 1 means p2 > p1 ('greater')."""
    table = [[b, n2 - b], [a, n1 - a]]
    if test == "fisher":
        return stats.fisher_exact(table, alternative=alternative).pvalue <= alpha
    if a + b in (0, n1 + n2):  # a margin of zero: scipy refuses, our test never rejects
        return False
    return stats.chi2_contingency(table, correction=(test == "corrected")).pvalue <= alpha


@pytest.mark.parametrize("n1, n2", SMALL)
@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"])
def test_fisher_p_values_on_every_table_match_scipy(n1, n2, alternative):
    # scipy.stats.fisher_exact: the reference implementation of Fisher's test, every table of small cases.
    ours = fisher_pvalues(np.arange(n1 + 1), np.arange(n2 + 1), n1, n2, alternative)
    expected = np.array([[stats.fisher_exact([[b, n2 - b], [a, n1 - a]], alternative=alternative).pvalue
                          for b in range(n2 + 1)] for a in range(n1 + 1)])
    np.testing.assert_allclose(ours, expected, rtol=1e-9, atol=1e-15)


@pytest.mark.parametrize("n1, n2", SMALL)
@pytest.mark.parametrize("test", ["pooled", "corrected"])
@pytest.mark.parametrize("alpha", [0.05, 0.1])
def test_z_decisions_on_every_table_match_chi2_contingency(n1, n2, test, alpha):
    # scipy.stats.chi2_contingency with correction=False (pooled z squared) and True (Yates).
    ours = rejects(test, np.arange(n1 + 1), np.arange(n2 + 1), n1, n2, alpha, "two-sided")
    expected = np.array([[_scipy_rejects(test, a, b, n1, n2, alpha, "two-sided") for b in range(n2 + 1)]
                         for a in range(n1 + 1)])
    assert (ours == expected).all()


def _scipy_power(test, n1, n2, p1, p2, alpha, alternative, floor=1e-13):
    """Power summed over scipy's decisions on every table, weighted by scipy's binomial pmf
    (tables below ``floor`` in either group left out: they change power by < (n1 + n2) floor)."""
    w1, w2 = stats.binom.pmf(np.arange(n1 + 1), n1, p1), stats.binom.pmf(np.arange(n2 + 1), n2, p2)
    return sum(w1[a] * w2[b] for a in np.flatnonzero(w1 > floor) for b in np.flatnonzero(w2 > floor)
               if _scipy_rejects(test, int(a), int(b), n1, n2, alpha, alternative))


@pytest.mark.parametrize("test, n1, n2, p1, p2, alternative", [
    ("fisher", 10, 10, 0.1, 0.7, "two-sided"),
    ("fisher", 12, 18, 0.2, 0.6, "greater"),
    ("fisher", 15, 9, 0.6, 0.2, "less"),
    ("pooled", 20, 30, 0.3, 0.6, "two-sided"),
    ("corrected", 25, 25, 0.2, 0.5, "two-sided"),
])
def test_enumerated_power_matches_a_sum_over_scipy_decisions(test, n1, n2, p1, p2, alternative):
    expected = _scipy_power(test, n1, n2, p1, p2, 0.05, alternative)
    assert exact_power(test, n1, n2, p1, p2, 0.05, alternative) == pytest.approx(expected, rel=1e-9)


def test_enumerated_power_is_the_level_under_the_null():
    # Under H0 the power of a test is its actual size; Fisher's test is conservative (common practice).
    size = exact_power("fisher", 20, 20, 0.3, 0.3, 0.05, "two-sided")
    assert 0.01 < size <= 0.05


@pytest.mark.parametrize("test, params", [
    # The continuity-corrected formula (Fleiss, Tytun & Ury 1980) gives 107 for p .4 vs .6, where the
    # corrected chi-square has power 0.795: one unit short.
    ("two-proportions", dict(p1=0.4, p2=0.6, continuity_correction=True)),
    # The pooled formula (Fleiss 1981, eq. 3.14) gives 93 for p .5 vs .7, where the chi-square has 0.799.
    ("two-proportions", dict(p1=0.5, p2=0.7)),
])
def test_reported_n_reaches_the_target_where_the_formula_falls_short(test, params):
    result = sample_size(test, **params)
    corrected = params.get("continuity_correction", False)
    scipy_test = "corrected" if corrected else "pooled"
    n, start = result.n_per_group, result.start_n
    p1, p2 = params["p1"], params["p2"]  # tables below 1e-8 left out: power off by < 2e-6, margins are 1e-3
    assert _scipy_power(scipy_test, start, start, p1, p2, 0.05, "two-sided", floor=1e-8) < 0.8 - 2e-6
    assert _scipy_power(scipy_test, n, n, p1, p2, 0.05, "two-sided", floor=1e-8) >= 0.8
    design = design_from_params(test, **params)
    assert float(design.family.power(design, [n - 1])[0]) < 0.8  # n - 1 does not reach it
    assert result.label == "exact"


@pytest.mark.parametrize("params", [dict(p1=0.1, p2=0.7), dict(p1=0.2, p2=0.6, alternative="greater"),
                                    dict(p1=0.2, p2=0.6, allocation_ratio=2.0)])
def test_fisher_exact_size_holds_for_scipy_and_n_minus_one_does_not(params):
    result = sample_size("fisher-exact", **params)
    n1, n2 = result.group_sizes
    alternative = params.get("alternative", "two-sided")
    assert _scipy_power("fisher", n1, n2, params["p1"], params["p2"], 0.05, alternative) >= 0.8
    design = design_from_params("fisher-exact", **params)
    assert float(design.family.power(design, [n1 - 1])[0]) < 0.8
    assert result.start_n is not None and result.start_method is not None


def test_fisher_simulation_with_scipy_agrees_with_the_enumeration():
    # A seeded simulation analysed table by table with scipy.stats.fisher_exact: within 3 standard errors.
    result = sample_size("fisher-exact", p1=0.1, p2=0.7)
    n = result.n_per_group
    rng = np.random.default_rng(20261201)
    reps = 2000
    x1, x2 = rng.binomial(n, 0.1, reps), rng.binomial(n, 0.7, reps)
    hits = sum(stats.fisher_exact([[b, n - b], [a, n - a]]).pvalue <= 0.05 for a, b in zip(x1, x2))
    se = math.sqrt(result.achieved_power * (1 - result.achieved_power) / reps)
    assert abs(hits / reps - result.achieved_power) <= 3 * se


def test_fisher_needs_more_units_than_the_uncorrected_z_test():
    # Fisher's test is conservative, so it needs at least the chi-square's n (common practice).
    assert (sample_size("fisher-exact", p1=0.2, p2=0.5).n_per_group
            >= sample_size("two-proportions", p1=0.2, p2=0.5).n_per_group)


def test_power_at_n_and_detectable_effect_for_fisher():
    at = power("fisher-exact", 30, p1=0.2, p2=0.6)
    assert at.power == pytest.approx(_scipy_power("fisher", 30, 30, 0.2, 0.6, 0.05, "two-sided"), rel=1e-9)
    assert at.minimum_detectable_natural["p2"] > 0.2


# ------------------------------------------------------------------ sizes too large to enumerate


def _hand_over_n(test, p):
    from registry.power.binary_tables import EXACT_CELLS, enumeration_cells

    n = 10
    while enumeration_cells(test, n + 1, n + 1, p, p) <= EXACT_CELLS:
        n = max(n + 1, int(n * 1.02))
    return n


@pytest.mark.parametrize("family, test, extra, p1", [
    ("fisher-exact", "fisher", {}, 0.5),
    ("fisher-exact", "fisher", {}, 0.1),
    ("two-proportions", "pooled", {}, 0.5),
    ("two-proportions", "corrected", {"continuity_correction": True}, 0.1),
])
def test_the_approximation_agrees_with_enumeration_where_it_takes_over(family, test, extra, p1):
    # the note's claim: within about 0.003 near 80% power at the hand-over size (the exact sums are
    # checked against scipy.stats.fisher_exact and chi2_contingency above)
    from scipy.optimize import brentq

    from registry.power.catalog import get_family

    n = _hand_over_n(test, p1)
    fam = get_family(family)
    approx = lambda p2: float(fam.power(design_from_params(family, p1=p1, p2=p2, **extra), np.array([n + 40]))[0])
    p2 = brentq(lambda q: approx(q) - 0.8, p1 + 1e-6, min(0.999, p1 + 0.5))
    design = design_from_params(family, p1=p1, p2=p2, **extra)
    assert not fam.exact_at(design, n + 40)
    assert abs(approx(p2) - exact_power(test, n + 40, n + 40, p1, p2, 0.05, "two-sided")) <= 0.003


@pytest.mark.parametrize("family, params, large_n", [
    ("fisher-exact", dict(p1=0.5, p2=0.52), 20_000),
    ("two-proportions", dict(p1=0.5, p2=0.51), 60_000),
])
def test_very_large_binary_designs_are_sized_by_the_approximation_and_say_so(family, params, large_n):
    # formerly a scan over every n took many minutes
    result = sample_size(family, **params)
    assert result.n_per_group > 5000 and result.label == "normal approximation"
    assert any("enumerating every table would take too long" in note for note in result.notes)
    at = power(family, large_n, **params)
    assert any("enumerating every table would take too long" in note for note in at.notes)


def test_large_exact_designs_scan_a_window_around_the_crossing():
    result = sample_size("two-proportions", p1=0.3, p2=0.34)
    n = result.n_per_group
    assert result.label == "exact" and any("around the crossing found by bisection" in x for x in result.notes)
    # the answer reaches the target and n - 1 does not, by direct enumeration
    assert exact_power("pooled", n, n, 0.3, 0.34, 0.05, "two-sided") >= 0.8
    assert exact_power("pooled", n - 1, n - 1, 0.3, 0.34, 0.05, "two-sided") < 0.8
