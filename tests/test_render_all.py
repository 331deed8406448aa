"""render --all writes each summary as it is done and the index last: an interrupt keeps the finished
summaries (whole files, no index linking to missing pages), the pool's output is the same as one
process's, byte for byte, and a progress bar appears on a terminal only."""

from __future__ import annotations

import io
import sys
from pathlib import Path

import pytest

import registry.commands.render as render_command
import registry.summary as summary_module

from .conftest import EXAMPLES

EPOCH = "1800000000"  # 2027-01-15T08:00:00Z


@pytest.fixture
def epoch(monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)


def _registry(tmp_path: Path, count: int) -> Path:
    """``count`` valid example specs (two-sample t) in a plain folder."""
    folder = tmp_path / "registry"
    folder.mkdir()
    source = (EXAMPLES / "fibre-butyrate.yaml").read_text(encoding="utf-8")
    for i in range(count):
        spec_id = f"fibre-{i:03d}"
        (folder / f"{spec_id}.yaml").write_text(source.replace("id: fibre-butyrate", f"id: {spec_id}"),
                                                encoding="utf-8")
    return folder


def _files(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


def test_an_interrupt_keeps_the_finished_summaries_and_writes_no_index(run, tmp_path, epoch, monkeypatch):
    folder = _registry(tmp_path, 4)
    real = summary_module.build_summary
    built = []

    def interrupted_third(report, *args, **kwargs):
        if len(built) == 2:
            raise KeyboardInterrupt
        built.append(report.id)
        return real(report, *args, **kwargs)

    monkeypatch.setattr(summary_module, "build_summary", interrupted_third)
    out = tmp_path / "out"
    result = run("render", "--all", folder, "--out", out, "--no-history")
    assert result.status == 130 and "interrupted" in result.err
    names = sorted(p.name for p in out.iterdir())
    assert names == sorted(f"{spec_id}{suffix}" for spec_id in built for suffix in (".md", ".html", "-power.svg"))
    assert "index.html" not in names and not [n for n in names if n.endswith(".tmp")]
    monkeypatch.setattr(summary_module, "build_summary", real)
    complete = tmp_path / "complete"
    assert run("render", "--all", folder, "--out", complete, "--no-history").status == 0
    for name in names:  # what the interrupted run finished is whole: the same bytes as a complete run's
        assert (out / name).read_bytes() == (complete / name).read_bytes()
    assert (complete / "index.html").is_file()


def test_the_pool_writes_what_one_process_writes(run, tmp_path, epoch, monkeypatch):
    count = render_command.POOL_FROM + 1
    folder = _registry(tmp_path, count)
    pooled, again, alone = tmp_path / "pooled", tmp_path / "again", tmp_path / "alone"
    assert run("render", "--all", folder, "--out", pooled, "--no-history").status == 0
    assert run("render", "--all", folder, "--out", again, "--no-history").status == 0
    monkeypatch.setattr(render_command, "POOL_FROM", 10**6)
    assert run("render", "--all", folder, "--out", alone, "--no-history").status == 0
    assert _files(pooled) == _files(again) == _files(alone)
    assert len(_files(pooled)) == 3 * count + 3  # + index.md, index.html, site.js


@pytest.mark.parametrize("stage", ["summary_figure", "build_summary"])
def test_a_worker_that_dies_leaves_the_rest_to_this_process(run, tmp_path, epoch, monkeypatch, stage):
    # a worker lost while drawing a figure or building a page (killed, out of memory) costs time,
    # never a page or a byte
    import os

    count = render_command.POOL_FROM + 1
    folder = _registry(tmp_path, count)
    alone = tmp_path / "alone"
    monkeypatch.setattr(render_command, "POOL_FROM", 10**6)
    assert run("render", "--all", folder, "--out", alone, "--no-history").status == 0
    monkeypatch.setattr(render_command, "POOL_FROM", count)
    monkeypatch.setattr(render_command.os, "cpu_count", lambda: 2)
    parent, real = os.getpid(), getattr(summary_module, stage)

    def dies_in_a_worker(*args, **kwargs):
        if os.getpid() != parent:
            os._exit(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(summary_module, stage, dies_in_a_worker)
    pooled = tmp_path / "pooled"
    assert run("render", "--all", folder, "--out", pooled, "--no-history").status == 0
    assert _files(pooled) == _files(alone)


def test_the_index_lists_the_specs_in_order_and_is_written_last(run, tmp_path, epoch, monkeypatch):
    folder = _registry(tmp_path, 3)
    order = []
    real = render_command.write_atomic
    monkeypatch.setattr(render_command, "write_atomic", lambda path, text, **kw: (order.append(Path(path).name),
                                                                                   real(path, text, **kw))[1])
    result = run("render", "--all", folder, "--out", tmp_path / "out", "--no-history", "--json")
    assert result.status == 0
    assert order[-3:] == ["site.js", "index.md", "index.html"]
    assert [Path(p).name for p in result.json()["written"]] == order
    index = (tmp_path / "out" / "index.md").read_text(encoding="utf-8")
    assert index.index("fibre-000") < index.index("fibre-001") < index.index("fibre-002")


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_a_progress_bar_on_a_terminal_only(run, tmp_path, epoch, monkeypatch):
    folder = _registry(tmp_path, 2)
    plain = run("render", "--all", folder, "--out", tmp_path / "plain", "--no-history")
    assert plain.status == 0 and "rendering" not in plain.err
    terminal = _Terminal()
    monkeypatch.setattr(sys, "stderr", terminal)
    assert render_command.render(None, all_specs=True, out=str(tmp_path / "tty"), registry=[str(folder)],
                                 history=False) == 0
    assert "rendering" in terminal.getvalue()
    assert _files(tmp_path / "tty") == _files(tmp_path / "plain")


def test_a_refused_target_stops_the_run_before_anything_is_written(run, tmp_path, epoch):
    folder = _registry(tmp_path, 3)
    out = tmp_path / "out"
    out.mkdir()
    (out / "fibre-002.html").write_text("<p>someone else's page</p>\n", encoding="utf-8")
    result = run("render", "--all", folder, "--out", out, "--no-history")
    assert result.status == 1 and "fibre-002.html" in result.err
    assert sorted(p.name for p in out.iterdir()) == ["fibre-002.html"]
