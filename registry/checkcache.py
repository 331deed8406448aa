"""Warm ``check``: the results of earlier runs, reused while nothing they depend on has changed.

Two kinds of entry, both JSON files in the folder :func:`registry.diskcache.default_cache_dir`
names (``<git dir>/prespec/check-cache`` when the registry is in a git repository, else the user
cache folder; never the working tree), written and read with the machinery of the size cache
(:class:`registry.diskcache.SizeCache`: temporary file and rename, a damaged entry is absent):

- one per spec file: what ``check`` found in the file itself (validation, the recomputed size and
  every per-file finding), keyed by the git blob id of its bytes, the prespec version and the
  installed code (:func:`code_fingerprint`: a changed module between releases, say a development
  install, makes every entry stale), the file's
  path and display name, the registry root and the settings that apply to it (``.prespec.yaml``,
  ``--oversize-margin``). An entry also records the pilot file a spec reads, by SHA-256 of its
  content: a changed, moved or removed pilot file makes the entry stale;
- one per repository: the history findings of every spec in it, the deleted and registered-but-
  missing specs and the repository's status, keyed by HEAD (commit and branch), every tag under
  ``refs/tags/prespec`` and ``refs/replace`` (name and object id), the shallow, graft and config
  files of the repository, the day (uncommitted edits after a start depend on it), the folders
  checked and each member's path, blob id, id and locked fields. A new commit, tag or edit
  recomputes the history; a result with a commit dated in the future is never kept (that
  finding changes with the clock).

Registry-wide rules that are cheap (unique ids) are applied on every run, cached or not.
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
import stat
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path
from typing import Any, Callable, Sequence

from .checks import Finding, SpecReport
from .discovery import SpecFile
from .diskcache import SizeCache, cache_key, default_cache_dir
from .problems import InvalidSpec
from .yamlio import read_spec_bytes

__all__ = ["CheckCache", "CachedReport", "blob_id", "code_fingerprint", "FOLDER"]

#: The cache folder's name under ``<git dir>/prespec/`` or the user cache folder.
FOLDER = "check-cache"
#: Bumped whenever what an entry holds changes shape.
_FORMAT = 1
_ROW_EXCLUDED = ("verdict", "findings", "history")


def blob_id(raw: bytes) -> str:
    """The git object id of a blob holding ``raw`` (what ``git hash-object`` prints for the file).

    >>> blob_id(b"")  # git's empty blob
    'e69de29bb2d1d6434b8b29ae775ad8c2e48c5391'
    """
    return hashlib.sha1(b"blob %d\0" % len(raw) + raw, usedforsecurity=False).hexdigest()


@functools.lru_cache(maxsize=None)
def code_fingerprint(package: Path = Path(__file__).resolve().parent) -> str:
    """SHA-256 of the relative path, size and modification time of every file of the installed
    package (``__pycache__`` left out): what ``check`` computes depends on the code as much as on
    the spec, and the version number alone does not change while a development install does.
    Statting the package's files costs well under a millisecond."""
    digest = hashlib.sha256()
    for path in sorted(package.rglob("*")):
        relative = path.relative_to(package)
        if "__pycache__" in relative.parts or not path.is_file():
            continue
        facts = path.stat()
        digest.update(f"{relative.as_posix()}\0{facts.st_size}\0{facts.st_mtime_ns}\n".encode("utf-8", "replace"))
    return digest.hexdigest()


class _StoredHistory:
    """A spec's history as a cached run shows it: the summary ``check --json`` prints."""

    def __init__(self, summary_json: str) -> None:
        self._summary = summary_json

    def summary(self) -> dict[str, Any]:
        return json.loads(self._summary)


@dataclass
class CachedReport(SpecReport):
    """A :class:`SpecReport` rebuilt from a cache entry: the numbers of the stored run, the
    findings, and the file's bytes, so the document and spec can be loaded again when history
    needs them (:meth:`ensure_document`)."""

    row: dict[str, Any] = field(default_factory=dict)
    stored_valid: bool = False
    raw: bytes | None = None

    @property
    def valid(self) -> bool:
        return self.spec is not None or self.stored_valid

    @property
    def test(self) -> str | None:
        return self.row.get("test")

    @property
    def target_power(self) -> float | None:
        return self.row.get("target_power")

    @property
    def planned_per_group(self) -> int | None:
        return self.row.get("planned_per_group")

    @property
    def required_per_group(self) -> int | None:
        return self.row.get("required_per_group")

    @property
    def analysable_per_group(self) -> int | None:
        return self.row.get("analysable_per_group")

    @property
    def achieved_power(self) -> float | None:
        return self.row.get("achieved_power")

    def ensure_document(self) -> None:
        if self.document is not None or self.raw is None:
            return
        from .validation import validate_document
        from .yamlio import load_bytes_fast

        try:
            self.document = load_bytes_fast(self.raw, self.path)
            if self.stored_valid:
                self.spec = validate_document(self.document)
        except InvalidSpec:  # the stored run loaded these bytes; a failure here leaves the stored findings
            self.document = self.spec = None

    def add(self, kind: str, severity: Any, field: str, message: str, loc: tuple[Any, ...] = ()) -> None:
        if loc:
            self.ensure_document()
        super().add(kind, severity, field, message, loc)

    def to_dict(self) -> dict[str, Any]:
        out = dict(self.row)
        out["verdict"] = self.verdict
        out["findings"] = [f.to_dict() for f in self.findings]
        if self.history is not None:
            out["history"] = self.history.summary()
        return out


def _finding(data: dict[str, Any]) -> Finding:
    return Finding(str(data["kind"]), data["severity"], str(data["field"]), data["line"], str(data["message"]),
                   data["column"])


def _findings(items: Any) -> list[Finding]:
    if not isinstance(items, list):
        raise ValueError("findings are not a list")
    return [_finding(item) for item in items]


def _report_entry(report: SpecReport) -> dict[str, Any]:
    """What a cache entry keeps of ``report`` (rows as JSON text, so key order survives)."""
    row = {key: value for key, value in report.to_dict().items() if key not in _ROW_EXCLUDED}
    lines: list[str] = []
    if any(f.kind == "invalid" and f.line for f in report.findings):
        lines = report.document.source_lines if report.document is not None else report.source_lines
    return {"row": json.dumps(row, ensure_ascii=False), "findings": [f.to_dict() for f in report.findings],
            "valid": report.valid, "id": report.id, "source_lines": lines,
            "history": json.dumps(report.history.summary()) if report.history is not None else None}


def _report_from(entry: dict[str, Any], raw: bytes | None) -> CachedReport:
    row = json.loads(entry["row"])
    if not isinstance(row, dict) or not isinstance(row.get("path"), str):
        raise ValueError("not a stored report")
    lines = entry["source_lines"]
    if not isinstance(lines, list) or not all(isinstance(line, str) for line in lines):
        raise ValueError("source lines are not text")
    spec_id = entry["id"]
    if spec_id is not None and not isinstance(spec_id, str):
        raise ValueError("id is not text")
    report = CachedReport(path=row["path"], id=spec_id, findings=_findings(entry["findings"]), source_lines=lines,
                          row=row, stored_valid=bool(entry["valid"]), raw=raw)
    if entry.get("history") is not None:
        json.loads(entry["history"])
        report.history = _StoredHistory(entry["history"])
    return report


def _fingerprint(path: Path) -> str:
    """Where ``path`` leads and the SHA-256 of what it holds, or why it cannot be read (read the way,
    and with the per-process memory, that the pilot check reads it: a FIFO is never opened for reading)."""
    from .pilot import InvalidPilot, _read_bytes

    real = os.path.realpath(path)
    try:
        kind = stat.S_IFMT(os.lstat(path).st_mode)
        return f"file:{kind}:{real}:{hashlib.sha256(_read_bytes(path, str(path))).hexdigest()}"
    except OSError as error:
        return f"absent:{error.errno}:{real}"
    except InvalidPilot as error:
        return f"refused:{type(error).__name__}:{real}:{error}"


def _pilot_paths(spec_file: SpecFile, report: SpecReport) -> list[Path]:
    pilot = report.spec.design.pilot if report.spec is not None else None
    return [spec_file.path.parent / pilot.file] if pilot is not None else []


class CheckCache:
    """Per-file and per-repository ``check`` results (see the module docstring), one store per
    cache folder; ``folder`` fixes the folder for every registry (tests), else it follows each
    registry root."""

    def __init__(self, folder: Path | None = None) -> None:
        self._fixed = folder
        self._stores: dict[Path, SizeCache] = {}
        self._blobs: dict[Path, str] = {}
        self._pilot_roots: dict[Path, str] = {}
        self._configs: dict[int, tuple[Any, Any]] = {}
        self._marks: dict[Path, str] = {}

    def _mark(self, path: Path) -> str:
        if path not in self._marks:
            self._marks[path] = _fingerprint(path)
        return self._marks[path]

    def _store(self, start: Path) -> SizeCache:
        if start not in self._stores:
            self._stores[start] = SizeCache(self._fixed or default_cache_dir(start, FOLDER), durable=False)
        return self._stores[start]

    def _pilot_root(self, root: Path) -> str:
        if root not in self._pilot_roots:
            from .pilot import pilot_root

            self._pilot_roots[root] = str(pilot_root(root))
        return self._pilot_roots[root]

    def _settings(self, config: Any) -> Any:
        """The settings of ``config`` as JSON data (configs are shared objects: dumped once each)."""
        found = self._configs.get(id(config))
        if found is None or found[0] is not config:
            found = self._configs[id(config)] = (config, {"config": config.model_dump(mode="json"),
                                                         "folder": str(getattr(config, "_folder", None))})
        return found[1]

    def _file_key(self, spec_file: SpecFile, config: Any, blob: str) -> str:
        return cache_key("check-file", {
            "format": _FORMAT, "code": code_fingerprint(), "blob": blob, "path": str(spec_file.path.absolute()),
            "display": spec_file.display,
            "root": str(spec_file.root.absolute()), "pilot_root": self._pilot_root(spec_file.root),
            "settings": self._settings(config),
        })

    # -- per file ----------------------------------------------------------------------------------
    def lookup(self, spec_file: SpecFile, config: Any) -> tuple[SpecReport | None, bytes | None]:
        """(the stored report, None) when the file is unchanged, else (None, the file's bytes to check
        and :meth:`store`); (None, None) for a file that cannot be read (checked the usual way)."""
        if spec_file.refusal:
            return None, None
        try:
            raw = read_spec_bytes(spec_file.path, spec_file.display)
        except InvalidSpec:
            return None, None
        blob = self._blobs[spec_file.path] = blob_id(raw)
        entry = self._store(spec_file.root).get(self._file_key(spec_file, config, blob))
        if entry is None:
            return None, raw
        try:
            deps = entry["deps"]
            if not isinstance(deps, list) or any(self._mark(Path(path)) != mark for path, mark in deps):
                return None, raw
            return _report_from(entry, raw), None
        except (KeyError, TypeError, ValueError):  # damaged: checked again and stored anew
            return None, raw

    def store(self, spec_file: SpecFile, config: Any, raw: bytes, report: SpecReport) -> None:
        """Keep what :func:`registry.checks.check_file` found in ``raw``."""
        if isinstance(report, CachedReport):
            return
        entry = _report_entry(report)
        entry["deps"] = [[str(path), self._mark(path)] for path in _pilot_paths(spec_file, report)]
        self._store(spec_file.root).put(self._file_key(spec_file, config, blob_id(raw)), entry)

    # -- per repository ----------------------------------------------------------------------------
    def history_key(self, repo: Any, members: Sequence[tuple[SpecReport, SpecFile]], scopes: Sequence[Path],
                    locked_for: Callable[[SpecFile], list[str]], today: date) -> str | None:
        """The key of a repository's history results, or None when the state cannot be read
        (nothing is then cached)."""
        from .git import GitProblem

        try:
            state = repo.state()
        except GitProblem:
            return None
        rows = []
        for report, spec_file in members:
            blob = f"refused: {spec_file.refusal}" if spec_file.refusal else self._blobs.get(spec_file.path)
            if blob is None:  # a file that could not be read: its history is recomputed every run
                return None
            rows.append([report.path, str(spec_file.path.absolute()), blob, report.id, report.valid,
                         list(locked_for(spec_file))])
        return cache_key("check-history", {"format": _FORMAT, "code": code_fingerprint(), "root": str(repo.root),
                                           "state": state,
                                           "today": today.isoformat(), "scopes": [str(s) for s in scopes],
                                           "members": rows})

    def history_get(self, repo: Any, key: str, count: int) -> dict[str, Any] | None:
        """The stored history results for ``key`` (``count`` members), rebuilt, or None."""
        entry = self._store(repo.root).get(key)
        if entry is None:
            return None
        try:
            members = entry["members"]
            if not isinstance(members, list) or len(members) != count:
                return None
            out = {"members": [(_findings(found), None if summary is None else _StoredHistory(summary))
                               for found, summary in members],
                   "repositories": json.loads(entry["repositories"]), "problems": [str(p) for p in entry["problems"]],
                   "extra": [_report_from(item, None) for item in entry["extra"]]}
            for found, summary in members:
                if summary is not None:
                    json.loads(summary)
            if not isinstance(out["repositories"], list):
                return None
            return out
        except (KeyError, TypeError, ValueError):
            return None

    def history_put(self, repo: Any, key: str, members: list[tuple[list[Finding], Any]],
                    repositories: list[dict[str, Any]], problems: list[str], extra: list[SpecReport]) -> None:
        kinds = {f.kind for found, _ in members for f in found} | {f.kind for r in extra for f in r.findings}
        if "future-date" in kinds:
            return  # a commit dated later than now stops being one: recompute every run
        self._store(repo.root).put(key, {
            "members": [[[f.to_dict() for f in found], json.dumps(history.summary()) if history is not None else None]
                        for found, history in members],
            "repositories": json.dumps(repositories), "problems": problems, "extra": [_report_entry(r) for r in extra]})
