"""Equivalence of two means by two one-sided t-tests (TOST), exact power from Owen's Q."""

from __future__ import annotations

import math

import numpy as np
from pydantic import model_validator
from scipy import special

from .base import DesignBase, EffectBase, Family, InfeasibleDesign, locked
from .owen import tost_power

__all__ = ["EquivalenceT", "EquivalenceMargins", "refuse_explicit_alternative"]


class EquivalenceMargins(EffectBase):
    """The equivalence margins (symmetric ``margin``, or ``lower`` and ``upper``) for the
    difference group 2 minus group 1, the true ``difference`` expected, and the ``sd``."""

    margin: float | None = locked(
        default=None, gt=0, description="Symmetric equivalence margin: differences within +/- margin are equivalent."
    )
    lower: float | None = locked(default=None, description="Lower equivalence margin for the difference (with upper).")
    upper: float | None = locked(default=None, description="Upper equivalence margin for the difference (with lower).")
    difference: float = locked(
        default=0.0, description="True difference expected (group 2 minus group 1), inside the margins; default 0."
    )
    sd: float = locked(gt=0, description="Standard deviation of the outcome, in outcome units.")

    @model_validator(mode="after")
    def _margins(self) -> "EquivalenceMargins":
        if self.margin is not None and (self.lower is not None or self.upper is not None):
            raise ValueError("give either margin (symmetric) or lower and upper, not both")
        if self.margin is None:
            if self.lower is None and self.upper is None:
                raise ValueError("give the equivalence margin: margin (symmetric), or lower and upper")
            if self.lower is None or self.upper is None:
                raise ValueError("lower and upper go together: give both margins, or a symmetric margin")
            if not self.lower < self.upper:
                raise ValueError(f"lower ({self.lower:g}) must be below upper ({self.upper:g})")
        low, high = self.bounds()
        if not low < self.difference < high:
            raise ValueError(
                f"the true difference {self.difference:g} is not inside the margins ({low:g}, {high:g}): "
                "equivalence cannot be shown whatever the sample size"
            )
        return self

    def bounds(self) -> tuple[float, float]:
        if self.margin is not None:
            return -self.margin, self.margin
        assert self.lower is not None and self.upper is not None
        return self.lower, self.upper


def refuse_explicit_alternative(design: DesignBase, how: str) -> None:
    """One-sided-by-construction families take their direction from the effect, not ``alternative``."""
    if "alternative" in design.model_fields_set:
        raise InfeasibleDesign(
            f"{design.test} {how}; design.alternative does not apply, remove it", "design.alternative"
        )


class EquivalenceT(Family):
    """Exact power of the two one-sided tests (TOST) for equivalence of two means.

    Each one-sided pooled t-test runs at ``alpha`` (so the ``1 - 2 alpha`` confidence interval
    must lie within the margins). Power is the bivariate noncentral t probability written with
    Owen's Q function (Phillips 1990), see :func:`registry.power.owen.tost_power`. The effect
    size is the margins' half-width over the SD; the minimum detectable effect scales both
    margins with the true difference fixed.

    References: Schuirmann, D. J. (1987). A comparison of the two one-sided tests procedure and
    the power approach for assessing the equivalence of average bioavailability. *Journal of
    Pharmacokinetics and Biopharmaceutics*, 15(6), 657-680. Phillips, K. F. (1990). Power of the
    two one-sided tests procedure in bioequivalence. *Journal of Pharmacokinetics and
    Biopharmaceutics*, 18(2), 137-144. Julious, S. A. (2004). Sample sizes for clinical trials with
    Normal data. *Statistics in Medicine*, 23(12), 1921-1986.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("equivalence-t", margin=0.5, sd=1.0)
    SampleSize(test='equivalence-t', n_per_group=70, n_total=140, achieved_power=0.8059)
    """

    name = "equivalence-t"
    title = "Equivalence of two means (two one-sided t-tests)"
    method = "exact TOST power from the bivariate noncentral t (Owen's Q), df = n1 + n2 - 2"
    reference = (
        "Phillips, K. F. (1990). Power of the two one-sided tests procedure in bioequivalence. Journal of "
        "Pharmacokinetics and Biopharmaceutics, 18(2), 137-144; Schuirmann, D. J. (1987). Journal of "
        "Pharmacokinetics and Biopharmaceutics, 15(6), 657-680."
    )
    symbol = "margin/sd"
    unit = "per group"
    groups = 2
    effect_model = EquivalenceMargins
    example = {"margin": 2.0, "difference": 0.0, "sd": 4.0}

    def effect_size(self, design: DesignBase) -> float:
        low, high = design.effect.bounds()
        return (high - low) / (2 * design.effect.sd)

    def _scaled(self, design: DesignBase, effect_size: float) -> tuple[float, float, float]:
        """Margins and true difference in SD units, margins scaled to half-width ``effect_size``."""
        effect = design.effect
        low, high = effect.bounds()
        scale = effect_size / self.effect_size(design)
        return low * scale / effect.sd, high * scale / effect.sd, effect.difference / effect.sd

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        low, high, difference = self._scaled(design, es)
        n1 = np.asarray(n, dtype=float)
        n2 = np.ceil(design.allocation_ratio * n1 - 1e-9)
        return tost_power(low, high, difference, n1, n2, design.alpha)

    def check_direction(self, design: DesignBase, effect_size: float) -> None:
        refuse_explicit_alternative(design, "runs two one-sided tests, one against each margin")

    def alternative_for(self, design: DesignBase) -> str:
        return "two one-sided tests"

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        low, high, difference = self._scaled(design, effect_size)
        gap = min(high - difference, difference - low)
        centred = math.isclose(high - difference, difference - low)
        z_beta = special.ndtri((1 + design.power) / 2 if centred else design.power)
        return (-special.ndtri(design.alpha) + z_beta) ** 2 / gap**2 * (1 + 1 / design.allocation_ratio)

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        effect = design.effect
        scale = effect_size / self.effect_size(design)
        if effect.margin is not None:
            return {"margin": effect.margin * scale, "margin/sd": effect_size}
        low, high = effect.bounds()
        return {"lower": low * scale, "upper": high * scale, "margin/sd": effect_size}

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        return (f"each one-sided test runs at alpha = {design.alpha:g}: equivalence is shown when the "
                f"{1 - 2 * design.alpha:.0%} confidence interval of the difference lies within the margins",)

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Normal outcomes (SD 1); the TOST decision with pooled-variance t statistics."""
        if distribution != "normal":
            raise ValueError(f"the equivalence-t simulator offers normal; got {distribution!r}")
        low, high, difference = self._scaled(design, self.effect_size(design))
        n2 = self.group_sizes(design, n)[1]
        control = rng.standard_normal((reps, n))
        treated = rng.standard_normal((reps, n2)) + difference
        estimate, se, df = _pooled(treated, control)
        crit = -special.stdtrit(df, design.alpha)
        return ((estimate - low) / se >= crit) & ((estimate - high) / se <= -crit)


def _pooled(treated: np.ndarray, control: np.ndarray) -> tuple[np.ndarray, np.ndarray, int]:
    """Mean difference, pooled-variance standard error and degrees of freedom, per row."""
    n1, n2 = control.shape[1], treated.shape[1]
    df = n1 + n2 - 2
    pooled = ((n1 - 1) * control.var(axis=1, ddof=1) + (n2 - 1) * treated.var(axis=1, ddof=1)) / df
    return treated.mean(axis=1) - control.mean(axis=1), np.sqrt(pooled * (1 / n1 + 1 / n2)), df
