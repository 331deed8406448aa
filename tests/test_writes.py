"""Every write goes through registry.fsutil.write_atomic, stays in the folder named, and never clobbers."""

from __future__ import annotations

import ast
import os
from pathlib import Path

import pytest

import registry.fsutil as fsutil
from registry.fsutil import WriteRefused, confined, write_atomic

from .conftest import ROOT


def test_new_writes_once_then_refuses(run, tmp_path):
    first = run("new", "dose-response", "--dir", str(tmp_path))
    assert first.status == 0, first.err
    target = tmp_path / "dose-response.yaml"
    original = target.read_bytes()
    again = run("new", "dose-response", "--dir", str(tmp_path), "--title", "Other")
    assert again.status == 2
    assert "already exists; prespec will not overwrite it" in again.err
    assert target.read_bytes() == original
    assert sorted(p.name for p in tmp_path.iterdir()) == ["dose-response.yaml"]  # no temporary file left


def test_new_writes_a_spec_that_loads(run, tmp_path):
    assert run("new", "fresh-spec", "--dir", str(tmp_path)).status == 0
    result = run("check", str(tmp_path / "fresh-spec.yaml"))
    assert "invalid" not in result.out, result.out


@pytest.mark.parametrize("kind", ["to-existing-file", "dangling", "to-outside-folder"])
def test_new_refuses_a_symlink_at_the_target(run, tmp_path, kind):
    registry, outside = tmp_path / "registry", tmp_path / "outside"
    registry.mkdir(), outside.mkdir()
    victim = outside / "victim.yaml"
    if kind == "to-existing-file":
        victim.write_text("precious: true\n", encoding="utf-8")
    link = registry / "linked.yaml"
    link.symlink_to(victim if kind != "to-outside-folder" else outside, target_is_directory=kind == "to-outside-folder")
    result = run("new", "linked", "--dir", str(registry))
    assert result.status == 2, result.out
    assert "already exists" in result.err
    assert link.is_symlink()
    if kind == "to-existing-file":
        assert victim.read_text(encoding="utf-8") == "precious: true\n"
    else:
        assert not victim.exists()  # nothing was created through the link
    assert [p.name for p in outside.iterdir()] == (["victim.yaml"] if kind == "to-existing-file" else [])


def test_new_into_a_file_is_a_usage_error(run, tmp_path):
    (tmp_path / "plain").write_text("x", encoding="utf-8")
    result = run("new", "abc", "--dir", str(tmp_path / "plain"))
    assert result.status == 2 and "not a folder" in result.err


@pytest.mark.parametrize("bad_id", ["../escape", "a/b", "-rf", "UPPER", "trailing-newline\n", "x" * 65, ""])
def test_new_refuses_ids_that_are_not_file_names(run, tmp_path, bad_id):
    result = run("new", "--dir", str(tmp_path), "--", bad_id)
    assert result.status == 2
    assert "id must be lowercase letters, digits and single hyphens" in result.err
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("name", ["../x.yaml", "/etc/x.yaml", "a/../../x.yaml", "..", "."])
def test_confined_refuses_names_leaving_the_folder(tmp_path, name):
    with pytest.raises(WriteRefused):
        confined(tmp_path, name)


def test_confined_refuses_a_symlinked_subfolder_leading_outside(tmp_path):
    (tmp_path / "out").mkdir()
    (tmp_path / "in").mkdir()
    (tmp_path / "in" / "sub").symlink_to(tmp_path / "out", target_is_directory=True)
    with pytest.raises(WriteRefused, match="outside"):
        confined(tmp_path / "in", "sub/x.md")
    assert confined(tmp_path / "in", "notes/x.md") == (tmp_path / "in").resolve() / "notes" / "x.md"


def test_confined_does_not_follow_a_link_at_the_target(tmp_path):
    (tmp_path / "link.yaml").symlink_to(tmp_path / "elsewhere.yaml")
    target = confined(tmp_path, "link.yaml")
    assert target.is_symlink()
    with pytest.raises(WriteRefused):
        write_atomic(target, "x", overwrite=False)
    assert not (tmp_path / "elsewhere.yaml").exists()


def test_failed_write_leaves_the_old_file_and_no_temporary(tmp_path, monkeypatch):
    target = tmp_path / "schema.json"
    target.write_text("old", encoding="utf-8")

    def broken_fsync(fd):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(fsutil.os, "fsync", broken_fsync)
    with pytest.raises(OSError):
        write_atomic(target, "new")
    assert target.read_text(encoding="utf-8") == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["schema.json"]


def test_overwrite_replaces_whole_file_and_keeps_its_mode(tmp_path):
    target = tmp_path / "out.json"
    target.write_text("a much longer old content\n", encoding="utf-8")
    target.chmod(0o640)
    write_atomic(target, "new\n")
    assert target.read_text(encoding="utf-8") == "new\n"
    assert target.stat().st_mode & 0o777 == 0o640


def test_new_file_gets_umask_permissions_not_private_ones(tmp_path):
    old = os.umask(0o022)
    try:
        path = write_atomic(tmp_path / "new.yaml", "x\n", overwrite=False)
    finally:
        os.umask(old)
    assert path.stat().st_mode & 0o777 == 0o644


def test_without_hard_links_new_files_are_still_never_clobbered(tmp_path, monkeypatch):
    def no_links(src, dst):
        raise OSError(1, "Operation not permitted")

    monkeypatch.setattr(fsutil.os, "link", no_links)
    path = write_atomic(tmp_path / "a.yaml", "first\n", overwrite=False)
    assert path.read_text(encoding="utf-8") == "first\n"
    with pytest.raises(WriteRefused):
        write_atomic(tmp_path / "a.yaml", "second\n", overwrite=False)
    assert path.read_text(encoding="utf-8") == "first\n"
    assert [p.name for p in tmp_path.iterdir()] == ["a.yaml"]


def test_name_taken_between_check_and_link_is_refused(tmp_path, monkeypatch):
    target = tmp_path / "race.yaml"
    real_link = os.link

    def someone_was_faster(src, dst):
        Path(dst).write_text("theirs\n", encoding="utf-8")
        return real_link(src, dst)

    monkeypatch.setattr(fsutil.os, "link", someone_was_faster)
    with pytest.raises(WriteRefused):
        write_atomic(target, "ours\n", overwrite=False)
    assert target.read_text(encoding="utf-8") == "theirs\n"
    assert [p.name for p in tmp_path.iterdir()] == ["race.yaml"]


_WRITERS = {"write_text", "write_bytes", "mkstemp", "NamedTemporaryFile", "replace", "rename", "link", "symlink_to",
            "unlink", "rmtree", "remove", "copy", "copyfile", "move", "touch", "savefig"}


def _calls(tree: ast.AST):
    for node in ast.walk(tree):
        if isinstance(node, ast.Call):
            yield node


def _opens_for_writing(call: ast.Call) -> bool:
    name = call.func.id if isinstance(call.func, ast.Name) else getattr(call.func, "attr", "")
    if name not in ("open", "fdopen"):
        return False
    if isinstance(call.func, ast.Attribute) and getattr(call.func.value, "id", "") == "os" and name == "open":
        flags = ast.dump(call.args[1]) if len(call.args) > 1 else ""
        return any(flag in flags for flag in ("O_WRONLY", "O_RDWR", "O_CREAT", "O_APPEND", "O_TRUNC"))
    modes = [a for a in call.args[1:2]] + [k.value for k in call.keywords if k.arg == "mode"]
    return any(not isinstance(m, ast.Constant) or any(c in str(m.value) for c in "wax+") for m in modes)


def test_only_fsutil_writes_files():
    # Static scan of the package: writing, renaming or deleting files happens in fsutil.py alone.
    offenders = []
    for path in sorted((ROOT / "registry").rglob("*.py")):
        if path.name == "fsutil.py":
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for call in _calls(tree):
            name = call.func.attr if isinstance(call.func, ast.Attribute) else getattr(call.func, "id", "")
            if name in _WRITERS and not (name in ("replace", "remove") and _is_str_replace(call)) \
                    and not (name == "savefig" and _into_memory(call)) or _opens_for_writing(call):
                offenders.append(f"{path.relative_to(ROOT)}:{call.lineno}: {name}")
    assert not offenders, "write through registry.fsutil.write_atomic instead:\n" + "\n".join(offenders)


def _into_memory(call: ast.Call) -> bool:
    # fig.savefig(buffer, ...) into an in-memory io.StringIO named buffer writes no file.
    return bool(call.args) and isinstance(call.args[0], ast.Name) and call.args[0].id == "buffer"


def _is_str_replace(call: ast.Call) -> bool:
    # "text".replace(a, b) and items.remove(x) are not file operations; os.replace and os.remove are.
    func = call.func
    return not (isinstance(func, ast.Attribute) and isinstance(func.value, ast.Name) and func.value.id in ("os", "shutil"))
