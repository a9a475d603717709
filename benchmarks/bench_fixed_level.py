"""Benchmark: a policy with a fixed alpha sums its exact test directly.

Run as ``python benchmarks/bench_fixed_level.py``; it prints a table.  No
timing is asserted anywhere.

A rule that fixes alpha (``fixed``: the conventional and strict standards)
can only pick the level-alpha exact test at each size, so
:func:`decide.decision.loss.exact_batches` with ``level`` sums that test's
masses directly instead of ordering every count pair by p-value
(:func:`decide.engine.exact.rejection_path`).  Both paths run here in the
same process on the same invented problems, every policy with a fixed
alpha decided by each, and the decisions are compared.

Workload: the bundled scenarios whose tests are exact, each policy with a
fixed alpha.  Target: the direct sum at least 1.2 times faster overall.
"""

from __future__ import annotations

import dataclasses
import time
import warnings
from pathlib import Path

from decide.decision import rules
from decide.decision.optimize import Decision, decide_policy
from decide.decision.problem import Problem
from decide.errors import ApproximationWarning
from decide.scenario import load_policies
from decide.scenario.files import load_scenario

SCENARIOS = Path(__file__).resolve().parents[1] / "scenarios"
TARGET = 1.2


def problems() -> list[tuple[str, Problem]]:
    out = []
    for path in sorted(SCENARIOS.glob("*.toml")):
        problem = load_scenario(path).problem
        out.append((path.stem, dataclasses.replace(problem, study=dataclasses.replace(problem.study, test="exact"))))
    return out


def timed(level: bool, cases: list[tuple[str, Problem]]) -> tuple[float, list[Decision]]:
    policies = [p for p in load_policies().values() if p.alpha_rule == "fixed"]
    saved = rules.Fixed.exact_level
    if not level:  # the ordered path, as every rule used before
        rules.Fixed.exact_level = lambda self, policy: None  # type: ignore[method-assign,assignment,return-value]
    try:
        start = time.process_time()
        decisions = [decide_policy(p, pol) for _, p in cases for pol in policies]
        return time.process_time() - start, decisions
    finally:
        rules.Fixed.exact_level = saved  # type: ignore[method-assign]


def main() -> None:
    warnings.simplefilter("ignore", ApproximationWarning)
    cases = problems()
    timed(True, cases[:1])  # warm-up
    ordered, before = timed(False, cases)
    direct, after = timed(True, cases)
    same_sizes = all(a.n_per_group == b.n_per_group for a, b in zip(before, after, strict=True))
    print(f"{'path':<28}{'CPU s':>8}")
    print(f"{'ordered p-value path':<28}{ordered:>8.2f}")
    print(f"{'level test summed directly':<28}{direct:>8.2f}")
    print(f"ratio {ordered / direct:.2f} (target {TARGET:g}); same sizes chosen: {same_sizes}")


if __name__ == "__main__":
    main()
