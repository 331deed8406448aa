"""Benchmark: prespec's two-sample t sample size against statsmodels' TTestIndPower.solve_power.

Run from the repository root:

    /tmp/venv/bin/python benchmarks/bench_two_sample_t.py [--designs 300] [--seed 1]

For the same seeded random designs it times both solvers, checks that every prespec answer
is the smallest n reaching the target (power(n) >= target > power(n - 1), with prespec's
exact power), compares prespec's power at its n with statsmodels' power there, and counts the
designs where ceil(statsmodels' real-valued n) differs from prespec's n. It prints both
timings and their ratio (target: prespec at least 20x faster). Exit status 1 only when a
prespec answer is not the smallest n; timings never fail the run.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from statsmodels.stats.power import TTestIndPower  # noqa: E402

from registry.power import design_from_params, sample_size  # noqa: E402

TARGET_RATIO = 20.0


def designs(count: int, seed: int) -> list[dict[str, float]]:
    rng = np.random.default_rng(seed)
    return [
        {
            "d": float(rng.uniform(0.1, 1.5)),
            "alpha": float(rng.choice([0.01, 0.05, 0.1])),
            "power": float(rng.uniform(0.7, 0.95)),
            "ratio": float(rng.choice([1.0, 2.0])),
        }
        for _ in range(count)
    ]


def ours(design: dict[str, float]) -> int:
    return sample_size("two-sample-t", **design).n_per_group


def theirs(design: dict[str, float]) -> float:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return float(TTestIndPower().solve_power(effect_size=design["d"], nobs1=None, alpha=design["alpha"],
                                                 power=design["power"], ratio=design["ratio"],
                                                 alternative="two-sided"))


def timed(function, items) -> tuple[list, float]:
    start = time.perf_counter()
    results = [function(item) for item in items]
    return results, time.perf_counter() - start


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--designs", type=int, default=300)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--repeat", type=int, default=3, help="timing runs of each solver (the best is reported)")
    args = parser.parse_args()
    items = designs(args.designs, args.seed)
    ours(items[0]), theirs(items[0])  # warm up imports and caches

    ours_n, _ = timed(ours, items)
    best = min(timed(ours, items)[1] for _ in range(args.repeat))
    theirs_n, _ = timed(theirs, items)
    theirs_time = min(timed(theirs, items)[1] for _ in range(args.repeat))

    not_smallest, disagreements, power_gap = [], [], 0.0
    for item, n, their_n in zip(items, ours_n, theirs_n):
        design = design_from_params("two-sample-t", **item)
        family = design.family
        p_n, p_before = family.power(design, np.array([n, max(n - 1, 1)]))
        if not (p_n >= item["power"] and (n == family.min_n or p_before < item["power"])):
            not_smallest.append((item, n, p_before, p_n))
        their_power = TTestIndPower().power(effect_size=item["d"], nobs1=n, alpha=item["alpha"],
                                            ratio=item["ratio"], alternative="two-sided")
        power_gap = max(power_gap, abs(float(their_power) - float(p_n)))
        if math.ceil(their_n - 1e-9) != n:
            disagreements.append((item, n, their_n))

    count = len(items)
    print(f"designs: {count} (seed {args.seed}); d in [0.1, 1.5], alpha in {{0.01, 0.05, 0.1}}, "
          "power in [0.7, 0.95], ratio in {1, 2}")
    print(f"prespec sample_size():        {best * 1e3:9.1f} ms total, {best / count * 1e6:8.1f} us per design "
          f"(best of {args.repeat})")
    print(f"statsmodels solve_power():    {theirs_time * 1e3:9.1f} ms total, {theirs_time / count * 1e6:8.1f} us "
          f"per design (best of {args.repeat})")
    ratio = theirs_time / best
    print(f"speed ratio (statsmodels / prespec): {ratio:.1f}x  "
          f"(target {TARGET_RATIO:g}x: {'met' if ratio >= TARGET_RATIO else 'NOT met'})")
    print(f"smallest-n check (power(n) >= target > power(n-1)): {count - len(not_smallest)}/{count} pass")
    print(f"largest |prespec power - statsmodels power| at prespec's n: {power_gap:.2e}")
    print(f"ceil(statsmodels n) != prespec n: {len(disagreements)} design(s)")
    for item, n, their_n in disagreements[:10]:
        print(f"  d={item['d']:.4f} alpha={item['alpha']:g} power={item['power']:.4f} ratio={item['ratio']:g}: "
              f"prespec {n}, statsmodels {their_n:.6f}")
    for item, n, p_before, p_n in not_smallest[:10]:
        print(f"  NOT SMALLEST: {item}: n={n}, power(n-1)={p_before:.6f}, power(n)={p_n:.6f}")
    return 1 if not_smallest else 0


if __name__ == "__main__":
    sys.exit(main())
