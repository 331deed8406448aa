"""Benchmark: check's history analysis against ``git log -p`` over the same history, in one run.

Builds registries of 100 and 1,000 specs with 10 dated versions each (one commit per
version, with ``git fast-import``), then times (a) the history part of ``prespec check``
(one log pass, parsing, drift analysis, uncommitted comparison, deleted specs) and (b)
``git log -p`` over the same commits. Prints the ratio a / b; the target is within 10x.
No timing is asserted anywhere.

    /tmp/venv/bin/python benchmarks/bench_history.py [N ...]
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from registry.audit import add_history  # noqa: E402
from registry.checks import check_files  # noqa: E402
from registry.discovery import discover  # noqa: E402
from registry.git import init_repository  # noqa: E402

VERSIONS = 10
BASE = 1_700_000_000  # 2023-11-14; every spec starts between its 8th and 9th version


def _spec(i: int, version: int, start: str) -> bytes:
    status = "collecting" if version >= 8 else "planned"
    sd = "5.0" if version < 3 else "5.5"
    plan = "Welch t-test." if not (version == 9 and i % 10 == 0) else "Rank test."  # 10% drift
    notes = f"notes: revision {version} of study {i}\n"
    return (f"""# invented benchmark spec {i}
id: study-{i:05d}
title: Benchmark study {i}
status: {status}
data_collection:
  start: {start}
design:
  test: two-sample-t
  alpha: 0.05
  power: 0.8
  effect:
    difference: 4.0
    sd: {sd}
  attrition: 0.1
sample_size:
  per_group: 35
analysis_plan: {plan}
{notes}amendments: []
""").encode()


def build(root: Path, specs: int, spec=None) -> None:
    """``specs`` specs x :data:`VERSIONS` dated versions, one commit each (``spec(i, version, start)`` writes one)."""
    spec = spec or _spec
    repo = init_repository(root)
    chunks: list[bytes] = []
    mark = 0
    moment = BASE
    step = 600
    total = specs * VERSIONS
    start_moment = BASE + step * specs * 8 + step // 2  # between round 8 and round 9
    start = time.strftime("%Y-%m-%d", time.gmtime(start_moment + 86_400))
    previous = None
    for version in range(VERSIONS):
        for i in range(specs):
            mark += 1
            blob = spec(i, version, start)
            chunks.append(b"blob\nmark :%d\ndata %d\n%s\n" % (mark, len(blob), blob))
            blob_mark = mark
            mark += 1
            message = f"study-{i:05d}: version {version + 1}\n".encode()
            who = b"Bench Lab <bench@lab.example> %d +0000" % moment
            chunks.append(b"commit refs/heads/main\nmark :%d\nauthor %s\ncommitter %s\ndata %d\n%s" % (
                mark, who, who, len(message), message))
            if previous is not None:
                chunks.append(b"from :%d\n" % previous)
            chunks.append(b"M 100644 :%d registry/study-%05d.yaml\n\n" % (blob_mark, i))
            previous = mark
            moment += step if not (version == 7 and i == specs - 1) else 3 * 86_400
    assert mark == 2 * total
    repo.fast_import(b"".join(chunks))
    repo.reset_hard("main")


def measure(specs: int) -> tuple[float, float, int]:
    with tempfile.TemporaryDirectory(prefix="prespec-bench-") as folder:
        root = Path(folder) / "lab"
        build(root, specs)
        registry = root / "registry"
        files = discover([str(registry)])
        from registry.git import find_repository

        repo = find_repository(registry)
        assert repo is not None
        best_git = min(_time(repo.log_patch_bytes) for _ in range(3))
        best_ours = float("inf")
        drifted = 0
        for _ in range(3):
            reports = check_files(files)
            began = time.perf_counter()
            add_history(reports, files, [str(registry)])
            best_ours = min(best_ours, time.perf_counter() - began)
            drifted = sum(1 for r in reports if any(f.kind == "drift" for f in r.findings))
        return best_ours, best_git, drifted


def _time(func) -> float:
    began = time.perf_counter()
    func()
    return time.perf_counter() - began


def main(argv: list[str]) -> None:
    sizes = [int(a) for a in argv] or [100, 1000]
    rows = []
    for specs in sizes:
        ours, git_time, drifted = measure(specs)
        rows.append((specs, ours, git_time))
        print(f"{specs:>6} specs x {VERSIONS} versions: history analysis {ours:7.3f} s, git log -p {git_time:7.3f} s, "
              f"ratio {ours / git_time:5.2f}x (target <= 10x); {drifted} drifted specs found "
              f"(expected {len(range(0, specs, 10))})")
    if len(rows) >= 2:
        (n0, a0, g0), (n1, a1, g1) = rows[0], rows[-1]
        print(f"growth from {n0} to {n1} specs ({n1 / n0:.0f}x): history analysis {a1 / a0:.1f}x, "
              f"git log -p {g1 / g0:.1f}x")


if __name__ == "__main__":
    main(sys.argv[1:])
