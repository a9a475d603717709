"""Benchmark of the sensitivity, probabilistic and simulation analyses.

Run as ``python benchmarks/bench_sweep.py``; it prints median wall-clock
times (and the CPU time of the same runs, which shows how much a busy machine
inflated them) against targets, with their ratios.  No timing is asserted
anywhere.

Workloads, on the bundled invented normal-test scenario
``scenarios/mill-dust-uncertain.toml``:

1. a full tornado with break-even values, the loss-optimal choice only
   (target under 2 s), and with the seven bundled standards compared
   (same target, shown for the record);
2. a 25 x 25 two-way grid, p_harm by the cost ratio (target under 5 s);
3. 10,000 probabilistic draws from the scenario's [uncertainty] table, with
   the eight bundled policies (target under 10 s);
4. 1,000,000 simulated studies under each hypothesis with the normal test
   (target under 5 s), and, on the invented matched-pairs scenario
   ``scenarios/quillmere-matched.toml``, with the exact McNemar test (same
   target).

Then, for the contributor guide only, a tornado on the exact-test scenario
``solvent-cohort.toml`` (loss-optimal only), which runs the optimiser at each
scanned value.
"""

from __future__ import annotations

import statistics
import time
import warnings
from collections.abc import Callable
from pathlib import Path

from decide import optimize
from decide.decision.inputs import default_range
from decide.decision.sensitivity import tornado, two_way
from decide.decision.simulate import simulate
from decide.decision.uncertainty import probabilistic
from decide.scenario import load_policies, load_scenario

REPO = Path(__file__).resolve().parents[1]


def timed(work: Callable[[], object], repeats: int) -> tuple[float, float]:
    """Median wall-clock and CPU seconds over ``repeats`` runs."""
    wall, cpu = [], []
    for _ in range(repeats):
        w, c = time.perf_counter(), time.process_time()
        work()
        wall.append(time.perf_counter() - w)
        cpu.append(time.process_time() - c)
    return statistics.median(wall), statistics.median(cpu)


def main() -> None:
    warnings.simplefilter("ignore")  # approximation notes are not what is timed here
    loaded = load_scenario(REPO / "scenarios" / "mill-dust-uncertain.toml")
    mill = loaded.problem
    policies = list(load_policies().values())
    assert loaded.model.uncertainty is not None
    dists = loaded.model.uncertainty.to_inputs()
    decision = optimize(mill)
    solvent = load_scenario(REPO / "scenarios" / "solvent-cohort.toml").problem
    matched = load_scenario(REPO / "scenarios" / "quillmere-matched.toml").problem
    matched_decision = optimize(matched)
    rows: list[tuple[str, float, float, float | None]] = []

    def add(name: str, work: Callable[[], object], repeats: int, target: float | None) -> None:
        work()  # warm caches and imports
        wall, cpu = timed(work, repeats)
        rows.append((name, wall, cpu, target))

    add("tornado + break-even values, loss-optimal only", lambda: tornado(mill), 3, 2.0)
    add("tornado + break-even values, 7 standards", lambda: tornado(mill, policies), 1, 2.0)
    x, y = default_range(mill, "prior.p_harm"), default_range(mill, "consequences.cost_ratio")
    add("two-way grid 25 x 25", lambda: two_way(mill, x, y, 25), 3, 5.0)
    add("10,000 probabilistic draws, 8 policies", lambda: probabilistic(mill, dists, 10_000, 1, policies), 1, 10.0)
    add("simulate 1,000,000 studies (normal test)", lambda: simulate(mill, decision, 1_000_000, 1), 3, 5.0)
    add(
        "simulate 1,000,000 matched-pair studies (exact McNemar)",
        lambda: simulate(matched, matched_decision, 1_000_000, 1),
        3,
        5.0,
    )
    add("tornado on solvent-cohort (exact test, for the guide)", lambda: tornado(solvent), 1, None)

    width = max(len(r[0]) for r in rows)
    print(f"{'workload':<{width}}  {'wall s':>7}  {'cpu s':>7}  {'target s':>8}  {'ratio':>6}")
    for name, wall, cpu, target in rows:
        ratio = "-" if target is None else f"{wall / target:6.2f}"
        tgt = "-" if target is None else f"{target:8.2f}"
        print(f"{name:<{width}}  {wall:7.2f}  {cpu:7.2f}  {tgt:>8}  {ratio:>6}")
    print("ratio = median wall time / target; below 1 meets the target. cpu s far below wall s means a busy machine.")


if __name__ == "__main__":
    main()
