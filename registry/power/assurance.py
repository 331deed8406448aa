"""Assurance: the probability of a significant result averaged over what is uncertain in the design.

Power assumes the effect and the SD are known. ``design.assurance`` gives them distributions: a
normal prior for the effect (in the effect's own units: the difference, or d) and, for the SD, a
scaled inverse chi-square with ``df`` degrees of freedom around ``sd`` (what a pilot of ``df + 1``
units gives: ``sigma^2 = df s^2 / X`` with ``X ~ chi-square(df)``). Assurance is

    A(n) = E[ P(reject H0 in the planned direction | n, delta, sigma) ]

computed by Simpson's rule over the effect and tanh-sinh (double-exponential) quadrature over
the chi-square probability scale, with the family's exact power. (On that scale the integrand
changes fastest at both ends, where Gauss-Legendre converges slowly: 48 of its nodes left errors
up to 1e-4; 33 tanh-sinh nodes leave below 1e-7 from 5 degrees of freedom on, and 81 below 1e-7
for 1 to 4, ``tests/test_assurance.py``.) Only rejections in the planned
direction count (for a two-sided test: the tail of the planned effect at alpha / 2), so
harmful effects in the prior never count as successes. With a known SD and a z-test the
integral has the closed form ``Phi((m - z se) / sqrt(se^2 + s^2))`` (O'Hagan, Stevens & Campbell
2005), which the tests use to check the quadrature.

References: O'Hagan, A., Stevens, J. W., & Campbell, M. J. (2005). Assurance in clinical trial
design. *Pharmaceutical Statistics*, 4(3), 187-201. Spiegelhalter, D. J., Abrams, K. R., & Myles,
J. P. (2004). *Bayesian Approaches to Clinical Trials and Health-Care Evaluation*, section 6.5.
Chichester: Wiley. Takahasi, H., & Mori, M. (1974). Double exponential formulas for numerical
integration. *Publications of the Research Institute for Mathematical Sciences*, 9(3), 721-741.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Callable

import numpy as np
from pydantic import BaseModel, ConfigDict, model_validator

from .fields import locked

__all__ = ["AssurancePlan", "EffectPrior", "SdPrior", "ASSURANCE_FAMILIES", "Assurance", "assurance_of",
           "integrate", "design_assurance", "with_pilot"]

#: Families whose effect is a mean difference with an SD (``design.effect`` of the t-tests).
ASSURANCE_FAMILIES = ("one-sample-t", "paired-t", "two-sample-t")

_HERMITE = 64
#: Simpson's rule over the effect prior: its range in prior SDs each side and the fewest intervals
#: (at most 1e-9 from a rule of 12 SDs each side and 4,000 intervals, over 300 random t-test designs)
_PRIOR_SDS, _SIMPSON_MIN = 8, 80
#: tanh-sinh nodes for the SD prior: the step in t (33 nodes; with fewer than 5 degrees of freedom
#: the power can change within a sliver of the probability scale, so 81) and the half-width, where
#: the outermost weights are below 1e-15 of the whole
_TANH_SINH_STEP, _TANH_SINH_STEP_FEW_DF, _TANH_SINH_HALF_WIDTH = 0.2, 0.08, 3.2


class EffectPrior(BaseModel):
    """A normal prior for the effect, in the units the effect is given in (difference or d)."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)

    mean: float = locked(description="Prior mean of the effect (outcome units, or d when the effect is d).")
    sd: float = locked(gt=0, description="Prior SD of the effect, above 0, in the same units.")


class SdPrior(BaseModel):
    """A scaled inverse chi-square for the outcome SD: ``sigma^2 = df sd^2 / chi-square(df)``."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)

    df: int | None = locked(
        default=None, ge=1, le=100_000, description="Degrees of freedom of the SD estimate (pilot n - 1), 1 or more."
    )
    sd: float | None = locked(default=None, gt=0, description="Scale (the pilot SD); by default design.effect.sd.")
    from_pilot: bool = locked(
        default=False,
        description="Take df (n - 1) and sd from the data file of design.pilot, read by check, instead of df.",
    )

    @model_validator(mode="after")
    def _df_or_pilot(self) -> "SdPrior":
        if self.from_pilot and self.df is not None:
            raise ValueError("give df or from_pilot: true, not both")
        if not self.from_pilot and self.df is None:
            raise ValueError("give df (the pilot n - 1) or from_pilot: true (read it from design.pilot)")
        return self


class AssurancePlan(BaseModel):
    """``design.assurance``: priors for the effect and the SD, and an optional target."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)

    effect_prior: EffectPrior | None = locked(
        default=None, description="Normal prior for the effect: mean and sd (default: the design's effect, known)."
    )
    sd_prior: SdPrior | None = locked(
        default=None, description="Uncertainty of the SD: df (pilot n - 1) and optionally sd (default: known SD).",
    )
    target: float | None = locked(
        default=None, description="Also find the smallest n whose assurance reaches this, in (0, 1).",
    )

    @model_validator(mode="after")
    def _something_uncertain(self) -> "AssurancePlan":
        if self.effect_prior is None and self.sd_prior is None:
            raise ValueError("give effect_prior, sd_prior or both: with both known, assurance is the power")
        if self.target is not None and not (math.isfinite(self.target) and 0 < self.target < 1):
            raise ValueError(f"target must be in (0, 1); got {self.target!r}")
        return self


def integrate(power_of: Callable[[np.ndarray], np.ndarray], effect_mean: float, effect_sd: float,
              sd: float, df: int | None, width: float | None = None) -> float:
    """``E[power_of(delta / sigma)]`` for ``delta ~ N(effect_mean, effect_sd^2)`` and ``sigma`` fixed at
    ``sd`` (``df`` None) or ``sigma^2 = df sd^2 / chi-square(df)``. ``power_of`` takes standardized effects.

    ``width`` is the standardized-effect scale over which power rises (about ``1 / sqrt(n)``): with
    it the effect is integrated by Simpson's rule over 8 prior SDs each side (the prior mass beyond
    is 1e-15) on a step of at most a quarter of that scale (power can rise much faster than the
    prior changes) and at least 80 intervals; without it by
    64-point Gauss-Hermite quadrature. The SD prior is integrated over the chi-square probability
    scale by tanh-sinh quadrature (:func:`_probability_nodes`).

    >>> from scipy.special import ndtr
    >>> round(integrate(lambda d: ndtr(d * 5 - 1.96), 0.5, 0.0, 1.0, None), 6) == round(float(ndtr(0.54)), 6)
    True
    """
    from scipy import special

    if effect_sd > 0 and width is not None:
        lo, hi = effect_mean - _PRIOR_SDS * effect_sd, effect_mean + _PRIOR_SDS * effect_sd
        m = int(min(max(math.ceil((hi - lo) / (width * sd / 4)), _SIMPSON_MIN), 20_000))
        m += m % 2
        deltas = np.linspace(lo, hi, m + 1)
        simpson = np.ones(m + 1)
        simpson[1:-1:2], simpson[2:-1:2] = 4.0, 2.0
        dw = simpson * (hi - lo) / (3 * m) * np.exp(-0.5 * ((deltas - effect_mean) / effect_sd) ** 2) / (
            effect_sd * math.sqrt(2 * math.pi))
    elif effect_sd > 0:
        x, w = np.polynomial.hermite_e.hermegauss(_HERMITE)
        deltas, dw = effect_mean + effect_sd * x, w / math.sqrt(2 * math.pi)
    else:
        deltas, dw = np.array([effect_mean]), np.array([1.0])
    if df is None:
        sigmas, sw = np.array([sd]), np.array([1.0])
    else:
        p, q, sw = _probability_nodes(_TANH_SINH_STEP if df >= 5 else _TANH_SINH_STEP_FEW_DF)
        # the chi-square quantile at p, from whichever tail keeps full precision
        chi = np.where(p < 0.5, 2 * special.gammaincinv(df / 2, p), special.chdtri(df, q))
        sigmas = sd * np.sqrt(df / chi)
    es = (deltas[:, None] / sigmas[None, :]).ravel()
    weights = (dw[:, None] * sw[None, :]).ravel()
    return float(np.asarray(power_of(es), dtype=float) @ weights)


@lru_cache(maxsize=4)
def _probability_nodes(step: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Tanh-sinh nodes on (0, 1): ``p = 1 / (1 + exp(-pi sinh t))`` at ``t = -3.2, -3.2 + step, ...,
    3.2``, with ``q = 1 - p`` computed without cancellation and weights ``step pi cosh(t) p q``
    (dp/dt times the step), Takahasi & Mori (1974). The weights sum to 1 within 1e-12.

    >>> p, q, w = _probability_nodes(0.2)
    >>> len(p), round(float(w.sum()), 12), bool(p[0] < 1e-16 and q[-1] < 1e-16)
    (33, 1.0, True)
    """
    from scipy import special

    t = np.linspace(-_TANH_SINH_HALF_WIDTH, _TANH_SINH_HALF_WIDTH, int(round(2 * _TANH_SINH_HALF_WIDTH / step)) + 1)
    u = math.pi * np.sinh(t)
    p, q = special.expit(u), special.expit(-u)
    nodes = (p, q, step * math.pi * np.cosh(t) * p * q)
    for array in nodes:  # shared by every call (cached): nobody may change them
        array.setflags(write=False)
    return nodes


@dataclass(frozen=True)
class Assurance:
    """Assurance at an n, its limit as n grows, and the n reaching a target (if asked)."""

    n_per_group: int
    assurance: float
    power: float
    limit: float
    target: float | None = None
    n_for_target: int | None = None
    method: str = ("Simpson (effect prior) x tanh-sinh (SD prior) quadrature of the exact power, "
                   "rejections in the planned direction only")

    def to_dict(self) -> dict[str, Any]:
        return {"n_per_group": self.n_per_group, "assurance": self.assurance, "power": self.power,
                "limit": self.limit, "target": self.target, "n_for_target": self.n_for_target,
                "method": self.method}


def InfeasibleDesignLater(message: str) -> Exception:  # noqa: N802 - builds the family-layer error lazily
    from .base import InfeasibleDesign

    return InfeasibleDesign(message, "design.assurance.sd_prior")


def with_pilot(design: Any, n: int, sd: float) -> Any:
    """``design`` with ``sd_prior.from_pilot`` resolved to ``df = n - 1`` and the pilot SD (unless sd is given)."""
    plan: AssurancePlan = design.assurance
    prior = plan.sd_prior
    resolved = SdPrior(df=max(1, n - 1), sd=prior.sd if prior.sd is not None else sd)
    return design.model_copy(update={"assurance": plan.model_copy(update={"sd_prior": resolved})})


def _directional(design: Any) -> Any:
    """The design whose power is the probability of rejecting in the planned direction."""
    if design.alternative != "two-sided":
        return design
    es = design.family.effect_size(design)
    return design.model_copy(update={"alternative": "greater" if es > 0 else "less", "alpha": design.alpha / 2})


def _priors(design: Any) -> tuple[float, float, float, int | None, bool]:
    """``(effect mean, effect sd, sd, df, effect_is_d)`` in the units the effect is given in."""
    plan: AssurancePlan = design.assurance
    effect = design.effect
    is_d = effect.d is not None
    mean = effect.d if is_d else effect.difference
    spread = 0.0
    if plan.effect_prior is not None:
        mean, spread = plan.effect_prior.mean, plan.effect_prior.sd
    sd = 1.0 if is_d else effect.sd
    df = None
    if plan.sd_prior is not None:
        if plan.sd_prior.df is None:
            raise InfeasibleDesignLater("design.assurance.sd_prior.from_pilot needs the pilot data, which only check "
                                        "reads; give df (the pilot n - 1) here")
        df = plan.sd_prior.df
        if plan.sd_prior.sd is not None:
            sd = plan.sd_prior.sd
    return mean, spread, sd, df, is_d


def assurance_of(design: Any, n: int) -> float:
    """Assurance of ``design`` (with ``design.assurance``) at ``n`` analysable units per group."""
    tested = _directional(design.as_tested())
    family = design.family
    mean, spread, sd, df, _ = _priors(design)
    units = n if design.cluster is None else math.floor(n / design.design_effect + 1e-9)

    def power_of(es: np.ndarray) -> np.ndarray:
        return family.power(tested, np.full(es.shape, float(units)), es)

    width = math.sqrt((1 + 1 / design.allocation_ratio) / units) if family.groups == 2 else math.sqrt(1 / units)
    return integrate(power_of, mean, spread, sd, df, width)


def _limit(design: Any) -> float:
    """Assurance as n grows without bound: the prior probability of an effect in the planned direction."""
    from scipy import special

    mean, spread, _, _, _ = _priors(design)
    tested = _directional(design.as_tested())
    sign = 1.0 if tested.alternative == "greater" else -1.0
    if spread == 0:
        return 1.0 if sign * mean > 0 else 0.0
    return float(special.ndtr(sign * mean / spread))


def design_assurance(design: Any, n: int) -> Assurance:
    """Assurance at ``n``, the power there, and the n for ``design.assurance.target`` when given."""
    from .base import InfeasibleDesign
    from .solve import power_of, smallest_n_pointwise

    plan: AssurancePlan = design.assurance
    value = assurance_of(design, n)
    power = float(power_of(design, [n])[0])
    limit = _limit(design)
    n_target = None
    if plan.target is not None:
        if plan.target >= limit - 1e-9:
            raise InfeasibleDesign(
                f"no n reaches assurance {plan.target:g}: as n grows assurance approaches {limit:.3f}, the prior "
                "probability that the effect lies in the planned direction; lower the target or narrow the prior",
                "design.assurance.target")
        grid = lambda ns: np.array([assurance_of(design, int(k)) for k in ns])  # noqa: E731
        n_target, _ = smallest_n_pointwise(grid, plan.target, float(n), design.family.min_n)
    return Assurance(n_per_group=n, assurance=value, power=power, limit=limit, target=plan.target,
                     n_for_target=n_target)
