"""The history ``check`` reads on the side: :class:`registry.workers.BackgroundCall` (a value
computed in a forked process, or ``None`` so the caller computes it itself), and a history that
crosses from that process by pickle and answers as the history read here does."""

from __future__ import annotations

import os
import pickle
import time

import pytest

from registry.audit import read_history, spec_history
from registry.git import _date, odd_offset
from registry.history import MISSING, Snapshot
from registry.problems import NO_VALUE
from registry.workers import BackgroundCall

from .history_helpers import Lab, spec_text

pytestmark = pytest.mark.skipif(not hasattr(os, "fork"), reason="a background call forks")

BEFORE, AFTER = "2020-03-01T10:00:00+00:00", "2020-04-01T10:00:00+00:00"


def _pid_and(value):
    return os.getpid(), value


def test_the_value_is_computed_in_another_process():
    pid, value = BackgroundCall(_pid_and, {"a": [1, 2.5]}).result()
    assert value == {"a": [1, 2.5]} and pid != os.getpid()


def test_a_large_value_comes_back_whole():
    # more than a pipe holds at once (64 KiB on Linux): the child writes while this process reads
    blob = os.urandom(3 << 20)
    call = BackgroundCall(lambda: blob)
    assert call.result() == blob and call.result() == blob  # and the same on a second call


def _raises():
    raise ValueError("there")


def _dies():
    os._exit(7)


def _unpicklable():
    return lambda: None


@pytest.mark.parametrize("work", [_raises, _dies, _unpicklable])
def test_no_value_when_the_child_has_none_to_give(work):
    assert BackgroundCall(work).result() is None


def test_without_fork_there_is_no_child_and_no_value(monkeypatch):
    monkeypatch.delattr(os, "fork")
    assert BackgroundCall(_pid_and, 1).result() is None


def test_the_child_writes_nothing_to_the_terminal(capfd):
    def noisy():
        print("from the child")
        os.write(2, b"to stderr\n")
        return 5

    assert BackgroundCall(noisy).result() == 5
    captured = capfd.readouterr()
    assert captured.out == "" and captured.err == ""


def test_close_stops_a_child_still_working():
    call = BackgroundCall(time.sleep, 60)
    began = time.monotonic()
    call.close()
    assert time.monotonic() - began < 10 and call.result() is None


def test_markers_told_apart_by_identity_cross_processes_as_themselves():
    # MISSING (a field absent), NO_VALUE (a problem about no value) and the odd-offset time zone
    # are compared with ``is``: a pickled copy must come back as the module's one object
    assert pickle.loads(pickle.dumps(MISSING)) is MISSING
    assert pickle.loads(pickle.dumps(NO_VALUE)) is NO_VALUE
    moment = _date("2020-01-14T13:59:00+99:59")  # an offset no zone has, as git accepts it
    assert odd_offset(moment) and odd_offset(pickle.loads(pickle.dumps(moment)))


def test_a_version_the_peek_cannot_answer_for_still_finds_its_id_after_crossing():
    # an alias where the id is: the cheap peek gives up and the full load answers; pickled, the
    # "gave up" marker must stay one, or the version would read as having no id at all
    raw = spec_text(title="&name mouse-diet").replace("id: mouse-diet\n", "").replace(
        "status:", "id: *name\nstatus:").encode()
    snap = Snapshot("b" * 40, raw)
    assert snap._scan() is None  # the peek, done in the reader's process, cannot answer
    copy = pickle.loads(pickle.dumps(snap))
    assert snap.id == copy.id == "mouse-diet"


def test_a_history_read_elsewhere_answers_as_the_one_read_here(tmp_path):
    lab = Lab(tmp_path / "lab")
    lab.write("mouse-diet.yaml", spec_text())
    lab.write("rat-diet.yaml", spec_text("rat-diet"))
    lab.commit("designs", BEFORE)
    lab.write("mouse-diet.yaml", spec_text(sd="4.0"))  # after the start, no amendment: drift
    lab.commit("smaller sd", AFTER)
    here = read_history(lab.repo)
    there = BackgroundCall(read_history, lab.repo).result()
    assert there is not None and there.repo is None  # the git handle stays in the reader's process
    there.attach(lab.repo)
    for spec_id in ("mouse-diet", "rat-diet"):
        ours, theirs = spec_history(here, spec_id), spec_history(there, spec_id)
        assert theirs.to_dict() == ours.to_dict()
    assert [f.kind for f in spec_history(there, "mouse-diet").findings] == ["drift"]


def test_a_history_not_attached_says_so_when_it_needs_git(tmp_path):
    lab = Lab(tmp_path / "lab")
    lab.write("mouse-diet.yaml", spec_text())
    lab.commit("design", BEFORE)
    there = pickle.loads(pickle.dumps(read_history(lab.repo)))
    with pytest.raises(RuntimeError, match="attached"):
        there.store.get("0" * 40)  # a blob not read in bulk: it would take git


def test_no_child_while_another_thread_runs():
    # a thread may hold a lock (an import's, a logging handler's) the forked child would wait for forever
    import threading

    release = threading.Event()
    other = threading.Thread(target=release.wait)
    other.start()
    try:
        assert BackgroundCall(_pid_and, 1).result() is None
    finally:
        release.set()
        other.join()
    assert BackgroundCall(_pid_and, 1).result()[1] == 1
