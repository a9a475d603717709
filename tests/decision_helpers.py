"""Problems and keyword sets shared by the decision-engine tests (not a test module)."""

from __future__ import annotations

from typing import Any

from decide.decision.prior import EffectPrior
from decide.decision.problem import Consequences, Constraints, Problem, Study
from decide.designs import get_design


def fixed_size_problem(
    design: str,
    baseline: float,
    allocation: float,
    years: float,
    prior: EffectPrior,
    missed: dict[str, float],
    n: int,
    *,
    test: str = "normal",
    continuity: bool = False,
    p: float = 0.2,
    false_alarm: float = 2e6,
) -> Problem:
    """An invented problem whose size is fixed at ``n`` (min = max), so only alpha is chosen."""
    d = get_design(design)
    study = Study(
        design,
        baseline,
        allocation=allocation if d.allocation_name else 1.0,
        years=years if d.uses_years else 1.0,
        test=test,
        continuity=continuity,
    )
    return Problem(
        study,
        prior,
        p,
        Consequences(false_alarm=false_alarm, per_subject=10.0, **missed),
        Constraints(min_n_per_group=n, max_n_per_group=n),
    )


def power_kwargs(problem: Problem, *, with_test: bool = True) -> dict[str, Any]:
    """The keywords of :func:`decide.power.power` that describe the problem's study."""
    s = problem.study
    d = get_design(s.design)
    out: dict[str, Any] = {
        "allocation": s.allocation if d.allocation_name else None,
        "years": s.years if d.uses_years else None,
        "sides": s.sides,
        "continuity": s.continuity,
    }
    if with_test:
        out["test"] = s.test
    return out
