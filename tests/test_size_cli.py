"""``prespec size``: answers checked against statsmodels, JSON keys, --n mode and exit-2 errors."""

from __future__ import annotations

import json
import math

import pytest
from statsmodels.stats.power import TTestIndPower, TTestPower

from registry.checks import CAUTION

SAMPLE_KEYS = {"test", "n_per_group", "n_total", "achieved_power", "target_power", "alpha", "alternative",
               "effect_size", "symbol", "group_sizes", "enrolment_per_group", "enrolment_total", "unit", "method",
               "reference", "events", "notes", "simulation", "caution", "alpha_per_test", "design_effect",
               "individual_n_per_group", "cluster_size", "clusters_per_group", "label", "start_n", "start_method",
               "verification"}
POWER_KEYS = {"test", "n_per_group", "n_total", "power", "alpha", "alternative", "target_power", "effect_size",
              "symbol", "minimum_detectable_effect", "minimum_detectable_natural", "group_sizes", "unit", "events",
              "notes", "simulation", "caution", "alpha_per_test", "design_effect", "effective_n_per_group",
              "formula_power", "verification"}


def _smallest_two_sample(d, alpha=0.05, power=0.8, ratio=1.0, alternative="two-sided"):
    # statsmodels TTestIndPower solves for a real n1; the smallest whole n1 is its ceiling.
    return math.ceil(TTestIndPower().solve_power(effect_size=d, nobs1=None, alpha=alpha, power=power, ratio=ratio,
                                                 alternative=alternative) - 1e-9)


def test_json_keys_and_answer(run):
    result = run("size", "two-sample-t", "--d", "0.5", "--json")
    assert result.status == 0, result.err
    data = result.json()
    assert set(data) == SAMPLE_KEYS
    # statsmodels TTestIndPower; also Cohen (1988) Table 2.4.1: d = 0.5, power 0.80 -> 64 per group (from memory)
    assert data["n_per_group"] == _smallest_two_sample(0.5) == 64
    assert data["n_total"] == 128 and data["group_sizes"] == [64, 64]
    assert data["achieved_power"] >= 0.8
    assert data["simulation"] is None and data["caution"] == CAUTION


@pytest.mark.parametrize("argv, expected", [
    # (options, statsmodels TTestIndPower arguments)
    (["--difference", "4", "--sd", "5"], dict(d=0.8)),
    (["--d", "0.8", "--alpha", "0.01", "--power", "0.9"], dict(d=0.8, alpha=0.01, power=0.9)),
    (["--d", "0.6", "--ratio", "2"], dict(d=0.6, ratio=2.0)),
    (["--d", "0.4", "--alternative", "greater"], dict(d=0.4, alternative="larger")),
    (["--d", "-0.4", "--alternative", "less"], dict(d=-0.4, alternative="smaller")),
])
def test_two_sample_matches_statsmodels(run, argv, expected):
    data = run("size", "two-sample-t", *argv, "--json").json()
    assert data["n_per_group"] == _smallest_two_sample(**expected)
    ratio = expected.get("ratio", 1.0)
    assert data["group_sizes"] == [data["n_per_group"], math.ceil(ratio * data["n_per_group"])]


def test_attrition_through_param(run):
    data = run("size", "two-sample-t", "--d", "0.5", "--param", "attrition=0.1", "--json").json()
    # enrolment = ceil(n / (1 - attrition)) (docs/spec-format.md)
    assert data["n_per_group"] == 64 and data["enrolment_per_group"] == math.ceil(64 / 0.9)
    assert data["enrolment_total"] == 2 * math.ceil(64 / 0.9)


def test_one_group_designs_count_units(run):
    data = run("size", "one-sample-t", "--d", "0.5", "--json").json()
    # statsmodels TTestPower (one-sample t)
    expected = math.ceil(TTestPower().solve_power(effect_size=0.5, nobs=None, alpha=0.05, power=0.8))
    assert data["n_per_group"] == data["n_total"] == expected
    assert data["group_sizes"] == [expected] and data["unit"] == "units"


def test_paired_pairs_from_two_sds_and_correlation(run):
    result = run("size", "paired-t", "--difference", "10", "--param", "sd1=30", "--param", "sd2=30",
                 "--param", "correlation=0.7", "--json")
    data = result.json()
    dz = 10 / math.sqrt(30**2 + 30**2 - 2 * 0.7 * 30 * 30)  # SD of differences, Cohen (1988) 2.3.5
    assert data["n_per_group"] == data["n_total"] == math.ceil(TTestPower().solve_power(dz, None, 0.05, 0.8))
    assert data["unit"] == "pairs"
    human = run("size", "paired-t", "--difference", "10", "--param", "sd1=30", "--param", "sd2=30",
                "--param", "correlation=0.7")
    assert f"{data['n_per_group']} pairs" in human.out


def test_power_at_n(run):
    data = run("size", "two-sample-t", "--d", "0.5", "--n", "40", "--json").json()
    assert set(data) == POWER_KEYS
    # statsmodels TTestIndPower.power and solve_power(effect_size=None)
    assert data["power"] == pytest.approx(TTestIndPower().power(0.5, 40, 0.05), rel=1e-9)
    mde = TTestIndPower().solve_power(effect_size=None, nobs1=40, alpha=0.05, power=0.8)
    assert data["minimum_detectable_effect"] == pytest.approx(mde, rel=1e-6)


def test_power_at_n_natural_units(run):
    data = run("size", "two-sample-t", "--difference", "4", "--sd", "5", "--n", "40", "--json").json()
    mde = TTestIndPower().solve_power(effect_size=None, nobs1=40, alpha=0.05, power=0.8)
    assert data["minimum_detectable_natural"]["difference"] == pytest.approx(5 * mde, rel=1e-6)


def test_human_output(run):
    result = run("size", "two-sample-t", "--difference", "4", "--sd", "5", "--param", "attrition=0.1")
    assert result.status == 0
    for text in ("Sample size: Two-sample t-test", "d = 0.8", "26 per group x 2 groups = 52 in total",
                 "29 per group x 2 groups = 58 in total, for 10% attrition", "method", "reference", "Cohen"):
        assert text in result.out
    assert result.out.rstrip().endswith(f"Note: {CAUTION}")


def test_simulation_is_reported_and_reproducible(run):
    argv = ("size", "two-sample-t", "--d", "0.8", "--simulate", "4000", "--seed", "7", "--json")
    first, second = run(*argv).json(), run(*argv).json()
    assert first == second
    sim = first["simulation"]
    assert sim["reps"] == 4000 and sim["seed"] == 7 and sim["distribution"] == "normal"
    # Monte Carlo estimate vs the exact power (statsmodels) within 4 standard errors
    exact = TTestIndPower().power(0.8, first["n_per_group"], 0.05)
    assert abs(sim["power"] - exact) < 4 * sim["standard_error"]


def test_skewed_simulation_from_cli(run):
    result = run("size", "two-sample-t", "--difference", "4", "--sd", "5", "--distribution", "lognormal",
                 "--param", "baseline_mean=10", "--simulate", "1000", "--json")
    assert result.status == 0, result.err
    assert result.json()["simulation"]["distribution"] == "lognormal"


@pytest.mark.parametrize("argv, message", [
    (["two-sampl-t", "--d", "0.5"], "did you mean 'two-sample-t'?"),
    (["two-sample-t", "--d", "0"], "d must not be 0"),
    (["two-sample-t", "--d", "0.5", "--alternative", "less"], "alternative 'less' tests for a decrease"),
    (["two-sample-t", "--d", "0.5", "--power", "0.01"], "must be greater than alpha"),
    (["two-sample-t", "--d", "0.5", "--alpha", "5%"], "write 0.05 for 5%"),
    (["two-sample-t", "--d", "abc"], "must be a number; got 'abc'"),
    (["two-sample-t", "--d", "0.5", "--param", "sdd=3"], "unknown parameter 'sdd'"),
    (["two-sample-t", "--p1", "0.5"], "unknown parameter 'p1'"),
    (["two-sample-t", "--d", "0.5", "--param", "d=0.4"], "d is given twice"),
    (["two-sample-t", "--d", "0.5", "--param", "oops"], "expected NAME=VALUE"),
    (["two-sample-t"], "give the effect as difference with sd"),
    (["two-sample-t", "--sd", "5"], "difference is missing"),
    (["two-sample-t", "--d", "0.5", "--n", "1"], "n must be at least 2"),
    (["two-sample-t", "--d", "0.0001"], "too small"),
    (["two-sample-t", "--d", "0.5", "--simulate", "10"], "--simulate REPS must be between 100"),
    (["two-sample-t", "--d", "0.5", "--distribution", "lognormal"], "baseline_mean"),
    (["two-sample-t", "--d", "0.5", "--distribution", "gamma"], "choose one of normal, lognormal, counts"),
    (["paired-t", "--d", "0.5", "--distribution", "counts"], "not offered for paired-t"),
    (["two-sample-t", "--difference", "1", "--sd", "1", "--distribution", "counts",
      "--param", "baseline_mean=5"], "counts cannot have these means and this SD"),
    (["two-sample-t", "--d", "0.5", "--param", "baseline_mean=5"], "add --simulate"),
])
def test_bad_requests_exit_2_with_a_message(run, argv, message):
    result = run("size", *argv)
    assert result.status == 2
    assert message in result.err
    assert "Traceback" not in result.err and result.out == ""


# ------------------------------------------------------------------ structured fields and labels


def _rm(run, *extra):
    return run("size", "repeated-measures", "--means", "20,22,23,23", "--sd", "5", "--correlation", "0.6",
               *extra, "--json").json()


def test_repeated_measures_labels_follow_the_test(run):
    from scipy import stats

    # compound symmetry, uncorrected F: the statistic is exactly noncentral F with
    # lambda = n sum_j (mu_j - mubar)^2 / (sd^2 (1 - rho)) (Winer, Statistical Principles in
    # Experimental Design, 1971; common practice), df (m - 1, (n - 1)(m - 1))
    exact = _rm(run, "--sphericity", "none")
    n = exact["n_per_group"]
    lam = lambda k: k * 6.0 / (25 * 0.4)  # deviations -2, 0, 1, 1 from the mean 22
    power = lambda k: stats.ncf.sf(stats.f.isf(0.05, 3, 3 * (k - 1)), 3, 3 * (k - 1), lam(k))
    assert exact["label"] == "exact"
    assert exact["achieved_power"] == pytest.approx(power(n), rel=1e-9) and power(n) >= 0.8 > power(n - 1)
    # the Greenhouse-Geisser test and ar1 without sphericity are approximations and say so
    assert _rm(run)["label"].startswith("approximation: Greenhouse-Geisser")
    assert "approximation" in _rm(run, "--structure", "ar1")["label"]
    # the change score's t-test is exact whatever the structure
    assert _rm(run, "--structure", "ar1", "--term", "change")["label"] == "exact"


def test_text_choices_are_not_read_as_numbers(run):
    # 'interaction' holds the letters 'int': the option must still take the term's words
    payload = run("size", "repeated-measures", "--means", "20,22,23,23;18,20,21,22", "--sd", "5",
                  "--correlation", "0.6", "--term", "between", "--json").json()
    assert payload["label"] == "exact" and payload["n_total"] == 2 * payload["n_per_group"]


@pytest.mark.parametrize("argv", [
    ("factorial-anova", "--factors", '[{"name": "diet", "levels": 2}, {"name": "strain", "levels": 3}]',
     "--primary", "diet", "--param", 'f={"diet": 0.25}'),
    ("factorial-anova", "--param", 'factors=[{"name": "diet", "levels": 2}, {"name": "strain", "levels": 3}]',
     "--primary", "diet", "--param", 'f={"diet": 0.25}'),
])
def test_nested_fields_from_the_command_line(run, argv):
    from scipy import stats

    payload = run("size", *argv, "--json").json()
    # Cohen (1988) section 8.3: lambda = f^2 N for the F test of a main effect with df (1, N - cells),
    # evaluated here with scipy's noncentral F
    n = payload["n_per_group"]
    power = lambda k: stats.ncf.sf(stats.f.isf(0.05, 1, 6 * k - 6), 1, 6 * k - 6, 0.0625 * 6 * k)
    assert power(n) >= 0.8 > power(n - 1) and payload["n_total"] == 6 * n
    human = run("size", *argv).out
    assert "diet (2 levels) x strain (3 levels)" in human and "F test, no sides" in human


def test_json_values_that_are_not_json_get_a_clear_message(run):
    result = run("size", "factorial-anova", "--factors", '[{"name": "diet"')
    assert result.status == 2 and "is read as JSON" in result.err and "Traceback" not in result.err
    result = run("size", "factorial-anova", "--param", "factors={oops}")
    assert result.status == 2 and "factors: a value starting with '{'" in result.err


@pytest.mark.parametrize("family", ["one-way-anova", "factorial-anova", "mixed-design", "repeated-measures"])
def test_f_tests_are_not_called_two_sided(run, family):
    from registry.power import family_names
    from registry.power.catalog import get_family as lookup

    assert family in family_names()
    example = lookup(family).example
    params = [f"{k}={json.dumps(v) if isinstance(v, (list, dict)) else v}" for k, v in example.items()]
    out = run("size", family, *[arg for p in params for arg in ("--param", p)]).out
    (line,) = [line for line in out.splitlines() if line.strip().startswith("assumptions")]
    assert "no sides" in line and "two-sided" not in line


def test_values_near_the_edges_are_printed_as_given(run):
    # a rounded echo ("alpha (1)", "target power 1") would contradict the rule it explains
    result = run("size", "two-sample-t", "--d", "0.5", "--alpha", "0.9999999")
    assert result.status == 2 and "alpha (0.9999999)" in result.err
    assert "target power 0.999999999," in run("size", "two-sample-t", "--d", "0.5", "--power", "0.999999999").out

