"""Regression tests for the remaining edges of the hardening work: summaries named like the site's
own files, file names that are not UTF-8, demo and new refusing what they must not write, YAML's
non-specific tag and other scripts' digits, numerical warnings, raw control characters in the
canonical JSON and registration tags read once per render.

The references are the YAML 1.2.2 specification (section 6.9.1: a node with the non-specific tag
``!`` is a string when it is a scalar; section 10.3.2: integers and floats are written with the
digits 0-9), POSIX file names (any bytes but NUL and ``/``), the ECMA-48 / ISO 6429 control sets
(C0 0x00-0x1f, DEL 0x7f, C1 0x80-0x9f, which terminals act on) and RFC 8259 (JSON escapes
``\\uXXXX``), as docs/reviewer-guide.md relies on them.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys

import pytest

from registry.registration import format_message

from .conftest import ROOT
from .history_helpers import Lab, spec_text

BEFORE = "2020-01-10T10:00:00+01:00"
FUTURE_START = "2030-03-04"  # registration is only possible before the start
EPOCH = "1800000000"


@pytest.fixture
def lab(tmp_path):
    return Lab(tmp_path / "lab")


def _raw_controls(text: str) -> list[str]:
    """Characters a terminal acts on (ECMA-48 C0 but tab and newline, DEL, C1), bidirectional overrides
    and lone surrogates (bytes of a file name that is not UTF-8, written raw)."""
    return [hex(ord(ch)) for ch in text if (ord(ch) < 0x20 and ch not in "\t\n") or 0x7F <= ord(ch) <= 0x9F
            or ch in "\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069" or 0xD800 <= ord(ch) <= 0xDFFF]


# ------------------------------------------------------------------ render: ids named like the site's files


def test_a_spec_whose_id_is_index_keeps_its_summary_beside_the_registry_index(tmp_path, run, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    registry = tmp_path / "registry"
    registry.mkdir()
    (registry / "index.yaml").write_text(spec_text("index"), encoding="utf-8")
    (registry / "mouse-diet.yaml").write_text(spec_text(), encoding="utf-8")
    out = tmp_path / "site"
    result = run("render", "--all", registry, "--out", out, "--no-history", "--json")
    assert result.status == 0, result.err
    index_md = (out / "index.md").read_text(encoding="utf-8")
    assert index_md.startswith("[//]: # (prespec registry index."), index_md[:120]
    summary = (out / "index_spec.md").read_text(encoding="utf-8")
    assert summary.startswith("[//]: # (prespec design summary of index."), summary[:120]
    assert '<meta name="generator" content="prespec ' in (out / "index_spec.html").read_text(encoding="utf-8")
    assert 'href="index_spec.html"' in (out / "index.html").read_text(encoding="utf-8")
    pages = {spec["id"]: spec["page"] for spec in result.json()["specs"]}
    assert pages == {"index": "index_spec.html", "mouse-diet": "mouse-diet.html"}

    # rendering that spec alone into the same folder replaces its own summary, never the registry index
    again = run("render", "index", registry, "--out", out, "--no-history")
    assert again.status == 0, again.err
    assert (out / "index.md").read_text(encoding="utf-8") == index_md
    assert "index_spec.html" in again.out


def test_the_summary_printed_without_out_is_found_for_an_id_named_index(tmp_path, run):
    registry = tmp_path / "registry"
    registry.mkdir()
    (registry / "index.yaml").write_text(spec_text("index"), encoding="utf-8")
    result = run("render", "index", registry, "--no-history", "--json")
    assert result.status == 0, result.err
    assert result.json()["specs"][0]["markdown"].startswith("[//]: # (prespec design summary of index.")


@pytest.mark.parametrize("spec_id", ["index", "site", "site-js", "mouse-diet", "index-html"])
def test_no_summary_takes_the_name_of_a_site_file(spec_id):
    from registry.summary import SITE_FILES, page_stem
    from registry.summary.document import figure_name
    from registry.summary.sequential import boundary_figure_name

    names = {f"{page_stem(spec_id)}.md", f"{page_stem(spec_id)}.html", figure_name(spec_id),
             boundary_figure_name(spec_id)}
    assert not names & set(SITE_FILES), names
    assert page_stem(spec_id) == spec_id or spec_id == "index"  # only a colliding id moves


def test_a_file_name_given_twice_in_one_render_is_refused_not_replaced():
    from registry.commands.render import _add_files

    files = {"a.md": "first"}
    with pytest.raises(ValueError, match="a.md"):  # WriteRefused
        _add_files(files, {"a.md": "second", "b.md": "x"}, "the summary of 'a'")
    assert files == {"a.md": "first"}


# ------------------------------------------------------------------ file names that are not UTF-8


def _non_utf8_lab(tmp_path, status="draft"):
    lab = Lab(tmp_path / "lab")
    name = os.fsdecode(b"mouse-\xe9.yaml")  # Latin-1 e-acute: not UTF-8
    try:
        path = lab.write(name, spec_text("mouse-e", start=FUTURE_START, status=status))
    except (OSError, UnicodeError):  # pragma: no cover - a file system that insists on UTF-8 names
        pytest.skip("this file system does not store names that are not UTF-8")
    lab.commit("plan", BEFORE)
    return lab, path


def test_check_shows_a_file_name_that_is_not_utf8_by_its_bytes(tmp_path, run):
    lab, _ = _non_utf8_lab(tmp_path)
    result = run("check", lab.registry)
    assert result.status == 0, result.err
    assert "mouse-\\xe9.yaml" in result.out  # the byte, visibly; not Python's \udce9 nor the raw byte
    assert "udce9" not in result.out and not _raw_controls(result.out)


def test_render_writes_the_summary_of_a_file_whose_name_is_not_utf8(tmp_path, run, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    lab, _ = _non_utf8_lab(tmp_path)
    out = tmp_path / "site"
    result = run("render", "--all", lab.registry, "--out", out)
    assert result.status == 0, result.err
    summary = (out / "mouse-e.md").read_text(encoding="utf-8")
    assert "| Spec file | registry/mouse-\\\\xe9.yaml |" in summary  # Markdown escapes the backslash
    printed = run("render", "mouse-e", lab.registry)
    assert printed.status == 0, printed.err
    assert not _raw_controls(printed.out), _raw_controls(printed.out)


def test_the_verify_command_writes_a_byte_that_is_not_utf8_as_that_byte():
    from registry.summary.provenance import _verify_command

    command = _verify_command("mouse-e", os.fsdecode(b"caf\xe9/mouse-e.yaml"))
    assert command == "prespec verify mouse-e $'caf\\xe9'"  # bash: $'\xe9' is the byte 0xe9
    control = _verify_command("mouse-e", "a\u0085b/mouse-e.yaml")  # U+0085 is two bytes in UTF-8, not \x85
    assert control == "prespec verify mouse-e $'a\\u0085b'"


def test_register_refuses_a_spec_whose_path_is_not_utf8(tmp_path, monkeypatch, capsys):
    from registry.cli import main

    lab, _ = _non_utf8_lab(tmp_path, status="planned")
    monkeypatch.chdir(lab.root)
    status = main(["register", "mouse-e", "registry"])
    err = capsys.readouterr().err
    assert status == 1, err
    assert "registry/mouse-\\xe9.yaml: the file's path is not UTF-8 text" in err, err
    assert lab.repo.tags("prespec") == []  # no tag recording a path that could never be verified


# ------------------------------------------------------------------ demo refuses what it must not write into


def test_demo_into_a_dangling_symlink_is_refused_and_writes_nothing(tmp_path, run):
    link = tmp_path / "demo"
    link.symlink_to(tmp_path / "elsewhere" / "new")
    result = run("demo", link)
    assert result.status == 2, result.err
    assert "is a symbolic link" in result.err and "Traceback" not in result.err
    assert not (tmp_path / "elsewhere").exists()


def test_demo_into_a_link_to_an_empty_folder_elsewhere_writes_nothing_there(tmp_path, run):
    outside = tmp_path / "outside"
    outside.mkdir()
    inside = tmp_path / "work"
    inside.mkdir()
    (inside / "demo").symlink_to(outside)
    result = run("demo", inside / "demo")
    assert result.status == 2, result.err
    assert list(outside.iterdir()) == []


def test_demo_into_a_missing_parent_folder_is_refused(tmp_path, run):
    result = run("demo", tmp_path / "no" / "such" / "demo")
    assert result.status == 2, result.err
    assert "does not exist" in result.err
    assert list(tmp_path.iterdir()) == []


# ------------------------------------------------------------------ new never writes what check refuses


@pytest.mark.parametrize("title, says", [
    ("x" * 501, "a title has at most 500"),
    ("Diet \x1b[31mand\x1b[0m butyrate", "U+001B"),
    ("Diet\tand butyrate", "U+0009"),
    ("Diet\nand butyrate", "U+000A"),
    ("Diet\rand butyrate", "U+000D"),
    ("Diet\x7fbutyrate", "U+007F"),
    ("Diet\x85butyrate", "U+0085"),
    ("Diet \u202eetaryt", "U+202E"),
    ("Diet\u2028butyrate", "U+2028"),
    (os.fsdecode(b"Di\xe9t"), "not UTF-8"),
])
def test_new_refuses_a_title_its_own_check_would_refuse_or_change(run, tmp_path, title, says):
    result = run("new", "mouse-diet", tmp_path, "--title", title)
    assert result.status == 2, result.err
    assert says in result.err and "--title" in result.err
    assert not _raw_controls(result.err)
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("title", ["x" * 500, "Café au lait \u2014 10 \u00b5g/mL \"quoted\" \\ back", "Diet: 'a' # b"])
def test_a_title_new_accepts_is_checked_clean_and_reads_back_as_given(run, tmp_path, title):
    assert run("new", "mouse-diet", tmp_path, "--title", title).status == 0
    result = run("check", tmp_path / "mouse-diet.yaml", "--no-history", "--json")
    spec = result.json()["specs"][0]
    assert [f for f in spec["findings"] if f["severity"] == "error"] == []
    from registry.yamlio import load_file

    assert load_file(tmp_path / "mouse-diet.yaml").data["title"] == title


# ------------------------------------------------------------------ YAML: the non-specific tag and digits


def _loaders():
    from registry.yamlio import load_bytes, load_bytes_fast

    return [("main loader", load_bytes), ("libyaml, current file", load_bytes_fast),
            ("libyaml, historical version", lambda raw, path: load_bytes_fast(raw, path, main_way_problems=False))]


@pytest.mark.parametrize("way", [name for name, _ in _loaders()])
@pytest.mark.parametrize("text, expected", [
    ("n: ! 64\n", "64"),            # YAML 1.2.2, 6.9.1: '!' makes a scalar a string
    ('n: ! "64"\n', "64"),
    ("n: ! true\n", "true"),
    ("n: [! 1, 2]\n", ["1", 2]),
    ("n: !<!> 64\n", "64"),
    ("n: Wow! 64\n", "Wow! 64"),     # a '!' inside text is no tag
    ("n: 64\n", 64),                 # a plain number stays a number
    ("n: ٦٤\n", "٦٤"),               # Arabic-Indic digits: text, never the integer 64
    ("n: ６４\n", "６４"),             # fullwidth digits: text
    ("n: 0.٠٥\n", "0.٠٥"),
])
def test_the_non_specific_tag_is_text_and_other_digits_are_not_numbers(way, text, expected):
    load = dict(_loaders())[way]
    assert load(text.encode("utf-8"), "x.yaml").data["n"] == expected


@pytest.mark.parametrize("way", [name for name, _ in _loaders()])
@pytest.mark.parametrize("text", ["n: !!int ٦٤\n", "n: !!int ６４\n", "n: !!float ٠.٥\n", "n: !!float ０.５\n"])
def test_a_number_tag_on_other_scripts_digits_is_a_problem(way, text):
    from registry.problems import InvalidSpec

    load = dict(_loaders())[way]
    with pytest.raises(InvalidSpec, match="is tagged"):
        load(text.encode("utf-8"), "x.yaml")


def test_check_refuses_a_sample_size_written_with_the_non_specific_tag_or_other_digits(run, tmp_path):
    for value, hint in (("! 29", "got '29'"), ("٢٩", "digits 0-9: write 29"), ("２９", "digits 0-9: write 29")):
        path = tmp_path / "mouse-diet.yaml"
        path.write_text(spec_text(per_group=value), encoding="utf-8")
        result = run("check", path, "--no-history", "--json")
        spec = result.json()["specs"][0]
        messages = [f["message"] for f in spec["findings"] if f["kind"] == "invalid"]
        assert result.status == 1 and any("per_group must be a whole number" in m and hint in m
                                          for m in messages), messages


def test_history_reads_a_committed_version_with_the_non_specific_tag_as_text(lab):
    from registry.history import Snapshot

    lab.write("mouse-diet.yaml", spec_text(per_group="! 29", sd="!!float ５.０"))
    head = lab.commit("plan with a tagged size", BEFORE)
    raw = lab.repo.blob_at(head, "registry/mouse-diet.yaml")
    assert raw is not None
    snapshot = Snapshot("committed", raw)  # how the history reads every version
    assert snapshot.data is None and "is tagged !!float but is not a number" in (snapshot.error or "")
    lab.write("mouse-diet.yaml", spec_text(per_group="! 29"))
    head = lab.commit("fullwidth SD fixed", BEFORE)
    snapshot = Snapshot("committed", lab.repo.blob_at(head, "registry/mouse-diet.yaml"))
    assert snapshot.data["sample_size"]["per_group"] == "29"
    assert snapshot.spec is None  # a text size is not a valid version, not the integer 29


# ------------------------------------------------------------------ numerical warnings never reach the terminal


def _prespec(*argv, cwd):
    env = {**os.environ, "PYTHONPATH": str(ROOT), "NO_COLOR": "1"}
    return subprocess.run([sys.executable, "-m", "registry", *map(str, argv)], capture_output=True, text=True,
                          env=env, cwd=cwd)


@pytest.mark.parametrize("argv", [
    ["size", "welch-t", "--param", "difference=1e-300", "--param", "sd1=4", "--param", "sd2=6"],
    ["size", "one-way-anova", "--f", "1e-300", "--groups", "4"],
    ["size", "two-sample-t", "--d", "1e-200"],
])
def test_an_effect_too_small_to_square_is_refused_without_a_warning(tmp_path, argv):
    done = _prespec(*argv, cwd=tmp_path)
    assert done.returncode == 2, done.stderr
    assert "is too small" in done.stderr
    assert "Warning" not in done.stderr and "internal error" not in done.stderr, done.stderr


def test_check_of_extreme_designs_prints_no_warning(tmp_path):
    welch = spec_text().replace("test: two-sample-t", "test: welch-t").replace(
        "    difference: 4.0\n    sd: 5.0\n", "    difference: 1.0e-300\n    sd1: 4.0\n    sd2: 6.0\n")
    (tmp_path / "mouse-diet.yaml").write_text(welch, encoding="utf-8")
    (tmp_path / "near-one.yaml").write_text(spec_text("near-one").replace("power: 0.8", "power: 0.999999"),
                                            encoding="utf-8")
    done = _prespec("check", tmp_path, "--no-history", cwd=tmp_path)
    assert done.returncode == 1, done.stderr
    assert "too small" in done.stdout
    assert "Warning" not in done.stderr + done.stdout and "internal error" not in done.stderr, done.stderr


def test_the_solver_start_tolerates_an_effect_whose_square_underflows():
    import warnings

    from registry.power import design_from_params, solve_sample_size
    from registry.power.base import InfeasibleDesign

    with warnings.catch_warnings():
        warnings.simplefilter("error")  # any numpy warning fails the test
        for test, params in (("one-way-anova", {"f": 1e-300, "groups": 4}),
                             ("welch-t", {"difference": 1e-300, "sd1": 4.0, "sd2": 6.0})):
            with pytest.raises(InfeasibleDesign, match="too small"):
                solve_sample_size(design_from_params(test, **params))


# ------------------------------------------------------------------ hash --canonical on a terminal


CONTROL_PLAN = 'analysis_plan: "Welch t-test\\x7f on\\x9b week 8\\u202e butyrate."\n'


def _control_spec(tmp_path):
    path = tmp_path / "mouse-diet.yaml"
    path.write_text(spec_text(analysis="PLACEHOLDER").replace("analysis_plan: PLACEHOLDER\n", CONTROL_PLAN),
                    encoding="utf-8")
    return path


def test_hash_canonical_escapes_del_c1_and_format_characters_on_a_terminal(tmp_path, run, monkeypatch):
    path = _control_spec(tmp_path)
    monkeypatch.setattr(sys.stdout, "isatty", lambda: True, raising=False)
    result = run("hash", path, "--canonical")
    assert result.status == 0, result.err
    line = result.out.splitlines()[0]
    assert not _raw_controls(result.out), _raw_controls(result.out)
    assert "\\u007f" in line and "\\u009b" in line and "\\u202e" in line
    plan = json.loads(line)["analysis_plan"]  # the escaped line is the same JSON
    assert plan == "Welch t-test\x7f on\x9b week 8\u202e butyrate."


def test_hash_canonical_into_a_file_is_the_exact_hashed_text(tmp_path, run):
    path = _control_spec(tmp_path)
    result = run("hash", path, "--canonical")  # captured output is not a terminal
    line, summary = result.out.splitlines()[:2]
    assert hashlib.sha256(line.encode("utf-8")).hexdigest() == summary.split()[0]


def test_hash_json_has_no_raw_control_characters_and_the_same_values(tmp_path, run):
    path = _control_spec(tmp_path)
    result = run("hash", path, "--canonical", "--json")
    assert not _raw_controls(result.out)
    payload = result.json()
    assert hashlib.sha256(payload["canonical"].encode("utf-8")).hexdigest() == payload["sha256"]


def test_json_output_escapes_del_c1_and_format_characters(lab, run):
    lab.write("mouse-diet.yaml", spec_text(start=FUTURE_START))
    lab.commit("plan", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(analysis="PLACEHOLDER", start=FUTURE_START).replace(
        "analysis_plan: PLACEHOLDER\n", CONTROL_PLAN))
    lab.commit("plan text with controls", "2020-01-12T10:00:00+01:00")
    result = run("history", "mouse-diet", lab.registry, "--json")  # the change's old and new values
    assert result.status == 0, result.err
    assert not _raw_controls(result.out), _raw_controls(result.out)
    assert "\\u007f" in result.out
    text = json.dumps(result.json(), ensure_ascii=False)
    assert "Welch t-test\x7f on\x9b week 8\u202e butyrate." in text  # the same values once parsed


# ------------------------------------------------------------------ render reads the registration tags once


def _registered_lab(tmp_path, count=3):
    lab = Lab(tmp_path / "lab")
    for i in range(count):
        lab.write(f"mouse-{i}.yaml", spec_text(f"mouse-{i}", start=FUTURE_START))
    head = lab.commit("plan", BEFORE)
    for i in range(count):
        message = format_message({"id": f"mouse-{i}", "path": f"registry/mouse-{i}.yaml", "commit": head,
                                  "start": FUTURE_START, "content-sha256": "0" * 64, "tool": "prespec 0.1.0"})
        lab.repo.tag_with_dates(f"prespec/mouse-{i}/v1", head, message, tagger=("Lab lead", "lead@lab.example"),
                                date="2020-01-11T09:00:00+01:00")
    return lab


@pytest.mark.parametrize("history", [True, False])
def test_render_reads_the_registration_tags_once_per_run(tmp_path, run, monkeypatch, history):
    import registry.git as git_module

    lab = _registered_lab(tmp_path)
    listings = []
    real_tags = git_module.Repository.tags
    monkeypatch.setattr(git_module.Repository, "tags", lambda self, pattern: listings.append(pattern) or
                        real_tags(self, pattern))
    out = tmp_path / "site"
    result = run("render", "--all", lab.registry, "--out", out, *([] if history else ["--no-history"]))
    assert result.status == 0, result.err
    assert listings == ["prespec"], listings
    for i in range(3):  # and each summary still names its own registration
        assert f"prespec/mouse-{i}/v1" in (out / f"mouse-{i}.md").read_text(encoding="utf-8")


# ------------------------------------------------------------------ no repository-configured program


def test_a_signed_commit_does_not_run_the_repositorys_signature_program(lab, run, tmp_path):
    """``log.showSignature`` in a repository's config makes every ``git log`` run its ``gpg.program``
    on each signed commit; prespec reads history with signature checks off and the standard programs."""
    import stat

    def git(*args, stdin=None):
        return subprocess.run(["git", *args], cwd=lab.root, input=stdin, capture_output=True, check=True).stdout

    lab.write("mouse-diet.yaml", spec_text(start=FUTURE_START))
    lab.commit("plan", BEFORE)
    tree, parent = git("rev-parse", "HEAD^{tree}").decode().strip(), git("rev-parse", "HEAD").decode().strip()
    signed = (f"tree {tree}\nparent {parent}\nauthor Lab lead <lead@lab.example> 1600000000 +0000\n"
              "committer Lab lead <lead@lab.example> 1600000000 +0000\ngpgsig -----BEGIN PGP SIGNATURE-----\n \n"
              " iQEzBAABCAAdFiEE\n -----END PGP SIGNATURE-----\n\na signed commit\n")  # git's commit object format
    commit = git("hash-object", "-t", "commit", "-w", "--stdin", stdin=signed.encode()).decode().strip()
    git("update-ref", "HEAD", commit)
    marker = tmp_path / "ran.txt"
    program = tmp_path / "signature-program"
    program.write_text(f"#!/bin/sh\necho ran >> '{marker}'\nexit 1\n", encoding="utf-8")
    program.chmod(program.stat().st_mode | stat.S_IXUSR)
    git("config", "log.showSignature", "true")
    git("config", "gpg.program", str(program))
    git("log", "-1", "--format=%H")  # git itself runs it: the trap is set
    assert marker.exists()
    marker.unlink()
    for argv in (["check", lab.registry], ["history", "mouse-diet", lab.registry],
                 ["render", "--all", lab.registry, "--out", tmp_path / "site"], ["verify", "mouse-diet", lab.registry]):
        result = run(*argv)
        assert "internal error" not in result.err, (argv, result.err)
        assert not marker.exists(), argv
