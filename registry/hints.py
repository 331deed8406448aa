"""'Did you mean' for names a user types: spec ids and CSV column names."""

from __future__ import annotations

import difflib
import re
from typing import Iterable


__all__ = ["normalised_id", "id_hint", "name_hint"]


def normalised_id(text: str) -> str | None:
    """The valid id a mistyped one most likely meant, or None.

    >>> normalised_id("Gut_Transit"), normalised_id("fibre butyrate "), normalised_id("!!")
    ('gut-transit', 'fibre-butyrate', None)
    """
    candidate = re.sub(r"[^a-z0-9]+", "-", text.strip().lower()).strip("-")
    from .model import ID_PATTERN

    return candidate if candidate and re.fullmatch(ID_PATTERN, candidate) and len(candidate) <= 64 else None


def id_hint(given: str, known: Iterable[str]) -> str:
    """``"; did you mean 'x'?"`` for an id not found among ``known`` (capitals and underscores forgiven)."""
    known = sorted(set(known))
    fixed = normalised_id(given)
    if fixed is not None and fixed != given and fixed in known:
        return f"; did you mean {fixed!r}?"
    close = difflib.get_close_matches(fixed or given, known, n=1)
    return f"; did you mean {close[0]!r}?" if close else ""


def name_hint(given: str, names: Iterable[str]) -> str:
    """``"; did you mean 'x'?"`` for a column or field name, case and spacing forgiven.

    >>> name_hint("Butyrate", ["mouse", "butyrate"]), name_hint("butyrat", ["mouse", "butyrate"])
    ("; did you mean 'butyrate'?", "; did you mean 'butyrate'?")
    """
    names = [n for n in names if n]
    folded = {re.sub(r"[\s_-]+", "", n.lower()): n for n in names}
    key = re.sub(r"[\s_-]+", "", given.lower())
    if key in folded and folded[key] != given:
        return f"; did you mean {folded[key]!r}?"
    close = difflib.get_close_matches(given, names, n=1, cutoff=0.6)
    return f"; did you mean {close[0]!r}?" if close else ""
