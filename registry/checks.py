"""What ``prespec check`` concludes about each spec: findings and the recomputed sample size.

This module decides; it prints nothing and writes nothing. ``commands/check.py`` shows
the results and ``report.py`` formats them.
"""

from __future__ import annotations

import functools
import math
import re
from collections import defaultdict
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterator, Literal, Protocol

from .config import RegistryConfig
from .discovery import SpecFile
from .problems import InvalidSpec, plain_text, printable

if TYPE_CHECKING:  # the model and the statistics load when a file is checked, not when results are shown
    from .model import Spec
    from .power import PowerAtN, SampleSize
    from .power.simulate import SimulatedPower
    from .yamlio import Document

__all__ = ["Finding", "SpecReport", "check_file", "check_files", "Severity", "CAUTION", "RECOMMENDED_FIELDS"]


@functools.lru_cache(maxsize=None)
def _id_re() -> re.Pattern[str]:
    from .model import ID_PATTERN

    return re.compile(ID_PATTERN)

Severity = Literal["error", "warning", "info"]

CAUTION = (
    "prespec supports, and does not replace, review by a statistician, ethics or animal-welfare approval "
    "and local regulations."
)

#: Fields a registered (non-draft) spec should state, with why a reviewer needs each.
RECOMMENDED_FIELDS: dict[str, str] = {
    "question": "the research question",
    "population": "the population and experimental unit",
    "hypotheses": "the hypotheses, one primary",
    "outcomes": "the primary outcome and its unit",
    "design.effect_rationale": "why the effect is the smallest that matters",
    "design.variability_source": "where the SD assumption comes from",
    "analysis_plan": "the analysis plan",
    "exclusion_criteria": "the exclusion criteria",
    "randomisation": "how units are randomised",
    "blinding": "who is blinded and how",
    "stopping_rule": "the stopping rule",
    "contacts": "who is responsible",
}


@dataclass(frozen=True)
class Finding:
    """One conclusion about a spec. ``kind`` values are a stable contract (docs/findings.md)."""

    kind: str
    severity: Severity
    field: str
    line: int | None
    message: str
    column: int | None = None

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "severity": self.severity, "field": self.field, "line": self.line,
                "column": self.column, "message": self.message}


@dataclass
class SpecReport:
    """Everything check learned about one spec file."""

    path: str
    id: str | None = None
    spec: Spec | None = None
    document: Document | None = None
    findings: list[Finding] = field(default_factory=list)
    sample: SampleSize | None = None
    at_planned: PowerAtN | None = None
    simulated: SimulatedPower | None = None
    sequential: Any = None  # registry.power.sequential_size.SequentialSize with design.sequential
    assurance: Any = None  # registry.power.assurance.Assurance with design.assurance
    history: Any = None  # registry.history.SpecHistory when the file is in a git repository
    #: The spec's ``prespec/<id>/vN`` tags (registry.git.TagInfo), when read once for the whole registry.
    registration_tags: list[Any] | None = None
    #: The file's lines (printable) when it could not be loaded, so output can still show them.
    source_lines: list[str] = field(default_factory=list)

    @property
    def history_checked(self) -> bool:
        """Whether git history was read for this spec (so 'no history finding' means clean)."""
        return self.history is not None

    def ensure_document(self) -> None:
        """Make ``document`` and ``spec`` available (a report rebuilt from the check cache loads them)."""

    @property
    def valid(self) -> bool:
        """Whether the file is a spec that passed validation."""
        return self.spec is not None

    @property
    def test(self) -> str | None:
        return self.spec.design.test if self.spec else None

    @property
    def target_power(self) -> float | None:
        return self.spec.design.power if self.spec else None

    @property
    def planned_per_group(self) -> int | None:
        return self.spec.sample_size.per_group if self.spec else None

    @property
    def required_per_group(self) -> int | None:
        return self.sample.enrolment_per_group if self.sample else None

    @property
    def analysable_per_group(self) -> int | None:
        return self.sample.n_per_group if self.sample else None

    @property
    def achieved_power(self) -> float | None:
        return self.at_planned.power if self.at_planned else None

    @property
    def has_errors(self) -> bool:
        return any(f.severity == "error" for f in self.findings)

    @property
    def verdict(self) -> str:
        kinds = {f.kind for f in self.findings if f.severity == "error"}
        for kind in ("invalid", "underpowered", "partial-clusters"):
            if kind in kinds:
                return kind
        if kinds:
            return sorted(kinds)[0]
        if any(f.kind == "oversized" for f in self.findings):
            return "oversized"
        if any(f.kind == "deleted" for f in self.findings):
            return "deleted"
        return "ok"

    def to_dict(self) -> dict[str, Any]:
        return {
            "id": self.id,
            "path": self.path,
            "test": self.test,
            "required_per_group": self.required_per_group,
            "analysable_per_group": self.analysable_per_group,
            "planned_per_group": self.planned_per_group,
            "achieved_power": self.achieved_power,
            "target_power": self.target_power,
            "simulated_power": self.simulated.to_dict() if self.simulated else None,
            **({"sequential": self.sequential.to_dict()} if self.sequential is not None else {}),
            **({"assurance": self.assurance.to_dict()} if self.assurance is not None else {}),
            "verdict": self.verdict,
            "findings": [f.to_dict() for f in self.findings],
            **({"history": self.history.summary()} if self.history is not None else {}),
        }

    def add(self, kind: str, severity: Severity, field: str, message: str, loc: tuple[Any, ...] = ()) -> None:
        line = column = None
        if self.document is not None and loc:
            line, column = self.document.position(loc)
        self.findings.append(Finding(kind, severity, field, line, message, column))


def _invalid(report: SpecReport, error: InvalidSpec) -> None:
    for problem in error.problems:
        report.findings.append(Finding("invalid", "error", problem.field, problem.line, problem.message,
                                       problem.column))
    if report.document is None:
        report.source_lines = [printable(line) for line in error.source_lines]


def check_file(spec_file: SpecFile, config: RegistryConfig | None = None, executor: Any = None,
               raw: bytes | None = None) -> SpecReport:
    """Load, validate and size one spec file. Never raises for a bad file: it becomes findings.

    ``raw``: the file's bytes when the caller has read them already (the check cache hashes them)."""
    from .validation import validate_document
    from .yamlio import load_bytes_fast, load_file

    config = config or RegistryConfig()
    report = SpecReport(path=spec_file.display)
    if spec_file.refusal:
        report.add("invalid", "error", "", spec_file.refusal)
        return report
    try:
        report.document = (load_file(spec_file.path, spec_file.display) if raw is None
                           else load_bytes_fast(raw, spec_file.display))
    except InvalidSpec as error:
        _invalid(report, error)
        return report
    data = report.document.data
    if not_a_spec(data):
        report.add("not-a-spec", "info", "", "YAML with no spec field (no id, no design), so not a spec; skipped")
        return report
    if isinstance(data.get("id"), str) and _id_re().fullmatch(data["id"]):
        report.id = data["id"]  # shown beside the errors; an unchecked id could carry markup
    try:
        report.spec = validate_document(report.document)
    except InvalidSpec as error:
        _invalid(report, error)
        return report
    spec = report.spec
    report.id = spec.id
    try:
        _size(report, spec, config, spec_file.root, executor)
    except Exception as error:  # noqa: BLE001 - one design the engine cannot handle must not stop the run
        report.sample = report.at_planned = None
        report.add("invalid", "error", "design",
                   f"the sample size could not be computed for these assumptions ({type(error).__name__}: "
                   f"{error}); check that alpha ({spec.design.alpha:g}), power ({spec.design.power:g}) and the "
                   "effect are realistic. If they are, this is a bug in prespec: please report it", ("design",))
    if spec.design.assurance is not None and report.sample is not None:
        from .interim import assurance_for_check

        assurance_for_check(report, spec, spec_file)
    _simulation(report, spec)
    if spec.interim_looks or spec.design.sequential is not None:
        from .interim import check_looks

        check_looks(report, spec)
    _pilot(report, spec, spec_file)
    _completeness(report, spec)
    _template_text(report, spec)
    stem = spec_file.path.name.rsplit(".", 1)[0]
    if stem != spec.id:
        report.add("id-mismatch", "warning", "id",
                   f"the file is named '{plain_text(spec_file.path.name)}' but the id is {spec.id!r}; "
                   f"name it {spec.id}.yaml so people find it", ("id",))
    return report


def _size(report: SpecReport, spec: Spec, config: RegistryConfig, root: Path | None = None,
          executor: Any = None) -> None:
    from .power import EventsOnly, InfeasibleDesign, power_at, solve_sample_size
    from .power.results import power_text
    from .power.simulate import InvalidSimulation
    from .power.verify import needs_verification

    design = spec.design

    verify = needs_verification(design)
    try:
        if verify:
            from .power.cache import default_cache_dir
            from .power.verify import verified_sample_size

            cache_dir = default_cache_dir(root)
            report.sample = verified_sample_size(design, executor=executor, cache_dir=cache_dir)
        else:
            report.sample = solve_sample_size(design)
    except EventsOnly as error:
        from .power.sequential_size import sequential_events

        looks = sequential_events(design, error.events)
        report.add("events-only", "warning", "design.effect",
                   f"{error.message}{'; ' + looks if looks else ''}; until then sample_size.per_group cannot be "
                   "checked", ("design", "effect"))
        return
    except InfeasibleDesign as error:
        report.add("invalid", "error", error.field, error.message, tuple(error.field.split(".")))
        return
    except InvalidSimulation as error:
        report.add("invalid", "error", "design.simulation", str(error), ("design", "simulation"))
        return
    if design.sequential is not None:
        from .interim import size_for_check

        if not size_for_check(report, design):
            return
    sample = report.sample
    family = design.family
    if not verify or (sample.verification is None and design.sequential is None):  # not simulated
        for doubt in family.doubts(design):
            report.add("approximate-size", "warning", "design.test", doubt, ("design", "test"))
    if design.cluster is not None and not family.cluster_means:
        count = sample.clusters_per_group[0] if sample.clusters_per_group else None
        clusters = f" ({count} clusters per group)" if count is not None else ""
        report.add(
            "approximate-size", "warning", "design.cluster",
            f"the clustered size{clusters} is the {family.title}'s n times the design effect "
            f"{design.design_effect:.4g}, an approximation that assumes many clusters and an analysis that "
            "accounts for them; prespec does not simulate clustered designs of this family, so the size is not "
            "verified. With few clusters per group a cluster-level analysis has less power than this promises: "
            "have the planned clustered analysis checked by a statistician or by a simulation of it "
            "(docs/methods.md, Clustered designs)", ("design", "cluster"))
    for note in sample.notes:
        report.add("method-note", "info", "design", note, ("design",))
    planned = spec.sample_size.per_group
    analysable = math.floor(planned * (1 - design.attrition) + 1e-9)
    loc = ("sample_size", "per_group")
    unit = family.unit if family.unit != "per group" else "per group"
    if analysable >= family.min_n:
        report.at_planned = power_at(design, analysable)
        if verify and sample.verification is not None and report.sequential is None:
            report.at_planned = _simulated_at(design, analysable, report.at_planned, sample.verification, root)
        if report.sequential is not None:
            from .power.sequential_size import apply_to_power

            report.at_planned = apply_to_power(report.at_planned, report.sequential)
    required = sample.enrolment_per_group
    after = f" ({analysable} analysable after {design.attrition:.0%} attrition)" if design.attrition else ""
    at = report.at_planned
    if planned < required and at is not None and at.power >= design.power and sample.clusters_per_group:
        report.add(
            "partial-clusters", "error", "sample_size.per_group",
            f"planned {planned} {unit} is not a whole number of clusters of {sample.cluster_size}: enrol "
            f"{sample.enrolment_words()} ({_power_word(at)} at the planned n would be {power_text(at.power, design.power)}, "
            f"which reaches the target {design.power:g}, but the design randomises whole clusters)",
            loc,
        )
    elif planned < required:
        if at is None:
            achieved = f"leaves fewer than {family.min_n} analysable units, below the target {design.power:g}"
        elif at.power >= design.power:  # exact power not monotone in n: this n reaches it, some larger do not
            achieved = (f"gives {_power_word(at)} {power_text(at.power, design.power)}, at the target {design.power:g} at this n "
                        "only (some larger n fall below it)")
        else:
            achieved = f"gives {_power_word(at)} {power_text(at.power, design.power)}, below the target {design.power:g}"
        report.add(
            "underpowered", "error", "sample_size.per_group",
            f"planned {planned} {unit}{after} {achieved}; "
            f"{sample.enrolment_words()} needed{_analysable_note(sample.n_per_group, design.attrition)}",
            loc,
        )
    elif planned > required * (1 + config.oversize_margin):
        extra = planned - required
        report.add(
            "oversized", "warning", "sample_size.per_group",
            f"planned {planned} {unit} is {extra / required:.0%} more than the {required} needed for power "
            f"{design.power:g} ({_power_word(report.at_planned)} at the planned n: {report.at_planned.power:.3f}); {extra} more units "
            f"{'per group ' if family.groups > 1 else ''}than the design needs, reduce the enrolment or justify it",
            loc,
        )


def _simulated_at(design: Any, n: int, at: PowerAtN, verification: dict[str, Any], root: Path | None) -> PowerAtN:
    """The planned n's power from the same simulation that verified the size (cached with it)."""
    from .power.cache import default_cache_dir
    from .power.verify import verified_power_at

    return verified_power_at(design, n, reps=verification["reps"], seed=verification["seed"],
                             cache_dir=default_cache_dir(root))


def _power_word(at: PowerAtN | None) -> str:
    """The words for the power at the planned n: "simulated power" where it comes from simulating the test."""
    return "simulated power" if at is not None and at.verification is not None else "power"


def _analysable_note(analysable: int, attrition: float) -> str:
    return f" ({analysable} analysable, enrolled for {attrition:.0%} attrition)" if attrition else ""


def _simulation(report: SpecReport, spec: Spec) -> None:
    """Run ``design.simulation`` at the planned analysable n and compare it with the exact power."""
    from .power.verify import formula_method
    from .power.simulate import InvalidSimulation, simulate_plan

    design = spec.design
    if design.simulation is None or report.at_planned is None:
        return
    at = report.at_planned
    loc = ("design", "simulation")
    try:
        sim = simulate_plan(design, at.n_per_group)
    except InvalidSimulation as error:
        report.add("invalid", "error", "design.simulation", str(error), loc)
        return
    assert sim is not None
    report.simulated = sim
    unit = design.family.unit
    report.add(
        "simulated-power", "info", "design.simulation",
        f"simulated power at the planned {at.n_per_group} analysable {unit}: {sim.power:.3f} ± "
        f"{sim.standard_error:.3f} (SE; {sim.reps:,} simulated experiments, {sim.distribution} outcome, "
        f"seed {sim.seed}); " + (
            f"the same simulation verified the size; the formula ({formula_method(design)}) gives {at.formula_power:.3f}"
            if at.verification is not None and at.formula_power is not None else
            f"{_power_label(report)} power {at.power:.3f}"), loc,
    )
    if at.power >= design.power and sim.power < design.power - 3 * sim.standard_error:
        report.add(
            "simulation-disagrees", "warning", "design.simulation",
            f"with a {sim.distribution} outcome the simulated power {sim.power:.3f} ± {sim.standard_error:.3f} is "
            f"more than 3 standard errors below the target {design.power:g}, although the calculation "
            f"({_power_label(report)}) gives {at.power:.3f}: the test's assumptions may not hold for this outcome; consider a larger n, "
            "a transformation or a test suited to the outcome, and ask a statistician", loc,
        )


def _power_label(report: SpecReport) -> str:
    """How the power at the planned n was obtained (the label of the size it was computed with)."""
    if report.sample is not None:
        return report.sample.label
    assert report.spec is not None
    return report.spec.design.family.label(report.spec.design.as_tested())


def _pilot(report: SpecReport, spec: Spec, spec_file: SpecFile) -> None:
    """Re-read ``design.pilot``: the file must exist, be unchanged, and support the spec's SD."""
    source = spec.design.pilot
    if source is None:
        return
    from .pilot import InvalidPilot, PilotMissing, pilot_root, read_pilot

    path = spec_file.path.parent / source.file
    shown = (Path(spec_file.display).parent / source.file).as_posix()
    loc = ("design", "pilot", "file")
    try:
        summary = read_pilot(path, source.column, source.confidence, shown=shown, root=pilot_root(spec_file.root))
    except PilotMissing as error:
        report.add("pilot-missing", "error", "design.pilot.file",
                   f"{error}; the SD assumption can no longer be traced to its data. Restore the file or "
                   "remove design.pilot (with an amendment if data collection has started)", loc)
        return
    except InvalidPilot as error:
        report.add("pilot-invalid", "error", "design.pilot", str(error), loc)
        return
    if summary.sha256 != source.sha256:
        report.add("pilot-changed", "warning", "design.pilot.sha256",
                   f"{shown} has changed since it was recorded (SHA-256 now {summary.sha256[:12]}..., recorded "
                   f"{source.sha256[:12]}...); check that the SD still matches the data, then run "
                   f"'prespec pilot {shown} --column {source.column}' and update design.pilot.sha256",
                   ("design", "pilot", "sha256"))
    level = f"{source.confidence:.0%}"
    about = (f"pilot data {shown} column {source.column!r}: n = {summary.n}, SD {summary.sd:.4g}, one-sided "
             f"{level} upper limit {summary.sd_upper:.4g} (Browne 1995)")
    sd = getattr(spec.design.effect, "sd", None)
    if not isinstance(sd, (int, float)):
        report.add("pilot-sd", "info", "design.pilot", about + "; the effect states no sd to compare with", loc)
        return
    sd_loc = ("design", "effect", "sd")
    if sd < summary.sd:
        report.add("sd-below-pilot", "warning", "design.effect.sd",
                   f"sd {sd:g} is below the pilot SD {summary.sd:.4g} ({about}); the sample size is not "
                   f"conservative: plan with at least the pilot SD, better its upper limit "
                   f"{summary.sd_upper:.4g}{_needed_with(spec, summary.sd_upper)}", sd_loc)
    elif sd < summary.sd_upper:
        report.add("pilot-sd", "info", "design.effect.sd",
                   f"sd {sd:g} is between the pilot SD and its upper limit ({about}); planning with the upper "
                   f"limit{_needed_with(spec, summary.sd_upper)} guards against a pilot SD that is low by chance",
                   sd_loc)
    else:
        report.add("pilot-sd", "info", "design.effect.sd", f"sd {sd:g} is at or above the upper limit ({about})",
                   sd_loc)


def _needed_with(spec: Spec, sd: float) -> str:
    from .power import InfeasibleDesign, solve_sample_size

    design = spec.design
    effect = design.effect.model_copy(update={"sd": sd})
    try:
        needed = solve_sample_size(design.model_copy(update={"effect": effect}))
    except InfeasibleDesign:
        return ""
    return f" (which needs {needed.enrolment_per_group} {design.family.unit} enrolled)"


def _completeness(report: SpecReport, spec: Spec) -> None:
    if spec.status == "draft":
        return
    for path, what in RECOMMENDED_FIELDS.items():
        value: Any = spec
        for part in path.split("."):
            value = getattr(value, part, None)
        if value in (None, [], ""):
            report.add("incomplete", "warning", path,
                       f"a {spec.status} spec should state {what} ({path})", ())
    fields_set = spec.design.model_fields_set
    for name in ("alpha", "power"):
        if name not in fields_set:
            report.add("incomplete", "warning", f"design.{name}",
                       f"design.{name} is not stated; the default {getattr(spec.design, name):g} was used, "
                       "state it so reviewers see it", ("design",))


_ID_SENTINEL = "template-spec-id"
#: Template fields whose text is a sensible value as it stands, or a choice rather than a placeholder
#: (ids, such as the hypothesis id H1, are names, never placeholders).
_TEMPLATE_CHOICES = frozenset({"status", "data_collection.start", "design.test", "design.alternative",
                               "stopping_rule"})
#: The template's design assumptions: numbers, choices (a distribution, a layout) and names (factors)
#: that a lab may keep as they stand; they are the family's example, not placeholder prose.
_TEMPLATE_ASSUMPTIONS = ("design", "effect")
#: The family whose template stands for all: outside design.test, design.alternative and design.effect
#: (left out above) every family's template has the same texts.
_TEMPLATE_FAMILY = "two-sample-t"


@functools.lru_cache(maxsize=None)
def _template_texts() -> tuple[tuple[tuple[Any, ...], str], ...]:
    """(path, text) of every placeholder text in the template ``prespec new`` writes."""
    from datetime import date as _date

    from .commands.new import template
    from .yamlio import load_bytes_fast

    # per_group: any number (only the texts are read), so the example design is not sized
    text = template(_ID_SENTINEL, _TEMPLATE_FAMILY, None, "schema.json", _date(2000, 1, 1), per_group=1)
    data = load_bytes_fast(text.encode("utf-8"), "template").data
    out: list[tuple[tuple[Any, ...], str]] = []

    def walk(value: Any, loc: tuple[Any, ...]) -> None:
        if loc[:2] == _TEMPLATE_ASSUMPTIONS:
            return
        if isinstance(value, dict):
            for key, child in value.items():
                walk(child, (*loc, key))
        elif isinstance(value, list):
            for index, child in enumerate(value):
                walk(child, (*loc, index))
        elif isinstance(value, str) and loc[-1:] != ("id",) and ".".join(str(p) for p in loc) not in _TEMPLATE_CHOICES:
            out.append((loc, value))

    walk(data, ())
    return tuple(out)


def _template_text(report: SpecReport, spec: Spec) -> None:
    """Text left as ``prespec new`` wrote it (a placeholder question, outcome "primary outcome", ...)."""
    if report.document is None:
        return
    data = report.document.data
    for loc, text in _template_texts():
        value: Any = data
        for part in loc:
            ok = isinstance(value, dict) and part in value if isinstance(part, str) else \
                isinstance(value, list) and part < len(value)
            if not ok:
                value = None
                break
            value = value[part]
        placeholder = text.replace(_ID_SENTINEL, spec.id)
        if isinstance(value, str) and value.strip() == placeholder:
            path = ".".join(f"[{p}]" if isinstance(p, int) else p for p in loc).replace(".[", "[")
            report.add("template-text", "warning", path,
                       f"{path} is still the template's placeholder {placeholder!r}; write this experiment's own "
                       "text (register refuses a spec with template text)", loc)


def not_a_spec(data: Any) -> bool:
    """A YAML mapping with keys, none of them a spec field (an environment or CI file, say)."""
    from .model import Spec

    return isinstance(data, dict) and bool(data) and not any(key in Spec.model_fields for key in data)


def check_registry(files: list[SpecFile], config_for: Any = None, executor: Any = None, cache: Any = None,
                   meanwhile: Meanwhile | None = None) -> tuple[list[SpecFile], list[SpecReport], list[str]]:
    """Check the specs among ``files``: (files, reports, skipped) with files and reports aligned.

    Files a registry's ``include``/``exclude`` leave out are not read; YAML files that are plainly
    not specs (:func:`not_a_spec`) are set aside and their paths returned in ``skipped``. A file
    named on the command line is always checked. ``cache``: a :class:`registry.checkcache.CheckCache`
    whose results are used for files it holds unchanged (and which keeps the rest). ``meanwhile``:
    see :func:`check_files`.
    """
    if config_for is not None:
        files = [f for f in files if f.named or f.refusal or config_for(f).selects(f.path)]
    reports = check_files(files, config_for, executor, cache, meanwhile)
    kept_files, kept, skipped = [], [], []
    for spec_file, report in zip(files, reports):
        if [x.kind for x in report.findings] == ["not-a-spec"]:
            if not spec_file.named:
                skipped.append(report.path)
                continue
            report.findings = [Finding("not-a-spec", "error", "", None, "this YAML file has no spec field (no id, "
                                       "no design), so it is not a spec; see docs/spec-format.md for the fields")]
        kept_files.append(spec_file)
        kept.append(report)
    return kept_files, kept, skipped



def skipped_line(skipped: list[str]) -> str:
    """The one info line about YAML files set aside as not specs."""
    return (f"info: skipped {len(skipped)} YAML file{'s' if len(skipped) != 1 else ''} with no spec field (no id, "
            f"no design): {', '.join(skipped)}; list {'them' if len(skipped) != 1 else 'it'} under 'exclude' in "
            ".prespec.yaml to say so")


#: From this many spec files to check (those the check cache does not answer for) on, they are
#: checked in worker processes, one per core (:class:`registry.workers.ForkedWorkers`).
POOL_FROM = 8


class Meanwhile(Protocol):
    """What the calling process does while worker processes check the spec files (``check``
    reads the git history then): :func:`check_files` calls ``before`` once it is to start workers,
    before it loads what they need, and ``during`` while they work (or, where no worker could
    start, once the files are checked here)."""

    def before(self) -> None: ...

    def during(self) -> None: ...


def check_files(files: list[SpecFile], config_for: Any = None, executor: Any = None, cache: Any = None,
                meanwhile: Meanwhile | None = None) -> list[SpecReport]:
    """Check every file, then the registry-wide rules (unique ids). ``executor`` (a
    ``concurrent.futures.Executor``) carries the simulations of simulation-verified sizes; ``cache``
    (a :class:`registry.checkcache.CheckCache`) answers for files it holds unchanged. Without an
    ``executor``, :data:`POOL_FROM` files or more to check are checked in worker processes (the
    reports are the same as one process gives), and this process does its ``meanwhile`` work
    (:class:`Meanwhile`) while they work."""
    configs = [config_for(spec_file) if config_for else RegistryConfig() for spec_file in files]
    found: list[SpecReport | None] = [None] * len(files)
    todo: list[tuple[int, bytes | None]] = []  # (index, the bytes the cache hashed, if any)
    for index, (spec_file, config) in enumerate(zip(files, configs)):
        raw = None
        if cache is not None:
            found[index], raw = cache.lookup(spec_file, config)
        if found[index] is None:
            todo.append((index, raw))
    for (index, raw), report in zip(todo, _checked(files, configs, todo, executor, meanwhile)):
        found[index] = report
        if cache is not None and raw is not None:
            cache.store(files[index], configs[index], raw, report)
    reports = [report for report in found if report is not None]
    by_id: dict[str, list[SpecReport]] = defaultdict(list)
    for report in reports:
        if report.valid and report.id is not None:
            by_id[report.id].append(report)
    for spec_id, same in by_id.items():
        if len(same) > 1:
            for report in same:
                others = ", ".join(r.path for r in same if r is not report)
                report.add("duplicate-id", "error", "id",
                           f"id {spec_id!r} is also used by {others}; ids must be unique in the registry", ("id",))
    return reports


def _checked(files: list[SpecFile], configs: list[RegistryConfig], todo: list[tuple[int, bytes | None]],
             executor: Any, meanwhile: Meanwhile | None = None) -> Iterator[SpecReport]:
    """:func:`check_file` of each file in ``todo``, in order: in worker processes when there are many
    (and no simulation pool), here otherwise. A report a worker cannot give back (one that does not
    pickle, an unexpected failure) is made here again, so it fails, if at all, as it would alone."""

    def work(n: int) -> SpecReport:
        index, raw = todo[n]
        return check_file(files[index], configs[index], executor, raw)

    workers = None
    if executor is None and len(todo) >= POOL_FROM:
        if meanwhile is not None:
            meanwhile.before()
        from .model import Spec
        from .workers import ForkedWorkers

        Spec.model_rebuild()  # the validator, built once here, is inherited rather than built in every worker
        workers = ForkedWorkers(work, len(todo), from_count=POOL_FROM)
    if workers is None or not workers.pooled:
        yield from map(work, range(len(todo)))
        if workers is not None and meanwhile is not None:  # before() was called: no workers, so now
            meanwhile.during()
        return
    try:
        if meanwhile is not None:
            meanwhile.during()
        yield from workers.results()
    finally:
        workers.close()
