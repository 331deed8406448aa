"""Which reporting-guideline items a spec's fields cover: the mapping, defined once as data.

The item numbers are those of the published checklists; the topics are our own short
paraphrases, not the checklists' wording. Only items a design spec can speak to are
listed (results, harms, funding and the like are reported elsewhere).

- ARRIVE 2.0: Percie du Sert, N. et al. (2020). The ARRIVE guidelines 2.0: updated
  guidelines for reporting animal research. PLOS Biology 18(7): e3000410.
- SPIRIT 2013: Chan, A.-W. et al. (2013). SPIRIT 2013 Statement: defining standard
  protocol items for clinical trials. Annals of Internal Medicine 158(3): 200-207.
- CONSORT 2010: Schulz, K. F., Altman, D. G., Moher, D. (2010). CONSORT 2010 Statement:
  updated guidelines for reporting parallel group randomised trials. BMJ 340: c332.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any, Literal

from .model import Spec

__all__ = ["Guideline", "GuidelineItem", "Coverage", "GUIDELINES", "coverage", "REGISTRY_KEEPS", "study_type",
           "guidelines_for"]

#: A pseudo-field meaning "the registry itself records this" (git history and the amendment log).
REGISTRY_KEEPS = "(registry history)"


@dataclass(frozen=True)
class GuidelineItem:
    number: str
    topic: str
    fields: tuple[str, ...]


@dataclass(frozen=True)
class Guideline:
    name: str
    reference: str
    items: tuple[GuidelineItem, ...]
    #: The ``study_type`` values the guideline is written for.
    study_types: tuple[str, ...] = ()
    #: Which of the checklist's items are listed, and why.
    scope: str = ""


_I = GuidelineItem

GUIDELINES: tuple[Guideline, ...] = (
    Guideline(
        "ARRIVE 2.0 Essential 10",
        "Percie du Sert, N. et al. (2020). The ARRIVE guidelines 2.0. PLOS Biology 18(7): e3000410.",
        (
            _I("1", "groups compared and the experimental unit", ("design.test", "population")),
            _I("2", "units per group and how that number was decided",
               ("sample_size.per_group", "design.effect", "design.effect_rationale", "design.variability_source")),
            _I("3", "rules for including and excluding units or data", ("population", "exclusion_criteria")),
            _I("4", "how units were allocated at random", ("randomisation",)),
            _I("5", "who knew the allocation at each stage", ("blinding",)),
            _I("6", "each outcome defined, the primary one named", ("outcomes",)),
            _I("7", "the statistical method for each analysis", ("analysis_plan",)),
        ),
        ("animal",),
        "Essential 10, items 1-7: those a design registry can already answer (items 8-10, results and "
        "their interpretation, are reported after the study).",
    ),
    Guideline(
        "SPIRIT 2013",
        "Chan, A.-W. et al. (2013). SPIRIT 2013 Statement. Annals of Internal Medicine 158(3): 200-207.",
        (
            _I("7", "objectives or hypotheses", ("question", "hypotheses")),
            _I("8", "design of the study and allocation ratio", ("design.test", "design.allocation_ratio")),
            _I("10", "who is eligible", ("population", "exclusion_criteria")),
            _I("12", "primary and secondary outcomes with time points", ("outcomes",)),
            _I("14", "planned number and the assumptions behind its calculation",
               ("sample_size.per_group", "design.effect", "design.effect_rationale", "design.variability_source")),
            _I("16a", "how the allocation sequence is generated", ("randomisation",)),
            _I("17a", "who is blinded and how", ("blinding",)),
            _I("20a", "statistical methods for the outcomes", ("analysis_plan",)),
            _I("20c", "which units are analysed and how missing data are handled", ("exclusion_criteria",)),
            _I("21b", "interim analyses and rules for stopping", ("stopping_rule",)),
            _I("25", "how changes to the protocol are recorded", (REGISTRY_KEEPS,)),
        ),
        ("clinical-trial",),
        "Items listed: the protocol items a design spec can speak to.",
    ),
    Guideline(
        "CONSORT 2010",
        "Schulz, K. F., Altman, D. G., Moher, D. (2010). CONSORT 2010 Statement. BMJ 340: c332.",
        (
            _I("2b", "objectives or hypotheses", ("question", "hypotheses")),
            _I("3a", "design of the study and allocation ratio", ("design.test", "design.allocation_ratio")),
            _I("4a", "who is eligible", ("population", "exclusion_criteria")),
            _I("6a", "pre-specified primary and secondary outcomes", ("outcomes",)),
            _I("6b", "changes to outcomes after the start, with reasons", (REGISTRY_KEEPS,)),
            _I("7a", "how the sample size was determined",
               ("sample_size.per_group", "design.effect", "design.effect_rationale", "design.variability_source")),
            _I("7b", "interim analyses and stopping rules", ("stopping_rule",)),
            _I("8a", "how the random allocation sequence is generated", ("randomisation",)),
            _I("11a", "who was blinded after assignment, and how", ("blinding",)),
            _I("12a", "statistical methods for primary and secondary outcomes", ("analysis_plan",)),
        ),
        ("clinical-trial",),
        "Items listed: the methods items fixed before the trial starts.",
    ),
)

Status = Literal["covered", "partly covered", "missing"]


@dataclass(frozen=True)
class Coverage:
    guideline: str
    number: str
    topic: str
    status: Status
    present: tuple[str, ...]
    missing: tuple[str, ...]


def _stated(spec: Spec, path: str) -> bool:
    if path == REGISTRY_KEEPS:
        return True
    value: Any = spec
    for part in path.split("."):
        value = getattr(value, part, None)
    return value not in (None, [], "")


#: Words in a spec's population that say what kind of study it is (common practice: the experimental unit).
_ANIMAL = re.compile(r"\b(mouse|mice|rats?|zebrafish|animals?|pigs?|sheep|rabbits?|primates?|macaques?|"
                     r"hamsters?|guinea pigs?|ferrets?|dogs?|cats?|chickens?|drosophila|flies)\b", re.I)
_IN_VITRO = re.compile(r"\b(cell lines?|cultures?|organoids?|in vitro|wells?|cells)\b", re.I)
_FIELD = re.compile(r"\b(plots?|pots?|seedlings?|plants?|soil|glasshouse|greenhouse|fields?|trees?)\b", re.I)


def study_type(spec: Spec) -> tuple[str | None, bool]:
    """(study type, whether it was inferred): the spec's ``study_type``, else one read from its
    population where the words leave no doubt, else (None, False)."""
    if spec.study_type is not None:
        return spec.study_type, False
    text = " ".join(filter(None, [spec.population or "", spec.title]))
    found = [kind for kind, words in (("animal", _ANIMAL), ("in-vitro", _IN_VITRO), ("field", _FIELD))
             if words.search(text)]
    return (found[0], True) if len(found) == 1 else (None, False)


def guidelines_for(spec: Spec) -> tuple[Guideline, ...]:
    """The guidelines written for the spec's study type; all of them when the type is not known."""
    kind, _ = study_type(spec)
    if kind is None:
        return GUIDELINES
    return tuple(g for g in GUIDELINES if kind in g.study_types)


def coverage(spec: Spec) -> list[Coverage]:
    """Each listed item with the spec fields that speak to it, and whether they are all stated.

    >>> from registry.model import Spec
    >>> spec = Spec.model_validate({"id": "x", "title": "X", "status": "draft",
    ...     "data_collection": {"start": "2027-01-04"}, "randomisation": "by coin",
    ...     "design": {"test": "one-sample-t", "effect": {"d": 0.5}}, "sample_size": {"per_group": 34}},
    ...     strict=False)
    >>> [(c.number, c.status) for c in coverage(spec) if c.guideline.startswith("ARRIVE")][:4]
    [('1', 'partly covered'), ('2', 'partly covered'), ('3', 'missing'), ('4', 'covered')]
    """
    out = []
    for guideline in guidelines_for(spec):
        for item in guideline.items:
            present = tuple(f for f in item.fields if _stated(spec, f))
            missing = tuple(f for f in item.fields if f not in present)
            status: Status = "covered" if not missing else ("missing" if not present else "partly covered")
            out.append(Coverage(guideline.name, item.number, item.topic, status, present, missing))
    return out
