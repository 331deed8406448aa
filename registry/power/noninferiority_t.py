"""Non-inferiority of a new treatment's mean: one-sided t-test against a margin."""

from __future__ import annotations

import math

import numpy as np
from pydantic import model_validator
from scipy import special

from .base import DesignBase, EffectBase, Family, locked
from .equivalence_t import _pooled, refuse_explicit_alternative
from .noncentral_t import t_test_power

__all__ = ["NonInferiorityT", "NonInferiorityMargin"]


class NonInferiorityMargin(EffectBase):
    """The non-inferiority ``margin``, the true ``difference`` (group 2, new, minus group 1,
    reference), the ``sd``, and whether higher outcomes are better."""

    margin: float = locked(
        gt=0, description="Non-inferiority margin, a positive amount: how much worse group 2 may be and still count."
    )
    difference: float = locked(default=0.0, description="True difference expected, group 2 minus group 1; default 0.")
    sd: float = locked(gt=0, description="Standard deviation of the outcome, in outcome units.")
    higher_is_better: bool = locked(
        default=True, description="true if higher outcomes are better (H0: difference <= -margin); false if lower "
        "are better (H0: difference >= margin)."
    )

    @model_validator(mode="after")
    def _difference_clear_of_margin(self) -> "NonInferiorityMargin":
        if self.distance() <= 0:
            worse = (f"below -margin ({-self.margin:g})" if self.higher_is_better
                     else f"above the margin ({self.margin:g}), lower being better")
            raise ValueError(
                f"the true difference {self.difference:g} is at or {worse}: group 2 would be "
                "inferior, and non-inferiority cannot be shown whatever the sample size"
            )
        return self

    def sign(self) -> float:
        return 1.0 if self.higher_is_better else -1.0

    def distance(self) -> float:
        """How far the true difference lies on the good side of the margin, in outcome units."""
        return self.margin + self.sign() * self.difference


class NonInferiorityT(Family):
    """Exact power of the one-sided pooled t-test for non-inferiority.

    With higher outcomes better, H0 is ``mu2 - mu1 <= -margin`` and the test rejects when
    ``(D + margin) / SE > t_{1 - alpha, df}``; the statistic is noncentral t with
    ``ncp = (difference + margin) / (sd sqrt(1/n1 + 1/n2))``. With lower outcomes better the
    signs flip. ``alpha`` is one-sided; 0.025 matches a two-sided 95% confidence interval, the
    usual choice in clinical practice.

    References: Julious, S. A. (2004). Sample sizes for clinical trials with Normal data.
    *Statistics in Medicine*, 23(12), 1921-1986. Chow, S.-C., Shao, J., & Wang, H. (2008).
    *Sample Size Calculations in Clinical Research* (2nd ed.), section 3.2. Boca Raton: Chapman & Hall/CRC.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("noninferiority-t", margin=0.5, sd=1.0, alpha=0.025)
    SampleSize(test='noninferiority-t', n_per_group=64, n_total=128, achieved_power=0.8015)
    """

    name = "noninferiority-t"
    title = "Non-inferiority of two means (one-sided t-test against a margin)"
    method = "exact power from the noncentral t distribution with the ncp shifted by the margin, df = n1 + n2 - 2"
    reference = (
        "Julious, S. A. (2004). Sample sizes for clinical trials with Normal data. Statistics in Medicine, "
        "23(12), 1921-1986."
    )
    symbol = "(difference + margin)/sd"
    unit = "per group"
    groups = 2
    effect_model = NonInferiorityMargin
    example = {"margin": 2.0, "difference": 0.0, "sd": 4.0, "higher_is_better": True}

    def effect_size(self, design: DesignBase) -> float:
        return design.effect.distance() / design.effect.sd

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        n1 = np.asarray(n, dtype=float)
        n2 = np.ceil(design.allocation_ratio * n1 - 1e-9)
        return t_test_power(es / np.sqrt(1 / n1 + 1 / n2), n1 + n2 - 2, design.alpha, "greater")

    def check_direction(self, design: DesignBase, effect_size: float) -> None:
        refuse_explicit_alternative(design, "is one-sided by construction (direction from effect.higher_is_better)")

    def alternative_for(self, design: DesignBase) -> str:
        return "one-sided (higher is better)" if design.effect.higher_is_better else "one-sided (lower is better)"

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        z = -special.ndtri(design.alpha) + special.ndtri(design.power)
        return z**2 / effect_size**2 * (1 + 1 / design.allocation_ratio)

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        effect = design.effect
        return {"margin": effect_size * effect.sd - effect.sign() * effect.difference,
                "(difference + margin)/sd": effect_size}

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        notes = [f"alpha = {design.alpha:g} is one-sided"]
        if not math.isclose(design.alpha, 0.025):
            notes.append("clinical practice usually takes one-sided alpha = 0.025 (a two-sided 95% interval)")
        return tuple(notes)

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Normal outcomes (SD 1); the one-sided t-test of the difference against the margin."""
        if distribution != "normal":
            raise ValueError(f"the noninferiority-t simulator offers normal; got {distribution!r}")
        effect = design.effect
        n2 = self.group_sizes(design, n)[1]
        control = rng.standard_normal((reps, n))
        treated = rng.standard_normal((reps, n2)) + effect.difference / effect.sd
        estimate, se, df = _pooled(treated, control)
        statistic = (effect.sign() * estimate + effect.margin / effect.sd) / se
        return statistic > -special.stdtrit(df, design.alpha)
