"""Benchmark of solve() over arrays against a Python loop of scalar solves, in one run.

Run as ``python benchmarks/bench_solve_arrays.py``; it prints the two times
and their ratio side by side.  No timing is asserted anywhere.

Workloads (size solves of the cohort-risk design, 300 invented design points each):

1. large studies (baselines 0.1 to 0.3, risk ratios 1.02 to 1.06): every cell
   expects over 1,000 cases, the normal test runs and nothing needs a grid;
2. mid-sized studies (baselines 0.01 to 0.3, risk ratios 1.2 to 2): the
   normal test runs, and its real false-alarm probability is summed over an
   exact grid of counts per study, array or loop alike;
3. a rare baseline where the exact test runs and studies repeat (40
   distinct among 300): the array solve searches each distinct study once.
"""

from __future__ import annotations

import time
import warnings
from collections.abc import Callable
from functools import partial
from typing import Any

import numpy as np

from decide import solve
from decide.errors import ApproximationWarning


def _seconds(run: Callable[[], Any]) -> float:
    start = time.perf_counter()
    run()
    return time.perf_counter() - start


def _loop(inputs: dict[str, np.ndarray]) -> None:
    for i in range(inputs["baseline"].size):
        solve("cohort-risk", **{k: float(v[i]) for k, v in inputs.items()})  # type: ignore[call-overload]


def main() -> None:
    rng = np.random.default_rng(7)
    k = 300
    large = {
        "baseline": np.exp(rng.uniform(np.log(0.1), np.log(0.3), k)),
        "effect": rng.uniform(1.02, 1.06, k),
        "alpha": np.full(k, 0.05),
        "power": rng.uniform(0.6, 0.95, k),
    }
    mid = {
        "baseline": np.exp(rng.uniform(np.log(0.01), np.log(0.3), k)),
        "effect": rng.uniform(1.2, 2.0, k),
        "alpha": np.full(k, 0.05),
        "power": rng.uniform(0.6, 0.95, k),
    }
    rare = {
        "baseline": np.full(k, 8e-4),
        "effect": rng.choice(np.linspace(2.5, 4.0, 8), k),
        "alpha": np.full(k, 0.05),
        "power": rng.choice([0.7, 0.75, 0.8, 0.85, 0.9], k),
    }
    workloads = (
        ("300 large normal-test studies", large),
        ("300 mid-sized normal-test studies", mid),
        ("300 exact, 40 distinct studies", rare),
    )
    print(f"{'workload':<40} {'array (s)':>10} {'loop (s)':>10} {'ratio':>8}")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ApproximationWarning)
        for name, inputs in workloads:
            array = _seconds(partial(solve, "cohort-risk", **inputs))
            loop = _seconds(partial(_loop, inputs))
            print(f"{name:<40} {array:>10.3f} {loop:>10.3f} {loop / array:>8.1f}")


if __name__ == "__main__":
    main()
