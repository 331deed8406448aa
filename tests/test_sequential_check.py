"""`prespec check` on group-sequential specs: maximum n, inflation, expected n and interim looks."""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import pytest

from registry.power import design_from_params, solve_sample_size

SPEC = """\
id: lesion-volume
title: Early treatment and lesion volume after induced stroke in mice
status: collecting
data_collection:
  start: 2027-03-01
design:
  test: two-sample-t
  alternative: two-sided
  alpha: 0.05
  power: 0.8
  effect:
    difference: 6.0
    sd: 10.0
  sequential:
    looks: 3
    efficacy: obrien-fleming
sample_size:
  per_group: {n}
{looks}amendments: []
"""


def _write(folder: Path, n: int = 46, looks: str = "", amendments: str = "") -> Path:
    text = SPEC.format(n=n, looks=looks)
    if amendments:
        text = text.replace("amendments: []\n", amendments)
    path = folder / "lesion-volume.yaml"
    path.write_text(text, encoding="utf-8")
    return path


def _spec(run, folder):
    result = run("check", folder, "--json", "--no-history")
    (spec,) = result.json()["specs"]
    return result.status, spec


def test_three_looks_obrien_fleming_is_sized_for_its_maximum_n(tmp_path, run):
    _write(tmp_path)
    status, spec = _spec(run, tmp_path)
    seq = spec["sequential"]
    # d = 0.6: fixed n 45 per group (Cohen 1988 Table 2.4.1 gives 45 for d = 0.6, from memory)
    assert seq["fixed_n_per_group"] == 45
    # Lan-DeMets O'Brien-Fleming, K = 3: its final boundary (1.993) is below the classical test's
    # (2.004), so its inflation lies between 1 and the classical 1.017 (Jennison & Turnbull 2000
    # Table 2.4, from memory)
    assert 1.005 < seq["inflation"] < 1.017
    assert seq["max_n_per_group"] == math.ceil(seq["inflation"] * 45)
    assert spec["analysable_per_group"] == seq["max_n_per_group"] == 46
    assert [look["n_per_group"] for look in seq["looks"]] == [16, 31, 46]
    assert seq["expected_n_alternative"] < seq["fixed_n_per_group"] < seq["expected_n_null"] <= 46
    assert [round(look["efficacy_z"], 3) for look in seq["looks"]] == [3.710, 2.511, 1.993]  # from memory, as
    # in test_sequential (Lan-DeMets O'Brien-Fleming, two-sided 0.05)
    assert spec["achieved_power"] >= 0.8
    assert status == 0
    assert any(f["kind"] == "sequential-design" for f in spec["findings"])


def test_planned_below_the_maximum_n_is_underpowered(tmp_path, run):
    _write(tmp_path, n=45)  # enough for the fixed design, not for three looks
    status, spec = _spec(run, tmp_path)
    assert status == 1
    assert spec["verdict"] == "underpowered"
    assert spec["achieved_power"] < 0.8


LOOK = """\
  - date: {date}
    information_fraction: {t}
    z: {z}
    decision: {decision}
"""


def _looks(*rows) -> str:
    return "interim_looks:\n" + "".join(LOOK.format(date=d, t=t, z=z, decision=x) for d, t, z, x in rows)


def test_looks_as_planned_are_clean(tmp_path, run):
    _write(tmp_path, looks=_looks(("2027-05-01", 0.35, 1.2, "continue"), ("2027-07-01", 0.66, 1.8, "continue")))
    status, spec = _spec(run, tmp_path)
    assert status == 0
    assert not [f for f in spec["findings"] if f["kind"] == "look-off-plan"]


@pytest.mark.parametrize(
    "rows, field, words",
    [
        # an extra, unplanned interim look
        ((("2027-05-01", 0.33, 0.4, "continue"), ("2027-06-01", 0.5, 0.9, "continue"),
          ("2027-07-01", 0.67, 1.1, "continue"), ("2027-08-01", 0.8, 1.3, "continue")),
         "interim_looks.1.information_fraction", "registered look 2 is at 0.667"),
        # a look before data collection started
        ((("2027-02-01", 0.33, 0.4, "continue"),), "interim_looks.0.date", "before data collection started"),
        # crossing the efficacy boundary (3.71 at the first look) and going on without a decision
        ((("2027-05-01", 0.33, 3.9, "continue"),), "interim_looks.0.decision", "went on without a recorded"),
        # stopping for efficacy without crossing
        ((("2027-05-01", 0.33, 2.5, "stop-efficacy"),), "interim_looks.0.decision", "without crossing"),
        # more looks than registered
        ((("2027-05-01", 0.33, 0.4, "continue"), ("2027-06-01", 0.67, 0.9, "continue"),
          ("2027-07-01", 1.0, 1.1, "continue"), ("2027-08-01", 1.0, 1.3, "continue")),
         "interim_looks.3.information_fraction", "not beyond look 3"),
    ],
)
def test_looks_off_plan_are_errors_naming_the_field(tmp_path, run, rows, field, words):
    _write(tmp_path, looks=_looks(*rows))
    status, spec = _spec(run, tmp_path)
    off = [f for f in spec["findings"] if f["kind"] == "look-off-plan"]
    assert status == 1 and spec["verdict"] == "look-off-plan"
    assert any(f["field"] == field and words in f["message"] and f["line"] for f in off), off


def test_an_amendment_documents_an_extra_look(tmp_path, run):
    rows = (("2027-05-01", 0.33, 0.4, "continue"), ("2027-06-01", 0.5, 0.9, "continue"))
    amendment = ("amendments:\n  - date: 2027-05-20\n    fields: [interim_looks]\n"
                 "    reason: The monitoring committee asked for an extra safety look.\n")
    _write(tmp_path, looks=_looks(*rows), amendments=amendment)
    status, spec = _spec(run, tmp_path)
    off = [f for f in spec["findings"] if f["kind"] == "look-off-plan"]
    assert status == 0 and off and all(f["severity"] == "info" for f in off)


def test_looks_without_a_sequential_design_are_off_plan(tmp_path, run):
    path = _write(tmp_path, looks=_looks(("2027-05-01", 0.5, 1.0, "continue")))
    text = path.read_text().replace("  sequential:\n    looks: 3\n    efficacy: obrien-fleming\n", "")
    path.write_text(text)
    status, spec = _spec(run, tmp_path)
    assert status == 1
    assert any(f["kind"] == "look-off-plan" and "plans none" in f["message"] for f in spec["findings"])


@pytest.mark.parametrize(
    "block, words",
    [
        ("  sequential:\n    looks: 3\n    efficacy: power\n", "efficacy_rho"),
        ("  sequential:\n    looks: [0.5, 0.9]\n", "final analysis at information fraction 1"),
        ("  sequential:\n    looks: 0\n", "from 1 to 20"),
        ("  sequential:\n    looks: 2.5\n", "a whole number of equally spaced looks"),
        ("  sequential:\n    looks: [0.5, true]\n", "a list of information fractions"),
        ("  sequential:\n    looks: 3\n    efficacy: fleming\n", "obrien-fleming"),
    ],
)
def test_bad_sequential_blocks_are_invalid_with_position(tmp_path, run, block, words):
    path = _write(tmp_path)
    text = path.read_text().replace("  sequential:\n    looks: 3\n    efficacy: obrien-fleming\n", block)
    path.write_text(text)
    status, spec = _spec(run, tmp_path)
    assert status == 1
    bad = [f for f in spec["findings"] if f["kind"] == "invalid"]
    assert any(words in f["message"] and f["line"] for f in bad), bad


def test_sequential_needs_a_normal_statistic(tmp_path, run):
    path = tmp_path / "anova-seq.yaml"
    path.write_text(textwrap.dedent("""\
        id: anova-seq
        title: Three diets
        status: draft
        data_collection:
          start: 2027-03-01
        design:
          test: one-way-anova
          effect:
            f: 0.25
            groups: 3
          sequential:
            looks: 2
        sample_size:
          per_group: 60
        """))
    status, spec = _spec(run, tmp_path)
    assert status == 1
    assert any("normal" in f["message"] and f["field"].startswith("design") for f in spec["findings"])


def test_log_rank_inflates_the_events():
    design = design_from_params("log-rank", hr=0.6, event_probability=0.7, sequential={"looks": 3})
    from registry.power.sequential_size import size_sequential

    fixed = solve_sample_size(design_from_params("log-rank", hr=0.6, event_probability=0.7))
    size = size_sequential(design, fixed)
    # Schoenfeld (1983): 4 (z_a + z_b)^2 / ln(hr)^2 = 120.3 -> 121 events for hr 0.6 (common practice)
    assert fixed.events == math.ceil(4 * (1.959964 + 0.841621) ** 2 / math.log(0.6) ** 2) == 121
    assert size.max_events == math.ceil(size.inflation * 121)
    assert size.look_events[-1] == size.max_events


# --- prespec size -----------------------------------------------------------------------------------

def test_size_with_looks_reports_the_maximum_n_and_the_boundaries(run):
    result = run("size", "two-sample-t", "--d", "0.5", "--looks", "3", "--json")
    assert result.status == 0
    payload = result.json()
    seq = payload["sequential"]
    # fixed n 64 for d = 0.5 (Cohen 1988 Table 2.4.1, from memory), inflated by the Lan-DeMets
    # O'Brien-Fleming factor; the boundaries are those tabulated in test_sequential (from memory)
    assert seq["fixed_n_per_group"] == 64
    assert payload["n_per_group"] == seq["max_n_per_group"] == math.ceil(seq["inflation"] * 64)
    assert [round(look["efficacy_z"], 3) for look in seq["looks"]] == [3.710, 2.511, 1.993]
    human = run("size", "two-sample-t", "--d", "0.5", "--looks", "3")
    assert "|z| >= 3.710" in human.out and "expected n" in human.out


def test_size_with_one_look_is_the_fixed_design(run):
    fixed = run("size", "two-sample-t", "--d", "0.5", "--json").json()
    one = run("size", "two-sample-t", "--d", "0.5", "--looks", "1", "--json").json()
    assert one["n_per_group"] == fixed["n_per_group"] and one["sequential"]["inflation"] == 1.0


@pytest.mark.parametrize(
    "argv, words",
    [
        (("--spending", "pocock"), "need --looks"),
        (("--looks", "0.5,x"), "fractions"),
        (("--looks", "2", "--spending", "fleming"), "efficacy"),
        (("--assurance-mean", "0.5"), "both --assurance-mean and --assurance-sd"),
        (("--looks", "2", "--futility", "binding", "--futility-spending", "haybittle-peto"), "futility_spending"),
    ],
)
def test_size_refuses_bad_sequential_options(run, argv, words):
    result = run("size", "two-sample-t", "--d", "0.5", *argv)
    assert result.status == 2
    assert words in result.err and "Traceback" not in result.err


def test_size_reports_assurance_and_the_n_for_a_target(run):
    result = run("size", "two-sample-t", "--difference", "4", "--sd", "5", "--assurance-mean", "4",
                 "--assurance-sd", "1.5", "--assurance-df", "11", "--assurance-target", "0.7", "--json")
    got = result.json()["assurance"]
    assert got["n_per_group"] == 26 and got["assurance"] < got["power"]
    assert got["n_for_target"] > 26


# --- render -----------------------------------------------------------------------------------------

def test_summary_shows_the_boundary_table_figure_and_recorded_looks(tmp_path, run):
    folder = tmp_path / "registry"
    folder.mkdir()
    _write(folder, looks=_looks(("2027-05-01", 0.33, 0.4, "continue"), ("2027-06-01", 0.5, 0.9, "continue")))
    out = tmp_path / "out"
    result = run("render", "lesion-volume", "--registry", folder, "--out", out, "--no-history")
    assert result.status == 0, result.err
    text = (out / "lesion-volume.md").read_text()
    # the Lan-DeMets O'Brien-Fleming boundaries of test_sequential (from memory)
    for bound in ("|z| >= 3.710", "|z| >= 2.511", "|z| >= 1.993"):
        assert bound in text
    assert "lesion-volume-boundaries.svg" in text and "Interim looks recorded" in text
    assert "registered look 2 is at 0.667" in text
    # the power quoted is the boundaries', so the method named is the group-sequential one
    assert "Method of calculation: group-sequential test" in text
    page = (out / "lesion-volume.html").read_text()
    assert page.count("<svg") == 2 and "Stopping boundaries" in page
    svg = (out / "lesion-volume-boundaries.svg").read_text()
    assert "<desc" in svg and "3.71" in svg


def test_summary_reports_assurance(tmp_path, run):
    folder = tmp_path / "registry"
    folder.mkdir()
    path = _write(folder)
    path.write_text(path.read_text().replace(
        "    efficacy: obrien-fleming\n",
        "    efficacy: obrien-fleming\n  assurance:\n    effect_prior: {mean: 6.0, sd: 2.0}\n    sd_prior: {df: 9}\n"))
    (spec,) = run("check", folder, "--json", "--no-history").json()["specs"]
    out = tmp_path / "out"
    assert run("render", "lesion-volume", "--registry", folder, "--out", out, "--no-history").status == 0
    text = (out / "lesion-volume.md").read_text()
    assert f"is {spec['assurance']['assurance']:.3f}" in text and "**Assurance.**" in text


def test_a_first_look_on_very_few_units_is_warned(tmp_path, run):
    path = _write(tmp_path)
    path.write_text(path.read_text().replace("    difference: 6.0\n", "    difference: 16.0\n")
                    .replace("    looks: 3\n", "    looks: [0.2, 0.6, 1]\n").replace("per_group: 46", "per_group: 9"))
    status, spec = _spec(run, tmp_path)
    # d = 1.6: a fixed design of about 8 per group (Cohen 1988 Table 2.4.1, from memory); a first look at
    # a fifth of the maximum analyses 2 per group
    assert spec["sequential"]["looks"][0]["n_per_group"] < 5
    assert any(f["kind"] == "approximate-size" and "first look" in f["message"] for f in spec["findings"])


def test_sequential_power_on_an_exact_family_is_not_labelled_exact(tmp_path, run):
    argv = ("size", "two-proportions", "--p1", "0.25", "--p2", "0.10", "--looks", "3")
    payload = run(*argv, "--json").json()
    seq = payload["sequential"]
    # the fixed n is the exact enumeration's (common practice: the z test's counts enumerated);
    # the maximum n and its power come from the normal-theory boundaries, so neither is called exact
    assert payload["n_per_group"] == seq["max_n_per_group"] == math.ceil(seq["inflation"] * seq["fixed_n_per_group"])
    assert payload["label"].startswith("normal approximation") and payload["verification"] is None
    assert payload["start_n"] is None and "group-sequential" in payload["method"]
    assert all(note.startswith("fixed design: ") for note in payload["notes"][:1])
    human = run(*argv).out
    (power,) = [line for line in human.splitlines() if line.strip().startswith("power")]
    assert "exact" not in power and "normal approximation" in power
    # check on the same design agrees with size: the same maximum n and the same power
    spec = SPEC.replace("two-sample-t", "two-proportions").replace(
        "    difference: 6.0\n    sd: 10.0\n", "    p1: 0.25\n    p2: 0.10\n")
    (tmp_path / "lesion-volume.yaml").write_text(spec.format(n=payload["n_per_group"], looks=""), encoding="utf-8")
    status, checked = _spec(run, tmp_path)
    assert checked["required_per_group"] == payload["n_per_group"] and status == 0
    assert checked["achieved_power"] == pytest.approx(payload["achieved_power"], rel=1e-9)


def test_size_says_assurance_is_that_of_a_single_analysis(run):
    out = run("size", "two-sample-t", "--difference", "6", "--sd", "12", "--looks", "3", "--assurance-mean", "6",
              "--assurance-sd", "2", "--assurance-df", "24").out
    (line,) = [line for line in out.splitlines() if line.strip().startswith("assurance")]
    assert "single analysis" in line


def test_example_sequential_spec_agrees_with_size(run):
    # the example registry's group-sequential design: check's maximum n and power are size's
    from .conftest import EXAMPLES

    payload = run("check", EXAMPLES / "balance-training-falls.yaml", "--json", "--no-history").json()
    (spec,) = payload["specs"]
    sized = run("size", "two-sample-t", "--difference", "6", "--sd", "12", "--looks", "3", "--param",
                "attrition=0.15", "--json").json()
    assert spec["required_per_group"] == sized["enrolment_per_group"] == spec["planned_per_group"]
    assert spec["analysable_per_group"] == sized["n_per_group"] == spec["sequential"]["max_n_per_group"]
    assert {f["kind"] for f in spec["findings"]} == {"sequential-design", "assurance"}


def test_events_only_log_rank_with_looks_gives_the_inflated_events(tmp_path, run):
    payload = run("size", "log-rank", "--hr", "0.6", "--looks", "3", "--json").json()
    # Schoenfeld (1983): 121 events for hr 0.6 (common practice); the looks inflate them as size_sequential does
    assert payload["events"] == 121
    from registry.power.sequential_size import plan_for

    most = math.ceil(plan_for(design_from_params("log-rank", hr=0.6, event_probability=0.7,
                                                 sequential={"looks": 3})).inflation * 121)
    assert f"the maximum is {most} events" in payload["sequential_events"]
    assert f"the maximum is {most} events" in run("size", "log-rank", "--hr", "0.6", "--looks", "3").out
    spec = SPEC.replace("two-sample-t", "log-rank").replace("    difference: 6.0\n    sd: 10.0\n", "    hr: 0.6\n")
    (tmp_path / "lesion-volume.yaml").write_text(spec.format(n=80, looks=""), encoding="utf-8")
    _, checked = _spec(run, tmp_path)
    (finding,) = [f for f in checked["findings"] if f["kind"] == "events-only"]
    assert f"the maximum is {most} events" in finding["message"]


def test_power_at_n_with_looks_names_the_sequential_method(run):
    out = run("size", "two-sample-t", "--d", "0.5", "--looks", "3", "--n", "10").out
    (method,) = [line for line in out.splitlines() if line.strip().startswith("method")]
    assert "group-sequential" in method
    looks = [line for line in out.splitlines() if line.strip().startswith("look ")]
    assert len(looks) == 3 and all("not 10" in line for line in looks)
