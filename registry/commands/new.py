"""``prespec new``: start a spec from a commented template (never overwriting a file)."""

from __future__ import annotations

import argparse
import json
import os
import re
from datetime import date, timedelta
from pathlib import Path

from ..discovery import UsageError
from ..hints import normalised_id
from ..fsutil import WriteRefused, confined, write_atomic
from ..problems import plain_text

__all__ = ["new", "template", "HELP", "add_arguments", "run"]

HELP = "write a new spec from a commented template"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from ..power.catalog import family_names

    parser.add_argument("id", metavar="ID", help="the spec id: lowercase letters, digits and hyphens")
    parser.add_argument("path", nargs="?", default=None, metavar="PATH",
                        help="registry folder to write ID.yaml into (default: the current folder)")
    parser.add_argument("--dir", default=None, metavar="DIR", help=argparse.SUPPRESS)
    parser.add_argument("--test", default="two-sample-t", metavar="FAMILY",
                        help=f"design family (default two-sample-t); one of: {', '.join(family_names())}")
    parser.add_argument("--title", default=None, help="the experiment's title")


def run(args: argparse.Namespace) -> int:
    if args.path is not None and args.dir is not None and args.path != args.dir:
        raise UsageError(f"give the folder once: {args.path} or --dir {args.dir}")
    return new(args.id, folder=args.path or args.dir or ".", test=args.test, title=args.title)


def _schema_reference(folder: Path) -> str:
    """Relative path from ``folder`` to the nearest schemas/ copy of the spec schema."""
    from ..model import SCHEMA_ID

    for candidate in (folder.resolve(), *folder.resolve().parents):
        schema = candidate / "schemas" / SCHEMA_ID
        if schema.is_file():
            return Path(os.path.relpath(schema, folder.resolve())).as_posix()
        if (candidate / ".git").exists():
            break
    return SCHEMA_ID


def _yaml_scalar(value: object) -> str:
    if isinstance(value, (list, dict)):  # a flow sequence or mapping; JSON is valid YAML
        return json.dumps(value)
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    return repr(value)


def _alternative_line(test: str, effect: dict[str, object]) -> str:
    """The template's ``alternative`` line, or a comment where the family takes no explicit one."""
    from ..power import design_from_params, get_family
    from ..power.base import InfeasibleDesign
    from ..power.solve import checked_effect

    family = get_family(test)
    try:  # the family's own checks of an explicit alternative, which sizing makes first (not the sizing)
        checked_effect(design_from_params(test, **effect, alternative="two-sided", attrition=0.1))
    except InfeasibleDesign as error:
        if error.field == "design.alternative":
            return f"  # no 'alternative' here: the test is {family.sides(design_from_params(test, **effect))}\n"
        raise
    if family.undirected is not None:
        return f"  alternative: two-sided   # the {family.undirected} test has no sides; keep two-sided\n"
    return "  alternative: two-sided   # or greater / less for a one-sided test\n"


def template(spec_id: str, test: str, title: str | None, schema_ref: str, today: date | None = None, *,
             per_group: int | None = None) -> str:
    """The spec ``prespec new`` writes. ``per_group`` stands in for the planned size, which is otherwise
    the example design's own (check's placeholder-text rule reads only the template's texts, and
    sizing the example, by simulation for some families, would cost it time on every run)."""
    from ..power import design_from_params, get_family, solve_sample_size
    from ..power.verify import needs_verification, verified_sample_size

    family = get_family(test)
    start = (today or date.today()) + timedelta(days=90)
    effect = dict(family.example)
    design = design_from_params(test, **effect, attrition=0.1)
    if per_group is None:
        # the same size check recomputes: simulation-verified where the family's formula is an approximation
        sample = verified_sample_size(design) if needs_verification(design) else solve_sample_size(design)
        per_group = sample.enrolment_per_group
    planned = per_group
    effect_lines = "\n".join(f"    {key}: {_yaml_scalar(value)}" for key, value in effect.items())
    shown_title = title or f"Title of the {spec_id} experiment"
    return f"""# yaml-language-server: $schema={schema_ref}
# A prespec experiment spec. Fields marked locked in docs/spec-format.md define the design:
# once data collection starts, change them only with an entry under 'amendments'.
id: {spec_id}
title: {_yaml_scalar(shown_title)}
status: draft            # draft | planned | collecting | complete | withdrawn
question: "What does the experiment ask?"
population: "Who or what is studied, and the experimental unit."
hypotheses:
  - id: H1
    statement: "The primary hypothesis, as the primary analysis tests it."
    primary: true
outcomes:
  primary:
    name: "primary outcome"
    unit: "unit"
  secondary: []
data_collection:
  start: {start.isoformat()}      # first day of data collection
design:
  test: {test}           # {family.title}
{_alternative_line(test, effect)}  alpha: 0.05
  power: 0.8
  effect:                # replace with your smallest effect of interest
{effect_lines}
  attrition: 0.1         # expected fraction lost before analysis
  effect_rationale: "Why this is the smallest effect that matters."
  variability_source: "Where the SD comes from (e.g. control groups of earlier experiments)."
sample_size:
  per_group: {planned}          # recomputed by 'prespec check' from the assumptions above
analysis_plan: "How the primary outcome is analysed."
exclusion_criteria: []
randomisation: "How units are allocated to groups."
blinding: "Who is blinded, and how."
stopping_rule: "Data collection stops when the planned sample size is reached."
contacts: []
amendments: []
"""


#: Characters a title given on the command line may not hold: controls (ESC, tab, line breaks, DEL,
#: C1), format characters (bidirectional overrides), line and paragraph separators, bytes that are
#: not UTF-8 (lone surrogates), private-use and unassigned code points.
_NOT_IN_TITLES = ("Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp")


def _check_title(title: str) -> None:
    """Refuse a ``--title`` the spec's own check would refuse, or one that would not read back as given."""
    import unicodedata

    from ..model import Spec
    from ..problems import escaped

    limit = next(rule.max_length for rule in Spec.model_fields["title"].metadata if hasattr(rule, "max_length"))
    bad = next(((i, ch) for i, ch in enumerate(title) if unicodedata.category(ch) in _NOT_IN_TITLES), None)
    if bad is not None:
        where, ch = bad
        kind = unicodedata.category(ch)
        what = ("a byte that is not UTF-8 text" if kind == "Cs" else
                f"the character U+{ord(ch):04X} "
                f"({unicodedata.name(ch, 'a control character' if kind == 'Cc' else 'not an assigned character')})")
        raise UsageError(f"--title: {what}, shown as {escaped(ch)}, at character {where + 1}; a title is one line "
                         "of plain text without control, format or line-break characters")
    if len(title) > limit:
        raise UsageError(f"--title: {len(title):,} characters; a title has at most {limit} (put the details in "
                         "'question' or 'population')")


def _loads_as_check_does(text: str, target: Path) -> None:
    """The written spec must load and validate as ``check`` loads it: otherwise nothing is written."""
    from ..problems import InvalidSpec
    from ..validation import validate_document
    from ..yamlio import load_bytes_fast

    try:
        validate_document(load_bytes_fast(text.encode("utf-8"), str(target)))
    except InvalidSpec as error:  # pragma: no cover - a template that check refuses is a bug
        raise RuntimeError(f"the template for {target} does not pass check, so nothing was written:\n{error}") \
            from None


def new(spec_id: str, *, folder: str = ".", test: str = "two-sample-t", title: str | None = None) -> int:
    from ..model import ID_PATTERN, SCHEMA_ID
    from ..power.catalog import UnknownFamily, get_family

    if not re.fullmatch(ID_PATTERN, spec_id) or len(spec_id) > 64:
        fixed = normalised_id(spec_id)
        hint = f"; did you mean {fixed!r}?" if fixed else ""
        raise UsageError(f"id must be lowercase letters, digits and single hyphens (at most 64); got {spec_id!r}{hint}")
    try:
        get_family(test)
    except UnknownFamily as error:
        raise UsageError(str(error)) from None
    if title is not None:
        _check_title(title)
    target_folder = Path(folder)
    if target_folder.exists() and not target_folder.is_dir():
        raise UsageError(f"{folder}: not a folder")
    target = target_folder / f"{spec_id}.yaml"
    schema_ref = _schema_reference(target_folder) if target_folder.exists() else SCHEMA_ID
    text = template(spec_id, test, title, schema_ref)
    _loads_as_check_does(text, target)
    try:
        write_atomic(confined(target_folder, target.name), text, overwrite=False)
    except WriteRefused as error:
        raise UsageError(str(error)) from None
    print(plain_text(f"wrote {target}: fill in the assumptions, then run 'prespec check {target}'"))
    if schema_ref == SCHEMA_ID:
        print(plain_text(f"hint: run 'prespec schema --out {target_folder / SCHEMA_ID}' so editors can validate "
                         "the spec"))
    return 0
