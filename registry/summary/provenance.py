"""Where a rendered summary came from: the spec's file, commit, content hash, freeze tags and render time."""

from __future__ import annotations

import os
from dataclasses import dataclass
from datetime import date, datetime, timezone
from pathlib import Path

from .. import __version__, git
from ..canonical import content_hash
from ..discovery import UsageError
from ..model import Spec

__all__ = ["Provenance", "provenance", "render_time", "iso_utc"]


@dataclass(frozen=True)
class Provenance:
    spec_path: str
    commit: str | None
    committed: datetime | None
    modified: bool
    data_collection_start: date
    content_sha256: str
    freeze_tags: tuple[tuple[str, str], ...]
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


def provenance(spec: Spec, path: Path, display: str, rendered_at: datetime) -> Provenance:
    last = git.last_commit_for(path)
    return Provenance(
        spec_path=git.repo_relative(path) or display,
        commit=last[0] if last else None,
        committed=last[1] if last else None,
        modified=git.is_modified(path) if last else False,
        data_collection_start=spec.data_collection.start,
        content_sha256=content_hash(spec),
        freeze_tags=tuple(git.freeze_tags(path, spec.id)),
        rendered_at=rendered_at,
        tool_version=__version__,
        verify_command=f"prespec verify {spec.id}",
    )
