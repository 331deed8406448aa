"""One-way analysis of variance: k groups of equal size, the overall F test."""

from __future__ import annotations

import math

import numpy as np
from pydantic import model_validator
from .lazy import stats  # loaded on first use

from .base import DesignBase, EffectBase, Family, locked
from .noncentral_f import f_test_power, required_noncentrality
from .restrictions import require_no_allocation_ratio, require_two_sided

__all__ = ["OneWayAnova", "GroupMeans"]


class GroupMeans(EffectBase):
    """Cohen's ``f`` with the number of ``groups``, or the expected group ``means`` with their common ``sd``."""

    groups: int | None = locked(default=None, ge=2, le=1000,
                                description="Number of groups k (at least 2); implied by means when given.")
    f: float | None = locked(default=None, gt=0, description="Cohen's f: SD of the group means / within-group SD.")
    means: list[float] | None = locked(default=None, min_length=2, max_length=1000,
                                       description="Expected mean of each group, in outcome units (instead of f).")
    sd: float | None = locked(default=None, gt=0, description="Common within-group SD, in outcome units (with means).")

    @model_validator(mode="after")
    def _one_way_to_state_the_effect(self) -> "GroupMeans":
        if self.f is not None and (self.means is not None or self.sd is not None):
            raise ValueError("give either f with groups, or means with sd, not both")
        if self.f is None:
            if self.means is None or self.sd is None:
                missing = "sd" if self.means is not None else "means" if self.sd is not None else "f with groups"
                raise ValueError(f"{missing} is missing: give f with groups, or the group means with a common sd")
            if self.groups is not None and self.groups != len(self.means):
                raise ValueError(f"groups ({self.groups}) disagrees with the {len(self.means)} means given")
            if not all(math.isfinite(m) for m in self.means):
                raise ValueError("means must be finite numbers")
            if max(self.means) == min(self.means):
                raise ValueError("means are all equal: no sample size can detect a zero difference")
        elif self.groups is None:
            raise ValueError("groups is missing: f needs the number of groups (at least 2)")
        return self

    @property
    def k(self) -> int:
        return len(self.means) if self.means is not None else int(self.groups)  # type: ignore[arg-type]

    def cohens_f(self) -> float:
        if self.f is not None:
            return self.f
        means = np.asarray(self.means, dtype=float)
        return float(np.sqrt(np.mean((means - means.mean()) ** 2)) / self.sd)


class OneWayAnova(Family):
    """Power of the one-way ANOVA F test with ``k`` groups of ``n`` analysable units each.

    With ``N = k n``, the F statistic follows a noncentral F with ``df1 = k - 1``,
    ``df2 = N - k`` and noncentrality ``lambda = f^2 N``, where Cohen's
    ``f = sqrt(mean((mu_i - mu)^2)) / sigma``. The test has no direction: only two-sided.

    Reference: Cohen, J. (1988). *Statistical Power Analysis for the Behavioral Sciences*
    (2nd ed.), chapter 8 (F tests on means in the analysis of variance). Hillsdale, NJ:
    Lawrence Erlbaum.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("one-way-anova", f=0.25, groups=4)
    SampleSize(test='one-way-anova', n_per_group=45, n_total=180, achieved_power=0.8040)
    """

    name = "one-way-anova"
    title = "One-way ANOVA (F test, equal group sizes)"
    undirected = "F"
    method = "exact power from the noncentral F distribution, lambda = f^2 N, df = (k - 1, N - k)"
    reference = (
        "Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences (2nd ed.), "
        "chapter 8. Hillsdale, NJ: Lawrence Erlbaum."
    )
    symbol = "f"
    unit = "per group"
    groups = 2  # at least two; group_sizes gives the design's k
    effect_model = GroupMeans
    example = {"f": 0.25, "groups": 4}

    def effect_size(self, design: DesignBase) -> float:
        require_two_sided(design, self)
        require_no_allocation_ratio(design, self)
        return design.effect.cohens_f()

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        k = design.effect.k
        total = k * np.asarray(n, dtype=float)
        return f_test_power(es**2 * total, k - 1, total - k, design.alpha)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        # Large-sample start: the noncentral chi-square on k - 1 df that reaches the power, lambda = f^2 k n.
        k = design.effect.k
        return required_noncentrality(k - 1, design.alpha, design.power) / (effect_size**2 * k) + 1

    def group_sizes(self, design: DesignBase, n: int) -> tuple[int, ...]:
        return (n,) * design.effect.k

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        effect = design.effect
        k = effect.k
        if effect.means is not None:
            centres = (np.asarray(effect.means, dtype=float) - np.mean(effect.means)) / effect.sd
        else:  # equally spaced means with SD f: the F test's power depends on f alone
            spaced = np.arange(k, dtype=float) - (k - 1) / 2
            centres = effect.f * spaced / np.sqrt(np.mean(spaced**2))
        data = rng.normal(size=(reps, k, n)) + centres[None, :, None]
        p = stats.f_oneway(*(data[:, j, :] for j in range(k)), axis=1).pvalue
        return p < design.alpha

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        effect = design.effect
        if effect.sd is not None:
            return {"sd_of_means": effect_size * effect.sd, "f": effect_size}
        return {"f": effect_size}
