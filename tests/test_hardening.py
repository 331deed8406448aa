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


# ------------------------------------------------------------------ confined pilot files

PILOT_SPEC = """id: pilot-demo
title: Pilot demo
status: draft
data_collection:
  start: 2027-03-01
design:
  test: two-sample-t
  effect:
    difference: 2.0
    sd: 2.5
  pilot:
    file: {file}
    column: weight
    sha256: "{sha}"
sample_size:
  per_group: 40
"""
PILOT_VALUES = "weight\n" + "".join(f"{v}\n" for v in (10.1, 11.9, 9.4, 12.2, 10.8, 11.1, 13.0, 9.9))


def _pilot_registry(tmp_path, file, spec_name="pilot-demo.yaml", spec_id="pilot-demo"):
    folder = tmp_path / "reg"
    folder.mkdir(exist_ok=True)
    (folder / spec_name).write_text(PILOT_SPEC.format(file=file, sha="0" * 64).replace("pilot-demo", spec_id),
                                    encoding="utf-8")
    return folder


def _pilot_findings(result):
    return [f for s in result.json()["specs"] for f in s["findings"] if f["kind"].startswith("pilot")]


SECRET = "API_TOKEN=s3cr3t-do-not-print"


@pytest.mark.parametrize("how", ["dotdot", "symlink", "linked-folder"])
def test_a_pilot_file_outside_the_registry_is_refused_without_echoing_it(tmp_path, run, how):
    outside = tmp_path / "secrets.csv"
    outside.write_text(f"{SECRET},x\n1,2\n3,4\n", encoding="utf-8")
    if how == "symlink":
        folder = _pilot_registry(tmp_path, "data.csv")
        (folder / "data.csv").symlink_to(outside)
    elif how == "linked-folder":
        folder = _pilot_registry(tmp_path, "data/secrets.csv")
        (folder / "data").symlink_to(tmp_path)
    else:
        folder = _pilot_registry(tmp_path, "../secrets.csv")
    result = run("check", "--no-history", folder, "--json")
    assert result.status == 1
    found = _pilot_findings(result)
    assert [f["kind"] for f in found] == ["pilot-invalid"], found
    assert "outside the registry" in found[0]["message"]
    assert "s3cr3t" not in result.out + result.err


def test_a_pilot_file_elsewhere_in_the_same_repository_is_read(tmp_path, run):
    lab = Lab(tmp_path / "lab")
    (lab.root / "data").mkdir()
    (lab.root / "data" / "controls.csv").write_text(PILOT_VALUES, encoding="utf-8")
    (lab.registry / "pilot-demo.yaml").write_text(PILOT_SPEC.format(file="../data/controls.csv", sha="0" * 64),
                                                  encoding="utf-8")
    result = run("check", "--no-history", lab.registry, "--json")
    kinds = {f["kind"] for f in _pilot_findings(result)}
    assert "pilot-changed" in kinds and "pilot-invalid" not in kinds, _pilot_findings(result)


def test_a_header_line_is_not_echoed_beyond_plain_column_names(tmp_path, run):
    folder = _pilot_registry(tmp_path, "data.csv")
    (folder / "data.csv").write_text(f"group,{SECRET}\na,1\nb,2\n", encoding="utf-8")
    result = run("check", "--no-history", folder, "--json")
    message = _pilot_findings(result)[0]["message"]
    assert "no column 'weight'" in message and "'group'" in message and "1 name not shown" in message, message
    assert "s3cr3t" not in result.out + result.err
    cli = run("pilot", folder / "data.csv", "--column", "weight")
    assert cli.status == 2 and "s3cr3t" not in cli.out + cli.err


def test_a_non_numeric_cell_is_not_echoed(tmp_path, run):
    folder = _pilot_registry(tmp_path, "data.csv")
    (folder / "data.csv").write_text(f"weight\n1\n{SECRET}\n2\n", encoding="utf-8")
    message = _pilot_findings(run("check", "--no-history", folder, "--json"))[0]["message"]
    assert "data.csv:3: column 'weight'" in message and "s3cr3t" not in message, message


def test_a_fifo_as_pilot_file_does_not_hang_check_or_pilot(tmp_path):
    import subprocess
    import sys

    folder = _pilot_registry(tmp_path, "data.csv")
    os.mkfifo(folder / "data.csv")
    env = {**os.environ, "PYTHONPATH": str(ROOT), "NO_COLOR": "1"}
    for argv in (["check", "--no-history", str(folder), "--json"], ["pilot", str(folder / "data.csv"), "--column", "x"]):
        try:
            done = subprocess.run([sys.executable, "-m", "registry", *argv], capture_output=True, env=env, timeout=60)
        except subprocess.TimeoutExpired:
            pytest.fail(f"prespec {argv[0]} blocked on a FIFO named as pilot file")
        assert b"not a regular file" in done.stdout + done.stderr, done


def test_pilot_values_that_overflow_are_a_finding_not_a_crash(tmp_path, run):
    folder = _pilot_registry(tmp_path, "data.csv")
    (folder / "data.csv").write_text("weight\n1.7e308\n1.7e308\n-1.7e308\n", encoding="utf-8")
    result = run("check", "--no-history", folder, "--json")
    assert result.status == 1, result.err
    found = _pilot_findings(result)
    assert [f["kind"] for f in found] == ["pilot-invalid"] and "overflows" in found[0]["message"], found
    cli = run("pilot", folder / "data.csv", "--column", "weight")
    assert cli.status == 2 and "overflows" in cli.err


def test_the_csv_dialect_is_found_without_a_general_sniffer(tmp_path, monkeypatch):
    # a 21 KB file on which a general-purpose delimiter sniffer backtracks for seconds
    import csv

    from registry.pilot import read_pilot

    class _NoSniffer:
        def __init__(self):
            raise AssertionError("the delimiter is detected by a linear scan, not a backtracking sniffer")

    monkeypatch.setattr(csv, "Sniffer", _NoSniffer)
    path = tmp_path / "p.csv"
    path.write_text("weight,note\n1,x\n3,y\n2," + ',"a' * 7000 + "\n", encoding="utf-8")
    summary = read_pilot(path, "weight")
    assert summary.n == 3 and summary.mean == pytest.approx(2.0)
    semi = tmp_path / "semi.csv"
    semi.write_text('id;weight\n1;"4.0"\n2;5.0\n', encoding="utf-8")
    assert read_pilot(semi, "weight").n == 2
    tabs = tmp_path / "tabs.csv"
    tabs.write_text("id\tweight\n1\t4.0\n2\t5.0\n3\t\n", encoding="utf-8")
    assert read_pilot(tabs, "weight").missing == 1


def test_each_pilot_file_is_read_once_per_run(tmp_path, run, monkeypatch):
    import builtins

    import registry.pilot as pilot_module

    folder = _pilot_registry(tmp_path, "data.csv")
    for i in range(1, 6):
        _pilot_registry(tmp_path, "data.csv", f"pilot-demo-{i}.yaml", f"pilot-demo-{i}")
    (folder / "data.csv").write_text(PILOT_VALUES + "10.5\n", encoding="utf-8")  # new bytes: not read before
    reads = []
    real_open, real_fdopen = builtins.open, os.fdopen

    def counting_open(file, *args, **kwargs):
        if str(file).endswith("data.csv"):
            reads.append(file)
        return real_open(file, *args, **kwargs)

    def counting_fdopen(fd, *args, **kwargs):
        if os.readlink(f"/proc/self/fd/{fd}").endswith("data.csv"):
            reads.append(fd)
        return real_fdopen(fd, *args, **kwargs)

    monkeypatch.setattr(builtins, "open", counting_open)
    monkeypatch.setattr(pilot_module.os, "fdopen", counting_fdopen)
    result = run("check", "--no-history", folder, "--json")
    assert len(result.json()["specs"]) == 6
    assert len(reads) == 1, reads


# ------------------------------------------------------------------ terminal safety

MARKUP_NAME = "Eve [/] [link=https://evil.example]click[/link] [bold]x"
CONTROL_NAME = "Eve \x1b]8;;https://evil.example\x07here\x1b]8;;\x07 \x1b[2J"


def _raw_controls(text):
    # ESC, BEL, DEL and the C1 range (CSI is U+009B); newline and tab are layout, not controls
    return [ch for ch in text if (ord(ch) < 32 and ch not in "\n\t") or 0x7F <= ord(ch) <= 0x9F]


def test_history_prints_markup_in_an_author_name_as_text(lab, run):
    lab.write(SPEC, spec_text())
    lab.commit("plan", BEFORE, author=(MARKUP_NAME, "eve@lab.example"))
    lab.write(SPEC, spec_text(per_group="20"))
    lab.commit("fewer", AFTER, author=(MARKUP_NAME, "eve@lab.example"))
    result = run("history", "mouse-diet", lab.registry)
    assert result.status == 1, result.err  # drift, not a crash (exit 3)
    assert "[link=https://evil.example]click[/link]" in result.out.replace("\n", "") or \
        "[link=https://evil.example]" in result.out
    assert "[/]" in result.out
    check = run("check", lab.registry)
    assert "[link=https://evil.example]click[/link]" in check.out


def test_control_characters_in_author_names_and_spec_values_are_escaped(lab, run):
    lab.write(SPEC, spec_text())
    lab.commit("plan", BEFORE)
    lab.write(SPEC, spec_text(per_group="20", analysis="Welch t-test \u009b31m on week-8 butyrate."))
    lab.commit("fewer", AFTER, author=(CONTROL_NAME, "eve@lab.example"))
    for argv in (["history", "mouse-diet", lab.registry], ["check", lab.registry]):
        result = run(*argv)
        assert result.status == 1, (argv, result.err)
        assert not _raw_controls(result.out + result.err), (argv, result.out)
        assert "\\x1b]8;;https://evil.example\\x07here" in result.out, result.out


def test_a_tagger_name_with_markup_is_not_a_live_link_in_verify(lab, run):
    lab.write(SPEC, spec_text(start="2099-06-01"))
    head = lab.commit("plan", BEFORE)
    message = format_message({"id": "mouse-diet", "path": f"registry/{SPEC}", "commit": head, "start": "2099-06-01",
                              "content-sha256": "0" * 64, "tool": "prespec 0.1.0"})
    lab.repo.tag_with_dates("prespec/mouse-diet/v1", head, message, tagger=(MARKUP_NAME, "eve@lab.example"),
                            date="2020-01-11T09:00:00+01:00")
    result = run("verify", "mouse-diet", lab.registry)
    assert result.status == 1  # the recorded hash is wrong on purpose
    assert "[link=https://evil.example]" in result.out, result.out


def test_a_path_with_brackets_is_printed_whole(tmp_path, run):
    folder = tmp_path / "[old] specs"
    folder.mkdir()
    result = run("check", folder)
    assert "[old] specs" in result.out, result.out


def test_an_id_on_the_command_line_is_printed_without_controls(lab, run):
    lab.write(SPEC, spec_text())
    lab.commit("plan", BEFORE)
    for command in ("history", "verify", "hash"):
        result = run(command, "no-such\x1b[2J\u009b", lab.registry)
        assert result.status in (1, 2)
        assert not _raw_controls(result.out + result.err), (command, result.err)


# ------------------------------------------------------------------ tags at scale

TAG_SPECS, TAG_VERSIONS = 40, 500  # 20,000 registration tags


def many_tags_lab(root, specs=TAG_SPECS, versions=TAG_VERSIONS):
    """A registry of ``specs`` specs, each with ``versions`` annotated registration tags (pinned tagger
    and date). The tag objects go into one pack file written here and indexed by ``git index-pack``
    (the pack format: git's Documentation/gitformat-pack.txt), the refs into ``packed-refs``, so 20,000
    tags take a second rather than a process or a file per tag."""
    import hashlib
    import zlib

    lab = Lab(root)
    for i in range(specs):
        lab.write(f"study-{i:03d}.yaml", spec_text(f"study-{i:03d}"))
    head = lab.commit("plan", BEFORE)
    objects, refs = [], []
    for i in range(specs):
        for v in range(1, versions + 1):
            name = f"prespec/study-{i:03d}/v{v}"
            message = format_message({"id": f"study-{i:03d}", "path": f"registry/study-{i:03d}.yaml",
                                      "commit": head, "start": "2020-03-02", "content-sha256": "0" * 64,
                                      "tool": "prespec 0.1.0"})
            body = (f"object {head}\ntype commit\ntag {name}\ntagger Lab lead <lead@lab.example> 1578733200 +0100"
                    f"\n\n{message}").encode()
            objects.append(body)
            refs.append((f"refs/tags/{name}", hashlib.sha1(b"tag %d\0" % len(body) + body).hexdigest()))
    pack = bytearray(b"PACK" + (2).to_bytes(4, "big") + len(objects).to_bytes(4, "big"))
    for body in objects:
        size = len(body)
        header = [(4 << 4) | (size & 0x0F)]  # object type 4: tag
        size >>= 4
        while size:
            header[-1] |= 0x80
            header.append(size & 0x7F)
            size >>= 7
        pack += bytes(header) + zlib.compress(body)
    pack += hashlib.sha1(pack).digest()
    _git(lab, "index-pack", "--stdin", stdin=bytes(pack))
    lines = ["# pack-refs with: peeled fully-peeled sorted "]
    for ref, sha in sorted(refs):
        lines += [f"{sha} {ref}", f"^{head}"]
    (lab.root / ".git" / "packed-refs").write_text("\n".join(lines) + "\n", encoding="ascii")
    return lab


def test_check_reads_registration_tags_once_per_run(tmp_path, run, monkeypatch):
    import registry.audit as audit_module
    import registry.git as git_module

    lab = many_tags_lab(tmp_path / "lab")
    looked_at = []
    real_version = audit_module.tag_version
    monkeypatch.setattr(audit_module, "tag_version", lambda name, spec_id: looked_at.append(name) or
                        real_version(name, spec_id))
    listings = []
    real_tags = git_module.Repository.tags
    monkeypatch.setattr(git_module.Repository, "tags", lambda self, pattern: listings.append(pattern) or
                        real_tags(self, pattern))
    result = run("check", lab.registry, "--json")
    tags = TAG_SPECS * TAG_VERSIONS
    assert len(result.json()["specs"]) == TAG_SPECS, result.err
    assert listings == ["prespec"]  # the tags are listed once for the whole registry
    # each tag is looked at a bounded number of times, not once per spec (which would be 40 x 20,000)
    assert len(looked_at) <= 3 * tags, len(looked_at)
    assert all(s["history"]["verdict"] == "clean" for s in result.json()["specs"])


# ------------------------------------------------------------------ the summary's "working copy identical"


def _provenance(lab):
    from registry.audit import add_history
    from registry.checks import check_files
    from registry.discovery import discover
    from registry.summary.provenance import provenance, render_time

    files = discover([str(lab.registry)])
    reports = check_files(files)
    add_history(reports, files, [str(lab.registry)])
    return provenance(reports[0], files[0].path, render_time())


def test_the_summary_compares_blobs_not_the_index(lab):
    lab.write(SPEC, spec_text())
    lab.commit("plan", BEFORE)
    assert _provenance(lab).modified is False
    lab.write(SPEC, spec_text(per_group="20"))
    _git(lab, "update-index", "--assume-unchanged", f"registry/{SPEC}")  # git status now hides the edit
    assert _git(lab, "status", "--porcelain") == ""
    assert _provenance(lab).modified is True


def test_the_summary_runs_no_repository_program_and_leaves_the_index_alone(lab, tmp_path):
    lab.write(SPEC, spec_text())
    lab.commit("plan", BEFORE)
    marker = tmp_path / "ran"
    hook = tmp_path / "fsmonitor.sh"
    hook.write_text(f"#!/bin/sh\necho ran >> '{marker}'\nexit 1\n", encoding="utf-8")
    hook.chmod(0o755)
    _git(lab, "config", "core.fsmonitor", str(hook))
    _git(lab, "config", "filter.spy.clean", f"sh -c 'echo ran >> {marker}; cat'")
    (lab.root / ".gitattributes").write_text("*.yaml filter=spy\n", encoding="utf-8")
    index = lab.root / ".git" / "index"
    before = (index.read_bytes(), index.stat().st_mtime_ns)
    (lab.registry / SPEC).touch()  # a stat change git status would refresh the index for
    assert _provenance(lab).modified is False
    assert not marker.exists(), marker.read_text()
    assert (index.read_bytes(), index.stat().st_mtime_ns) == before


# ------------------------------------------------------------------ smaller ones


@pytest.mark.parametrize("n", ["1000000000", "100000001", "0", "\u0663\u0660"])  # "٣٠": Arabic-Indic digits
def test_size_n_outside_the_documented_cap_or_not_ascii_digits_is_refused(run, n):
    # the cap is power.base.MAX_N = 100,000,000 per group (docs/errors.md, Caps)
    result = run("size", "two-sample-t", "--d", "0.5", "--n", n)
    assert result.status == 2, result.out
    assert "--n" in result.err


def test_size_n_at_the_cap_is_accepted(run):
    assert run("size", "two-sample-t", "--d", "0.5", "--n", "100000000").status == 0


# ------------------------------------------------------------------ render safety


@pytest.mark.parametrize("folder", ["my data", "data `whoami`", "x $(touch pwned) y", "it's"])
def test_the_verify_command_on_the_summary_is_one_shell_word_per_argument(folder):
    # POSIX shell word splitting, as Python's shlex implements it (common practice)
    import html
    import re
    import shlex

    from markdown_it import MarkdownIt

    from registry.summary import mdtext
    from registry.summary.provenance import _verify_command

    command = _verify_command("mouse-diet", f"{folder}/mouse-diet.yaml")
    assert shlex.split(command) == ["prespec", "verify", "mouse-diet", folder]
    page = MarkdownIt().render(mdtext.code(command))  # CommonMark, the summary's Markdown flavour
    shown = re.search(r"<code>(.*?)</code>", page)
    assert shown and html.unescape(shown.group(1)) == command, page


@pytest.mark.parametrize("kind", ["fifo", "symlink"])
def test_schema_out_never_replaces_a_fifo_or_a_link(tmp_path, run, kind):
    target = tmp_path / "schema.json"
    elsewhere = tmp_path / "elsewhere.json"
    elsewhere.write_text("keep me", encoding="utf-8")
    if kind == "fifo":
        os.mkfifo(target)
    else:
        target.symlink_to(elsewhere)
    result = run("schema", "--out", target)
    assert result.status == 2, result.err
    assert "prespec will not" in result.err or "never a link" in result.err
    assert (target.is_fifo() if kind == "fifo" else target.is_symlink())
    assert elsewhere.read_text(encoding="utf-8") == "keep me"


def test_render_refuses_a_fifo_in_the_output_folder_without_opening_it(tmp_path):
    from registry.commands import render as render_command
    from registry.fsutil import WriteRefused

    os.mkfifo(tmp_path / "mouse-diet.md")
    with pytest.raises(WriteRefused, match="not a regular file"):
        render_command._targets(tmp_path, ["mouse-diet.html", "mouse-diet.md"])  # would block on open()


def test_render_replaces_only_files_whose_first_line_is_its_marker(tmp_path):
    from registry.commands import render as render_command
    from registry.fsutil import WriteRefused

    own = tmp_path / "a.md"
    own.write_text("[//]: # (prespec design summary of a. Generated from the spec; edit the spec, not this file.)\n",
                   encoding="utf-8")
    assert render_command._targets(tmp_path, ["a.md"]) == [own]
    notes = tmp_path / "b.md"
    notes.write_text("# My notes\n\nI once ran [//]: # (prespec something) here.\n", encoding="utf-8")
    with pytest.raises(WriteRefused, match="not written by prespec"):
        render_command._targets(tmp_path, ["b.md"])


def test_ctrl_c_while_prespec_starts_is_reported_not_a_traceback(monkeypatch, capsys):
    import builtins
    import sys

    from registry.__main__ import entry

    real_import = builtins.__import__

    def interrupted(name, globals=None, locals=None, fromlist=(), level=0):
        if name in ("cli", "registry.cli") and level in (0, 1):
            raise KeyboardInterrupt
        return real_import(name, globals, locals, fromlist, level)

    monkeypatch.delitem(sys.modules, "registry.cli", raising=False)
    monkeypatch.setattr(builtins, "__import__", interrupted)
    with pytest.raises(SystemExit) as exit_:
        entry()
    assert exit_.value.code == 130
    assert capsys.readouterr().err == "prespec: interrupted\n"


@pytest.mark.parametrize("encoding", ["utf-32-le", "utf-32-be", "utf-16-le", "utf-16-be"])
def test_utf16_and_utf32_without_a_byte_order_mark_get_the_encoding_message(tmp_path, run, encoding):
    # Python's codecs write no byte-order mark for the -le/-be variants (Python docs, codecs)
    (tmp_path / "a.yaml").write_bytes(spec_text("a-spec").encode(encoding))
    result = run("check", "--no-history", tmp_path, "--json")
    message = result.json()["specs"][0]["findings"][0]["message"]
    assert "looks like UTF-16 or UTF-32 text without a byte-order mark" in message, message
