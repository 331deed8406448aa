"""What the rank-test families share: efficiency relative to the t-test, and the shapes they assume."""

from __future__ import annotations

import math
from typing import Literal

import numpy as np
from pydantic import model_validator
from .lazy import integrate, stats  # loaded on first use
from .roots import brentq

from .base import EffectBase, locked
from .mean_difference import _require_difference_or_d

__all__ = ["ARE", "Shape", "RankShift", "standardized_sample", "superiority_shift", "t_equivalent_n"]

Shape = Literal["normal", "logistic", "laplace", "uniform"]

#: Asymptotic relative efficiency of the Wilcoxon rank tests (signed-rank and rank-sum alike)
#: against the t-test for a shift in each distribution: 3/pi, pi^2/9, 3/2, 1.
#: Lehmann, E. L. (1975). Nonparametrics: Statistical Methods Based on Ranks, ch. 2 section 4 and
#: ch. 4 section 2. San Francisco: Holden-Day.
ARE: dict[str, float] = {
    "normal": 3 / math.pi,
    "logistic": math.pi**2 / 9,
    "laplace": 1.5,
    "uniform": 1.0,
}

# Each shape with mean 0 and SD 1: (scipy.stats distribution, scale)
_SCALED = {
    "normal": ("norm", 1.0),
    "logistic": ("logistic", math.sqrt(3) / math.pi),
    "laplace": ("laplace", 1 / math.sqrt(2)),
    "uniform": ("uniform", 2 * math.sqrt(3)),
}


class RankShift(EffectBase):
    """A shift ``difference`` with the outcome's ``sd`` (or a standardized ``d``), and the
    ``distribution`` the outcome is assumed to follow, which sets the efficiency of the rank test."""

    difference: float | None = locked(
        default=None, description="Shift to detect, in outcome units (signed for one-sided tests)."
    )
    sd: float | None = locked(default=None, gt=0, description="Standard deviation of the outcome, in outcome units.")
    d: float | None = locked(default=None, description="Standardized shift (difference / sd), instead of difference + sd.")
    distribution: Shape = locked(
        default="normal",
        description="Assumed shape of the outcome: normal, logistic, laplace or uniform; sets the rank test's "
        "efficiency relative to the t-test (3/pi, pi^2/9, 1.5, 1).",
    )

    @model_validator(mode="after")
    def _one_way_to_state_the_shift(self) -> "RankShift":
        if not self._other_scale_given():
            _require_difference_or_d(self, self.sd is not None, "sd")
        return self

    def _other_scale_given(self) -> bool:
        return False

    def standardized(self) -> float:
        if self.d is not None:
            return self.d
        assert self.difference is not None and self.sd is not None
        return self.difference / self.sd

    @property
    def efficiency(self) -> float:
        return ARE[self.distribution]

    def caveat(self, what: str) -> str:
        """The note every ARE-based size carries (``slow_convergence`` adds a warning where it is needed)."""
        text = (f"sized by the asymptotic relative efficiency for {what} ({self.efficiency:.4f}); ARE is a "
                "large-sample result, so the size is approximate: confirm it by simulation with the rank test")
        return text

    def slow_convergence(self) -> str:
        """The warning for distributions whose rank tests reach their ARE slowly (measured by simulation)."""
        if self.distribution in ("laplace", "uniform"):
            return (f"For {self.distribution} outcomes the rank tests reach their ARE slowly and the real power at "
                    "this n is below the target, the more so the smaller n: add a design.simulation block to "
                    "measure it and raise n until the simulated power reaches the target")
        return ""


def t_equivalent_n(n: np.ndarray, efficiency: float) -> np.ndarray:
    """The t-test n a rank test with ``n`` units is worth: ``floor(n x ARE)``.

    So the rank test's n is ``ceil(n_t / ARE)``, the smallest n worth the t-test's ``n_t``.

    >>> t_equivalent_n(np.array([67, 68]), ARE["normal"]).tolist()
    [63.0, 64.0]
    """
    return np.floor(np.asarray(n, dtype=float) * efficiency + 1e-9)


def standardized_sample(shape: str, rng: np.random.Generator, size: tuple[int, ...]) -> np.ndarray:
    """Draws from ``shape`` with mean 0 and SD 1."""
    if shape == "normal":
        return rng.standard_normal(size)
    if shape == "logistic":
        return rng.logistic(0.0, math.sqrt(3) / math.pi, size)
    if shape == "laplace":
        return rng.laplace(0.0, 1 / math.sqrt(2), size)
    if shape == "uniform":
        return rng.uniform(-math.sqrt(3), math.sqrt(3), size)
    raise ValueError(f"distribution must be one of {', '.join(ARE)}; got {shape!r}")


def _superiority(shape: str, shift: float) -> float:
    """P(X + shift > X') for independent X, X' of ``shape`` (mean 0, SD 1)."""
    name, scale = _SCALED[shape]
    dist = getattr(stats, name)
    loc = -scale / 2 if shape == "uniform" else 0.0
    frozen = dist(loc=loc, scale=scale)
    low, high = frozen.ppf(1e-12), frozen.ppf(1 - 1e-12)
    value, _ = integrate.quad(lambda x: frozen.pdf(x) * frozen.cdf(x + shift), low, high, limit=200)
    return value


def superiority_shift(shape: str, p_superiority: float) -> float:
    """The shift (in SDs) at which ``P(Y > X) = p_superiority`` when Y is X shifted, X of ``shape``.

    >>> round(superiority_shift("normal", 0.6381631), 4)  # Phi(0.5 / sqrt(2)) for d = 0.5
    0.5
    """
    return brentq(lambda s: _superiority(shape, s) - p_superiority, -20.0, 20.0, xtol=1e-12)
