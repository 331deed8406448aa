"""A small on-disk cache of JSON entries: simulation-verified sizes (``size-cache``) and ``check``'s
results (``check-cache``, :mod:`registry.checkcache`), so ``check`` stays fast after the first run.

An entry is one JSON file named by the SHA-256 of what determines the answer: the prespec
version, the kind of result, and the canonical JSON of the design and the simulation settings.
It lives in the registry's git folder (``.git/prespec/size-cache/``) when the registry is in a
git repository, else in the user's cache folder (``platformdirs``' rules). Entries are written through
a temporary file and a rename, so concurrent runs never see half an entry; an entry that cannot
be read, or whose stored key differs, is treated as absent and rewritten.

A cache inside a repository travels with it (a copied folder, a tarball of the registry), so an
entry is trusted only if it carries a seal (HMAC-SHA256) made with a secret key of the user who
runs prespec, kept in the user's cache folder: an entry planted by whoever made the repository,
whose key they do not have, is absent, and the result is computed afresh. Without a user cache
folder to hold the key, nothing is cached.
"""

from __future__ import annotations

import hashlib
import hmac
import json
from functools import lru_cache
from pathlib import Path
from typing import Any

from . import __version__

__all__ = ["SizeCache", "cache_key", "default_cache_dir", "seal"]

_FOLDER = "size-cache"


def cache_key(kind: str, payload: dict[str, Any]) -> str:
    """SHA-256 of the prespec version, ``kind`` and ``payload`` in canonical JSON.

    >>> cache_key("x", {"a": 1}) == cache_key("x", {"a": 1}) != cache_key("x", {"a": 2})
    True
    """
    text = json.dumps({"prespec": __version__, "kind": kind, "payload": payload}, sort_keys=True,
                      separators=(",", ":"), ensure_ascii=True)
    return hashlib.sha256(text.encode("ascii")).hexdigest()


def default_cache_dir(start: Path | None, folder_name: str = _FOLDER) -> Path | None:
    """``<git dir>/prespec/<folder_name>`` (default ``size-cache``) of the repository holding ``start``,
    else ``<user cache folder>/prespec/<folder_name>``.

    Returns None when no writable place is known, or when the user cache folder lies inside ``start``
    (it would write into the registry's working tree): the cache is then off."""
    if start is not None:
        here = Path(start).resolve()
        for folder in (here, *here.parents):
            git = folder / ".git"
            if git.is_dir():
                return git / "prespec" / folder_name
            if git.exists():  # a worktree's or submodule's .git file: use the user cache instead
                break
    folder = _user_cache_dir()
    if folder is None:
        return None
    if start is not None:  # a home folder inside the registry: its cache folder would be in the working tree
        try:
            folder.resolve().relative_to(Path(start).resolve())
            return None
        except ValueError:
            pass
    return folder / folder_name


def _user_cache_dir() -> Path | None:
    """``platformdirs.user_cache_dir("prespec")`` when platformdirs is installed, else the same
    rules for the common systems: ``%LOCALAPPDATA%\\prespec\\Cache`` on Windows,
    ``~/Library/Caches/prespec`` on macOS, ``$XDG_CACHE_HOME/prespec`` (default ``~/.cache``) elsewhere."""
    import os
    import sys

    try:
        from platformdirs import user_cache_dir
    except ImportError:
        pass
    else:
        return Path(user_cache_dir("prespec"))
    try:
        home = Path.home()
    except RuntimeError:  # no home folder known
        home = None
    if sys.platform == "win32":
        base = os.environ.get("LOCALAPPDATA")
        return Path(base) / "prespec" / "Cache" if base else None
    if sys.platform == "darwin":
        return home / "Library" / "Caches" / "prespec" if home else None
    base = os.environ.get("XDG_CACHE_HOME", "").strip()
    if base and os.path.isabs(base):
        return Path(base) / "prespec"
    return home / ".cache" / "prespec" if home else None


_KEY_FILE = "entry-key"  # in the user cache folder: 32 random bytes, readable by the user only


@lru_cache(maxsize=1)
def _secret() -> bytes | None:
    """This user's key for sealing entries, made on first use; None when it cannot be kept."""
    import os
    import stat

    folder = _user_cache_dir()
    if folder is None:
        return None
    path = folder / _KEY_FILE
    for _ in range(2):
        try:
            data = _read_regular(path)
        except FileNotFoundError:
            from .fsutil import WriteRefused, write_atomic

            try:
                write_atomic(path, os.urandom(32), overwrite=False, private=True)
            except WriteRefused:  # another run made it first: read theirs
                continue
            except OSError:
                return None
            continue
        except OSError:
            return None
        if len(data) == 32 and (os.name != "posix" or stat.S_IMODE(path.stat().st_mode) & 0o077 == 0):
            return data
        return None  # a key others may read (or not ours): trust no entry
    return None


def seal(key: str, value: dict[str, Any]) -> str | None:
    """The seal of an entry: HMAC-SHA256 under this user's key of the key and canonical value."""
    secret = _secret()
    if secret is None:
        return None
    text = json.dumps({"key": key, "value": value}, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return hmac.new(secret, text.encode("ascii"), hashlib.sha256).hexdigest()


class SizeCache:
    """Get and put JSON entries by key in ``folder`` (None: a cache that remembers nothing)."""

    def __init__(self, folder: Path | None, *, durable: bool = True) -> None:
        self.folder = folder
        self.durable = durable  # False: entries are not flushed to disk one by one (see fsutil.write_atomic)

    def get(self, key: str) -> dict[str, Any] | None:
        if self.folder is None:
            return None
        try:
            data = json.loads(_read_regular(self.folder / f"{key}.json").decode("utf-8"))
        except (OSError, ValueError, RecursionError):
            return None
        if not isinstance(data, dict) or data.get("key") != key or not isinstance(data.get("value"), dict):
            return None  # damaged or foreign: rebuilt by the next put
        expected = seal(key, data["value"])
        if expected is None or not isinstance(data.get("seal"), str) or not hmac.compare_digest(expected, data["seal"]):
            return None  # not sealed by this user: planted, copied or altered
        return data["value"]

    def put(self, key: str, value: dict[str, Any]) -> None:
        if self.folder is None:
            return
        from .fsutil import write_atomic

        sealed = seal(key, value)
        if sealed is None:  # no key to seal with: an unsealed entry would never be read back
            return
        try:
            write_atomic(self.folder / f"{key}.json",
                         json.dumps({"key": key, "value": value, "seal": sealed}, sort_keys=True),
                         durable=self.durable)
        except (OSError, ValueError):  # ValueError: fsutil.WriteRefused, e.g. a link where the entry goes
            pass  # a read-only registry, a full disk or a planted link only costs speed


def _read_regular(path: Path) -> bytes:
    """A regular file's bytes; OSError for anything else (a FIFO planted there is never waited on)."""
    import os
    import stat

    fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0))
    try:
        if not stat.S_ISREG(os.fstat(fd).st_mode):
            raise OSError(f"{path} is not a regular file")
        with os.fdopen(fd, "rb", closefd=False) as handle:
            return handle.read()
    finally:
        os.close(fd)
