"""A scenario's inputs in words and numbers, for every human renderer.

The rows are built from the :class:`~decide.decision.problem.Problem` itself
and formatted by :mod:`decide.report.numbers`, so the inputs panel speaks the
same number language as the results beside it.
"""

from __future__ import annotations

from ..decision.problem import Problem
from ..designs import get_design
from . import numbers as nb
from .text import one_line

#: A lognormal prior as the file stated it: (low, high, level).
StatedInterval = tuple[float, float, float]


def _effect(problem: Problem, stated: StatedInterval | None) -> str:
    e = problem.effect
    if e.is_point:
        return nb.number(e.median)
    if stated is not None:
        low, high, level = stated
        share = nb.number(100 * level)
        return f"lognormal, {share}% between {nb.number(low)} and {nb.number(high)} (median {nb.number(e.median)})"
    return f"lognormal, median {nb.number(e.median)}, 90% between {nb.number(e.quantile(0.05))} and " + nb.number(
        e.quantile(0.95)
    )


def _missed(problem: Problem, currency: str) -> str:
    c = problem.consequences
    if c.missed_hazard is not None:
        return nb.money(c.missed_hazard, currency)
    return (
        f"{nb.count(c.exposed_population)} exposed x {nb.number(c.background_rate)} cases per person-year "
        f"x (effect - 1) x {nb.money(c.cost_per_case, currency)} per case x {nb.number(c.horizon_years)} years"
    )


def _limits(problem: Problem, currency: str, size_name: str) -> str:
    k = problem.constraints
    limits = []
    if k.max_n_per_group is not None:
        limits.append(f"at most {nb.count(k.max_n_per_group)} {size_name}")
    if k.min_n_per_group > 1:
        limits.append(f"at least {nb.count(k.min_n_per_group)} {size_name}")
    if k.budget is not None:
        limits.append(f"budget {nb.money(k.budget, currency)}")
    if k.max_alpha < 1:
        limits.append(f"alpha at most {nb.number(k.max_alpha)}")
    if k.min_power > 0:
        limits.append(f"power at least {nb.number(k.min_power)}")
    return "; ".join(limits) or "none"


def scenario_inputs(
    problem: Problem, currency: str = "", stated_interval: StatedInterval | None = None
) -> list[tuple[str, str]]:
    """The inputs as (label, value) rows, money with its currency.

    ``stated_interval`` is the effect prior's interval as the user wrote it,
    echoed instead of one recomputed from the fitted lognormal.
    """
    cur = one_line(currency)
    d = get_design(problem.study.design)
    c = problem.consequences
    rows = [
        ("design", d.title),
        (d.baseline_name, nb.number(problem.study.baseline)),
        (f"{d.effect_name} if harmful", _effect(problem, stated_interval)),
        ("prior probability of harm", nb.number(problem.p_harm)),
        ("cost of a missed hazard", _missed(problem, cur)),
        ("cost of a false alarm", nb.money(c.false_alarm, cur)),
        ("study cost", f"{nb.money(c.per_subject, cur)} per subject + {nb.money(c.fixed, cur)} fixed"),
    ]
    if d.groups == 2:
        rows.insert(2, (str(d.allocation_name), nb.number(problem.study.allocation)))
    if d.uses_years:
        rows.insert(2, ("follow-up years per subject", nb.number(problem.study.years)))
    rows[1:1] = [(f"design setting: {key}", nb.number(value)) for key, value in d.setting_values().items()]
    rows.append(("constraints", _limits(problem, cur, d.size_name)))
    return rows
