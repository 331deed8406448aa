"""The late-amendment path: a locked change committed after the start without an amendment (drift)
becomes a disclosed deviation once a later commit adds an amendment naming the field and the
change's commit or date; on real temporary repositories with pinned dates (git's own records are
the reference, and the delay is the calendar difference of the two committer dates).
"""

from __future__ import annotations

import pytest

from .history_helpers import POSTDOC, Lab, spec_text

BEFORE = "2020-01-10T10:00:00+01:00"
CHANGED = "2020-04-06T15:30:00+02:00"  # after the start 2020-03-02
DISCLOSED = "2020-04-20T09:00:00+02:00"  # 14 days after the change

CHANGE = dict(analysis="Mann-Whitney test on week-8 butyrate.", status="collecting")


def _amendment(discloses: str, fields: str = "[analysis_plan]") -> str:
    return ("amendments:\n  - date: 2020-04-20\n    fields: " + fields + "\n"
            "    reason: Switched to a rank test after seeing skewed pilot values; disclosed late.\n"
            f"    discloses: '{discloses}'\n")


@pytest.fixture
def drifted(tmp_path):
    lab = Lab(tmp_path / "lab")
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("design", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(**CHANGE))
    sha = lab.commit("change analysis", CHANGED, author=POSTDOC)
    return lab, sha


def _findings(result, kind):
    spec = next(s for s in result.json()["specs"] if s["id"] == "mouse-diet")
    return [f for f in spec["findings"] if f["kind"] == kind], spec


def test_drift_says_how_to_disclose_it(drifted, run):
    lab, sha = drifted
    drift, _ = _findings(run("check", "--json", lab.registry), "drift")
    assert len(drift) == 1 and f"'discloses: {sha[:10]}'" in drift[0]["message"]


@pytest.mark.parametrize("by", ["commit", "date"])
def test_a_later_amendment_discloses_the_change(drifted, run, by):
    lab, sha = drifted
    named = sha[:8] if by == "commit" else "2020-04-06"  # the change's commit, or its committer date
    lab.write("mouse-diet.yaml", spec_text(**CHANGE, amendments=_amendment(named)))
    lab.commit("disclose the analysis change", DISCLOSED)
    result = run("check", "--json", lab.registry)
    assert result.status == 0, result.out
    deviation, spec = _findings(result, "disclosed-deviation")
    assert not _findings(result, "drift")[0]
    assert len(deviation) == 1 and deviation[0]["severity"] == "warning" and deviation[0]["field"] == "analysis_plan"
    assert "disclosed 14 day(s) later" in deviation[0]["message"] and sha[:10] in deviation[0]["message"]
    assert spec["history"]["verdict"] == "deviation"
    history = run("history", "mouse-diet", lab.registry, "--json")
    assert history.status == 0
    changes = [c for r in history.json()["revisions"] for c in r["changes"] if c["field"] == "analysis_plan"]
    assert changes[0]["disclosure"]["discloses"] in (sha[:8], "2020-04-06")


@pytest.mark.parametrize("discloses, fields", [
    ("0000000", "[analysis_plan]"),          # another commit
    ("2020-04-07", "[analysis_plan]"),       # another date
    ("{sha}", "[design.alpha]"),             # another field
])
def test_an_amendment_that_names_something_else_leaves_the_drift(drifted, run, discloses, fields):
    lab, sha = drifted
    lab.write("mouse-diet.yaml", spec_text(**CHANGE, amendments=_amendment(discloses.format(sha=sha[:7]), fields)))
    lab.commit("an amendment for something else", DISCLOSED)
    result = run("check", "--json", lab.registry)
    assert result.status == 1 and len(_findings(result, "drift")[0]) == 1


def test_a_disclosed_deviation_after_registration_in_verify(tmp_path, run):
    lab = Lab(tmp_path / "lab")
    lab.write("mouse-diet.yaml", spec_text(start="2099-01-04"))
    lab.commit("design", BEFORE)
    assert run("register", "mouse-diet", lab.registry).status == 1  # a draft is refused
    lab.write("mouse-diet.yaml", spec_text(start="2099-01-04", status="planned"))
    lab.commit("ready", "2020-01-11T10:00:00+01:00")
    assert run("register", "mouse-diet", lab.registry).status == 0
    # commits dated after the 2099 start (pinned dates): a locked change, then its disclosure
    lab.write("mouse-diet.yaml", spec_text(start="2099-01-04", status="planned", per_group="40"))
    sha = lab.commit("more animals", "2099-02-01T10:00:00+01:00")
    failed = run("verify", "mouse-diet", lab.registry, "--json")
    assert failed.json()["holds"] is False
    lab.write("mouse-diet.yaml", spec_text(start="2099-01-04", status="planned", per_group="40", amendments=(
        "amendments:\n  - date: 2099-02-03\n    fields: [sample_size]\n    reason: More animals, disclosed late.\n"
        f"    discloses: '{sha[:7]}'\n")))
    lab.commit("disclose", "2099-02-03T10:00:00+01:00")
    result = run("verify", "mouse-diet", lab.registry, "--json")
    out = result.json()
    assert out["holds"] is True and out["deviations"] and "sample_size" in out["deviations"][0]
    human = run("verify", "mouse-diet", lab.registry)
    assert "disclosed deviation" in human.out


def test_the_summary_shows_the_disclosed_deviation(drifted, run, tmp_path):
    lab, sha = drifted
    lab.write("mouse-diet.yaml", spec_text(**CHANGE, amendments=_amendment(sha[:10])))
    lab.commit("disclose the analysis change", DISCLOSED)
    assert run("render", "mouse-diet", "--registry", lab.registry, "--out", tmp_path / "out").status == 0
    page = (tmp_path / "out" / "mouse-diet.md").read_text(encoding="utf-8")
    assert "disclosed-deviation" in page and "disclosed 14 day(s) later" in page
    assert "no amendment entry covering it" not in page
