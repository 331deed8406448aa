"""Designs with random blocks, whole plots or clusters: the fixed-effect F test in its error stratum."""

from __future__ import annotations

import math
from typing import Literal

import numpy as np
from pydantic import field_validator, model_validator
from .lazy import stats  # loaded on first use

from .base import DesignBase, EffectBase, Family, locked
from .noncentral_f import f_test_power, required_noncentrality
from .restrictions import require_no_allocation_ratio, require_two_sided

__all__ = ["MixedDesign", "MixedLayout"]

Layout = Literal["block", "split-plot", "nested"]


class MixedLayout(EffectBase):
    """The layout (randomised complete blocks, split plots in blocks, or clusters nested in treatment),
    the expected means, and the variance components."""

    layout: Layout = locked(
        description="block: every treatment once in each random block (n = blocks); split-plot: in each block "
        "the whole-plot factor's levels go to whole plots and the subplot factor's levels to subplots within "
        "them (n = blocks); nested: clusters (cages, litters, plates) randomised to treatments, several units "
        "per cluster (n = clusters per treatment)."
    )
    means: list[list[float]] | list[float] = locked(
        min_length=2, max_length=100,
        description="Expected means in outcome units: one per treatment (block, nested); for split-plot one row "
        "per whole-plot level with one column per subplot level.",
    )
    sd_residual: float = locked(gt=0, description="SD of a unit (plot, subplot, animal) within its block, whole "
                                "plot or cluster.")
    sd_whole_plot: float | None = locked(default=None, ge=0, description="split-plot: SD of the random whole-plot "
                                         "effects.")
    sd_cluster: float | None = locked(default=None, ge=0, description="nested: SD of the random cluster effects.")
    cluster_size: int | None = locked(default=None, ge=2, le=100_000, description="nested: units analysed per "
                                      "cluster, at least 2.")
    term: Literal["treatment", "whole-plot", "subplot", "interaction"] = locked(
        default="treatment",
        description="The term the claim rests on: treatment (block, nested); whole-plot, subplot or interaction "
        "(split-plot).",
    )

    @field_validator("means")
    @classmethod
    def _finite(cls, value: list) -> list:
        flat = [x for row in value for x in row] if value and isinstance(value[0], list) else value
        if not all(math.isfinite(x) for x in flat):
            raise ValueError("means must be finite numbers")
        return value

    @model_validator(mode="after")
    def _consistent(self) -> "MixedLayout":
        table = isinstance(self.means[0], list)
        if self.layout == "split-plot":
            if not table or len(self.means) < 2 or len({len(r) for r in self.means}) != 1 or len(self.means[0]) < 2:
                raise ValueError("split-plot means need at least two rows (whole-plot levels) of the same number, "
                                 "at least two, of columns (subplot levels)")
            if self.sd_whole_plot is None:
                raise ValueError("split-plot needs sd_whole_plot, the SD of the random whole-plot effects")
            if self.term == "treatment":
                raise ValueError("split-plot needs term whole-plot, subplot or interaction")
        else:
            if table:
                raise ValueError(f"{self.layout} means are one list, one mean per treatment")
            if self.term != "treatment":
                raise ValueError(f"term {self.term!r} applies to split-plot; {self.layout} tests the treatment")
        if self.layout == "nested" and (self.sd_cluster is None or self.cluster_size is None):
            raise ValueError("nested needs sd_cluster (SD of the random cluster effects) and cluster_size")
        if self.layout != "nested" and (self.sd_cluster is not None or self.cluster_size is not None):
            raise ValueError("sd_cluster and cluster_size apply to layout nested")
        if self.layout != "split-plot" and self.sd_whole_plot is not None:
            raise ValueError("sd_whole_plot applies to layout split-plot")
        if self.component_rms() == 0:
            raise ValueError(f"the means have no {self.term} effect: no sample size can detect a zero effect")
        return self

    def table(self) -> np.ndarray:
        return np.asarray(self.means if isinstance(self.means[0], list) else [self.means], dtype=float)

    def component_rms(self) -> float:
        mu = self.table()
        if self.term in ("treatment", "subplot"):
            part = mu.mean(axis=0) - mu.mean() if self.term == "subplot" else mu[0] - mu.mean()
        elif self.term == "whole-plot":
            part = mu.mean(axis=1) - mu.mean()
        else:
            part = mu - mu.mean(axis=0, keepdims=True) - mu.mean(axis=1, keepdims=True) + mu.mean()
        return float(np.sqrt(np.mean(part**2)))

    def stratum_sd(self) -> float:
        """SD of the mean the term is judged against, per unit of the term's own means."""
        if self.layout == "nested":
            return math.sqrt(self.sd_cluster**2 + self.sd_residual**2 / self.cluster_size)
        if self.term == "whole-plot":
            return math.sqrt(self.sd_whole_plot**2 + self.sd_residual**2 / self.table().shape[1])
        return self.sd_residual

    def dfs(self, n: np.ndarray) -> tuple[float, np.ndarray, float]:
        """(numerator df, denominator df at n, cells K with lambda = K n f^2)."""
        a, c = self.table().shape
        if self.layout == "block":
            return c - 1.0, (n - 1) * (c - 1), float(c)
        if self.layout == "nested":
            return c - 1.0, c * (n - 1), float(c)
        if self.term == "whole-plot":
            return a - 1.0, (a - 1) * (n - 1), float(a)
        df2 = a * (n - 1) * (c - 1)
        if self.term == "subplot":
            return c - 1.0, df2, float(a * c)
        return (a - 1.0) * (c - 1), df2, float(a * c)


class MixedDesign(Family):
    """Power of the fixed-effect F test of a balanced design with random blocks, whole plots or clusters.

    The exemplary-data method for linear mixed models (Stroup 2002): for the balanced expected data the
    F statistic of the term is noncentral F with the denominator df of the term's error stratum and
    noncentrality ``lambda = (sum of squares of the term's expected effects) / (expected mean square of
    that stratum per observation)``, which for these balanced layouts is exact (the REML F test equals
    the stratum ANOVA F). With f the root mean square of the term's effects over the SD of the stratum
    means, ``lambda = K n f^2``:

    * block (t treatments, n blocks): ``df = (t - 1, (n - 1)(t - 1))``, stratum SD ``sd_residual``;
      block variance cancels.
    * nested (t treatments, n clusters each of m units): ``df = (t - 1, t (n - 1))``, stratum SD
      ``sqrt(sd_cluster^2 + sd_residual^2 / m)``.
    * split-plot (a whole-plot levels, c subplot levels, n blocks): whole-plot term
      ``df = (a - 1, (a - 1)(n - 1))`` with stratum SD ``sqrt(sd_whole_plot^2 + sd_residual^2 / c)``;
      subplot and interaction ``df2 = a (n - 1)(c - 1)``, stratum SD ``sd_residual``; ``K`` is the number
      of means the term's effects are spread over (t, a, a c and a c).

    References: Stroup, W. W. (2002). Power analysis based on spatial effects mixed models: a tool for
    comparing design and analysis strategies in the presence of spatial variability. *Journal of
    Agricultural, Biological, and Environmental Statistics*, 7(4), 491-511. Stroup, W. W. (2013).
    *Generalized Linear Mixed Models: Modern Concepts, Methods and Applications*, chapter 16. Boca Raton:
    CRC Press. Montgomery, D. C. (2017). *Design and Analysis of Experiments* (9th ed.), chapters 4 and 14.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("mixed-design", layout="nested", means=[10.0, 12.0], sd_residual=3.0, sd_cluster=1.0,
    ...             cluster_size=4)
    SampleSize(test='mixed-design', n_per_group=14, n_total=28, achieved_power=0.8066)
    """

    name = "mixed-design"
    title = "Blocks, split plots or clusters in treatment (mixed model, balanced)"
    method = ("exact power from the noncentral F in the term's error stratum (exemplary-data method for "
              "balanced mixed models)")
    reference = (
        "Stroup, W. W. (2002). Power analysis based on spatial effects mixed models: a tool for comparing design "
        "and analysis strategies in the presence of spatial variability. Journal of Agricultural, Biological, and "
        "Environmental Statistics, 7(4), 491-511; Stroup, W. W. (2013). Generalized Linear Mixed Models: Modern "
        "Concepts, Methods and Applications, chapter 16. Boca Raton: CRC Press."
    )
    symbol = "f"
    undirected = "F"
    unit = "blocks or clusters per treatment"
    groups = 1
    effect_model = MixedLayout
    example = {"layout": "nested", "means": [10.0, 12.0], "sd_residual": 3.0, "sd_cluster": 1.0, "cluster_size": 4}
    effect_words = {"layout": "a layout", "means": "means of", "sd_residual": "a residual standard deviation of",
                    "sd_whole_plot": "a whole-plot standard deviation of", "sd_cluster":
                    "a between-cluster standard deviation of", "cluster_size": "units per cluster", "term": "the term"}

    def effect_size(self, design: DesignBase) -> float:
        require_two_sided(design, self)
        require_no_allocation_ratio(design, self)
        return design.effect.component_rms() / design.effect.stratum_sd()

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        n = np.asarray(n, dtype=float)
        df1, df2, k = design.effect.dfs(n)
        return f_test_power(k * n * es * es, df1, df2, design.alpha)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        df1, _, k = design.effect.dfs(np.asarray(10.0))
        return required_noncentrality(df1, design.alpha, design.power) / (k * effect_size**2) + 1

    def group_sizes(self, design: DesignBase, n: int) -> tuple[int, ...]:
        effect = design.effect
        return (n,) * effect.table().shape[1] if effect.layout == "nested" else (n,)

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Balanced data with normal random effects; each replicate is analysed by the F test of the term
        in its error stratum (block x treatment, whole plots, or cluster means), which for balanced data is
        the REML mixed-model F test."""
        effect = design.effect
        mu = effect.table()
        a, c = mu.shape
        e = effect.sd_residual
        if effect.layout == "block":
            y = mu[0][None, None, :] + rng.normal(0, 5 * e, size=(reps, n, 1)) + rng.normal(0, e, size=(reps, n, c))
            return _two_way_interaction_f(y, n, c) < design.alpha
        if effect.layout == "nested":
            m = effect.cluster_size
            cages = rng.normal(0, effect.sd_cluster, size=(reps, c, n)) + \
                rng.normal(0, e, size=(reps, c, n, m)).mean(axis=3) + mu[0][None, :, None]
            return stats.f_oneway(*(cages[:, j] for j in range(c)), axis=1).pvalue < design.alpha
        y = (mu[None, None] + rng.normal(0, 5 * e, size=(reps, n, 1, 1))
             + rng.normal(0, effect.sd_whole_plot, size=(reps, n, a, 1)) + rng.normal(0, e, size=(reps, n, a, c)))
        return split_plot_pvalues(y, effect.term) < design.alpha

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        return {"rms_effect": effect_size * design.effect.stratum_sd(), "f": effect_size}

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        effect = design.effect
        what = {"block": "n counts blocks (each holds every treatment once)",
                "nested": f"n counts clusters per treatment, each of {effect.cluster_size} units",
                "split-plot": "n counts blocks (each holds every whole-plot level, each whole plot every subplot "
                "level)"}[effect.layout]
        return (what + "; the design must be balanced (no missing units) for the stated power to be exact",)


def _two_way_interaction_f(y: np.ndarray, n: int, c: int) -> np.ndarray:
    """Treatment p-values of a randomised complete block design, y shaped (reps, blocks, treatments)."""
    grand = y.mean(axis=(1, 2), keepdims=True)
    treat = y.mean(axis=1, keepdims=True)
    block = y.mean(axis=2, keepdims=True)
    ss_t = n * ((treat - grand) ** 2).sum(axis=(1, 2))
    ss_e = ((y - treat - block + grand) ** 2).sum(axis=(1, 2))
    df1, df2 = c - 1, (n - 1) * (c - 1)
    return stats.f.sf((ss_t / df1) / (ss_e / df2), df1, df2)


def split_plot_pvalues(y: np.ndarray, term: str) -> np.ndarray:
    """p-values of a split-plot term for data shaped (reps, blocks, whole-plot levels, subplot levels)."""
    reps, b, a, c = y.shape
    g = y.mean(axis=(1, 2, 3), keepdims=True)
    ma = y.mean(axis=(1, 3), keepdims=True)
    mb = y.mean(axis=(2, 3), keepdims=True)
    mc = y.mean(axis=(1, 2), keepdims=True)
    mab = y.mean(axis=3, keepdims=True)  # whole plots
    mac = y.mean(axis=1, keepdims=True)
    if term == "whole-plot":
        ss = b * c * ((ma - g) ** 2).sum(axis=(1, 2, 3))
        ss_err = c * ((mab - ma - mb + g) ** 2).sum(axis=(1, 2, 3))
        df1, df2 = a - 1, (a - 1) * (b - 1)
    else:
        ss_err = ((y - mab - mac + ma) ** 2).sum(axis=(1, 2, 3))
        df2 = a * (b - 1) * (c - 1)
        if term == "subplot":
            ss, df1 = a * b * ((mc - g) ** 2).sum(axis=(1, 2, 3)), c - 1
        else:
            ss, df1 = b * ((mac - ma - mc + g) ** 2).sum(axis=(1, 2, 3)), (a - 1) * (c - 1)
    return stats.f.sf((ss / df1) / (ss_err / df2), df1, df2)
