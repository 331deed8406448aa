"""Regression tests for the edges between prespec and the world around a spec: what git history
can say, what files a spec points at, what reaches a terminal, repositories with many tags.

Each scenario is a real temporary git repository with pinned names, emails and dates (see
tests/history_helpers.py). The reference is git itself (what it records and accepts) and the
rules of docs/reviewer-guide.md.
"""

from __future__ import annotations

import pytest

from registry.registration import format_message

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
