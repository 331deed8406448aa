"""Factorial ANOVA: between-subject factors crossed in equal cells, the F test of one named term."""

from __future__ import annotations

import itertools
import math
from typing import Annotated

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, model_validator
from .lazy import stats  # loaded on first use

from .base import DesignBase, EffectBase, Family, locked
from .noncentral_f import f_test_power, required_noncentrality
from .restrictions import require_no_allocation_ratio, require_two_sided

__all__ = ["FactorialAnova", "FactorialEffect", "Factor", "term_components", "term_names"]

FactorName = Annotated[str, Field(pattern=r"^[A-Za-z][A-Za-z0-9_]{0,39}$")]


class Factor(BaseModel):
    """One between-subject factor: its ``name`` and number of ``levels``."""

    model_config = ConfigDict(extra="forbid", strict=True)

    name: FactorName = locked(description="Factor name: a letter, then letters, digits or _ (at most 40).")
    levels: int = locked(ge=2, le=100, description="Number of levels of the factor, at least 2.")


def term_names(factors: list[Factor]) -> list[str]:
    """Every main effect and interaction, main effects first, names joined by ':' in factor order."""
    names = [f.name for f in factors]
    return [":".join(c) for r in range(1, len(names) + 1) for c in itertools.combinations(names, r)]


def term_components(means: np.ndarray, axes: tuple[int, ...], lead: int = 0) -> np.ndarray:
    """The part of a balanced table of cell means that belongs to the term over ``axes`` (factor axes
    counted after ``lead`` leading axes): ``sum over T subset of S of (-1)^(|S| - |T|) M_T``, with
    ``M_T`` the mean over the factor axes outside T (the usual balanced-ANOVA decomposition).

    >>> table = np.array([[1.0, 3.0], [2.0, 8.0]])
    >>> term_components(table, (0, 1)).tolist()  # the interaction of a 2 x 2 table
    [[1.0, -1.0], [-1.0, 1.0]]
    """
    factor_axes = tuple(range(lead, means.ndim))
    out = np.zeros_like(means)
    chosen = tuple(lead + a for a in axes)
    for r in range(len(chosen) + 1):
        for subset in itertools.combinations(chosen, r):
            outside = tuple(a for a in factor_axes if a not in subset)
            marginal = means.mean(axis=outside, keepdims=True) if outside else means
            out = out + (-1) ** (len(chosen) - r) * marginal
    return out


class FactorialEffect(EffectBase):
    """The ``factors``, the ``primary`` term, and the effect as cell ``means`` with their ``sd`` or as
    Cohen's ``f`` of each term."""

    factors: list[Factor] = locked(min_length=1, max_length=6,
                                   description="The between-subject factors, each with its name and levels.")
    primary: str = locked(description="The term the claim rests on: a factor name (main effect) or names joined "
                          "by ':' in factor order (interaction), e.g. genotype:diet.")
    means: list[float] | None = locked(
        default=None, min_length=2, max_length=10_000,
        description="Expected mean of every cell, in outcome units, the last factor's levels varying fastest "
        "(a 2 x 3 design lists A1B1, A1B2, A1B3, A2B1, ...).",
    )
    sd: float | None = locked(default=None, gt=0, description="Common within-cell SD, in outcome units (with means).")
    f: dict[str, float] | None = locked(
        default=None, description="Cohen's f of terms (instead of means and sd): term name -> f; must include the "
        "primary term.",
    )

    @model_validator(mode="after")
    def _consistent(self) -> "FactorialEffect":
        names = [f.name for f in self.factors]
        if len(set(names)) != len(names):
            raise ValueError(f"factor names must differ; got {', '.join(names)}")
        terms = term_names(self.factors)
        if self.primary not in terms:
            raise ValueError(f"primary {self.primary!r} is not a term of these factors; choose one of "
                             f"{', '.join(terms)}")
        if self.f is not None:
            if self.means is not None or self.sd is not None:
                raise ValueError("give either f (per term), or means with sd, not both")
            unknown = [t for t in self.f if t not in terms]
            if unknown:
                raise ValueError(f"f names terms {', '.join(map(repr, unknown))} that are not terms of these factors; "
                                 f"terms: {', '.join(terms)}")
            if self.primary not in self.f:
                raise ValueError(f"f must give the primary term {self.primary!r}")
            bad = [t for t, v in self.f.items() if not (math.isfinite(v) and v > 0)]
            if bad:
                raise ValueError(f"f of {', '.join(bad)} must be a positive number")
            return self
        if self.means is None or self.sd is None:
            missing = "sd" if self.means is not None else "means" if self.sd is not None else "means with sd, or f"
            raise ValueError(f"{missing} is missing: give the cell means with a common sd, or f per term")
        if len(self.means) != self.cells:
            raise ValueError(f"means lists {len(self.means)} cells; the factors have {self.cells} "
                             f"({' x '.join(str(f.levels) for f in self.factors)})")
        if not all(math.isfinite(m) for m in self.means):
            raise ValueError("means must be finite numbers")
        if self.cohens_f(self.primary) == 0:
            raise ValueError(f"the means have no {self.primary} effect: no sample size can detect a zero effect")
        return self

    @property
    def cells(self) -> int:
        return math.prod(f.levels for f in self.factors)

    def axes(self, term: str) -> tuple[int, ...]:
        names = [f.name for f in self.factors]
        return tuple(names.index(part) for part in term.split(":"))

    def df(self, term: str) -> int:
        return math.prod(self.factors[a].levels - 1 for a in self.axes(term))

    def table(self) -> np.ndarray:
        """The cell means as an array with one axis per factor (in SD units)."""
        assert self.means is not None and self.sd is not None
        return np.asarray(self.means, dtype=float).reshape([f.levels for f in self.factors]) / self.sd

    def cohens_f(self, term: str) -> float:
        if self.f is not None:
            return self.f.get(term, 0.0)
        component = term_components(self.table(), self.axes(term))
        return float(np.sqrt(np.mean(component ** 2)))


class FactorialAnova(Family):
    """Power of the F test of one term of a factorial ANOVA with ``n`` units in every cell.

    With ``C`` cells and ``N = C n``, the F test of a term with ``df1 = prod(levels - 1)`` over its
    factors follows a noncentral F with ``df2 = N - C`` and ``lambda = f^2 N``, where the term's
    Cohen's ``f`` is the root mean square over cells of its component of the cell means (the
    balanced-ANOVA decomposition) divided by the within-cell SD. Power is exact; the test has no
    direction (two-sided only).

    Reference: Cohen, J. (1988). *Statistical Power Analysis for the Behavioral Sciences* (2nd ed.),
    chapter 8 (sections 8.3 and 8.4, factorial designs and interactions). Hillsdale, NJ: Erlbaum.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> factors = [{"name": "genotype", "levels": 2}, {"name": "diet", "levels": 2}]
    >>> sample_size("factorial-anova", factors=factors, primary="genotype:diet", means=[10.0, 10.0, 10.0, 14.0], sd=4.0)
    SampleSize(test='factorial-anova', n_per_group=32, n_total=128, achieved_power=0.8014)
    """

    name = "factorial-anova"
    title = "Factorial ANOVA (F test of one term, equal cells)"
    method = "exact power from the noncentral F distribution, lambda = f^2 N, df = (term df, N - cells)"
    reference = (
        "Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences (2nd ed.), chapter 8 "
        "(sections 8.3 and 8.4). Hillsdale, NJ: Lawrence Erlbaum."
    )
    symbol = "f"
    undirected = "F"
    unit = "units per cell"
    groups = 2  # the cells; group_sizes gives them all
    effect_model = FactorialEffect
    example = {"factors": [{"name": "genotype", "levels": 2}, {"name": "diet", "levels": 2}],
               "primary": "genotype:diet", "means": [10.0, 10.0, 10.0, 14.0], "sd": 4.0}
    effect_words = {"means": "cell means of", "primary": "a primary term", "factors": "the factors", "f": "Cohen's f "
                    "per term of"}

    def effect_text(self, name, value):  # type: ignore[override]
        if name == "factors":
            return " x ".join(f"{f.name} ({f.levels} levels)" for f in value)
        if name == "means":
            return ", ".join(f"{m:g}" for m in value) + " (cells in factor order, the last factor varying fastest)"
        if name == "f":
            return ", ".join(f"{term} {f:g}" for term, f in value.items())
        return None

    def effect_size(self, design: DesignBase) -> float:
        require_two_sided(design, self)
        require_no_allocation_ratio(design, self)
        return design.effect.cohens_f(design.effect.primary)

    def _term_power(self, design: DesignBase, n: np.ndarray, term: str, f: float) -> np.ndarray:
        effect = design.effect
        total = effect.cells * np.asarray(n, dtype=float)
        return f_test_power(f * f * total, effect.df(term), total - effect.cells, design.alpha)

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        return self._term_power(design, n, design.effect.primary, es)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        effect = design.effect
        lam = required_noncentrality(effect.df(effect.primary), design.alpha, design.power)
        return lam / (effect_size**2 * effect.cells) + 1

    def group_sizes(self, design: DesignBase, n: int) -> tuple[int, ...]:
        return (n,) * design.effect.cells

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Normal outcomes in every cell around the cell means (with ``f`` per term: a pure pattern of the
        primary term with that f); each replicate's term F is computed from the cell means and the
        within-cell SS, as ``anova_lm`` of ``outcome ~ A * B * ...`` gives it in a balanced design."""
        effect = design.effect
        shape = [f.levels for f in effect.factors]
        centres = effect.table() if effect.means is not None else self._pattern(design)
        data = rng.normal(size=(reps, *shape, n)) + centres[(None, ..., None)]
        return term_f_pvalues(data, effect.axes(effect.primary)) < design.alpha

    def _pattern(self, design: DesignBase) -> np.ndarray:
        effect = design.effect
        axes = effect.axes(effect.primary)
        pattern = np.ones([f.levels for f in effect.factors])
        for a, factor in enumerate(effect.factors):
            if a in axes:
                v = np.arange(factor.levels, dtype=float) - (factor.levels - 1) / 2
                shape = [1] * len(effect.factors)
                shape[a] = factor.levels
                pattern = pattern * v.reshape(shape)
        return pattern * effect.f[effect.primary] / np.sqrt(np.mean(pattern ** 2))

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        effect = design.effect
        from .solve import smallest_n

        parts = []
        for term in term_names(effect.factors):
            f = effect.cohens_f(term)
            if f <= 0:
                continue
            start = required_noncentrality(effect.df(term), design.alpha, design.power) / (f * f * effect.cells) + 1
            try:
                n, _ = smallest_n(lambda m, t=term, g=f: self._term_power(design, m, t, g), design.power, start, 2)
            except ValueError:
                continue
            parts.append(f"{term} (f = {f:.3g}, df {effect.df(term)}): {n} per cell")
        return ("n per cell each term's F test needs for the target power: " + "; ".join(parts),) if parts else ()

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        effect = design.effect
        if effect.sd is not None:
            return {"sd_of_term": effect_size * effect.sd, "f": effect_size}
        return {"f": effect_size}


def term_f_pvalues(data: np.ndarray, axes: tuple[int, ...]) -> np.ndarray:
    """p-values of the F test of the term over factor ``axes`` for balanced data shaped
    ``(reps, levels..., n)``."""
    n = data.shape[-1]
    cells = math.prod(data.shape[1:-1])
    means = data.mean(axis=-1)
    sse = ((data - means[..., None]) ** 2).sum(axis=tuple(range(1, data.ndim)))
    component = term_components(means, axes, lead=1)
    ss_term = n * (component ** 2).sum(axis=tuple(range(1, means.ndim)))
    df1 = math.prod(data.shape[1 + a] - 1 for a in axes)
    df2 = cells * (n - 1)
    return stats.f.sf((ss_term / df1) / (sse / df2), df1, df2)
