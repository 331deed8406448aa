"""Design drift from a spec's versions: versions in, findings out.

This module runs no git and reads no files. :mod:`registry.audit` hands it the log
(:class:`registry.git.LogEntry` records, oldest first) and a function that returns a
blob's bytes; it follows each spec by its ``id`` (so a moved or renamed file keeps its
history), compares versions field by field on parsed, validated values (comments, key
order, layout and number spelling are never changes), and decides:

- ``drift`` (error): a locked field changed in a commit dated on or after the start
  of data collection, with no amendment entry added in that same commit covering it;
- ``amended`` (info): such a change, covered by an amendment added in the same commit;
- ``disclosed-deviation`` (warning): such a change without an amendment in its commit, disclosed
  by an amendment added in a later commit that lists the field and names the change's commit
  (``discloses: <sha>``) or date (``discloses: YYYY-MM-DD``); the message gives the delay in days;
- ``uncommitted``: working-tree edits of locked fields against HEAD;
- ``incomplete-history``: a shallow clone, or a first version already after the start;
- ``date-order``: a commit dated before its parent;
- ``future-date``: a commit dated later than now (its date proves nothing);
- ``bad-timezone``: a commit whose recorded offset no time zone has (read as UTC);
- ``history-unreadable``: a version git cannot read (a missing or corrupt object);
- ``untracked``: no version of the spec in the history at all;
- ``deleted``: the history ends with the spec's removal;
- ``id-changed`` (error): a commit after the start changed a file's ``id`` together with a
  locked field (the new id's history would otherwise start late and the old one end, two
  warnings hiding one design change).

A commit is judged against the earliest start in force: the start declared before it or
any start its own versions declare, so moving the start earlier cannot make later edits
look early; once data collection has started, the start itself is locked like any field.

A merge commit is compared with every parent: a field whose merged value equals one
parent's came from that parent's line of commits (already analysed there); a field whose
merged value differs from every parent's was introduced by the merge itself (a conflict
resolution) and is judged like any other change, an amendment counting only when the
merge adds it (it is in no parent).

A commit's date is its committer date, read as the calendar date in the offset the
committer recorded (docs/reviewer-guide.md explains why, and the limits).
"""

from __future__ import annotations

import dataclasses
import json
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta
from functools import lru_cache
from typing import TYPE_CHECKING, Any

from pydantic import BaseModel

from .canonical import locked_view
from .checks import Finding
from .git import Commit, LogEntry, odd_offset
from .problems import InvalidSpec
from .yamlio import load_bytes_fast, peek_scalars

if TYPE_CHECKING:  # the model loads when a version is validated, not when cached results are shown
    from .model import Spec

__all__ = [
    "MISSING",
    "Snapshot",
    "SnapshotStore",
    "FieldChange",
    "Revision",
    "SpecHistory",
    "Event",
    "spec_events",
    "analyze",
    "diff",
    "covers",
    "commit_day",
    "uncommitted_findings",
    "show",
    "show_change",
    "dotted_loc",
    "SPEC_KEYS",
    "UnreadableBlob",
    "FUTURE_TOLERANCE",
    "verdict_of",
]


class _Missing:
    def __repr__(self) -> str:
        return "MISSING"

    def __reduce__(self) -> str:  # unpickled (from another process) as this module's one marker
        return "MISSING"


#: A field absent on one side of a comparison.
MISSING: Any = _Missing()

#: A YAML mapping with a text ``id`` and one of these keys is taken for a spec.
SPEC_KEYS = frozenset({"design", "data_collection", "sample_size", "hypotheses"})

@lru_cache(maxsize=None)
def _top_locked() -> frozenset[str]:
    """The spec's top-level fields that are locked (from the model)."""
    from .model import Spec, locked_paths

    return frozenset(name for name, is_locked in locked_paths(Spec).items() if is_locked)

#: Clocks of different machines disagree by minutes; a commit is "in the future" beyond this.
FUTURE_TOLERANCE = timedelta(minutes=10)


class UnreadableBlob(LookupError):
    """Raised by a store's reader when git cannot give a blob; the message says what git said."""


def commit_day(moment: datetime) -> date:
    """The calendar date of a commit in the offset its committer recorded."""
    return moment.date()


def _plain(value: Any) -> Any:
    """JSON-like values for comparison: every field of a model, integral floats as integers."""
    if isinstance(value, BaseModel):
        return {name: _plain(getattr(value, name)) for name in type(value).model_fields}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, bool) or value is None or isinstance(value, (str, int)):
        return value
    if isinstance(value, float):
        return int(value) if value.is_integer() and abs(value) < 2**53 else value
    if isinstance(value, date):
        return value.isoformat()
    return str(value)


def dotted_loc(path: str) -> tuple[Any, ...]:
    """``"hypotheses[0].statement"`` -> ``("hypotheses", 0, "statement")``."""
    out: list[Any] = []
    for part in path.split("."):
        name, _, rest = part.partition("[")
        if name:
            out.append(name)
        while rest:
            index, _, rest = rest.partition("]")
            if index.isdigit():
                out.append(int(index))
            rest = rest.lstrip("[")
    return tuple(out)


def _get(data: Any, loc: tuple[Any, ...]) -> Any:
    for part in loc:
        if isinstance(part, int) and isinstance(data, list) and part < len(data):
            data = data[part]
        elif isinstance(part, str) and isinstance(data, dict) and part in data:
            data = data[part]
        else:
            return MISSING
    return data


def _put(target: dict[str, Any], loc: tuple[Any, ...], value: Any) -> None:
    """Set ``value`` at a path of string keys (extra locked fields are named by dotted keys)."""
    node = target
    keys = [str(p) for p in loc]
    for key in keys[:-1]:
        child = node.get(key)
        if not isinstance(child, dict):
            child = node[key] = {}
        node = child
    node[keys[-1]] = value


_PEEK = (("id",), ("data_collection", "start"))


class _NoPeek(dict):  # type: ignore[type-arg]
    """The marker of a version whose text :func:`peek_scalars` cannot answer for: told apart from
    an answer by identity, so it unpickles (a history read in another process) as the one marker."""

    def __reduce__(self) -> str:
        return "_NO_PEEK"


_NO_PEEK: dict[tuple[str, ...], str] = _NoPeek()


@dataclass
class Snapshot:
    """One version of one spec file: its bytes, parsed (and validated) only when needed.

    ``id`` and ``start`` come from a cheap peek at the text where possible; the full parse
    and validation happen only for versions that are compared.
    """

    blob: str
    raw: bytes | None = None
    _data: Any = field(default=None, repr=False)
    _parsed: bool = field(default=False, repr=False)
    _spec: Spec | None = field(default=None, repr=False)
    _validated: bool = field(default=False, repr=False)
    _peeked: dict[tuple[str, ...], str] | None = field(default=None, repr=False)
    error: str | None = None
    #: Why git could not give this version's bytes (``None``: it could).
    unreadable: str | None = None

    @classmethod
    def of(cls, blob: str, data: Any, spec: Spec | None = None, source: str | None = None) -> "Snapshot":
        """A snapshot of already loaded (and validated) content, e.g. the working tree's."""
        return cls(blob, source.encode("utf-8") if source is not None else None, data, True, spec, spec is not None)

    @property
    def data(self) -> Any:
        if not self._parsed:
            self._parsed = True
            try:
                self._data = load_bytes_fast(self.raw or b"", self.blob, main_way_problems=False).data
            except InvalidSpec as error:
                self.error = "; ".join(p.message for p in error.problems[:3])
        return self._data

    def adopt(self, data: Any, spec: Spec) -> None:
        """Take the parsed and validated content of the same bytes loaded elsewhere (the working-tree
        file when it equals this version), so it is not parsed and validated twice."""
        if not self._parsed:
            self._data, self._parsed, self._spec, self._validated = data, True, spec, True

    def _scan(self) -> dict[tuple[str, ...], str] | None:
        """The scalars :func:`peek_scalars` read at :data:`_PEEK`; fewer than all of them when it read
        the whole text without finding the others. ``None`` when the peek cannot answer."""
        if self._parsed or self.raw is None:
            return None
        if self._peeked is None:
            found = peek_scalars(self.raw, _PEEK)
            self._peeked = _NO_PEEK if found is None else found
        return None if self._peeked is _NO_PEEK else self._peeked

    def _peek(self) -> dict[tuple[str, ...], str] | None:
        scanned = self._scan()
        return scanned if scanned is not None and len(scanned) == len(_PEEK) else None

    @property
    def id(self) -> str | None:
        scanned = self._scan()
        if scanned is not None:
            if len(scanned) == len(_PEEK):
                return scanned[("id",)]
            if ("id",) not in scanned:
                # The whole text was read and its top-level mapping has no 'id' key (nor an alias or a
                # complex key the peek could not follow): a full load cannot find one either. Such
                # texts (an alias-laden or a non-spec YAML file) are often the costliest to load.
                return None
        data = self.data
        if isinstance(data, dict) and isinstance(data.get("id"), str) and SPEC_KEYS & data.keys():
            return data["id"]
        return None

    @property
    def start(self) -> date | None:
        """``data_collection.start`` as written (read without validating the rest)."""
        peeked = self._peek()
        value: Any = peeked[("data_collection", "start")] if peeked is not None else \
            _get(self.data, ("data_collection", "start"))
        if isinstance(value, date):
            return value
        try:
            return date.fromisoformat(str(value).strip()) if isinstance(value, str) else None
        except ValueError:
            return None

    @property
    def spec(self) -> Spec | None:
        """The validated spec, or ``None`` for an invalid version (validated once, when first asked)."""
        if not self._validated:
            self._validated = True
            data = self.data
            if isinstance(data, dict):
                from .validation import validate_document
                from .yamlio import Document

                try:
                    self._spec = validate_document(Document("", data, ""))
                except InvalidSpec as error:
                    self.error = "; ".join(p.message for p in error.problems[:3])
        return self._spec

    def locked(self, extra_locked: Sequence[str] = ()) -> dict[str, Any]:
        """The locked fields as plain nested values (an invalid version gives its raw values)."""
        spec = self.spec
        if spec is not None and not extra_locked:
            return locked_view(spec)
        return self.views(extra_locked)[0]

    def views(self, extra_locked: Sequence[str] = ()) -> tuple[dict[str, Any], dict[str, Any]]:
        """(locked fields, all fields) as plain nested values; an invalid version gives its raw values."""
        spec = self.spec
        if spec is not None:
            full = _plain(spec)
            locked = locked_view(spec)
        else:
            full = _plain(self.data) if isinstance(self.data, dict) else {}
            locked = {k: v for k, v in full.items() if k in _top_locked()}
        for extra in extra_locked:  # a registry's own locked fields; an index locks the whole list
            loc = dotted_loc(extra)
            loc = loc[: next((i for i, part in enumerate(loc) if isinstance(part, int)), len(loc))]
            value = _get(full, loc)
            if loc and value is not MISSING and _get(locked, loc) != value:
                _put(locked, loc, value)
        return locked, full

    def amendments(self) -> list[dict[str, Any]]:
        spec = self.spec
        raw = _plain(spec.amendments) if spec is not None else _get(self.data, ("amendments",))
        return [a for a in raw if isinstance(a, dict)] if isinstance(raw, list) else []


class SnapshotStore:
    """Versions by blob id: every blob is read once (in bulk where possible) and parsed at most once."""

    def __init__(self, read_blob: Callable[[str], bytes], blobs: Mapping[str, bytes] | None = None) -> None:
        self._read = read_blob
        self._blobs = dict(blobs or {})
        self._cache: dict[str, Snapshot] = {}

    def __getstate__(self) -> dict[str, Any]:
        # pickled (read in another process) without the reader, which holds that process's git handle
        return {**self.__dict__, "_read": _not_attached}

    def attach(self, read_blob: Callable[[str], bytes]) -> None:
        """Read the blobs not yet read with ``read_blob`` (this process's, for a store read elsewhere)."""
        self._read = read_blob

    def get(self, blob: str) -> Snapshot:
        snap = self._cache.get(blob)
        if snap is None:
            raw = self._blobs.pop(blob, None)
            if raw is None:
                try:
                    raw = self._read(blob)
                except UnreadableBlob as error:
                    snap = self._cache[blob] = Snapshot(blob, None, None, True, unreadable=str(error))
                    return snap
            snap = self._cache[blob] = Snapshot(blob, raw)
        return snap

    def unreadable(self) -> dict[str, str]:
        """Blob id -> what git said, for every version asked for that git could not give."""
        return {blob: snap.unreadable for blob, snap in self._cache.items() if snap.unreadable}


def _not_attached(blob: str) -> bytes:
    raise RuntimeError(f"blob {blob}: a version store read in another process must be attached to this "
                       "process's repository before it reads more")


def diff(old: Any, new: Any, path: str = "") -> list[tuple[str, Any, Any]]:
    """Leaf-level differences; lists of different length differ as a whole."""
    if isinstance(old, dict) and isinstance(new, dict):
        out = []
        for key in list(old) + [k for k in new if k not in old]:
            child = f"{path}.{key}" if path else str(key)
            out += diff(old.get(key, MISSING), new.get(key, MISSING), child)
        return out
    if isinstance(old, list) and isinstance(new, list) and len(old) == len(new):
        out = []
        for i, (a, b) in enumerate(zip(old, new)):
            out += diff(a, b, f"{path}[{i}]")
        return out
    if old is MISSING and new is MISSING:
        return []
    if type(old) is type(new) and old == new:
        return []
    if isinstance(old, (int, float)) and isinstance(new, (int, float)) and not isinstance(old, bool) \
            and not isinstance(new, bool) and old == new:
        return []
    return [(path, old, new)]


def covers(amended_field: str, changed: str) -> bool:
    """Whether an amendment's dotted path covers a changed field (a parent covers its children)."""
    amended_field = amended_field.strip()
    return changed == amended_field or changed.startswith(amended_field + ".") or \
        changed.startswith(amended_field + "[")


def show(value: Any, width: int = 60) -> str:
    """A short, unambiguous rendering of a field value for messages."""
    if value is MISSING:
        return "(absent)"
    if value is None:
        return "null"
    if isinstance(value, dict):  # an amendment, a block: its fields as words, not JSON
        text = "; ".join(f"{str(k).replace('_', ' ')} {_words(v)}" for k, v in value.items())
    else:
        text = json.dumps(value, ensure_ascii=False, sort_keys=True) if not isinstance(value, (int, float)) \
            or isinstance(value, bool) else f"{value:g}" if isinstance(value, float) else str(value)
    if len(text) <= width:
        return text
    if text.startswith('"') and text.endswith('"'):  # a cut text keeps its closing quote
        return text[: width - 4] + '..."'
    return text[: width - 3] + "..."


def _words(value: Any) -> str:
    """A value inside a block, for :func:`show`: lists comma-separated, text unquoted unless empty."""
    if isinstance(value, list):
        return ", ".join(_words(v) for v in value) or "none"
    if isinstance(value, dict):
        return "(" + ", ".join(f"{str(k).replace('_', ' ')} {_words(v)}" for k, v in value.items()) + ")"
    if isinstance(value, str):
        return " ".join(value.split()) or '""'
    if isinstance(value, bool):
        return "yes" if value else "no"
    if value is None:
        return "none"
    if isinstance(value, (date, datetime)):
        return value.isoformat()
    return f"{value:g}" if isinstance(value, float) else str(value)


def show_change(old: Any, new: Any, width: int = 60) -> str:
    """``old -> new`` for messages; for lists, the items added and removed.

    >>> show_change(0.05, 0.1)
    '0.05 -> 0.1'
    >>> show_change(["a", "b"], ["a", "b", "c"])
    '2 -> 3 items: added "c"'
    """
    if isinstance(old, list) and isinstance(new, list):
        key = lambda v: json.dumps(v, sort_keys=True, default=str)  # noqa: E731
        before, after = [key(v) for v in old], [key(v) for v in new]
        added = [show(v, width) for v, k in zip(new, after) if k not in before]
        removed = [show(v, width) for v, k in zip(old, before) if k not in after]
        parts = ([f"added {'; '.join(added)}"] if added else []) + ([f"removed {'; '.join(removed)}"] if removed else [])
        return f"{len(old)} -> {len(new)} items" + (": " + ", ".join(parts) if parts else " (reordered)")
    return f"{show(old, width)} -> {show(new, width)}"


@dataclass(frozen=True)
class FieldChange:
    """One field's change in one commit."""

    field: str
    old: Any
    new: Any
    locked: bool
    after_start: bool
    amendment: dict[str, Any] | None = None
    #: A later amendment that discloses this change (a deviation, not drift).
    disclosure: dict[str, Any] | None = None

    @property
    def amended(self) -> bool:
        return self.amendment is not None

    def to_dict(self) -> dict[str, Any]:
        return {"field": self.field, "old": None if self.old is MISSING else self.old,
                "new": None if self.new is MISSING else self.new, "old_absent": self.old is MISSING,
                "new_absent": self.new is MISSING, "locked": self.locked, "after_start": self.after_start,
                "amended": self.amended, "amendment": self.amendment, "disclosure": self.disclosure}


@dataclass(frozen=True)
class Event:
    """What one commit did to one spec: its version before (``None``: not there) and after.

    For a merge, ``old_blob`` is the first parent's version and ``other_blobs`` the later parents'.
    """

    commit: Commit
    old_path: str | None
    new_path: str | None
    old_blob: str | None
    new_blob: str | None
    other_blobs: tuple[str | None, ...] = ()
    #: The same file held another id before this commit (this spec is added): (that id, its blob).
    id_from: tuple[str, str] | None = None
    #: The same file holds another id after this commit (this spec is removed): (that id, its blob).
    id_to: tuple[str, str] | None = None

    @property
    def merge(self) -> bool:
        return len(self.commit.parents) > 1


@dataclass(frozen=True)
class Revision:
    """One commit in a spec's history, with the field changes it made."""

    commit: Commit
    action: str  # added, modified, moved, removed, re-added, merged
    path: str | None
    old_path: str | None
    start: date | None
    after_start: bool
    changes: tuple[FieldChange, ...] = ()
    compared: bool = True

    def to_dict(self) -> dict[str, Any]:
        return {**self.commit.to_dict(), "action": self.action, "path": self.path, "old_path": self.old_path,
                "start": self.start.isoformat() if self.start else None, "after_start": self.after_start,
                "changes": [c.to_dict() for c in self.changes]}


@dataclass
class SpecHistory:
    """Everything git history says about one spec id."""

    id: str
    revisions: list[Revision] = field(default_factory=list)
    findings: list[Finding] = field(default_factory=list)
    start: date | None = None
    started_on: date | None = None
    shallow: bool = False
    last_path: str | None = None

    @property
    def first(self) -> Commit | None:
        return self.revisions[0].commit if self.revisions else None

    @property
    def last(self) -> Commit | None:
        return self.revisions[-1].commit if self.revisions else None

    @property
    def verdict(self) -> str:
        """See :func:`verdict_of`: ``clean`` only when the history was read whole and shows nothing."""
        return verdict_of(f.kind for f in self.findings)

    def summary(self) -> dict[str, Any]:
        """The verdict and provenance in a few keys (``check --json`` shows it per spec)."""
        last = self.last
        return {"verdict": self.verdict, "versions": len(self.revisions),
                "start": self.start.isoformat() if self.start else None,
                "started_on": self.started_on.isoformat() if self.started_on else None,
                "last_commit": last.sha if last else None,
                "last_commit_date": last.committer_date.isoformat() if last else None,
                "last_path": self.last_path, "shallow": self.shallow}

    def to_dict(self) -> dict[str, Any]:
        return {"id": self.id, "verdict": self.verdict, "start": self.start.isoformat() if self.start else None,
                "started_on": self.started_on.isoformat() if self.started_on else None, "shallow": self.shallow,
                "last_path": self.last_path, "revisions": [r.to_dict() for r in self.revisions],
                "findings": [f.to_dict() for f in self.findings]}


#: What each finding kind makes of a spec's history, most serious first (the first present wins).
_VERDICTS: tuple[tuple[str, str], ...] = (
    ("drift", "drift"), ("id-changed", "drift"), ("history-unreadable", "unreadable"), ("incomplete-history", "incomplete"),
    ("rewritten-history", "rewritten"), ("deleted", "deleted"), ("untracked", "untracked"),
    ("disclosed-deviation", "deviation"), ("future-date", "unreliable-dates"), ("date-order", "unreliable-dates"),
    ("bad-timezone", "unreliable-dates"), ("amended", "amended"))


def verdict_of(kinds: Iterable[str]) -> str:
    """A history's verdict from its finding kinds: ``clean`` only when none of them is present.

    >>> verdict_of(["amended", "future-date"])
    'unreliable-dates'
    >>> verdict_of([])
    'clean'
    """
    present = set(kinds)
    return next((verdict for kind, verdict in _VERDICTS if kind in present), "clean")


def spec_events(log: Iterable[LogEntry], store: SnapshotStore,
                known_paths: Mapping[str, str] | None = None) -> dict[str, list[Event]]:
    """Follow every spec through the log by its ``id``: per id, the commits that touched it, oldest first.

    Within one commit an old and a new version with the same id are paired, wherever they live,
    so a move (and a move plus an edit) is one event. A version git cannot parse keeps the id its
    path held before; a version git cannot read at all, with no earlier id at its path, takes the
    id ``known_paths`` (path -> id, e.g. from the working tree) gives that path.
    """
    known = known_paths or {}
    path_ids: dict[str, str] = {}
    events: dict[str, list[Event]] = {}
    for entry in log:
        if not entry.changes:
            continue
        olds: dict[str, list[tuple[str, str]]] = {}
        news: dict[str, list[tuple[str, str]]] = {}
        others = {c.new_path or c.old_path: c.other_blobs for c in entry.changes if c.other_blobs}
        commit_pairs: list[tuple[str, tuple[str, str] | None, tuple[str, str] | None]] = []
        for change in entry.changes:
            if change.old_path and change.old_blob:
                snap = store.get(change.old_blob)
                spec_id = snap.id or path_ids.get(change.old_path) or \
                    (known.get(change.old_path) if snap.unreadable else None)
                if spec_id:
                    olds.setdefault(spec_id, []).append((change.old_path, change.old_blob))
            if change.new_path and change.new_blob:
                snap = store.get(change.new_blob)
                spec_id = snap.id or (path_ids.get(change.new_path) if change.new_path in path_ids
                                      and snap.data is None else None) or \
                    (known.get(change.new_path) if snap.unreadable else None)
                if not spec_id and change.other_blobs:  # a merge: the id the other parents' versions hold
                    spec_id = next((store.get(b).id for b in change.other_blobs if b and store.get(b).id), None)
                if spec_id:
                    news.setdefault(spec_id, []).append((change.new_path, change.new_blob))
        for change in entry.changes:
            if change.old_path and not change.new_path:
                path_ids.pop(change.old_path, None)
        for spec_id in list(olds) + [k for k in news if k not in olds]:
            before, after = list(olds.get(spec_id, [])), list(news.get(spec_id, []))
            pairs: list[tuple[tuple[str, str] | None, tuple[str, str] | None]] = []
            for new in list(after):  # same path first
                match = next((old for old in before if old[0] == new[0]), None)
                if match:
                    pairs.append((match, new))
                    before.remove(match)
                    after.remove(new)
            while before and after:
                pairs.append((before.pop(0), after.pop(0)))
            pairs += [(old, None) for old in before] + [(None, new) for new in after]
            for old, new in pairs:
                if new:
                    path_ids[new[0]] = spec_id
                commit_pairs.append((spec_id, old, new))
        removed = {old[0]: (spec_id, old[1]) for spec_id, old, new in commit_pairs if old and not new}
        added = {new[0]: (spec_id, new[1]) for spec_id, old, new in commit_pairs if new and not old}
        for spec_id, old, new in commit_pairs:
            path = new[0] if new else old[0] if old else None
            id_from = added_from = None
            if new and not old and new[0] in removed:
                id_from = removed[new[0]]
            if old and not new and old[0] in added:
                added_from = added[old[0]]
            events.setdefault(spec_id, []).append(Event(
                entry.commit, old[0] if old else None, new[0] if new else None,
                old[1] if old else None, new[1] if new else None, others.get(path, ()), id_from, added_from))
    return events


def _short_date(moment: datetime) -> str:
    return moment.isoformat(timespec="minutes")


def analyze(spec_id: str, events: Sequence[Event], store: SnapshotStore, *,
            extra_locked: Sequence[str] = (), shallow: bool = False, detail: bool = False,
            commit_dates: Mapping[str, datetime] | None = None, now: datetime | None = None) -> SpecHistory:
    """The field-level history of one spec and its drift findings.

    ``detail`` compares every version (for the changelog); otherwise only commits on or after
    the start are compared, since only they can drift. ``commit_dates`` (sha -> committer date,
    every commit) lets a commit dated before its parent be flagged; ``now`` (timezone-aware)
    one dated in the future.
    """
    history = SpecHistory(spec_id, shallow=shallow)
    previous: Snapshot | None = None
    started: date | None = None
    declared: date | None = None  # the start in force before this commit
    reported: set[str] = set()  # unreadable blobs already named
    drifts: dict[tuple[int, str], Finding] = {}  # (revision index, field) -> its drift finding
    later: list[tuple[int, Commit, list[dict[str, Any]]]] = []  # amendments each later commit added
    if not events:
        history.findings.append(Finding(
            "untracked", "warning", "", None,
            "no version of this spec is in the git history: it has never been committed, so the history cannot "
            "vouch for its design; commit it (before data collection starts)"))
    id_changed = False
    for index, event in enumerate(events):
        commit = event.commit
        old = store.get(event.old_blob) if event.old_blob else None
        new = store.get(event.new_blob) if event.new_blob else None
        others = [store.get(blob) for blob in event.other_blobs if blob]
        parents = [snap for snap in (old, *others) if snap is not None]  # the versions this commit started from
        base = parents[0] if parents else previous
        start = next((s.start for s in (base, new) if s is not None and s.start is not None), None)
        day = commit_day(commit.committer_date)
        if started is None:
            # the earliest start in force: the one declared so far, or any this commit's versions declare
            # (moving the start earlier never lets a commit after the new start pass as before it)
            renamed = store.get(event.id_from[1]) if event.id_from else None
            candidates = [s for s in (declared, *(p.start for p in parents), new.start if new else None,
                                      renamed.start if renamed else None) if s is not None]
            earliest = min(candidates) if candidates else None
            if earliest is not None and day >= earliest:
                started = earliest
            elif new is not None and new.start is not None:
                declared = new.start  # a start moved before it arrived (a postponement) is the start
        after = started is not None
        if not parents and new is not None:
            action = "added" if previous is None else "re-added"
        elif new is None:
            action = "removed"
        elif event.merge:
            action = "merged"
        else:
            action = "moved" if event.old_path != event.new_path else "modified"
        unreadable = [s for s in (*parents, new) if s is not None and s.unreadable]
        for snap in unreadable:
            if snap.blob not in reported:
                reported.add(snap.blob)
                history.findings.append(_unreadable_finding(snap, event))
        changes: list[FieldChange] = []
        compared = base is not None and new is not None and (after or detail) and not unreadable \
            and not (base is not None and base.unreadable)
        if compared:
            assert base is not None and new is not None
            changes = _changes(base, new, extra_locked, after, free=detail,
                               others=parents[1:] if event.merge else ())
            for change in changes:
                if change.locked and after:
                    finding = _drift_finding(change, commit, started, merge=event.merge)
                    history.findings.append(finding)
                    if finding.kind == "drift":
                        drifts[(len(history.revisions), change.field)] = finding
            if after and base is not None and new is not None:
                later.append((len(history.revisions), commit, _added_amendments(base, new, parents[1:])))
            if after and not event.merge:
                from .interim import looks_rewritten

                history.findings += looks_rewritten(base, new, commit)
        id_changed = after and not unreadable and _id_change(history, event, old, new, store, extra_locked, started)
        if index == 0 and action == "added" and after and not shallow and not id_changed:
            history.findings.append(Finding(
                "incomplete-history", "warning", "data_collection.start", None,
                f"the first version in git history is commit {commit.short} of {_short_date(commit.committer_date)}, "
                f"on or after the start of data collection ({start}); the design before the start is not in the "
                "history, so drift cannot be ruled out"))
        if commit_dates is not None:
            history.findings += _date_order(commit, commit_dates)
        if odd_offset(commit.committer_date) or odd_offset(commit.author_date):
            history.findings.append(Finding(
                "bad-timezone", "warning", "", None,
                f"commit {commit.short} records a time-zone offset of 24 hours or more, which no time zone has "
                f"(git accepts up to 99:59); its dates were written by hand or by a broken tool and are read here "
                f"as UTC ({_short_date(commit.committer_date)}), so they are no reliable evidence of when the change "
                "was made"))
        if now is not None and commit.committer_date > now + FUTURE_TOLERANCE:
            history.findings.append(Finding(
                "future-date", "warning", "", None,
                f"commit {commit.short} is dated {_short_date(commit.committer_date)}, later than now "
                f"({_short_date(now)}); its date was set by hand or by a wrong clock, so it is no evidence of when "
                "the change was made, and never that it came before the start of data collection"))
        history.revisions.append(Revision(commit, action, event.new_path, event.old_path, start, after,
                                          tuple(changes), compared))
        previous = new or old
        if new is not None:
            history.last_path = event.new_path
        elif history.last_path is None:
            history.last_path = event.old_path
    history.start = previous.start if previous is not None else None
    history.started_on = started
    if drifts:
        _disclose(history, drifts, later)
    if history.revisions and history.revisions[-1].action == "removed" and not id_changed:
        gone = history.revisions[-1]
        history.findings.append(Finding(
            "deleted", "warning", "", None,
            f"spec {spec_id!r} was deleted in commit {gone.commit.short} on {_short_date(gone.commit.committer_date)} "
            f"by {gone.commit.author}; its last version was {gone.old_path}. A registered experiment should be "
            "withdrawn (status: withdrawn), not deleted, so its record stays"))
    if shallow and history.revisions:
        first = history.revisions[0].commit
        history.findings.append(Finding(
            "incomplete-history", "warning", "", None,
            f"the repository is a shallow clone: its history stops at commit {first.short} "
            f"({_short_date(first.committer_date)}), so earlier changes cannot be seen and drift cannot be ruled "
            "out; fetch the full history (git fetch --unshallow) and check again"))
    return history


def _id_change(history: SpecHistory, event: Event, old: Snapshot | None, new: Snapshot | None,
               store: SnapshotStore, extra_locked: Sequence[str], started: date | None) -> bool:
    """Add an ``id-changed`` error when ``event`` changed the file's id together with a locked field
    (after the start); whether it did."""
    other_id, other_blob = event.id_from or event.id_to or ("", "")
    if not other_blob:
        return False
    other = store.get(other_blob)
    before, after = (other, new) if event.id_from else (old, other)
    if other.unreadable or before is None or after is None:
        return False
    changes = [c for c in _changes(before, after, extra_locked, True, free=False) if c.locked and not c.amended]
    if not changes:
        return False
    old_id, new_id = (other_id, history.id) if event.id_from else (history.id, other_id)
    commit = event.commit
    what = "; ".join(f"{c.field} {show_change(c.old, c.new)}" for c in changes[:5])
    history.findings.append(Finding(
        "id-changed", "error", "id", None,
        f"commit {commit.short} on {_short_date(commit.committer_date)} by {commit.author} changed the id in "
        f"{event.new_path or event.old_path} from {old_id!r} to {new_id!r} and, after data collection started "
        f"({started}), locked fields: {what}; a new id does not make a new experiment, so this is a design change "
        "after the start. Restore the id, or keep it and record the change under 'amendments'"))
    return True


def _unreadable_finding(snap: Snapshot, event: Event) -> Finding:
    path = event.new_path or event.old_path
    return Finding(
        "history-unreadable", "error", "", None,
        f"the version of {path} in commit {event.commit.short} ({_short_date(event.commit.committer_date)}), blob "
        f"{snap.blob[:10]}, cannot be read: {snap.unreadable}; it could not be compared with the versions around "
        "it, so drift cannot be ruled out. Run 'git fsck' and restore the missing objects from another clone")


def _changes(base: Snapshot, new: Snapshot, extra_locked: Sequence[str], after: bool,
             free: bool = True, others: Sequence[Snapshot] = ()) -> list[FieldChange]:
    """The fields ``new`` changed from ``base``; with ``others`` (a merge's later parents), only the
    fields whose new value differs from every parent's, an amendment counting when no parent holds it."""
    if base.raw is not None and base.raw == new.raw:
        return []
    if any(other.raw is not None and other.raw == new.raw for other in others):
        return []  # the merge took one parent's version whole
    if not free and not others and _same_locked_input(base, new, extra_locked) and \
            (base.spec is None) == (new.spec is None):
        return []  # the locked fields read alike (comments, layout, free fields aside): nothing locked changed
    if free:
        locked_old, full_old = base.views(extra_locked)
        locked_new, full_new = new.views(extra_locked)
    else:
        locked_old, locked_new = base.locked(extra_locked), new.locked(extra_locked)
        full_old = full_new = {}
    before_keys = {json.dumps(a, sort_keys=True, default=str) for a in base.amendments()}
    for other in others:
        before_keys |= {json.dumps(a, sort_keys=True, default=str) for a in other.amendments()}
    added = [a for a in new.amendments() if json.dumps(a, sort_keys=True, default=str) not in before_keys]
    other_views = [other.views(extra_locked) for other in others]

    def from_a_parent(path: str, new_value: Any, which: int) -> bool:
        loc = dotted_loc(path)
        return any(not diff(_get(view[which], loc), new_value) for view in other_views)

    out: list[FieldChange] = []
    locked_fields: list[str] = []
    for path, old_value, new_value in diff(locked_old, locked_new):
        if path == "id":
            continue  # identity: a changed id is a new spec
        if from_a_parent(path, new_value, 0):
            continue
        amendment = _covering(added, path)
        out.append(FieldChange(path, old_value, new_value, True, after, amendment))
        locked_fields.append(path)
    for path, old_value, new_value in diff(full_old, full_new):
        if any(path == p or covers(p, path) or covers(path, p) for p in locked_fields):
            continue
        if _get(locked_new, dotted_loc(path)) is not MISSING or _get(locked_old, dotted_loc(path)) is not MISSING:
            continue
        if from_a_parent(path, new_value, 1):
            continue
        out.append(FieldChange(path, old_value, new_value, False, after, None))
    return out


def _same_locked_input(base: Snapshot, new: Snapshot, extra_locked: Sequence[str]) -> bool:
    """Whether both versions write the same locked values, compared as canonical JSON of the parsed
    text before any validation (key order, layout, comments and number spelling aside).

    The spec model validates each locked field from its own text only, so equal text means equal
    validated values for two valid versions; validation and the locked views are then not needed.
    """
    old, new_data = base.data, new.data
    if not isinstance(old, dict) or not isinstance(new_data, dict):
        return False

    locs = [dotted_loc(path) for path in extra_locked]
    locs = [loc[: next((i for i, part in enumerate(loc) if isinstance(part, int)), len(loc))] for loc in locs]

    top_locked = _top_locked()

    def canonical(data: dict[str, Any]) -> str:  # an index in a registry's locked field locks the whole list
        top = {key: _plain(value) for key, value in data.items() if key in top_locked}
        extra = [[] if (value := _get(data, loc)) is MISSING else [_plain(value)] for loc in locs]
        return json.dumps([top, extra], sort_keys=True, ensure_ascii=False, default=str)

    return canonical(old) == canonical(new_data)


def _covering(added: list[dict[str, Any]], path: str) -> dict[str, Any] | None:
    for amendment in added:
        fields = amendment.get("fields")
        if isinstance(fields, list) and any(isinstance(f, str) and covers(f, path) for f in fields):
            return amendment
    return None


def _added_amendments(base: Snapshot, new: Snapshot, others: Sequence[Snapshot]) -> list[dict[str, Any]]:
    """The amendment entries ``new`` has that ``base`` (and a merge's other parents) lack."""
    before = {json.dumps(a, sort_keys=True, default=str) for snap in (base, *others) for a in snap.amendments()}
    return [a for a in new.amendments() if json.dumps(a, sort_keys=True, default=str) not in before]


def _names_commit(amendment: dict[str, Any], commit: Commit) -> bool:
    """Whether an amendment's ``discloses`` names ``commit``: a prefix of its id (7+ hex digits) or its date."""
    named = str(amendment.get("discloses") or "").strip().lower()
    if len(named) >= 7 and all(ch in "0123456789abcdef" for ch in named):
        return commit.sha.startswith(named)
    return bool(named) and named == commit_day(commit.committer_date).isoformat()


def _disclose(history: SpecHistory, drifts: dict[tuple[int, str], Finding],
              later: Sequence[tuple[int, Commit, list[dict[str, Any]]]]) -> None:
    """Turn each drift that a later commit's amendment discloses into a ``disclosed-deviation``."""
    for (index, path), finding in drifts.items():
        revision = history.revisions[index]
        match = next(((commit, a) for i, commit, added in later if i > index for a in added
                      if _names_commit(a, revision.commit) and isinstance(a.get("fields"), list)
                      and any(isinstance(f, str) and covers(f, path) for f in a["fields"])), None)
        if match is None:
            continue
        commit, amendment = match
        change = next(c for c in revision.changes if c.field == path)
        history.revisions[index] = revision = dataclasses.replace(revision, changes=tuple(
            dataclasses.replace(c, disclosure=amendment) if c is change else c for c in revision.changes))
        delay = (commit_day(commit.committer_date) - commit_day(revision.commit.committer_date)).days
        reason = str(amendment.get("reason", "")).strip()
        message = (f"{path} changed {show_change(change.old, change.new)} in commit {revision.commit.short} on "
                   f"{_short_date(revision.commit.committer_date)} by {revision.commit.author}, after data collection "
                   f"started ({history.started_on}), without an amendment in that commit; disclosed {delay} day(s) "
                   f"later by the amendment of {amendment.get('date')} added in commit {commit.short}: "
                   f"{show(reason, 100)}. The registration holds only for the fields that did not change")
        history.findings = [Finding("disclosed-deviation", "warning", path, None, message) if f is finding else f
                            for f in history.findings]


def _drift_finding(change: FieldChange, commit: Commit, started: date | None, *, merge: bool = False) -> Finding:
    where = (f"merge commit {commit.short} (the merged value is in none of its parents)" if merge
             else f"commit {commit.short}")
    what = (f"{change.field} changed {show_change(change.old, change.new)} in {where} on "
            f"{_short_date(commit.committer_date)} by {commit.author}, after data collection started ({started})")
    if change.amendment is not None:
        reason = str(change.amendment.get("reason", "")).strip()
        return Finding("amended", "info", change.field, None,
                       f"{what}; covered by the amendment of {change.amendment.get('date')} added in the same "
                       f"commit: {show(reason, 100)}")
    return Finding("drift", "error", change.field, None,
                   f"{what}, with no amendment entry covering it added in that commit; a locked field may change "
                   "after the start only together with an entry under 'amendments' listing it in 'fields'. To "
                   f"disclose it now, commit an amendment listing {change.field} in 'fields' with "
                   f"'discloses: {commit.short}' (a disclosed deviation)")


def _date_order(commit: Commit, commit_dates: Mapping[str, datetime]) -> list[Finding]:
    out = []
    for parent in commit.parents:
        parent_date = commit_dates.get(parent)
        if parent_date is not None and commit.committer_date < parent_date:
            out.append(Finding(
                "date-order", "warning", "", None,
                f"commit {commit.short} is dated {_short_date(commit.committer_date)}, before its parent "
                f"{parent[:10]} ({_short_date(parent_date)}); its date was set by hand or by a wrong clock, so the "
                "history's dates are not reliable evidence of when this change was made"))
    return out


def uncommitted_findings(head: Snapshot | None, work: Snapshot, today: date, *,
                         extra_locked: Sequence[str] = (), started_on: date | None = None) -> list[Finding]:
    """Locked fields whose working-tree value differs from HEAD's (``head`` ``None``: not in HEAD,
    reported as ``untracked``; a HEAD version git cannot read gives nothing here, the history's
    ``history-unreadable`` finding says it).

    An error once data collection has started (unless an amendment added in the working tree
    covers the change: then a warning to commit them together), a warning before.
    """
    if head is not None and head.unreadable:
        return []
    start = started_on or (head.start if head is not None else None) or work.start
    after = start is not None and today >= start
    if head is None:
        if after:
            return [Finding("untracked", "error", "", None,
                            f"this spec is not committed, and data collection started on {start}: the registry "
                            "has no record of the design before the start; commit it and explain the delay")]
        return [Finding("untracked", "warning", "", None,
                        "this spec is not committed yet; commit it before data collection starts"
                        + (f" ({start})" if start else ""))]
    out = []
    for change in _changes(head, work, extra_locked, after, free=False):
        if not change.locked:
            continue
        what = f"{change.field} changed {show_change(change.old, change.new)} in the working tree (not committed)"
        if not after:
            out.append(Finding("uncommitted", "warning", change.field, None,
                               f"{what}; commit it before data collection starts ({start})"))
        elif change.amended:
            out.append(Finding("uncommitted", "warning", change.field, None,
                               f"{what}, after data collection started ({start}); an amendment in the working tree "
                               "covers it: commit the change and the amendment together"))
        else:
            out.append(Finding("uncommitted", "error", change.field, None,
                               f"{what}, after data collection started ({start}), with no new amendment entry "
                               "covering it; add one under 'amendments' or undo the edit"))
    return out
