"""Drift detection from git history, on real temporary repositories (one per scenario).

The reference is git itself: each scenario builds the commits with pinned author and
committer names and dates (GIT_AUTHOR_* / GIT_COMMITTER_*), so what git records is
known exactly, and the findings are checked against it.
"""

from __future__ import annotations

import glob

import pytest

from registry.git import find_repository
from registry.yamlio import load_bytes, load_bytes_fast

from .conftest import EXAMPLES, ROOT
from .history_helpers import POSTDOC, Lab, spec_text

BEFORE = "2020-01-10T10:00:00+01:00"
AFTER = "2020-04-06T15:30:00+02:00"  # after the start 2020-03-02


@pytest.fixture
def lab(tmp_path):
    return Lab(tmp_path / "lab")


def kinds(result, spec_id="mouse-diet"):
    spec = next(s for s in result.json()["specs"] if s["id"] == spec_id)
    return [f["kind"] for f in spec["findings"]], spec


def test_clean_history_free_fields_only(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(status="collecting", extra="notes: cohort 1 started\n"))
    lab.commit("collecting", AFTER)
    result = run("check", "--json", lab.registry)
    found, spec = kinds(result)
    assert result.status == 0, result.out
    assert not {"drift", "amended", "uncommitted", "incomplete-history"} & set(found)
    assert spec["history"]["verdict"] == "clean"
    assert spec["history"]["versions"] == 2
    assert result.json()["history"]["checked"] is True


def test_drift_names_field_values_commit_date_and_author(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(analysis="Mann-Whitney test on week-8 butyrate."))
    sha = lab.commit("change analysis", AFTER, author=POSTDOC)
    result = run("check", "--json", lab.registry)
    found, spec = kinds(result)
    assert result.status == 1
    drift = [f for f in spec["findings"] if f["kind"] == "drift"]
    assert [f["field"] for f in drift] == ["analysis_plan"]
    message = drift[0]["message"]
    assert '"Welch t-test on week-8 butyrate." -> "Mann-Whitney test on week-8 butyrate."' in message
    assert sha[:10] in message and "2020-04-06" in message and "Postdoc <postdoc@lab.example>" in message
    assert drift[0]["severity"] == "error" and drift[0]["line"] == 18  # analysis_plan's line in the file
    assert spec["history"]["verdict"] == "drift"
    human = run("check", lab.registry)
    assert "drift" in human.out and "analysis_plan" in human.out


def test_numeric_drift_is_reported_with_old_and_new_value(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(sd="4.0"))
    lab.commit("smaller sd", AFTER)
    drift = [f for f in run("check", "--json", lab.registry).json()["specs"][0]["findings"] if f["kind"] == "drift"]
    assert [f["field"] for f in drift] == ["design.effect.sd"]
    assert "5 -> 4" in drift[0]["message"]


AMENDMENT = """amendments:
  - date: 2020-04-06
    fields: [{fields}]
    reason: The ethics committee asked for a rank test; approved before any outcome was seen.
"""


@pytest.mark.parametrize("covering", ["analysis_plan", "analysis_plan, design.alpha"])
def test_amended_change_is_info_not_drift(lab, run, covering):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(analysis="Mann-Whitney test.", amendments=AMENDMENT.format(fields=covering)))
    lab.commit("amendment 1", AFTER)
    result = run("check", "--json", lab.registry)
    found, spec = kinds(result)
    assert result.status == 0, result.out
    assert "drift" not in found and found.count("amended") == 1
    assert spec["history"]["verdict"] == "amended"


def test_parent_path_in_an_amendment_covers_its_children(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(sd="4.0", per_group="20", amendments=AMENDMENT.format(
        fields="design.effect, sample_size")))
    lab.commit("amendment 1", AFTER)
    found, _ = kinds(run("check", "--json", lab.registry))
    assert "drift" not in found and found.count("amended") == 2


def test_amendment_for_another_field_or_an_earlier_commit_does_not_cover(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(amendments=AMENDMENT.format(fields="design.alpha")))
    lab.commit("amendment about alpha", "2020-04-01T09:00:00+02:00")
    lab.write("mouse-diet.yaml", spec_text(analysis="Mann-Whitney test.",
                                           amendments=AMENDMENT.format(fields="design.alpha")))
    lab.commit("analysis change", AFTER)
    found, spec = kinds(run("check", "--json", lab.registry))
    assert found.count("drift") == 1
    assert next(f for f in spec["findings"] if f["kind"] == "drift")["field"] == "analysis_plan"


def test_uncommitted_edit_before_start_is_a_warning(lab, run):
    lab.write("mouse-diet.yaml", spec_text(start="2099-01-04"))
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(start="2099-01-04", analysis="Another test."))
    result = run("check", "--json", lab.registry)
    found, spec = kinds(result)
    assert result.status == 0
    uncommitted = [f for f in spec["findings"] if f["kind"] == "uncommitted"]
    assert [(f["field"], f["severity"]) for f in uncommitted] == [("analysis_plan", "warning")]


def test_uncommitted_edit_after_start_is_an_error(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(analysis="Another test."))
    result = run("check", "--json", lab.registry)
    _, spec = kinds(result)
    assert result.status == 1
    assert [(f["kind"], f["severity"]) for f in spec["findings"]] == [("uncommitted", "error")]


def test_uncommitted_edit_after_start_with_a_new_amendment_is_a_warning(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(analysis="Another test.", amendments=AMENDMENT.format(fields="analysis_plan")))
    result = run("check", "--json", lab.registry)
    _, spec = kinds(result)
    assert result.status == 0
    assert [(f["kind"], f["severity"]) for f in spec["findings"]] == [("uncommitted", "warning")]


def test_rename_plus_edit_keeps_the_history_and_is_drift(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    (lab.registry / "mouse-diet.yaml").unlink()
    lab.write("metabolism/diet-study.yaml", spec_text(sd="4.0", title="Renamed title"))
    lab.commit("move and edit", AFTER)
    result = run("check", "--json", lab.registry)
    found, spec = kinds(result)
    assert spec["path"].endswith("metabolism/diet-study.yaml")
    assert found.count("drift") == 1 and "deleted" not in found
    assert spec["history"]["versions"] == 2
    history = run("history", "mouse-diet", lab.registry, "--json").json()
    assert [r["action"] for r in history["revisions"]] == ["added", "moved"]


def test_rename_alone_after_start_is_not_drift(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    (lab.registry / "mouse-diet.yaml").rename(lab.registry / "renamed.yaml")
    lab.commit("rename", AFTER)
    found, spec = kinds(run("check", "--json", lab.registry))
    assert "drift" not in found and spec["history"]["verdict"] == "clean"


REFORMATTED = """id: mouse-diet
title: "Diet and butyrate"   # quoted now
data_collection: {start: 2020-03-02}
status: draft
sample_size:
    per_group: 29
analysis_plan: >-
  Welch t-test
  on week-8 butyrate.
amendments: []
design:
    effect: {sd: 5, difference: 4}
    power: .8
    alpha: 5.0e-2
    attrition: 0.10
    alternative: "two-sided"
    test: two-sample-t
"""


def test_reformatting_only_is_not_drift(lab, run):
    # YAML 1.2: flow and block style, quoting, folding, key order and comments give the same values
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", REFORMATTED)
    lab.commit("reformat", AFTER)
    found, spec = kinds(run("check", "--json", lab.registry))
    assert not {"drift", "amended", "uncommitted"} & set(found), found
    assert spec["history"]["verdict"] == "clean"


@pytest.mark.parametrize("alpha, sd, per_group", [("0.050", "5", "29"), ("5e-2", "5.00", "0029"), ("0.05", "5.0e0", "29")])
def test_number_spelling_is_not_drift(lab, run, alpha, sd, per_group):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(alpha=alpha, sd=sd, per_group=per_group))
    lab.commit("respell", AFTER)
    found, _ = kinds(run("check", "--json", lab.registry))
    assert not {"drift", "uncommitted"} & set(found), found


def test_shallow_clone_is_never_reported_clean(lab, run, tmp_path):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(analysis="Changed."))
    lab.commit("drift hidden by the shallow clone", AFTER)
    lab.write("mouse-diet.yaml", spec_text(analysis="Changed.", status="collecting"))
    lab.commit("status", "2020-05-04T10:00:00+02:00")
    clone = lab.repo.clone(tmp_path / "clone", depth=1)  # git clone --depth 1 file://...
    assert clone.is_shallow()
    result = run("check", "--json", clone.root / "registry")
    found, spec = kinds(result)
    assert "incomplete-history" in found
    assert spec["history"]["verdict"] == "incomplete" and spec["history"]["shallow"] is True
    assert result.json()["history"]["repositories"][0]["shallow"] is True
    assert "shallow" in run("check", clone.root / "registry").out


def test_history_starting_after_the_start_is_incomplete(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("first commit, already after the start", AFTER)
    found, spec = kinds(run("check", "--json", lab.registry))
    assert "incomplete-history" in found and spec["history"]["verdict"] == "incomplete"


def test_deleted_spec_is_reported_at_its_last_path(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.write("kept.yaml", spec_text("kept-study"))
    lab.commit("register", BEFORE)
    (lab.registry / "mouse-diet.yaml").unlink()
    sha = lab.commit("delete", AFTER)
    result = run("check", "--json", lab.registry)
    deleted = [s for s in result.json()["specs"] if s["id"] == "mouse-diet"]
    assert len(deleted) == 1 and deleted[0]["path"].endswith("registry/mouse-diet.yaml")
    assert deleted[0]["verdict"] == "deleted"
    finding = deleted[0]["findings"][0]
    assert finding["kind"] == "deleted" and finding["severity"] == "warning" and sha[:10] in finding["message"]
    assert "mouse-diet" in run("check", lab.registry).out


def test_uncommitted_deletion_is_reported(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.write("kept.yaml", spec_text("kept-study"))
    lab.commit("register", BEFORE)
    (lab.registry / "mouse-diet.yaml").unlink()
    specs = run("check", "--json", lab.registry).json()["specs"]
    gone = next(s for s in specs if s["id"] == "mouse-diet")
    assert gone["findings"][0]["kind"] == "deleted" and "not committed" in gone["findings"][0]["message"]


def test_commit_dated_before_its_parent(lab, run):
    lab.write("mouse-diet.yaml", spec_text(start="2099-01-04"))
    lab.commit("register", "2020-02-01T10:00:00+00:00")
    lab.write("mouse-diet.yaml", spec_text(start="2099-01-04", status="planned"))
    sha = lab.commit("backdated", "2020-01-01T10:00:00+00:00")
    found, spec = kinds(run("check", "--json", lab.registry))
    assert found.count("date-order") == 1
    assert sha[:10] in next(f for f in spec["findings"] if f["kind"] == "date-order")["message"]


def test_committer_date_counts_not_author_date(lab, run):
    # authored before the start, committed after it: git's committer date is when it entered the history
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(analysis="Changed."))
    lab.commit("rebased change", "2020-02-01T10:00:00+01:00", committer_date=AFTER)
    found, _ = kinds(run("check", "--json", lab.registry))
    assert "drift" in found


def test_moving_the_start_later_after_it_passed_is_drift(lab, run):
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(start="2020-06-01", sd="4.0"))
    lab.commit("postpone the start and change the sd", AFTER)
    found, spec = kinds(run("check", "--json", lab.registry))
    drifted = {f["field"] for f in spec["findings"] if f["kind"] == "drift"}
    assert drifted == {"data_collection.start", "design.effect.sd"}


def test_registry_config_can_lock_more_fields(lab, run):
    (lab.registry / ".prespec.yaml").write_text("locked_fields: [title]\n", encoding="utf-8")
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("register", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(title="A new title"))
    lab.commit("retitle", AFTER)
    found, spec = kinds(run("check", "--json", lab.registry))
    assert [f["field"] for f in spec["findings"] if f["kind"] == "drift"] == ["title"]


def test_rewritten_history_under_a_registration_tag(lab, run):
    lab.write("mouse-diet.yaml", spec_text(start="2099-01-04"))
    first = lab.commit("draft", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(start="2099-01-04", status="planned"))
    lab.commit("ready", "2020-01-11T10:00:00+01:00")
    assert run("register", "mouse-diet", lab.registry).status == 0
    assert "rewritten-history" not in kinds(run("check", "--json", lab.registry))[0]
    # rewrite: drop the registered commit and put another in its place (what a rebase or amend does)
    lab.repo.reset_hard(first)
    lab.write("mouse-diet.yaml", spec_text(start="2099-01-04", status="planned", sd="4.0", per_group="50"))
    lab.commit("ready, rewritten", "2020-01-11T10:00:00+01:00")
    found, spec = kinds(run("check", "--json", lab.registry))
    assert found.count("rewritten-history") == 1
    assert "prespec/mouse-diet/v1" in next(f["message"] for f in spec["findings"] if f["kind"] == "rewritten-history")


def test_outside_a_repository_says_so_once(tmp_path, run):
    folder = tmp_path / "plain"
    folder.mkdir()
    (folder / "mouse-diet.yaml").write_text(spec_text(), encoding="utf-8")
    assert find_repository(folder) is None
    human = run("check", folder)
    assert human.out.count("No git history checked") == 1
    status = run("check", "--json", folder).json()["history"]
    assert status["checked"] is False and status["message"]


def test_example_registry_in_this_repository_has_no_false_drift(run):
    # the examples start in 2027 or later, after every commit of this project
    result = run("check", "--json", EXAMPLES)
    if find_repository(ROOT) is None:
        pytest.skip("not a git checkout")
    for spec in result.json()["specs"]:
        assert not {"drift", "amended", "incomplete-history", "date-order", "deleted"} & \
            {f["kind"] for f in spec["findings"]}, spec


@pytest.mark.parametrize("path", sorted(glob.glob(str(EXAMPLES / "*.yaml"))))
def test_fast_loader_gives_the_same_values_and_positions(path):
    raw = open(path, "rb").read()
    slow, fast = load_bytes(raw, path), load_bytes_fast(raw, path)
    assert (slow.data, slow.value_positions, slow.key_positions) == (fast.data, fast.value_positions,
                                                                      fast.key_positions)


@pytest.mark.parametrize("text", [
    "a: 010\nb: 0o10\nc: yes\nd: 1_000\ne: 1:30\nf: .5\ng: 2027-01-01\nh: ~\ni:\nj: '1'\nk: 1e3\nl: 0x1F\nm: No\n",
    "a: >\n  folded\n  text\n\n  kept\nb: |\n  literal\n",
])
def test_fast_loader_resolves_scalars_as_yaml_1_2(text):
    # YAML 1.2 core schema: 'yes'/'No' are text, 010 is decimal 10, 1:30 is text (no sexagesimal)
    raw = text.encode()
    assert load_bytes_fast(raw, "x").data == load_bytes(raw, "x").data
