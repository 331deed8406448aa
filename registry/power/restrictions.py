"""Refusals shared by families whose test has no direction or no second group."""

from __future__ import annotations

from .base import DesignBase, Family, InfeasibleDesign

__all__ = ["require_two_sided", "require_no_allocation_ratio"]


def require_two_sided(design: DesignBase, family: Family) -> None:
    """F and chi-square tests reject for large statistics only: a direction has no meaning."""
    if design.alternative != "two-sided":
        raise InfeasibleDesign(
            f"the {family.title} has no direction: alternative must be 'two-sided' "
            f"(the test rejects for large values of its statistic); got {design.alternative!r}",
            "design.alternative",
        )


def require_no_allocation_ratio(design: DesignBase, family: Family) -> None:
    """An allocation ratio only describes two-group designs; refuse it rather than ignore it."""
    if design.allocation_ratio != 1.0:
        raise InfeasibleDesign(
            f"allocation_ratio applies to two-group designs; the {family.title} "
            f"({family.unit}) does not use it; remove it (got {design.allocation_ratio!r})",
            "design.allocation_ratio",
        )
