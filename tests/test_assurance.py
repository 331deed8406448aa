"""Assurance against its closed form, an independent numerical integral and a seeded simulation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate as quad, special, stats

from registry.power import InfeasibleDesign, InvalidDesign, design_from_params
from registry.power.assurance import assurance_of, design_assurance, integrate

Z975 = float(-special.ndtri(0.025))


@pytest.mark.parametrize(
    "mean, prior_sd, sigma, n, expected_z",
    [
        # O'Hagan, Stevens & Campbell (2005), eq. for a normal prior and known SD: with
        # se = sigma sqrt(2 / n), assurance = Phi((m - z se) / sqrt(se^2 + s^2)) (closed form)
        (4.0, 2.0, 5.0, 26, None),
        (4.0, 0.5, 5.0, 64, None),
        (1.0, 3.0, 2.0, 10, None),
        (-2.0, 1.0, 4.0, 40, None),
        # a prior 20 times wider than the power curve (the step follows the curve) and one 30 times
        # narrower (the fewest intervals apply), same closed form
        (0.5, 2.0, 1.0, 800, None),
        (3.0, 0.05, 5.0, 12, None),
    ],
)
def test_quadrature_matches_the_closed_form_for_a_normal_prior_and_known_sd(mean, prior_sd, sigma, n, expected_z):
    se = sigma * math.sqrt(2 / n)
    sign = 1 if mean > 0 else -1

    def z_test_power(es):  # directional one-sided z-test at alpha / 2 = 0.025, standardized effects
        return special.ndtr(sign * es * sigma / se - Z975)

    closed = float(special.ndtr((sign * mean - Z975 * se) / math.sqrt(se**2 + prior_sd**2)))
    assert integrate(z_test_power, mean, prior_sd, sigma, None, se / sigma) == pytest.approx(closed, abs=1e-9)


def test_t_test_assurance_approaches_the_closed_form_at_large_n():
    # with many units the t-test is the z-test, so the same closed form holds (O'Hagan et al. 2005)
    design = design_from_params("two-sample-t", difference=1.0, sd=5.0,
                                assurance={"effect_prior": {"mean": 1.0, "sd": 0.4}})
    n = 600
    se = 5.0 * math.sqrt(2 / n)
    closed = float(special.ndtr((1.0 - Z975 * se) / math.sqrt(se**2 + 0.4**2)))
    assert assurance_of(design, n) == pytest.approx(closed, rel=2e-3)


def test_sd_prior_matches_an_independent_double_integral():
    # reference: scipy.integrate.dblquad over delta and the chi-square variable of the exact t power
    design = design_from_params("two-sample-t", difference=4.0, sd=5.0,
                                assurance={"effect_prior": {"mean": 4.0, "sd": 1.5}, "sd_prior": {"df": 9}})
    n = 26
    df_t = 2 * n - 2
    crit = float(stats.t.ppf(0.975, df_t))

    def integrand(x, delta):
        sigma = 5.0 * math.sqrt(9 / x)
        ncp = delta / sigma / math.sqrt(2 / n)
        return float(stats.nct.sf(crit, df_t, ncp)) * stats.chi2.pdf(x, 9) * stats.norm.pdf(delta, 4.0, 1.5)

    reference, _ = quad.dblquad(integrand, 4.0 - 12 * 1.5, 4.0 + 12 * 1.5, 1e-9, 80.0, epsabs=1e-9)
    assert assurance_of(design, n) == pytest.approx(reference, abs=1e-5)


@pytest.mark.parametrize("df", [1, 2, 4, 5, 9, 24, 200, 5000])
def test_sd_prior_quadrature_matches_adaptive_quadrature_to_1e7(df):
    # reference: scipy.integrate.quad on the chi-square probability scale (adaptive, to 1e-12), of the
    # exact directional t power at a known effect; the hardest corner is few df with a large n, where
    # the power changes within a sliver of that scale
    from registry.power.assurance import _directional

    worst = 0.0
    for n in (4, 40, 1000):
        for difference in (2.0, 12.0, 24.0):
            design = design_from_params("two-sample-t", difference=difference, sd=12.0,
                                        assurance={"sd_prior": {"df": df}})
            tested, family = _directional(design.as_tested()), design.family

            def power_at(es, n=n, tested=tested, family=family):
                return family.power(tested, np.full(np.shape(es), float(n)), es)

            def at_probability(p, difference=difference, power_at=power_at):
                chi = 2 * special.gammaincinv(df / 2, p) if p < 0.5 else special.chdtri(df, 1 - p)
                return float(power_at(np.array([difference * math.sqrt(chi / df) / 12.0]))[0])

            reference, _ = quad.quad(at_probability, 0, 1, epsabs=1e-13, epsrel=1e-12, limit=2000,
                                     points=[1e-6, 1e-4, 1e-3, 0.01, 0.05, 0.2, 0.5, 0.8, 0.95, 0.99])
            ours = integrate(power_at, difference, 0.0, 12.0, df, math.sqrt(2 / n))
            worst = max(worst, abs(ours - reference))
    assert worst < 1e-7


def test_assurance_matches_a_seeded_simulation_of_the_t_test():
    # draw (delta, sigma) from the priors, simulate the experiment, analyse with scipy's t-test
    design = design_from_params("two-sample-t", difference=4.0, sd=5.0,
                                assurance={"effect_prior": {"mean": 4.0, "sd": 2.0}, "sd_prior": {"df": 11}})
    n, reps = 20, 40_000
    rng = np.random.default_rng(20270303)
    delta = rng.normal(4.0, 2.0, reps)
    sigma = 5.0 * np.sqrt(11 / rng.chisquare(11, reps))
    x = rng.normal(0.0, 1.0, (reps, n)) * sigma[:, None]
    y = rng.normal(0.0, 1.0, (reps, n)) * sigma[:, None] + delta[:, None]
    t, p = stats.ttest_ind(y, x, axis=1)
    success = (p < 0.05) & (t > 0)
    value = assurance_of(design, n)
    se = math.sqrt(value * (1 - value) / reps)
    assert success.mean() == pytest.approx(value, abs=4 * se)


def test_uncertainty_lowers_assurance_below_power_and_the_target_n():
    design = design_from_params("two-sample-t", difference=4.0, sd=5.0,
                                assurance={"effect_prior": {"mean": 4.0, "sd": 1.5}, "sd_prior": {"df": 11},
                                           "target": 0.7})
    result = design_assurance(design, 26)
    assert result.assurance < result.power  # the power curve is concave near 0.8 (common practice)
    assert assurance_of(design, result.n_for_target) >= 0.7 > assurance_of(design, result.n_for_target - 1)
    # as n grows, assurance tends to P(delta > 0) = Phi(4 / 1.5) (O'Hagan et al. 2005)
    assert result.limit == pytest.approx(float(special.ndtr(4 / 1.5)), rel=1e-12)


def test_unreachable_target_is_refused_with_the_limit():
    design = design_from_params("two-sample-t", difference=4.0, sd=5.0,
                                assurance={"effect_prior": {"mean": 4.0, "sd": 4.0}, "target": 0.9})
    with pytest.raises(InfeasibleDesign, match="approaches 0.841"):
        design_assurance(design, 26)


@pytest.mark.parametrize(
    "params, words",
    [
        (dict(difference=4.0, sd=5.0, assurance={}), "effect_prior, sd_prior or both"),
        (dict(d=0.8, assurance={"sd_prior": {"df": 5}}), "difference with sd"),
        (dict(difference=4.0, sd=5.0, assurance={"sd_prior": {"df": 0}}), "df"),
    ],
)
def test_bad_assurance_blocks_are_refused(params, words):
    with pytest.raises(InvalidDesign, match=words):
        design_from_params("two-sample-t", **params)


def test_check_reports_assurance_for_a_pilot_based_sd(tmp_path, run):
    (tmp_path / "gait-speed.yaml").write_text("""\
id: gait-speed
title: Treadmill training and gait speed in aged mice
status: planned
data_collection:
  start: 2027-03-01
design:
  test: two-sample-t
  effect:
    difference: 4.0
    sd: 5.0
  assurance:
    effect_prior: {mean: 4.0, sd: 1.5}
    sd_prior: {df: 11}
    target: 0.7
sample_size:
  per_group: 26
""", encoding="utf-8")
    result = run("check", tmp_path, "--json", "--no-history")
    (spec,) = result.json()["specs"]
    got = spec["assurance"]
    expected = design_assurance(design_from_params("two-sample-t", difference=4.0, sd=5.0, assurance={
        "effect_prior": {"mean": 4.0, "sd": 1.5}, "sd_prior": {"df": 11}, "target": 0.7}), 26)
    assert got["assurance"] == pytest.approx(expected.assurance)
    assert got["n_for_target"] == expected.n_for_target
    assert any(f["kind"] == "assurance" and "assurance 0.7 needs" in f["message"] for f in spec["findings"])


def test_sd_prior_from_the_pilot_file(tmp_path, run):
    # the pilot's 12 values give df 11 and their SD; the result equals the explicit prior with them
    import hashlib

    values = [48.1, 52.3, 50.2, 47.5, 55.0, 49.9, 51.4, 46.8, 53.7, 50.6, 44.9, 52.8]
    csv = "speed\n" + "\n".join(str(v) for v in values) + "\n"
    (tmp_path / "pilot.csv").write_text(csv, encoding="utf-8")
    digest = hashlib.sha256(csv.encode()).hexdigest()
    (tmp_path / "gait-speed.yaml").write_text(f"""\
id: gait-speed
title: Treadmill training and gait speed in aged mice
status: draft
data_collection:
  start: 2027-03-01
design:
  test: two-sample-t
  effect:
    difference: 4.0
    sd: 3.5
  pilot:
    file: pilot.csv
    column: speed
    sha256: {digest}
  assurance:
    sd_prior: {{from_pilot: true}}
sample_size:
  per_group: 14
""", encoding="utf-8")
    (spec,) = run("check", tmp_path, "--json", "--no-history").json()["specs"]
    pilot_sd = float(np.std(values, ddof=1))  # numpy, the n - 1 SD (common practice)
    explicit = design_from_params("two-sample-t", difference=4.0, sd=3.5,
                                  assurance={"sd_prior": {"df": 11, "sd": pilot_sd}})
    assert spec["assurance"]["assurance"] == pytest.approx(assurance_of(explicit, 14), rel=1e-12)


def test_from_pilot_needs_a_pilot_block():
    with pytest.raises(InvalidDesign, match="needs design.pilot"):
        design_from_params("two-sample-t", difference=4.0, sd=5.0, assurance={"sd_prior": {"from_pilot": True}})
