"""Benchmark: ``prespec check`` of a registry of 1,000 specs x 10 versions against ``git log -p``.

Builds registries of complete specs (every recommended field stated) with 10 dated versions
each, one commit per version (``git fast-import``; 10% of the specs drift after their start),
then times, in one run and interleaved:

- the floor: ``git log -p`` over the same history;
- cold: ``prespec check --no-cache REGISTRY`` in a new process (start-up, loading, validating and sizing every
  current file, reading and analysing the whole history, printing the report).

Prints the median of the repeats and the ratio to the floor; targets: within 10x, growing linearly
in the number of specs. Every run's answer is checked (exit status 1, the expected number of drifted
specs, no other finding). No timing is asserted anywhere.

    python benchmarks/bench_check.py [N ...]    # default: 100 1000
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

from bench_history import VERSIONS, build  # noqa: E402

REPEATS = int(os.environ.get("BENCH_REPEATS", "5"))
COLD_TARGET = 10.0


def complete_spec(i: int, version: int, start: str) -> bytes:
    """One version of an invented, complete spec (changes: notes every version, the SD at version 3,
    the analysis plan of every tenth spec in the last version, after the start)."""
    status = "collecting" if version >= 8 else "planned"
    sd = "5.0" if version < 3 else "5.5"
    plan = "Welch t-test on the change from baseline." if not (version == 9 and i % 10 == 0) else "Rank test."
    return f"""# invented benchmark spec {i}
id: study-{i:05d}
title: Benchmark study {i}
status: {status}
question: Does treatment {i} lower the outcome compared with control?
population: Invented adult units from a benchmark colony; the unit is one animal.
hypotheses:
  - id: H1
    statement: Treatment lowers the outcome by at least 4 units compared with control.
    primary: true
outcomes:
  primary:
    name: outcome
    unit: mmol/L
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
  effect_rationale: Four units is the smallest change that matters for the invented outcome.
  variability_source: An invented earlier study of the same outcome.
sample_size:
  per_group: 35
analysis_plan: {plan}
exclusion_criteria:
  - Units that do not reach the baseline visit.
randomisation: Computer-generated block randomisation in blocks of four.
blinding: Outcome assessors do not know the group.
stopping_rule: None; every unit is followed to the end.
contacts:
  - name: Benchmark lab lead
    role: principal investigator
notes: revision {version} of study {i}
amendments: []
""".encode()


def _run(args: list[str], cwd: Path) -> tuple[float, subprocess.CompletedProcess[bytes]]:
    began = time.perf_counter()
    done = subprocess.run(args, cwd=cwd, capture_output=True)
    return time.perf_counter() - began, done


def measure(specs: int) -> dict[str, float]:
    with tempfile.TemporaryDirectory(prefix="prespec-bench-check-") as folder:
        root = Path(folder) / "lab"
        build(root, specs, complete_spec)
        prespec = [sys.executable, "-m", "registry", "check", "--no-cache"]  # cold: no cached results
        expected = len(range(0, specs, 10))
        times: dict[str, list[float]] = {"git": [], "cold": []}
        for _ in range(REPEATS):
            elapsed, _done = _run(["git", "-C", str(root), "log", "-p", "--no-color", "HEAD", "--"], ROOT)
            times["git"].append(elapsed)
            elapsed, done = _run(prespec + [str(root / "registry")], ROOT)
            _verify(done, specs, expected, "cold")
            times["cold"].append(elapsed)
        return {kind: statistics.median(values) for kind, values in times.items()}


def _verify(done: subprocess.CompletedProcess[bytes], specs: int, expected: int, kind: str) -> None:
    if done.returncode != 1:
        raise SystemExit(f"{kind} check exited {done.returncode}, expected 1 (drift): {done.stderr.decode()[-500:]}")
    out = done.stdout.decode()
    drifted = out.count("  error drift  ")
    checked = f"{specs} specs checked: {expected} with errors, 0 warnings."
    if drifted != expected or checked not in out:
        raise SystemExit(f"{kind} check found {drifted} drifts, expected {expected} ({checked!r} not printed)")


def main(argv: list[str]) -> None:
    sizes = [int(a) for a in argv] or [100, 1000]
    rows = []
    for specs in sizes:
        t = measure(specs)
        rows.append((specs, t))
        cold = t["cold"] / t["git"]
        print(f"{specs:>6} specs x {VERSIONS} versions (median of {REPEATS}): git log -p {t['git']:6.3f} s | "
              f"prespec check {t['cold']:6.3f} s = {cold:5.2f}x (target <= {COLD_TARGET:g}x: "
              f"{'met' if cold <= COLD_TARGET else 'NOT met'})")
    if len(rows) >= 2:
        (n0, t0), (n1, t1) = rows[0], rows[-1]
        print(f"growth from {n0} to {n1} specs ({n1 / n0:.0f}x): prespec check {t1['cold'] / t0['cold']:.1f}x, "
              f"git log -p {t1['git'] / t0['git']:.1f}x")


if __name__ == "__main__":
    main(sys.argv[1:])
