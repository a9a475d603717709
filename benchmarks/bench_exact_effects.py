"""Benchmark: exact power at 1,000 effects of one study shares one grid.

Run as ``python benchmarks/bench_exact_effects.py``; it prints a table.  No
timing is asserted anywhere.

The rejection region of an exact test depends on the study (size, baseline,
allocation, years) and the level, never on the effect, so
:func:`decide.engine.power.exact_power` builds one grid per study and sums
each effect's exposed-count distribution over it.  The path it replaced keyed
the grid on the effect too, building one grid per effect; that path is
kept here as it was (:func:`per_effect_grids`), timed in the same run, and
the two answers are compared.

Workload: power of the exact test at 1,000 effects (ratio 1 to 6) for one
invented study point per design below.  Target: at least 20 times faster than
the per-effect path.
"""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable

import numpy as np

from decide.designs import DESIGNS, StudyDesign
from decide.designs._base import FloatArray
from decide.engine import exact as _exact
from decide.engine.power import exact_power
from decide.engine.study import check_setting

EFFECTS = np.linspace(1.0, 6.0, 1000)
ALPHA = 0.05
REPEATS = 5
TARGET = 20.0

# Invented study points: (design, size per group, baseline, allocation, years).
POINTS = [
    ("cohort-rate", 300, 2e-3, 2.0, 3.0),
    ("cohort-risk", 2000, 8e-4, 1.0, 1.0),
    ("case-control", 150, 0.1, 2.0, 1.0),
]

Power = Callable[[], FloatArray]


def shared(design: str, n: int, baseline: float, allocation: float, years: float) -> Power:
    """Every effect in one call: one grid for the study."""
    d = DESIGNS[design]
    one = np.ones(EFFECTS.size)

    def run() -> FloatArray:
        pw, _ = exact_power(d, ALPHA * one, n * one, EFFECTS, baseline * one, allocation * one, years * one, 1)
        return pw

    return run


def per_effect_grids(
    d: StudyDesign,
    alpha: FloatArray,
    n: FloatArray,
    effect: FloatArray,
    baseline: FloatArray,
    allocation: FloatArray,
    years: FloatArray,
    sides: int,
) -> FloatArray:
    """The replaced algorithm, kept verbatim but for names: the effect is part of the grid key.

    Each distinct (size, effect, baseline, allocation, years) gets its own
    grid, built in batches of alike grids and ordered by p-value; each alpha
    is then looked up along its grid's order.
    """
    keys = np.stack(np.broadcast_arrays(n, effect, baseline, allocation, years))
    uniq, back = np.unique(keys, axis=1, return_inverse=True)
    back = back.ravel()
    nn, e, b, r, y = uniq
    full = d.count_model(nn, b, e[:, None], r, y)
    by_key = np.argsort(back, kind="stable")
    first = np.searchsorted(back[by_key], np.arange(nn.size + 1))
    alpha = np.broadcast_to(alpha, back.shape)
    out = np.empty(back.shape)
    for idx in _exact.batches(full):
        path = _exact.rejection_path(_exact.build_grid(_exact.take_rows(full, idx), sides), np.ones((1, 1)))
        lengths = first[idx + 1] - first[idx]
        local = np.repeat(np.arange(idx.size), lengths)
        offset = np.arange(local.size) - np.repeat(np.cumsum(lengths) - lengths, lengths)
        members = by_key[np.repeat(first[idx], lengths) + offset]
        for part in _exact.chunks(members.size, path.p_value.shape[1]):
            rows, els = local[part], members[part]
            limit = (alpha[els] * (1 + _exact.REL_TOL))[:, None]
            k = (path.p_value[rows] <= limit).sum(axis=1)
            out[els] = np.where(k > 0, path.weighted[rows, 0, np.maximum(k - 1, 0)], 0.0)
    return out


def per_effect(design: str, n: int, baseline: float, allocation: float, years: float) -> Power:
    """The replaced path: one grid per effect."""
    d = DESIGNS[design]
    one = np.ones(EFFECTS.size)

    def run() -> FloatArray:
        return per_effect_grids(d, ALPHA * one, n * one, EFFECTS, baseline * one, allocation * one, years * one, 1)

    return run


def median_seconds(fn: Power, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main() -> None:
    rows = []
    for design, n, baseline, allocation, years in POINTS:
        d = DESIGNS[design]
        # the point is valid input for the public API (so the benchmark times real cases)
        check_setting(
            d, baseline, allocation if d.allocation_name else None, years if d.uses_years else None, 1, "exact", False
        )
        new, old = shared(design, n, baseline, allocation, years), per_effect(design, n, baseline, allocation, years)
        gap = float(np.max(np.abs(new() - old())))
        t_new = median_seconds(new, REPEATS)
        t_old = median_seconds(old, 3)
        rows.append((f"{design}, n={n:,}, baseline {baseline:g}", t_new, t_old, gap))
    width = max(len(r[0]) for r in rows)
    print(f"exact power at {EFFECTS.size:,} effects, alpha {ALPHA}, one-sided")
    head = ("study (invented)", "shared grid", "per effect", "ratio", "max |diff|")
    print(f"{head[0].ljust(width)}  {head[1]:>12}  {head[2]:>12}  {head[3]:>7}  {head[4]:>10}")
    for name, t_new, t_old, gap in rows:
        times = f"{1e3 * t_new:>9.1f} ms  {1e3 * t_old:>9.1f} ms"
        print(f"{name.ljust(width)}  {times}  {t_old / t_new:>6.0f}x  {gap:>10.1e}")
    print(
        f"(shared: median of {REPEATS} runs; per effect: median of 3; target: ratio >= {TARGET:g}x; "
        "differences come from the count tails left out, below 1e-12)"
    )


# --------------------------------------------------------------------------
# pytest-benchmark entry points (not collected by the default test run)


def test_bench_shared_grid(benchmark: Callable[[Power], object]) -> None:
    benchmark(shared(*POINTS[0]))


if __name__ == "__main__":
    main()
