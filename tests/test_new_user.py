"""What a new user runs into: a spec outside git after its start, an unedited template, an
unregistered spec, a mistyped id, and a working tree git does not watch. Real folders and real
temporary git repositories with pinned dates; the hash reference is hashlib over the canonical JSON
of the committed blob, as docs/reviewer-guide.md tells a reviewer to compute it.
"""

from __future__ import annotations

import hashlib
import shutil

import pytest

from registry.canonical import canonical_json
from registry.git import find_repository
from registry.registration import parse_block
from registry.validation import validate_document
from registry.yamlio import load_bytes

from .history_helpers import Lab, spec_text

BEFORE = "2020-01-10T10:00:00+01:00"
FUTURE = "2099-01-04"


@pytest.fixture
def plain_folder(tmp_path):
    folder = tmp_path / "not-in-git"
    folder.mkdir()
    if find_repository(folder) is not None:
        pytest.skip("the temporary folder lies inside a git working tree")
    (folder / "mouse-diet.yaml").write_text(spec_text(start="2020-03-02", status="collecting"), encoding="utf-8")
    return folder


def _spec(result):
    return next(s for s in result.json()["specs"] if s["id"] == "mouse-diet")


def test_a_started_spec_outside_git_is_a_no_history_warning(plain_folder, run):
    result = run("check", "--json", plain_folder)
    found = [f for f in _spec(result)["findings"] if f["kind"] == "no-history"]
    assert result.status == 0 and [(f["kind"], f["severity"]) for f in found] == [("no-history", "warning")]
    assert "nothing can show this design was fixed before the start" in found[0]["message"]
    assert "no-history" in run("check", plain_folder).out


def test_require_history_makes_it_an_error(plain_folder, run):
    (plain_folder / ".prespec.yaml").write_text("require_history: true\n", encoding="utf-8")
    result = run("check", "--json", plain_folder)
    found = [(f["kind"], f["severity"]) for f in _spec(result)["findings"] if f["kind"] == "no-history"]
    assert result.status == 1 and found == [("no-history", "error")]


def test_a_spec_before_its_start_outside_git_has_no_such_finding(plain_folder, run):
    (plain_folder / "mouse-diet.yaml").write_text(spec_text(start=FUTURE, status="planned"), encoding="utf-8")
    result = run("check", "--json", plain_folder)
    assert "no-history" not in [f["kind"] for f in _spec(result)["findings"]]


def test_register_refuses_an_unedited_template(tmp_path, run):
    lab = Lab(tmp_path / "lab")
    assert run("new", "gut-transit", "--dir", lab.registry).status == 0
    lab.commit("template", BEFORE)
    check = run("check", "--json", lab.registry)
    spec = next(s for s in check.json()["specs"] if s["id"] == "gut-transit")
    placeholders = {f["field"] for f in spec["findings"] if f["kind"] == "template-text"}
    assert {"question", "outcomes.primary.name", "outcomes.primary.unit"} <= placeholders
    refused = run("register", "gut-transit", lab.registry)
    assert refused.status == 1 and "template's placeholder" in refused.err and "'draft'" in refused.err
    assert lab.repo.tags("prespec") == []


def test_register_refuses_a_draft(tmp_path, run):
    lab = Lab(tmp_path / "lab")
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="draft"))
    lab.commit("design", BEFORE)
    refused = run("register", "mouse-diet", lab.registry)
    assert refused.status == 1 and "status is 'draft'" in refused.err


def test_verify_of_an_unregistered_spec_and_of_an_unknown_id(tmp_path, run):
    lab = Lab(tmp_path / "lab")
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned"))
    lab.commit("design", BEFORE)
    unregistered = run("verify", "mouse-diet", lab.registry)
    assert unregistered.status == 1 and "not registered" in unregistered.out
    unknown = run("verify", "nosuch", lab.registry)
    assert unknown.status == 2 and "no spec with id 'nosuch'" in unknown.err


def test_register_hashes_the_committed_blob_not_the_working_file(tmp_path, run):
    lab = Lab(tmp_path / "lab")
    path = lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned"))
    lab.commit("design", BEFORE)
    committed = path.read_bytes()
    # git stops watching the file (skip-worktree), so an edit does not show as uncommitted
    lab.repo._repo.git.update_index("--skip-worktree", "registry/mouse-diet.yaml")
    path.write_text(spec_text(start=FUTURE, status="planned", analysis="Rank test, never committed."),
                    encoding="utf-8")
    assert run("register", "mouse-diet", lab.registry).status == 0
    block = parse_block(lab.repo.tags("prespec")[0].message)
    expected = hashlib.sha256(canonical_json(validate_document(load_bytes(committed, "x"))).encode()).hexdigest()
    assert block["content-sha256"] == expected
    shutil.rmtree(lab.root / ".git" / "refs" / "tags" / "prespec")
    verified = run("verify", "mouse-diet", lab.registry)
    assert verified.status == 1 and "not registered" in verified.out
