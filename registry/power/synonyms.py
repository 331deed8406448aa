"""Names people use for design families and for the sides of a test, and the hints built on them.

Edit distance alone points the wrong way (``unpaired-t`` is one letter from ``paired-t`` but means
``two-sample-t``), so a "did you mean" first looks a name up among the known synonyms and only
then falls back to the closest spelling.
"""

from __future__ import annotations

import difflib
import re
from typing import Iterable

__all__ = ["FAMILY_SYNONYMS", "ALTERNATIVE_SYNONYMS", "STANDARDISED_EFFECTS", "suggestion", "hint", "parameter_hint"]

#: Other names of a design family -> the family's ``design.test`` value.
FAMILY_SYNONYMS: dict[str, str] = {
    "unpaired-t": "two-sample-t", "independent-t": "two-sample-t", "independent-samples-t": "two-sample-t",
    "students-t": "two-sample-t", "student-t": "two-sample-t", "two-sample": "two-sample-t",
    "pooled-t": "two-sample-t", "t-test": "two-sample-t", "ttest": "two-sample-t",
    "dependent-t": "paired-t", "matched-t": "paired-t", "repeated-measures-t": "paired-t",
    "paired-samples-t": "paired-t", "paired": "paired-t",
    "one-sample": "one-sample-t", "single-sample-t": "one-sample-t",
    "welch": "welch-t", "unequal-variance-t": "welch-t",
    "anova": "one-way-anova", "one-way": "one-way-anova", "f-test": "one-way-anova",
    "proportions": "two-proportions", "two-proportion": "two-proportions", "z-test-proportions": "two-proportions",
    "binomial": "one-proportion", "one-proportions": "one-proportion",
    "pearson": "correlation", "pearson-r": "correlation",
    "chi2": "chi-square", "chisq": "chi-square", "chi-squared": "chi-square", "contingency": "chi-square",
    "regression": "linear-regression", "multiple-regression": "linear-regression", "ols": "linear-regression",
    "logrank": "log-rank", "survival": "log-rank", "cox": "log-rank",
    "wilcoxon-rank-sum": "mann-whitney", "rank-sum": "mann-whitney", "mann-whitney-u": "mann-whitney",
    "wilcoxon-signed-rank": "signed-rank", "wilcoxon-signed": "signed-rank",
    "tost": "equivalence-t", "equivalence": "equivalence-t",
    "non-inferiority": "noninferiority-t", "noninferiority": "noninferiority-t",
    "non-inferiority-t": "noninferiority-t",
}

#: Other words for the sides of a test -> what to write instead.
ALTERNATIVE_SYNONYMS: dict[str, str] = {
    "one-sided": "greater or less (a one-sided test names its direction)",
    "one-tailed": "greater or less (a one-sided test names its direction)",
    "two-tailed": "two-sided", "two_sided": "two-sided", "two.sided": "two-sided", "both": "two-sided",
    "increase": "greater", "higher": "greater", "larger": "greater", "up": "greater",
    "decrease": "less", "lower": "less", "smaller": "less", "down": "less",
}

#: Published standardised effect sizes; a design that takes raw units wants its difference and SD instead
#: (the closest spelling, ``sd`` for ``d``, would point the wrong way).
STANDARDISED_EFFECTS: frozenset[str] = frozenset({"d", "f", "f2", "w", "h", "es", "effect_size", "cohens_d"})


def _key(text: str) -> str:
    return re.sub(r"[\s_]+", "-", text.strip().lower())


def suggestion(value: object, options: Iterable[str], synonyms: dict[str, str] | None = None) -> str | None:
    """What ``value`` most likely meant among ``options``: a known synonym first, then the closest spelling.

    >>> suggestion("unpaired-t", ["paired-t", "two-sample-t"], FAMILY_SYNONYMS)
    'two-sample-t'
    >>> suggestion("Paired-T", ["paired-t", "two-sample-t"], FAMILY_SYNONYMS)
    'paired-t'
    """
    options = list(options)
    key = _key(str(value))
    if key in options and key != str(value):
        return key
    target = (synonyms or {}).get(key)
    if target is not None and (target in options or target.split(" ")[0] in options):
        return target
    close = difflib.get_close_matches(key, options, n=1, cutoff=0.6)
    return close[0] if close else None


def hint(value: object, options: Iterable[str], synonyms: dict[str, str] | None = None) -> str:
    """``"; did you mean 'x'?"`` (or ``"; use x"`` for a phrase), or ``""`` without a likely meaning."""
    found = suggestion(value, options, synonyms)
    if found is None:
        return ""
    return f"; did you mean {found!r}?" if " " not in found else f"; use {found}"


def parameter_hint(key: object, allowed: Iterable[str]) -> str:
    """The hint for an unknown design parameter ``key``: ``"; did you mean 'x'?"``, a sentence, or ``"."``.

    >>> parameter_hint("d", ["difference", "margin", "sd"])
    "; this design is stated in the outcome's units: give difference and sd (a standardised d is difference: d with sd: 1)."
    >>> parameter_hint("magrin", ["difference", "margin", "sd"])
    "; did you mean 'margin'?"
    """
    allowed = list(allowed)
    name = str(key)
    if name in STANDARDISED_EFFECTS and "sd" in allowed and "difference" in allowed:
        return (f"; this design is stated in the outcome's units: give difference and sd (a standardised {name} is "
                f"difference: {name} with sd: 1).")
    close = difflib.get_close_matches(name, allowed, n=1, cutoff=0.6)
    return f"; did you mean {close[0]!r}?" if close else "."
