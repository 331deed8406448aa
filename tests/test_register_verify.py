"""``prespec register`` and ``prespec verify`` on real temporary repositories.

References: git's own records (tags, commits and dates made with pinned GIT_* values)
and the SHA-256 of the canonical JSON recomputed with hashlib, as docs/reviewer-guide.md
tells a reviewer to do by hand.
"""

from __future__ import annotations

import hashlib
import json

import pytest

from registry.canonical import canonical_json
from registry.registration import format_message, parse_block
from registry.validation import validate_document
from registry.yamlio import load_file

from .history_helpers import Lab, spec_text

FUTURE = "2099-01-04"
PAST = "2020-03-02"
BEFORE = "2020-01-10T10:00:00+01:00"


@pytest.fixture
def lab(tmp_path):
    lab = Lab(tmp_path / "lab")
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned"))
    lab.commit("register", BEFORE)
    return lab


def _hand_hash(path) -> str:
    # the reviewer's recipe: SHA-256 over the UTF-8 canonical JSON (json + hashlib only)
    spec = validate_document(load_file(path))
    data = json.loads(canonical_json(spec))
    text = json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def test_register_records_an_annotated_tag_and_verify_passes(lab, run):
    result = run("register", "mouse-diet", lab.registry)
    assert result.status == 0, result.err
    tags = lab.repo.tags("prespec/mouse-diet/*")
    assert [t.name for t in tags] == ["prespec/mouse-diet/v1"] and tags[0].annotated
    block = parse_block(tags[0].message)
    assert block["content-sha256"] == _hand_hash(lab.registry / "mouse-diet.yaml")
    assert block["commit"] == lab.repo.head() == tags[0].commit
    assert block["path"] == "registry/mouse-diet.yaml" and block["start"] == FUTURE
    assert block["tool"].startswith("prespec ")
    verified = run("verify", "mouse-diet", lab.registry)
    assert verified.status == 0, verified.out
    as_json = run("verify", "mouse-diet", lab.registry, "--json").json()
    assert as_json["holds"] is True and all(c["ok"] for c in as_json["checks"])


def test_hash_command_matches_the_hand_recipe(lab, run):
    result = run("hash", lab.registry / "mouse-diet.yaml", "--canonical")
    canonical, line = result.out.splitlines()
    assert hashlib.sha256(canonical.encode("utf-8")).hexdigest() == line.split()[0]
    assert line.split()[0] == _hand_hash(lab.registry / "mouse-diet.yaml")
    assert run("hash", "mouse-diet", lab.registry).out.split()[0] == line.split()[0]


def test_second_register_increments_the_version_only_for_new_content(lab, run):
    assert run("register", "mouse-diet", lab.registry).status == 0
    again = run("register", "mouse-diet", lab.registry)
    assert again.status == 1 and "already registers" in again.err
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned", analysis="Rank test."))
    lab.commit("before the start: new analysis", "2020-01-12T10:00:00+01:00")
    assert run("register", "mouse-diet", lab.registry).status == 0
    assert [t.name for t in lab.repo.tags("prespec/mouse-diet/*")] == ["prespec/mouse-diet/v1",
                                                                        "prespec/mouse-diet/v2"]
    assert run("verify", "mouse-diet", lab.registry).status == 0


def test_register_refuses_a_dirty_tree(lab, run):
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned", analysis="Edited, not committed."))
    result = run("register", "mouse-diet", lab.registry)
    assert result.status == 1 and "uncommitted changes" in result.err
    assert lab.repo.tags("prespec/*") == []


def test_register_refuses_an_uncommitted_spec(lab, run):
    lab.write("other.yaml", spec_text("other-study", start=FUTURE, status="planned"))
    result = run("register", "other-study", lab.registry)
    assert result.status == 1 and "not committed" in result.err


def test_register_refuses_an_underpowered_spec(lab, run):
    # difference 4, SD 5, power 0.8 needs 29 per group with 10% attrition: 10 is underpowered
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned", per_group="10"))
    lab.commit("fewer mice", "2020-01-12T10:00:00+01:00")
    result = run("register", "mouse-diet", lab.registry)
    assert result.status == 1 and "underpowered" in result.err


def test_register_refuses_an_invalid_spec(lab, run):
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned", alpha="5%"))
    lab.commit("broken", "2020-01-12T10:00:00+01:00")
    result = run("register", lab.registry / "mouse-diet.yaml")
    assert result.status == 1 and "invalid" in result.err and "alpha" in result.err


def test_register_refuses_after_the_start(lab, run):
    lab.write("mouse-diet.yaml", spec_text(start=PAST, status="planned"))
    lab.commit("start in the past", "2020-01-12T10:00:00+01:00")
    result = run("register", "mouse-diet", lab.registry)
    assert result.status == 1 and "started on 2020-03-02" in result.err


def test_register_outside_a_repository_is_a_usage_error(tmp_path, run):
    (tmp_path / "mouse-diet.yaml").write_text(spec_text(start=FUTURE, status="planned"), encoding="utf-8")
    result = run("register", "mouse-diet", tmp_path)
    assert result.status == 2 and "not inside a git repository" in result.err


def test_signing_follows_the_users_git_config(lab):
    assert lab.repo.signing_configured() is False
    with lab.repo._repo.config_writer() as config:
        config.set_value("user", "signingkey", "0123456789ABCDEF")
    assert lab.repo.signing_configured() is True


def test_verify_fails_without_a_tag(lab, run):
    result = run("verify", "mouse-diet", lab.registry, "--json")
    assert result.status == 1 and result.json()["holds"] is False
    assert "no tag" in result.json()["checks"][0]["detail"]


def test_verify_fails_after_an_unamended_locked_change(lab, run):
    assert run("register", "mouse-diet", lab.registry).status == 0
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned", analysis="Rank test."))
    lab.commit("changed after registration", "2020-01-12T10:00:00+01:00")
    result = run("verify", "mouse-diet", lab.registry, "--json")
    assert result.status == 1
    failed = [c for c in result.json()["checks"] if not c["ok"]]
    assert [c["name"] for c in failed] == ["no unamended change since"]
    assert "analysis_plan" in failed[0]["detail"]


def test_verify_accepts_free_field_changes_after_registration(lab, run):
    assert run("register", "mouse-diet", lab.registry).status == 0
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned", extra="notes: ready\n"))
    lab.commit("status", "2020-01-12T10:00:00+01:00")
    assert run("verify", "mouse-diet", lab.registry).status == 0


def _forge(lab, *, digest: str, start: str, date: str, name: str = "prespec/mouse-diet/v1") -> None:
    head = lab.repo.head()
    message = format_message({"id": "mouse-diet", "path": "registry/mouse-diet.yaml", "commit": head,
                              "start": start, "content-sha256": digest, "tool": "prespec test"})
    lab.repo.tag_with_dates(name, head, message, tagger=("Lab lead", "lead@lab.example"), date=date)


def test_verify_fails_on_a_hash_mismatch(lab, run):
    _forge(lab, digest="0" * 64, start=FUTURE, date="2020-01-11T10:00:00+01:00")
    result = run("verify", "mouse-diet", lab.registry, "--json")
    failed = [c["name"] for c in result.json()["checks"] if not c["ok"]]
    assert result.status == 1 and failed == ["content hash"]


def test_verify_fails_for_a_tag_made_after_the_start(tmp_path, run):
    lab = Lab(tmp_path / "late")
    lab.write("mouse-diet.yaml", spec_text(start=PAST, status="planned"))
    lab.commit("register", BEFORE)
    digest = _hand_hash(lab.registry / "mouse-diet.yaml")
    _forge(lab, digest=digest, start=PAST, date="2020-03-09T10:00:00+01:00")  # a week after the start
    result = run("verify", "mouse-diet", lab.registry, "--json")
    failed = [c["name"] for c in result.json()["checks"] if not c["ok"]]
    assert result.status == 1 and failed == ["before the start"]


def test_verify_fails_when_the_tag_is_not_reachable(lab, run):
    first = lab.repo.head()
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned"))
    lab.commit("ready", "2020-01-11T10:00:00+01:00")
    assert run("register", "mouse-diet", lab.registry).status == 0
    lab.repo.reset_hard(first)
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned", extra="notes: redone\n"))
    lab.commit("ready, rewritten", "2020-01-11T10:00:00+01:00")
    result = run("verify", "mouse-diet", lab.registry, "--json")
    assert result.status == 1
    assert "reachable from HEAD" in [c["name"] for c in result.json()["checks"] if not c["ok"]]


def test_verify_fails_on_a_shallow_clone(lab, run, tmp_path):
    assert run("register", "mouse-diet", lab.registry).status == 0
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE, status="planned"))
    lab.commit("status", "2020-01-12T10:00:00+01:00")
    clone = lab.repo.clone(tmp_path / "clone", depth=1)
    result = run("verify", "mouse-diet", clone.root / "registry", "--json")
    assert result.status == 1  # the tag's commit is missing from a depth-1 clone, and history is cut
