"""``check`` in worker processes: from ``checks.POOL_FROM`` files to check on, forked workers check
them while a process of its own reads the git history (forked before the workers' statistics
load) and the main process takes it. Whatever the workers or the reader do (or fail to do), the
findings, sizes and histories are those one process gives, byte for byte."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
from pathlib import Path

import pytest

import registry.audit as audit
import registry.checks as checks
import registry.commands.check as check_command

from .history_helpers import Lab, spec_text
from .test_git_faults import _break_blob

EXAMPLES = Path(__file__).resolve().parent.parent / "example_registry"
BEFORE, AFTER = "2020-03-01T10:00:00+00:00", "2020-04-01T10:00:00+00:00"


@pytest.fixture
def lab(tmp_path):
    """The example registry committed, then one design edited after its start without an amendment
    (drift) and one file edited and left uncommitted: every kind of history finding a check reports."""
    lab = Lab(tmp_path / "lab")
    for path in EXAMPLES.iterdir():
        shutil.copy(path, lab.registry / path.name)
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("designs", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(sd="4.0"))
    lab.commit("smaller sd after the start", AFTER)
    fibre = lab.registry / "fibre-butyrate.yaml"
    fibre.write_text(fibre.read_text(encoding="utf-8").replace("power: 0.8", "power: 0.9"), encoding="utf-8")
    return lab


def _serial(monkeypatch):
    monkeypatch.setattr(checks, "POOL_FROM", 10**6)


def _pooled(monkeypatch):
    monkeypatch.setattr(checks, "POOL_FROM", 2)
    monkeypatch.setattr(os, "cpu_count", lambda: 2)


def _both(run, monkeypatch, *argv):
    """(one process, worker processes): the JSON and the text of ``check`` on the same registry."""
    outputs = []
    for mode in (_serial, _pooled):
        mode(monkeypatch)
        as_json, as_text = run("check", "--no-cache", "--json", *argv), run("check", "--no-cache", *argv)
        outputs.append((as_json.status, json.loads(as_json.out), as_text.status, as_text.out))
    return outputs


def _checked_in(monkeypatch, tmp_path, *, in_worker=None):
    """Record the process that checks each file (and do ``in_worker(report)`` to each report a worker makes)."""
    record, parent, real = tmp_path / "pids", os.getpid(), checks.check_file

    def check_file(spec_file, *args, **kwargs):
        report = real(spec_file, *args, **kwargs)
        with record.open("a", encoding="utf-8") as out:
            out.write(f"{os.getpid()} {spec_file.path.name}\n")
        if os.getpid() != parent and in_worker is not None:
            in_worker(report, spec_file)
        return report

    monkeypatch.setattr(checks, "check_file", check_file)
    return lambda: [tuple(line.split()) for line in record.read_text(encoding="utf-8").splitlines()]


def _history_reads(monkeypatch, tmp_path):
    """Record each history read, in whichever process it happens: (pid, whether the working tree's ids were given)."""
    record, real = tmp_path / "reads", audit.read_history

    def read_history(repo, known=None):
        with record.open("a", encoding="utf-8") as out:
            out.write(f"{os.getpid()} {bool(known)}\n")
        return real(repo, known)

    monkeypatch.setattr(audit, "read_history", read_history)
    return lambda: [(int(pid), known == "True") for pid, known in
                    (line.split() for line in record.read_text(encoding="utf-8").splitlines())]


def test_worker_processes_check_what_one_process_checks(lab, run, monkeypatch, tmp_path):
    checked = _checked_in(monkeypatch, tmp_path)
    reads = _history_reads(monkeypatch, tmp_path)
    serial, pooled = _both(run, monkeypatch, lab.registry)
    assert serial == pooled
    status, report, _, text = pooled
    found = {(s["id"], f["kind"]) for s in report["specs"] for f in s["findings"]}
    assert {("mouse-diet", "drift"), ("fibre-butyrate", "uncommitted")} <= found and status == 1
    assert len(report["specs"]) == 19 and "cast-weekly-weights" in text
    # each pooled run's files were checked in two other processes, and its history read once, in a
    # third (the reader); one process reads it itself, once per run
    workers = {int(pid) for pid, _ in checked()[2 * 19:]}
    assert len(workers) == 2 * 2 and os.getpid() not in workers
    pids = [pid for pid, _ in reads()]
    assert pids[:2] == [os.getpid()] * 2
    assert len(pids) == 4 and len(set(pids[2:])) == 2 and not set(pids[2:]) & (workers | {os.getpid()})


def test_a_history_reader_that_fails_leaves_the_history_to_this_process(lab, run, monkeypatch, tmp_path):
    # the reader raising, dying or giving a value that does not pickle costs time, never a finding
    parent, real = os.getpid(), check_command._read_histories
    reads = _history_reads(monkeypatch, tmp_path)

    def raises(paths):
        raise OSError("no git here")

    def dies(paths):
        os._exit(3)

    def unpicklable(paths):
        return {"history": lambda: None}

    for failure in (raises, dies, unpicklable):
        monkeypatch.setattr(check_command, "_read_histories",
                            lambda paths, failure=failure: failure(paths) if os.getpid() != parent else real(paths))
        serial, pooled = _both(run, monkeypatch, lab.registry)
        assert serial == pooled, failure.__name__
    assert [pid for pid, _ in reads()] == [parent] * 4 * 3  # every history read here: 2 serial + 2 pooled runs, x3


def test_an_odd_time_zone_in_a_history_read_by_the_reader_is_still_a_finding(lab, run, monkeypatch):
    # a date git recorded with an offset no zone has (+99:59) is told apart by identity: it must
    # cross from the reader's process as the one marker, not as a copy that reads as plain UTC
    lab.write("mouse-diet.yaml", spec_text(sd="3.0"))
    _git(lab, "add", "registry/mouse-diet.yaml")
    tree, head = _git(lab, "write-tree"), _git(lab, "rev-parse", "HEAD")
    # 1578650400 is 2020-01-10 10:00 UTC (the Unix epoch, common practice)
    raw = (f"tree {tree}\nparent {head}\nauthor Lab lead <lead@lab.example> 1578650400 +9959\n"
           f"committer Lab lead <lead@lab.example> 1578650400 +9959\n\nodd clock\n")
    _git(lab, "update-ref", "HEAD", _git(lab, "hash-object", "-t", "commit", "-w", "--stdin", stdin=raw.encode()))
    serial, pooled = _both(run, monkeypatch, lab.registry)
    assert serial == pooled
    mouse = next(s for s in pooled[1]["specs"] if s["id"] == "mouse-diet")
    assert "bad-timezone" in {f["kind"] for f in mouse["findings"]}, mouse["findings"]


def _git(lab, *args, stdin=None):
    env = {**os.environ, "GIT_AUTHOR_NAME": "Lab lead", "GIT_AUTHOR_EMAIL": "lead@lab.example",
           "GIT_COMMITTER_NAME": "Lab lead", "GIT_COMMITTER_EMAIL": "lead@lab.example"}
    done = subprocess.run(["git", *args], cwd=lab.root, input=stdin, capture_output=True, env=env, check=True)
    return done.stdout.decode().strip()


def test_a_report_a_worker_cannot_send_back_is_made_again_here(lab, run, monkeypatch, tmp_path):
    def unpicklable(report, spec_file):
        if spec_file.path.name == "cast-weekly-weights.yaml":
            report.note = lambda: None  # a function does not pickle

    checked = _checked_in(monkeypatch, tmp_path, in_worker=unpicklable)
    serial, pooled = _both(run, monkeypatch, lab.registry)
    assert serial == pooled
    here = [name for pid, name in checked()[2 * 19:] if pid == str(os.getpid())]
    assert here == ["cast-weekly-weights.yaml"] * 2  # once for the JSON run, once for the text run


def test_a_worker_that_dies_leaves_the_rest_to_this_process(lab, run, monkeypatch, tmp_path):
    # a worker lost (killed, out of memory) costs time, never a finding
    def dies(report, spec_file):
        if spec_file.path.name == "challenge-survival.yaml":
            os._exit(1)

    checked = _checked_in(monkeypatch, tmp_path, in_worker=dies)
    serial, pooled = _both(run, monkeypatch, lab.registry)
    assert serial == pooled
    assert "challenge-survival.yaml" in [name for pid, name in checked()[2 * 19:] if pid == str(os.getpid())]


def test_a_prefetched_history_with_an_unreadable_version_is_read_again_with_the_files_ids(
        lab, run, monkeypatch, tmp_path):
    # the history read while the workers check is read without the working tree's ids, which name
    # the spec of a version git cannot give: with such a version it is read again, with them
    _break_blob(lab, lab.repo.tree_files()["registry/mouse-diet.yaml"], "remove")
    reads = _history_reads(monkeypatch, tmp_path)
    serial, pooled = _both(run, monkeypatch, lab.registry)
    assert serial == pooled
    mouse = next(s for s in pooled[1]["specs"] if s["id"] == "mouse-diet")
    assert [f["severity"] for f in mouse["findings"] if f["kind"] == "history-unreadable"] == ["error"]
    # serial twice; pooled: by the reader, then again here, twice
    assert [known for _, known in reads()] == [True, True, False, True, False, True]


def test_reports_of_every_family_cross_from_a_worker(tmp_path, run, monkeypatch):
    # a checked spec of each family (its design model made by the catalog) pickles and comes back equal
    import pickle

    from registry.discovery import discover
    from registry.power import family_names

    for test in family_names():
        assert run("new", f"new-{test}", tmp_path, "--test", test).status == 0
    for spec_file in discover([tmp_path]):
        report = checks.check_file(spec_file)
        back = pickle.loads(pickle.dumps(report))
        assert back.spec == report.spec and back.to_dict() == report.to_dict(), spec_file.path.name
