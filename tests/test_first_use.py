"""What a new user meets first: one number per question, sides named right, templates that pass check,
hints that point the right way, one command-line grammar and clean terminal text."""

from __future__ import annotations

import math
import re
import textwrap
from pathlib import Path

import pytest
from scipy.stats import norm

from registry.power import family_names
from registry.power.results import power_text

CLUSTER = """\
id: classroom-recall
title: Spaced practice and word recall in classrooms
status: planned
data_collection:
  start: 2027-03-01
design:
  test: two-sample-t
  effect:
    d: 0.5
  attrition: 0.1
  cluster:
    size: 10
    icc: 0.05
sample_size:
  per_group: {planned}
amendments: []
"""


def _write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


# ---------------------------------------------------------------- one number per question

def test_size_says_the_cluster_enrolment_json_reports(run):
    # one number everywhere: the human text says the enrolment --json reports, in whole clusters, and
    # that enrolment covers the analysable need after attrition (the need itself is checked against the
    # noncentral t on cluster means in the sizing tests)
    argv = ("size", "two-sample-t", "--d", "0.5", "--param", "cluster.size=10", "--param", "cluster.icc=0.05",
            "--param", "attrition=0.1")
    data = run(*argv, "--json").json()
    enrol, clusters = data["enrolment_per_group"], data["clusters_per_group"][0]
    assert data["clusters_per_group"] == [clusters, clusters] and enrol == clusters * 10
    assert enrol == 10 * math.ceil(math.ceil(data["n_per_group"] / 0.9 - 1e-9) / 10)
    text = run(*argv).out
    assert f"{enrol} per group: {clusters} clusters of 10" in text
    assert f"{enrol * 2} in total" in text


def test_check_never_calls_a_power_at_the_target_below_it(tmp_path, run):
    data = run("size", "two-sample-t", "--d", "0.5", "--param", "cluster.size=10", "--param", "cluster.icc=0.05",
               "--param", "attrition=0.1", "--json").json()
    enrol, clusters = data["enrolment_per_group"], data["clusters_per_group"][0]
    # five short of the last cluster: the power there reaches the target, but the plan is no whole clusters
    _write(tmp_path, "classroom-recall.yaml", CLUSTER.format(planned=enrol - 5))
    report = run("check", tmp_path, "--json").json()["specs"][0]
    finding = next(f for f in report["findings"] if f["field"] == "sample_size.per_group")
    assert report["achieved_power"] >= 0.8
    assert "below" not in finding["message"]
    assert finding["kind"] == "partial-clusters"
    assert f"enrol {enrol} per group: {clusters} clusters of 10" in finding["message"]
    _write(tmp_path, "classroom-recall.yaml", CLUSTER.format(planned=enrol))
    assert run("check", tmp_path, "--json").json()["specs"][0]["verdict"] == "ok"


@pytest.mark.parametrize("power, target, digits", [
    (0.79962, 0.8, 4),     # would print 0.800 at 3 decimals
    (0.7999996, 0.8, 7),
    (0.80146, 0.8, 3),     # at or above: 3 decimals are honest
    (0.5, 0.8, 3),
])
def test_a_printed_power_below_the_target_reads_below_it(power, target, digits):
    # common practice: a reported number must compare with the target as the value it stands for does
    text = power_text(power, target)
    assert len(text.split(".")[1]) == digits
    assert (float(text) < target) == (power < target)


def test_log_rank_says_how_events_are_rounded(run):
    # Schoenfeld (1983): events = 4 (z_{1-alpha/2} + z_{1-beta})^2 / ln(HR)^2 for equal allocation
    events = 4 * (norm.ppf(0.975) + norm.ppf(0.8)) ** 2 / math.log(0.6) ** 2
    out = run("size", "log-rank", "--hr", "0.6", "--param", "event_probability=0.7").out
    data = run("size", "log-rank", "--hr", "0.6", "--param", "event_probability=0.7", "--json").json()
    line = next(row for row in out.splitlines() if row.strip().startswith("events"))
    expected = data["n_total"] * 0.7  # expected events from the analysable units, unrounded
    # the size is simulation-verified, so the events are those of the verified n, rounded up, and the
    # formula's events are named as the starting point
    assert f"{math.ceil(expected - 1e-9)} to observe" in line and f"expected to give {expected:.1f}, rounded up" in line
    assert data["events"] == math.ceil(expected - 1e-9) and f"formula alone asks for {events:.1f}" in line


@pytest.mark.parametrize("argv, sides", [
    (("one-way-anova", "--f", "0.25", "--groups", "4"), "F test, no sides"),
    (("linear-regression", "--f2", "0.15", "--predictors", "3"), "F test, no sides"),
    (("chi-square", "--w", "0.3", "--df", "2"), "chi-square test, no sides"),
    (("noninferiority-t", "--difference", "0", "--sd", "1", "--param", "margin=0.5"), "one-sided (higher is better)"),
    (("two-sample-t", "--d", "0.5", "--alternative", "greater"), "one-sided (an increase)"),
])
def test_sides_are_named_as_the_test_has_them(run, argv, sides):
    # common practice: F and chi-square tests reject in the upper tail only and have no sides;
    # a non-inferiority test is one-sided by construction
    out = run("size", *argv).out
    line = next(row for row in out.splitlines() if row.strip().startswith("assumptions"))
    assert sides in line
    if sides != "two-sided":
        assert "two-sided" not in line


# ---------------------------------------------------------------- templates and hints

@pytest.mark.parametrize("test", family_names())
def test_every_family_template_passes_check(tmp_path, run, test):
    # the catalog is the list of families, so a family added later is covered here too; the only
    # warnings an unedited template may get are the reminders to replace its placeholder text
    assert run("new", f"new-{test}", tmp_path, "--test", test).status == 0
    report = run("check", tmp_path, "--json", "--no-history").json()["specs"][0]
    bad = [f for f in report["findings"] if f["severity"] in ("error", "warning") and f["kind"] != "template-text"]
    assert report["verdict"] == "ok" and not bad, bad
    assert any(f["kind"] == "template-text" for f in report["findings"])
    # the example assumptions (a distribution, a layout, factor names) are a lab's to keep, not placeholders
    assert not [f for f in report["findings"] if f["kind"] == "template-text"
                and f["field"].startswith("design.effect.")]


def test_placeholder_texts_are_those_of_every_familys_template_at_any_size():
    # check reads one template's texts, without sizing its example design (a simulation for some
    # families); they must be the prose of the template new writes for every family, whatever its
    # size. The design's assumptions (design.effect: numbers, a distribution, factor names) are the
    # family's example and a lab may keep them, so they are never placeholders.
    from datetime import date

    from registry.checks import _ID_SENTINEL, _TEMPLATE_CHOICES, _template_texts
    from registry.commands.new import template
    from registry.yamlio import load_bytes_fast

    def prose(value, loc=()):
        if isinstance(value, dict):
            return {k: v for key, child in value.items() for k, v in prose(child, (*loc, key)).items()}
        if isinstance(value, list):
            return {k: v for index, child in enumerate(value) for k, v in prose(child, (*loc, index)).items()}
        if isinstance(value, str) and loc[-1] != "id" and ".".join(map(str, loc)) not in _TEMPLATE_CHOICES \
                and loc[:2] != ("design", "effect"):
            return {loc: value}
        return {}

    texts = dict(_template_texts())
    assert ("question",) in texts and ("outcomes", "primary", "name") in texts
    assert not [loc for loc in texts if loc[:2] == ("design", "effect")]
    for test in family_names():
        for size in (1, 9_999):
            data = load_bytes_fast(template(_ID_SENTINEL, test, None, "schema.json", date(2000, 1, 1),
                                            per_group=size).encode(), "t").data
            assert data["sample_size"]["per_group"] == size
            assert prose(data) == texts, test
    sized = load_bytes_fast(template(_ID_SENTINEL, "two-sample-t", None, "schema.json", date(2000, 1, 1)).encode(),
                            "t").data
    # without per_group the example design is sized: d = 4 / 5 = 0.8 needs 26 analysable units per group
    # (Cohen 1988, Table 2.4.1, from memory), enrolled as ceil(26 / 0.9) = 29 for 10% attrition
    assert sized["sample_size"]["per_group"] == 29


@pytest.mark.parametrize("given, meant", [
    ("unpaired-t", "two-sample-t"),       # one edit from paired-t, but the opposite design
    ("independent-t", "two-sample-t"),
    ("dependent-t", "paired-t"),
    ("wilcoxon-rank-sum", "mann-whitney"),
    ("tost", "equivalence-t"),
    ("paried-t", "paired-t"),             # a typo still gets the closest spelling
    ("Two-Sample-T", "two-sample-t"),
])
def test_family_hints_prefer_known_synonyms(run, given, meant):
    # common practice: these names are used for these designs in statistics textbooks
    result = run("size", given, "--d", "0.5")
    assert result.status == 2 and f"did you mean '{meant}'?" in result.err


@pytest.mark.parametrize("family", ["noninferiority-t", "equivalence-t"])
def test_a_standardised_effect_on_a_raw_unit_design_points_to_difference_and_sd(tmp_path, run, family):
    # common practice: Cohen's d is a difference divided by an SD; 'sd' (the closest spelling of 'd')
    # would point the wrong way
    result = run("size", family, "--param", "d=0.3")
    assert result.status == 2 and "did you mean 'sd'" not in result.err
    assert "give difference and sd" in result.err
    spec = _write(tmp_path, "margin-trial.yaml", CLUSTER.format(planned=50).replace("two-sample-t", family)
                  .replace("classroom-recall", "margin-trial").replace("  cluster:\n    size: 10\n    icc: 0.05\n", "")
                  .replace("    d: 0.5\n", "    d: 0.5\n    margin: 0.2\n"))
    checked = run("check", "--json", "--no-history", spec).json()
    messages = [f["message"] for s in checked["specs"] for f in s["findings"] if f["field"] == "design.effect.d"]
    assert messages and all("give difference and sd" in m and "did you mean" not in m for m in messages), messages


def test_sides_hint_names_the_one_sided_choices(tmp_path, run):
    assert run("new", "one-tail", tmp_path).status == 0
    spec = tmp_path / "one-tail.yaml"
    spec.write_text(re.sub(r"alternative: two-sided.*", "alternative: one-sided", spec.read_text()))
    finding = next(f for f in run("check", tmp_path, "--json").json()["specs"][0]["findings"]
                   if f["field"] == "design.alternative")
    assert "use greater or less" in finding["message"]
    result = run("size", "two-sample-t", "--d", "0.5", "--alternative", "one-sided")
    assert result.status == 2 and "use greater or less" in result.err


# ---------------------------------------------------------------- one command-line grammar

def test_size_options_are_named_as_the_spec_names_them(run):
    by_option = run("size", "noninferiority-t", "--difference", "0", "--sd", "1", "--margin", "0.5",
                    "--allocation-ratio", "2", "--json").json()
    by_param = run("size", "noninferiority-t", "--difference", "0", "--sd", "1", "--param", "margin=0.5",
                   "--param", "allocation_ratio=2", "--json").json()
    assert by_option == by_param
    assert by_option["group_sizes"][1] == 2 * by_option["group_sizes"][0]
    help_text = run("size", "--help").out
    assert "N2_OVER_N1" not in help_text
    for option in ("--allocation-ratio", "--margin", "--p0", "--sd1", "--sd2", "--cluster-icc", "--d", "--f",
                   "--f2", "--w", "--hr"):
        assert option in help_text


def test_simulate_leaves_the_family_alone(run):
    before = run("size", "--simulate", "two-sample-t", "--d", "0.8", "--json").json()
    after = run("size", "two-sample-t", "--d", "0.8", "--simulate", "--json").json()
    assert before["test"] == "two-sample-t" and before["simulation"] == after["simulation"]


def test_one_error_prefix(run):
    result = run("size", "two-sample-t", "--d", "x")
    assert result.status == 2
    assert result.err.count("prespec") == 1 and result.err.startswith("prespec size: error:")


def test_registry_is_a_positional_path_everywhere(tmp_path, run):
    from .conftest import EXAMPLES

    assert run("new", "gut-transit", tmp_path / "reg").status == 0
    assert (tmp_path / "reg" / "gut-transit.yaml").is_file()
    out = tmp_path / "site"
    assert run("render", "--all", EXAMPLES, "--out", out, "--no-history").status == 0
    assert (out / "index.html").is_file()
    one = run("render", "fibre-butyrate", EXAMPLES, "--no-history", "--json").json()
    assert one["written"] == [] and one["specs"][0]["markdown"].startswith("[//]: # (prespec")
    data = run("hash", "fibre-butyrate", EXAMPLES, "--json").json()
    assert re.fullmatch(r"[0-9a-f]{64}", data["sha256"])


def test_render_without_out_writes_nothing(tmp_path, run):
    from .conftest import EXAMPLES
    import shutil

    registry = tmp_path / "reg"
    shutil.copytree(EXAMPLES, registry)
    before = sorted(p.name for p in registry.rglob("*"))
    result = run("render", "fibre-butyrate", registry, "--no-history")
    assert result.status == 0 and "# High-fibre diet" in result.out
    assert sorted(p.name for p in registry.rglob("*")) == before


# ---------------------------------------------------------------- registries that hold other YAML

ENVIRONMENT = "name: lab-env\nchannels:\n  - conda-forge\ndependencies:\n  - python=3.11\n  - numpy\n"


def test_yaml_that_is_plainly_not_a_spec_is_skipped_with_one_line(tmp_path, run):
    from .conftest import EXAMPLES

    (tmp_path / "fibre-butyrate.yaml").write_text((EXAMPLES / "fibre-butyrate.yaml").read_text())
    (tmp_path / "environment.yaml").write_text(ENVIRONMENT)
    (tmp_path / "ci").mkdir()
    (tmp_path / "ci" / "jobs.yml").write_text("jobs:\n  test:\n    runs-on: any\n")
    result = run("check", tmp_path, "--no-history")
    assert result.status == 0
    assert [line for line in result.err.splitlines() if "skipped" in line] == [result.err.strip()]
    assert "environment.yaml" in result.err and "jobs.yml" in result.err
    data = run("check", tmp_path, "--no-history", "--json").json()
    assert [s["id"] for s in data["specs"]] == ["fibre-butyrate"] and len(data["skipped"]) == 2
    # a file named on the command line is always read, and a non-spec is then an error
    named = run("check", tmp_path / "environment.yaml", "--no-history", "--json").json()
    assert named["specs"][0]["verdict"] == "not-a-spec"


def test_include_and_exclude_globs_choose_the_spec_files(tmp_path, run):
    from .conftest import EXAMPLES

    (tmp_path / "specs" / "old").mkdir(parents=True)
    (tmp_path / "specs" / "fibre-butyrate.yaml").write_text((EXAMPLES / "fibre-butyrate.yaml").read_text())
    (tmp_path / "specs" / "old" / "sirt3-knockdown.yaml").write_text((EXAMPLES / "sirt3-knockdown.yaml").read_text())
    (tmp_path / "notes.yaml").write_text("title: a lab notebook page\n")  # has a spec field: not plainly other
    assert run("check", tmp_path, "--no-history").status == 1
    (tmp_path / ".prespec.yaml").write_text("include: ['specs/**/*.yaml']\nexclude: ['old/']\n")
    data = run("check", tmp_path, "--no-history", "--json").json()
    assert [s["id"] for s in data["specs"]] == ["fibre-butyrate"] and data["skipped"] == []
    (tmp_path / ".prespec.yaml").write_text("exclude: ['/etc/x.yaml']\n")
    result = run("check", tmp_path, "--no-history")
    assert result.status == 1 and "exclude" in result.err and "relative to the registry folder" in result.err


def test_commands_that_take_an_id_read_the_files_check_reads(tmp_path, run):
    from .conftest import EXAMPLES

    text = (EXAMPLES / "fibre-butyrate.yaml").read_text()
    (tmp_path / "drafts").mkdir()
    (tmp_path / "fibre-butyrate.yaml").write_text(text)
    (tmp_path / "drafts" / "copy.yaml").write_text(text)  # an old draft with the same id, left out by exclude
    (tmp_path / ".prespec.yaml").write_text("exclude: ['drafts/']\n")
    assert run("check", tmp_path, "--no-history").status == 0
    hashed = run("hash", "fibre-butyrate", tmp_path, "--json")
    assert hashed.status == 0 and hashed.json()["path"].endswith("fibre-butyrate.yaml"), hashed.err
    (tmp_path / "fibre-butyrate.yaml").unlink()
    missing = run("hash", "fibre-butyrate", tmp_path)
    assert missing.status == 2 and "leave out 1 YAML file" in missing.err and "copy.yaml" in missing.err


# ---------------------------------------------------------------- terminal output

def test_no_line_ends_in_padding(run):
    from .conftest import EXAMPLES

    for argv in (("check", EXAMPLES, "--no-history"), ("size", "two-sample-t", "--d", "0.5")):
        out = run(*argv).out
        assert out and not [line for line in out.splitlines() if line != line.rstrip()]


@pytest.mark.parametrize("value, shown", [
    ("x" * 200, "'" + "x" * 75 + "...'"),   # a cut text keeps its closing quote
    (True, "true"),                          # YAML spelling, not Python's
    (None, "null"),
    ({"method": "bonferroni"}, "{method: 'bonferroni'}"),
])
def test_values_in_messages_are_spelled_as_in_yaml(value, shown):
    from registry.validation import _short

    assert _short(value) == shown


def test_history_values_keep_their_quotes_and_amendments_read_as_text():
    from registry.history import show, show_change

    cut = show("a" * 100)
    assert cut.startswith('"') and cut.endswith('..."')
    amendment = {"date": "2027-05-06", "fields": ["exclusion_criteria"], "reason": "Two volunteers arrived late.",
                 "approved_by": "Unit statistician"}
    text = show_change([], [amendment], width=1000)
    assert "{" not in text and "approved by Unit statistician" in text and "fields exclusion_criteria" in text


def test_hints_for_ids_with_capitals_and_pilot_columns(tmp_path, run):
    from .conftest import EXAMPLES

    assert "did you mean 'gut-transit'?" in run("new", "Gut_Transit", tmp_path).err
    assert "did you mean 'fibre-butyrate'?" in run("hash", "Fibre-Butyrate", EXAMPLES).err
    assert "did you mean 'fibre-butyrate'?" in run("render", "Fibre-Butyrate", EXAMPLES, "--no-history").err
    csv = tmp_path / "controls.csv"
    csv.write_text("mouse,butyrate\n1,2.5\n2,3.1\n3,2.2\n")
    assert "did you mean 'butyrate'?" in run("pilot", csv, "--column", "Butyrate").err


def test_no_python_reprs_in_size_output(run):
    out = run("size", "noninferiority-t", "--difference", "0", "--sd", "1", "--margin", "0.5",
              "--multiplicity-outcomes", "2").out
    assert "True" not in out and "method='" not in out and "outcomes=" not in out


# ---------------------------------------------------------------- the summary page and the site

@pytest.fixture(scope="module")
def demo_site(tmp_path_factory):
    from registry.cli import main

    root = tmp_path_factory.mktemp("lab")
    main(["demo", str(root / "lab")])
    out = root / "site"
    main(["render", "--all", str(root / "lab" / "registry"), "--out", str(out)])
    return out


def test_page_top_says_dates_registration_and_verdicts(demo_site):
    text = (demo_site / "fibre-butyrate.md").read_text()
    top = text.split("## Key numbers")[0]
    assert "Rendered " in top and "data collection starts 2024-03-04" in top
    assert "registration: **✔ registered** (`prespec/fibre-butyrate/v1`)" in top
    drifted = (demo_site / "exercise-blood-pressure.md").read_text().split("## Key numbers")[0]
    assert "history: **✖ DRIFT**" in drifted  # words and a symbol, not colour alone
    html = (demo_site / "exercise-blood-pressure.html").read_text()
    assert '<strong class="flag flag-bad">✖ DRIFT</strong>' in html
    assert "@top-left { content: \"exercise-blood-pressure" in html and "counter(pages)" in html


def test_timeline_lists_versions_registrations_and_locked_changes(demo_site):
    text = (demo_site / "exercise-blood-pressure.md").read_text()
    timeline = text.split("### Timeline of versions")[1].split("###")[0]
    assert "| v1 |" in timeline and "| v2 |" in timeline
    assert "`analysis_plan`:" in timeline and "(**drift**)" in timeline
    registered = (demo_site / "fibre-butyrate.md").read_text().split("### Timeline of versions")[1].split("###")[0]
    assert "registered as `prespec/fibre-butyrate/v1`" in registered


def test_site_index_has_its_filter_script_under_a_strict_policy(demo_site):
    index = (demo_site / "index.html").read_text()
    assert "script-src 'self'" in index and '<script src="site.js" defer></script>' in index
    assert index.count("<script") == 1  # no inline script
    assert (demo_site / "site.js").read_text().startswith("// prespec ")
    page = (demo_site / "fibre-butyrate.html").read_text()
    assert "<script" not in page and "script-src" not in page


@pytest.mark.parametrize("study_type, shown, hidden", [
    # ARRIVE 2.0 is written for animal research, SPIRIT/CONSORT for trials (the guidelines' own scope)
    ("animal", ["ARRIVE 2.0 Essential 10"], ["SPIRIT 2013", "CONSORT 2010"]),
    ("clinical-trial", ["SPIRIT 2013", "CONSORT 2010"], ["ARRIVE 2.0 Essential 10"]),
    ("in-vitro", [], ["ARRIVE 2.0 Essential 10", "SPIRIT 2013", "CONSORT 2010"]),
])
def test_guidelines_follow_the_study_type(tmp_path, run, study_type, shown, hidden):
    from .conftest import EXAMPLES

    text = (EXAMPLES / "fibre-butyrate.yaml").read_text().replace("\nstatus:", f"\nstudy_type: {study_type}\nstatus:")
    (tmp_path / "fibre-butyrate.yaml").write_text(text)
    markdown = run("render", "fibre-butyrate", tmp_path, "--no-history").out
    section = markdown.split("## Reporting-guideline coverage")[1].split("## Provenance")[0]
    assert f"Study type: {study_type} (stated in the spec)" in section
    for name in shown:
        assert f"### {name}" in section
    for name in hidden:
        assert f"### {name}" not in section


def test_power_curve_shows_planned_and_required_when_equal(demo_site):
    svg = (demo_site / "caffeine-reaction-time-power.svg").read_text()
    md_text = (demo_site / "caffeine-reaction-time.md").read_text()
    planned = re.search(r"Planned \| (\d+)", md_text)
    assert "the required n" in svg and planned is not None
