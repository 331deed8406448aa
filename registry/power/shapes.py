"""Outcome shapes for Monte Carlo power: normal, lognormal and negative binomial counts.

Every shape is defined by each group's mean and a common SD on the raw (measured) scale,
the two quantities the analytic t-test calculation assumes, so a simulation with a skewed
shape changes the shape only, not the means or the spread:

``normal``
    Normal with the group's mean and SD ``sd``.
``lognormal``
    ``Y = exp(X)``, ``X ~ Normal(mu, s^2)`` with ``s^2 = ln(1 + sd^2 / m^2)`` and
    ``mu = ln(m) - s^2 / 2``, so that ``E[Y] = m`` and ``SD[Y] = sd`` exactly (a group with a
    smaller mean is more skewed: its coefficient of variation ``sd / m`` is larger). Every mean
    must be positive.
``counts``
    Negative binomial counts with mean ``m`` and variance ``sd^2``: shape ``k = m^2 / (sd^2 - m)``
    (variance ``m + m^2 / k``). When ``sd^2`` equals ``m`` the counts are Poisson, drawn as the
    negative binomial with ``k = 1e8`` (variance off by less than ``1e-7`` relative). ``sd^2`` below
    a group's mean is impossible for counts of this kind and is refused.

Reproducibility rule that every simulator follows: draw all random numbers of a chunk in one
generator call, an array of shape ``(reps, units)`` filled one replicate after another, so a
run split into chunks of any size gives exactly the same result as one chunk.

Reference for the lognormal moments: Johnson, N. L., Kotz, S. & Balakrishnan, N. (1994).
*Continuous Univariate Distributions*, vol. 1 (2nd ed.), chapter 14. New York: Wiley.
For the negative binomial as a gamma mixture of Poissons: Johnson, N. L., Kemp, A. W. & Kotz, S.
(2005). *Univariate Discrete Distributions* (3rd ed.), chapter 5. Hoboken, NJ: Wiley.

Examples
--------
>>> mu, s = lognormal_parameters(10.0, 5.0)
>>> round(float(np.exp(mu + s**2 / 2)), 6), round(float(np.sqrt((np.exp(s**2) - 1) * np.exp(2 * mu + s**2))), 6)
(10.0, 5.0)
>>> float(negative_binomial_shape(4.0, 3.0))
3.2
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["SHAPES", "SKEWED", "InvalidSimulation", "lognormal_parameters", "negative_binomial_shape", "draw",
           "baseline_mean"]

#: Every shape prespec can simulate; a family lists the ones its simulator offers.
SHAPES = ("normal", "lognormal", "counts")
#: Shapes whose location matters, so the simulation needs ``simulation.baseline_mean``.
SKEWED = ("lognormal", "counts")

_POISSON_SHAPE = 1e8


class InvalidSimulation(ValueError):
    """A simulation request the chosen shape cannot honour (a non-positive mean, too small an SD...)."""


def lognormal_parameters(mean: float | np.ndarray, sd: float) -> tuple[np.ndarray, np.ndarray]:
    """Log-scale ``(mu, sigma)`` of the lognormal with raw-scale ``mean`` and ``sd``."""
    mean = np.asarray(mean, dtype=float)
    s2 = np.log1p((sd / mean) ** 2)
    return np.log(mean) - s2 / 2, np.sqrt(s2)


def negative_binomial_shape(mean: float | np.ndarray, sd: float) -> np.ndarray:
    """Shape ``k`` of the negative binomial with the given mean and SD (``1e8`` for Poisson)."""
    mean = np.asarray(mean, dtype=float)
    excess = sd**2 - mean
    with np.errstate(divide="ignore"):
        k = np.where(excess > 1e-9 * mean, mean**2 / np.maximum(excess, 1e-300), _POISSON_SHAPE)
    return np.minimum(k, _POISSON_SHAPE)


def _check(distribution: str, means: np.ndarray, sd: float) -> None:
    if distribution not in SHAPES:
        raise InvalidSimulation(f"distribution must be one of {', '.join(SHAPES)}; got {distribution!r}")
    if not math.isfinite(sd) or sd <= 0:
        raise InvalidSimulation(f"the outcome SD must be a positive number; got {sd!r}")
    if distribution in SKEWED and np.any(means <= 0):
        raise InvalidSimulation(
            f"{distribution} outcomes need positive means, but a group's mean would be {float(means.min()):g}; "
            "raise simulation.baseline_mean (the mean of group 1) or check the sign of the difference"
        )
    if distribution == "counts" and np.any(sd**2 < means * (1 - 1e-9)):
        largest = float(means.max())
        raise InvalidSimulation(
            f"counts with mean {largest:g} have SD at least sqrt({largest:g}) = {math.sqrt(largest):.4g} "
            f"(Poisson); the SD {sd:g} is smaller, so counts cannot have these means and this SD"
        )


def baseline_mean(design: object, distribution: str) -> float:
    """``design.simulation.baseline_mean``; 0 for the normal shape when unset, required by skewed shapes."""
    plan = getattr(design, "simulation", None)
    value = getattr(plan, "baseline_mean", None)
    if value is None:
        if distribution in SKEWED:
            raise InvalidSimulation(
                f"the {distribution} shape depends on where the outcome lies: state simulation.baseline_mean, "
                "the mean of group 1 (the null value for one-sample designs)"
            )
        return 0.0
    return float(value)


def draw(rng: np.random.Generator, distribution: str, means: np.ndarray, sd: float, reps: int) -> np.ndarray:
    """``reps`` rows of outcomes, column ``j`` with mean ``means[j]`` and SD ``sd``, in one generator call."""
    means = np.asarray(means, dtype=float)
    _check(distribution, means, sd)
    size = (reps, means.size)
    if distribution == "normal":
        return rng.normal(means, sd, size=size)
    if distribution == "lognormal":
        mu, sigma = lognormal_parameters(means, sd)
        return rng.lognormal(mu, sigma, size=size)
    k = negative_binomial_shape(means, sd)
    return rng.negative_binomial(k, k / (k + means), size=size).astype(float)
