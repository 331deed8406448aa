"""Benchmark: ``prespec render --all`` of a registry of N complete specs against a floor, in one run.

The floor is what any power-curve summary must pay: one process that imports matplotlib and draws
N bare SVG line plots (one line, no labels) one after the other. ``render --all`` draws a labelled
figure per spec and writes Markdown and HTML too; from 12 specs on it builds them in a pool of
forked worker processes, one per core. Prints the medians of the repeats, the ratio to the floor
and the time per spec; the target is 1,000 specs within 30 s. Every run's output is checked
(3 files per spec, index.md, index.html and site.js). No timing is asserted.

    python benchmarks/bench_render.py [N]     # default 200 (1,000 takes minutes on a busy machine)
"""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

from bench_check import complete_spec  # noqa: E402
from bench_history import build  # noqa: E402

REPEATS = int(os.environ.get("BENCH_REPEATS", "3"))
TARGET_PER_1000 = 30.0

_FLOOR = """
import io, sys
import matplotlib
from matplotlib.figure import Figure
for i in range(int(sys.argv[1])):
    fig = Figure(figsize=(6.4, 3.6))
    fig.add_subplot().plot(range(100), [k / 100 for k in range(100)])
    fig.savefig(io.StringIO(), format="svg")
"""


def _time(args: list[str]) -> tuple[float, subprocess.CompletedProcess[bytes]]:
    began = time.perf_counter()
    done = subprocess.run(args, cwd=ROOT, capture_output=True)
    return time.perf_counter() - began, done


def main(argv: list[str]) -> None:
    specs = int(argv[0]) if argv else 200
    with tempfile.TemporaryDirectory(prefix="prespec-bench-render-") as folder:
        root = Path(folder) / "lab"
        build(root, specs, complete_spec)
        floor, ours = [], []
        for repeat in range(REPEATS):
            elapsed, done = _time([sys.executable, "-c", _FLOOR, str(specs)])
            if done.returncode != 0:
                raise SystemExit(done.stderr.decode()[-500:])
            floor.append(elapsed)
            out = Path(folder) / f"out{repeat}"
            elapsed, done = _time([sys.executable, "-m", "registry", "render", "--all", "--registry",
                                   str(root / "registry"), "--out", str(out)])
            written = len(list(out.iterdir())) if out.is_dir() else 0
            if done.returncode != 0 or written != 3 * specs + 3:  # + index.md, index.html, site.js
                raise SystemExit(f"render exited {done.returncode} and wrote {written} files, expected "
                                 f"{3 * specs + 3}: {done.stderr.decode()[-500:]}")
            ours.append(elapsed)
    f, o = statistics.median(floor), statistics.median(ours)
    per_1000 = o / specs * 1000
    print(f"{specs} specs (median of {REPEATS}, {os.cpu_count()} cores): floor (draw {specs} bare figures) {f:.2f} s | "
          f"render --all {o:.2f} s = {o / f:.2f}x the floor, {o / specs * 1000:.0f} ms per spec; 1,000 specs at this "
          f"rate: {per_1000:.0f} s (target <= {TARGET_PER_1000:g} s: {'met' if per_1000 <= TARGET_PER_1000 else 'NOT met'})")


if __name__ == "__main__":
    main(sys.argv[1:])
