"""The ``design.sequential`` block (interim looks and their stopping boundaries) and the record of an
interim look (``interim_looks`` in a spec). They hold data only: :mod:`registry.power.sequential`
computes the boundaries, :mod:`registry.power.sequential_size` the maximum n."""

from __future__ import annotations

import math
import re
from datetime import date
from typing import Annotated, Any, Literal

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, field_validator, model_validator

from .fields import free, locked
from .sequential import SPENDING_FUNCTIONS, equal_fractions

__all__ = ["SequentialPlan", "InterimLook", "Decision", "SEQUENTIAL_FAMILIES", "MAX_LOOKS"]

#: Families whose test statistic is (asymptotically) normal with independent increments.
SEQUENTIAL_FAMILIES = ("one-sample-t", "paired-t", "two-sample-t", "welch-t", "two-proportions", "log-rank")

MAX_LOOKS = 20

Spending = Literal["obrien-fleming", "pocock", "power", "haybittle-peto"]
FutilitySpending = Literal["obrien-fleming", "pocock", "power"]
Decision = Literal["continue", "stop-efficacy", "stop-futility", "stop-harm", "stop-other"]


def _spending_list() -> str:
    return "; ".join(f"{name}: {what}" for name, what in SPENDING_FUNCTIONS.items())


class SequentialPlan(BaseModel):
    """Interim analyses with stopping boundaries (a group-sequential design).

    >>> SequentialPlan(looks=3).fractions
    (0.3333333333333333, 0.6666666666666666, 1.0)
    >>> SequentialPlan(looks=[0.5, 1.0], efficacy="pocock").fractions
    (0.5, 1.0)
    """

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)

    looks: int | list[float] = locked(
        description=f"Number of equally spaced analyses including the final one (1 to {MAX_LOOKS}), or their "
        "information fractions in (0, 1], increasing and ending at 1 (e.g. [0.5, 0.75, 1]).",
    )
    efficacy: Spending = locked(
        default="obrien-fleming",
        description="How the type I error is spent over the looks: " + _spending_list() + ".",
    )
    efficacy_rho: float | None = locked(
        default=None, description="Exponent rho of the power spending function (efficacy: power), above 0."
    )
    futility: Literal["none", "binding", "non-binding"] = locked(
        default="none",
        description="Stop early for futility: none; binding (the efficacy boundaries rely on stopping when a "
        "futility boundary is crossed); non-binding (the level holds even if the study goes on).",
    )
    futility_spending: FutilitySpending = locked(
        default="obrien-fleming",
        description="How the type II error is spent over the looks for the futility boundaries "
        "(obrien-fleming, pocock or power).",
    )
    futility_rho: float | None = locked(
        default=None, description="Exponent rho of the power spending function for futility, above 0."
    )

    @field_validator("looks", mode="before")
    @classmethod
    def _looks_shape(cls, value: Any) -> Any:
        number = lambda x: isinstance(x, (int, float)) and not isinstance(x, bool)  # noqa: E731
        if (isinstance(value, int) and not isinstance(value, bool)) or (
                isinstance(value, list) and all(number(x) for x in value)):
            return [float(x) for x in value] if isinstance(value, list) else value
        raise ValueError("looks must be a whole number of equally spaced looks (e.g. 3) or a list of information "
                         f"fractions ending at 1 (e.g. [0.5, 0.75, 1]); got {value!r}")

    @field_validator("looks")
    @classmethod
    def _looks(cls, value: int | list[float]) -> int | list[float]:
        if isinstance(value, int):
            if not 1 <= value <= MAX_LOOKS:
                raise ValueError(f"looks must be a whole number from 1 to {MAX_LOOKS}; got {value}")
            return value
        if not 1 <= len(value) <= MAX_LOOKS:
            raise ValueError(f"give 1 to {MAX_LOOKS} information fractions; got {len(value)}")
        for i, t in enumerate(value):
            if not (math.isfinite(t) and 0 < t <= 1):
                raise ValueError(f"information fraction {i + 1} ({t!r}) must be in (0, 1]")
        for i, (a, b) in enumerate(zip(value, value[1:])):
            if b - a < 0.01:
                raise ValueError(f"information fractions must increase by at least 0.01; look {i + 2} ({b:g}) "
                                 f"follows {a:g}")
        if value[-1] != 1:
            raise ValueError(f"the last look is the final analysis at information fraction 1; got {value[-1]:g}")
        return value

    @model_validator(mode="after")
    def _rho_where_needed(self) -> "SequentialPlan":
        for which, spending, rho in (("efficacy", self.efficacy, self.efficacy_rho),
                                     ("futility", self.futility_spending if self.futility != "none" else None,
                                      self.futility_rho)):
            if spending == "power" and rho is None:
                raise ValueError(f"{which}: power needs {which}_rho, the exponent of a t^rho (e.g. 3)")
            if rho is not None and spending != "power":
                raise ValueError(f"{which}_rho applies only to the power spending function ({which}: power)")
            if rho is not None and not (0 < rho <= 20):
                raise ValueError(f"{which}_rho must be in (0, 20]; got {rho:g}")
        return self

    @property
    def fractions(self) -> tuple[float, ...]:
        if isinstance(self.looks, int):
            return equal_fractions(self.looks)
        return tuple(float(t) for t in self.looks)

    @property
    def count(self) -> int:
        return len(self.fractions)

    def describe(self) -> str:
        """One line naming the looks and the rules, for reports."""
        looks = ", ".join(f"{t:.3g}" for t in self.fractions)
        rho = f" (rho {self.efficacy_rho:g})" if self.efficacy_rho is not None else ""
        text = f"{self.count} looks at information {looks}; efficacy {self.efficacy}{rho}"
        if self.futility != "none":
            frho = f" (rho {self.futility_rho:g})" if self.futility_rho is not None else ""
            text += f"; {self.futility} futility ({self.futility_spending}{frho})"
        return text


def _iso_date(value: Any) -> Any:
    if isinstance(value, date):
        return value
    if isinstance(value, str) and re.match(r"^\d{4}-\d{2}-\d{2}$", value.strip()):
        try:
            return date.fromisoformat(value.strip())
        except ValueError as exc:
            raise ValueError(f"{value!r} is not a real calendar date ({exc})") from None
    raise ValueError(f"must be a date written YYYY-MM-DD (ISO 8601), e.g. 2027-03-01; got {value!r}")


_IsoDate = Annotated[date, BeforeValidator(_iso_date), Field(strict=False)]


class InterimLook(BaseModel):
    """One interim analysis as it happened (``interim_looks``); check compares it with the plan."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)

    date: _IsoDate = free(
        description="Date of the interim analysis (YYYY-MM-DD)."
    )
    information_fraction: float = free(
        description="Information at this look over the planned maximum, in (0, 1] (analysable n over the "
        "maximum n; events over the maximum events for log-rank).",
    )
    z: float = free(
        description="Observed test statistic on the z scale, signed as the analysis defines it (group 2 minus "
        "group 1); a t statistic is converted through its p-value.",
    )
    decision: Decision = free(
        description="What was decided: continue, stop-efficacy, stop-futility, stop-harm or stop-other.",
    )
    decided_by: str | None = free(
        default=None, min_length=1, max_length=500, description="Who decided, e.g. the data monitoring committee."
    )

    @field_validator("information_fraction")
    @classmethod
    def _fraction(cls, value: float) -> float:
        if not (math.isfinite(value) and 0 < value <= 1):
            raise ValueError(f"information_fraction must be in (0, 1]; got {value!r}")
        return value

    @field_validator("z")
    @classmethod
    def _finite(cls, value: float) -> float:
        if not math.isfinite(value) or abs(value) > 100:
            raise ValueError(f"z must be a finite number within +-100; got {value!r}")
        return value
