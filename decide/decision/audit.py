"""Audit a protocol as it stands: the value judgments its numbers imply.

Given a protocol's design, alpha, size (or target power) and effect, with
the prior probability of harm and the cost per subject, the audit reports

* the implied cost ratio: the ratio of missed-hazard cost to false-alarm
  cost at which the protocol's alpha would be loss-optimal for its size;
* the implied value of a missed hazard that its size reflects: at a
  loss-optimal size one more subject costs what it saves,
  ``per_subject * (1 + allocation) = p_harm * M * dPower/dn``, so
  ``M = per_subject * (1 + allocation) / (p_harm * dPower/dn)``; with the
  implied ratio this also implies a false-alarm cost;
* what a negative result would and would not rule out: the effects it
  detects with power 0.5, 0.8 and 0.95, and the probability of harm left
  after a negative result.

References
----------
.. [1] Raiffa, H. and Schlaifer, R. (1961). *Applied Statistical Decision
   Theory*. Harvard University Press (marginal value of sampling; from
   memory).
.. [2] Mudge, J. F., Baker, L. F., Edge, C. B. and Houlahan, J. E. (2012).
   *PLoS ONE* 7, e32734.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .. import _checks
from .._results import PlainData
from ..designs import get_design
from ..engine.power import evaluate
from ..engine.solve import solve
from ..errors import DecideError
from .choice import choose_tests
from .implied import implied_ratio_exact, implied_ratio_normal
from .loss import build_model, normal_at
from .policies import Policy
from .prior import EffectPrior
from .problem import Consequences, Problem, Study

DETECTION_LEVELS = (0.5, 0.8, 0.95)


@dataclass(frozen=True)
class Audit(PlainData):
    """The value judgments a protocol's alpha and size imply.

    ``implied_missed_hazard`` and ``implied_false_alarm`` are in the unit of
    ``per_subject``.  ``detectable_effects`` maps a power to the smallest
    effect detected with it (``None`` where none up to the cap is).
    """

    design: str
    test: str
    method: str
    sides: int
    alpha: float
    attained_alpha: float
    power: float
    beta: float
    effect: float
    n_per_group: int
    n_total: int
    p_harm: float
    per_subject: float
    implied_cost_ratio: float | None
    implied_cost_ratio_range: tuple[float, float] | None
    marginal_power_per_subject: float
    implied_missed_hazard: float | None
    implied_false_alarm: float | None
    p_harm_given_negative: float
    p_harm_given_positive: float
    detectable_effects: dict[str, float | None]
    rules_out: str
    warnings: tuple[str, ...] = field(default=())



def audit(
    design: str,
    *,
    baseline: float,
    alpha: float,
    effect: float,
    p_harm: float,
    per_subject: float,
    power: float | None = None,
    n_per_group: int | None = None,
    allocation: float | None = None,
    years: float | None = None,
    sides: int = 1,
    test: str = "auto",
    continuity: bool = False,
) -> Audit:
    """Audit a protocol given its size, or the target power it was sized for.

    Exactly one of ``power`` and ``n_per_group`` is given.  The cost ratio
    refers to a constant missed-hazard cost (a point effect).

    Examples
    --------
    A usage example, not a check (the tests check audits against finite
    differences of the power and against Bayes' rule):

    >>> a = audit("cohort-rate", baseline=1e-3, alpha=0.05, effect=2.0, p_harm=0.1,
    ...           per_subject=100.0, power=0.8, years=5.0, test="normal")
    >>> a.n_per_group, round(a.implied_cost_ratio, 2)
    (3574, 3.52)
    """
    if (power is None) == (n_per_group is None):
        raise DecideError(
            "give exactly one of power and n_per_group (the size, or the power it was chosen for)",
            ("power", "n_per_group"),
        )
    _checks.open_unit("p_harm", p_harm)
    _checks.non_negative("per_subject", per_subject)
    sol = solve(
        design, baseline=baseline, alpha=alpha, power=power, n_per_group=n_per_group,
        effect=effect, allocation=allocation, years=years, sides=sides, test=test,
        continuity=continuity,
    )
    exact = sol.test == "exact"
    study = Study(design, baseline, sol.allocation, sol.years, sides, "exact" if exact else "normal", continuity)
    problem = Problem(study, EffectPrior.point(effect), p_harm,
                      Consequences(false_alarm=1.0, per_subject=per_subject, missed_hazard=1.0))
    model = build_model(problem)
    fixed = Policy("protocol", "Protocol", "", "fixed", "largest-allowed", alpha=alpha)
    n = float(sol.n_per_group)
    ch = choose_tests(model, fixed, np.array([n]))
    warnings: list[str] = list(sol.warnings)
    rng: tuple[float, float] | None
    if exact:
        found = implied_ratio_exact(model, n, ch.chars.at(0))
        rng = None if found is None else (found.low, found.high)
        ratio = None if found is None else found.point
        slope = _exact_slope(model, alpha, n)
        warnings.append("exact power saw-tooths in size: the marginal power is the slope of a line "
                        "fitted to exact power over sizes within 10% of the protocol's")
    else:
        rng = None
        ratio = implied_ratio_normal(model, n, float(ch.z[0]))
        h = max(1e-3 * n, 1e-3)
        c = normal_at(model, np.array([n - h, n + h]), np.full(2, float(ch.z[0])))
        slope = float((c.design_power[1] - c.design_power[0]) / (2 * h))
    per_n = 1.0 + (sol.n_total - sol.n_per_group) / sol.n_per_group
    missed = per_subject * per_n / (p_harm * slope) if slope > 0 and per_subject > 0 else None
    false_alarm = missed / ratio if missed is not None and ratio else None
    detect = {f"{lv:g}": _detect(sol, lv) for lv in DETECTION_LEVELS}
    neg = p_harm * sol.beta + (1 - p_harm) * (1 - sol.attained_alpha)
    pos = p_harm * sol.power + (1 - p_harm) * sol.attained_alpha
    return Audit(
        design=sol.design, test=sol.test, method=sol.method, sides=sides, alpha=alpha,
        attained_alpha=sol.attained_alpha, power=sol.power, beta=sol.beta, effect=effect,
        n_per_group=sol.n_per_group, n_total=sol.n_total, p_harm=p_harm, per_subject=per_subject,
        implied_cost_ratio=ratio, implied_cost_ratio_range=rng, marginal_power_per_subject=slope,
        implied_missed_hazard=missed, implied_false_alarm=false_alarm,
        p_harm_given_negative=p_harm * sol.beta / neg,
        p_harm_given_positive=p_harm * sol.power / pos,
        detectable_effects=detect, rules_out=_rules_out(detect, sol.effect),
        warnings=tuple(warnings),
    )


def _exact_slope(model: Any, alpha: float, n: float) -> float:
    s = model.setting
    sizes = np.unique(np.round(np.linspace(0.9 * n, 1.1 * n, 21)))
    sizes = sizes[sizes >= 1]
    if sizes.size < 2:
        sizes = np.array([n, n + 1.0])
    res = evaluate(s, np.asarray(alpha), sizes, np.asarray(float(model.effects[-1])))
    return float(np.polyfit(sizes, res.power, 1)[0])


def _detect(sol: Any, level: float) -> float | None:
    if level <= sol.alpha:
        return None
    allocation, years = get_design(sol.design).applicable(sol.allocation, sol.years)
    try:
        return solve(
            sol.design, baseline=sol.baseline, alpha=sol.alpha, power=level,
            n_per_group=sol.n_per_group, allocation=allocation, years=years,
            sides=sol.sides, test=sol.test.replace("normal-cc", "normal"),
            continuity=sol.test == "normal-cc",
        ).effect
    except DecideError:
        return None


def _rules_out(detect: dict[str, float | None], effect: float) -> str:
    hi, mid, lo = detect.get("0.95"), detect.get("0.8"), detect.get("0.5")
    parts = []
    if hi is not None:
        parts.append(f"A negative result makes effects of {hi:.3g} or more unlikely (power 0.95 or more against them).")
    if mid is not None:
        parts.append(f"Effects from {mid:.3g} up are detected with power 0.8 or more.")
    if lo is not None:
        parts.append(f"Effects below {lo:.3g} would more likely than not be missed, so a negative "
                     "result does not rule them out.")
    if lo is not None and effect < lo:
        parts.append(f"That includes the protocol's own effect of {effect:.3g}.")
    return " ".join(parts)
