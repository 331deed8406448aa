"""Optional design-level blocks shared by every family: ``design.simulation`` and ``design.pilot``.

They hold data only. :mod:`registry.power.simulate` runs the simulation;
:mod:`registry.pilot` (outside the power package, because it reads files) reads the pilot data.
"""

from __future__ import annotations

import math
import posixpath
import re

from pydantic import BaseModel, ConfigDict, field_validator

from .fields import free, locked, out_of_range

__all__ = ["SimulationPlan", "PilotSource", "DEFAULT_SEED", "DEFAULT_REPS", "MAX_REPS"]

DEFAULT_SEED = 20270301
DEFAULT_REPS = 10_000
MAX_REPS = 10_000_000
_SHA256_RE = re.compile(r"^[0-9a-fA-F]{64}$")


class SimulationPlan(BaseModel):
    """Monte Carlo check of the analytic power (``design.simulation``); ``check`` runs it."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)

    reps: int = free(
        default=DEFAULT_REPS, ge=100, le=MAX_REPS,
        description=f"Simulated experiments, 100 to {MAX_REPS:,}; the standard error shrinks as 1/sqrt(reps).",
    )
    seed: int = free(
        default=DEFAULT_SEED, ge=0, le=2**63 - 1,
        description="Seed of the random numbers: the same seed gives the same simulated power.",
    )
    distribution: str | None = free(
        default=None, min_length=1, max_length=40,
        description="Shape of the simulated outcome; by default the family's own (normal for the t-tests, "
        "binary for proportions), or another the family offers "
        "(lognormal and counts for one-sample-t and two-sample-t; see docs/simulation.md).",
    )
    baseline_mean: float | None = free(
        default=None,
        description="Mean of group 1 (the null value for one-sample designs), needed by the lognormal and "
        "counts shapes; in outcome units, or in SD units when the effect is given as d.",
    )

    @field_validator("baseline_mean")
    @classmethod
    def _finite(cls, value: float | None) -> float | None:
        if value is not None and not math.isfinite(value):
            raise ValueError(f"baseline_mean must be a finite number; got {value!r}")
        return value


class PilotSource(BaseModel):
    """Where the SD assumption came from (``design.pilot``): a column of a CSV file next to the spec."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)

    file: str = locked(
        min_length=1, max_length=1000,
        description="CSV file with the pilot or control data, relative to the spec's folder (forward slashes).",
    )
    column: str = locked(min_length=1, max_length=200, description="Name of the column (header) holding the values.")
    sha256: str = locked(
        description="SHA-256 of the file as printed by `prespec pilot`; check warns when the file changes.",
    )
    confidence: float = locked(
        default=0.8,
        description="One-sided confidence level of the upper limit of the SD, in [0.5, 1).",
    )

    @field_validator("file")
    @classmethod
    def _relative(cls, value: str) -> str:
        if "\\" in value:
            raise ValueError(f"file must use forward slashes (/); got {value!r}")
        if posixpath.isabs(value) or re.match(r"^[A-Za-z]:", value):
            raise ValueError(f"file must be relative to the spec's folder, not absolute; got {value!r}")
        return value

    @field_validator("sha256")
    @classmethod
    def _hex(cls, value: str) -> str:
        if not _SHA256_RE.match(value):
            raise ValueError(f"sha256 must be 64 hexadecimal digits, as `prespec pilot` prints it; got {value!r}")
        return value.lower()

    @field_validator("confidence")
    @classmethod
    def _level(cls, value: float) -> float:
        if not (math.isfinite(value) and 0.5 <= value < 1):
            raise ValueError(out_of_range("confidence", "[0.5, 1)", value))
        return value
