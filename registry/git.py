"""Read-only git queries about one spec file. The only module that runs git."""

from __future__ import annotations

from datetime import datetime
from pathlib import Path

from git import Repo
from git.exc import GitCommandError, InvalidGitRepositoryError, NoSuchPathError

__all__ = ["last_commit_for", "freeze_tags", "is_modified", "repo_relative"]


def _repo_and_relative(path: Path) -> tuple[Repo, str] | None:
    path = Path(path).absolute()
    try:
        repo = Repo(path.parent, search_parent_directories=True)
    except (InvalidGitRepositoryError, NoSuchPathError):
        return None
    if repo.working_tree_dir is None:
        return None
    try:
        relative = path.resolve().relative_to(Path(repo.working_tree_dir).resolve())
    except ValueError:
        return None
    return repo, relative.as_posix()


def last_commit_for(path: Path) -> tuple[str, datetime] | None:
    """Hex id and commit time of the last commit that touched ``path``; None outside git or if never committed."""
    found = _repo_and_relative(path)
    if found is None:
        return None
    repo, relative = found
    try:
        commits = list(repo.iter_commits(paths=relative, max_count=1))
    except (GitCommandError, ValueError):  # ValueError: a repository without any commit
        return None
    if not commits:
        return None
    return commits[0].hexsha, commits[0].committed_datetime


def freeze_tags(path: Path, spec_id: str) -> list[tuple[str, str]]:
    """``(tag, commit hex id)`` for every tag named ``prespec/<spec_id>/...`` in the file's repository."""
    found = _repo_and_relative(path)
    if found is None:
        return []
    repo, _ = found
    prefix = f"prespec/{spec_id}/"
    tags = []
    for tag in repo.tags:
        if tag.name.startswith(prefix):
            try:
                tags.append((tag.name, tag.commit.hexsha))
            except ValueError:  # a tag pointing at something other than a commit
                continue
    return sorted(tags)


def is_modified(path: Path) -> bool:
    """Whether the working copy of ``path`` differs from its last commit (or is not committed at all)."""
    found = _repo_and_relative(path)
    if found is None:
        return False
    repo, relative = found
    try:
        return repo.is_dirty(path=relative, untracked_files=True)
    except (GitCommandError, ValueError):
        return True


def repo_relative(path: Path) -> str | None:
    """``path`` relative to the root of its git working tree, with forward slashes; None outside git."""
    found = _repo_and_relative(path)
    return None if found is None else found[1]
