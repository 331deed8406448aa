"""Two-period, two-sequence (2 x 2) crossover: the t-test on period differences."""

from __future__ import annotations


import numpy as np
from pydantic import model_validator
from .lazy import stats  # loaded on first use

from .base import DesignBase, EffectBase, Family, locked
from .mean_difference import _require_difference_or_d
from .noncentral_t import t_test_power

__all__ = ["Crossover2x2", "CrossoverDifference"]


class CrossoverDifference(EffectBase):
    """The treatment ``difference`` (test minus reference) with the within-subject SD ``sd_within``,
    or the standardized ``d`` (difference / within-subject SD)."""

    difference: float | None = locked(
        default=None, description="Mean test-minus-reference difference, in outcome units (signed for one-sided tests)."
    )
    sd_within: float | None = locked(
        default=None, gt=0,
        description="Within-subject SD: the residual SD of one measurement once subject and period are accounted "
        "for (the square root of the residual mean square of an earlier crossover).",
    )
    d: float | None = locked(default=None, description="Standardized effect: difference / within-subject SD.")

    @model_validator(mode="after")
    def _one_way_to_state_the_effect(self) -> "CrossoverDifference":
        _require_difference_or_d(self, self.sd_within is not None, "sd_within")
        return self

    def standardized(self) -> float:
        if self.d is not None:
            return self.d
        assert self.difference is not None and self.sd_within is not None
        return self.difference / self.sd_within

    def natural_scale(self) -> tuple[float, float]:
        if self.d is not None:
            return self.d, 1.0
        assert self.difference is not None and self.sd_within is not None
        return self.difference, self.sd_within


class Crossover2x2(Family):
    """Power of the 2 x 2 crossover analysed by the t-test on period differences.

    Sequence TR receives test then reference, sequence RT the reverse; ``n1`` and
    ``n2 = ceil(r n1)`` subjects. Each subject's period difference ``(y1 - y2) / 2`` has
    variance ``sigma_w^2 / 2``; the difference of its sequence means estimates the treatment
    effect free of period and subject effects (assuming no carry-over). The two-sample t-test on
    the period differences (identical to the treatment t-test of the ANOVA with subject,
    period and treatment) has ``df = n1 + n2 - 2`` and
    ``ncp = delta / (sigma_w sqrt((1/n1 + 1/n2) / 2))``; power is exact.

    References: Senn, S. (2002). *Cross-over Trials in Clinical Research* (2nd ed.), chapter 3.
    Chichester: Wiley. Julious, S. A. (2004). Sample sizes for clinical trials with Normal data.
    *Statistics in Medicine*, 23(12), 1921-1986.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("crossover-2x2", difference=5, sd_within=10)
    SampleSize(test='crossover-2x2', n_per_group=33, n_total=66, achieved_power=0.8076)
    """

    name = "crossover-2x2"
    title = "Two-period, two-sequence crossover (t-test on period differences)"
    method = ("exact power from the noncentral t distribution on the period differences, df = n1 + n2 - 2, "
              "within-subject SD, no carry-over")
    reference = (
        "Senn, S. (2002). Cross-over Trials in Clinical Research (2nd ed.), chapter 3. Chichester: Wiley; "
        "Julious, S. A. (2004). Sample sizes for clinical trials with Normal data. Statistics in Medicine, "
        "23(12), 1921-1986."
    )
    symbol = "d"
    unit = "subjects per sequence"
    groups = 2
    effect_model = CrossoverDifference
    example = {"difference": 5.0, "sd_within": 10.0}
    effect_words = {"difference": "a test-minus-reference difference of", "sd_within": "a within-subject standard deviation of"}

    def effect_size(self, design: DesignBase) -> float:
        return design.effect.standardized()

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        n1 = np.asarray(n, dtype=float)
        n2 = np.ceil(design.allocation_ratio * n1 - 1e-9)
        ncp = es / np.sqrt((1 / n1 + 1 / n2) / 2)
        return t_test_power(ncp, n1 + n2 - 2, design.alpha, design.alternative)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        return super().approximate_n(design, effect_size) / 2  # period differences have variance sigma_w^2 / 2

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Each subject has a random level (SD 2 sigma_w: it cancels), a period-2 shift of 0.5 sigma_w
        (it cancels too) and independent within-subject errors; the replicate is analysed by the
        two-sample t-test on period differences, sequence TR minus RT."""
        difference, sd = design.effect.natural_scale()
        n2 = self.group_sizes(design, n)[1]
        size = n + n2
        subject = rng.normal(0.0, 2 * sd, size=(reps, size, 1))
        errors = rng.normal(0.0, sd, size=(reps, size, 2))
        period = np.array([0.0, 0.5 * sd])
        treat = np.zeros((size, 2))
        treat[:n, 0] = difference  # TR: test in period 1
        treat[n:, 1] = difference  # RT: test in period 2
        y = subject + errors + period + treat
        half = (y[:, :, 0] - y[:, :, 1]) / 2
        p = stats.ttest_ind(half[:, :n], half[:, n:], axis=1, alternative=design.alternative).pvalue
        return p < design.alpha

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        if design.effect.sd_within is not None:
            return {"difference": effect_size * design.effect.sd_within, "d": effect_size}
        return {"d": effect_size}

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        return ("a 2 x 2 crossover assumes no carry-over from period 1 to period 2 (plan a washout); the SD is the "
                "within-subject SD, not the SD between subjects",)


