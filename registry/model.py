"""The experiment spec: the one source of truth for validation, the JSON Schema and the docs.

Every field says whether it is *locked* (it defines the design or analysis, so
changing it after data collection starts is drift) or *free* (status, notes,
contacts). ``locked_paths()`` reads that metadata back for the history checks.
"""

from __future__ import annotations

import re
from datetime import date
from typing import Annotated, Any, Literal

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, field_validator, model_validator

from .power.base import MAX_N, free, locked
from .power.catalog import DesignUnion
from .power.sequential_plan import InterimLook

__all__ = [
    "Spec",
    "DataCollection",
    "Hypothesis",
    "Outcome",
    "Outcomes",
    "SamplePlan",
    "Amendment",
    "Contact",
    "Status",
    "ID_PATTERN",
    "SCHEMA_ID",
    "locked_paths",
]

SCHEMA_ID = "prespec-spec.schema.json"
ID_PATTERN = r"^[a-z0-9]+(-[a-z0-9]+)*$"
_ID_RE = re.compile(ID_PATTERN)
_ISO_DATE_RE = re.compile(r"^\d{4}-\d{2}-\d{2}$")

Status = Literal["draft", "planned", "collecting", "complete", "withdrawn"]
StudyType = Literal["animal", "clinical-trial", "in-vitro", "field", "human-observational"]


def _iso_date(value: Any) -> Any:
    if isinstance(value, date):
        return value
    if not isinstance(value, str) or not _ISO_DATE_RE.match(value.strip()):
        raise ValueError(f"must be a date written YYYY-MM-DD (ISO 8601), e.g. 2027-03-01; got {value!r}")
    try:
        return date.fromisoformat(value.strip())
    except ValueError as exc:
        raise ValueError(f"{value!r} is not a real calendar date ({exc})") from None


IsoDate = Annotated[date, BeforeValidator(_iso_date), Field(strict=False)]
Text = Annotated[str, Field(min_length=1, max_length=20_000)]
ShortText = Annotated[str, Field(min_length=1, max_length=500)]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)


class DataCollection(_Strict):
    """When data collection starts; edits of locked fields from this date on are drift."""

    start: IsoDate = locked(description="First day of data collection (YYYY-MM-DD).")
    end: IsoDate | None = free(default=None, description="Planned last day of data collection.")

    @model_validator(mode="after")
    def _end_after_start(self) -> "DataCollection":
        if self.end is not None and self.end < self.start:
            raise ValueError(f"end ({self.end}) is before start ({self.start})")
        return self


class Hypothesis(_Strict):
    """One hypothesis; exactly one is primary and drives the sample size."""

    statement: Text = locked(description="The hypothesis, stated so that the primary analysis can test it.")
    primary: bool = locked(default=False, description="True for the one hypothesis the sample size is built on.")
    id: ShortText | None = locked(default=None, description="Short label, e.g. H1.")


class Outcome(_Strict):
    """A measured outcome with its unit."""

    name: ShortText = locked(description="What is measured, e.g. 'caecal butyrate'.")
    unit: ShortText | None = locked(default=None, description="Unit of measurement, e.g. 'umol/g'.")
    timepoint: ShortText | None = locked(default=None, description="When it is measured.")
    description: Text | None = locked(default=None, description="How it is measured.")


class Outcomes(_Strict):
    primary: Outcome = locked(description="The primary outcome; the design's effect is on this outcome.")
    secondary: list[Outcome] = locked(default_factory=list, description="Secondary outcomes.")


class SamplePlan(_Strict):
    """The planned enrolment."""

    per_group: int = locked(
        ge=1,
        le=MAX_N,
        description="Planned enrolment per group (group 1 for unequal allocation; units or pairs for "
        f"one-group designs), a whole number from 1 to {MAX_N:,}.",
    )
    justification: Text | None = locked(default=None, description="Anything the computed justification leaves out.")


class Amendment(_Strict):
    """A documented change of locked fields after data collection started."""

    date: IsoDate = free(description="Date of the amendment (YYYY-MM-DD).")
    fields: list[ShortText] = free(
        min_length=1, description="Dotted paths of the changed fields, e.g. design.effect.sd."
    )
    reason: Text = free(description="Why the change was needed and who approved it.")
    approved_by: ShortText | None = free(default=None, description="Who approved the amendment.")
    discloses: Annotated[str, Field(pattern=r"^([0-9a-f]{7,40}|[0-9]{4}-[0-9]{2}-[0-9]{2})$")] | None = free(
        default=None,
        description="For a change already committed without an amendment: that commit (7 to 40 hex digits) or its "
        "date (YYYY-MM-DD). Added in a later commit, the entry discloses the change as a deviation.",
    )


class Contact(_Strict):
    name: ShortText = free(description="Person responsible.")
    role: ShortText | None = free(default=None, description="Role, e.g. principal investigator, statistician.")
    email: ShortText | None = free(default=None, description="Contact address.")


class Spec(_Strict):
    """One planned experiment in the design registry."""

    model_config = ConfigDict(
        extra="forbid",
        strict=True,
        allow_inf_nan=False,
        title="prespec experiment spec",
        json_schema_extra={"$id": SCHEMA_ID},
        defer_build=True,
    )

    id: str = locked(
        min_length=1,
        max_length=64,
        description="Unique in the registry: lowercase letters, digits and single hyphens, e.g. fibre-butyrate.",
    )
    title: ShortText = free(description="Title of the experiment.")
    status: Status = free(description="draft, planned, collecting, complete or withdrawn.")
    question: Text | None = locked(default=None, description="The research question in one or two sentences.")
    population: Text | None = locked(
        default=None, description="Who or what is studied and the experimental unit (animal, culture, person)."
    )
    study_type: StudyType | None = free(
        default=None,
        description="animal, clinical-trial, in-vitro, field or human-observational: chooses the reporting "
        "guidelines the summary checks (ARRIVE 2.0 for animal work, SPIRIT and CONSORT for trials, none "
        "forced on the others); inferred from the population where it can be.",
    )
    hypotheses: list[Hypothesis] = locked(default_factory=list, description="Hypotheses; exactly one primary.")
    outcomes: Outcomes | None = locked(default=None, description="Primary and secondary outcomes with units.")
    data_collection: DataCollection = locked(description="Dates of data collection.")
    design: DesignUnion = locked(description="Design family, test assumptions and the effect to detect.")
    sample_size: SamplePlan = locked(description="The planned enrolment.")
    analysis_plan: Text | None = locked(default=None, description="How the primary outcome will be analysed.")
    exclusion_criteria: list[Text] = locked(default_factory=list, description="Pre-set rules for excluding units or data.")
    randomisation: Text | None = locked(default=None, description="How units are allocated to groups.")
    blinding: Text | None = locked(default=None, description="Who is blinded to allocation, and how.")
    stopping_rule: Text | None = locked(default=None, description="When data collection stops (fixed n, interim rules).")
    interim_looks: list[InterimLook] = free(
        default_factory=list, max_length=100,
        description="Interim analyses as they happened (date, information_fraction, z, decision); check compares "
        "them with design.sequential (docs/methods.md, sequential designs).",
    )
    amendments: list[Amendment] = free(default_factory=list, description="Documented changes after data collection started.")
    contacts: list[Contact] = free(default_factory=list, description="People responsible for the experiment.")
    notes: Text | None = free(default=None, description="Free notes.")
    progress: Text | None = free(default=None, description="Progress notes during collection.")

    @field_validator("id")
    @classmethod
    def _id_shape(cls, value: str) -> str:
        if not _ID_RE.fullmatch(value):
            raise ValueError(
                "id must be lowercase letters, digits and single hyphens, starting and ending with a letter "
                f"or digit (e.g. 'fibre-butyrate'); got {value!r}"
            )
        return value

    @field_validator("hypotheses")
    @classmethod
    def _one_primary(cls, value: list[Hypothesis]) -> list[Hypothesis]:
        primaries = sum(h.primary for h in value)
        if primaries > 1:
            raise ValueError(f"{primaries} hypotheses are marked primary; exactly one may be")
        if len(value) > 1 and primaries == 0:
            raise ValueError("mark exactly one hypothesis as 'primary: true'; the sample size is built on it")
        return value

    @property
    def primary_hypothesis(self) -> Hypothesis | None:
        for hypothesis in self.hypotheses:
            if hypothesis.primary:
                return hypothesis
        return self.hypotheses[0] if len(self.hypotheses) == 1 else None


def _is_locked(info: Any) -> bool:
    extra = info.json_schema_extra
    return bool(isinstance(extra, dict) and extra.get("x-locked"))


def locked_paths(model: type[BaseModel] = Spec, prefix: str = "") -> dict[str, bool]:
    """Map each top-level and nested field path to whether it is locked (design-defining)."""
    out: dict[str, bool] = {}
    for name, info in model.model_fields.items():
        path = f"{prefix}{name}"
        out[path] = _is_locked(info)
    return out
