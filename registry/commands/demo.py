"""``prespec demo``: build a small lab registry as a real git repository, then check it.

The history is invented and fully pinned (names, e-mail addresses, author and committer
dates), so every run builds the same commits: a clean spec, a drifted one, an amended
one, an uncommitted edit, an underpowered and an oversized design, and a registration tag.
"""

from __future__ import annotations

import argparse
import os
import re
import tempfile
from pathlib import Path

from ..discovery import UsageError
from ..fsutil import move_within, write_atomic
from ..problems import plain_text
from ..registration import format_message, tag_name

__all__ = ["demo", "build_demo", "HELP", "add_arguments", "run", "EXAMPLES"]

HELP = "build a demonstration lab registry (a git repository with dated commits) and check it"

def _examples() -> Path:
    """The example registry: the source tree's, else the copy installed inside the package."""
    source = Path(__file__).resolve().parents[2] / "example_registry"
    return source if source.is_dir() else Path(__file__).resolve().parents[1] / "example_registry"


#: The invented example specs the demo starts from.
EXAMPLES = _examples()

_LEAD = ("Metabolism group lead", "metabolism-lead@example.org")
_POSTDOC = ("Physiology postdoc", "physiology-postdoc@example.org")
_PSYCH = ("Human Performance lab lead", "hp-lab@example.org")
_STATS = ("Unit statistician", "stats@example.org")

#: Demo start dates: in the past, so the commits after them show what happens once collection runs.
_STARTS = {
    "fibre-butyrate": "2024-03-04",
    "exercise-blood-pressure": "2024-04-01",
    "caffeine-reaction-time": "2024-04-15",
    "organoid-doubling": "2024-03-18",
}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("dir", nargs="?", metavar="DIR",
                        help="an empty folder, or a new one inside an existing folder, for the demo registry (not a "
                        "symbolic link; default: a new temporary folder)")


def run(args: argparse.Namespace) -> int:
    return demo(args.dir)


def _edit(path: Path, pattern: str, replacement: str, *, count: int = 1) -> None:
    text = path.read_text(encoding="utf-8")
    new, made = re.subn(pattern, replacement, text, count=count, flags=re.MULTILINE)
    if made == 0:
        raise UsageError(f"demo: {path.name} no longer has the text the demo edits ({pattern!r}); "
                         "the example registry changed")
    write_atomic(path, new)


def build_demo(target: Path) -> Path:
    """Write the demo registry into ``target`` (new or empty) and return the registry folder."""
    from ..git import init_repository

    if not EXAMPLES.is_dir():
        raise UsageError(f"demo: the example registry is not installed ({EXAMPLES})")
    repo = init_repository(target)
    registry = target / "registry"
    registry.mkdir()
    for source in sorted(EXAMPLES.glob("*.yaml")):
        write_atomic(registry / source.name, source.read_text(encoding="utf-8"))
    for spec_id, start in _STARTS.items():
        _edit(registry / f"{spec_id}.yaml", r"^  start: \d{4}-\d{2}-\d{2}$", f"  start: {start}")
    _edit(registry / "fibre-butyrate.yaml", r"^  end: \d{4}-\d{2}-\d{2}$", "  end: 2024-06-28")
    write_atomic(target / "README.md", "Demonstration design registry built by `prespec demo` (invented data).\n")
    first = repo.commit_all("Register the lab's planned experiments", author=_LEAD,
                            date="2024-01-15T10:00:00+01:00")

    # Registration of fibre-butyrate before its start (what `prespec register` records).
    from ..audit import find_spec
    from ..canonical import content_hash

    _, report = find_spec(str(registry / "fibre-butyrate.yaml"))
    assert report.spec is not None
    repo.tag_with_dates(tag_name("fibre-butyrate", 1), first, format_message({
        "id": "fibre-butyrate", "path": "registry/fibre-butyrate.yaml", "commit": first,
        "start": _STARTS["fibre-butyrate"], "content-sha256": content_hash(report.spec),
        "tool": "prespec demo"}), tagger=_LEAD, date="2024-02-20T09:30:00+01:00")

    # Before its start the psychology spec moves to its own folder (history follows the id).
    (registry / "psychology").mkdir()
    move_within(registry, "caffeine-reaction-time.yaml", "psychology/caffeine-reaction-time.yaml")
    repo.commit_all("Keep the psychology specs in their own folder", author=_PSYCH,
                    date="2024-02-26T14:05:00+01:00")

    # Clean: after its start only free fields change, plus a respelt number (0.05 -> 0.050).
    fibre = registry / "fibre-butyrate.yaml"
    _edit(fibre, r"^status: planned$", "status: collecting")
    _edit(fibre, r"^  alpha: 0\.05$", "  alpha: 0.050")
    _edit(fibre, r"^amendments: \[\]$", "progress: Cohort 1 (24 mice) started on 2024-03-04.\namendments: []")
    repo.commit_all("fibre-butyrate: collecting, cohort 1 started", author=_LEAD, date="2024-03-11T08:45:00+01:00")

    # Drift: after its start the analysis plan and the exclusions change, with no amendment.
    exercise = registry / "exercise-blood-pressure.yaml"
    _edit(exercise, r"^analysis_plan: .*$",
          "analysis_plan: Mann-Whitney test on week-6 24-hour mean arterial pressure, two-sided.")
    _edit(exercise, r"^  - Implant failure or humane end point before week 6\.$",
          "  - Implant failure or humane end point before week 6.\n"
          "  - Mean arterial pressure more than 3 SD from the group mean.")
    repo.commit_all("exercise-blood-pressure: tidy the analysis section", author=_POSTDOC,
                    date="2024-04-22T17:20:00+02:00")

    # Amended: after its start an exclusion is added together with an amendment entry.
    caffeine = registry / "psychology" / "caffeine-reaction-time.yaml"
    _edit(caffeine, r"^  - Missing either session\.$",
          "  - Missing either session.\n  - Saliva caffeine above 1 mg/L before the placebo session.")
    _edit(caffeine, r"^amendments: \[\]$",
          "amendments:\n"
          "  - date: 2024-05-06\n"
          "    fields: [exclusion_criteria]\n"
          "    reason: Two volunteers arrived with caffeine on board despite instructions; the ethics committee\n"
          "      approved excluding sessions with saliva caffeine above 1 mg/L before any outcome was seen.\n"
          "    approved_by: Unit statistician")
    repo.commit_all("caffeine-reaction-time: amendment 1 (saliva caffeine exclusion)", author=_PSYCH,
                    committer=_STATS, date="2024-05-06T11:00:00+02:00")

    # Uncommitted: an edit of a locked field after the start, left in the working tree.
    _edit(registry / "organoid-doubling.yaml", r"^stopping_rule: .*$",
          "stopping_rule: Stop early if the first 10 cultures show no difference from 38 h.")
    return registry


def _new_or_empty_folder(folder: str) -> Path:
    """``folder``, made now if it is new, refusing anything the demo must not write into: a file, a folder
    with something in it, a symbolic link (dangling or not: nothing is written through one, so nothing
    lands outside the folder named), or a new folder whose parent does not exist."""
    target = Path(folder)
    if target.is_symlink():
        where = os.readlink(target)
        raise UsageError(f"{folder}: is a symbolic link (to {where!r}); the demo writes only into a real new or "
                         "empty folder, never through a link: name the folder itself")
    if target.exists():
        if not target.is_dir() or any(target.iterdir()):
            raise UsageError(f"{folder}: not an empty folder; the demo writes only into a new or empty one")
        return target
    parent = target.absolute().parent
    if not parent.is_dir():
        raise UsageError(f"{folder}: the folder {parent} it would go in does not exist; create that first, or "
                         "name a new folder inside an existing one")
    try:
        target.mkdir()
    except OSError as error:  # taken meanwhile, or the parent is not writable
        raise UsageError(f"{folder}: cannot create the folder: {error.strerror or error}") from None
    return target


def demo(folder: str | None) -> int:
    from ..git import GitProblem
    from .check import check

    if folder is None:
        target = Path(tempfile.mkdtemp(prefix="prespec-demo-"))
    else:
        target = _new_or_empty_folder(folder)
    try:
        registry = build_demo(target)
    except GitProblem as error:
        raise UsageError(f"demo: {error}") from None
    except OSError as error:  # e.g. the folder is not writable, or the disk is full
        raise UsageError(f"demo: cannot write the demo registry into {folder or target}: "
                         f"{error.strerror or error}") from None
    print(plain_text(f"Demo registry (a git repository with invented, dated history): {target}"))
    print(plain_text(f"Try: prespec history exercise-blood-pressure {registry}   |   "
                     f"prespec verify fibre-butyrate {registry}"))
    print()
    return check([str(registry)])
