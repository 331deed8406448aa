"""Log-rank test comparing survival in two groups: events by Schoenfeld's formula."""

from __future__ import annotations

import math

import numpy as np
from pydantic import field_validator, model_validator
from .lazy import stats  # loaded on first use
from .roots import brentq

from .base import DesignBase, EffectBase, Family, locked
from .fields import out_of_range

__all__ = ["LogRank", "HazardRatio", "event_probabilities", "log_rank_z"]


class HazardRatio(EffectBase):
    """The hazard ratio to detect, with how many units are expected to have the event.

    Give ``event_probability`` directly, or exponential survival in the control group
    (``median_control``) with uniform ``accrual`` followed by ``follow_up``. With neither, only the
    number of events the analysis needs can be answered.
    """

    hr: float = locked(
        gt=0, description="Hazard ratio to detect, group 2 over group 1 (below 1: group 2 has the event later)."
    )
    event_probability: float | None = locked(
        default=None,
        description="Probability that a unit has the event before the analysis, both groups pooled, in (0, 1].",
    )
    median_control: float | None = locked(
        default=None, gt=0, description="Median time to event in group 1, in the study's time unit (exponential survival)."
    )
    accrual: float | None = locked(
        default=None, ge=0, description="Length of the recruitment period (uniform entry), same time unit; 0 if all start together."
    )
    follow_up: float | None = locked(
        default=None, ge=0, description="Follow-up after recruitment ends, same time unit."
    )

    @field_validator("hr")
    @classmethod
    def _not_one(cls, value: float) -> float:
        if value == 1:
            raise ValueError("hr must not be 1: a hazard ratio of 1 is no effect, no sample size can detect it")
        return value

    @field_validator("event_probability")
    @classmethod
    def _probability(cls, value: float | None) -> float | None:
        if value is not None and not 0 < value <= 1:
            raise ValueError(out_of_range("event_probability", "(0, 1]", value))
        return value

    @model_validator(mode="after")
    def _one_event_model(self) -> "HazardRatio":
        survival = {"median_control": self.median_control, "accrual": self.accrual, "follow_up": self.follow_up}
        given = [k for k, v in survival.items() if v is not None]
        if self.event_probability is not None and given:
            raise ValueError(
                "give either event_probability, or median_control with accrual and follow_up, not both"
            )
        if self.event_probability is None and given:
            missing = [k for k, v in survival.items() if v is None]
            if missing:
                raise ValueError(f"{', '.join(missing)} missing: median_control, accrual and follow_up go together")
            if self.accrual == 0 and self.follow_up == 0:
                raise ValueError("accrual and follow_up are both 0: nobody would be observed for any time")
        return self


def event_probabilities(effect: HazardRatio, allocation_ratio: float, hr: float | None = None) -> tuple[float, float]:
    """Probability of an observed event in group 1 and group 2.

    Under exponential survival with hazard ``lam`` and entry uniform over ``[0, A]`` followed by
    ``F`` of follow-up, a unit is observed for ``U(F, A + F)``, so
    ``P(event) = 1 - exp(-lam F) (1 - exp(-lam A)) / (lam A)`` (``1 - exp(-lam F)`` when A = 0).
    Group 2's hazard is ``hr`` times group 1's. With ``event_probability`` given, both groups get it.

    Reference: Collett, D. (2015). *Modelling Survival Data in Medical Research* (3rd ed.).
    Boca Raton: CRC Press (the chapter on sample size for survival studies).

    >>> effect = HazardRatio(hr=0.5, median_control=12.0, accrual=0.0, follow_up=12.0)
    >>> [round(p, 4) for p in event_probabilities(effect, 1.0)]
    [0.5, 0.2929]
    """
    if effect.event_probability is not None:
        return effect.event_probability, effect.event_probability
    assert effect.median_control is not None and effect.accrual is not None and effect.follow_up is not None
    hr = effect.hr if hr is None else hr
    control = math.log(2) / effect.median_control
    return (_observed_fraction(control, effect.accrual, effect.follow_up),
            _observed_fraction(control * hr, effect.accrual, effect.follow_up))


def _observed_fraction(hazard: float, accrual: float, follow_up: float) -> float:
    if accrual == 0:
        return -math.expm1(-hazard * follow_up)
    return 1 - math.exp(-hazard * follow_up) * (-math.expm1(-hazard * accrual)) / (hazard * accrual)


def log_rank_z(time: np.ndarray, event: np.ndarray, group2: np.ndarray) -> np.ndarray:
    """Log-rank statistic ``(O2 - E2) / sqrt(V)`` for each row (replicate), vectorized.

    ``time`` and ``event`` are ``(reps, n)``; ``group2`` (``(n,)`` or ``(reps, n)``) marks group 2.
    With continuous times there are no ties, so at each event the risk set is everyone not yet
    out, ``E = Y2 / Y`` and ``V = (Y2 / Y)(1 - Y2 / Y)``. Negative values mean fewer events in
    group 2 than expected (hazard ratio below 1). A row without events gives 0.

    Reference: Mantel, N. (1966). Evaluation of survival data and two new rank order statistics
    arising in its consideration. *Cancer Chemotherapy Reports*, 50(3), 163-170.

    >>> z = log_rank_z(np.array([[1.0, 2.0, 3.0, 4.0]]), np.array([[1, 1, 1, 0]]), np.array([0, 0, 1, 1]))
    >>> round(float(z[0]), 4)
    -1.6977
    """
    time = np.asarray(time, dtype=float)
    order = np.argsort(time, axis=1, kind="stable")
    event = np.take_along_axis(np.asarray(event, dtype=bool), order, axis=1)
    group2 = np.broadcast_to(np.asarray(group2, dtype=bool), time.shape)
    in2 = np.take_along_axis(group2, order, axis=1).astype(float)
    n = time.shape[1]
    at_risk = np.arange(n, 0, -1, dtype=float)
    at_risk2 = np.cumsum(in2[:, ::-1], axis=1)[:, ::-1]
    share = at_risk2 / at_risk
    observed_minus_expected = np.sum(event * (in2 - share), axis=1)
    variance = np.sum(event * share * (1 - share), axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        z = observed_minus_expected / np.sqrt(variance)
    return np.where(variance > 0, z, 0.0)


class LogRank(Family):
    """Power of the log-rank test for a hazard ratio, by Schoenfeld's formula.

    The log-rank statistic is approximately normal with mean ``log(hr) sqrt(d r) / (1 + r)``
    after ``d`` events with allocation ratio ``r = n2 / n1``, so the events needed are
    ``d = (z_a + z_b)^2 (1 + r)^2 / (r log(hr)^2)`` and the units needed are
    ``n_total = d / P(event)``, rounded up per group (``P`` averaged over the groups by
    allocation). Power at n uses the expected events ``n1 P1 + n2 P2``. The far rejection tail
    of a two-sided test is neglected, as in the formula. Assumes proportional hazards.

    Reference: Schoenfeld, D. A. (1983). Sample-size formula for the proportional-hazards
    regression model. *Biometrics*, 39(2), 499-503.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("log-rank", hr=0.6, event_probability=0.7)
    SampleSize(test='log-rank', n_per_group=86, n_total=172, events=121, achieved_power=0.8003)
    """

    name = "log-rank"
    exact = False
    verify_by_simulation = True
    title = "Log-rank test (two-group survival)"
    method = "Schoenfeld's events formula for the log-rank test, normal approximation"
    reference = (
        "Schoenfeld, D. A. (1983). Sample-size formula for the proportional-hazards regression model. "
        "Biometrics, 39(2), 499-503."
    )
    symbol = "log(hr)"
    unit = "per group"
    groups = 2
    effect_model = HazardRatio
    example = {"hr": 0.6, "median_control": 12.0, "accrual": 12.0, "follow_up": 12.0}
    distributions = ("exponential",)

    def effect_size(self, design: DesignBase) -> float:
        return math.log(design.effect.hr)

    def events_only(self, design: DesignBase) -> bool:
        effect = design.effect
        return effect.event_probability is None and effect.median_control is None

    def _z_alpha(self, design: DesignBase) -> float:
        return float(stats.norm.isf(design.alpha / (2 if design.alternative == "two-sided" else 1)))

    def _probabilities(self, design: DesignBase, effect_size: float) -> tuple[float, float]:
        return event_probabilities(design.effect, design.allocation_ratio, math.exp(effect_size))

    def expected_events(self, design: DesignBase, n, effect_size: float | None = None):  # type: ignore[override]
        es = self.effect_size(design) if effect_size is None else effect_size
        p1, p2 = self._probabilities(design, es)
        n1 = np.asarray(n, dtype=float)
        n2 = np.ceil(design.allocation_ratio * n1 - 1e-9)
        events = n1 * p1 + n2 * p2
        return float(events) if np.ndim(events) == 0 else events

    def required_events(self, design: DesignBase, effect_size: float) -> float:
        r = design.allocation_ratio
        z = self._z_alpha(design) + float(stats.norm.ppf(design.power))
        return z**2 * (1 + r) ** 2 / (r * effect_size**2)

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        r = design.allocation_ratio
        events = np.asarray(self.expected_events(design, np.asarray(n), es), dtype=float)
        mean = es * np.sqrt(events * r) / (1 + r)
        z_alpha = self._z_alpha(design)
        if design.alternative == "two-sided":
            return stats.norm.cdf(np.abs(mean) - z_alpha)
        if design.alternative == "greater":
            return stats.norm.cdf(mean - z_alpha)
        return stats.norm.cdf(-mean - z_alpha)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        p1, p2 = self._probabilities(design, effect_size)
        return self.required_events(design, effect_size) / (p1 + design.allocation_ratio * p2)

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        return {"hr": math.exp(effect_size), "log(hr)": effect_size}

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        effect = design.effect
        notes = ["assumes proportional hazards; the analysis needs the stated number of events, "
                 "so follow the study until they have occurred"]
        if effect.event_probability is None:
            p1, p2 = event_probabilities(effect, design.allocation_ratio)
            notes.append(
                f"event probabilities {p1:.4f} (group 1) and {p2:.4f} (group 2) from exponential survival "
                f"(median {effect.median_control:g} in group 1), uniform accrual over {effect.accrual:g} "
                f"and {effect.follow_up:g} of follow-up"
            )
        return tuple(notes)

    def default_distribution(self, design: DesignBase) -> str:
        return "exponential"

    def simulate(self, design, n, reps, rng, distribution="exponential"):  # type: ignore[override]
        """Exponential event times, uniform entry and administrative censoring; log-rank test.

        With ``event_probability`` given, group 1 has hazard 1, group 2 hazard ``hr``, and every
        unit is censored at one time chosen so that the expected event fraction is the stated one.
        """
        if distribution != "exponential":
            raise ValueError(f"the log-rank simulator offers exponential survival; got {distribution!r}")
        effect = design.effect
        n1, n2 = self.group_sizes(design, n)
        group2 = np.r_[np.zeros(n1, dtype=bool), np.ones(n2, dtype=bool)]
        # each group and each random component in a call of its own: common random numbers across n
        if effect.event_probability is None:
            hazard1 = math.log(2) / effect.median_control
            entry = np.hstack([rng.uniform(0.0, effect.accrual, size=(reps, n1)),
                               rng.uniform(0.0, effect.accrual, size=(reps, n2))])
            censor = effect.accrual + effect.follow_up - entry
        else:
            hazard1 = 1.0
            censor = np.full((reps, n1 + n2), self._censoring_time(effect.event_probability, effect.hr, n1, n2))
        survival = np.hstack([rng.standard_exponential(size=(reps, n1)) / hazard1,
                              rng.standard_exponential(size=(reps, n2)) / (hazard1 * effect.hr)])
        event = survival <= censor
        z = log_rank_z(np.minimum(survival, censor), event, group2)
        if design.alternative == "two-sided":
            return np.abs(z) > stats.norm.isf(design.alpha / 2)
        if design.alternative == "greater":
            return z > stats.norm.isf(design.alpha)
        return z < -stats.norm.isf(design.alpha)

    @staticmethod
    def _censoring_time(probability: float, hr: float, n1: int, n2: int) -> float:
        if probability >= 1:
            return math.inf

        def gap(c: float) -> float:
            return (n1 * -math.expm1(-c) + n2 * -math.expm1(-hr * c)) / (n1 + n2) - probability

        high = 1.0
        while gap(high) < 0:
            high *= 2
        return brentq(gap, 0.0, high, xtol=1e-12)
