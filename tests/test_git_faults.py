"""The git fault matrix: every odd or broken repository state gives a named finding, never "clean".

Each scenario is a real temporary repository built through registry/git.py with pinned names
and dates (GIT_AUTHOR_* / GIT_COMMITTER_*), or broken on disk the way a failing disk or a
careless copy breaks it (a loose object overwritten or removed). The reference is git itself:
what it records (commits, parents, dates, objects) and what it says when it cannot read an object.
Scenarios already covered in tests/test_history.py (shallow clone and history starting after the
start for check, deleted specs for check, date order for check, rewritten history for check,
outside a repository for check) are not repeated here.
"""

from __future__ import annotations

import os

import pytest

from registry.git import find_repository

from .history_helpers import POSTDOC, Lab, spec_text

BEFORE = "2020-01-10T10:00:00+01:00"
AFTER = "2020-04-06T15:30:00+02:00"  # after the start 2020-03-02 that spec_text() uses
FUTURE_START = "2099-06-01"
SPEC = "mouse-diet.yaml"


@pytest.fixture
def lab(tmp_path):
    return Lab(tmp_path / "lab")


def _spec(result, spec_id="mouse-diet"):
    return next(s for s in result.json()["specs"] if s["id"] == spec_id)


def _findings(spec, kind):
    return [f for f in spec["findings"] if f["kind"] == kind]


def _not_clean(spec):
    # the per-spec history verdict, when history was read, must never claim a clean history here
    assert spec.get("history", {}).get("verdict") != "clean", spec


def _failed_checks(result):
    return {c["name"]: c["detail"] for c in result.json()["checks"] if not c["ok"]}


def _object_file(lab, sha):
    return lab.root / ".git" / "objects" / sha[:2] / sha[2:]


# ------------------------------------------------------------------ not a repository


def test_history_and_verify_outside_a_repository_say_so(tmp_path, run):
    (tmp_path / SPEC).write_text(spec_text(), encoding="utf-8")
    assert find_repository(tmp_path) is None
    history = run("history", "mouse-diet", tmp_path)
    assert history.status == 2 and "not inside a git repository" in history.err
    verify = run("verify", "mouse-diet", tmp_path)
    assert verify.status == 2 and "not inside a git repository" in verify.err
    assert "Traceback" not in history.err + verify.err


# ------------------------------------------------------------------ a repository without commits


def test_repository_with_no_commits_reports_the_spec_untracked(lab, run):
    lab.write(SPEC, spec_text())  # start 2020-03-02: already passed
    assert lab.repo.head() is None
    result = run("check", "--json", lab.registry)
    spec = _spec(result)
    assert result.status == 1
    assert [(f["kind"], f["severity"]) for f in spec["findings"]] == [("untracked", "error")]
    assert spec["history"]["verdict"] == "untracked" and spec["history"]["versions"] == 0
    assert spec["required_per_group"] == 29  # still validated and sized
    assert "untracked" in run("check", lab.registry).out
    history = run("history", "mouse-diet", lab.registry, "--json")
    assert history.status == 1 and history.json()["verdict"] == "untracked"
    assert [f["kind"] for f in history.json()["findings"]] == ["untracked"]
    verify = run("verify", "mouse-diet", lab.registry, "--json")
    assert verify.status == 1 and "no tag" in _failed_checks(verify)["registration tag"]
    registered = run("register", "mouse-diet", lab.registry)
    assert registered.status == 1 and "not committed" in registered.err


# ------------------------------------------------------------------ untracked spec beside committed ones


@pytest.mark.parametrize("start, severity", [("2020-03-02", "error"), (FUTURE_START, "warning")])
def test_untracked_spec_is_reported_with_severity_by_start(lab, run, start, severity):
    lab.write("kept-study.yaml", spec_text("kept-study", start=FUTURE_START))
    lab.commit("register another study", BEFORE)
    lab.write(SPEC, spec_text(start=start))
    result = run("check", "--json", lab.registry)
    spec = _spec(result)
    assert [(f["kind"], f["severity"]) for f in spec["findings"] if f["kind"] == "untracked"] == [("untracked", severity)]
    assert result.status == (1 if severity == "error" else 0)
    _not_clean(spec)
    assert _spec(result, "kept-study")["history"]["verdict"] == "clean"  # the committed one is unaffected
    history = run("history", "mouse-diet", lab.registry)
    assert history.status == 1 and "Verdict: untracked" in history.out


# ------------------------------------------------------------------ detached HEAD


def test_detached_head_is_analysed_and_said(lab, run):
    lab.write(SPEC, spec_text())
    lab.commit("register", BEFORE)
    lab.write(SPEC, spec_text(sd="4.0"))
    sha = lab.commit("smaller sd", AFTER)
    lab.repo.checkout(sha, detach=True)
    assert lab.repo.detached()
    result = run("check", "--json", lab.registry)
    spec = _spec(result)
    assert result.status == 1
    assert [(f["kind"], f["severity"], f["field"]) for f in _findings(spec, "drift")] == \
        [("drift", "error", "design.effect.sd")]
    status = result.json()["history"]
    assert status["repositories"][0]["detached"] is True and "HEAD is detached" in status["message"]
    assert "HEAD is detached" in run("check", lab.registry).out
    assert run("history", "mouse-diet", lab.registry).status == 1


def test_verify_on_a_detached_head_checks_that_commit(lab, run):
    lab.write(SPEC, spec_text(start=FUTURE_START, status="planned"))
    registered = lab.commit("register", BEFORE)
    assert run("register", "mouse-diet", lab.registry).status == 0
    lab.write(SPEC, spec_text(start=FUTURE_START, status="planned", analysis="Rank test."))
    changed = lab.commit("changed after registration", "2020-01-12T10:00:00+01:00")
    lab.repo.checkout(changed, detach=True)
    result = run("verify", "mouse-diet", lab.registry, "--json")
    assert result.status == 1 and "analysis_plan" in _failed_checks(result)["no unamended change since"]
    lab.repo.checkout(registered, detach=True)
    assert run("verify", "mouse-diet", lab.registry).status == 0


# ------------------------------------------------------------------ shallow clone (history command)


def test_history_command_on_a_shallow_clone_is_incomplete(lab, run, tmp_path):
    lab.write(SPEC, spec_text())
    lab.commit("register", BEFORE)
    lab.write(SPEC, spec_text(analysis="Changed."))
    lab.commit("drift hidden by the shallow clone", AFTER)
    clone = lab.repo.clone(tmp_path / "clone", depth=1)
    result = run("history", "mouse-diet", clone.root / "registry", "--json")
    payload = result.json()
    assert payload["verdict"] == "incomplete" and payload["shallow"] is True
    assert ("incomplete-history", "warning") in [(f["kind"], f["severity"]) for f in payload["findings"]]


# ------------------------------------------------------------------ spec deleted in HEAD (history, verify)


def test_history_and_verify_of_a_spec_deleted_in_head(lab, run):
    lab.write(SPEC, spec_text(start=FUTURE_START, status="planned"))
    lab.write("kept-study.yaml", spec_text("kept-study", start=FUTURE_START))
    lab.commit("register", BEFORE)
    assert run("register", "mouse-diet", lab.registry).status == 0
    (lab.registry / SPEC).unlink()
    gone = lab.commit("delete", "2020-01-12T10:00:00+01:00")
    check = run("check", "--json", lab.registry)
    spec = _spec(check)
    assert spec["findings"][0]["kind"] == "deleted" and spec["history"]["verdict"] == "deleted"
    history = run("history", "mouse-diet", lab.registry, "--json")
    payload = history.json()
    assert [r["action"] for r in payload["revisions"]] == ["added", "removed"]
    assert payload["verdict"] == "deleted"
    assert [(f["kind"], f["severity"]) for f in payload["findings"]] == [("deleted", "warning")]
    assert gone[:10] in payload["findings"][0]["message"]
    verify = run("verify", "mouse-diet", lab.registry, "--json")
    assert verify.status == 1 and f"deleted in {gone[:10]}" in _failed_checks(verify)["no unamended change since"]


# ------------------------------------------------------------------ merges


def _branches(lab, main_sd: str, side_sd: str) -> None:
    """Register, then edit design.effect.sd differently on a side branch and on main, after the start."""
    lab.write(SPEC, spec_text())
    lab.commit("register", BEFORE)
    lab.repo.checkout("HEAD", new_branch="side")
    lab.write(SPEC, spec_text(sd=side_sd))
    lab.commit("side: sd", AFTER, author=POSTDOC)
    lab.repo.checkout("main")
    lab.write(SPEC, spec_text(sd=main_sd))
    lab.commit("main: sd", AFTER)


def test_conflict_resolution_in_a_merge_is_drift(lab, run):
    _branches(lab, main_sd="6.0", side_sd="4.0")
    assert lab.repo.merge("side") is False  # both branches changed the same line: a conflict
    lab.write(SPEC, spec_text(sd="3.0"))  # resolved to a value neither branch had
    merge = lab.commit("merge side", "2020-04-07T09:00:00+02:00")
    result = run("check", "--json", lab.registry)
    drift = _findings(_spec(result), "drift")
    assert result.status == 1
    assert [f["field"] for f in drift] == ["design.effect.sd"] * 3  # main's, side's and the merge's
    merged = [f for f in drift if merge[:10] in f["message"]]
    assert len(merged) == 1 and "merge commit" in merged[0]["message"] and "6 -> 3" in merged[0]["message"]
    history = run("history", "mouse-diet", lab.registry, "--json").json()
    assert history["revisions"][-1]["action"] == "merged" and history["verdict"] == "drift"


def test_merge_taking_one_sides_value_adds_no_drift_of_its_own(lab, run):
    _branches(lab, main_sd="6.0", side_sd="4.0")
    assert lab.repo.merge("side") is False
    lab.write(SPEC, spec_text(sd="4.0"))  # the side branch's value: already judged in the side commit
    merge = lab.commit("merge side, keep its sd", "2020-04-07T09:00:00+02:00")
    drift = _findings(_spec(run("check", "--json", lab.registry)), "drift")
    assert len(drift) == 2 and not any(merge[:10] in f["message"] for f in drift)


def test_merge_resolution_covered_by_an_amendment_added_in_the_merge(lab, run):
    _branches(lab, main_sd="6.0", side_sd="4.0")
    assert lab.repo.merge("side") is False
    amendment = ("amendments:\n  - date: 2020-04-07\n    fields: [design.effect.sd]\n"
                 "    reason: The pilot cohort gave a smaller SD; agreed with the statistician before unblinding.\n")
    lab.write(SPEC, spec_text(sd="3.0", amendments=amendment))
    merge = lab.commit("merge side with an amendment", "2020-04-07T09:00:00+02:00")
    spec = _spec(run("check", "--json", lab.registry))
    assert [f["severity"] for f in _findings(spec, "amended") if merge[:10] in f["message"]] == ["info"]
    assert not any(merge[:10] in f["message"] for f in _findings(spec, "drift"))


def test_clean_merge_of_edits_to_different_fields_reports_each_edit_once(lab, run):
    lab.write(SPEC, spec_text())
    lab.commit("register", BEFORE)
    lab.repo.checkout("HEAD", new_branch="side")
    lab.write(SPEC, spec_text(analysis="Rank test."))
    lab.commit("side: analysis", AFTER)
    lab.repo.checkout("main")
    lab.write(SPEC, spec_text(alpha="0.01"))
    lab.commit("main: alpha", AFTER)
    assert lab.repo.merge("side") is True  # different lines: git merges without a conflict
    lab.commit("merge side", "2020-04-07T09:00:00+02:00")
    drift = _findings(_spec(run("check", "--json", lab.registry)), "drift")
    assert sorted(f["field"] for f in drift) == ["analysis_plan", "design.alpha"]


# ------------------------------------------------------------------ rewritten history (verdict)


def test_rewritten_history_makes_the_verdict_rewritten(lab, run):
    lab.write(SPEC, spec_text(start=FUTURE_START))
    first = lab.commit("draft", BEFORE)
    lab.write(SPEC, spec_text(start=FUTURE_START, status="planned"))
    lab.commit("ready", "2020-01-11T10:00:00+01:00")
    assert run("register", "mouse-diet", lab.registry).status == 0
    lab.repo.reset_hard(first)
    lab.write(SPEC, spec_text(start=FUTURE_START, status="planned", sd="4.0"))
    lab.commit("ready, rewritten", "2020-01-11T10:00:00+01:00")
    spec = _spec(run("check", "--json", lab.registry))
    assert [f["severity"] for f in _findings(spec, "rewritten-history")] == ["warning"]
    assert spec["history"]["verdict"] == "rewritten"
    history = run("history", "mouse-diet", lab.registry, "--json").json()
    assert history["verdict"] == "rewritten"
    assert "rewritten-history" in [f["kind"] for f in history["findings"]]


# ------------------------------------------------------------------ future-dated commits


def test_future_dated_commit_is_a_warning_and_not_clean(lab, run):
    lab.write(SPEC, spec_text(start=FUTURE_START))
    lab.commit("register", BEFORE)
    lab.write(SPEC, spec_text(start=FUTURE_START, status="planned"))
    sha = lab.commit("dated decades ahead", "2098-05-01T10:00:00+00:00")
    result = run("check", "--json", lab.registry)
    spec = _spec(result)
    future = _findings(spec, "future-date")
    assert [(f["severity"]) for f in future] == ["warning"] and sha[:10] in future[0]["message"]
    assert spec["history"]["verdict"] == "unreliable-dates"
    history = run("history", "mouse-diet", lab.registry, "--json").json()
    assert "future-date" in [f["kind"] for f in history["findings"]] and history["verdict"] == "unreliable-dates"


def test_register_refuses_a_future_dated_head(lab, run):
    lab.write(SPEC, spec_text(start=FUTURE_START))
    lab.commit("register", "2098-05-01T10:00:00+00:00")
    result = run("register", "mouse-diet", lab.registry)
    assert result.status == 1 and "later than now" in result.err
    assert lab.repo.tags("prespec/*") == []


def _forge_registration(lab, run, *, date: str) -> None:
    digest = run("hash", lab.registry / SPEC).out.split()[0]
    from registry.registration import format_message

    head = lab.repo.head()
    message = format_message({"id": "mouse-diet", "path": f"registry/{SPEC}", "commit": head,
                              "start": FUTURE_START, "content-sha256": digest, "tool": "prespec test"})
    lab.repo.tag_with_dates("prespec/mouse-diet/v1", head, message, tagger=("Lab lead", "lead@lab.example"),
                            date=date)


def test_verify_does_not_take_a_future_date_as_before_the_start(lab, run):
    # commit and tag dated 2098, before the 2099 start but later than now: the dates prove nothing
    lab.write(SPEC, spec_text(start=FUTURE_START))
    lab.commit("register", "2098-05-01T10:00:00+00:00")
    _forge_registration(lab, run, date="2098-05-02T10:00:00+00:00")
    result = run("verify", "mouse-diet", lab.registry, "--json")
    failed = _failed_checks(result)
    assert result.status == 1 and list(failed) == ["before the start"]
    assert "the commit is dated after now" in failed["before the start"]
    assert "the tag is dated after now" in failed["before the start"]


# ------------------------------------------------------------------ commit dates out of order (history, verify)


def test_date_order_in_the_history_command(lab, run):
    lab.write(SPEC, spec_text(start=FUTURE_START))
    lab.commit("register", "2020-02-01T10:00:00+00:00")
    lab.write(SPEC, spec_text(start=FUTURE_START, status="planned"))
    sha = lab.commit("backdated", "2020-01-01T10:00:00+00:00")
    result = run("history", "mouse-diet", lab.registry, "--json")
    payload = result.json()
    order = [f for f in payload["findings"] if f["kind"] == "date-order"]
    assert len(order) == 1 and order[0]["severity"] == "warning" and sha[:10] in order[0]["message"]
    assert payload["verdict"] == "unreliable-dates"
    assert "date-order" in run("history", "mouse-diet", lab.registry).out


def test_verify_fails_when_the_registered_commit_is_dated_before_its_parent(lab, run):
    lab.write(SPEC, spec_text(start=FUTURE_START))
    lab.commit("register", "2020-02-01T10:00:00+00:00")
    lab.write(SPEC, spec_text(start=FUTURE_START, status="planned"))
    lab.commit("backdated", "2020-01-01T10:00:00+00:00")
    _forge_registration(lab, run, date="2020-02-02T10:00:00+00:00")
    result = run("verify", "mouse-diet", lab.registry, "--json")
    failed = _failed_checks(result)
    assert result.status == 1 and list(failed) == ["before the start"]
    assert "dated before its parent" in failed["before the start"]


# ------------------------------------------------------------------ corrupt or missing objects


def _break_blob(lab, sha: str, how: str) -> None:
    path = _object_file(lab, sha)
    assert path.is_file(), "expected a loose object"
    if how == "overwrite":
        os.chmod(path, 0o644)
        path.write_bytes(b"not a zlib stream")  # git: the loose object is corrupt
    else:
        path.unlink()  # git: the object is missing


@pytest.mark.parametrize("how, git_says", [("overwrite", "corrupt"), ("remove", "bad file")])
def test_unreadable_spec_blob_is_an_error_naming_the_repository(lab, run, how, git_says):
    lab.write(SPEC, spec_text())
    lab.write("kept-study.yaml", spec_text("kept-study", start=FUTURE_START))
    lab.commit("register", BEFORE)
    _break_blob(lab, lab.repo.tree_files()[f"registry/{SPEC}"], how)
    result = run("check", "--json", lab.registry)
    spec = _spec(result)
    assert result.status == 1
    unreadable = _findings(spec, "history-unreadable")
    assert [f["severity"] for f in unreadable] == ["error"]
    assert str(lab.root) in unreadable[0]["message"] and git_says in unreadable[0]["message"]
    assert spec["history"]["verdict"] == "unreadable"
    assert not _findings(spec, "untracked") and not _findings(spec, "uncommitted")
    assert spec["required_per_group"] == 29 and spec["verdict"] == "history-unreadable"  # still sized
    assert _spec(result, "kept-study")["history"]["verdict"] == "clean"  # its own objects are intact
    human = run("check", lab.registry)
    assert human.status == 1 and "history-unreadable" in human.out and "Traceback" not in human.err
    history = run("history", "mouse-diet", lab.registry)
    assert history.status == 1 and "Verdict: unreadable" in history.out


def test_unreadable_older_version_hides_nothing(lab, run):
    lab.write(SPEC, spec_text())
    lab.commit("register", BEFORE)
    old_blob = lab.repo.tree_files()[f"registry/{SPEC}"]
    lab.write(SPEC, spec_text(sd="4.0"))
    lab.commit("smaller sd after the start", AFTER)
    _break_blob(lab, old_blob, "remove")
    spec = _spec(run("check", "--json", lab.registry))
    assert [f["severity"] for f in _findings(spec, "history-unreadable")] == ["error"]
    assert spec["history"]["verdict"] == "unreadable"


def test_verify_and_register_with_an_unreadable_registered_version(lab, run):
    lab.write(SPEC, spec_text(start=FUTURE_START, status="planned"))
    lab.commit("register", BEFORE)
    assert run("register", "mouse-diet", lab.registry).status == 0
    _break_blob(lab, lab.repo.tree_files()[f"registry/{SPEC}"], "overwrite")
    result = run("verify", "mouse-diet", lab.registry, "--json")
    failed = _failed_checks(result)
    assert result.status == 1 and "content hash" in failed and "corrupt" in failed["content hash"]
    assert "cannot be read" in failed["no unamended change since"]
    lab.write(SPEC, spec_text(start=FUTURE_START, status="planned", analysis="Rank test."))  # new content: register would tag HEAD
    refused = run("register", "mouse-diet", lab.registry)
    assert refused.status == 1 and "corrupt" in refused.err and "Traceback" not in refused.err


def test_missing_commit_makes_the_whole_history_unreadable(lab, run):
    lab.write(SPEC, spec_text())
    first = lab.commit("register", BEFORE)
    lab.write(SPEC, spec_text(status="collecting"))
    lab.commit("collecting", AFTER)
    _object_file(lab, first).unlink()  # git log cannot walk past HEAD any more
    result = run("check", "--json", lab.registry)
    spec = _spec(result)
    assert result.status == 1
    unreadable = _findings(spec, "history-unreadable")
    assert [f["severity"] for f in unreadable] == ["error"] and str(lab.root) in unreadable[0]["message"]
    assert spec["required_per_group"] == 29 and "history" not in spec  # sized; no history verdict claimed
    assert result.json()["history"]["problems"]
    assert "History problem" in run("check", lab.registry).out
    history = run("history", "mouse-diet", lab.registry)
    assert history.status == 1 and "cannot be read" in history.err
    verify = run("verify", "mouse-diet", lab.registry)
    assert verify.status == 1 and "Traceback" not in verify.err
