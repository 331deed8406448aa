"""Monte Carlo power: reproducibility, standard error, chunking, outcome shapes, agreement with exact power."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.power import TTestIndPower, TTestPower

from registry.power import InvalidDesign, design_from_params, power_at
from registry.power.shapes import InvalidSimulation, draw, lognormal_parameters, negative_binomial_shape
from registry.power.simulate import simulated_power, standard_error
from registry.power.streams import UnitStreams


def _design(test="two-sample-t", distribution=None, baseline=None, **params):
    if distribution is not None:
        params["simulation"] = {"distribution": distribution, "reps": 1000,
                                **({"baseline_mean": baseline} if baseline is not None else {})}
    return design_from_params(test, **params)


def test_same_seed_same_answer_and_other_seed_differs():
    design = _design(d=0.6)
    first = simulated_power(design, 30, reps=3000, seed=11)
    assert first == simulated_power(design, 30, reps=3000, seed=11)
    assert first.power != simulated_power(design, 30, reps=3000, seed=12).power


def test_standard_error_formula():
    # Binomial SE sqrt(p(1-p)/reps): Morris, White & Crowther (2019) Stat Med 38, table 6
    result = simulated_power(_design(d=0.5), 20, reps=2500, seed=3)
    assert result.standard_error == pytest.approx(math.sqrt(result.power * (1 - result.power) / 2500), rel=1e-12)
    assert standard_error(0.5, 100) == pytest.approx(0.05)


def test_standard_error_matches_spread_across_seeds():
    # Independent check of the SE: the spread of 40 independent estimates (fact of the trade:
    # a sample SD of 40 draws lies within 30% of the true SD with probability about 0.98).
    design = _design(d=0.5)
    estimates = [simulated_power(design, 20, reps=400, seed=seed) for seed in range(40)]
    spread = float(np.std([e.power for e in estimates], ddof=1))
    typical = float(np.mean([e.standard_error for e in estimates]))
    assert 0.7 < spread / typical < 1.3


@pytest.mark.parametrize("test, params, distribution, baseline", [
    ("two-sample-t", dict(d=0.5), "normal", None),
    ("two-sample-t", dict(difference=4.0, sd=5.0, allocation_ratio=2.0), "lognormal", 6.0),
    ("two-sample-t", dict(difference=4.0, sd=5.0), "counts", 6.0),
    ("one-sample-t", dict(difference=2.0, sd=3.0), "lognormal", 5.0),
    ("paired-t", dict(d=0.4), "normal", None),
])
def test_chunking_does_not_change_the_answer(test, params, distribution, baseline):
    # Replicates come in blocks with streams of their own (registry.power.streams) and chunks are
    # whole blocks, so any chunk size gives the same random numbers to the same replicates.
    design = _design(test, distribution, baseline, **params)
    whole = simulated_power(design, 12, reps=1000, seed=5, distribution=distribution, chunk=1000)
    for chunk in (1, 300, 700):
        assert simulated_power(design, 12, reps=1000, seed=5, distribution=distribution, chunk=chunk) == whole


def test_progress_reports_every_chunk():
    calls = []
    # chunk=600 is rounded down to whole blocks of 256 replicates: 512 per chunk
    simulated_power(_design(d=0.5), 10, reps=1000, seed=1, chunk=600, progress=lambda done, total: calls.append(
        (done, total)))
    assert calls == [(512, 1000), (1000, 1000)]


@pytest.mark.parametrize("test, params, n, exact", [
    # exact power from statsmodels TTestIndPower / TTestPower at the same n
    ("two-sample-t", dict(d=0.6), 30, lambda: TTestIndPower().power(0.6, 30, 0.05)),
    ("two-sample-t", dict(d=0.6, allocation_ratio=2.0), 20, lambda: TTestIndPower().power(0.6, 20, 0.05, ratio=2)),
    ("two-sample-t", dict(d=0.5, alternative="greater"), 25,
     lambda: TTestIndPower().power(0.5, 25, 0.05, alternative="larger")),
    ("one-sample-t", dict(d=0.5), 20, lambda: TTestPower().power(0.5, 20, 0.05)),
    ("paired-t", dict(d=-0.5, alternative="less"), 15, lambda: TTestPower().power(-0.5, 15, 0.05,
                                                                                  alternative="smaller")),
])
def test_simulated_normal_power_agrees_with_exact(test, params, n, exact):
    result = simulated_power(_design(test, **params), n, reps=20_000, seed=2027)
    assert abs(result.power - exact()) < 3 * result.standard_error


def test_nearly_normal_lognormal_agrees_with_exact():
    # A lognormal with coefficient of variation 0.05 is close to normal, so the t-test keeps its
    # exact power (statsmodels TTestIndPower) within Monte Carlo error.
    design = _design(difference=0.5, sd=1.0, distribution="lognormal", baseline=20.0)
    result = simulated_power(design, 40, reps=20_000, seed=9, distribution="lognormal")
    assert abs(result.power - TTestIndPower().power(0.5, 40, 0.05)) < 3 * result.standard_error


def test_strongly_skewed_one_sample_outcome_moves_power():
    # Behaviour check: a one-sample t-test on a strongly right-skewed outcome (CV 1.25 under H1)
    # does not have its normal-theory power (common practice: the one-sample t is sensitive to skew).
    design = _design("one-sample-t", "lognormal", 6.0, difference=-2.0, sd=5.0)
    exact = power_at(design, 52).power
    result = simulated_power(design, 52, reps=10_000, seed=4, distribution="lognormal")
    assert abs(result.power - exact) > 5 * result.standard_error


def test_lognormal_draws_have_the_stated_mean_and_sd():
    rng = np.random.default_rng(0)
    values = draw(rng, "lognormal", np.array([10.0, 14.0]), 5.0, 400_000)
    assert values.min() > 0
    np.testing.assert_allclose(values.mean(axis=0), [10.0, 14.0], rtol=0.005)
    np.testing.assert_allclose(values.std(axis=0, ddof=1), [5.0, 5.0], rtol=0.02)
    # log-scale parameters against scipy.stats.lognorm's own mean and SD
    mu, sigma = lognormal_parameters(np.array([10.0]), 5.0)
    mean, var = stats.lognorm(s=float(sigma[0]), scale=math.exp(float(mu[0]))).stats(moments="mv")
    assert float(mean) == pytest.approx(10.0, rel=1e-12) and math.sqrt(float(var)) == pytest.approx(5.0, rel=1e-12)


def test_counts_draws_are_negative_binomial_with_the_stated_moments():
    rng = np.random.default_rng(1)
    values = draw(rng, "counts", np.array([4.0, 7.0]), 3.0, 400_000)
    assert np.all(values == np.round(values)) and values.min() >= 0
    np.testing.assert_allclose(values.mean(axis=0), [4.0, 7.0], rtol=0.01)
    np.testing.assert_allclose(values.var(axis=0, ddof=1), [9.0, 9.0], rtol=0.02)
    # shape k against scipy.stats.nbinom's moments (n = k, p = k / (k + m))
    k = float(negative_binomial_shape(4.0, 3.0))
    mean, var = stats.nbinom(k, k / (k + 4.0)).stats(moments="mv")
    assert float(mean) == pytest.approx(4.0) and float(var) == pytest.approx(9.0)


def test_counts_with_variance_equal_to_the_mean_are_poisson():
    rng = np.random.default_rng(2)
    values = draw(rng, "counts", np.array([9.0]), 3.0, 400_000)[:, 0]
    # Poisson: variance = mean, and P(X <= 5) from scipy.stats.poisson
    assert values.var(ddof=1) == pytest.approx(9.0, rel=0.02)
    assert np.mean(values <= 5) == pytest.approx(stats.poisson(9.0).cdf(5), abs=0.003)


@pytest.mark.parametrize("test, params, distribution, baseline, message", [
    ("two-sample-t", dict(d=0.5), "lognormal", None, "baseline_mean"),
    ("two-sample-t", dict(difference=-5.0, sd=2.0), "lognormal", 3.0, "positive means"),
    ("two-sample-t", dict(difference=2.0, sd=2.0), "counts", 3.0, "counts cannot have these means"),
])
def test_impossible_simulations_are_refused(test, params, distribution, baseline, message):
    design = _design(test, distribution, baseline, **params)
    with pytest.raises(InvalidSimulation, match=message):
        simulated_power(design, 10, reps=100, distribution=distribution)


def test_distribution_must_be_offered_by_the_family():
    with pytest.raises(InvalidDesign, match="not offered for paired-t"):
        _design("paired-t", "lognormal", 3.0, d=0.5)
    with pytest.raises(InvalidSimulation, match="offers normal"):
        simulated_power(_design("paired-t", d=0.5), 10, reps=100, distribution="lognormal")
    with pytest.raises(InvalidSimulation, match="reps"):
        simulated_power(_design(d=0.5), 10, reps=0)


SIM_SPEC = """\
id: sim-demo
title: Invented demo
status: draft
data_collection:
  start: 2027-03-01
design:
  test: one-sample-t
  effect:
    difference: -2.0
    sd: 5.0
  simulation:
    reps: 10000
    seed: 4
    distribution: {distribution}
    baseline_mean: 6.0
sample_size:
  per_group: {n}
"""


def _check(run, tmp_path, distribution, n):
    (tmp_path / "sim-demo.yaml").write_text(SIM_SPEC.format(distribution=distribution, n=n), encoding="utf-8")
    result = run("check", tmp_path, "--json")
    return result, result.json()["specs"][0]


def test_check_reports_simulated_power(run, tmp_path):
    result, spec = _check(run, tmp_path, "normal", 52)
    assert result.status == 0
    info = [f for f in spec["findings"] if f["kind"] == "simulated-power"]
    assert len(info) == 1 and info[0]["severity"] == "info" and "±" in info[0]["message"]
    sim = spec["simulated_power"]
    # normal outcome: the simulation agrees with the exact power (statsmodels TTestPower) within 3 SE
    assert abs(sim["power"] - TTestPower().power(-0.4, 52, 0.05)) < 3 * sim["standard_error"]
    assert not any(f["kind"] == "simulation-disagrees" for f in spec["findings"])


def test_check_sizes_a_skewed_outcome_by_simulating_the_test(run, tmp_path):
    # The normal-theory calculation says n = 52 reaches 0.8; with this skewed outcome the simulated
    # t-test does not, so the requirement is the simulation-verified n and 52 is underpowered.
    result, spec = _check(run, tmp_path, "lognormal", 52)
    assert result.status == 1 and spec["verdict"] == "underpowered"
    assert spec["simulated_power"]["power"] < 0.8 - 3 * spec["simulated_power"]["standard_error"]
    assert spec["achieved_power"] < 0.8  # the simulated power at the planned n
    assert spec["required_per_group"] > 52


def test_check_refuses_an_impossible_simulation(run, tmp_path):
    text = SIM_SPEC.format(distribution="counts", n=52).replace("sd: 5.0", "sd: 1.0")
    (tmp_path / "sim-demo.yaml").write_text(text, encoding="utf-8")
    result = run("check", tmp_path, "--json")
    assert result.status == 1
    finding = next(f for f in result.json()["specs"][0]["findings"] if f["field"] == "design.simulation")
    assert finding["severity"] == "error" and "counts cannot have these means" in finding["message"]


# --- common random numbers across n (registry.power.streams) ------------------------------------

class _Recording(UnitStreams):
    """UnitStreams that keeps every array it hands to the simulator."""

    def __init__(self, *args):
        super().__init__(*args)
        self.drawn = []

    def _draw(self, name, args, kwargs):
        out = super()._draw(name, args, kwargs)
        self.drawn.append(np.array(out, copy=True))
        return out


def _crn_design(test, params, distribution, baseline):
    if distribution is not None:
        params = {**params, "simulation": {"distribution": distribution, "reps": 1000, "baseline_mean": baseline}}
    return design_from_params(test, **params).as_tested()


_CRN_CASES = [
    ("two-sample-t", dict(difference=1.0, sd=2.0, allocation_ratio=1.5), "lognormal", 3.0),
    ("one-sample-t", dict(difference=1.0, sd=3.0), "counts", 4.0),
    ("welch-t", dict(difference=1.0, sd1=1.0, sd2=2.0), None, None),
    ("log-rank", dict(hr=0.6, median_control=10.0, accrual=12.0, follow_up=6.0), None, None),
    ("log-rank", dict(hr=0.6, event_probability=0.7), None, None),
    ("mann-whitney", dict(d=0.5, distribution="laplace"), None, None),
    ("signed-rank", dict(d=0.4, distribution="logistic"), None, None),
]


@pytest.mark.parametrize("test, params, distribution, baseline", _CRN_CASES)
def test_first_units_of_every_replicate_are_the_same_at_every_n(test, params, distribution, baseline):
    # Common random numbers (Glasserman 2004, section 4.2, from memory): the experiment at a larger n
    # is the one at n with more units per group, so every draw at n is the first columns of the
    # same draw at n + 5, for all 300 replicates.
    design = _crn_design(test, params, distribution, baseline)
    family = design.family
    shape = distribution or family.default_distribution(design)
    small, large = _Recording(4, 0, 300), _Recording(4, 0, 300)
    family.simulate(design, 12, 300, small, shape)
    family.simulate(design, 17, 300, large, shape)
    assert len(small.drawn) == len(large.drawn) >= 1
    for a, b in zip(small.drawn, large.drawn):
        assert a.shape[0] == b.shape[0] == 300 and a.shape[1] < b.shape[1]
        np.testing.assert_array_equal(a, b[:, :a.shape[1]])


@pytest.mark.parametrize("test, params, distribution, baseline", _CRN_CASES[:1] + _CRN_CASES[3:6])
def test_decisions_at_neighbouring_n_agree_for_most_replicates(test, params, distribution, baseline):
    # With independent draws two decisions with power near 0.8 differ in about 2 p (1 - p) = 0.3 of
    # the replicates (binomial arithmetic, common practice); with common random numbers adding one
    # unit per group changes few decisions.
    design = _crn_design(test, params, distribution, baseline)
    family = design.family
    shape = distribution or family.default_distribution(design)
    n = 40
    at_n = family.simulate(design, n, 1000, UnitStreams(8, 0, 1000), shape)
    at_next = family.simulate(design, n + 1, 1000, UnitStreams(8, 0, 1000), shape)
    independent = family.simulate(design, n + 1, 1000, UnitStreams(9, 0, 1000), shape)
    assert np.mean(at_n != at_next) < 0.1
    assert np.mean(at_n != independent) > 2 * np.mean(at_n != at_next)


@pytest.mark.parametrize("test, params, ns", [
    ("mann-whitney", dict(d=0.5, distribution="laplace"), range(40, 56)),
    ("log-rank", dict(hr=0.6, event_probability=0.7), range(70, 86)),
])
def test_power_curve_over_n_is_nearly_monotone_under_one_seed(test, params, ns):
    # 2,000 experiments per n: each estimate has SE about 0.009. With the same seed at every n the
    # curve may dip by much less than one SE; with a different seed per n the noise of the
    # difference (about 1.4 SE) makes dips of more than 0.005 likely over 15 steps.
    design = design_from_params(test, **params)
    shared = np.diff([simulated_power(design, n, reps=2000, seed=21).power for n in ns])
    fresh = np.diff([simulated_power(design, n, reps=2000, seed=21 + n).power for n in ns])
    assert shared.min() > -0.005
    assert fresh.min() < -0.005
    again = np.diff([simulated_power(design, n, reps=2000, seed=21).power for n in ns])
    np.testing.assert_array_equal(shared, again)  # bit for bit
