"""k treatment groups against one shared control: Dunnett's many-to-one comparisons."""

from __future__ import annotations

import math
from functools import lru_cache
from typing import Literal

import numpy as np
from pydantic import model_validator
from scipy import special

from .roots import brentq

from .base import DesignBase, EffectBase, Family, InfeasibleDesign, locked
from .restrictions import require_no_allocation_ratio

__all__ = ["ManyToOne", "DoseDifferences", "dunnett_critical", "none_rejected"]

_NODES = 64  # Gauss-Hermite nodes for each of the two integrals (control mean, residual SD)


class DoseDifferences(EffectBase):
    """The expected difference of each treatment group from the shared control, their common ``sd``,
    how large the control group is, and which power the design is sized for."""

    differences: list[float] = locked(
        min_length=1, max_length=50,
        description="Expected mean of each treatment group minus the control mean, in outcome units (one per "
        "treatment group, k in all); at least one non-zero.",
    )
    sd: float = locked(gt=0, description="Common within-group SD, in outcome units.")
    control_allocation: Literal["equal", "sqrt-k"] = locked(
        default="equal",
        description="equal: the control group has n like each treatment group; sqrt-k: it has ceil(sqrt(k) n), "
        "the allocation that maximises the power of many-to-one comparisons (Dunnett 1955).",
    )
    goal: Literal["any", "each"] = locked(
        default="any",
        description="any: power to reject at least one comparison; each: power of the least detectable "
        "comparison (every treatment with its stated difference is detected with at least this power).",
    )

    @model_validator(mode="after")
    def _some_effect(self) -> "DoseDifferences":
        if not all(math.isfinite(x) for x in self.differences):
            raise ValueError("differences must be finite numbers")
        if not any(self.differences):
            raise ValueError("differences are all 0: no sample size can detect a zero difference")
        if self.goal == "each" and not all(self.differences):
            raise ValueError("goal 'each' needs every difference non-zero: a treatment with difference 0 "
                             "cannot be detected; remove it or use goal 'any'")
        return self

    @property
    def k(self) -> int:
        return len(self.differences)

    def control_ratio(self) -> float:
        """n0 / n: 1, or sqrt(k)."""
        return 1.0 if self.control_allocation == "equal" else math.sqrt(self.k)


@lru_cache(maxsize=1)
def _hermite() -> tuple[np.ndarray, np.ndarray]:
    x, w = special.roots_hermitenorm(_NODES)
    return x, w / math.sqrt(2 * math.pi)


def _grids(df: float) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Quadrature over the standardized control deviation W ~ N(0, 1) and the SD ratio V = s / sigma
    (``sqrt(chi2_df / df)``), both by Gauss-Hermite on a standard normal scale (V through its quantile
    function, a smooth function of a normal deviate)."""
    z, w = _hermite()
    chi = np.sqrt(special.chdtri(df, special.ndtr(-z)) / df) if math.isfinite(df) else np.ones_like(z)
    return z, w, chi, w


def none_rejected(crit: float, shifts: np.ndarray, rho: float, df: float, two_sided: bool) -> float:
    """P(no T_i beyond ``crit``) for T_i = (Z_i + shift_i) / V, the Z_i standard normal with common
    correlation ``rho`` (from the shared control), V = s / sigma on ``df`` degrees of freedom.

    Conditional on the control's deviation W and on V the comparisons are independent:
    ``Z_i = sqrt(1 - rho) U_i - sqrt(rho) W``; the two outer integrals are done by quadrature.
    """
    normal, wn, chi, wc = _grids(df)
    a, b = math.sqrt(rho), math.sqrt(1 - rho)
    upper = (crit * chi[:, None, None] - shifts[None, None, :] + a * normal[None, :, None]) / b
    inside = special.ndtr(upper)
    if two_sided:
        inside = inside - special.ndtr(upper - 2 * crit * chi[:, None, None] / b)
    joint = np.prod(inside, axis=2)
    return float(wc @ joint @ wn)


@lru_cache(maxsize=4096)
def dunnett_critical(k: int, rho: float, df: float, alpha: float, two_sided: bool) -> float:
    """Dunnett's critical value: P(max |T_i| < c) = 1 - alpha under H0 (``max T_i`` one-sided).

    >>> round(dunnett_critical(3, 0.5, math.inf, 0.05, True), 2)  # Dunnett (1955) table, df = infinity
    2.35
    """
    zero = np.zeros(k)
    return brentq(lambda c: none_rejected(c, zero, rho, df, two_sided) - (1 - alpha), 0.0, 40.0,
                           xtol=1e-10)


class ManyToOne(Family):
    """Power of Dunnett's many-to-one comparisons of k treatment groups with one control.

    Each treatment group has ``n`` units, the control ``n0 = n`` or ``ceil(sqrt(k) n)``. With the
    pooled SD on ``df = k n + n0 - (k + 1)``, comparison i has ``T_i = (ybar_i - ybar_0) / (s sqrt(1/n +
    1/n0))``; the T_i share the control mean, so their correlation is ``rho = n / (n + n0)``.
    Dunnett's critical value c solves ``P(max |T_i| < c) = 1 - alpha`` under H0 (one-sided: ``max T_i``),
    from the multivariate t. Power for *any* is ``1 - P(no |T_i| > c)`` under the stated shifts
    ``delta_i / (sigma sqrt(1/n + 1/n0))``; for *each* it is the smallest marginal power
    ``P(|T_i| > c)``, from the noncentral t. Both integrals (the control's deviation and the residual
    SD) are computed by Gauss-Hermite quadrature (critical values agree with the t quantile for k = 1
    to about 1e-10), so the power is exact up to that numerical error. The standardized effect is ``d`` of the largest difference; what-if effects scale
    every difference by the same factor.

    References: Dunnett, C. W. (1955). A multiple comparison procedure for comparing several
    treatments with a control. *Journal of the American Statistical Association*, 50(272),
    1096-1121. Dunnett, C. W. (1964). New tables for multiple comparisons with a control.
    *Biometrics*, 20(3), 482-491.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("many-to-one", differences=[4.0, 6.0, 8.0], sd=8.0)
    SampleSize(test='many-to-one', n_per_group=19, n_total=76, achieved_power=0.8077)
    """

    name = "many-to-one"
    title = "Treatments against a shared control (Dunnett's many-to-one comparisons)"
    method = ("exact power of Dunnett's test from the multivariate t (two integrals by quadrature); "
              "noncentral t for each comparison")
    reference = (
        "Dunnett, C. W. (1955). A multiple comparison procedure for comparing several treatments with a control. "
        "Journal of the American Statistical Association, 50(272), 1096-1121; Dunnett, C. W. (1964). New tables "
        "for multiple comparisons with a control. Biometrics, 20(3), 482-491."
    )
    symbol = "d"
    unit = "per treatment group"
    groups = 2  # k + 1; group_sizes gives the control first
    effect_model = DoseDifferences
    example = {"differences": [4.0, 6.0, 8.0], "sd": 8.0}
    effect_words = {"differences": "treatment-minus-control differences of", "control_allocation":
                    "a control allocation of", "goal": "power for"}

    def effect_size(self, design: DesignBase) -> float:
        require_no_allocation_ratio(design, self)
        diffs = design.effect.differences
        largest = max(diffs, key=abs)
        if design.alternative != "two-sided":
            wrong = [x for x in diffs if (x < 0 if design.alternative == "greater" else x > 0)]
            if wrong:
                raise InfeasibleDesign(
                    f"alternative {design.alternative!r} tests every treatment in one direction, but differences "
                    f"{', '.join(f'{x:g}' for x in wrong)} point the other way; use two-sided or check the signs",
                    "design.alternative")
        return largest / design.effect.sd

    def _control(self, design: DesignBase, n: int) -> int:
        return n if design.effect.control_allocation == "equal" else math.ceil(design.effect.control_ratio() * n - 1e-9)

    def group_sizes(self, design: DesignBase, n: int) -> tuple[int, ...]:
        return (self._control(design, n),) + (n,) * design.effect.k

    def _at(self, design: DesignBase, n: int, es: float) -> float:
        effect = design.effect
        k, n0 = effect.k, self._control(design, n)
        df = k * n + n0 - (k + 1)
        rho = n / (n + n0)
        two_sided = design.alternative == "two-sided"
        crit = dunnett_critical(k, round(rho, 12), float(df), design.alpha, two_sided)
        base = self.effect_size(design)
        d = np.asarray(effect.differences, dtype=float) / effect.sd * (es / base)
        if design.alternative == "less":
            d = -d
        shifts = d / math.sqrt(1 / n + 1 / n0)
        if effect.goal == "any":
            return 1.0 - none_rejected(crit, shifts, rho, df, two_sided)
        smallest = float(np.min(np.abs(shifts))) if two_sided else float(np.min(shifts))
        upper = 1.0 - special.nctdtr(df, smallest, crit)
        lower = special.nctdtr(df, smallest, -crit) if two_sided else 0.0
        return float(upper + lower)

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        sizes = np.atleast_1d(np.asarray(n, dtype=float))
        return np.array([self._at(design, int(m), es) for m in sizes]).reshape(np.shape(n))

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        effect = design.effect
        tails = 2 if design.alternative == "two-sided" else 1
        z = -special.ndtri(design.alpha / (tails * effect.k)) + special.ndtri(design.power)  # Bonferroni start
        return z * z * (1 + 1 / effect.control_ratio()) / effect_size**2

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Normal outcomes in the control and each treatment group; each replicate is analysed with
        Dunnett's test (pooled SD, the critical value above): for goal *any*, whether any comparison is
        rejected; for *each*, whether the least detectable comparison is."""
        effect = design.effect
        k, n0 = effect.k, self._control(design, n)
        df = k * n + n0 - (k + 1)
        rho = n / (n + n0)
        two_sided = design.alternative == "two-sided"
        crit = dunnett_critical(k, round(rho, 12), float(df), design.alpha, two_sided)
        control = rng.normal(0.0, effect.sd, size=(reps, n0))
        treated = rng.normal(0.0, effect.sd, size=(reps, k, n)) + np.asarray(effect.differences)[None, :, None]
        ss = ((control - control.mean(axis=1, keepdims=True)) ** 2).sum(axis=1) + \
            ((treated - treated.mean(axis=2, keepdims=True)) ** 2).sum(axis=(1, 2))
        s = np.sqrt(ss / df)
        t = (treated.mean(axis=2) - control.mean(axis=1)[:, None]) / (s[:, None] * math.sqrt(1 / n + 1 / n0))
        if design.alternative == "greater":
            rejected = t > crit
        elif design.alternative == "less":
            rejected = t < -crit
        else:
            rejected = np.abs(t) > crit
        if effect.goal == "any":
            return rejected.any(axis=1)
        return rejected[:, int(np.argmin(np.abs(effect.differences)))]

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        return {"largest_difference": effect_size * design.effect.sd, "d": effect_size}

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        effect = design.effect
        what = ("at least one treatment differs from the control" if effect.goal == "any"
                else "each treatment with its stated difference is detected")
        return (f"{effect.k} treatments against one control by Dunnett's test (familywise alpha {design.alpha:g}); "
                f"power is the chance that {what}; control group: {effect.control_allocation}",)
