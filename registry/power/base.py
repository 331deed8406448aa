"""The interface every design family implements, and the assumptions they share.

A design family is one module holding a :class:`Family` subclass and the pydantic
model of its ``design.effect`` block. :mod:`registry.power.catalog` registers it in
one line; from there it appears in the spec model, the JSON Schema, ``check`` and
``size`` without further wiring. This module imports no family and not the catalog:
the catalog sits above the families and hands each design model its family
(``DesignBase.family_instance``), so the import graph has no cycle.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from typing import Any, ClassVar, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, field_validator, model_validator

from .assumptions import PilotSource, SimulationPlan
from .fields import free, locked, out_of_range
from .assurance import ASSURANCE_FAMILIES, AssurancePlan
from .sequential_plan import SEQUENTIAL_FAMILIES, SequentialPlan

__all__ = [
    "Alternative",
    "Cluster",
    "Multiplicity",
    "DesignBase",
    "EffectBase",
    "Family",
    "InfeasibleDesign",
    "EventsOnly",
    "MAX_N",
    "MAX_EFFECT",
    "fraction_validator",
    "locked",
    "free",
]

Alternative = Literal["two-sided", "greater", "less"]

#: The largest standardized effect (in absolute value) prespec accepts; larger ones are unit mistakes.
MAX_EFFECT = 100.0

#: The largest sample size per group prespec will report; beyond it a design is infeasible.
MAX_N = 100_000_000


class InfeasibleDesign(ValueError):
    """A request that has no meaningful answer (wrong tail, zero effect, power <= alpha, too large n)."""

    def __init__(self, message: str, field: str = "design") -> None:
        super().__init__(message)
        self.field = field
        self.message = message


class EventsOnly(InfeasibleDesign):
    """An event-driven design stated without how many units have the event: only ``events`` is known."""

    def __init__(self, events: int, message: str) -> None:
        super().__init__(message, "design.effect")
        self.events = events


def fraction_validator(name: str, *, low_closed: bool = False):
    """Validator for a probability-like field in (0, 1) (or [0, 1) with ``low_closed``)."""

    def check(value: float) -> float:
        if not math.isfinite(value):
            raise ValueError(f"{name} must be a finite number; got {value!r}")
        ok = (0 <= value < 1) if low_closed else (0 < value < 1)
        if not ok:
            interval = "[0, 1)" if low_closed else "(0, 1)"
            raise ValueError(out_of_range(name, interval, value))
        return value

    return check


class EffectBase(BaseModel):
    """Base of every family's ``design.effect`` block: unknown keys are errors.

    ``defer_build``: the validators are built on first use, once, for the whole spec model, not
    one by one as each family module is imported (half the cost; ``--help`` and commands that
    validate nothing pay none of it)."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False, defer_build=True)


class Cluster(BaseModel):
    """Units randomised in whole clusters (litters, cages, culture plates, classes).

    Outcomes within a cluster are correlated, so each unit carries less information: the
    individual-level n is multiplied by the design effect ``1 + (m - 1) * icc``.

    Reference: Donner, A., & Klar, N. (2000). *Design and Analysis of Cluster Randomization
    Trials in Health Research*, ch. 5. London: Arnold.

    >>> Cluster(size=10, icc=0.05).design_effect
    1.45
    """

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)

    size: int = locked(
        ge=2, le=1_000_000, description="Units analysed per cluster (m), a whole number of at least 2."
    )
    icc: float = locked(description="Intracluster correlation of the outcome, in [0, 1).")
    size_cv: float = locked(
        default=0.0, ge=0, le=3,
        description="Coefficient of variation of the cluster size (SD / mean of units per cluster), 0 when "
        "every cluster has size units; the design effect becomes 1 + ((1 + cv^2) m - 1) x icc.",
    )

    @field_validator("icc")
    @classmethod
    def _icc_fraction(cls, value: float) -> float:
        return fraction_validator("icc", low_closed=True)(value)

    @property
    def design_effect(self) -> float:
        """Variance inflation of a cluster-randomised comparison, ``1 + (m - 1) * icc``, or with
        unequal cluster sizes ``1 + ((1 + cv^2) m - 1) * icc`` (Eldridge, Ashby & Kerry 2006)."""
        return round(1 + ((1 + self.size_cv**2) * self.size - 1) * self.icc, 12)

    @property
    def described(self) -> str:
        """The clustering in words, as the notes begin.

        >>> Cluster(size=10, icc=0.05, size_cv=0.5).described
        'randomised in clusters of 10 with intracluster correlation 0.05 and cluster sizes varying with coefficient of variation 0.5'
        """
        cv = f" and cluster sizes varying with coefficient of variation {self.size_cv:g}" if self.size_cv else ""
        return f"randomised in clusters of {self.size} with intracluster correlation {self.icc:g}{cv}"

    @property
    def design_effect_formula(self) -> str:
        """:attr:`design_effect` with the numbers in: ``1 + (10 - 1) x 0.05``, or with unequal sizes
        ``1 + ((1 + 0.5^2) x 10 - 1) x 0.05``."""
        if self.size_cv:
            return f"1 + ((1 + {self.size_cv:g}^2) x {self.size} - 1) x {self.icc:g}"
        return f"1 + ({self.size} - 1) x {self.icc:g}"

    @property
    def mean_variance(self) -> float:
        """Variance of one cluster's mean outcome, in units of the outcome's variance:
        ``icc + (1 - icc) / m`` (``= design effect / m``); with unequal sizes ``icc + (1 - icc)(1 + cv^2) / m``,
        the first-order average of ``1 / m_j`` over cluster sizes of mean m and coefficient of variation cv.

        >>> Cluster(size=10, icc=0.05).mean_variance
        0.145
        """
        return round(self.icc + (1 - self.icc) * (1 + self.size_cv**2) / self.size, 12)


class Multiplicity(BaseModel):
    """Several primary outcomes, any one of which may support the claim: Bonferroni splits alpha.

    Each outcome is tested at ``alpha / outcomes``; that keeps the familywise type I error at
    ``alpha``. Holm's step-down procedure keeps it too and rejects at least as often, so sizing
    for Bonferroni is conservative when the analysis uses Holm.

    References: Dunn, O. J. (1961). Multiple comparisons among means. *Journal of the American
    Statistical Association*, 56(293), 52-64. Holm, S. (1979). A simple sequentially rejective
    multiple test procedure. *Scandinavian Journal of Statistics*, 6(2), 65-70.

    >>> Multiplicity(outcomes=2).alpha_per_test(0.05)
    0.025
    """

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)

    outcomes: int = locked(
        ge=2, le=10_000, description="Number of primary outcomes (or comparisons) the claim may rest on, at least 2."
    )
    method: Literal["bonferroni"] = locked(
        default="bonferroni", description="How alpha is split: bonferroni (each outcome at alpha / outcomes)."
    )

    def alpha_per_test(self, alpha: float) -> float:
        return alpha / self.outcomes


class DesignBase(BaseModel):
    """Assumptions common to all design families (``design:`` in a spec)."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False, defer_build=True)  # as EffectBase

    #: The family this design model belongs to; the catalog builds one subclass per family and sets it.
    family_instance: ClassVar["Family | None"] = None

    test: str = locked(description="Design family: which test the primary analysis uses.")
    alternative: Alternative = locked(
        default="two-sided",
        description="Direction of the alternative hypothesis: two-sided, greater (increase) or less (decrease).",
    )
    alpha: float = locked(default=0.05, description="Significance level (type I error rate), in (0, 1).")
    power: float = locked(default=0.8, description="Target power (1 - type II error rate), in (0, 1), above alpha.")
    allocation_ratio: float = locked(
        default=1.0, gt=0, le=100, description="Two-group designs: n2 / n1 (group 2 gets ceil(ratio x n1))."
    )
    attrition: float = locked(
        default=0.0,
        description="Expected fraction of enrolled units lost before analysis, in [0, 1); "
        "enrolment = ceil(n / (1 - attrition)).",
    )
    effect_rationale: str | None = locked(
        default=None,
        max_length=5000,
        description="Why this effect is the smallest of practical or biological interest.",
    )
    variability_source: str | None = locked(
        default=None,
        max_length=5000,
        description="Where the variability (SD) assumption comes from, e.g. earlier control animals.",
    )
    pilot: PilotSource | None = locked(
        default=None, description="Pilot or control data the SD comes from; check re-reads it (docs/pilot-data.md)."
    )
    simulation: SimulationPlan | None = free(
        default=None, description="Also estimate power by simulation at the planned n (docs/simulation.md)."
    )
    cluster: Cluster | None = locked(
        default=None,
        description="Designs comparing groups, randomised in whole clusters: size (units per cluster) and icc; "
        "n is multiplied by the design effect 1 + (size - 1) x icc.",
    )
    multiplicity: Multiplicity | None = locked(
        default=None,
        description="Several primary outcomes, any one of which may support the claim: outcomes (k) and "
        "method (bonferroni); each is tested at alpha / k.",
    )
    sequential: SequentialPlan | None = locked(
        default=None,
        description="Interim analyses with stopping boundaries (group-sequential design): looks, efficacy "
        "spending and futility; n becomes the maximum n (docs/methods.md, sequential designs).",
    )
    assurance: AssurancePlan | None = locked(
        default=None,
        description="Priors for the effect (effect_prior: mean, sd) and the SD (sd_prior: df, sd) and an optional "
        "target: check reports the probability of success averaged over them (docs/methods.md, assurance).",
    )

    @field_validator("alpha", "power")
    @classmethod
    def _open_fraction(cls, value: float, info: Any) -> float:
        return fraction_validator(info.field_name)(value)

    @field_validator("attrition")
    @classmethod
    def _attrition_fraction(cls, value: float) -> float:
        return fraction_validator("attrition", low_closed=True)(value)

    @model_validator(mode="after")
    def _power_above_alpha(self) -> "DesignBase":
        if self.power <= self.alpha:
            raise ValueError(
                f"power ({self.power!r}) must be greater than alpha ({self.alpha!r}); "
                "a test has power alpha even when there is no effect"
            )
        family = type(self).family_instance
        if (family is not None and self.simulation is not None and self.simulation.distribution is not None
                and self.simulation.distribution not in family.distributions):
            raise ValueError(
                f"simulation.distribution {self.simulation.distribution!r} is not offered for {self.test}; "
                f"choose one of {', '.join(family.distributions)}"
            )
        return self

    @model_validator(mode="after")
    def _sequential_family(self) -> "DesignBase":
        if self.sequential is not None and self.test not in SEQUENTIAL_FAMILIES:
            raise ValueError(
                f"sequential applies to the families whose test statistic is normal or asymptotically normal "
                f"({', '.join(SEQUENTIAL_FAMILIES)}); {self.test} is not one of them"
            )
        return self

    @model_validator(mode="after")
    def _assurance_family(self) -> "DesignBase":
        if self.assurance is None:
            return self
        if self.test not in ASSURANCE_FAMILIES:
            raise ValueError(f"assurance applies to the mean-difference families ({', '.join(ASSURANCE_FAMILIES)}); "
                             f"{self.test} is not one of them")
        if self.assurance.sd_prior is not None and getattr(self.effect, "d", None) is not None:
            raise ValueError("assurance.sd_prior needs the effect as difference with sd: with d alone the SD is "
                             "already folded into the effect; give effect_prior in d units instead")
        if self.assurance.sd_prior is not None and self.assurance.sd_prior.from_pilot and self.pilot is None:
            raise ValueError("assurance.sd_prior.from_pilot needs design.pilot (the data file the SD comes from)")
        return self

    @model_validator(mode="after")
    def _cluster_needs_two_groups(self) -> "DesignBase":
        family = type(self).family_instance
        if self.cluster is None or family is None:
            return self
        if family.groups < 2:
            raise ValueError(
                f"cluster applies to designs that compare groups; {self.test} is a one-group design "
                f"({family.unit}), so a design effect for randomising whole clusters does not apply. "
                "Remove the cluster block, or analyse cluster means as the units"
            )
        return self

    @property
    def family(self) -> "Family":
        family = type(self).family_instance
        if family is None:
            raise TypeError(f"{type(self).__name__} is not a family's design model; build designs through the catalog")
        return family

    @property
    def effective_alpha(self) -> float:
        """The level each test is run at: ``alpha``, or ``alpha / k`` with a Bonferroni split."""
        if self.multiplicity is None:
            return self.alpha
        return self.multiplicity.alpha_per_test(self.alpha)

    @property
    def design_effect(self) -> float:
        """Variance inflation from clustering (1 without a cluster block)."""
        return 1.0 if self.cluster is None else self.cluster.design_effect

    def as_tested(self) -> "DesignBase":
        """This design as one test sees it: ``alpha`` replaced by :attr:`effective_alpha`.

        The solvers and the simulator hand this copy to the family, so every family just reads
        ``design.alpha`` and a Bonferroni split applies to all of them in one place.
        """
        if self.multiplicity is None:
            return self
        return self.model_copy(update={"alpha": self.effective_alpha, "multiplicity": None})


_SIDES = {"two-sided": "two-sided", "greater": "one-sided (an increase)", "less": "one-sided (a decrease)"}


class Family(ABC):
    """One design family: power at n, the smallest n reaching a target, and effect conversion.

    Subclasses set the class attributes and implement :meth:`effect_size` and :meth:`power`;
    the generic solver in :mod:`registry.power.solve` does the rest.
    """

    #: ``design.test`` value.
    name: ClassVar[str]
    #: Human title, e.g. "Two-sample t-test (pooled variance)".
    title: ClassVar[str]
    #: One line on how power is computed.
    method: ClassVar[str]
    #: Full published reference for the method.
    reference: ClassVar[str]
    #: Symbol of the standardized effect size ("d", "f", "h", ...).
    symbol: ClassVar[str] = "d"
    #: What ``n_per_group`` counts for this family.
    unit: ClassVar[str] = "per group"
    #: Number of groups ``n_per_group`` applies to, unless :meth:`group_sizes` says otherwise.
    groups: ClassVar[int] = 1
    #: The pydantic model of ``design.effect``.
    effect_model: ClassVar[type[EffectBase]]
    #: Smallest analysable n per group the method is defined for.
    min_n: ClassVar[int] = 2
    #: Whether :meth:`power` is exact for the test's model (False for normal approximations).
    exact: ClassVar[bool] = True
    #: Whether power never decreases with n (False for exact discrete tests).
    monotone: ClassVar[bool] = True
    #: Whether :meth:`power` computes each n separately (a loop, not one vectorized call): the size
    #: search then evaluates one n at a time (:func:`registry.power.solve.smallest_n_pointwise`).
    power_per_n: ClassVar[bool] = False
    #: Whether a clustered design is sized by :meth:`cluster_power` (the test on cluster means)
    #: rather than by the design effect.
    cluster_means: ClassVar[bool] = False
    #: Whether the size comes from an approximation that ``check`` and ``size`` confirm by simulating
    #: the test (:mod:`registry.power.verify`).
    verify_by_simulation: ClassVar[bool] = False
    #: Non-monotone families: the scan for the settled n starts at this fraction of the formula's
    #: n (0: at ``min_n``); it moves lower whenever the power there already reaches the target.
    scan_floor: ClassVar[float] = 0.0
    #: How the summary's justification reads an effect field in a sentence ("a rate in group 1 of"),
    #: where the shared wording does not fit this family.
    effect_words: ClassVar[dict[str, str]] = {}
    #: An illustrative ``design.effect`` block for ``prespec new`` templates.
    example: ClassVar[dict[str, Any]] = {}
    #: Set by the catalog: the spec's design model for this family.
    design_model: ClassVar[type[DesignBase]]
    #: The statistic of a test that rejects for large values only ("F", "chi-square"): such a test
    #: has no sides, and :meth:`sides` says so instead of "two-sided".
    undirected: ClassVar[str | None] = None

    @abstractmethod
    def effect_size(self, design: DesignBase) -> float:
        """The signed standardized effect size from the design's natural-unit inputs."""

    @abstractmethod
    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        """Power at each analysable n (per group; vectorized), at ``effect_size`` or the design's."""

    @abstractmethod
    def simulate(
        self, design: DesignBase, n: int, reps: int, rng: np.random.Generator, distribution: str = "normal"
    ) -> np.ndarray:
        """Simulate ``reps`` experiments with ``n`` analysable units (group 1), analyse each with the
        family's test, and return a boolean array: whether H0 was rejected at ``design.alpha``.

        ``distribution`` names the outcome's shape (``normal``; families may offer more, such as
        ``lognormal`` or ``counts``) and raises ``ValueError`` for one they do not offer.
        """

    #: Outcome distributions :meth:`simulate` offers.
    distributions: ClassVar[tuple[str, ...]] = ("normal",)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        """A normal-approximation start for the integer search."""
        from scipy.special import ndtri  # the normal quantile, without scipy.stats' per-call overhead

        z_alpha = -ndtri(design.alpha / (2 if design.alternative == "two-sided" else 1))
        z_beta = ndtri(design.power)
        ratio = (z_alpha + z_beta) / max(abs(effect_size), 1e-300)
        per = ratio * ratio if ratio < 1e150 else math.inf  # squares of extreme effects overflow Python floats
        return per * (1 + 1 / design.allocation_ratio) if self.groups == 2 else per

    def group_sizes(self, design: DesignBase, n: int) -> tuple[int, ...]:
        """Analysable size of each group when group 1 has ``n``."""
        if self.groups == 2:
            return (n, math.ceil(design.allocation_ratio * n - 1e-9))
        return (n,) * self.groups

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        """Express a standardized effect in the design's natural units where it has them."""
        return {self.symbol: effect_size}

    def unused_effect_fields(self, design: DesignBase) -> frozenset[str]:
        """Fields of ``design.effect`` the analysis of this design does not use (the individual-level
        test's settings of a design analysed on cluster summaries): ``size`` and the summary leave
        them out of the effect they describe."""
        return frozenset()

    def effect_text(self, name: str, value: Any) -> str | None:
        """How the summary shows the value of effect field ``name`` when plain number formatting does not
        read well (structured fields); None for the default."""
        return None

    def symbol_for(self, design: DesignBase) -> str:
        """Symbol of the effect size for this design (families with two effect scales override)."""
        return self.symbol

    def alternative_for(self, design: DesignBase) -> str:
        """How the results describe the alternative (families with a fixed direction override)."""
        return design.alternative

    def sides(self, design: DesignBase) -> str:
        """The test's sides in words, for people: "two-sided", "one-sided (an increase)", "F test, no sides"."""
        if self.undirected is not None:
            return f"{self.undirected} test, no sides"
        alternative = self.alternative_for(design)
        return _SIDES.get(alternative, alternative)

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        """Family-specific caveats carried into the results."""
        return ()

    def enumeration_cost(self, design: DesignBase, n: float) -> float:
        """Families whose exact power enumerates tables: about how many one power at ``n`` decides
        (0 for families whose power costs next to nothing)."""
        return 0.0

    def exact_at(self, design: DesignBase, n: float) -> bool:
        """Whether :meth:`power` at ``n`` is the exact computation (False where a family hands over to
        its normal approximation because the enumeration would be too large)."""
        from .binary_tables import EXACT_CELLS

        return self.enumeration_cost(design, n) <= EXACT_CELLS

    def formula(self, design: DesignBase) -> str | None:
        """The published approximate formula the search starts from, when the reported n is not the
        formula's own (exact enumeration or simulation); None when :meth:`power` is the method itself."""
        return None

    def label(self, design: DesignBase) -> str:
        """How the reported power is obtained: ``exact``, ``exact for fixed predictors``, ``normal
        approximation`` or ``simulation`` (the last is set by the simulation-verified search)."""
        if design.cluster is not None and not self.cluster_means:
            return "design-effect approximation"
        return "exact" if self.exact else "normal approximation"

    def cluster_power(self, design: DesignBase, clusters: np.ndarray, effect_size: float) -> np.ndarray:
        """Families with :attr:`cluster_means`: power with ``clusters`` clusters in group 1 (vectorized),
        the analysis run on the cluster means. Only called where :attr:`cluster_means` is set; the
        other families size clustered designs by the design effect and never reach this."""
        raise TypeError(f"{self.name} has no cluster-means analysis; it sizes clustered designs by the design effect")

    # The hooks below describe the cluster-level analysis of families with :attr:`cluster_means`; the
    # defaults describe a t-test on cluster means, families analysing another cluster summary override them.

    def cluster_exact(self, design: DesignBase) -> bool:
        """Whether :meth:`cluster_power` is exact for this clustered design (else its size is verified by
        simulating :meth:`simulate_clusters`): exact for normal cluster means of equal size."""
        assert design.cluster is not None
        return design.cluster.size_cv == 0

    def cluster_analysis(self, design: DesignBase) -> str:
        """The test a clustered design is analysed with, in words."""
        return f"{self.title} on cluster means"

    def cluster_method(self, design: DesignBase) -> str:
        """The method of a clustered size computed by :meth:`cluster_power`."""
        return f"{self.method}, applied to the cluster means (k1 and k2 clusters in place of n1 and n2)"

    def cluster_formula(self, design: DesignBase) -> str:
        """The formula a simulation-verified clustered size starts from, in words (its label included)."""
        return ("approximation for unequal cluster sizes: the noncentral t on cluster means, df = k1 + k2 - 2, "
                "each mean with the first-order variance icc + (1 - icc)(1 + cv^2) / m")

    def cluster_model(self, design: DesignBase) -> str:
        """How :meth:`simulate_clusters` draws the clusters, in words (for the simulated method)."""
        return "cluster sizes drawn with the stated coefficient of variation"

    def cluster_note(self, design: DesignBase) -> str:
        """The note saying how a clustered design is analysed and sized."""
        c = design.cluster
        assert c is not None
        return (
            f"{c.described}: the test is run on "
            f"the cluster means, a t-test with k1 + k2 - 2 degrees of freedom for k1 and k2 clusters, each mean "
            f"with variance {c.mean_variance:.4g} x the outcome's variance (design effect {c.design_effect:.4g} "
            "/ cluster size); enrolment is then allowed for attrition and rounded up to whole clusters"
            + ("; with unequal sizes the cluster means' variance is a first-order approximation" if c.size_cv else "")
        )

    def references(self, design: DesignBase) -> str:
        """The published references of the method this design is sized by (the family's own unless a
        cluster-level analysis adds its own)."""
        return self.reference

    def analysis_title(self, design: DesignBase) -> str:
        """The test the lab runs on this design, in words: the family's title, or for a clustered design
        sized on a cluster-level analysis, that analysis."""
        if design.cluster is not None and self.cluster_means:
            return self.cluster_analysis(design)
        return self.title

    def doubts(self, design: DesignBase) -> tuple[str, ...]:
        """Reasons to distrust this design's computed size (check reports them as warnings)."""
        return ()

    def events_only(self, design: DesignBase) -> bool:
        """Event-driven families: whether the design says nothing about how many units have the event."""
        return False

    def required_events(self, design: DesignBase, effect_size: float) -> float | None:
        """Event-driven families: the number of events the analysis needs (else None)."""
        return None

    def expected_events(self, design: DesignBase, n: int, effect_size: float | None = None) -> float | None:
        """Event-driven families: expected events with ``n`` analysable units in group 1 (else None)."""
        return None

    def default_distribution(self, design: DesignBase) -> str:
        """The outcome distribution :meth:`simulate` uses when none is asked for: the family's own."""
        return self.distributions[0]

    def check_direction(self, design: DesignBase, effect_size: float) -> None:
        """Refuse a zero effect or a one-sided alternative pointing the wrong way."""
        if not math.isfinite(effect_size):
            raise InfeasibleDesign(
                f"the standardized effect size is {effect_size!r}: the stated spread is too small (or the "
                "difference too large) for a real outcome; check the units of the effect", "design.effect"
            )
        if effect_size == 0:
            raise InfeasibleDesign(
                "the effect size is 0: no sample size can detect a zero difference", "design.effect"
            )
        if abs(effect_size) > MAX_EFFECT:
            raise InfeasibleDesign(
                f"the standardized effect size ({self.symbol_for(design)} = {effect_size:.4g}) is more than "
                f"{MAX_EFFECT:g} in absolute value, which no real outcome shows; check the units of the effect "
                "(difference and SD in the same unit)", "design.effect"
            )
        if design.alternative == "greater" and effect_size < 0:
            raise InfeasibleDesign(
                f"alternative 'greater' tests for an increase, but the effect is negative ({self.symbol_for(design)} = "
                f"{effect_size:.4g}); use 'less' or check the sign of the difference",
                "design.alternative",
            )
        if design.alternative == "less" and effect_size > 0:
            raise InfeasibleDesign(
                f"alternative 'less' tests for a decrease, but the effect is positive ({self.symbol_for(design)} = "
                f"{effect_size:.4g}); use 'greater' or check the sign of the difference",
                "design.alternative",
            )
