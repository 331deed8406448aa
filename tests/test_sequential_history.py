"""Interim looks in git history: an unplanned look committed after the start, and a recorded look
rewritten later."""

from __future__ import annotations

import pytest

from .history_helpers import Lab, spec_text

BEFORE = "2020-01-10T10:00:00+01:00"
LOOK_1 = "2020-05-06T15:30:00+02:00"  # after the start 2020-03-02
LOOK_2 = "2020-07-06T15:30:00+02:00"

SEQUENTIAL = "  sequential:\n    looks: 3\n    efficacy: obrien-fleming\n"


def _text(looks: str = "", amendments: str = "amendments: []\n") -> str:
    # 26 analysable per group for the fixed design; three O'Brien-Fleming-type looks need 27 (+10%: 30)
    text = spec_text(per_group="30", status="collecting", extra=looks, amendments=amendments)
    return text.replace("  attrition: 0.1\n", "  attrition: 0.1\n" + SEQUENTIAL)


def _look(date: str, t: float, z: float, decision: str = "continue") -> str:
    return f"  - date: {date}\n    information_fraction: {t}\n    z: {z}\n    decision: {decision}\n"


@pytest.fixture
def lab(tmp_path):
    return Lab(tmp_path / "lab")


def _findings(run, lab):
    result = run("check", "--json", lab.registry)
    (spec,) = result.json()["specs"]
    return result.status, [f for f in spec["findings"] if f["kind"] == "look-off-plan"], spec


def test_planned_looks_committed_after_the_start_are_clean(lab, run):
    lab.write("mouse-diet.yaml", _text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", _text("interim_looks:\n" + _look("2020-05-04", 0.33, 0.8)))
    lab.commit("first interim look", LOOK_1)
    status, off, spec = _findings(run, lab)
    assert status == 0 and not off, off
    assert spec["history"]["verdict"] == "clean"


def test_an_unplanned_extra_look_after_the_start_is_flagged(lab, run):
    lab.write("mouse-diet.yaml", _text())
    lab.commit("register", BEFORE)
    looks = "interim_looks:\n" + _look("2020-05-04", 0.33, 0.8) + _look("2020-06-01", 0.5, 1.1)
    lab.write("mouse-diet.yaml", _text(looks))
    lab.commit("two interim looks", LOOK_2)
    status, off, _ = _findings(run, lab)
    assert status == 1
    assert any(f["field"] == "interim_looks.1.information_fraction" and f["line"] for f in off), off


def test_rewriting_a_recorded_look_is_flagged(lab, run):
    lab.write("mouse-diet.yaml", _text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", _text("interim_looks:\n" + _look("2020-05-04", 0.33, 3.9, "continue")))
    lab.commit("first interim look", LOOK_1)
    # the z that crossed the boundary is later edited down so the look seems to be on plan
    lab.write("mouse-diet.yaml", _text("interim_looks:\n" + _look("2020-05-04", 0.33, 1.9, "continue")))
    lab.commit("tidy", LOOK_2)
    status, off, _ = _findings(run, lab)
    assert status == 1
    assert any("changed interim look 1" in f["message"] for f in off), off


def test_an_amendment_in_the_same_commit_allows_a_correction(lab, run):
    lab.write("mouse-diet.yaml", _text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", _text("interim_looks:\n" + _look("2020-05-04", 0.33, 1.2)))
    lab.commit("first interim look", LOOK_1)
    amendment = ("amendments:\n  - date: 2020-07-06\n    fields: [interim_looks]\n"
                 "    reason: The z of look 1 was transcribed wrongly; corrected from the analysis output.\n")
    lab.write("mouse-diet.yaml", _text("interim_looks:\n" + _look("2020-05-04", 0.33, 1.3), amendment))
    lab.commit("correct look 1", LOOK_2)
    status, off, _ = _findings(run, lab)
    assert not [f for f in off if f["severity"] == "error"], off
