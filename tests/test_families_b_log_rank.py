"""log-rank: Schoenfeld's events, event probabilities, the vectorized statistic and simulation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats
from statsmodels.duration.survfunc import survdiff

from registry.power import InvalidDesign, design_from_params, power, sample_size
from registry.power.log_rank import HazardRatio, event_probabilities, log_rank_z
from registry.power.simulate import simulated_power


def _schoenfeld_events(hr, power_, alpha=0.05, ratio=1.0, sides=2):
    # Schoenfeld (1983) eq. for the log-rank test, computed here from scipy's normal quantiles
    z = stats.norm.isf(alpha / sides) + stats.norm.ppf(power_)
    return z**2 * (1 + ratio) ** 2 / (ratio * math.log(hr) ** 2)


@pytest.mark.parametrize(
    "params, events",
    [
        # Schoenfeld (1983): HR 0.5, 80% power, two-sided 5%, 1:1 needs 66 events (widely quoted, from memory)
        (dict(hr=0.5, event_probability=1.0), 66),
        # Schoenfeld (1983) formula by hand: 4 (1.960 + 0.842)^2 / log(0.6)^2 = 120.3, so 121 events
        (dict(hr=0.6, event_probability=0.7), 121),
    ],
)
def test_events_match_published_values(params, events):
    assert sample_size("log-rank", **params).events == events


@pytest.mark.parametrize(
    "params",
    [
        # each row: Schoenfeld's formula re-derived independently in _schoenfeld_events
        dict(hr=0.75, event_probability=0.5, power=0.9),
        dict(hr=0.6, event_probability=0.4, ratio=2.0),
        dict(hr=1.5, event_probability=0.3, alpha=0.01),
        dict(hr=0.7, event_probability=0.6, alternative="less"),
    ],
)
def test_events_and_units_follow_schoenfeld(params):
    result = sample_size("log-rank", **params)
    sides = 1 if params.get("alternative") in ("less", "greater") else 2
    needed = _schoenfeld_events(params["hr"], params.get("power", 0.8), params.get("alpha", 0.05),
                                params.get("ratio", 1.0), sides)
    assert result.events == math.ceil(needed)
    # n_total = ceil(events / P(event)), up to rounding each group up to whole units
    assert result.n_total >= needed / params["event_probability"]
    # group 1 gets ceil(n_total / (1 + ratio)) and group 2 ceil(ratio x n1): at most 2 + ratio extra units
    assert result.n_total < needed / params["event_probability"] + 2 + params.get("ratio", 1.0)


def test_event_probability_at_the_median_is_one_half():
    # Exponential survival: with everyone followed for exactly the median, half have the event (fact of the trade)
    effect = HazardRatio(hr=0.5, median_control=10.0, accrual=0.0, follow_up=10.0)
    p1, p2 = event_probabilities(effect, 1.0)
    assert p1 == pytest.approx(0.5, rel=1e-12)
    # group 2's median is 20, so P = 1 - 2^(-1/2) (exponential survival, derived by hand)
    assert p2 == pytest.approx(1 - 2**-0.5, rel=1e-12)


@pytest.mark.parametrize("median, accrual, follow_up, hr", [(12.0, 12.0, 12.0, 0.6), (5.0, 24.0, 6.0, 1.4)])
def test_event_probability_with_accrual_matches_numerical_integration(median, accrual, follow_up, hr):
    # Independent computation: average 1 - exp(-lam * (A + F - entry)) over uniform entry by quadrature
    effect = HazardRatio(hr=hr, median_control=median, accrual=accrual, follow_up=follow_up)
    for hazard, p in zip((math.log(2) / median, math.log(2) / median * hr), event_probabilities(effect, 1.0)):
        expected = integrate.quad(lambda e: 1 - math.exp(-hazard * (accrual + follow_up - e)), 0, accrual)[0] / accrual
        assert p == pytest.approx(expected, rel=1e-9)


def _log_rank_by_loop(time, event, group2):
    """Textbook log-rank with tie handling, one event time at a time (Mantel 1966)."""
    o_minus_e = variance = 0.0
    for t in np.unique(time[event.astype(bool)]):
        at_risk = time >= t
        n, n2 = at_risk.sum(), (at_risk & group2).sum()
        d = ((time == t) & event.astype(bool)).sum()
        d2 = ((time == t) & event.astype(bool) & group2).sum()
        o_minus_e += d2 - d * n2 / n
        if n > 1:
            variance += d * (n2 / n) * (1 - n2 / n) * (n - d) / (n - 1)
    return o_minus_e / math.sqrt(variance)


def test_vectorized_log_rank_matches_loop_and_statsmodels():
    rng = np.random.default_rng(7)
    n1, n2 = 30, 45
    group2 = np.r_[np.zeros(n1, bool), np.ones(n2, bool)]
    time = rng.exponential(1.0, (6, n1 + n2)) / np.where(group2, 0.6, 1.0)
    censor = rng.uniform(0.5, 3.0, (6, n1 + n2))
    event = time <= censor
    observed = np.minimum(time, censor)
    z = log_rank_z(observed, event, group2)
    for row in range(6):
        # an independent per-replicate implementation
        assert z[row] == pytest.approx(_log_rank_by_loop(observed[row], event[row], group2), rel=1e-10)
        # statsmodels' log-rank chi-square (reference library)
        chisq, _ = survdiff(observed[row], event[row].astype(int), group2.astype(int))
        assert z[row] ** 2 == pytest.approx(chisq, rel=1e-8)


@pytest.mark.parametrize(
    "params",
    [
        dict(hr=0.6, event_probability=0.7),
        dict(hr=0.6, median_control=12.0, accrual=12.0, follow_up=12.0),
        dict(hr=1.6, event_probability=0.5, ratio=2.0, alternative="greater"),
    ],
)
def test_simulated_power_at_the_returned_n(params):
    # Seeded Monte Carlo of the actual log-rank test at the returned n: within 3 standard errors
    # of the normal-approximation power there.
    result = sample_size("log-rank", **params)
    simulated = simulated_power(design_from_params("log-rank", **params), result.n_per_group, reps=4000, seed=11)
    analytic = power("log-rank", result.n_per_group, **params).power
    assert abs(simulated.power - analytic) < 3 * simulated.standard_error


def test_power_reports_expected_events():
    at = power("log-rank", 86, hr=0.6, event_probability=0.7)
    assert at.events == round(172 * 0.7)
    assert at.minimum_detectable_natural["hr"] < 1


@pytest.mark.parametrize(
    "params, message",
    [
        (dict(hr=1.0, event_probability=0.5), "hr must not be 1"),
        (dict(hr=0.6, median_control=3.0), "accrual, follow_up missing"),
        (dict(hr=0.6, event_probability=70), "did you mean 0.7"),
        (dict(hr=0.6, event_probability=0.5, median_control=3.0, accrual=1.0, follow_up=1.0), "not both"),
        (dict(hr=0.6, median_control=3.0, accrual=0.0, follow_up=0.0), "both 0"),
    ],
)
def test_bad_effects_are_explained(params, message):
    with pytest.raises(InvalidDesign, match=message):
        sample_size("log-rank", **params)


def test_hazard_ratio_alone_answers_events_only():
    # Schoenfeld (1983): 4 (z_a + z_b)^2 / log(hr)^2 events, scipy quantiles; units need event information.
    from registry.power import EventsOnly

    with pytest.raises(EventsOnly, match="give event_probability, or median_control") as caught:
        sample_size("log-rank", hr=0.6)
    assert caught.value.events == math.ceil(4 * (stats.norm.isf(0.025) + stats.norm.ppf(0.8)) ** 2
                                            / math.log(0.6) ** 2)


@settings(max_examples=25, deadline=None)
@given(hr=st.floats(0.3, 0.9), p=st.floats(0.2, 1.0), power_=st.floats(0.6, 0.95))
def test_properties(hr, p, power_):
    base = dict(event_probability=p, power=power_)
    result = sample_size("log-rank", hr=hr, **base)
    n = result.n_per_group
    assert power("log-rank", n, hr=hr, **base).power >= power_ > power("log-rank", n - 1, hr=hr, **base).power
    # a stronger effect (further from 1), more power or a smaller alpha never needs fewer units
    assert sample_size("log-rank", hr=hr * 0.9, **base).n_per_group <= n
    assert sample_size("log-rank", hr=hr, event_probability=p, power=min(power_ + 0.04, 0.99)).n_per_group >= n
    assert sample_size("log-rank", hr=hr, alpha=0.01, **base).n_per_group >= n
