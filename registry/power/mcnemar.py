"""Paired binary outcomes: McNemar's test on the discordant pairs."""

from __future__ import annotations

import math

import numpy as np
from pydantic import field_validator, model_validator
from scipy import special

from .base import DesignBase, EffectBase, Family, fraction_validator, locked
from .restrictions import require_no_allocation_ratio

__all__ = ["McNemar", "DiscordantPairs"]

_EDGE = 1e-9  # keeps p10 and p01 inside (0, 1) when an effect is pushed to the edge of its range


class DiscordantPairs(EffectBase):
    """The expected proportions of the two kinds of discordant pair: ``p10`` (outcome under condition 1
    only) and ``p01`` (under condition 2 only)."""

    p10: float = locked(description="Expected proportion of pairs with the outcome in condition 1 but not in "
                        "condition 2, in (0, 1).")
    p01: float = locked(description="Expected proportion of pairs with the outcome in condition 2 but not in "
                        "condition 1, in (0, 1); differs from p10.")

    @field_validator("p10", "p01")
    @classmethod
    def _fraction(cls, value: float, info) -> float:
        return fraction_validator(info.field_name)(value)

    @model_validator(mode="after")
    def _possible(self) -> "DiscordantPairs":
        if self.p10 + self.p01 >= 1:
            raise ValueError(f"p10 + p01 is {self.p10 + self.p01:g}: the discordant proportions must sum to less than 1")
        if self.p10 == self.p01:
            raise ValueError(f"p10 and p01 are both {self.p10!r}: no sample size can detect a zero difference")
        return self

    @property
    def discordant(self) -> float:
        return self.p10 + self.p01


class McNemar(Family):
    """Power of McNemar's test (the z test on the discordant pairs, without continuity correction).

    With ``n`` pairs, discordant proportions ``p10`` and ``p01``, ``psi = p10 + p01`` and
    ``delta = p01 - p10``, the statistic ``(b - c) / sqrt(b + c)`` (``c`` pairs of kind 01, ``b`` of
    kind 10; its square is McNemar's chi-square) has power
    ``Phi((|delta| sqrt(n) - z sqrt(psi)) / sqrt(psi - delta^2))`` (plus the far tail two-sided), the
    normal approximation of Connor (1987). The standardized effect is Cohen's ``g = p01 / psi - 1/2``,
    the excess over one half of the discordant pairs' share of kind 01; what-if effects keep ``psi``.

    References: McNemar, Q. (1947). Note on the sampling error of the difference between correlated
    proportions or percentages. *Psychometrika*, 12(2), 153-157. Connor, R. J. (1987). Sample size for
    testing differences in proportions for the paired-sample design. *Biometrics*, 43(1), 207-211.
    Cohen, J. (1988). *Statistical Power Analysis for the Behavioral Sciences* (2nd ed.), chapter 5.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("mcnemar", p10=0.10, p01=0.25)
    SampleSize(test='mcnemar', n_per_group=120, n_total=120, achieved_power=0.8010)
    """

    name = "mcnemar"
    title = "Paired proportions (McNemar's test)"
    method = "normal approximation (Connor 1987) to McNemar's test on the discordant pairs, no continuity correction"
    reference = (
        "McNemar, Q. (1947). Note on the sampling error of the difference between correlated proportions or "
        "percentages. Psychometrika, 12(2), 153-157; Connor, R. J. (1987). Sample size for testing differences "
        "in proportions for the paired-sample design. Biometrics, 43(1), 207-211."
    )
    symbol = "g"
    unit = "pairs"
    groups = 1
    min_n = 2
    exact = False
    effect_model = DiscordantPairs
    example = {"p10": 0.10, "p01": 0.25}
    effect_words = {"p10": "a proportion of pairs with the outcome in condition 1 only of",
                    "p01": "a proportion of pairs with the outcome in condition 2 only of"}
    distributions = ("binary",)

    def effect_size(self, design: DesignBase) -> float:
        require_no_allocation_ratio(design, self)
        return design.effect.p01 / design.effect.discordant - 0.5

    def _delta(self, design: DesignBase, effect_size: float | None) -> float:
        psi = design.effect.discordant
        g = self.effect_size(design) if effect_size is None else effect_size
        g = min(max(g, -0.5 + _EDGE), 0.5 - _EDGE)
        return 2 * g * psi

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        psi = design.effect.discordant
        delta = self._delta(design, effect_size)
        pairs = np.asarray(n, dtype=float)
        tails = 2 if design.alternative == "two-sided" else 1
        z = -special.ndtri(design.alpha / tails)
        spread = math.sqrt(psi - delta * delta)
        up = special.ndtr((delta * np.sqrt(pairs) - z * math.sqrt(psi)) / spread)
        down = special.ndtr((-delta * np.sqrt(pairs) - z * math.sqrt(psi)) / spread)
        if design.alternative == "greater":
            return up
        if design.alternative == "less":
            return down
        return up + down

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        psi = design.effect.discordant
        delta = self._delta(design, effect_size)
        tails = 2 if design.alternative == "two-sided" else 1
        z_alpha, z_beta = -special.ndtri(design.alpha / tails), special.ndtri(design.power)
        return (z_alpha * math.sqrt(psi) + z_beta * math.sqrt(psi - delta * delta)) ** 2 / delta**2  # Connor (1987)

    def simulate(self, design, n, reps, rng, distribution="binary"):  # type: ignore[override]
        """Multinomial pair counts; each replicate is analysed with McNemar's test (z = (c - b)/sqrt(b + c),
        no continuity correction; no discordant pair means no rejection)."""
        effect = design.effect
        counts = rng.multinomial(n, [effect.p10, effect.p01, 1 - effect.discordant], size=reps)
        b, c = counts[:, 0].astype(float), counts[:, 1].astype(float)
        total = b + c
        z = np.divide(c - b, np.sqrt(total), out=np.zeros_like(total), where=total > 0)
        tails = 2 if design.alternative == "two-sided" else 1
        crit = -special.ndtri(design.alpha / tails)
        if design.alternative == "greater":
            return z > crit
        if design.alternative == "less":
            return z < -crit
        return np.abs(z) > crit

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        psi = design.effect.discordant
        delta = self._delta(design, effect_size)
        return {"p10": (psi - delta) / 2, "p01": (psi + delta) / 2, "g": effect_size}

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        return ("the direction compares condition 2 with condition 1: 'greater' means p01 > p10; only discordant "
                "pairs carry information, so the expected discordant proportion matters as much as the difference",)
