"""Regression tests for the edges between prespec and the world around a spec: what git history
can say, what files a spec points at, what reaches a terminal, repositories with many tags.

Each scenario is a real temporary git repository with pinned names, emails and dates (see
tests/history_helpers.py). The reference is git itself (what it records and accepts) and the
rules of docs/reviewer-guide.md.
"""

from __future__ import annotations

import os

import pytest

from registry.registration import format_message

from .conftest import ROOT
from .history_helpers import POSTDOC, Lab, spec_text

BEFORE = "2020-01-10T10:00:00+01:00"
AFTER = "2020-04-06T15:30:00+02:00"  # after the start 2020-03-02 that spec_text() uses
SPEC = "mouse-diet.yaml"


@pytest.fixture
def lab(tmp_path):
    return Lab(tmp_path / "lab")


def _spec(result, spec_id="mouse-diet"):
    return next(s for s in result.json()["specs"] if s["id"] == spec_id)


def _kinds(spec):
    return [f["kind"] for f in spec["findings"]]


def _drifted_fields(spec):
    return sorted(f["field"] for f in spec["findings"] if f["kind"] == "drift")


def _tag(lab, spec_id, head, date="2020-01-11T09:00:00+01:00", version=1):
    message = format_message({"id": spec_id, "path": f"registry/{spec_id}.yaml", "commit": head,
                              "start": "2020-03-02", "content-sha256": "0" * 64, "tool": "prespec 0.1.0"})
    lab.repo.tag_with_dates(f"prespec/{spec_id}/v{version}", head, message, tagger=("Lab lead", "lead@lab.example"),
                            date=date)


# ------------------------------------------------------------------ drift that cannot be hidden


def test_moving_the_start_earlier_does_not_hide_an_edit_after_the_new_start(lab, run):
    lab.write(SPEC, spec_text(start="2020-03-02"))
    lab.commit("plan", BEFORE)
    # dated 2020-02-15: before the declared start (03-02) but after the start it now declares (02-01)
    lab.write(SPEC, spec_text(start="2020-02-01", per_group="20"))
    lab.commit("start earlier, fewer animals", "2020-02-15T10:00:00+01:00", author=POSTDOC)
    result = run("check", lab.registry, "--json")
    spec = _spec(result)
    assert _drifted_fields(spec) == ["data_collection.start", "sample_size.per_group"], spec["findings"]
    assert spec["history"]["verdict"] == "drift"
    assert result.status == 1


def test_postponing_the_start_before_it_arrives_is_not_drift(lab, run):
    # the lab moves the start later before data collection began; later edits before the new start are free
    lab.write(SPEC, spec_text(start="2020-03-02"))
    lab.commit("plan", BEFORE)
    lab.write(SPEC, spec_text(start="2020-06-01"))
    lab.commit("postpone", "2020-02-15T10:00:00+01:00")
    lab.write(SPEC, spec_text(start="2020-06-01", per_group="30"))
    lab.commit("one more per group", AFTER)
    spec = _spec(run("check", lab.registry, "--json"))
    assert "drift" not in _kinds(spec), spec["findings"]
    assert spec["history"]["verdict"] == "clean"


def test_moving_the_start_after_data_collection_started_is_drift(lab, run):
    lab.write(SPEC, spec_text(start="2020-03-02"))
    lab.commit("plan", BEFORE)
    lab.write(SPEC, spec_text(start="2020-09-01"))
    lab.commit("start later", AFTER)
    lab.write(SPEC, spec_text(start="2020-09-01", per_group="20"))
    lab.commit("fewer animals", "2020-05-06T15:30:00+02:00")
    spec = _spec(run("check", lab.registry, "--json"))
    assert _drifted_fields(spec) == ["data_collection.start", "sample_size.per_group"], spec["findings"]


def test_changing_the_id_with_a_locked_field_after_the_start_is_an_error(lab, run):
    lab.write(SPEC, spec_text())
    lab.commit("plan", BEFORE)
    lab.write(SPEC, spec_text("mouse-diet-b", per_group="20"))
    lab.commit("new id, fewer animals", AFTER, author=POSTDOC)
    result = run("check", lab.registry, "--json")
    assert result.status == 1
    spec = _spec(result, "mouse-diet-b")
    changed = [f for f in spec["findings"] if f["kind"] == "id-changed"]
    assert len(changed) == 1 and changed[0]["severity"] == "error", spec["findings"]
    assert "'mouse-diet' to 'mouse-diet-b'" in changed[0]["message"]
    assert "sample_size.per_group 29 -> 20" in changed[0]["message"]
    assert "incomplete-history" not in _kinds(spec)
    assert spec["history"]["verdict"] == "drift"
    # the old id is not reported a second time as a deleted spec
    assert [s["id"] for s in result.json()["specs"]] == ["mouse-diet-b"]


def test_changing_only_the_id_is_not_an_id_change_error(lab, run):
    lab.write(SPEC, spec_text())
    lab.commit("plan", BEFORE)
    lab.write(SPEC, spec_text("mouse-diet-b"))
    lab.commit("new id", AFTER)
    spec = _spec(run("check", lab.registry, "--json"), "mouse-diet-b")
    assert "id-changed" not in _kinds(spec)


def test_a_registered_id_that_disappears_is_an_error(lab, run):
    lab.write(SPEC, spec_text())
    head = lab.commit("plan", BEFORE)
    _tag(lab, "mouse-diet", head)
    (lab.registry / SPEC).unlink()
    lab.commit("drop it", AFTER)
    result = run("check", lab.registry, "--json")
    assert result.status == 1
    spec = _spec(result)
    missing = [f for f in spec["findings"] if f["kind"] == "registered-missing"]
    assert len(missing) == 1 and missing[0]["severity"] == "error", spec["findings"]
    assert "prespec/mouse-diet/v1" in missing[0]["message"]


def test_a_registered_id_whose_history_was_rewritten_away_is_an_error(lab, run):
    # the spec is gone from every commit HEAD reaches; only the registration tag remembers it
    lab.write("other.yaml", spec_text("other-study"))
    lab.commit("other", BEFORE)
    lab.write(SPEC, spec_text())
    head = lab.commit("plan", BEFORE)
    _tag(lab, "mouse-diet", head)
    lab.repo.reset_hard("HEAD~1")
    result = run("check", lab.registry, "--json")
    assert result.status == 1
    spec = _spec(result)
    assert "registered-missing" in _kinds(spec)


# ------------------------------------------------------------------ any commit git accepts is readable


def _git(lab, *args, stdin=None):
    import subprocess

    env = {**os.environ, "GIT_AUTHOR_NAME": "Lab lead", "GIT_AUTHOR_EMAIL": "lead@lab.example",
           "GIT_COMMITTER_NAME": "Lab lead", "GIT_COMMITTER_EMAIL": "lead@lab.example"}
    done = subprocess.run(["git", *args], cwd=lab.root, input=stdin, capture_output=True, env=env, check=True)
    return done.stdout.decode().strip()


@pytest.mark.parametrize("offset", ["+2400", "+9959", "-2500"])
def test_a_time_zone_offset_git_accepts_but_no_zone_has_is_a_finding(lab, run, offset):
    # git stores "<seconds> <offset>" and accepts any four digits (git's fsck checks only the form)
    lab.write(SPEC, spec_text())
    head = lab.commit("plan", BEFORE)
    lab.write(SPEC, spec_text(per_group="30"))
    _git(lab, "add", "-A")
    tree = _git(lab, "write-tree")
    raw = (f"tree {tree}\nparent {head}\nauthor Lab lead <lead@lab.example> 1578650400 {offset}\n"
           f"committer Lab lead <lead@lab.example> 1578650400 {offset}\n\nodd clock\n")
    odd = _git(lab, "hash-object", "-t", "commit", "-w", "--stdin", stdin=raw.encode())
    _git(lab, "update-ref", "HEAD", odd)
    result = run("check", lab.registry, "--json")
    assert result.status in (0, 1), result.err
    spec = _spec(result)
    bad = [f for f in spec["findings"] if f["kind"] == "bad-timezone"]
    assert len(bad) == 1 and odd[:10] in bad[0]["message"], spec["findings"]
    assert spec["history"]["verdict"] == "unreliable-dates"
    # 1578650400 is 2020-01-10 10:00 UTC (the Unix epoch, common practice)
    history = run("history", "mouse-diet", lab.registry, "--json")
    assert history.status in (0, 1), history.err
    assert history.json()["revisions"][-1]["committer_date"] == "2020-01-10T10:00:00+00:00"


def test_a_missing_head_commit_is_unreadable_history_not_untracked(lab, run):
    lab.write(SPEC, spec_text())
    head = lab.commit("plan", BEFORE)
    (lab.root / ".git" / "objects" / head[:2] / head[2:]).unlink()
    result = run("check", lab.registry, "--json")
    assert result.status == 1, result.err
    spec = _spec(result)
    assert "history-unreadable" in _kinds(spec) and "untracked" not in _kinds(spec), spec["findings"]
    assert head[:10] in next(f["message"] for f in spec["findings"] if f["kind"] == "history-unreadable")


def test_a_head_naming_a_commit_that_does_not_exist_is_unreadable_history(lab, run):
    lab.write(SPEC, spec_text())
    lab.commit("plan", BEFORE)
    (lab.root / ".git" / "refs" / "heads" / "main").write_text("de" * 20 + "\n")
    (lab.root / ".git" / "HEAD").write_text("ref: refs/heads/main\n")
    spec = _spec(run("check", lab.registry, "--json"))
    assert "history-unreadable" in _kinds(spec) and "untracked" not in _kinds(spec), spec["findings"]


def test_without_git_on_path_history_commands_say_so_in_one_line_and_the_rest_work(lab, run, tmp_path,
                                                                                  monkeypatch):
    lab.write(SPEC, spec_text())
    lab.commit("plan", BEFORE)
    pilot = tmp_path / "controls.csv"
    pilot.write_text("butyrate\n4.1\n5.3\n6.0\n4.8\n", encoding="utf-8")
    empty = tmp_path / "empty-path"
    empty.mkdir()
    monkeypatch.setenv("PATH", str(empty))
    for argv in (["check", lab.registry], ["history", "mouse-diet", lab.registry]):
        result = run(*argv)
        assert result.status == 2, (argv, result.err)
        lines = result.err.strip().splitlines()
        assert len(lines) == 1 and "git is not installed or not on PATH" in lines[0], result.err
    assert run("check", "--no-history", lab.registry).status == 0
    assert run("size", "two-sample-t", "--d", "0.5").status == 0
    assert run("pilot", pilot, "--column", "butyrate").status == 0
    assert run("schema", "--out", tmp_path / "s.json").status == 0
    assert run("new", "gut-transit", "--dir", tmp_path, "--test", "two-sample-t").status == 0


def test_prespec_starts_without_git_on_path(tmp_path):
    import subprocess
    import sys

    env = {"PATH": str(tmp_path), "PYTHONPATH": str(ROOT), "NO_COLOR": "1"}
    done = subprocess.run([sys.executable, "-m", "registry", "size", "two-sample-t", "--d", "0.5"],
                          capture_output=True, env=env, cwd=tmp_path)
    assert done.returncode == 0, done.stderr.decode()
