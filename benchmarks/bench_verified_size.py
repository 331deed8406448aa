"""Benchmark: a simulation-verified two-sample size with 20,000 simulated experiments per candidate n.

Run from the repository root:

    python benchmarks/bench_verified_size.py [--reps 20000]

It times the whole search (formula start, bracketing, bisection, the power at n - 1) for a
two-sample t design whose outcome is log-normal (``design.simulation.distribution: lognormal``),
for a log-rank design and for a cluster-means t-test with unequal cluster sizes, on one core without the cache, and as reference the time of one
straightforward simulation at the answer: scipy's ``ttest_ind`` applied one experiment at a
time to 2,000 experiments, scaled to the replicates of one step. It prints each search's time,
the number of candidate n it simulated, and the ratio of the reference's per-step time to the
search's per-step time. Targets: each search under 2 s on one core; the vectorized step at
least 20x faster than the one-experiment-at-a-time reference. It checks each answer (simulated
power at n reaches the target, at n - 1 it does not) and exits 1 only when one does not hold;
timings never fail the run.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from scipy import stats  # noqa: E402

from registry.power import design_from_params  # noqa: E402
from registry.power.verify import verified_sample_size  # noqa: E402

TARGET_SECONDS = 2.0
TARGET_RATIO = 20.0


def reference_step(n: int, reps: int) -> float:
    """Seconds for ``reps`` experiments analysed one at a time with scipy (2,000 timed, scaled)."""
    rng = np.random.default_rng(1)
    sample = 2000
    start = time.perf_counter()
    for _ in range(sample):
        stats.ttest_ind(rng.lognormal(0.5, 0.5, n), rng.lognormal(0.0, 0.5, n))
    return (time.perf_counter() - start) * reps / sample


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--reps", type=int, default=20_000)
    args = parser.parse_args()
    cases = {
        "two-sample-t, lognormal outcome": design_from_params(
            "two-sample-t", difference=1.0, sd=2.0,
            simulation={"reps": args.reps, "distribution": "lognormal", "baseline_mean": 3.0}),
        "log-rank, hr 0.6, event probability 0.7": design_from_params("log-rank", hr=0.6, event_probability=0.7),
        "two-sample-t on cluster means, cluster size CV 0.9": design_from_params(
            "two-sample-t", d=0.6, cluster={"size": 8, "icc": 0.1, "size_cv": 0.9}),
    }
    failed = False
    for name, design in cases.items():
        start = time.perf_counter()
        result = verified_sample_size(design, reps=args.reps)
        seconds = time.perf_counter() - start
        steps = result.verification["evaluations"]
        below = result.verification["power_below"]
        holds = result.achieved_power >= design.power and (below is None or below < design.power)
        failed |= not holds
        line = (f"{name}: n = {result.n_per_group} (formula {result.start_n}), power {result.achieved_power:.4f}, "
                f"{'one cluster fewer' if design.cluster is not None else 'at n - 1'} {below:.4f}; {steps} candidate n x {args.reps:,} experiments in {seconds:.2f} s "
                f"(target < {TARGET_SECONDS:g} s: {'met' if seconds < TARGET_SECONDS else 'NOT met'})")
        if design.test == "two-sample-t" and design.cluster is None:
            per_step = seconds / steps
            reference = reference_step(result.n_per_group, args.reps)
            ratio = reference / per_step
            line += (f"; one step {per_step:.3f} s vs {reference:.2f} s one experiment at a time: {ratio:.0f}x "
                     f"(target >= {TARGET_RATIO:g}x: {'met' if ratio >= TARGET_RATIO else 'NOT met'})")
        print(line + ("" if holds else "  ANSWER DOES NOT HOLD"))
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main())
