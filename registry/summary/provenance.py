"""Where a rendered summary came from: the spec's file, commit, content hash, registration tags and render time."""

from __future__ import annotations

import os
from dataclasses import dataclass
from datetime import date, datetime, timezone
from pathlib import Path
from typing import Any

from .. import __version__
from ..audit import registrations
from ..canonical import content_hash
from ..checks import SpecReport
from ..discovery import UsageError
from ..git import GitProblem, find_repository
from ..problems import plain_text

__all__ = ["Provenance", "provenance", "render_time", "iso_utc", "FileFacts", "file_facts"]


@dataclass(frozen=True)
class Provenance:
    spec_path: str
    commit: str | None
    committed: datetime | None
    modified: bool
    data_collection_start: date
    content_sha256: str
    registration_tags: tuple[tuple[str, str], ...]
    rendered_at: datetime
    tool_version: str
    verify_command: str


def iso_utc(moment: datetime) -> str:
    """``2027-03-01T09:30:00Z``: UTC, whole seconds."""
    return moment.astimezone(timezone.utc).replace(microsecond=0).strftime("%Y-%m-%dT%H:%M:%SZ")


def render_time() -> datetime:
    """Now in UTC, or the moment SOURCE_DATE_EPOCH names (seconds since 1970), for reproducible output."""
    raw = os.environ.get("SOURCE_DATE_EPOCH")
    if raw is None or raw.strip() == "":
        return datetime.now(timezone.utc).replace(microsecond=0)
    try:
        seconds = int(raw.strip())
        return datetime.fromtimestamp(seconds, timezone.utc)
    except (ValueError, OverflowError, OSError):
        raise UsageError(
            f"SOURCE_DATE_EPOCH must be a whole number of seconds since 1970-01-01 UTC; got {raw!r}"
        ) from None


@dataclass(frozen=True)
class FileFacts:
    """What git says of one spec file for its provenance: its path in the repository (None outside
    one) and whether the file differs from its blob in HEAD (or git could not tell)."""

    relative: str | None
    modified: bool


def file_facts(paths: list[Path]) -> dict[Path, FileFacts]:
    """:class:`FileFacts` of many spec files, asking git once per folder (``render --all``): one
    repository lookup and one listing of the folder in HEAD for each folder the files are in, where
    one spec at a time costs two git processes and a repository object each. The answers are those
    :func:`provenance` finds alone."""
    import hashlib
    import posixpath

    repos: dict[Path, Any] = {}
    listed: dict[tuple[Path, str], dict[str, str] | None] = {}
    facts = {}
    for path in paths:
        where = Path(path).absolute()
        folder = where if where.is_dir() else where.parent
        if folder not in repos:
            repos[folder] = find_repository(where)
        repo = repos[folder]
        relative = repo.relpath(path) if repo is not None else None
        if repo is None or relative is None:
            facts[path] = FileFacts(relative, False)
            continue
        inside, name = posixpath.split(relative)
        if (repo.root, inside) not in listed:
            try:
                listed[repo.root, inside] = repo.head_blobs(inside)
            except GitProblem:
                listed[repo.root, inside] = None  # not in HEAD, or git could not tell: never "identical"
        blobs = listed[repo.root, inside]
        committed = blobs.get(name) if blobs is not None else None
        try:
            raw = Path(path).read_bytes()
        except OSError:
            raw = None
        same = committed is not None and raw is not None and (
            hashlib.sha1(b"blob %d\0" % len(raw) + raw).hexdigest() == committed)
        facts[path] = FileFacts(relative, not same)
    return facts


def provenance(report: SpecReport, path: Path, rendered_at: datetime, facts: FileFacts | None = None) -> Provenance:
    """Provenance of a checked spec; its git facts come from the history ``check`` read, and the file's
    from ``facts`` when :func:`file_facts` found them already (else git is asked here)."""
    spec = report.spec
    assert spec is not None
    tags: tuple[tuple[str, str], ...] = ()
    if facts is not None and (facts.relative is None or report.registration_tags is not None):
        relative, modified = facts.relative, facts.modified
        if relative is not None:
            tags = tuple((r.tag.name, r.tag.commit) for r in registrations(None, spec.id, report.registration_tags))
    else:
        repo = find_repository(Path(path).absolute())
        relative = repo.relpath(path) if repo is not None else None
        modified = False
        if repo is not None and relative is not None:
            try:
                modified = not repo.matches_head(relative, path)  # blobs compared: no index, no repository programs
                tags = tuple((r.tag.name, r.tag.commit) for r in registrations(repo, spec.id, report.registration_tags))
            except GitProblem:
                modified = True  # cannot tell: never claim the summary matches a commit
    last = report.history.last if report.history is not None else None
    return Provenance(
        spec_path=plain_text(relative) if relative else report.path,
        commit=last.sha if last else None,
        committed=last.committer_date if last else None,
        modified=modified,
        data_collection_start=spec.data_collection.start,
        content_sha256=content_hash(spec),
        registration_tags=tags,
        rendered_at=rendered_at,
        tool_version=__version__,
        verify_command=_verify_command(spec.id, relative),
    )


def _verify_command(spec_id: str, relative: str | None) -> str:
    """What a reviewer runs from the root of a clone of the registry's repository."""
    folder = Path(relative).parent.as_posix() if relative else "."
    return f"prespec verify {spec_id}" if folder == "." else f"prespec verify {spec_id} {_shell_word(folder)}"


def _shell_word(text: str) -> str:
    """``text`` as one POSIX shell word (spaces, backticks, ``$(...)`` stay literal); a name with control
    characters in ``$'...'`` form, which bash and zsh read (a byte of a name that is not UTF-8 as
    that byte).

    >>> _shell_word("my data/$(id)")
    "'my data/$(id)'"
    >>> print(_shell_word("a" + chr(10) + "b"))
    $'a\\x0ab'
    >>> print(_shell_word("caf" + chr(0xdce9)))
    $'caf\\xe9'
    """
    import shlex

    if text.isprintable():
        return shlex.quote(text)
    body = "".join("\\" + ch if ch in "'\\" else ch if ch.isprintable() else _dollar_escape(ch) for ch in text)
    return f"$'{body}'"


def _dollar_escape(ch: str) -> str:
    """One unprintable character inside ``$'...'``: ``\\xHH`` (an ASCII control, or a byte of a name
    that is not UTF-8), else ``\\uHHHH`` or ``\\UHHHHHHHH`` (bash writes those as UTF-8)."""
    code = ord(ch)
    if code < 0x80:
        return f"\\x{code:02x}"
    if 0xDC80 <= code <= 0xDCFF:
        return f"\\x{code - 0xDC00:02x}"
    return f"\\u{code:04x}" if code <= 0xFFFF else f"\\U{code:08x}"
