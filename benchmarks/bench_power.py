"""Benchmark of the power engine: vectorised normal sizes and exact power at large sizes.

Run as ``python benchmarks/bench_power.py``; it prints a table.  The same
workloads are offered as pytest-benchmark functions
(``pytest benchmarks/bench_power.py --benchmark-enable``), which are not part
of the default test run.  No timing is asserted anywhere.

Workloads
---------
1. 100,000 normal size solves with mixed inputs (all four designs, one- and
   two-sided, rare to common baselines), validation included
   (:func:`decide.engine.study.check_setting` then :func:`decide.engine.solve.normal_size`),
   against a Python loop of statsmodels'
   ``samplesize_proportions_2indep_onetail`` over 2,000 of the two-proportion
   inputs, extrapolated per solve, in the same run.
2. Exact power for 200,000 per group at baseline 1e-3 (cohort-risk,
   cohort-rate, case-control): milliseconds per point, median of several runs.

Targets: under 50 ms for the 100,000 solves, at least 100 times faster per
solve than the statsmodels loop, under 50 ms per exact point.
"""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable
from typing import Any

import numpy as np

from decide.designs import DESIGNS
from decide.engine.power import exact_power
from decide.engine.solve import normal_size
from decide.engine.study import check_setting

N_SOLVES = 100_000
N_REFERENCE = 2_000
EXACT_N = 200_000
EXACT_BASELINE = 1e-3
EXACT_EFFECT = 1.3
REPEATS = 7


def mixed_inputs(k: int, seed: int = 2024) -> dict[str, np.ndarray]:
    """Mixed inputs: design, sides, baseline (1e-5 .. 0.3), effect, allocation, years, alpha, power."""
    rng = np.random.default_rng(seed)
    effect = np.exp(rng.uniform(np.log(1.1), np.log(5.0), k))
    baseline = np.exp(rng.uniform(np.log(1e-5), np.log(0.3), k))
    return {
        "design": rng.integers(0, 4, k),
        "sides": rng.integers(1, 3, k),
        "baseline": np.minimum(baseline, 0.9 / effect),
        "effect": effect,
        "allocation": rng.choice([0.5, 1.0, 2.0, 4.0], k),
        "years": rng.uniform(1.0, 10.0, k),
        "alpha": rng.choice([0.001, 0.01, 0.025, 0.05, 0.1], k),
        "power": rng.uniform(0.5, 0.99, k),
    }


def ours(x: dict[str, np.ndarray]) -> np.ndarray:
    """All the normal sizes: one validated vectorised call per (design, sides) block."""
    out = np.empty(x["effect"].size)
    for d, design in enumerate(DESIGNS.values()):
        for sides in (1, 2):
            sel = (x["design"] == d) & (x["sides"] == sides)
            setting = check_setting(
                design,
                x["baseline"][sel],
                None if design.allocation_name is None else x["allocation"][sel],
                x["years"][sel] if design.uses_years else None,
                sides,
                "normal",
                False,
            )
            out[sel] = normal_size(setting, x["alpha"][sel], x["power"][sel], x["effect"][sel])
    return out


def reference_loop(x: dict[str, np.ndarray], k: int) -> np.ndarray:
    """statsmodels, one call per input, for the first ``k`` cohort-risk inputs."""
    from statsmodels.stats.proportion import samplesize_proportions_2indep_onetail

    sel = np.flatnonzero(x["design"] == 0)[:k]
    out = np.empty(sel.size)
    for j, i in enumerate(sel):
        p0 = x["baseline"][i]
        out[j] = samplesize_proportions_2indep_onetail(
            diff=x["effect"][i] * p0 - p0,
            prop2=p0,
            power=x["power"][i],
            ratio=x["allocation"][i],
            alpha=x["alpha"][i],
            alternative="larger" if x["sides"][i] == 1 else "two-sided",
        )
    return out


def reference_inputs(x: dict[str, np.ndarray], k: int) -> dict[str, np.ndarray]:
    sel = np.flatnonzero(x["design"] == 0)[:k]
    return {key: value[sel] for key, value in x.items()}


def exact_point(design: str) -> Callable[[], float]:
    """One exact power evaluation at 200,000 per group, baseline 1e-3."""
    d = DESIGNS[design]
    one = np.ones(1)

    def run() -> float:
        pw, _ = exact_power(d, 0.05 * one, EXACT_N * one, EXACT_EFFECT * one, EXACT_BASELINE * one, one, one, 1)
        return float(pw[0])

    return run


def median_ms(fn: Callable[[], object], repeats: int = REPEATS) -> float:
    fn()  # warm up
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return 1e3 * statistics.median(times)


def main() -> None:
    x = mixed_inputs(N_SOLVES)
    sizes = ours(x)
    ref_x = reference_inputs(x, N_REFERENCE)
    ref = reference_loop(x, N_REFERENCE)
    agree = np.max(np.abs(ours(ref_x) / ref - 1))
    ours_ms = median_ms(lambda: ours(x))
    ref_ms = median_ms(lambda: reference_loop(x, N_REFERENCE), repeats=3)
    per_ours = ours_ms / N_SOLVES
    per_ref = ref_ms / ref.size
    rows = [
        (f"{N_SOLVES:,} normal size solves, validated (decide)", f"{ours_ms:.1f} ms", f"{1e3 * per_ours:.3f} us"),
        (
            f"statsmodels samplesize_proportions_2indep_onetail loop ({ref.size:,})",
            f"{ref_ms:.1f} ms",
            f"{1e3 * per_ref:.1f} us",
        ),
        (f"  extrapolated to {N_SOLVES:,}", f"{per_ref * N_SOLVES:.0f} ms", ""),
        ("  speed ratio per solve", f"{per_ref / per_ours:.0f}x", ""),
        ("  largest relative difference", f"{agree:.1e}", ""),
    ]
    for design in ("cohort-risk", "cohort-rate", "case-control"):
        run = exact_point(design)
        value = run()
        rows.append(
            (
                f"exact power, {design}, n={EXACT_N:,}, baseline {EXACT_BASELINE:g}, "
                f"effect {EXACT_EFFECT:g} (power {value:.4f})",
                f"{median_ms(run):.1f} ms",
                "per point",
            )
        )
    assert np.isfinite(sizes).all()
    width = max(len(r[0]) for r in rows)
    print(f"{'workload'.ljust(width)}  {'time':>10}  {'per item':>10}")
    print("-" * (width + 24))
    for name, t, each in rows:
        print(f"{name.ljust(width)}  {t:>10}  {each:>10}")
    print(f"(median of {REPEATS} runs; statsmodels median of 3; targets: <50 ms, >=100x, <50 ms a point)")


# --------------------------------------------------------------------------
# pytest-benchmark entry points (not collected by the default test run)


def test_bench_normal_sizes(benchmark: Any) -> None:
    x = mixed_inputs(N_SOLVES)
    benchmark(ours, x)


def test_bench_statsmodels_loop(benchmark: Any) -> None:
    x = mixed_inputs(N_SOLVES)
    benchmark.pedantic(reference_loop, args=(x, 200), rounds=3)


def test_bench_exact_points(benchmark: Any) -> None:
    runs = [exact_point(d) for d in ("cohort-risk", "cohort-rate", "case-control")]
    benchmark(lambda: [run() for run in runs])


if __name__ == "__main__":
    main()
