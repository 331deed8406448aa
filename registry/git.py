"""Everything prespec asks of git, in one place: the only module that runs git.

All calls go through gitpython with argument lists (never a shell), with ``--``
before paths. The history of every spec is read in one ``git log --raw`` pass over
the commits reachable from HEAD; blob contents come through gitpython's persistent
``git cat-file --batch`` reader, so no git process is started per file or per version.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone, tzinfo
from pathlib import Path

# without git on PATH gitpython would refuse to import; prespec then says so only where git is needed
os.environ.setdefault("GIT_PYTHON_REFRESH", "quiet")

import git  # noqa: E402
from git.exc import GitCommandError, InvalidGitRepositoryError, NoSuchPathError  # noqa: E402

from .discovery import UsageError  # noqa: E402

__all__ = [
    "Commit",
    "FileChange",
    "LogEntry",
    "TagInfo",
    "Repository",
    "GitProblem",
    "GitMissing",
    "find_repository",
    "init_repository",
    "NULL_SHA",
    "odd_offset",
]

NULL_SHA = "0" * 40
_MARK = "\x1e"
#: One record per commit: the marker, then NUL-separated fields (names may hold any other byte).
_FORMAT = "%x1e%H%x00%P%x00%an%x00%ae%x00%aI%x00%cn%x00%ce%x00%cI%x00"


#: Settings every git prespec runs is given, overriding what a repository's own config says: no
#: signature checks while reading history (``log.showSignature`` would run the repository's
#: ``gpg.program`` on every signed commit), no file-system monitor program, and the standard
#: signing programs wherever a signature is checked.
_PINNED_CONFIG = ("-c", "log.showSignature=false", "-c", "core.fsmonitor=false", "-c", "gpg.program=gpg",
                  "-c", "gpg.ssh.program=ssh-keygen", "-c", "gpg.x509.program=gpgsm")


class GitProblem(RuntimeError):
    """git could not do what prespec asked; the message says what and why."""


class GitMissing(UsageError):
    """No ``git`` program to run: the commands that read history stop with one line (exit 2)."""


def _require_git() -> None:
    import shutil

    program = git.Git.GIT_PYTHON_GIT_EXECUTABLE or "git"
    if shutil.which(program) is None:
        raise GitMissing(f"git is not installed or not on PATH ({program!r} not found): prespec needs it to read "
                         "or write a registry's git history; install git ('prespec check --no-history' checks the "
                         "specs alone)")


@dataclass(frozen=True)
class Commit:
    """One commit's identity and dates (timezone-aware, in the offsets git recorded)."""

    sha: str
    parents: tuple[str, ...]
    author_name: str
    author_email: str
    author_date: datetime
    committer_name: str
    committer_email: str
    committer_date: datetime

    @property
    def short(self) -> str:
        return self.sha[:10]

    @property
    def author(self) -> str:
        return f"{self.author_name} <{self.author_email}>"

    @property
    def committer(self) -> str:
        return f"{self.committer_name} <{self.committer_email}>"

    def to_dict(self) -> dict[str, object]:
        return {"commit": self.sha, "author": self.author, "author_date": self.author_date.isoformat(),
                "committer": self.committer, "committer_date": self.committer_date.isoformat()}


@dataclass(frozen=True)
class FileChange:
    """One file's change in one commit against its first parent (``None``: absent on that side).

    For a merge commit, a file is listed only when its merged content differs from every
    parent's (git's combined diff); ``other_blobs`` then holds the file's blob in the second
    and later parents (``None``: absent there).
    """

    old_path: str | None
    new_path: str | None
    old_blob: str | None
    new_blob: str | None
    other_blobs: tuple[str | None, ...] = ()


@dataclass(frozen=True)
class LogEntry:
    commit: Commit
    changes: tuple[FileChange, ...]


@dataclass(frozen=True)
class TagInfo:
    """An annotated (or lightweight) tag and what it points at."""

    name: str
    commit: str
    annotated: bool
    message: str
    tagger: str | None
    tagged_date: datetime | None
    reachable: bool


def _date(text: str) -> datetime:
    """A date git printed in ISO form; an offset Python cannot hold (git accepts up to +-99:59, Python
    less than 24 hours) is read as the same moment in UTC and marked by :func:`odd_offset`.

    >>> _date("2020-01-14T13:59:00+99:59").isoformat()
    '2020-01-10T10:00:00+00:00'
    """
    text = text.strip().replace("Z", "+00:00")
    try:
        return datetime.fromisoformat(text)
    except ValueError:
        pass
    match = _ISO_OFFSET.fullmatch(text)
    try:
        if match is None:
            raise ValueError(text)
        local = datetime.fromisoformat(match.group(1))
    except ValueError:
        raise GitProblem(f"git recorded a date prespec cannot read: {text!r}") from None
    sign = -1 if match.group(2) == "-" else 1
    offset = timedelta(hours=int(match.group(3)), minutes=int(match.group(4)))
    return (local - sign * offset).replace(tzinfo=_ODD_UTC)


class _OddUTC(tzinfo):
    """UTC, for a moment git recorded with an offset of 24 hours or more (an impossible time zone)."""

    def utcoffset(self, dt: datetime | None) -> timedelta:
        return timedelta(0)

    def dst(self, dt: datetime | None) -> timedelta:
        return timedelta(0)

    def tzname(self, dt: datetime | None) -> str:
        return "UTC"

    def __repr__(self) -> str:
        return "odd offset, read as UTC"

    def __reduce__(self) -> str:  # told apart by identity (odd_offset), so unpickled as the one instance
        return "_ODD_UTC"


_ODD_UTC = _OddUTC()
_ISO_OFFSET = re.compile(r"(\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d)([+-])(\d\d):?(\d\d)")


def odd_offset(moment: datetime) -> bool:
    """Whether git recorded ``moment`` with a time-zone offset no real zone has (24 hours or more)."""
    return moment.tzinfo is _ODD_UTC


def _parse_log(raw: bytes, suffixes: tuple[str, ...]) -> list[LogEntry]:
    tokens = raw.split(b"\0")
    entries: list[LogEntry] = []
    i, count = 0, len(tokens)
    commit: Commit | None = None
    changes: list[FileChange] = []
    mark = _MARK.encode()
    while i < count:
        token = tokens[i]
        if token[:1] == b"\n":
            token = token.lstrip(b"\n")
        if token[:1] == mark:
            if commit is not None:
                entries.append(LogEntry(commit, tuple(changes)))
            fields = [token[1:], *tokens[i + 1:i + 8]]
            if len(fields) < 8:
                raise GitProblem("git log ended in the middle of a commit record")
            sha, parents, an, ae, ad, cn, ce, cd = (f.decode("utf-8", "replace") for f in fields)
            commit = Commit(sha, tuple(parents.split()), an, ae, _date(ad), cn, ce, _date(cd))
            changes = []
            i += 8
            continue
        if token.startswith(b":") and commit is not None:
            meta = token.decode("ascii", "replace").split()
            path = tokens[i + 1].decode("utf-8", "surrogateescape") if i + 1 < count else ""
            i += 2
            parents = len(token) - len(token.lstrip(b":"))
            if len(meta) < 2 * parents + 3 or not path.endswith(suffixes):
                continue
            modes = [meta[0][parents:], *meta[1:parents + 1]]
            blobs = meta[parents + 1:2 * parents + 2]
            if any(mode.startswith("12") for mode in modes):
                continue  # symbolic links are not spec files
            present = [blob if blob != NULL_SHA and not mode.startswith("16") else None
                       for mode, blob in zip(modes, blobs)]
            old_blob, new_blob = present[0], present[-1]
            changes.append(FileChange(path if old_blob else None, path if new_blob else None, old_blob, new_blob,
                                      tuple(present[1:-1])))
            continue
        i += 1
    if commit is not None:
        entries.append(LogEntry(commit, tuple(changes)))
    return entries


class Repository:
    """A git working tree prespec reads (and, for ``register`` and ``demo``, writes)."""

    def __init__(self, repo: git.Repo) -> None:
        self._repo = repo
        if repo.working_tree_dir is None:
            raise GitProblem(f"{repo.git_dir} is a bare repository; prespec needs a working tree")
        self.root = Path(repo.working_tree_dir).resolve()

    # -- reading ---------------------------------------------------------------------------------
    def relpath(self, path: Path) -> str | None:
        """``path`` relative to the repository root, in git's slash form; ``None`` when outside."""
        try:
            return Path(os.path.abspath(path)).resolve().relative_to(self.root).as_posix()
        except ValueError:
            return None

    def _run(self, *args: str, **kwargs: object) -> str:
        try:
            return self._repo.git.execute(["git", *_PINNED_CONFIG, *args], **kwargs)  # type: ignore[call-overload]
        except GitCommandError as error:
            detail = _gist((error.stderr or "").strip().replace("stderr: ", "").strip("'\n "))
            raise GitProblem(f"git {args[0]} failed: {detail or error}") from None

    def head(self) -> str | None:
        """The commit HEAD points at, or ``None`` in a repository without commits."""
        try:
            return self._repo.head.commit.hexsha
        except ValueError as error:
            try:  # an unborn branch names no commit; a missing or corrupt one is a fault
                sha = self._repo.git.execute(["git", *_PINNED_CONFIG, "rev-parse", "-q", "--verify", "HEAD"]).strip()
            except GitCommandError:
                return None
            raise GitProblem(f"HEAD names commit {sha[:10]}, which git cannot read "
                             f"({_gist(str(error))})") from None

    def detached(self) -> bool:
        """Whether HEAD names a commit directly rather than a branch (a detached HEAD)."""
        return self._repo.head.is_detached

    def state(self) -> str:
        """A digest of everything the history prespec reads depends on: HEAD (commit and branch),
        the tags under ``refs/tags/prespec`` and the ``refs/replace`` refs (names and object ids),
        and the repository's shallow, graft and config files. Equal digests, equal history."""
        import hashlib

        head = self._run("rev-parse", "HEAD", "--symbolic-full-name", "HEAD")  # GitProblem before a first commit
        refs = self._run("for-each-ref", "--format=%(refname)%00%(objectname)", "refs/tags/prespec", "refs/replace")
        digest = hashlib.sha256(f"{head}\0{refs}\0".encode("utf-8", "surrogateescape"))
        git_dir, common = Path(self._repo.git_dir), Path(self._repo.common_dir)
        for path in (common / "shallow", common / "info" / "grafts", common / "config", git_dir / "config.worktree"):
            try:
                digest.update(path.read_bytes())
            except OSError:
                digest.update(b"-")
            digest.update(b"\0")
        return digest.hexdigest()

    def is_shallow(self) -> bool:
        return self._run("rev-parse", "--is-shallow-repository").strip() == "true"

    def log(self, suffixes: tuple[str, ...] = (".yaml", ".yml"), rev: str = "HEAD") -> list[LogEntry]:
        """Every commit reachable from ``rev``, oldest first (parents before children), with the
        files ending in ``suffixes`` each changed against its first parent (for a merge: the files
        whose merged content differs from every parent, ``-c``). One git process."""
        if self.head() is None:
            return []
        raw = self._run("log", "--topo-order", "--reverse", "--no-color", "--raw", "-c", "--no-abbrev", "-z",
                        "--no-renames", "--no-ext-diff", "--no-textconv", f"--format={_FORMAT}", rev, "--",
                        stdout_as_string=False, strip_newline_in_stdout=False)
        return _parse_log(raw, suffixes)  # type: ignore[arg-type]

    def read_blob(self, sha: str) -> bytes:
        """One blob's bytes; :class:`GitProblem` with git's own words when the object is missing or corrupt."""
        return self._run("cat-file", "blob", sha, stdout_as_string=False,  # type: ignore[return-value]
                         strip_newline_in_stdout=False)

    def read_blobs(self, shas: list[str]) -> dict[str, bytes]:
        """Many blobs at once through one ``git cat-file --batch`` (a missing or corrupt one is left out:
        :meth:`read_blob` then says what git finds wrong with it)."""
        import tempfile

        if not shas:
            return {}
        with tempfile.TemporaryFile() as handle:
            handle.write("".join(f"{sha}\n" for sha in shas).encode("ascii"))
            handle.seek(0)
            raw = self._run("cat-file", "--batch", istream=handle, stdout_as_string=False,
                            strip_newline_in_stdout=False)
        out: dict[str, bytes] = {}
        view = memoryview(raw)  # type: ignore[arg-type]
        pos = 0
        while pos < len(raw):  # type: ignore[arg-type]
            end = raw.index(b"\n", pos)  # type: ignore[union-attr]
            header = bytes(view[pos:end]).split()
            pos = end + 1
            if len(header) < 3:  # "<sha> missing"
                continue
            size = int(header[2])
            out[header[0].decode()] = bytes(view[pos:pos + size])
            pos += size + 1
        return out

    def tree_files(self, rev: str = "HEAD", suffixes: tuple[str, ...] = (".yaml", ".yml")) -> dict[str, str]:
        """Path -> blob id of the regular files ending in ``suffixes`` in ``rev``'s tree."""
        if self.head() is None:
            return {}
        raw = self._run("ls-tree", "-r", "-z", "--full-tree", rev, stdout_as_string=False)
        out: dict[str, str] = {}
        for record in raw.split(b"\0"):  # type: ignore[union-attr]
            if not record:
                continue
            meta, _, path_bytes = record.partition(b"\t")
            mode, kind, sha = meta.decode().split()
            path = path_bytes.decode("utf-8", "surrogateescape")
            if kind == "blob" and not mode.startswith("12") and path.endswith(suffixes):
                out[path] = sha
        return out

    def blob_at(self, rev: str, path: str) -> bytes | None:
        """The content of ``path`` in ``rev`` (``None`` when it is not there; :class:`GitProblem`
        when git cannot read the commit, its tree or the blob)."""
        listing = self._run("ls-tree", "-z", "--full-tree", rev, "--", path, stdout_as_string=False)
        for record in listing.split(b"\0"):  # type: ignore[union-attr]
            meta, _, found = record.partition(b"\t")
            parts = meta.split()
            if found.decode("utf-8", "surrogateescape") == path and len(parts) == 3 and parts[1] == b"blob":
                return self.read_blob(parts[2].decode())
        return None

    def commit_info(self, rev: str) -> Commit:
        raw = self._run("log", "-1", "--no-color", f"--format={_FORMAT}", rev, "--",
                        stdout_as_string=False, strip_newline_in_stdout=False)
        entries = _parse_log(raw, ())  # type: ignore[arg-type]
        if not entries:
            raise GitProblem(f"no commit {rev!r}")
        return entries[0].commit

    def ancestors(self, rev: str) -> set[str]:
        """Every commit reachable from ``rev`` (itself included)."""
        return set(self._run("rev-list", rev, "--").split())

    def dirty_paths(self) -> list[str]:
        """Tracked files with uncommitted changes (staged or not), repository-relative."""
        if self.head() is None:
            return []
        raw = self._run("status", "--porcelain=v1", "-z", "--untracked-files=no", stdout_as_string=False)
        out = []
        for record in raw.split(b"\0"):  # type: ignore[union-attr]
            if len(record) > 3 and record[:2] != b"  ":
                out.append(record[3:].decode("utf-8", "surrogateescape"))
        return out

    def head_blobs(self, folder: str) -> dict[str, str] | None:
        """The files directly in ``folder`` (a path from the repository root, ``""`` for the root) in
        HEAD's tree, by name, with their blob ids: one ``git ls-tree`` of ``HEAD:<folder>``, which names
        the folder literally (no pathspec patterns) and lists it alone, never the whole tree.
        ``None`` in a repository without commits; :class:`GitProblem` when HEAD has no such folder
        (or git fails). What :meth:`matches_head` asks for one file, for a folder's files at once."""
        if self.head() is None:
            return None
        listing = self._run("ls-tree", "-z", f"HEAD:{folder}" if folder else "HEAD", stdout_as_string=False)
        blobs = {}
        for record in listing.split(b"\0"):  # type: ignore[union-attr]
            meta, _, found = record.partition(b"\t")
            parts = meta.split()
            if found and len(parts) == 3 and parts[1] == b"blob":
                blobs[found.decode("utf-8", "surrogateescape")] = parts[2].decode()
        return blobs

    def matches_head(self, relpath: str, path: Path) -> bool:
        """Whether the file at ``path`` holds exactly the bytes of ``relpath``'s blob in HEAD.

        Compares blob ids (the file's bytes hashed as git hashes a blob) against ``git ls-tree``, so it
        neither consults the index (``assume-unchanged``, ``skip-worktree``) nor rewrites it, and runs
        no program the repository configures (fsmonitor, clean filters, hooks)."""
        import hashlib

        if self.head() is None:
            return False
        listing = self._run("ls-tree", "-z", "--full-tree", "HEAD", "--", relpath, stdout_as_string=False)
        committed = None
        for record in listing.split(b"\0"):  # type: ignore[union-attr]
            meta, _, found = record.partition(b"\t")
            parts = meta.split()
            if found.decode("utf-8", "surrogateescape") == relpath and len(parts) == 3 and parts[1] == b"blob":
                committed = parts[2].decode()
        if committed is None:
            return False
        try:
            raw = Path(path).read_bytes()
        except OSError:
            return False
        return hashlib.sha1(b"blob %d\0" % len(raw) + raw).hexdigest() == committed

    def is_tracked(self, relpath: str) -> bool:
        return bool(self._run("ls-files", "--", relpath).strip())

    def config_value(self, key: str) -> str | None:
        try:
            return self._repo.git.execute(["git", "config", "--get", key]).strip() or None
        except GitCommandError:
            return None

    def signing_configured(self) -> bool:
        """Whether the user's git config asks for signed tags (tag.gpgSign) or names a signing key."""
        sign = (self.config_value("tag.gpgSign") or "").lower()
        return sign in ("true", "yes", "on", "1") or self.config_value("user.signingkey") is not None

    def verify_tag(self, name: str, allowed_signers: Path | None = None) -> tuple[int, str]:
        """``git verify-tag`` of ``name``: its exit status and what git and the signing program said.
        The signing programs are fixed to the standard ones, whatever the repository's config names;
        ``allowed_signers`` is the SSH allowed-signers file to check SSH signatures against."""
        if name.startswith("-"):
            raise GitProblem(f"{name!r} is not a tag name")
        args = ["git", *_PINNED_CONFIG]
        if allowed_signers is not None:
            args += ["-c", f"gpg.ssh.allowedSignersFile={allowed_signers}"]
        try:
            status, out, err = self._repo.git.execute([*args, "verify-tag", name], with_extended_output=True,
                                                      with_exceptions=False)
        except OSError as error:  # the signing program is not installed
            return 127, f"cannot run the signature check: {error}"
        return int(status), "\n".join(part for part in (str(out).strip(), str(err).strip()) if part)

    def tags(self, pattern: str) -> list[TagInfo]:
        """Tags matching the ``refs/tags/`` glob ``pattern``, each marked reachable from HEAD or not.

        Two ``git for-each-ref`` calls and one ``git cat-file --batch`` for all annotated tags, however many
        there are (a registry with thousands of registrations is read in one pass)."""
        fmt = "%(refname:strip=2)%00%(objecttype)%00%(objectname)%00%(*objectname)"
        listing = self._run("for-each-ref", f"--format={fmt}", f"refs/tags/{pattern}")
        reachable: set[str] = set()
        if self.head() is not None:
            reachable = set(self._run("for-each-ref", "--merged", "HEAD", "--format=%(refname:strip=2)",
                                      f"refs/tags/{pattern}").split("\n"))
        rows = [(line.split("\0") + ["", "", ""])[:4] for line in listing.splitlines() if line]
        objects = self.read_blobs(sorted({obj for _, kind, obj, _ in rows if kind == "tag"}))
        out = []
        for name, kind, obj, peeled in rows:
            if kind == "tag":
                if obj not in objects:
                    raise GitProblem(f"git cannot read the tag {name}: its object {obj[:10]} is missing or corrupt")
                target, tagger, tagged, message = _parse_tag(objects[obj], name)
                out.append(TagInfo(name, peeled or target, True, message, tagger, tagged, name in reachable))
            else:
                out.append(TagInfo(name, obj, False, "", None, None, name in reachable))
        return out

    # -- writing ---------------------------------------------------------------------------------
    def create_tag(self, name: str, rev: str, message: str, *, sign: bool,
                   env: dict[str, str] | None = None) -> None:
        """An annotated tag (signed with ``-s`` when ``sign``) on ``rev``."""
        self._run("tag", "-s" if sign else "-a", "-m", message, "--", name, rev, env=env)

    def commit_all(self, message: str, *, author: tuple[str, str], date: str,
                   committer: tuple[str, str] | None = None, committer_date: str | None = None) -> str:
        """Stage every change in the working tree and commit it with pinned names and dates."""
        committer = committer or author
        env = {"GIT_AUTHOR_NAME": author[0], "GIT_AUTHOR_EMAIL": author[1], "GIT_AUTHOR_DATE": date,
               "GIT_COMMITTER_NAME": committer[0], "GIT_COMMITTER_EMAIL": committer[1],
               "GIT_COMMITTER_DATE": committer_date or date}
        self._run("add", "-A", "--", ".")
        self._run("commit", "-q", "--no-verify", "--allow-empty", "-m", message, env={**os.environ, **env})
        return self.head() or ""

    def tag_with_dates(self, name: str, rev: str, message: str, *, tagger: tuple[str, str], date: str) -> None:
        env = {**os.environ, "GIT_COMMITTER_NAME": tagger[0], "GIT_COMMITTER_EMAIL": tagger[1],
               "GIT_COMMITTER_DATE": date}
        self.create_tag(name, rev, message, sign=False, env=env)

    def delete_tag(self, name: str) -> None:
        self._run("tag", "-d", "--", name)

    def checkout(self, rev: str, *, new_branch: str | None = None, detach: bool = False) -> None:
        """``git checkout`` ``rev`` (onto a new branch, or detached)."""
        self._refuse_option(rev, new_branch or "")
        args = ["checkout", "-q"] + (["-b", new_branch] if new_branch else []) + (["--detach"] if detach else [])
        self._run(*args, rev, "--")

    def merge(self, rev: str) -> bool:
        """Start merging ``rev`` into HEAD without committing (``--no-ff --no-commit``): ``True`` when
        git merged cleanly, ``False`` when it stopped on conflicts (resolve, then :meth:`commit_all`)."""
        self._refuse_option(rev)
        try:
            self._run("merge", "-q", "--no-ff", "--no-commit", rev)
        except GitProblem:
            if (Path(self._repo.git_dir) / "MERGE_HEAD").exists():
                return False
            raise
        return True

    @staticmethod
    def _refuse_option(*names: str) -> None:
        for name in names:
            if name.startswith("-"):
                raise GitProblem(f"{name!r} is not a revision or branch name")

    def reset_hard(self, rev: str) -> None:
        self._run("reset", "-q", "--hard", rev, "--")

    def fast_import(self, stream: bytes) -> None:
        """Feed a ``git fast-import`` stream (used to build large test histories quickly)."""
        import tempfile

        with tempfile.TemporaryFile() as handle:
            handle.write(stream)
            handle.seek(0)
            self._run("fast-import", "--quiet", istream=handle)

    def log_patch_bytes(self) -> int:
        """Run ``git log -p`` over HEAD's history (a reference for benchmarks); the output size."""
        raw = self._run("log", "-p", "--no-color", "--no-ext-diff", "HEAD", "--", stdout_as_string=False)
        return len(raw)

    def clone(self, target: Path, *, depth: int | None = None) -> "Repository":
        """Clone this repository (through ``file://`` so ``depth`` makes a real shallow clone)."""
        args = ["clone", "-q"]
        if depth is not None:
            args += ["--depth", str(depth)]
        self._run(*args, "--", self.root.as_uri(), str(target))
        return _configured(git.Repo(target))


def _gist(stderr: str) -> str:
    """What git said, in one line: its ``fatal:`` lines if any (git repeats its ``error:`` lines), else the rest.

    >>> _gist("error: inflate: bad\\nerror: inflate: bad\\nfatal: loose object 1f is corrupt")
    'fatal: loose object 1f is corrupt'
    """
    lines = list(dict.fromkeys(line.strip() for line in stderr.splitlines() if line.strip()))
    fatal = [line for line in lines if line.startswith("fatal:")]
    return "; ".join(fatal or lines)


_TAGGER = re.compile(r"(.*) <([^<>]*)> (\d+) ([+-])(\d\d)(\d\d)$")


def _parse_tag(raw: bytes, name: str) -> tuple[str, str | None, datetime | None, str]:
    """(object it points at, tagger, tag date, message) of an annotated tag object's bytes (read as
    gitpython reads them: headers, a blank line, the message with any signature)."""
    lines = raw.decode("utf-8", "replace").splitlines()
    target = lines[0].partition(" ")[2] if lines and lines[0].startswith("object ") else ""
    tagger: str | None = None
    tagged: datetime | None = None
    headers = 0
    for headers, line in enumerate(lines):
        if not line:
            break
        if line.startswith("tagger "):
            match = _TAGGER.match(line[len("tagger "):])
            if match is None:
                raise GitProblem(f"git cannot read the tag {name}: its tagger line is malformed")
            tagger = f"{match.group(1)} <{match.group(2)}>"
            sign = -1 if match.group(4) == "-" else 1
            offset = timedelta(hours=int(match.group(5)), minutes=int(match.group(6)))
            moment = datetime.fromtimestamp(int(match.group(3)), timezone.utc)
            tagged = moment.astimezone(timezone(sign * offset)) if offset < timedelta(hours=24) else \
                moment.replace(tzinfo=_ODD_UTC)
    else:
        headers = len(lines)
    return target, tagger, tagged, "\n".join(lines[headers + 1:])


def find_repository(path: Path) -> Repository | None:
    """The git working tree containing ``path`` (like ``git rev-parse --show-toplevel``), or ``None``."""
    start = Path(path)
    start = start if start.is_dir() else start.parent
    try:
        repo = git.Repo(start, search_parent_directories=True)
    except (InvalidGitRepositoryError, NoSuchPathError):
        return None
    if repo.bare or repo.working_tree_dir is None:
        return None
    _require_git()
    return Repository(repo)


def _configured(repo: git.Repo) -> Repository:
    with repo.config_writer() as config:
        config.set_value("user", "name", "prespec")
        config.set_value("user", "email", "prespec@example.invalid")
        config.set_value("commit", "gpgsign", "false")
        config.set_value("tag", "gpgSign", "false")
    return Repository(repo)


def init_repository(path: Path) -> Repository:
    """``git init`` a new repository whose local config does not depend on the user's global one."""
    _require_git()
    Path(path).mkdir(parents=True, exist_ok=True)
    repo = git.Repo.init(path, initial_branch="main") if _supports_initial_branch() else git.Repo.init(path)
    return _configured(repo)


def _supports_initial_branch() -> bool:
    return git.Git().version_info >= (2, 28)
