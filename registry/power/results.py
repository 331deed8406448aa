"""Small named results with a readable repr."""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any

__all__ = ["SampleSize", "PowerAtN", "power_text"]


def power_text(power: float, target: float, digits: int = 3) -> str:
    """``power`` with ``digits`` decimals, or more where fewer would print a power below ``target``
    as the target or above it (0.7996 is "0.7996", never "0.800", against a target of 0.8).

    >>> power_text(0.80146, 0.8), power_text(0.79962, 0.8), power_text(0.5, 0.8)
    ('0.801', '0.7996', '0.500')
    """
    text = f"{power:.{digits}f}"
    while power < target and float(text) >= target and digits < 12:
        digits += 1
        text = f"{power:.{digits}f}"
    return text


@dataclass(frozen=True, repr=False)
class SampleSize:
    """The smallest analysable sample reaching the target power, and its enrolment."""

    test: str
    n_per_group: int
    n_total: int
    achieved_power: float
    target_power: float
    alpha: float
    alternative: str
    effect_size: float
    symbol: str
    group_sizes: tuple[int, ...]
    enrolment_per_group: int
    enrolment_total: int
    unit: str
    method: str
    reference: str
    events: int | None = None
    notes: tuple[str, ...] = field(default_factory=tuple)
    #: With ``design.multiplicity``: the level each outcome is tested at (``alpha`` stays familywise).
    alpha_per_test: float | None = None
    #: With ``design.cluster``: the design effect, the n before it was applied, and whole clusters to
    #: enrol per group (after attrition), each of ``cluster_size`` units.
    design_effect: float | None = None
    individual_n_per_group: int | None = None
    cluster_size: int | None = None
    clusters_per_group: tuple[int, ...] | None = None
    #: How ``achieved_power`` was obtained: exact, exact for fixed predictors, normal approximation,
    #: or simulation (then ``verification`` holds its replicates, seed and Monte Carlo standard error).
    label: str = "exact"
    #: The published formula's n (group 1, before the design effect) the search started from, and
    #: that formula's name, when the reported n comes from enumeration or simulation instead.
    start_n: int | None = None
    start_method: str | None = None
    verification: dict[str, Any] | None = None

    def __repr__(self) -> str:
        events = f", events={self.events}" if self.events is not None else ""
        clusters = f", clusters_per_group={self.clusters_per_group}" if self.clusters_per_group else ""
        return (
            f"SampleSize(test={self.test!r}, n_per_group={self.n_per_group}, n_total={self.n_total}"
            f"{events}{clusters}, achieved_power={self.achieved_power:.4f})"
        )

    def enrolment_words(self) -> str:
        """Enrolment as people say it, with whole clusters where the design has them.

        >>> from registry.power import design_from_params, solve_sample_size
        >>> solve_sample_size(design_from_params("two-sample-t", d=0.5, attrition=0.1,
        ...                   cluster={"size": 10, "icc": 0.05})).enrolment_words()
        '130 per group: 13 clusters of 10'
        """
        text = f"{self.enrolment_per_group:,} {self.unit}"
        if self.clusters_per_group:
            count = self.clusters_per_group[0]
            text += f": {count:,} cluster{'s' if count != 1 else ''} of {self.cluster_size}"
        return text

    def to_dict(self) -> dict[str, Any]:
        out = asdict(self)
        out["group_sizes"] = list(self.group_sizes)
        out["notes"] = list(self.notes)
        if self.clusters_per_group is not None:
            out["clusters_per_group"] = list(self.clusters_per_group)
        return out


@dataclass(frozen=True, repr=False)
class PowerAtN:
    """Power at a given analysable n, and the smallest effect detectable there."""

    test: str
    n_per_group: int
    n_total: int
    power: float
    alpha: float
    alternative: str
    target_power: float
    effect_size: float
    symbol: str
    minimum_detectable_effect: float | None
    minimum_detectable_natural: dict[str, float]
    group_sizes: tuple[int, ...]
    unit: str
    events: int | None = None
    notes: tuple[str, ...] = field(default_factory=tuple)
    #: With ``design.multiplicity``: the level each outcome is tested at.
    alpha_per_test: float | None = None
    #: With ``design.cluster``: the design effect and the individual-level n it leaves,
    #: ``floor(n_per_group / design_effect)``, at which power is computed.
    design_effect: float | None = None
    effective_n_per_group: int | None = None
    #: For a simulation-verified family (:func:`registry.power.verify.verified_power_at`): ``power`` is
    #: the simulated power of the test, ``formula_power`` the formula's, and ``verification`` holds the
    #: replicates, seed, outcome distribution and Monte Carlo standard error. The minimum detectable
    #: effect stays the formula's.
    formula_power: float | None = None
    verification: dict[str, Any] | None = None

    def __repr__(self) -> str:
        mde = "None" if self.minimum_detectable_effect is None else f"{self.minimum_detectable_effect:.4f}"
        return (
            f"PowerAtN(test={self.test!r}, n_per_group={self.n_per_group}, power={self.power:.4f}, "
            f"minimum_detectable_effect={mde})"
        )

    def to_dict(self) -> dict[str, Any]:
        out = asdict(self)
        out["group_sizes"] = list(self.group_sizes)
        out["notes"] = list(self.notes)
        return out
