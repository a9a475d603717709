"""Benchmark of the decision engine: loss-optimal alpha and size, end to end.

Run as ``python benchmarks/bench_decision.py``; it prints a table of median
times against targets.  No timing is asserted anywhere (the test suite never
times anything).

Workloads
---------
1. ``optimize`` on the bundled depot scenario (person-time cohort, normal
   test): the size search with a normal critical-value search at each size.
   Target under 100 ms.
2. ``optimize`` with the exact test forced and sizes capped at 100,000 per
   group, one invented problem per design (SIR 1.5 and a constant missed
   cost, so the search spans the whole range).  Target under 2 s each.
3. ``decide compare scenarios/solvent-cohort.toml`` as a subprocess: the
   interpreter start, imports, all eight bundled policies and the table.
   Target under 3 s.

Each workload is run a few times and the median reported, with its ratio to
the target (below 1 meets it).
"""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import time
import warnings
from collections.abc import Callable
from functools import partial
from pathlib import Path

from decide.decision.optimize import optimize
from decide.decision.prior import EffectPrior
from decide.decision.problem import Consequences, Constraints, Problem, Study
from decide.scenario import load_scenario

REPO = Path(__file__).resolve().parents[1]
EXACT_CAP = 100_000


def median_seconds(work: Callable[[], object], repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        work()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def exact_problem(study: Study) -> Problem:
    """An invented problem whose loss-optimal search runs the exact test up to the cap."""
    return Problem(
        study,
        EffectPrior.point(1.5),
        0.3,
        Consequences(false_alarm=1e7, per_subject=5.0, missed_hazard=5e7),
        Constraints(max_n_per_group=EXACT_CAP),
    )


EXACT_STUDIES = {
    "cohort-risk, risk 1e-3": Study("cohort-risk", 1e-3, test="exact"),
    "cohort-rate, rate 2e-4, 5 years": Study("cohort-rate", 2e-4, years=5.0, test="exact"),
    "case-control, exposure 0.01": Study("case-control", 0.01, test="exact"),
    "reference-rate, rate 2e-4, 5 years": Study("reference-rate", 2e-4, years=5.0, test="exact"),
}


def main() -> None:
    rows: list[tuple[str, str, float, float]] = []

    depot = load_scenario(REPO / "scenarios" / "depot-cohort-rate.toml").problem
    optimize(depot)  # warm caches (quadrature nodes, imports)
    dec = optimize(depot)
    rows.append(
        (
            "optimize depot-cohort-rate (normal test)",
            f"n = {dec.n_per_group:,}, alpha = {dec.alpha:.3g}",
            median_seconds(lambda: optimize(depot), 7),
            0.1,
        )
    )

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # approximation notes from the detectable-effect solve
        for name, study in EXACT_STUDIES.items():
            prob = exact_problem(study)
            dec = optimize(prob)
            seconds = median_seconds(partial(optimize, prob), 3)
            rows.append((f"optimize {name} (exact, cap {EXACT_CAP:,})", f"n = {dec.n_per_group:,}", seconds, 2.0))

    # the installed console script beside this interpreter, else the same entry point by -c
    script = Path(sys.executable).with_name("decide")
    entry = [str(script)] if script.exists() else [sys.executable, "-c", "from decide.cli import main; main()"]
    command = [*entry, "compare", str(REPO / "scenarios" / "solvent-cohort.toml")]
    env = {**os.environ, "COLUMNS": "100"}

    def run_cli() -> None:
        subprocess.run(command, check=True, capture_output=True, env=env, cwd=REPO)

    how = "console script" if script.exists() else "python -c"
    rows.append((f"decide compare solvent-cohort.toml ({how})", "8 policies", median_seconds(run_cli, 5), 3.0))

    width = max(len(r[0]) for r in rows)
    detail = max(len(r[1]) for r in rows)
    print(f"{'workload':<{width}}  {'result':<{detail}}  {'median s':>9}  {'target s':>8}  {'ratio':>6}")
    for name, info, seconds, target in rows:
        print(f"{name:<{width}}  {info:<{detail}}  {seconds:>9.3f}  {target:>8.2f}  {seconds / target:>6.2f}")
    print("ratio = median / target; below 1 meets the target.")


if __name__ == "__main__":
    main()
