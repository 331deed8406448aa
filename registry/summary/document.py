"""The Markdown of one design summary and of the registry index, filled into the templates.

All numbers come from check's :class:`~registry.checks.SpecReport` (required and planned
n, achieved power, minimum detectable effect) or from :mod:`.numbers`; all user text
passes through :mod:`.mdtext` so it cannot turn into markup.
"""

from __future__ import annotations

from dataclasses import dataclass
from importlib import resources
from string import Template
from typing import Any

from pydantic import BaseModel

from ..checks import CAUTION, Finding, SpecReport
from ..guidelines import REGISTRY_KEEPS, coverage, guidelines_for, study_type
from ..power.base import DesignBase, Family
from ..power.results import power_text
from . import mdtext as md
from .htmlpage import SITE_SCRIPT_NAME
from .numbers import Scenario, analysable, has_spread, sensitivity
from .provenance import Provenance, iso_utc

__all__ = ["HISTORY_KINDS", "drift_verdict", "summary_markdown", "index_markdown", "IndexRow", "figure_name",
           "figure_alt", "SITE_FILES", "page_stem"]

#: Finding kinds that come from reading the spec's git history, most serious first.
HISTORY_KINDS: tuple[str, ...] = ("drift", "history-unreadable", "incomplete-history", "untracked", "uncommitted",
                                  "rewritten-history", "deleted", "disclosed-deviation", "future-date", "date-order",
                                  "amended")
NOT_CHECKED = "history not checked"

#: Effect fields measured in the primary outcome's unit.
_OUTCOME_UNIT_FIELDS = {"difference", "sd", "sd1", "sd2", "sd_within", "margin", "lower", "upper"}
#: How an effect field reads in a sentence; other fields are shown by name.
_EFFECT_WORDS = {
    "difference": "a difference of",
    "sd": "a standard deviation of",
    "sd1": "a standard deviation in condition 1 of",
    "sd2": "a standard deviation in condition 2 of",
    "correlation": "a correlation between paired measurements of",
}
_DESIGN_SKIP = {"test", "effect", "effect_rationale", "variability_source"}


def _template(name: str) -> Template:
    return Template(resources.files("registry").joinpath("templates", name).read_text(encoding="utf-8"))


def _num(value: Any) -> str:
    if isinstance(value, BaseModel):  # a nested assumption block, e.g. clustering
        parts = [f"{name} = {_num(getattr(value, name))}" for name in type(value).model_fields
                 if getattr(value, name) is not None]
        return ", ".join(parts)
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:,.4g}" if abs(value) < 1e6 else f"{value:,.0f}"
    if isinstance(value, int):
        return f"{value:,}"
    if isinstance(value, (list, tuple)):
        return ", ".join(_num(v) for v in value)
    return str(value)


def _alternative(design: DesignBase) -> str:
    return design.family.sides(design)


def _counted(family: Family) -> str:
    """What one n counts: 'units per group', 'units', 'pairs', ..."""
    return "units per group" if family.unit == "per group" else family.unit


def _outcome_unit(report: SpecReport) -> str | None:
    spec = report.spec
    return spec.outcomes.primary.unit if spec and spec.outcomes else None


def _with_unit(name: str, value: float, unit: str | None, family: Family) -> str:
    """A value of an effect field, with the outcome's unit when the field is measured in it (mean-type designs)."""
    shown = family.effect_text(name, value)
    text = md.inline(shown) if shown is not None else _num(value)
    in_outcome_units = name in _OUTCOME_UNIT_FIELDS and has_spread(family)
    return f"{text} {md.inline(unit)}" if unit and in_outcome_units else text


#: The registry site's own files (``render --all`` writes them); no summary takes one of these names.
SITE_FILES: tuple[str, ...] = ("index.md", "index.html", SITE_SCRIPT_NAME)


def page_stem(spec_id: str) -> str:
    """The name, without suffix, of a spec's summary files (``<stem>.md``, ``<stem>.html``): the id, or
    ``<id>_spec`` when a file named after the id would be one of the site's own (:data:`SITE_FILES`).
    An id never holds ``_``, so the moved name is never another spec's.

    >>> page_stem("fibre-butyrate"), page_stem("index")
    ('fibre-butyrate', 'index_spec')
    """
    if any(f"{spec_id}{suffix}" in SITE_FILES for suffix in (".md", ".html")):
        return f"{spec_id}_spec"
    return spec_id


def figure_name(spec_id: str) -> str:
    return f"{spec_id}-power.svg"


def figure_alt(spec_id: str) -> str:
    return f"Power curve of {spec_id}: power against analysable n, target and planned n marked"


#: How a verdict reads where it matters: a symbol and words, so it stands out in black and white too.
_BAD = {"underpowered", "invalid", "partial-clusters", "drift", "history-unreadable", "untracked", "unreadable"}
_GOOD = {"ok", "clean", "registered"}


def verdict_level(verdict: str) -> str:
    """'good', 'warn' or 'bad': how much a verdict asks for a reader's attention."""
    if verdict in _GOOD:
        return "good"
    if verdict in _BAD or verdict.endswith("error"):
        return "bad"
    return "warn"


def flag(verdict: str) -> str:
    """A verdict as a flag the page styles: '**✔ ok**', '**⚠ OVERSIZED**', '**✖ UNDERPOWERED**'."""
    level = verdict_level(verdict)
    if level == "good":
        return f"**✔ {md.inline(verdict)}**"
    return f"**{'✖' if level == 'bad' else '⚠'} {md.inline(verdict.upper())}**"


def _status_block(report: SpecReport, prov: Provenance) -> str:
    """The lines at the top: render date, start of data collection, registration, and the verdicts."""
    tags = [name for name, _ in prov.registration_tags]
    registration = flag("registered") + f" ({', '.join(md.code(t) for t in tags)})" if tags else flag("not registered")
    drift = drift_verdict(report)
    return (f"Rendered {iso_utc(prov.rendered_at)[:10]} · data collection starts "
            f"{prov.data_collection_start.isoformat()} · registration: {registration}\n\n"
            f"Sample size: {flag(report.verdict)} · history: {flag(drift)}")


def drift_verdict(report: SpecReport) -> str:
    """The most serious history finding kind; 'clean' when history was read and found nothing;
    'history not checked' when the report carries no history information."""
    kinds = {f.kind for f in report.findings}
    for kind in HISTORY_KINDS:
        if kind in kinds:
            return kind
    return "clean" if getattr(report, "history_checked", False) else NOT_CHECKED


# ---------------------------------------------------------------- sections


def _key_table(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None and report.sample is not None
    design, sample = spec.design, report.sample
    family = design.family
    power = "-" if report.achieved_power is None else f"{report.achieved_power:.3f}"
    rows = [
        ("Design family", md.inline(family.title)),
        ("Alternative", _alternative(design)),
        ("Significance level (alpha)", _num(design.alpha)),
        ("Target power", _num(design.power)),
        (f"Planned enrolment ({family.unit})", _num(spec.sample_size.per_group)),
        (f"Required enrolment ({family.unit})", md.inline(sample.enrolment_words().replace(f" {family.unit}", "", 1))),
        (f"Required analysable ({family.unit})", _num(sample.n_per_group)),
        ("Power at the planned n", power),
        ("Check verdict", flag(report.verdict)),
        ("Drift verdict", flag(drift_verdict(report))),
    ]
    return md.table(["Quantity", "Value"], rows)


def _question(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None
    parts = []
    parts.append(f"**Question.** {md.block(spec.question)}" if spec.question else "No research question stated.")
    if spec.population:
        parts.append(f"**Population and experimental unit.** {md.block(spec.population)}")
    if spec.hypotheses:
        items = []
        for i, hypothesis in enumerate(spec.hypotheses, 1):
            label = md.inline(hypothesis.id) if hypothesis.id else f"H{i}"
            role = " (primary)" if hypothesis is spec.primary_hypothesis else ""
            items.append(f"**{label}**{role}: {md.inline(hypothesis.statement)}")
        parts.append(md.bullets(items))
    else:
        parts.append("No hypotheses stated.")
    return "\n\n".join(parts)


def _outcome_line(outcome: Any) -> str:
    text = f"**{md.inline(outcome.name)}**"
    details = []
    if outcome.unit:
        details.append(f"unit: {md.inline(outcome.unit)}")
    if outcome.timepoint:
        details.append(f"when: {md.inline(outcome.timepoint)}")
    if details:
        text += " (" + "; ".join(details) + ")"
    if outcome.description:
        text += f". {md.inline(outcome.description)}"
    return text


def _outcomes(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None
    if spec.outcomes is None:
        return "No outcomes stated."
    lines = [f"Primary: {_outcome_line(spec.outcomes.primary)}"]
    lines += [f"Secondary: {_outcome_line(o)}" for o in spec.outcomes.secondary]
    return md.bullets(lines)


def _described(model: type[BaseModel], name: str) -> str:
    return md.cell(model.model_fields[name].description or "")


def _design(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None
    design = spec.design
    family = design.family
    model = type(design)
    unit = _outcome_unit(report)
    rows = [(md.code("test"), md.cell(design.test), md.cell(family.title))]
    for name in model.model_fields:
        if name in _DESIGN_SKIP or (name == "allocation_ratio" and family.groups != 2):
            continue
        value = getattr(design, name)
        if value is None:
            continue
        shown = _alternative(design) if name == "alternative" else md.cell(_num(value))
        rows.append((md.code(name), shown, _described(model, name)))
    effect = design.effect
    for name in type(effect).model_fields:
        value = getattr(effect, name)
        if value is not None:
            rows.append((md.code(f"effect.{name}"), _with_unit(name, value, unit, family),
                         _described(type(effect), name)))
    rows.append((f"standardized effect ({md.inline(family.symbol)})", _num(report.sample.effect_size),
                 "computed from the effect above"))
    parts = [md.table(["Assumption", "Value", "Meaning"], rows, ["l", "r", "l"])]
    parts.append(f"**Why this effect.** {md.block(design.effect_rationale)}" if design.effect_rationale
                 else "**Why this effect.** Not stated.")
    if has_spread(family):
        parts.append(f"**Source of the SD.** {md.block(design.variability_source)}" if design.variability_source
                     else "**Source of the SD.** Not stated.")
    elif design.variability_source:
        parts.append(f"**Source of the assumptions.** {md.block(design.variability_source)}")
    return "\n\n".join(parts)


def _effect_phrase(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None and report.sample is not None
    effect, family = spec.design.effect, spec.design.family
    unit = _outcome_unit(report)
    unused = family.unused_effect_fields(spec.design)
    stated = [(n, getattr(effect, n)) for n in type(effect).model_fields
              if getattr(effect, n) is not None and n not in unused]
    es = f"{md.inline(family.symbol)} = {report.sample.effect_size:.3g}"
    natural = [(n, v) for n, v in stated if n != family.symbol]
    if not natural:
        return f"The effect to detect is stated as a standardized effect size {es}."
    words = [f"{_effect_words(family, n)} {_with_unit(n, v, unit, family)}" for n, v in natural]
    outcome = f" in {md.inline(spec.outcomes.primary.name)}" if spec.outcomes else ""
    return f"The effect to detect is {_join(words)}{outcome}, a standardized effect size of {es}."


def _effect_words(family: Family, name: str) -> str:
    """How an effect field reads in a sentence: the family's wording, the shared one, or its name."""
    return family.effect_words.get(name) or _EFFECT_WORDS.get(name, md.inline(name) + " of")


def _lower_first(title: str) -> str:
    """'Two-sample t-test' -> 'two-sample t-test', but 'ANOVA ...' stays."""
    return title[0].lower() + title[1:] if len(title) > 1 and title[1].islower() else title


def _join(words: list[str]) -> str:
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def _multiplicity(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None
    design = spec.design
    stated = [(n, getattr(design, n)) for n in type(design).model_fields
              if any(w in n for w in ("multip", "comparison", "adjust")) and getattr(design, n) is not None]
    if stated:
        parts = []
        for name, value in stated:
            text = f"{md.inline(name)}: {md.inline(_num(value))}"
            if hasattr(value, "alpha_per_test"):
                text += f", so each test is run at alpha {_num(value.alpha_per_test(design.alpha))}"
            parts.append(text)
        return "Multiplicity is part of the calculation (" + "; ".join(parts) + ")."
    others = max(len(spec.hypotheses) - 1, 0)
    secondary = len(spec.outcomes.secondary) if spec.outcomes else 0
    if not others and not secondary:
        return "There is a single hypothesis and a single outcome, so no adjustment for multiple testing arises."
    extra = []
    if others:
        extra.append(f"{others} further hypothes{'is' if others == 1 else 'es'}")
    if secondary:
        extra.append(f"{secondary} secondary outcome{'' if secondary == 1 else 's'}")
    return (f"The calculation covers the primary hypothesis only; {_join(extra)} "
            "are not part of it and no adjustment for multiple testing enters it.")


def _justification(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None and report.sample is not None
    design, sample = spec.design, report.sample
    family = design.family
    primary = spec.primary_hypothesis
    if primary is not None:
        label = f" ({md.inline(primary.id)})" if primary.id else ""
        opening = f"The sample size is based on the primary hypothesis{label}: {md.inline(primary.statement)}"
        opening = opening.rstrip(".") + "."
    else:
        opening = "The sample size is based on the primary comparison of the design."
    sentences = [
        opening,
        f"The primary analysis uses the {md.inline(_lower_first(family.analysis_title(design)))}"
        f"{'' if family.undirected else ', ' + _alternative(design) + ','} at a "
        f"significance level of {_num(design.alpha)} with a target power of {design.power:.0%}.",
        _effect_phrase(report),
    ]
    if design.effect_rationale:
        sentences.append(f"Rationale for the effect: {md.inline(design.effect_rationale).rstrip('.')}.")
    if design.variability_source:
        what = "The standard deviation comes from" if has_spread(family) else "The assumptions come from"
        sentences.append(f"{what}: {md.inline(design.variability_source).rstrip('.')}.")
    elif has_spread(family):
        sentences.append("The source of the standard deviation is not stated.")
    sentences += _further_assumptions(design)
    # with interim looks the power is the boundaries' and the fixed design's method is part of the sentence
    method = sample.method if report.sequential is not None or design.cluster is not None else family.method
    if report.sequential is None and sample.verification is not None:  # the size is the simulated test's
        method = f"{sample.method}; the search started from {sample.start_method or family.method}"
    sentences.append(f"Method of calculation: {md.inline(method)} "
                     f"({md.inline(family.references(design)).rstrip('.')}).")
    counted = _counted(family)
    total = f" ({_num(sample.n_total)} in total)" if sample.n_total != sample.n_per_group else ""
    simulated = "simulated " if sample.verification is not None else ""
    # whole clusters, all analysed, are said here (with attrition the enrolment sentence names them)
    needed = total
    if sample.clusters_per_group and not design.attrition and len(set(sample.clusters_per_group)) == 1:
        needed = f" ({sample.clusters_per_group[0]:,} clusters of {sample.cluster_size} per group"
        needed += f"; {_num(sample.n_total)} in total)" if total else ")"
    sentences.append(f"At least {_num(sample.n_per_group)} analysable {counted}{needed} are needed, which gives a "
                     f"{simulated}power of {sample.achieved_power:.3f}.")
    if design.attrition:
        enrolled_total = f" ({_num(sample.enrolment_total)} in total)" if sample.n_total != sample.n_per_group else ""
        clusters = (f" ({sample.clusters_per_group[0]:,} clusters of {sample.cluster_size})"
                    if sample.clusters_per_group else "")
        sentences.append(f"Allowing for {design.attrition:.0%} attrition, {_num(sample.enrolment_per_group)} "
                         f"{counted}{clusters}{enrolled_total} are to be enrolled.")
    sentences.append(_planned_sentence(report))
    sentences.append(_multiplicity(report))
    text = " ".join(sentences)
    if spec.sample_size.justification:
        text += f"\n\n**Further justification from the investigators.** {md.block(spec.sample_size.justification)}"
    return text


def _further_assumptions(design: DesignBase) -> list[str]:
    """Design-level blocks beyond the common assumptions (clustering and the like), one sentence each."""
    out = []
    for name in type(design).model_fields:
        value = getattr(design, name)
        if not isinstance(value, BaseModel) or name == "effect" or any(w in name for w in ("multip", "comparison")):
            continue
        text = f"The calculation includes {md.inline(name)} ({md.inline(_num(value))})"
        effect = getattr(value, "design_effect", None)
        if isinstance(effect, (int, float)):
            text += f", a design effect of {_num(float(effect))}"
        out.append(text + ".")
    return out


def _planned_sentence(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None and report.sample is not None
    design = spec.design
    counted = _counted(design.family)
    planned = spec.sample_size.per_group
    kept = analysable(planned, design.attrition)
    left = f", {_num(kept)} analysable after attrition," if design.attrition else ""
    if report.at_planned is None:
        return f"The planned enrolment of {_num(planned)} {counted} leaves too few analysable units to test."
    power = f"power {power_text(report.at_planned.power, design.power)}"
    if planned < report.sample.enrolment_per_group and report.at_planned.power >= design.power:
        return (f"The planned enrolment of {_num(planned)} {counted}{left} gives {power}, but the design needs "
                f"{md.inline(report.sample.enrolment_words())}.")
    if planned < report.sample.enrolment_per_group:
        return (f"The planned enrolment of {_num(planned)} {counted}{left} gives only {power}, below the target; "
                "the design is underpowered as planned.")
    return f"The planned enrolment of {_num(planned)} {counted}{left} gives {power}."


def _size_table(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None and report.sample is not None
    design, sample = spec.design, report.sample
    family = design.family
    planned = spec.sample_size.per_group
    kept = analysable(planned, design.attrition)
    planned_sizes = family.group_sizes(design, planned)
    kept_total = sum(family.group_sizes(design, kept)) if kept >= 1 else 0
    power = "-" if report.at_planned is None else f"{report.at_planned.power:.3f}"
    unit = md.inline(family.unit)
    if family.groups > 1:
        head = [" ", f"Analysable ({unit})", "Analysable (total)", f"Enrolled ({unit})", "Enrolled (total)", "Power"]
        rows = [
            ("Required", _num(sample.n_per_group), _num(sample.n_total), _num(sample.enrolment_per_group),
             _num(sample.enrolment_total), f"{sample.achieved_power:.3f}"),
            ("Planned", _num(kept), _num(kept_total), _num(planned), _num(sum(planned_sizes)), power),
        ]
    else:
        head = [" ", f"Analysable ({unit})", f"Enrolled ({unit})", "Power"]
        rows = [("Required", _num(sample.n_per_group), _num(sample.enrolment_per_group),
                 f"{sample.achieved_power:.3f}"),
                ("Planned", _num(kept), _num(planned), power)]
    if design.attrition:
        note = (f"Target power {_num(design.power)}; attrition {design.attrition:.0%}, so enrolment = "
                "analysable / (1 - attrition), rounded up.")
    else:
        note = f"Target power {_num(design.power)}; no attrition is assumed, so enrolment equals the analysable n."
    if family.groups == 2 and design.allocation_ratio != 1:
        note += f" Group 2 gets {_num(design.allocation_ratio)} times the units of group 1, rounded up."
    if sample.events is not None:
        source = ("the events the analysable units are expected to give, rounded up" if sample.verification
                  is not None else "the events formula rounded up to whole events")
        note += (f" The test needs {_num(sample.events)} events in all ({source}); follow the study until they "
                 "have occurred.")
    for extra in sample.notes:
        text = extra.strip()
        note += f" {md.inline(text[:1].upper() + text[1:] + ('' if text.endswith('.') else '.'))}"
    return md.table(head, rows, ["l"] + ["r"] * (len(head) - 1)) + "\n\n" + note


def _mde(report: SpecReport) -> str:
    spec = report.spec
    at = report.at_planned
    assert spec is not None
    design = spec.design
    family = design.family
    if at is None or at.minimum_detectable_effect is None:
        return "Too few analysable units remain at the planned enrolment to compute a detectable effect."
    unit = _outcome_unit(report)
    natural = at.minimum_detectable_natural
    symbol = md.inline(family.symbol)
    standardized = f"{symbol} = {at.minimum_detectable_effect:.3g}"
    words = [f"{_effect_words(family, n)} {_with_unit(n, round(v, 4), unit, family)}"
             for n, v in natural.items() if n != family.symbol]
    smallest = f"{_join(words)} ({standardized})" if words else standardized
    return (f"With the planned {_num(at.n_per_group)} analysable {_counted(family)}, alpha {_num(design.alpha)} "
            f"({_alternative(design)}) and power {_num(design.power)}, the smallest effect the study can detect is "
            f"{smallest}. The stated effect is {symbol} = {at.effect_size:.3g}.")


def _sensitivity(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None
    design = spec.design
    family = design.family
    sample = report.sample
    verified = sample is not None and sample.verification is not None and report.sequential is None
    rows = sensitivity(design, spec.sample_size.per_group, (sample, report.at_planned) if verified else None)
    symbol = md.inline(family.symbol)

    def n(value: int | None) -> str:
        return "not reachable" if value is None else _num(value)

    def power(row: Scenario) -> str:
        return "-" if row.power_at_planned is None else f"{row.power_at_planned:.3f}"

    headers = ["Scenario", f"Effect ({symbol})", f"Analysable n needed ({md.inline(family.unit)})",
               f"Enrolled n needed ({md.inline(family.unit)})", "Power at the planned n"]
    cells = [[r.label, f"{r.effect_size:.3g}", n(r.n_analysable), n(r.n_enrolled), power(r)] for r in rows]
    align = ["l", "r", "r", "r", "r"]
    if verified:
        headers.append("Method")
        for row, line in zip(rows, cells):
            line.append("simulation" if row.method == "simulation" else f"formula ({row.method})")
        align.append("l")
    table = md.table(headers, [tuple(line) for line in cells], align)
    if has_spread(family):
        note = (f"A larger SD shrinks the standardized effect: SD 20% larger means {symbol} / 1.2. "
                f"A smaller effect scales {symbol} directly: 20% smaller means {symbol} x 0.8.")
    else:
        note = (f"This design family ({md.inline(_lower_first(family.title))}) states its effect without a "
                "standard deviation, so \"SD larger\" has no meaning here and those rows are left out; the rows "
                f"scale the standardized effect {symbol}.")
    if verified:
        assert sample is not None and sample.verification is not None
        mc = sample.verification
        note += (f" The first row is the simulation-verified size and the simulated power at the planned n "
                 f"({_num(mc['reps'])} simulated experiments per n, seed {mc['seed']}). The other rows are not "
                 f"simulated: they come from the formula the size search starts from "
                 f"({md.inline(sample.start_method or family.method)}), which for the stated design gives "
                 f"{_num(sample.start_n)} where the simulated test needs {_num(sample.n_per_group)}. Read them as "
                 "the direction and rough size of each change, not as verified requirements.")
    return table + "\n\n" + note


def _figure(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None
    return f"![{md.inline(figure_alt(spec.id))}]({figure_name(spec.id)})"


def _analysis(report: SpecReport) -> dict[str, str]:
    spec = report.spec
    assert spec is not None
    randomisation = (f"**Randomisation.** {md.block(spec.randomisation)}" if spec.randomisation
                     else "**Randomisation.** Not stated.")
    blinding = f"**Blinding.** {md.block(spec.blinding)}" if spec.blinding else "**Blinding.** Not stated."
    return {
        "analysis_plan": md.block(spec.analysis_plan) if spec.analysis_plan else "No analysis plan stated.",
        "exclusions": (md.bullets(md.inline(e) for e in spec.exclusion_criteria) if spec.exclusion_criteria
                       else "No exclusion criteria stated."),
        "randomisation": randomisation + "\n\n" + blinding,
        "stopping_rule": md.block(spec.stopping_rule) if spec.stopping_rule else "No stopping rule stated.",
    }


def _timeline(report: SpecReport, prov: Provenance) -> str:
    """Every committed version of the spec, its registrations and amendments, and, for each version,
    the locked fields it changed (old -> new)."""
    from ..history import commit_day, show_change

    history = report.history
    if history is None or not history.revisions:
        return "No git history was read for this spec, so there is no timeline of versions."
    tags: dict[str, list[str]] = {}
    for name, sha in prov.registration_tags:
        tags.setdefault(sha, []).append(name)
    rows = []
    for version, revision in enumerate(history.revisions, start=1):
        commit = revision.commit
        events = [revision.action]
        events += [f"registered as {md.code(t)}" for t in tags.get(commit.sha, [])]
        locked = [c for c in revision.changes if c.locked]
        if any(c.field == "amendments" or c.amendment for c in revision.changes):
            events.append("amendment")
        diff = "; ".join(f"{md.code(c.field)}: {md.cell(show_change(c.old, c.new))}"
                         + (" (amended)" if c.amended else " (**drift**)" if c.after_start else "")
                         for c in locked) or "-"
        rows.append((f"v{version}", commit_day(commit.committer_date).isoformat(), md.code(commit.short),
                     ", ".join(events), "after" if revision.after_start else "before", diff))
    return ("One row per committed version; the last column compares each version's locked fields with the "
            "version before.\n\n" + md.table(["Version", "Date", "Commit", "Event", "Start", "Locked fields changed"],
                                               rows, ["l", "l", "l", "l", "l", "l"]))


def _amendments(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None
    if not spec.amendments:
        return "No amendments recorded."
    rows = [(a.date.isoformat(), md.cell(", ".join(a.fields)), md.cell(a.reason), md.cell(a.approved_by or ""))
            for a in spec.amendments]
    return md.table(["Date", "Fields", "Reason", "Approved by"], rows)


def _finding_line(finding: Finding) -> str:
    where = md.inline(finding.field) if finding.field else "spec"
    if finding.line:
        where += f", line {finding.line}"
    return f"**{finding.severity}** {md.inline(finding.kind)} ({where}): {md.inline(finding.message)}"


def _drift(report: SpecReport) -> str:
    verdict = drift_verdict(report)
    history = [f for f in report.findings if f.kind in HISTORY_KINDS]
    if verdict == NOT_CHECKED:
        return ("**Verdict: history not checked.** This summary was rendered without reading the spec's git "
                "history, so it makes no statement about edits after data collection started.")
    text = f"**Verdict: {md.inline(verdict)}.**"
    if history:
        text += "\n\n" + md.bullets(_finding_line(f) for f in history)
    else:
        text += " No locked field changed after data collection started."
    return text


def _findings(report: SpecReport) -> str:
    others = [f for f in report.findings if f.kind not in HISTORY_KINDS]
    if not others:
        return "prespec check found nothing to report."
    return md.bullets(_finding_line(f) for f in others)


def _guidelines(report: SpecReport) -> str:
    spec = report.spec
    assert spec is not None
    items = coverage(spec)
    kind, inferred = study_type(spec)
    chosen = guidelines_for(spec)
    if kind is None:
        why = ("The spec does not state its `study_type` (animal, clinical-trial, in-vitro, field or "
               "human-observational) and its population does not settle it, so every guideline is shown; "
               "state it to see only those that apply.")
    else:
        how = "inferred from the population; state `study_type` to confirm it" if inferred else "stated in the spec"
        names = ", ".join(g.name for g in chosen)
        why = (f"Study type: {kind} ({how}). " + (f"Guidelines for it: {names}." if chosen else
               "None of the guidelines prespec maps (ARRIVE 2.0, SPIRIT 2013, CONSORT 2010) is written for "
               "this kind of study, so none is checked."))
    parts = [why + " The tables show which items of each guideline the spec's fields speak to. The topics are "
             "paraphrased; consult each checklist for its full wording."]
    for guideline in chosen:
        rows = []
        for item in (c for c in items if c.guideline == guideline.name):
            fields = ", ".join("registry history" if f == REGISTRY_KEEPS else f for f in item.present + item.missing)
            status = item.status
            if item.status == "partly covered":
                status += " (missing: " + ", ".join(item.missing) + ")"
            rows.append((item.number, item.topic, status, md.cell(fields)))
        scope = f"{md.inline(guideline.scope)}\n\n" if guideline.scope else ""
        parts.append(f"### {md.inline(guideline.name)}\n\n" + scope
                     + md.table(["Item", "Topic", "Status", "Spec fields"], rows, ["r", "l", "l", "l"])
                     + f"\n\n{md.inline(guideline.reference)}")
    return "\n\n".join(parts)


def _provenance(prov: Provenance) -> str:
    if prov.commit is None:
        commit, committed, copy = "not committed to git", "-", "not in git history"
    else:
        commit = md.code(prov.commit)
        committed = iso_utc(prov.committed) if prov.committed else "-"
        copy = ("has uncommitted changes: this summary shows the working copy, not the commit above"
                if prov.modified else "identical to the commit above")
    tags = ", ".join(f"{md.code(name)} at {md.code(sha[:12])}" for name, sha in prov.registration_tags) or "not registered"
    rows = [
        ("Spec file", md.cell(prov.spec_path)),
        ("Last commit of the file", commit),
        ("Committed (UTC)", committed),
        ("Working copy", copy),
        ("Data collection starts", prov.data_collection_start.isoformat()),
        ("Content SHA-256", md.code(prov.content_sha256)),
        ("Registration tag", tags),
        ("Rendered at (UTC)", iso_utc(prov.rendered_at)),
        ("Rendered by", f"prespec {md.cell(prov.tool_version)}"),
        ("Verify with", md.code(prov.verify_command) if prov.registration_tags else
         "not registered: there is no registration to verify"),
    ]
    if not prov.registration_tags:
        register = prov.verify_command.replace("prespec verify", "prespec register", 1)
        return (md.table(["Record", "Value"], rows) + "\n\n"
                "This spec is not registered: no registration tag records it, so nothing shows that this design "
                f"was fixed before data collection started. The lab registers it with {md.code(register)} "
                "before the start.")
    return (md.table(["Record", "Value"], rows) + "\n\n"
            f"A reviewer can check this registration: in a clone of the registry run {md.code(prov.verify_command)} "
            "and compare the content SHA-256 it reports with the one above. The hash covers the locked "
            "(design-defining) fields only, so edits to notes or status do not change it.")


# ---------------------------------------------------------------- documents


def summary_markdown(report: SpecReport, prov: Provenance) -> str:
    """The whole Markdown summary of one checked, valid spec."""
    spec = report.spec
    if spec is None or report.sample is None:
        raise ValueError(f"{report.path}: a summary needs a valid spec with a computable sample size")
    values = {
        "spec_id": spec.id,
        "title": md.inline(spec.title),
        "status": spec.status,
        "family_title": md.inline(spec.design.family.title),
        "caution": md.inline(CAUTION),
        "status_block": _status_block(report, prov),
        "key_table": _key_table(report),
        "question": _question(report),
        "outcomes": _outcomes(report),
        "design": _design(report),
        "justification": _justification(report),
        "size_table": _size_table(report),
        "mde": _mde(report),
        "sensitivity": _sensitivity(report),
        "figure": _figure(report),
        **_analysis(report),
        "amendments": _amendments(report),
        "timeline": _timeline(report, prov),
        "drift": _drift(report),
        "findings": _findings(report),
        "guidelines": _guidelines(report),
        "provenance": _provenance(prov),
    }
    if report.sequential is not None or report.assurance is not None or spec.interim_looks:
        from .sequential import assurance_markdown, staged_markdown

        values["stopping_rule"] += staged_markdown(report)
        values["size_table"] += assurance_markdown(report)
    return _template("summary.md").substitute(values)


@dataclass(frozen=True)
class IndexRow:
    """One line of the index: a rendered spec (with its page) or a file that could not be rendered."""

    report: SpecReport
    page: str | None


def index_markdown(rows: list[IndexRow], rendered_at: str, tool_version: str) -> str:
    table_rows = []
    failed = []
    for row in rows:
        report, spec = row.report, row.report.spec
        if row.page is None or spec is None:
            failed.append(f"{md.inline(report.path)}: {md.inline(report.verdict)}")
            continue
        power = "-" if report.achieved_power is None else f"{report.achieved_power:.3f}"
        table_rows.append((
            f"[{md.cell(spec.title)}]({row.page})",
            md.code(spec.id),
            spec.status,
            _num(spec.sample_size.per_group),
            _num(report.required_per_group),
            power,
            flag(report.verdict),
            flag(drift_verdict(report)),
        ))
    count = f"{len(table_rows)} summar{'y' if len(table_rows) == 1 else 'ies'}"
    table = (md.table(["Spec", "Id", "Status", "Planned n", "Required n", "Power at planned n", "Check verdict",
                       "Drift verdict"], table_rows, ["l", "l", "l", "r", "r", "r", "l", "l"])
             if table_rows else "No valid specs found.")
    table += "\n\nPlanned and required n are enrolments, per group or per unit as the design family counts them."
    not_rendered = ""
    if failed:
        not_rendered = ("## Not rendered\n\nThese files are not valid specs; run `prespec check` on them for "
                        "the details.\n\n" + md.bullets(failed))
    return _template("index.md").substitute(
        count=count, rendered_at=rendered_at, tool_version=md.inline(tool_version), caution=md.inline(CAUTION),
        table=table, not_rendered=not_rendered,
    )
