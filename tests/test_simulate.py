"""The simulation check of a chosen design.

The exact designs below are those whose exact power the power tests already
check (Fisher's exact test, the conditional binomial test of two Poisson
rates, the exact Poisson test): the simulated false-alarm probability and
power, drawn with numpy and tested with scipy.stats, must agree with the
analytic values within 4 standard errors.  A two-sided rule applied to a
one-sided design must be flagged.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from decide import InfeasibleError, decide_policy, optimize
from decide.decision.policies import Policy
from decide.decision.prior import EffectPrior
from decide.decision.problem import Consequences, Constraints, Problem, Study
from decide.decision.simulate import simulate
from decide.scenario import load_scenario

REPO = Path(__file__).resolve().parents[1]


def _bundled(name: str) -> Problem:
    return load_scenario(REPO / "scenarios" / f"{name}.toml").problem


EXACT = {
    "solvent-cohort (Fisher)": _bundled("solvent-cohort"),
    "trade-case-control (Fisher)": _bundled("trade-case-control"),
    "water-supply-reference (Poisson tail, lognormal effect)": _bundled("water-supply-reference"),
    "invented cohort-rate (conditional binomial)": Problem(
        Study("cohort-rate", 2e-4, allocation=2.0, years=5.0, test="exact"),
        EffectPrior.point(2.5),
        0.3,
        Consequences(false_alarm=1e7, per_subject=5.0, missed_hazard=5e7),
        Constraints(max_n_per_group=4000),
    ),
}


@pytest.mark.parametrize("name", list(EXACT))
def test_exact_designs_agree_with_the_simulation(name: str) -> None:
    prob = EXACT[name]
    d = optimize(prob)
    assert d.test == "exact"
    sim = simulate(prob, d, studies=40_000, seed=20261202)
    assert not sim.false_alarm.flagged, sim.false_alarm
    assert not sim.power.flagged, sim.power
    assert not sim.loss.flagged, sim.loss
    ci = sim.power.interval
    assert ci is not None and ci.low <= sim.power.simulated <= ci.high


@pytest.mark.parametrize("name", list(EXACT))
def test_a_two_sided_rule_on_a_one_sided_design_is_flagged(name: str) -> None:
    prob = EXACT[name]
    d = optimize(prob)
    sim = simulate(prob, d, studies=40_000, seed=5, sides=2)
    assert sim.power.flagged and sim.flagged
    assert sim.power.simulated < d.power  # type: ignore[operator]


def test_normal_test_with_many_cases_agrees() -> None:
    """A normal-test design with hundreds of expected cases, where the approximation is close."""
    prob = Problem(
        Study("cohort-risk", 0.02, test="normal"),
        EffectPrior.point(1.3),
        0.3,
        Consequences(false_alarm=1e6, per_subject=1.0, missed_hazard=3e6),
    )
    fixed = Policy("fixed", "fixed", "", "fixed", "smallest-for-power", alpha=0.05, power=0.8)
    d = decide_policy(prob, fixed)
    sim = simulate(prob, d, studies=20_000, seed=1)
    assert not sim.false_alarm.flagged and not sim.power.flagged


def test_same_seed_same_result() -> None:
    prob = EXACT["solvent-cohort (Fisher)"]
    d = optimize(prob)
    assert simulate(prob, d, 5000, seed=3).to_dict() == simulate(prob, d, 5000, seed=3).to_dict()
    assert simulate(prob, d, 5000, seed=3).power != simulate(prob, d, 5000, seed=4).power


def test_infeasible_design_and_bad_counts() -> None:
    prob = EXACT["solvent-cohort (Fisher)"]
    strict = Policy("strict", "strict", "", "fixed", "smallest-for-power", alpha=0.05, power=0.95)
    d = decide_policy(prob, strict)
    assert not d.feasible
    with pytest.raises(InfeasibleError):
        simulate(prob, d, 100, seed=1)
    with pytest.raises(ValueError, match="studies must be at least 1"):
        simulate(prob, optimize(prob), 0, seed=1)


def test_the_simulation_shares_no_code_with_the_power_engine() -> None:
    tree = ast.parse((REPO / "decide" / "decision" / "simulate.py").read_text(encoding="utf-8"))
    imported = {n.module or "" for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)}
    imported |= {a.name for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
    assert not any("engine" in m or "designs" in m or "loss" in m for m in imported), imported
