"""Benchmark: start-up of ``prespec --version``, ``prespec --help`` and ``prespec check`` of the example
registry, each in a new process, against the bare interpreter measured in the same run. ``check`` is
timed twice: as a lab runs it again and again (from the second repeat on, its results come from the
check cache) and with ``--no-cache`` (everything computed, as on the very first run).

Targets (wall time, on a quiet machine): ``--version`` and ``--help`` under 0.2 s, ``check
example_registry`` under 0.6 s. On a shared machine absolute times swing with the load, so the
script also prints each command's ratio to its floor, the median start-up of ``python -c pass``
(for ``--version`` and ``--help``) and of ``python -c "import numpy, scipy.special, pydantic"``
(what sizing any design must load, for ``check``), and the targets scaled by that same load
(target x the floor's median here / the floor's median on a quiet machine). Runs are interleaved
and the median of the repeats is taken. Every command's output is checked. No timing is asserted.

    python benchmarks/bench_startup.py [REPEATS]     # default 9
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
PY = sys.executable
#: Floors on a quiet machine (2 cores, Python 3.11, numpy 2, scipy 1.17): scales the targets to this run's load.
QUIET_BARE, QUIET_LIBS = 0.015, 0.30

FLOORS = {
    "bare": [PY, "-c", "pass"],
    "libs": [PY, "-c", "import numpy, scipy.special, pydantic"],
}
#: name -> (command, floor, target in seconds, text the output must contain, exit status)
COMMANDS = {
    "prespec --version": ([PY, "-m", "registry", "--version"], "bare", 0.2, "prespec ", 0),
    "prespec --help": ([PY, "-m", "registry", "--help"], "bare", 0.2, "COMMAND", 0),
    "prespec check example_registry": ([PY, "-m", "registry", "check", "example_registry"], "libs", 0.6,
                                       "sirt3-knockdown", 1),
    "  the same, --no-cache": ([PY, "-m", "registry", "check", "--no-cache", "example_registry"], "libs", 0.6,
                               "sirt3-knockdown", 1),
}


def _time(args: list[str]) -> tuple[float, subprocess.CompletedProcess[str]]:
    began = time.perf_counter()
    done = subprocess.run(args, cwd=ROOT, capture_output=True, text=True)
    return time.perf_counter() - began, done


def main(argv: list[str]) -> None:
    repeats = int(argv[0]) if argv else 9
    times: dict[str, list[float]] = {name: [] for name in [*FLOORS, *COMMANDS]}
    for _ in range(repeats):
        for name, args in FLOORS.items():
            times[name].append(_time(args)[0])
        for name, (args, _floor, _target, expect, status) in COMMANDS.items():
            elapsed, done = _time(args)
            if done.returncode != status or expect not in done.stdout:
                raise SystemExit(f"{name}: exit {done.returncode}, expected {status} and {expect!r} in the output:\n"
                                 f"{done.stdout[-400:]}{done.stderr[-400:]}")
            times[name].append(elapsed)
    median = {name: statistics.median(values) for name, values in times.items()}
    load = {"bare": median["bare"] / QUIET_BARE, "libs": median["libs"] / QUIET_LIBS}
    print(f"floors (median of {repeats}): python -c pass {median['bare']:.3f} s; "
          f"import numpy, scipy.special, pydantic {median['libs']:.3f} s "
          f"(this machine runs {load['libs']:.1f}x slower than quiet)")
    for name, (_args, floor, target, _expect, _status) in COMMANDS.items():
        scaled = target * max(1.0, load["libs"])
        ratio = median[name] / median[floor]
        print(f"{name:<32} {median[name]:6.3f} s = {ratio:5.2f}x its floor; target {target:g} s "
              f"({scaled:.2f} s at this load): {'met' if median[name] <= scaled else 'NOT met'}")


if __name__ == "__main__":
    main(sys.argv[1:])
