"""Benchmark: a second ``prespec check`` with nothing changed (the check cache) against ``git log -p``.

Builds the registry of ``bench_check.py`` (1,000 complete specs x 10 dated versions, one commit per
version, 10% drifting after their start), runs ``prespec check`` once to fill the cache, then times,
in one run and interleaved:

- the floor: ``git log -p`` over the same history;
- warm: ``prespec check REGISTRY`` in a new process, nothing changed since the last run;
- one edit: the same after one spec's notes changed in the working tree (that spec is checked
  again and the history is read again; the other specs come from the cache);
- cold: ``prespec check --no-cache REGISTRY`` (for comparison).

Prints the medians and the ratios to the floor; target: warm within 2x ``git log -p``. Every run's
answer is checked (the same output as the cold run's, exit status 1, the expected drifts). The
interpreter gets a private bytecode folder (``PYTHONPYCACHEPREFIX``), as an installed package has its
bytecode, so a run does not recompile prespec. No timing is asserted.

    python benchmarks/bench_warm_check.py [N]     # default 1000 specs
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

from bench_check import _verify, complete_spec  # noqa: E402
from bench_history import VERSIONS, build  # noqa: E402

REPEATS = int(os.environ.get("BENCH_REPEATS", "5"))
WARM_TARGET = 2.0


def _run(args: list[str], env: dict[str, str]) -> tuple[float, subprocess.CompletedProcess[bytes]]:
    began = time.perf_counter()
    done = subprocess.run(args, cwd=ROOT, capture_output=True, env=env)
    return time.perf_counter() - began, done


def measure(specs: int) -> dict[str, float]:
    with tempfile.TemporaryDirectory(prefix="prespec-bench-warm-") as folder:
        root = Path(folder) / "lab"
        build(root, specs, complete_spec)
        env = {key: value for key, value in os.environ.items() if key != "PYTHONDONTWRITEBYTECODE"}
        env["PYTHONPYCACHEPREFIX"] = str(Path(folder) / "bytecode")
        registry = root / "registry"
        prespec = [sys.executable, "-m", "registry", "check"]
        expected = len(range(0, specs, 10))
        _, cold = _run(prespec + ["--no-cache", str(registry)], env)  # also compiles prespec once
        _verify(cold, specs, expected, "cold")
        _run(prespec + [str(registry)], env)  # fills the cache
        edited = registry / "study-00001.yaml"
        original = edited.read_bytes()
        times: dict[str, list[float]] = {"git": [], "warm": [], "edit": [], "cold": []}
        for repeat in range(REPEATS):
            elapsed, _ = _run(["git", "-C", str(root), "log", "-p", "--no-color", "HEAD", "--"], env)
            times["git"].append(elapsed)
            elapsed, done = _run(prespec + [str(registry)], env)
            if done.stdout != cold.stdout:
                raise SystemExit("the warm check printed something other than the cold check")
            times["warm"].append(elapsed)
            edited.write_bytes(original.replace(b"notes: revision", f"notes: edit {repeat} of revision".encode()))
            elapsed, done = _run(prespec + [str(registry)], env)
            _verify(done, specs, expected, "edited")
            times["edit"].append(elapsed)
            edited.write_bytes(original)
            elapsed, done = _run(prespec + ["--no-cache", str(registry)], env)
            _verify(done, specs, expected, "cold")
            times["cold"].append(elapsed)
            _run(prespec + [str(registry)], env)  # back to the unedited state's entries (already stored)
        return {kind: statistics.median(values) for kind, values in times.items()}


def main(argv: list[str]) -> None:
    specs = int(argv[0]) if argv else 1000
    t = measure(specs)
    warm = t["warm"] / t["git"]
    print(f"{specs} specs x {VERSIONS} versions (median of {REPEATS}): git log -p {t['git']:.3f} s")
    print(f"  warm check (nothing changed)   {t['warm']:6.3f} s = {warm:5.2f}x git log -p "
          f"(target <= {WARM_TARGET:g}x: {'met' if warm <= WARM_TARGET else 'NOT met'})")
    print(f"  one spec edited                {t['edit']:6.3f} s = {t['edit'] / t['git']:5.2f}x")
    print(f"  cold check (--no-cache)        {t['cold']:6.3f} s = {t['cold'] / t['git']:5.2f}x")


if __name__ == "__main__":
    main(sys.argv[1:])
