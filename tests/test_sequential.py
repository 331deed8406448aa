"""Group-sequential boundaries, inflation and stopping probabilities against published tables,
scipy's multivariate normal and seeded simulations of the sequential test."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import special, stats

from registry.power import design_from_params, solve_sample_size
from registry.power.sequential import (
    InvalidSequential,
    constant_shape_boundaries,
    crossing_probabilities,
    drift_for_power,
    equal_fractions,
    group_sequential,
    spend,
)
from registry.power.sequential_size import size_sequential


def _fixed_drift(level: float, power: float) -> float:
    return float(-special.ndtri(level) + special.ndtri(power))


# --- published boundaries -------------------------------------------------------------------------

@pytest.mark.parametrize(
    "looks, expected, rtol",
    [
        # Pocock (1977), Table 1, two-sided alpha 0.05, equally spaced looks (from memory)
        (2, 2.178, 5e-4),
        (3, 2.289, 5e-4),
        (4, 2.361, 5e-4),
        (5, 2.413, 5e-4),
    ],
)
def test_pocock_constants(looks, expected, rtol):
    c, bounds = constant_shape_boundaries(equal_fractions(looks), 0.05, 0.5)
    assert c == pytest.approx(expected, rel=rtol)
    assert all(b == pytest.approx(c) for b in bounds)


@pytest.mark.parametrize(
    "looks, expected, rtol",
    [
        # O'Brien & Fleming (1979) constants C_B(K, 0.05) as tabulated by Jennison & Turnbull (2000),
        # Table 2.3, two-sided alpha 0.05, b_k = C_B sqrt(K / k) (from memory)
        (2, 1.977, 5e-4),
        (3, 2.004, 5e-4),
        (4, 2.024, 5e-4),
        (5, 2.040, 5e-4),
    ],
)
def test_obrien_fleming_constants(looks, expected, rtol):
    c, bounds = constant_shape_boundaries(equal_fractions(looks), 0.05, 0.0)
    assert c == pytest.approx(expected, rel=rtol)
    assert bounds[0] == pytest.approx(c * math.sqrt(looks))


@pytest.mark.parametrize(
    "shape, power, looks, expected, rtol",
    [
        # Jennison & Turnbull (2000), Table 2.4: inflation factors R(K, alpha = 0.05, beta), two-sided
        # (from memory); Pocock tests
        (0.5, 0.8, 2, 1.110, 1e-3),
        (0.5, 0.8, 3, 1.166, 1e-3),
        (0.5, 0.8, 5, 1.229, 1e-3),
        (0.5, 0.9, 2, 1.100, 1e-3),
        (0.5, 0.9, 5, 1.207, 1e-3),
        # ... and O'Brien-Fleming tests
        (0.0, 0.8, 2, 1.008, 1e-3),
        (0.0, 0.8, 3, 1.017, 1e-3),
        (0.0, 0.8, 5, 1.028, 1e-3),
        (0.0, 0.9, 3, 1.016, 1e-3),
        (0.0, 0.9, 5, 1.026, 1e-3),
    ],
)
def test_inflation_factors(shape, power, looks, expected, rtol):
    fractions = equal_fractions(looks)
    _, bounds = constant_shape_boundaries(fractions, 0.05, shape)
    drift = drift_for_power(fractions, bounds, [-b for b in bounds], power, 3.0)
    assert (drift / _fixed_drift(0.025, power)) ** 2 == pytest.approx(expected, rel=rtol)


@pytest.mark.parametrize(
    "looks, expected, rtol",
    [
        # Lan-DeMets O'Brien-Fleming-type spending, one-sided alpha 0.025 (two-sided 0.05 symmetric),
        # equally spaced looks; the boundaries are widely tabulated, e.g. DeMets & Lan (1994),
        # Statistics in Medicine 13, 1341-1352 (from memory)
        (3, (3.710, 2.511, 1.993), 5e-4),
        (5, (4.877, 3.357, 2.680, 2.290, 2.031), 5e-4),
    ],
)
def test_lan_demets_obrien_fleming_boundaries(looks, expected, rtol):
    one = group_sequential(equal_fractions(looks), 0.025, 0.9, efficacy="obrien-fleming")
    two = group_sequential(equal_fractions(looks), 0.05, 0.9, two_sided=True, efficacy="obrien-fleming")
    assert one.efficacy == pytest.approx(expected, rel=rtol)
    assert two.efficacy == pytest.approx(expected, rel=rtol)
    assert one.attained_alpha == pytest.approx(0.025, abs=1e-9)
    assert two.attained_alpha == pytest.approx(0.05, abs=1e-9)


def test_spending_functions_spend_the_whole_level_and_grow():
    # Lan & DeMets (1983); Kim & DeMets (1987): alpha(0) = 0, alpha(1) = alpha, increasing (common practice)
    t = np.linspace(0.01, 1, 50)
    for name, rho in (("obrien-fleming", None), ("pocock", None), ("power", 2.0)):
        spent = spend(name, t, 0.025, rho)
        assert spent[-1] == pytest.approx(0.025, rel=1e-12)
        assert np.all(np.diff(spent) > 0)
    # the O'Brien-Fleming type spends less early than Pocock's (Lan & DeMets 1983, Figure 1)
    assert spend("obrien-fleming", 0.3, 0.025) < spend("pocock", 0.3, 0.025)


# --- the integration against an independent computation -----------------------------------------

def _mvn_continue(fractions, lower, upper, drift):
    """P(lower_k < Z_k < upper_k for every k) from scipy's multivariate normal (Genz's algorithm)."""
    ts = np.array(fractions)
    cov = np.sqrt(np.minimum.outer(ts, ts) / np.maximum.outer(ts, ts))
    mvn = stats.multivariate_normal(drift * np.sqrt(ts), cov, abseps=1e-10, releps=1e-10, maxpts=2_000_000)
    return float(mvn.cdf(np.array(upper), lower_limit=np.array(lower)))


@pytest.mark.parametrize(
    "fractions, lower, upper, drift",
    [
        # independent reference: scipy.stats.multivariate_normal, corr(Z_j, Z_k) = sqrt(t_j / t_k)
        ((0.5, 1.0), (-np.inf, -np.inf), (2.797, 1.977), 0.0),
        ((0.5, 1.0), (-2.178, -2.178), (2.178, 2.178), 2.8),
        ((0.3, 0.65, 1.0), (-np.inf, -np.inf, -np.inf), (2.8, 2.3, 2.0), 2.5),
        ((0.3, 0.65, 1.0), (-0.5, 0.6, -np.inf), (2.8, 2.3, 2.0), 2.5),
        ((0.2, 0.5, 1.0), (0.1, 0.8, -np.inf), (3.5, 2.6, 1.9), 0.0),
        ((0.1, 0.15, 1.0), (-np.inf, -np.inf, -np.inf), (3.0, 3.0, 1.96), 3.0),  # closely spaced looks
    ],
)
def test_crossing_probabilities_match_multivariate_normal(fractions, lower, upper, drift):
    up, low = crossing_probabilities(fractions, upper, lower, drift)
    for k in range(1, len(fractions) + 1):
        stay = _mvn_continue(fractions[:k], lower[:k], upper[:k], drift)
        assert 1 - up[:k].sum() - low[:k].sum() == pytest.approx(stay, abs=1e-6)


def test_one_look_is_the_fixed_design_exactly():
    # with K = 1 the test is the fixed-sample z-test: boundary z_(1-alpha), inflation 1 (common practice)
    plan = group_sequential((1.0,), 0.025, 0.8)
    assert plan.efficacy[0] == -special.ndtri(0.025)
    assert plan.inflation == 1.0
    assert plan.drift == _fixed_drift(0.025, 0.8)
    assert plan.achieved_power == pytest.approx(0.8, abs=1e-12)
    design = design_from_params("two-sample-t", d=0.5, sequential={"looks": 1})
    fixed = solve_sample_size(design_from_params("two-sample-t", d=0.5))
    size = size_sequential(design, fixed)
    assert size.max_n_per_group == fixed.n_per_group == 64  # Cohen (1988) Table 2.4.1, from memory


# --- futility, Haybittle-Peto ---------------------------------------------------------------------

@pytest.mark.parametrize("futility", ["binding", "non-binding"])
def test_futility_designs_hold_level_and_power(futility):
    fractions = equal_fractions(3)
    plan = group_sequential(fractions, 0.025, 0.9, efficacy="obrien-fleming", futility=futility,
                            futility_spending="pocock")
    up_with, _ = crossing_probabilities(fractions, plan.efficacy, plan.futility_bounds, 0.0)
    up_without, _ = crossing_probabilities(fractions, plan.efficacy, [-np.inf] * 3, 0.0)
    power, _ = crossing_probabilities(fractions, plan.efficacy, plan.futility_bounds, plan.drift)
    assert power.sum() == pytest.approx(0.9, abs=1e-6)
    assert plan.futility_bounds[-1] == plan.efficacy[-1]
    if futility == "binding":  # the level holds only when futility stops are obeyed
        assert up_with.sum() == pytest.approx(0.025, abs=1e-9)
        assert up_without.sum() > 0.025
    else:  # the level holds even when they are ignored (Jennison & Turnbull 2000, section 7.2)
        assert up_without.sum() == pytest.approx(0.025, abs=1e-9)
        assert up_with.sum() < 0.025
    assert plan.inflation > group_sequential(fractions, 0.025, 0.9).inflation


def test_haybittle_peto_keeps_the_level_with_z_3_interims():
    # Haybittle (1971): |z| >= 3 at interims; the final boundary is found so the level is exactly alpha
    plan = group_sequential(equal_fractions(3), 0.05, 0.9, two_sided=True, efficacy="haybittle-peto")
    assert plan.efficacy[:2] == (3.0, 3.0)
    lows = [-b for b in plan.efficacy]
    assert 1 - _mvn_continue((1 / 3, 2 / 3, 1), lows, plan.efficacy, 0.0) == pytest.approx(0.05, abs=1e-6)
    assert 1.96 < plan.efficacy[2] < 2.0


@pytest.mark.parametrize(
    "fractions, message",
    [((0.5, 0.9), "last look"), ((0.6, 0.4, 1.0), "increase"), ((), "at least one")],
)
def test_bad_fractions_are_refused(fractions, message):
    with pytest.raises(InvalidSequential, match=message):
        group_sequential(fractions, 0.025, 0.8)


# --- seeded simulations of the sequential test --------------------------------------------------

def _simulated_z_paths(fractions, drift, reps, rng):
    """Z_k = S_k / sqrt(t_k) for Brownian motion with drift, observed at the fractions."""
    dt = np.diff(np.concatenate([[0.0], fractions]))
    s = np.cumsum(rng.normal(drift * dt, np.sqrt(dt), size=(reps, len(fractions))), axis=1)
    return s / np.sqrt(fractions)


@pytest.mark.parametrize("efficacy, futility", [("obrien-fleming", "none"), ("pocock", "binding"),
                                                ("power", "non-binding")])
def test_simulated_sequential_z_test_has_the_reported_level_power_and_stopping(efficacy, futility):
    fractions = np.array([0.25, 0.6, 1.0])
    rho = 2.0 if efficacy == "power" else None
    plan = group_sequential(fractions, 0.025, 0.85, efficacy=efficacy, rho=rho, futility=futility)
    rng = np.random.default_rng(20270301)
    reps = 200_000
    for drift, under in ((0.0, "null"), (plan.drift, "alternative")):
        z = _simulated_z_paths(fractions, drift, reps, rng)
        eff = z >= np.array(plan.efficacy)
        fut = z <= np.array(plan.futility_bounds)
        stop = eff | fut
        first = np.argmax(stop, axis=1)
        first[~stop.any(axis=1)] = len(fractions) - 1
        rejected = eff[np.arange(reps), first]
        expected_rate = (plan.achieved_power if under == "alternative"
                         else sum(plan.null_efficacy))
        se = math.sqrt(expected_rate * (1 - expected_rate) / reps)
        assert rejected.mean() == pytest.approx(expected_rate, abs=4 * se)
        simulated_stops = np.bincount(first, minlength=3) / reps
        assert simulated_stops == pytest.approx(np.array(plan.stopping(under)), abs=0.004)
        assert np.mean(fractions[first]) == pytest.approx(plan.expected_fraction(under), abs=0.003)


def _sequential_t_test(n_max, looks, bounds, d, reps, rng, two_sided):
    """Two-sample pooled t-tests at each look on accumulating data; the boundaries are applied as
    nominal one-sided p-value levels 1 - Phi(b_k) (two-sided: |t| on both sides)."""
    x = rng.normal(0.0, 1.0, size=(reps, n_max))
    y = rng.normal(d, 1.0, size=(reps, n_max))
    rejected = np.zeros(reps, dtype=bool)
    going = np.ones(reps, dtype=bool)
    for n, b in zip(looks, bounds):
        mx, my = x[:, :n].mean(axis=1), y[:, :n].mean(axis=1)
        sp = np.sqrt((x[:, :n].var(axis=1, ddof=1) + y[:, :n].var(axis=1, ddof=1)) / 2)
        t = (my - mx) / (sp * np.sqrt(2 / n))
        p_one = special.stdtr(2 * n - 2, -(np.abs(t) if two_sided else t))
        hit = going & (p_one <= special.ndtr(-b))
        rejected |= hit
        going &= ~hit
    return rejected


@pytest.mark.parametrize("d", [0.5, 1.2])
def test_simulated_sequential_t_test_at_the_reported_maximum_n(d):
    # the lab's test: pooled t at each look; level within Monte Carlo error of alpha, power >= target
    design = design_from_params("two-sample-t", d=d, power=0.8, sequential={"looks": 3})
    size = size_sequential(design, solve_sample_size(design_from_params("two-sample-t", d=d, power=0.8)))
    rng = np.random.default_rng(20270302)
    reps = 40_000
    bounds = size.plan.efficacy
    null = _sequential_t_test(size.max_n_per_group, size.look_n_per_group, bounds, 0.0, reps, rng, True)
    alt = _sequential_t_test(size.max_n_per_group, size.look_n_per_group, bounds, d, reps, rng, True)
    se = math.sqrt(0.05 * 0.95 / reps)
    assert abs(null.mean() - 0.05) < 3.5 * se
    assert alt.mean() >= 0.8 - 3 * math.sqrt(0.16 / reps)


def _sequential_proportions_test(n_max, looks, bounds, p1, p2, reps, rng):
    """Pooled two-proportion z-tests at each look on accumulating binary outcomes, |z| >= b_k."""
    x = rng.random((reps, n_max)) < p1
    y = rng.random((reps, n_max)) < p2
    cx, cy = np.cumsum(x, axis=1), np.cumsum(y, axis=1)
    rejected = np.zeros(reps, dtype=bool)
    going = np.ones(reps, dtype=bool)
    for n, b in zip(looks, bounds):
        a, c = cx[:, n - 1] / n, cy[:, n - 1] / n
        pooled = (a + c) / 2
        se = np.sqrt(pooled * (1 - pooled) * 2 / n)
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.where(se > 0, (c - a) / se, 0.0)
        hit = going & (np.abs(z) >= b)
        rejected |= hit
        going &= ~hit
    return rejected


def test_simulated_sequential_two_proportions_test_at_the_reported_maximum_n():
    # the lab's test for proportions: the pooled z-test at each look, here with Pocock-type spending
    params = dict(p1=0.30, p2=0.50, power=0.8)
    design = design_from_params("two-proportions", sequential={"looks": 3, "efficacy": "pocock"}, **params)
    size = size_sequential(design, solve_sample_size(design_from_params("two-proportions", **params)))
    rng = np.random.default_rng(20270304)
    reps = 40_000
    null = _sequential_proportions_test(size.max_n_per_group, size.look_n_per_group, size.plan.efficacy,
                                        0.40, 0.40, reps, rng)
    alt = _sequential_proportions_test(size.max_n_per_group, size.look_n_per_group, size.plan.efficacy,
                                       0.30, 0.50, reps, rng)
    assert abs(null.mean() - 0.05) < 3.5 * math.sqrt(0.05 * 0.95 / reps)
    assert alt.mean() >= 0.8 - 3 * math.sqrt(0.16 / reps)


@pytest.mark.parametrize("efficacy, futility, spending, rho",
                         [("haybittle-peto", "binding", "power", 2.0), ("pocock", "non-binding", "obrien-fleming", None)])
def test_unequal_looks_with_futility_hold_level_and_power(efficacy, futility, spending, rho):
    # information-based looks at unequal fractions; level from scipy's multivariate normal (Genz)
    fractions = (0.3, 0.55, 1.0)
    plan = group_sequential(fractions, 0.025, 0.8, efficacy=efficacy, futility=futility,
                            futility_spending=spending, futility_rho=rho)
    lows = list(plan.futility_bounds) if futility == "binding" else [-np.inf] * 3
    # P(reject) = sum_k P(a_j < Z_j < b_j for j < k, Z_k >= b_k)
    level = sum(_mvn_continue(fractions[:k + 1], lows[:k] + [plan.efficacy[k]], list(plan.efficacy[:k]) + [np.inf],
                              0.0) for k in range(3))
    assert level == pytest.approx(0.025, abs=2e-6)
    assert plan.achieved_power == pytest.approx(0.8, abs=1e-6)
