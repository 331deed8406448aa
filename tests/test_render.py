"""prespec render: content, numbers, escaping, reproducibility, confined writes and provenance."""

from __future__ import annotations

import math
import os
import re
import shutil
from html.parser import HTMLParser
from pathlib import Path

import pytest
from statsmodels.stats.power import TTestIndPower, TTestPower

from registry.checks import CAUTION, Finding, check_file
from registry.discovery import discover
from registry.guidelines import GUIDELINES, coverage
from registry.power.base import EffectBase, Family
from registry.summary import build_summary, render_time
from registry.summary.numbers import Curve, has_spread, sensitivity
from registry.summary.provenance import iso_utc

from .conftest import EXAMPLES

EPOCH = "1800000000"  # 2027-01-15T08:00:00Z
SECTIONS = [
    "Key numbers", "Question and hypotheses", "Outcomes", "Design", "Sample-size justification", "Sample size",
    "Analysis plan", "Amendments and drift", "Reporting-guideline coverage", "Provenance",
]
SUBSECTIONS = [
    "Required and planned", "Minimum detectable effect", "Sensitivity", "Power curve", "Analysis", "Exclusions",
    "Randomisation and blinding", "Stopping rule", "Amendment log", "Drift verdict", "Check findings",
]


@pytest.fixture
def epoch(monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)


@pytest.fixture
def rendered(run, tmp_path, epoch):
    out = tmp_path / "out"
    result = run("render", "--all", "--out", out, "--registry", EXAMPLES)
    assert result.status == 0, result.err
    return out


def _report(spec_id: str, folder: Path = EXAMPLES):
    files = [f for f in discover([str(folder)]) if f.path.stem == spec_id]
    return check_file(files[0]), files[0]


def _cells(markdown: str, label: str) -> list[str]:
    """The cells of the table row starting with ``label``."""
    for line in markdown.splitlines():
        if line.startswith(f"| {label} |"):
            return [c.strip() for c in line.strip("|").split(" | ")]
    raise AssertionError(f"no table row {label!r}")


class _Tags(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.tags: list[tuple[str, list[tuple[str, str | None]]]] = []
        self.headings: list[int] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, attrs))
        if re.fullmatch(r"h[1-6]", tag):
            self.headings.append(int(tag[1]))

    def handle_data(self, data):
        self.text.append(data)


def _parse(html: str) -> _Tags:
    parser = _Tags()
    parser.feed(html)
    return parser


# ------------------------------------------------------------------ content


def test_every_section_is_present(rendered):
    markdown = (rendered / "fibre-butyrate.md").read_text()
    html = (rendered / "fibre-butyrate.html").read_text()
    for title in SECTIONS:
        assert f"\n## {title}\n" in markdown
        assert f"<h2>{title}</h2>" in html
    for title in SUBSECTIONS:
        assert f"\n### {title}\n" in markdown
        assert f"<h3>{title}</h3>" in html
    assert markdown.count("\n# ") == 1 and markdown.splitlines()[2] == "# High-fibre diet and caecal butyrate in adult mice"
    assert "<h3>ARRIVE 2.0 Essential 10</h3>" in html  # a mouse study: ARRIVE 2.0, no trial checklist forced
    for name in ("SPIRIT 2013", "CONSORT 2010"):
        assert f"<h3>{name}</h3>" not in html
    assert CAUTION in html and CAUTION in markdown
    assert (rendered / "fibre-butyrate-power.svg").read_text().count("<svg") == 1


def test_headings_in_order_and_page_is_accessible(rendered):
    for name in ("fibre-butyrate.html", "index.html"):
        parsed = _parse((rendered / name).read_text())
        assert parsed.headings[0] == 1 and parsed.headings.count(1) == 1
        assert all(b - a <= 1 for a, b in zip(parsed.headings, parsed.headings[1:])), parsed.headings
        html_tag = next(attrs for tag, attrs in parsed.tags if tag == "html")
        assert ("lang", "en") in html_tag
        assert all(("scope", "col") in attrs for tag, attrs in parsed.tags if tag == "th")
    parsed = _parse((rendered / "fibre-butyrate.html").read_text())
    svg = next(attrs for tag, attrs in parsed.tags if tag == "svg")
    assert ("role", "img") in svg
    assert dict(svg)["aria-labelledby"] == "fibre-butyrate-power-title fibre-butyrate-power-desc"
    assert [tag for tag, _ in parsed.tags if tag in ("title", "desc")].count("desc") == 1


def test_numbers_match_check(run, rendered):
    checked = {s["id"]: s for s in run("check", "--json", EXAMPLES).json()["specs"]}
    for spec_id, spec in checked.items():
        markdown = (rendered / f"{spec_id}.md").read_text()
        assert _cells(markdown, "Required enrolment (" + markdown.split("Required enrolment (")[1].split(")")[0] + ")")[1] \
            == f"{spec['required_per_group']:,}"
        assert _cells(markdown, "Power at the planned n")[1] == f"{spec['achieved_power']:.3f}"
        assert spec["verdict"].upper() in _cells(markdown, "Check verdict")[1].upper()
        if spec.get("sequential") is None:
            assert _cells(markdown, "as stated")[3] == f"{spec['required_per_group']:,}"
        else:  # the sensitivity table is that of a single analysis (the summary says so)
            assert _cells(markdown, "as stated")[2] == f"{spec['sequential']['fixed_n_per_group']:,}"
        index_row = _cells((rendered / "index.md").read_text(), next(
            line.split(" | ")[0][2:] for line in (rendered / "index.md").read_text().splitlines()
            if f"`{spec_id}`" in line))
        assert index_row[3:6] == [str(spec["planned_per_group"]), str(spec["required_per_group"]),
                                  f"{spec['achieved_power']:.3f}"]
        assert spec["verdict"].upper() in index_row[6].upper()


def test_fibre_butyrate_numbers_against_statsmodels(rendered):
    markdown = (rendered / "fibre-butyrate.md").read_text()
    analysis = TTestIndPower()  # statsmodels reference implementation of the pooled two-sample t-test
    n = math.ceil(analysis.solve_power(0.8, power=0.8, alpha=0.05))  # d = 4 / 5
    assert n == 26
    assert _cells(markdown, "Required") == ["Required", "26", "52", str(math.ceil(26 / 0.9)), "58",
                                            f"{analysis.power(0.8, nobs1=26, alpha=0.05):.3f}"]
    mde = analysis.solve_power(nobs1=26, power=0.8, alpha=0.05)
    assert f"(d = {mde:.3g})" in markdown
    assert f"a difference of {round(mde * 5, 4):,.4g} umol/g wet content" in markdown


@pytest.mark.parametrize("label, d", [
    # statsmodels TTestIndPower.solve_power at alpha 0.05 two-sided, power 0.8; planned 26 analysable.
    ("as stated", 0.8),
    ("SD 10% larger", 0.8 / 1.1),
    ("SD 20% larger", 0.8 / 1.2),
    ("SD 30% larger", 0.8 / 1.3),
    ("effect 10% smaller", 0.8 * 0.9),
    ("effect 20% smaller", 0.8 * 0.8),
    ("effect 30% smaller", 0.8 * 0.7),
])
def test_sensitivity_rows_against_statsmodels(rendered, label, d):
    row = _cells((rendered / "fibre-butyrate.md").read_text(), label)
    analysis = TTestIndPower()
    n = math.ceil(analysis.solve_power(d, power=0.8, alpha=0.05) - 1e-9)
    assert row[1:] == [f"{d:.3g}", str(n), str(math.ceil(n / 0.9 - 1e-9)),
                       f"{analysis.power(d, nobs1=26, alpha=0.05):.3f}"]


def test_paired_sensitivity_against_statsmodels():
    report, _ = _report("caffeine-reaction-time")
    # d_z = 15 / sqrt(45^2 + 45^2 - 2 * 0.8 * 45 * 45), the SD of within-pair differences
    d = 15 / math.sqrt(2 * 45**2 - 2 * 0.8 * 45**2)
    rows = {r.label: r for r in sensitivity(report.spec.design, 33)}
    for label, scaled in [("SD 20% larger", d / 1.2), ("effect 30% smaller", d * 0.7)]:
        expected = math.ceil(TTestPower().solve_power(scaled, power=0.8, alpha=0.05))  # statsmodels one-sample/paired
        assert rows[label].n_analysable == expected
        assert rows[label].power_at_planned == pytest.approx(TTestPower().power(scaled, nobs=31, alpha=0.05), rel=1e-6)


def test_family_without_sd_gets_no_sd_scenarios():
    class Counts(EffectBase):
        ratio: float

    class NoSpread(Family):  # only effect_model is read by has_spread
        name, title, method, reference = "x", "X", "m", "r"
        effect_model = Counts

        def effect_size(self, design):  # pragma: no cover - not called
            raise NotImplementedError

        power = simulate = effect_size

    assert not has_spread(NoSpread())
    report, _ = _report("fibre-butyrate")
    assert has_spread(report.spec.design.family)


def test_underpowered_spec_says_so(rendered):
    markdown = (rendered / "sirt3-knockdown.md").read_text()
    assert "✖ UNDERPOWERED" in _cells(markdown, "Check verdict")[1]
    # statsmodels: power of the two-sample t-test at d = 25/18 with 6 per group
    assert f"gives only power {TTestIndPower().power(25 / 18, nobs1=6, alpha=0.05):.3f}, below the target" in markdown
    assert "**error** underpowered" in markdown


def test_drift_verdict_comes_from_the_findings(tmp_path, epoch):
    report, spec_file = _report("fibre-butyrate")
    plain = build_summary(report, spec_file.path, render_time())
    assert "Drift verdict | **⚠ HISTORY NOT CHECKED**" in plain.markdown
    report.findings.append(Finding("amended", "info", "design.effect.sd", 40, "documented amendment of 2027-04-02"))
    report.findings.append(Finding("drift", "error", "design.effect.sd", 40, "changed after data collection started"))
    summary = build_summary(report, spec_file.path, render_time())
    assert "Drift verdict | **✖ DRIFT** |" in summary.markdown
    assert "**Verdict: drift.**" in summary.markdown
    assert "changed after data collection started" in summary.markdown.split("### Drift verdict")[1].split("###")[0]


def test_guideline_mapping_reports_missing_fields(tmp_path):
    text = (EXAMPLES / "fibre-butyrate.yaml").read_text()
    text = re.sub(r"^blinding:.*\n", "", text, flags=re.M)
    (tmp_path / "fibre-butyrate.yaml").write_text(text)
    report, _ = _report("fibre-butyrate", tmp_path)
    status = {(c.guideline, c.number): c.status for c in coverage(report.spec)}
    assert status[("ARRIVE 2.0 Essential 10", "5")] == "missing"
    assert not any(name.startswith(("SPIRIT", "CONSORT")) for name, _ in status)  # mice: inferred animal study
    trial = report.spec.model_copy(update={"study_type": "clinical-trial"})
    status = {(c.guideline, c.number): c.status for c in coverage(trial)}
    assert not any(name.startswith("ARRIVE") for name, _ in status)
    assert status[("SPIRIT 2013", "17a")] == "missing"
    assert status[("CONSORT 2010", "11a")] == "missing"
    # Every guideline lists its sample-size item (ARRIVE 2, SPIRIT 14, CONSORT 7a: the published numbering).
    numbers = {g.name: {i.number for i in g.items} for g in GUIDELINES}
    assert "2" in numbers["ARRIVE 2.0 Essential 10"] and "14" in numbers["SPIRIT 2013"] and "7a" in numbers["CONSORT 2010"]


# ------------------------------------------------------------------ escaping

HOSTILE_TITLE = "<script>alert(1)</script> [x](javascript:alert(1)) <img src=x onerror=alert(2)> | # not a heading"
HOSTILE_PLAN = ("<script>alert(3)</script>\n\n[click](javascript:alert(4)) ![i](javascript:alert(5)) "
                "<img src=x onerror=alert(6)> <a href='javascript:alert(7)'>a</a> &lt;b&gt; *stars* `code`\n\n"
                "# heading\n\n1. list\n\n<https://example.org/x>")


def _hostile_registry(folder: Path) -> Path:
    text = (EXAMPLES / "fibre-butyrate.yaml").read_text()
    text = re.sub(r"^title:.*$", "title: '" + HOSTILE_TITLE.replace("'", "''") + "'", text, flags=re.M)
    plan = "analysis_plan: |\n" + "".join(f"  {line}\n" if line else "\n" for line in HOSTILE_PLAN.split("\n"))
    text = re.sub(r"^analysis_plan: >-\n(  .*\n)+", plan, text, flags=re.M)
    folder.mkdir()
    (folder / "fibre-butyrate.yaml").write_text(text)
    return folder


ALLOWED_TAGS = {"html", "head", "meta", "title", "style", "body", "nav", "main", "footer", "h1", "h2", "h3", "p",
                "strong", "em", "code", "ul", "li", "blockquote", "div", "table", "thead", "tbody", "tr", "th", "td",
                "a", "figure", "figcaption", "svg", "desc", "metadata", "defs", "g", "path", "use", "text",
                "clippath", "rect", "polyline", "line", "rdf:rdf", "cc:work", "dc:type", "dc:format", "dc:creator",
                "cc:agent", "dc:title"}


def test_user_text_cannot_inject_markup(run, tmp_path, epoch):
    registry = _hostile_registry(tmp_path / "reg")
    result = run("render", "--all", "--out", tmp_path / "out", "--registry", registry)
    assert result.status == 0, result.err
    for name in ("fibre-butyrate.html", "index.html"):
        html = (tmp_path / "out" / name).read_text()
        if name == "index.html":  # the index's one script is our filter file, allowed by the CSP as 'self'
            ours = '<script src="site.js" defer></script>\n'
            assert html.count("<script") == 1 and ours in html and "script-src 'self'" in html
            html = html.replace(ours, "")
        parsed = _parse(html)
        tags = {tag for tag, _ in parsed.tags}
        assert tags <= ALLOWED_TAGS, tags - ALLOWED_TAGS
        for tag, attrs in parsed.tags:
            for key, value in attrs:
                assert not key.startswith("on"), (tag, key)
                assert "javascript" not in (value or "").lower(), (tag, key, value)
            if tag == "a":
                assert dict(attrs)["href"] in ("index.html", "fibre-butyrate.html"), attrs
        assert "<script" not in html.lower() and "<img" not in html.lower()
        assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html  # shown as typed
    html = (tmp_path / "out" / "fibre-butyrate.html").read_text()
    text = "".join(_parse(html).text)
    assert "[click](javascript:alert(4))" in text and "&lt;b&gt;" in text and "*stars*" in text
    assert "# heading" in text and "1. list" in text
    assert "<h1>" in html and html.count("<h1>") == 1  # the user's '# heading' made no heading
    index = (tmp_path / "out" / "index.html").read_text()
    row = re.search(r"<tbody>\s*<tr>(.*?)</tr>", index, re.S).group(1)
    assert row.count("<td") == 8  # the '|' in the title did not split the cell
    assert "| # not a heading</a></td>" in row


def test_markdown_file_is_escaped_too(run, tmp_path, epoch):
    registry = _hostile_registry(tmp_path / "reg")
    assert run("render", "fibre-butyrate", "--out", tmp_path / "out", "--registry", registry).status == 0
    markdown = (tmp_path / "out" / "fibre-butyrate.md").read_text()
    assert "\\<script\\>" in markdown and "\\[x\\](javascript:alert(1))" in markdown
    assert "# \\<script\\>" in markdown  # the title heading holds the escaped text
    assert not re.search(r"(?<!\\)\[x\]\(", markdown)


# ------------------------------------------------------------------ reproducibility and files


def test_same_epoch_gives_byte_identical_output(run, tmp_path, epoch):
    first, second = tmp_path / "a", tmp_path / "b"
    assert run("render", "--all", "--out", first, "--registry", EXAMPLES).status == 0
    assert run("render", "--all", "--out", second, "--registry", EXAMPLES).status == 0
    names = sorted(p.name for p in first.iterdir())
    boundaries = sum("sequential:" in p.read_text() for p in EXAMPLES.glob("*.yaml"))  # one more figure each
    assert names == sorted(p.name for p in second.iterdir())
    assert len(names) == len(list(EXAMPLES.glob("*.yaml"))) * 3 + boundaries + 3  # index.md, index.html, site.js
    for name in names:
        assert (first / name).read_bytes() == (second / name).read_bytes(), name
    assert "2027-01-15T08:00:00Z" in (first / "fibre-butyrate.md").read_text()  # 1.8e9 s after 1970-01-01 UTC



def test_a_figure_drawn_after_others_is_the_one_a_fresh_process_draws(monkeypatch):
    # Each process draws every power curve on one reused figure: what an earlier curve set (a
    # planned line, a point, a formula legend, wider ticks) must never show in a later one.
    from registry.summary import figure

    def curve(top: int) -> Curve:
        ns = tuple(range(2, top, max(1, top // 128)))
        return Curve(ns, tuple(1 - math.exp(-3 * n / top) for n in ns))

    small, large = curve(130), curve(12_000)
    kwargs = {"target": 0.8, "required": small.n[60], "planned": None, "unit": "per group", "figure_id": "f"}
    monkeypatch.setattr(figure, "_CANVAS", None)
    fresh = figure.power_figure(small, **kwargs).svg
    figure.power_figure(large, target=0.9, required=large.n[60], planned=large.n[60], unit="clusters",
                        figure_id="g", formula="a formula")
    assert figure.power_figure(small, **kwargs).svg == fresh
    assert "planned n" not in fresh and "formula" not in fresh

def test_bad_source_date_epoch_is_a_usage_error(run, tmp_path, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "yesterday")
    result = run("render", "fibre-butyrate", "--out", tmp_path, "--registry", EXAMPLES)
    assert result.status == 2 and "SOURCE_DATE_EPOCH" in result.err and "'yesterday'" in result.err


def test_render_time_defaults_to_now_in_utc(monkeypatch):
    monkeypatch.delenv("SOURCE_DATE_EPOCH", raising=False)
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ", iso_utc(render_time()))


def test_rerender_replaces_own_files_and_leaves_no_temporaries(run, rendered):
    before = {p.name for p in rendered.iterdir()}
    assert run("render", "--all", "--out", rendered, "--registry", EXAMPLES).status == 0
    assert {p.name for p in rendered.iterdir()} == before
    assert not [p for p in rendered.iterdir() if p.name.startswith(".")]
    assert oct((rendered / "index.html").stat().st_mode & 0o777) != "0o600"


def test_foreign_file_is_never_overwritten(run, tmp_path, epoch):
    out = tmp_path / "out"
    out.mkdir()
    (out / "fibre-butyrate.html").write_text("my own notes")
    result = run("render", "fibre-butyrate", "--out", out, "--registry", EXAMPLES)
    assert result.status == 1
    assert "was not written by prespec render" in result.err and "fibre-butyrate.html" in result.err
    assert (out / "fibre-butyrate.html").read_text() == "my own notes"
    assert sorted(p.name for p in out.iterdir()) == ["fibre-butyrate.html"]  # nothing else written


def test_foreign_file_stops_the_whole_run_before_any_write(run, tmp_path, epoch):
    out = tmp_path / "out"
    out.mkdir()
    (out / "sirt3-knockdown.md").write_text("my own notes")  # the last spec in file order
    result = run("render", "--all", "--out", out, "--registry", EXAMPLES)
    assert result.status == 1 and "sirt3-knockdown.md" in result.err
    assert sorted(p.name for p in out.iterdir()) == ["sirt3-knockdown.md"]


def test_duplicate_ids_are_not_rendered(run, tmp_path, epoch):
    registry = tmp_path / "reg"
    (registry / "copy").mkdir(parents=True)
    shutil.copy(EXAMPLES / "fibre-butyrate.yaml", registry)
    shutil.copy(EXAMPLES / "fibre-butyrate.yaml", registry / "copy")
    result = run("render", "fibre-butyrate", "--out", tmp_path / "one", "--registry", registry)
    assert result.status == 1 and "used by several files" in result.err
    result = run("render", "--all", "--out", tmp_path / "all", "--registry", registry)
    assert result.status == 1 and "duplicate-id" in (tmp_path / "all" / "index.md").read_text()
    assert not (tmp_path / "all" / "fibre-butyrate.html").exists()


def test_symlink_out_of_the_folder_is_refused(run, tmp_path, epoch):
    out, elsewhere = tmp_path / "out", tmp_path / "elsewhere"
    out.mkdir()
    elsewhere.mkdir()
    (elsewhere / "target.md").write_text("keep me")
    os.symlink(elsewhere / "target.md", out / "fibre-butyrate.md")
    result = run("render", "fibre-butyrate", "--out", out, "--registry", EXAMPLES)
    assert result.status == 1 and "outside" in result.err
    assert (elsewhere / "target.md").read_text() == "keep me"
    assert sorted(p.name for p in elsewhere.iterdir()) == ["target.md"]


@pytest.mark.parametrize("argv, message", [
    ((), "give a spec ID, or --all"),
    (("fibre-butyrate", "--all", "--out", "x"), "but not both"),
    (("--all",), "--all needs --out DIR"),
    (("fibre-butyrat",), "did you mean 'fibre-butyrate'?"),
])
def test_usage_errors(run, tmp_path, argv, message):
    result = run("render", *argv, "--registry", EXAMPLES)
    assert result.status == 2 and message in result.err
    assert "Traceback" not in result.err


def test_invalid_spec_is_reported_and_listed(run, tmp_path, epoch):
    registry = tmp_path / "reg"
    registry.mkdir()
    shutil.copy(EXAMPLES / "fibre-butyrate.yaml", registry)
    (registry / "broken.yaml").write_text((EXAMPLES / "organoid-doubling.yaml").read_text()
                                          .replace("id: organoid-doubling", "id: broken")
                                          .replace("alpha: 0.05", "alpha: 5"))
    result = run("render", "broken", "--out", tmp_path / "one", "--registry", registry)
    assert result.status == 1 and "broken.yaml" in result.err and "design.alpha" in result.err
    assert not (tmp_path / "one").exists() or not list((tmp_path / "one").iterdir())
    result = run("render", "--all", "--out", tmp_path / "all", "--registry", registry)
    assert result.status == 1
    index = (tmp_path / "all" / "index.md").read_text()
    assert "## Not rendered" in index and "broken.yaml" in index and "`fibre-butyrate`" in index
    assert (tmp_path / "all" / "fibre-butyrate.html").exists() and not (tmp_path / "all" / "broken.html").exists()


# ------------------------------------------------------------------ provenance


def _git(repo, *args):
    return repo.git.execute(["git", *args])


def test_provenance_names_commit_tag_and_hash(run, tmp_path, epoch):
    git = pytest.importorskip("git")
    folder = tmp_path / "lab"
    folder.mkdir()
    repo = git.Repo.init(folder)
    with repo.config_writer() as config:
        config.set_value("user", "name", "Lab Member")
        config.set_value("user", "email", "member@example.org")
    shutil.copy(EXAMPLES / "fibre-butyrate.yaml", folder)
    repo.index.add(["fibre-butyrate.yaml"])
    commit = repo.index.commit("Register fibre-butyrate")
    repo.create_tag("prespec/fibre-butyrate/v1", ref=commit, message="registration")  # register's tag name
    result = run("render", "fibre-butyrate", "--out", tmp_path / "out", "--registry", folder)
    assert result.status == 0, result.err
    markdown = (tmp_path / "out" / "fibre-butyrate.md").read_text()
    from registry.canonical import content_hash

    report, _ = _report("fibre-butyrate", folder)
    assert _cells(markdown, "Spec file")[1] == "fibre-butyrate.yaml"
    assert _cells(markdown, "Last commit of the file")[1] == f"`{commit.hexsha}`"
    assert _cells(markdown, "Committed (UTC)")[1] == iso_utc(commit.committed_datetime)
    assert _cells(markdown, "Working copy")[1] == "identical to the commit above"
    assert _cells(markdown, "Content SHA-256")[1] == f"`{content_hash(report.spec)}`"
    assert _cells(markdown, "Registration tag")[1] == f"`prespec/fibre-butyrate/v1` at `{commit.hexsha[:12]}`"
    assert _cells(markdown, "Data collection starts")[1] == report.spec.data_collection.start.isoformat()
    assert _cells(markdown, "Verify with")[1] == "`prespec verify fibre-butyrate`"
    assert _cells(markdown, "Rendered at (UTC)")[1] == "2027-01-15T08:00:00Z"

    (folder / "fibre-butyrate.yaml").write_text((folder / "fibre-butyrate.yaml").read_text() + "notes: later\n")
    assert run("render", "fibre-butyrate", "--out", tmp_path / "out", "--registry", folder).status == 0
    markdown = (tmp_path / "out" / "fibre-butyrate.md").read_text()
    assert _cells(markdown, "Working copy")[1].startswith("has uncommitted changes")


def test_provenance_outside_git(run, tmp_path, epoch):
    folder = tmp_path / "plain"
    folder.mkdir()
    shutil.copy(EXAMPLES / "organoid-doubling.yaml", folder)
    assert run("render", "organoid-doubling", "--out", tmp_path / "out", "--registry", folder).status == 0
    markdown = (tmp_path / "out" / "organoid-doubling.md").read_text()
    if _cells(markdown, "Last commit of the file")[1] != "not committed to git":  # tmp_path inside a repository
        pytest.skip("the temporary folder lies inside a git working tree")
    assert _cells(markdown, "Registration tag")[1] == "not registered"


def test_file_facts_of_many_files_are_what_each_file_gives_alone(tmp_path):
    # render --all asks git once per repository; each answer must be the one-file answer
    git = pytest.importorskip("git")
    from registry.git import find_repository
    from registry.summary.provenance import FileFacts, file_facts

    lab = tmp_path / "lab"
    (lab / "sub folder").mkdir(parents=True)
    repo = git.Repo.init(lab)
    with repo.config_writer() as config:
        config.set_value("user", "name", "Lab Member")
        config.set_value("user", "email", "member@example.org")
    (lab / "[ab]").mkdir()
    (lab / "new folder").mkdir()
    # a folder named like a pathspec pattern, and files its pattern would match, must be read literally
    names = ["same.yaml", "edited.yaml", "sub folder/dosé.yaml", "[ab]/x.yaml", "untracked.yaml",
             "new folder/y.yaml"]
    (lab / "a").mkdir()
    (lab / "a" / "x.yaml").write_text("id: other\n", encoding="utf-8")
    for name in names:
        (lab / name).write_text(f"id: {len(name)}\n", encoding="utf-8")
    repo.index.add(names[:4] + ["a/x.yaml"])
    repo.index.commit("four specs")
    (lab / "edited.yaml").write_text("id: changed\n", encoding="utf-8")
    empty = tmp_path / "empty"
    empty.mkdir()
    git.Repo.init(empty)
    (empty / "first.yaml").write_text("id: first\n", encoding="utf-8")
    paths = [lab / name for name in names] + [empty / "first.yaml"]

    def alone(path: Path) -> FileFacts:
        found = find_repository(path.absolute())
        relative = found.relpath(path) if found is not None else None
        return FileFacts(relative, relative is not None and not found.matches_head(relative, path))

    facts = file_facts(paths)
    assert facts == {path: alone(path) for path in paths}
    assert [facts[path].modified for path in paths] == [False, True, False, False, True, True, True]
    assert facts[lab / "sub folder/dosé.yaml"].relative == "sub folder/dosé.yaml"


# ------------------------------------------------------------------ looks


def _luminance(hex_colour: str) -> float:
    channels = [int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
    linear = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in channels]
    return 0.2126 * linear[0] + 0.7152 * linear[1] + 0.0722 * linear[2]


def _contrast(a: str, b: str) -> float:
    # WCAG 2.1 contrast ratio (open standard), relative luminance from sRGB
    high, low = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (high + 0.05) / (low + 0.05)


def test_text_colours_meet_wcag_aa():
    from registry.summary.htmlpage import CSS

    colours = dict(re.findall(r"--([a-z-]+):\s*(#[0-9a-f]{6})", CSS))
    for text in ("ink", "muted", "link", "accent"):
        for background in ("#ffffff", colours["band"], colours["note-bg"]):
            assert _contrast(colours[text], background) >= 4.5, (text, background)
    assert _contrast("#767676", "#ffffff") == pytest.approx(4.54, abs=0.01)  # the well-known lightest AA grey
    assert "@media print" in CSS and "max-width" in CSS


def test_sensitivity_of_a_verified_design_says_which_rows_are_simulated(tmp_path, epoch):
    # The stated design's row is check's simulation-verified size and simulated power; the what-if
    # rows come from the formula and are labelled so, in the table, the note and the figure's text.
    spec = tmp_path / "wound-closure.yaml"
    spec.write_text(
        "id: wound-closure\ntitle: Time to wound closure with two dressings\nstatus: draft\n"
        "data_collection:\n  start: 2028-01-01\n"
        "design:\n  test: log-rank\n  effect:\n    hr: 0.5\n    event_probability: 0.8\n"
        "  simulation:\n    reps: 1000\n"
        "sample_size:\n  per_group: 45\n", encoding="utf-8")
    report, found = _report("wound-closure", tmp_path)
    summary = build_summary(report, found.path, render_time())
    stated = _cells(summary.markdown, "as stated")
    assert stated[2] == str(report.sample.n_per_group) and stated[-1] == "simulation"
    assert stated[4] == f"{report.at_planned.power:.3f}" and report.at_planned.verification is not None
    formula_rows = sensitivity(report.spec.design, 45)
    smaller = _cells(summary.markdown, "effect 20% smaller")
    assert smaller[-1] == "formula (normal approximation)" and smaller[2] == str(formula_rows[2].n_analysable)
    assert "The other rows are not simulated" in summary.markdown
    assert "Power by the formula" in summary.html and "power by the formula" in summary.svg
    assert "which gives a simulated power of" in summary.markdown


def test_sensitivity_of_an_exact_design_has_no_method_column(tmp_path, epoch):
    report, found = _report("caffeine-reaction-time")
    summary = build_summary(report, found.path, render_time())
    assert "| Method |" not in summary.markdown and "power by the formula" not in summary.svg
