"""The numbers a summary shows beyond check's: sensitivity scenarios and the power curve.

Everything goes through check's solver (:func:`~registry.power.solve.solve_sample_size`
and :func:`~registry.power.solve.power_of`) with a standardized effect size, so it works
for every design family and every adjustment the solver makes: "SD 20% larger" divides the
standardized effect by 1.2 and "effect 20% smaller" multiplies it by 0.8.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..power import InfeasibleDesign
from ..power.base import DesignBase, Family
from ..power.results import PowerAtN, SampleSize
from ..power.solve import power_of, solve_sample_size

__all__ = ["Scenario", "Curve", "SCALES", "has_spread", "n_needed", "sensitivity", "power_curve", "analysable"]

#: The changes the sensitivity table shows: 10, 20 and 30 percent.
SCALES: tuple[float, ...] = (0.1, 0.2, 0.3)


@dataclass(frozen=True)
class Scenario:
    """One what-if row: the changed standardized effect, the n it needs and the power at the planned n."""

    label: str
    effect_size: float
    n_analysable: int | None
    n_enrolled: int | None
    power_at_planned: float | None
    #: How the row's n and power were obtained: the family's label (``exact``, ``normal approximation``...)
    #: or ``simulation`` (the stated design of a simulation-verified family, from check's own result).
    method: str = "exact"

    def __repr__(self) -> str:
        power = "None" if self.power_at_planned is None else f"{self.power_at_planned:.4f}"
        return (f"Scenario({self.label!r}, effect_size={self.effect_size:.4f}, n_analysable={self.n_analysable}, "
                f"power_at_planned={power})")


@dataclass(frozen=True)
class Curve:
    """Power at a grid of analysable n per group."""

    n: tuple[int, ...]
    power: tuple[float, ...]


def analysable(planned: int, attrition: float) -> int:
    """Units left for analysis from ``planned`` after losing ``attrition``, rounded down as check does."""
    return math.floor(planned * (1 - attrition) + 1e-9)


def has_spread(family: Family) -> bool:
    """Whether the family's effect is stated against an SD, so that "SD larger" means something."""
    return any(name == "sd" or name.startswith("sd") for name in family.effect_model.model_fields)


def n_needed(design: DesignBase, effect_size: float | None = None) -> tuple[int, int] | None:
    """Analysable and enrolled n (group 1) reaching ``design.power``, by check's own solver; None if infeasible."""
    try:
        sample = solve_sample_size(design, effect_size)
    except InfeasibleDesign:
        return None
    return sample.n_per_group, sample.enrolment_per_group


def sensitivity(design: DesignBase, planned: int, verified: tuple[SampleSize, PowerAtN | None] | None = None,
                ) -> list[Scenario]:
    """The stated design, then SD 10/20/30% larger (where the family has an SD), then effect 10/20/30% smaller.

    ``planned`` is the planned enrolment of group 1; power is at its analysable part. Every row comes
    from the solver (the family's exact power or formula, named in ``method``). ``verified`` is
    check's simulation-verified size and power at the planned n for the stated design: it replaces
    the first row (``method`` ``simulation``); the what-if rows stay the formula's, and say so.

    >>> from registry.power import design_from_params
    >>> rows = sensitivity(design_from_params("two-sample-t", d=0.5), 64)
    >>> [(r.label, r.n_analysable) for r in rows]  # doctest: +NORMALIZE_WHITESPACE
    [('as stated', 64), ('SD 10% larger', 77), ('SD 20% larger', 92), ('SD 30% larger', 108),
     ('effect 10% smaller', 79), ('effect 20% smaller', 100), ('effect 30% smaller', 130)]
    """
    family = design.family
    es = family.effect_size(design)
    kept = analysable(planned, design.attrition)
    cases: list[tuple[str, float]] = [("as stated", es)]
    if has_spread(family):
        cases += [(f"SD {scale:.0%} larger", es / (1 + scale)) for scale in SCALES]
    cases += [(f"effect {scale:.0%} smaller", es * (1 - scale)) for scale in SCALES]
    method = family.label(design.as_tested())
    rows = []
    for label, effect in cases:
        if label == "as stated" and verified is not None:
            sample, at = verified
            rows.append(Scenario(label, effect, sample.n_per_group, sample.enrolment_per_group,
                                 at.power if at is not None else None, sample.label))
            continue
        needed = n_needed(design, None if label == "as stated" else effect)
        power = float(power_of(design, [kept], effect)[0]) if kept >= family.min_n else None
        rows.append(Scenario(label, effect, needed[0] if needed else None, needed[1] if needed else None, power,
                             method))
    return rows


def power_curve(design: DesignBase, *marks: int, points: int = 240) -> Curve:
    """Power at integer n from the family's smallest n to well past the largest of ``marks``.

    >>> from registry.power import design_from_params
    >>> curve = power_curve(design_from_params("two-sample-t", d=0.5), 64)
    >>> curve.n[0], curve.n[-1], round(curve.power[curve.n.index(64)], 4)
    (2, 96, 0.8015)
    """
    family = design.family
    top = max([family.min_n + 8, *marks])
    high = max(top + 4, math.ceil(top * 1.5))
    grid = np.unique(np.round(np.linspace(family.min_n, high, points)).astype(int))
    grid = np.unique(np.concatenate([grid, [m for m in marks if family.min_n <= m <= high]])).astype(int)
    power = power_of(design, grid)
    return Curve(tuple(int(n) for n in grid), tuple(float(p) for p in power))
