"""Repeated measures: one within-subject factor, optionally one between-subject factor."""

from __future__ import annotations

import math
from functools import lru_cache
from typing import Literal

import numpy as np
from pydantic import field_validator, model_validator
from scipy import special

from .lazy import stats  # loaded on first use

from .base import DesignBase, EffectBase, Family, locked
from .noncentral_f import f_test_power, required_noncentrality
from .noncentral_t import t_test_power
from .restrictions import require_no_allocation_ratio, require_two_sided

__all__ = ["RepeatedMeasures", "RepeatedProfile", "contrast_basis"]

Term = Literal["within", "between", "interaction", "change", "contrast"]


def contrast_basis(m: int) -> np.ndarray:
    """An orthonormal basis ((m - 1) x m) of the contrasts among m repeated measurements: the rows
    of the Helmert matrix below its first, row i comparing measurement i with the mean of those
    before it (what ``scipy.linalg.helmert(m, full=False)`` gives; built here so that ``check``
    does not import ``scipy.linalg`` for it).

    >>> contrast_basis(3).round(4).tolist()
    [[0.7071, -0.7071, 0.0], [0.4082, 0.4082, -0.8165]]
    """
    rows = np.arange(1, m, dtype=float)[:, None]  # row i (1..m-1) has i entries 1 then -i
    columns = np.arange(m, dtype=float)[None, :]
    helmert = np.where(columns < rows, 1.0, np.where(columns == rows, -rows, 0.0))
    return helmert / np.sqrt(rows * (rows + 1))


_DRAWS = 4000  # fixed draws for the expected Greenhouse-Geisser epsilon (common random numbers for every n)
_FLOPS = 1e8  # with many measurements, fewer draws: the estimate concentrates and each draw costs k^3


def _draw_count(k: int) -> int:
    """Draws for ``k`` contrasts: 4,000 up to k = 29, then fewer so one evaluation stays near 1e8
    operations (at least 100; the estimate's spread shrinks as k and the df grow)."""
    return int(min(_DRAWS, max(100, _FLOPS // k**3)))


@lru_cache(maxsize=8)
def _normal_draws(k: int) -> np.ndarray:
    """Fixed standard normal columns for df < k; the first df columns serve every such df (common
    random numbers)."""
    return np.random.default_rng(20280102).normal(size=(_draw_count(k), k, k))


@lru_cache(maxsize=8)
def _bartlett_draws(k: int) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(20280101)
    draws = _draw_count(k)
    return rng.random((draws, k)), np.tril(rng.normal(size=(draws, k, k)), -1)


def expected_epsilon(a: np.ndarray, df: float) -> float:
    """Memoized :func:`_expected_epsilon` (the size search, the detectable effect and the power at
    the planned n ask for the same covariance and df many times; the answer depends on nothing else)."""
    key = (a.shape, a.tobytes(), float(df))
    if key not in _EPSILON_MEMO:
        if len(_EPSILON_MEMO) >= 4096:
            _EPSILON_MEMO.clear()
        _EPSILON_MEMO[key] = _expected_epsilon(a, df)
    return _EPSILON_MEMO[key]


_EPSILON_MEMO: dict[tuple[tuple[int, ...], bytes, float], float] = {}


def _expected_epsilon(a: np.ndarray, df: float) -> float:
    """The mean of the Greenhouse-Geisser estimate ``tr(S)^2 / (k tr(S^2))`` when ``S`` is the
    covariance of the contrasts estimated on ``df`` degrees of freedom (``S ~ Wishart(df, a) / df``),
    from the Bartlett decomposition over fixed draws: the same draws for every df, so the result
    changes smoothly with n."""
    k = a.shape[0]
    if k == 1:
        return 1.0
    root = np.linalg.cholesky(a)
    if df < k:  # fewer degrees of freedom than contrasts: S is singular, drawn from its df normal columns
        columns = _normal_draws(k)[:, :, : max(1, int(df))]
        s = root @ columns @ np.swapaxes(columns, 1, 2) @ root.T / df
    else:
        uniforms, lower = _bartlett_draws(k)
        chi = np.sqrt(special.chdtri(df - np.arange(k)[None, :], 1 - uniforms))
        b = lower + np.einsum("ri,ij->rij", chi, np.eye(k))
        s = root @ b @ np.swapaxes(b, 1, 2) @ root.T / df
    tr = np.trace(s, axis1=1, axis2=2)
    tr2 = np.einsum("rij,rji->r", s, s)
    return float(np.mean(np.clip(tr**2 / (k * tr2), 1 / k, 1.0)))


class RepeatedProfile(EffectBase):
    """The expected mean profile of each group over the repeated measurements, their SD and
    correlation, and the term the claim rests on."""

    means: list[list[float]] | list[float] = locked(
        min_length=1, max_length=100,
        description="Expected means: one row per between-subject group, one column per measurement (time point "
        "or condition), in outcome units; without a between factor, a single row or a plain list.",
    )
    sd: float = locked(gt=0, description="SD of one measurement (the same at every measurement), in outcome units.")
    correlation: float = locked(
        description="Correlation between measurements of the same subject, in [0, 1): between any two under "
        "compound symmetry; between neighbours under ar1 (rho^|i - j| between measurements i and j).",
    )
    structure: Literal["compound-symmetry", "ar1"] = locked(
        default="compound-symmetry",
        description="Correlation among the repeated measurements: compound-symmetry (equal) or ar1 (decaying with "
        "distance).",
    )
    term: Term | None = locked(
        default=None,
        description="The test the claim rests on: within (measurement main effect), between (groups, on subject "
        "means), interaction (group x measurement), change (last minus first measurement) or contrast (the "
        "weights in contrast). Default: within with one group, interaction with several.",
    )
    contrast: list[float] | None = locked(
        default=None, description="term contrast: one weight per measurement, summing to 0 (e.g. -1, 0, 1).",
    )
    sphericity: Literal["greenhouse-geisser", "none"] = locked(
        default="greenhouse-geisser",
        description="within and interaction terms: greenhouse-geisser (degrees of freedom multiplied by epsilon) "
        "or none (the uncorrected F test, valid only under sphericity).",
    )

    @field_validator("means")
    @classmethod
    def _rows(cls, value: list) -> list[list[float]]:
        return [list(value)] if value and not isinstance(value[0], list) else value

    @field_validator("correlation")
    @classmethod
    def _unit_interval(cls, value: float) -> float:
        if not 0 <= value < 1:
            raise ValueError(f"correlation must lie in [0, 1); got {value!r}")
        return value

    @model_validator(mode="after")
    def _consistent(self) -> "RepeatedProfile":
        m = len(self.means[0])
        if m < 2 or any(len(row) != m for row in self.means):
            raise ValueError("means needs the same number (at least 2) of measurements in every row")
        if not all(math.isfinite(x) for row in self.means for x in row):
            raise ValueError("means must be finite numbers")
        term = self.chosen_term
        if term in ("between", "interaction") and self.groups < 2:
            raise ValueError(f"term {term!r} needs at least two rows of means (between-subject groups)")
        if term == "contrast":
            if self.contrast is None or len(self.contrast) != m:
                raise ValueError(f"term 'contrast' needs contrast with one weight per measurement ({m})")
            if abs(sum(self.contrast)) > 1e-9 or not any(self.contrast):
                raise ValueError("contrast weights must sum to 0 and not all be 0")
        elif self.contrast is not None:
            raise ValueError("contrast applies to term 'contrast' only")
        return self

    @property
    def groups(self) -> int:
        return len(self.means)

    @property
    def measurements(self) -> int:
        return len(self.means[0])

    @property
    def chosen_term(self) -> str:
        return self.term or ("within" if self.groups == 1 else "interaction")

    def covariance(self) -> np.ndarray:
        """The covariance of one subject's measurements, in SD units."""
        m = self.measurements
        lag = np.abs(np.subtract.outer(np.arange(m), np.arange(m)))
        if self.structure == "ar1":
            return self.correlation ** lag
        return np.where(lag == 0, 1.0, self.correlation)

    def weights(self) -> np.ndarray:
        m = self.measurements
        if self.chosen_term == "change":
            w = np.zeros(m)
            w[0], w[-1] = -1.0, 1.0
            return w
        return np.asarray(self.contrast, dtype=float)

    def table(self) -> np.ndarray:
        return np.asarray(self.means, dtype=float) / self.sd

    def epsilon(self) -> float:
        """Greenhouse-Geisser's epsilon of the true covariance (1 under compound symmetry)."""
        c = contrast_basis(self.measurements)
        a = c @ self.covariance() @ c.T
        return float(np.trace(a) ** 2 / ((self.measurements - 1) * np.trace(a @ a)))


class RepeatedMeasures(Family):
    """Power of the repeated-measures analysis of one within-subject factor (m measurements), with an
    optional between-subject factor (g groups of n subjects).

    With ``C`` an orthonormal contrast basis, ``A = C Sigma C'`` and its mean eigenvalue
    ``abar = tr(A)/(m - 1)``:

    * *within* (and *interaction*): the univariate F test with noncentrality
      ``lambda = n sum_g |C mu_g|^2 / abar`` for within over all ``N = g n`` subjects
      (``N |C mubar|^2 / abar``), and ``n sum_g |C (mu_g - mubar)|^2 / abar`` for the interaction; df
      ``(m - 1, (N - g)(m - 1))`` and ``((g - 1)(m - 1), (N - g)(m - 1))``. Under compound symmetry the
      F test is exact (``abar = sigma^2 (1 - rho)``); otherwise the Greenhouse-Geisser test is
      approximated by the noncentral F with df and noncentrality multiplied by the true epsilon
      (Muller & Barton 1989), an approximation.
    * *between*: the one-way ANOVA on subject means, whose variance is ``1' Sigma 1 / m^2``: exact.
    * *change* or *contrast*: the t-test on each subject's contrast score ``w'y`` (one group: one-sample,
      two groups: two-sample on the difference of the groups' contrasts), with SD ``sqrt(w' Sigma w)``:
      exact.

    The standardized effect is Cohen's f of the term (or d of the contrast); what-if effects scale it.

    With the Greenhouse-Geisser correction the critical value is taken at the expected *estimated*
    epsilon (from the Wishart distribution of the contrasts' sample covariance on ``g (n - 1)`` df),
    because the lab's test estimates epsilon from its data; without sphericity the numerator
    ``sum_i a_i chi2_h(delta_i^2)`` over the eigenvalues ``a_i`` of ``A`` is matched by its first two
    moments (Patnaik 1949) and the denominator has ``epsilon df2`` degrees of freedom (Box 1954).

    References: Muller, K. E., & Barton, C. N. (1989). Approximate power for repeated-measures ANOVA
    lacking sphericity. *Journal of the American Statistical Association*, 84(406), 549-555.
    Greenhouse, S. W., & Geisser, S. (1959). On methods in the analysis of profile data.
    *Psychometrika*, 24(2), 95-112. Maxwell, S. E., & Delaney, H. D. (2004). *Designing Experiments
    and Analyzing Data* (2nd ed.), chapters 11-12. Mahwah, NJ: Erlbaum.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("repeated-measures", means=[[20.0, 22.0, 23.0, 23.0]], sd=5.0, correlation=0.6)
    SampleSize(test='repeated-measures', n_per_group=21, n_total=21, achieved_power=0.8125)
    """

    name = "repeated-measures"
    title = "Repeated measures (within-subject factor, optional between-subject groups)"
    method = ("repeated-measures ANOVA F: exact noncentral F under compound symmetry without correction; "
              "approximation with the Greenhouse-Geisser correction (critical value at the expected estimated "
              "epsilon) and, without sphericity, a two-moment approximation; exact t or F for between-group, change "
              "and contrast terms")
    reference = (
        "Muller, K. E., & Barton, C. N. (1989). Approximate power for repeated-measures ANOVA lacking sphericity. "
        "Journal of the American Statistical Association, 84(406), 549-555; Greenhouse, S. W., & Geisser, S. "
        "(1959). On methods in the analysis of profile data. Psychometrika, 24(2), 95-112."
    )
    symbol = "f"
    unit = "subjects per group"
    groups = 1
    exact = False  # per design: see label()
    power_per_n = True  # an expected epsilon per n (Monte Carlo quantiles) under a sphericity correction
    effect_model = RepeatedProfile
    example = {"means": [[20.0, 22.0, 23.0, 23.0]], "sd": 5.0, "correlation": 0.6}
    effect_words = {"means": "mean profiles of", "correlation": "a correlation between repeated measurements of",
                    "structure": "a correlation structure", "term": "the term", "sphericity": "a sphericity "
                    "correction"}

    def effect_text(self, name, value):  # type: ignore[override]
        if name == "means":
            return "; ".join("(" + ", ".join(f"{m:g}" for m in row) + ")" for row in value) + \
                " (one profile per group over the measurements)"
        return None

    def symbol_for(self, design: DesignBase) -> str:
        return "d" if design.effect.chosen_term in ("change", "contrast") else "f"

    def sides(self, design: DesignBase) -> str:
        """The F tests (within, between, interaction) have no sides; change and contrast are t-tests."""
        if design.effect.chosen_term in ("within", "between", "interaction"):
            return "F test, no sides"
        return super().sides(design)

    def label(self, design: DesignBase) -> str:
        """Exact where the statistic's distribution is (the class docstring says which terms); the
        Greenhouse-Geisser test and the test without sphericity are approximations, named as such."""
        if design.cluster is not None:
            return super().label(design)
        effect = design.effect
        if effect.chosen_term in ("between", "change", "contrast"):
            return "exact"
        if effect.structure == "compound-symmetry":
            if effect.sphericity == "none":
                return "exact"
            return "approximation: Greenhouse-Geisser critical value at the expected estimated epsilon"
        return "two-moment approximation (no sphericity)"

    # ------------------------------------------------------------ the term's pieces

    def _pieces(self, design: DesignBase) -> tuple[float, float, float]:
        """(standardized effect, epsilon, numerator df) of the design's term."""
        effect = design.effect
        m, g = effect.measurements, effect.groups
        sigma = effect.covariance()
        mu = effect.table()
        term = effect.chosen_term
        if term in ("change", "contrast"):
            w = effect.weights()
            scores = mu @ w / math.sqrt(w @ sigma @ w)
            d = scores[0] if g == 1 else scores[-1] - scores[0]
            return float(d), 1.0, 1.0
        if term == "between":
            var = float(np.ones(m) @ sigma @ np.ones(m)) / m**2
            subject_means = mu.mean(axis=1)
            return float(np.sqrt(np.mean((subject_means - subject_means.mean()) ** 2) / var)), 1.0, g - 1.0
        c = contrast_basis(m)
        a = c @ sigma @ c.T
        abar = float(np.trace(a)) / (m - 1)
        eps = 1.0 if effect.sphericity == "none" else effect.epsilon()
        if term == "within":
            f2 = float(np.sum((c @ mu.mean(axis=0)) ** 2)) / (m - 1) / abar
            return math.sqrt(f2), eps, m - 1.0
        centred = mu - mu.mean(axis=0)
        f2 = float(np.sum((centred @ c.T) ** 2)) / (g * (m - 1)) / abar
        return math.sqrt(f2), eps, (g - 1.0) * (m - 1)

    def effect_size(self, design: DesignBase) -> float:
        require_no_allocation_ratio(design, self)
        if design.effect.chosen_term not in ("change", "contrast"):
            require_two_sided(design, self)
        if design.effect.chosen_term in ("change", "contrast") and design.effect.groups > 2:
            from .base import InfeasibleDesign

            raise InfeasibleDesign("change and contrast terms compare one group with itself or two groups; "
                                   f"the means have {design.effect.groups} rows", "design.effect.term")
        return self._pieces(design)[0]

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        effect = design.effect
        es, eps, df1 = self._pieces(design)
        if effect_size is not None:
            es = effect_size
        n = np.asarray(n, dtype=float)
        g, m = effect.groups, effect.measurements
        term = effect.chosen_term
        if term in ("change", "contrast"):
            if g == 1:
                return t_test_power(es * np.sqrt(n), n - 1, design.alpha, design.alternative)
            return t_test_power(es / np.sqrt(2 / n), 2 * n - 2, design.alpha, design.alternative)
        total = g * n
        if term == "between":
            return f_test_power(es * es * total, g - 1, total - g, design.alpha)
        lam = es * es * total * (m - 1)  # within: N |C mubar|^2 / abar; interaction: n sum_g |C(mu_g - mubar)|^2 / abar
        df2 = (total - g) * (m - 1)
        spherical = effect.structure == "compound-symmetry"
        if effect.sphericity == "none" and spherical:
            return f_test_power(lam, df1, df2, design.alpha)
        c = contrast_basis(m)
        a = c @ effect.covariance() @ c.T
        weights, shares = self._eigen_shares(design, es)
        out = np.empty(n.shape)
        for i, size in np.ndenumerate(n):
            hat = 1.0 if effect.sphericity == "none" else expected_epsilon(a, g * (size - 1))
            # scipy.special's ufuncs behind scipy.stats.f.isf / ncf.sf / f.sf, without loading scipy.stats
            crit = special.fdtri(hat * df1, hat * df2[i], 1 - design.alpha)
            if spherical:  # the statistic is exactly noncentral F; only the critical value is approximate
                out[i] = 1 - special.ncfdtr(df1, df2[i], lam[i], crit)
                continue
            # Box (1954) / Muller & Barton (1989): the numerator is sum_i a_i chi2_h(delta_i^2), matched by
            # its first two moments (Patnaik 1949); the denominator is abar chi2_{eps df2} / (eps df2)
            h = 1.0 if term == "within" else g - 1.0
            delta2 = shares * (size if term == "interaction" else g * size)
            mean = float(np.sum(weights * (h + delta2)))
            var = float(np.sum(weights**2 * (2 * h + 4 * delta2)))
            nu = 2 * mean * mean / var
            abar = float(np.mean(weights))
            out[i] = special.fdtrc(nu, eps * df2[i], crit * df1 * abar / mean)
        return out

    def _eigen_shares(self, design: DesignBase, es: float) -> tuple[np.ndarray, np.ndarray]:
        """Eigenvalues a_i of the contrasts' covariance and, per subject, the squared projections of the
        term's mean contrasts on each eigenvector over a_i (scaled to the standardized effect ``es``)."""
        effect = design.effect
        m = effect.measurements
        c = contrast_basis(m)
        weights, vectors = np.linalg.eigh(c @ effect.covariance() @ c.T)
        mu = effect.table()
        rows = mu.mean(axis=0, keepdims=True) if effect.chosen_term == "within" else mu - mu.mean(axis=0)
        proj = (rows @ c.T) @ vectors  # (rows, m - 1)
        shares = (proj**2).sum(axis=0) / weights
        stated = self._pieces(design)[0]
        return weights, shares * (es / stated) ** 2

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        effect = design.effect
        term = effect.chosen_term
        if term in ("change", "contrast"):
            per = super().approximate_n(design, effect_size)
            return per * (2 if effect.groups == 2 else 1) + 1
        _, eps, df1 = self._pieces(design)
        if term == "between":
            return required_noncentrality(df1, design.alpha, design.power) / (effect_size**2 * effect.groups) + 1
        # Muller & Barton (1989): under a sphericity correction the test behaves like the noncentral F
        # with df and noncentrality multiplied by epsilon, so the chi-square start uses eps * df1 and
        # needs 1 / eps times its noncentrality (eps = 1 without a correction). A start this close saves
        # most of the per-n expected-epsilon evaluations of the size search.
        lam = required_noncentrality(eps * df1, design.alpha, design.power) / eps
        return lam / (effect_size**2 * (effect.measurements - 1) * effect.groups) + 2

    def group_sizes(self, design: DesignBase, n: int) -> tuple[int, ...]:
        return (n,) * design.effect.groups

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Multivariate normal subjects with the stated means and covariance; each replicate is analysed
        by the test of the term: the univariate repeated-measures F (Greenhouse-Geisser epsilon estimated
        from the data, unless sphericity is none), the one-way ANOVA on subject means, or the t-test on
        contrast scores."""
        effect = design.effect
        g, m = effect.groups, effect.measurements
        chol = np.linalg.cholesky(effect.covariance())
        y = rng.normal(size=(reps, g, n, m)) @ chol.T + effect.table()[None, :, None, :]
        term = effect.chosen_term
        if term in ("change", "contrast"):
            scores = y @ effect.weights()
            if g == 1:
                p = stats.ttest_1samp(scores[:, 0], 0.0, axis=1, alternative=design.alternative).pvalue
            else:
                p = stats.ttest_ind(scores[:, 1], scores[:, 0], axis=1, alternative=design.alternative).pvalue
            return p < design.alpha
        if term == "between":
            means = y.mean(axis=3)
            return stats.f_oneway(*(means[:, j] for j in range(g)), axis=1).pvalue < design.alpha
        return rm_anova_pvalues(y, term, effect.sphericity == "greenhouse-geisser") < design.alpha

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        return {self.symbol_for(design): effect_size}

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        effect = design.effect
        notes = []
        if effect.chosen_term in ("within", "interaction"):
            eps = effect.epsilon()
            if effect.structure == "compound-symmetry":
                notes.append("compound symmetry satisfies sphericity (epsilon 1): the uncorrected F test's power is "
                             "exact; the Greenhouse-Geisser test estimates epsilon from the data (below 1 on "
                             "average) and so has a little less power, approximated at the expected estimate")
            else:
                notes.append(f"ar1 correlation lacks sphericity: Greenhouse-Geisser epsilon {eps:.3g} of the true "
                             "covariance; power is a two-moment (Box, Muller-Barton) approximation, about 0.01 "
                             "optimistic in the tests' simulations")
            if effect.structure == "ar1" and effect.sphericity == "none":
                notes.append("sphericity 'none' with ar1 correlation: the uncorrected F test exceeds its nominal "
                             "alpha; plan the Greenhouse-Geisser correction")
        return tuple(notes)


    def doubts(self, design: DesignBase) -> tuple[str, ...]:
        effect = design.effect
        if effect.chosen_term in ("within", "interaction") and effect.structure != "compound-symmetry":
            return ("without sphericity the repeated-measures power is an approximation that simulations find up "
                    "to about 0.01 optimistic; confirm the planned n with a simulation block "
                    "(design.simulation) or add a few subjects",)
        return ()


def rm_anova_pvalues(y: np.ndarray, term: str, corrected: bool) -> np.ndarray:
    """p-values of the univariate repeated-measures F test of ``term`` (within or interaction) for data
    shaped ``(reps, groups, n, m)``, Greenhouse-Geisser corrected with epsilon estimated from the pooled
    within-group covariance when ``corrected``."""
    reps, g, n, m = y.shape
    c = contrast_basis(m)
    z = y @ c.T  # (reps, g, n, m - 1)
    zbar = z.mean(axis=2)
    resid = z - zbar[:, :, None, :]
    df_error = g * (n - 1)
    a_hat = np.einsum("rgni,rgnj->rij", resid, resid) / df_error
    ss_error = np.trace(a_hat, axis1=1, axis2=2) * df_error
    if term == "within":
        ss = g * n * (zbar.mean(axis=1) ** 2).sum(axis=1)
        df1 = m - 1
    else:
        ss = n * ((zbar - zbar.mean(axis=1, keepdims=True)) ** 2).sum(axis=(1, 2))
        df1 = (g - 1) * (m - 1)
    df2 = df_error * (m - 1)
    f = (ss / df1) / (ss_error / df2)
    if corrected:
        tr = np.trace(a_hat, axis1=1, axis2=2)
        tr2 = np.einsum("rij,rji->r", a_hat, a_hat)
        eps = np.clip(tr**2 / ((m - 1) * tr2), 1 / (m - 1), 1.0)
    else:
        eps = np.ones(reps)
    return stats.f.sf(f, eps * df1, eps * df2)
