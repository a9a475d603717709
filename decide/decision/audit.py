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
  after a negative result;
* the decision rule in counts (:mod:`decide.engine.rule`);
* when the protocol's costs are given (the cost of a missed hazard and of a
  false alarm, with an optional lognormal effect prior), its own expected
  loss, its regret against the loss-optimal design of the same problem, and
  the net benefit of running it over deciding now.

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
from ..designs import StudyDesign, get_design
from ..engine.power import evaluate
from ..engine.rule import DecisionRule, decision_rule
from ..engine.solve import Solution, solve
from ..errors import DecideError
from .choice import choose_tests
from .implied import implied_ratio_exact, implied_ratio_normal
from .loss import LossModel, build_model, normal_at
from .optimize import decide_policy as _decide_policy
from .optimize import optimize as _optimize
from .policies import Policy
from .prior import EffectPrior
from .problem import Consequences, Constraints, Problem, Study

DETECTION_LEVELS = (0.5, 0.8, 0.95)


@dataclass(frozen=True)
class Audit(PlainData):
    """The value judgments a protocol's alpha and size imply.

    ``implied_missed_hazard`` and ``implied_false_alarm`` are in the unit of
    ``per_subject``.  ``detectable_effects`` maps a power to the smallest
    effect detected with it (``None`` where none up to the cap is).
    ``rule`` is the protocol's test in counts; ``prior`` the effect prior as
    entered (``None`` for a point); ``losses`` the protocol judged by its
    own costs (``None`` when none were given).
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
    p_harm_given_negative: float | None
    p_harm_given_positive: float | None
    detectable_effects: dict[str, float | None]
    rules_out: str
    warnings: tuple[str, ...] = field(default=())
    rule: DecisionRule | None = None
    prior: str | None = None
    losses: ProtocolLosses | None = None


@dataclass(frozen=True)
class ProtocolLosses(PlainData):
    """The protocol judged by its own stated costs and prior.

    ``expected_loss`` and ``loss_parts`` are the protocol's (alpha and size
    as they stand); ``net_benefit`` is the loss of the better no-study action
    (``no_study``) less the protocol's.  ``optimal_action`` is the best
    action for the same problem: the loss-optimal study (``study``, with its
    size, shown alpha and test) or, when no study is worth its cost,
    ``flag-now`` or ``clear-now``; ``optimal_expected_loss`` is its loss and
    ``regret`` the protocol's extra expected loss over it.
    ``stated_cost_ratio`` is the expected missed-hazard cost over the
    false-alarm cost, to set beside the implied one.
    """

    missed_hazard: float
    false_alarm: float
    fixed: float
    expected_loss: float
    loss_parts: dict[str, float]
    no_study: dict[str, float]
    net_benefit: float
    regret: float
    stated_cost_ratio: float | None
    optimal_action: str
    optimal_n_per_group: int | None
    optimal_alpha: str | None
    optimal_test: str | None
    optimal_expected_loss: float


def audit(
    design: str | StudyDesign,
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
    missed_hazard: float | None = None,
    false_alarm: float | None = None,
    fixed: float = 0.0,
    prior: EffectPrior | None = None,
) -> Audit:
    """Audit a protocol given its size, or the target power it was sized for.

    Exactly one of ``power`` and ``n_per_group`` is given.  The implied cost
    ratio refers to a constant missed-hazard cost at ``effect`` (the effect
    the protocol was sized for).  Give ``missed_hazard`` and ``false_alarm``
    (with ``fixed`` study costs and an effect ``prior``, a point at
    ``effect`` by default) to judge the protocol by its own costs: its
    expected loss, its regret against the loss-optimal design and the net
    benefit of running it.

    Examples
    --------
    A usage example, not a check (the tests check audits against finite
    differences of the power and against Bayes' rule):

    >>> a = audit("cohort-rate", baseline=1e-3, alpha=0.05, effect=2.0, p_harm=0.1,
    ...           per_subject=100.0, power=0.8, years=5.0, test="normal")
    >>> a.n_per_group, round(a.implied_cost_ratio, 2)
    (3574, 3.52)
    """
    p_harm, per_subject = _checked_judgments(power, n_per_group, p_harm, per_subject, missed_hazard, false_alarm)
    sol, study = _solved_protocol(
        design, baseline, alpha, effect, power, n_per_group, allocation, years, sides, test, continuity
    )
    model = _unit_cost_model(study, effect, p_harm, per_subject)
    implied = _implied_costs(model, sol, alpha, p_harm, per_subject)
    detect = {f"{lv:g}": _detect(get_design(design), sol, lv) for lv in DETECTION_LEVELS}
    rule = decision_rule(model.setting, float(sol.n_per_group), alpha, exact=sol.test == "exact", effect=effect)
    losses = None
    if missed_hazard is not None and false_alarm is not None:
        costs = Consequences(false_alarm=false_alarm, per_subject=per_subject, fixed=fixed, missed_hazard=missed_hazard)
        stated = Problem(study, prior or EffectPrior.point(effect), p_harm, costs)
        losses = _protocol_losses(stated, alpha, sol.n_per_group, test)
    return _audit_of(design, sol, sides, alpha, effect, p_harm, per_subject, implied, detect, rule, prior, losses)


@dataclass(frozen=True)
class _Implied:
    """The costs at which a protocol's alpha and size would be loss-optimal (in the unit of ``per_subject``)."""

    cost_ratio: float | None
    cost_ratio_range: tuple[float, float] | None
    marginal_power_per_subject: float
    missed_hazard: float | None
    false_alarm: float | None
    warnings: tuple[str, ...]


def _checked_judgments(
    power: float | None,
    n_per_group: int | None,
    p_harm: float,
    per_subject: float,
    missed_hazard: float | None,
    false_alarm: float | None,
) -> tuple[float, float]:
    """Check that the audit is asked one question, and return ``p_harm`` and ``per_subject`` as floats."""
    if (power is None) == (n_per_group is None):
        raise DecideError(
            "give exactly one of power and n_per_group (the size, or the power it was chosen for)",
            ("power", "n_per_group"),
        )
    p_harm = float(_checks.probability("p_harm", _checks.scalar("p_harm", p_harm)))
    per_subject = float(_checks.cost("per_subject", _checks.scalar("per_subject", per_subject)))
    if (missed_hazard is None) != (false_alarm is None):
        raise DecideError(
            "give both missed_hazard and false_alarm (the protocol's costs), or neither",
            ("missed_hazard", "false_alarm"),
        )
    return p_harm, per_subject


def _solved_protocol(
    design: str | StudyDesign,
    baseline: float,
    alpha: float,
    effect: float,
    power: float | None,
    n_per_group: int | None,
    allocation: float | None,
    years: float | None,
    sides: int,
    test: str,
    continuity: bool,
) -> tuple[Solution, Study]:
    """The protocol solved for its power (or size), and its study with the test that ran."""
    sol = solve(
        design,
        baseline=baseline,
        alpha=alpha,
        power=power,
        n_per_group=n_per_group,
        effect=effect,
        allocation=allocation,
        years=years,
        sides=sides,
        test=test,
        continuity=continuity,
    )
    exact = sol.test == "exact"
    study = Study(design, baseline, sol.allocation, sol.years, sides, "exact" if exact else "normal", continuity)
    return sol, study


def _unit_cost_model(study: Study, effect: float, p_harm: float, per_subject: float) -> LossModel:
    """The loss model of the protocol's study at its effect, with unit missed-hazard and false-alarm costs."""
    problem = Problem(
        study,
        EffectPrior.point(effect),
        p_harm,
        Consequences(false_alarm=1.0, per_subject=per_subject, missed_hazard=1.0),
    )
    return build_model(problem)


def _implied_costs(model: LossModel, sol: Solution, alpha: float, p_harm: float, per_subject: float) -> _Implied:
    """The cost ratio at which the protocol's alpha is loss-optimal, and the missed-hazard cost its size reflects.

    At a loss-optimal size one more subject costs what it saves:
    ``M = per_subject * (1 + allocation) / (p_harm * dPower/dn)``; with the
    implied ratio this also implies a false-alarm cost.
    """
    as_is = Policy("protocol", "Protocol", "", "fixed", "largest-allowed", alpha=alpha)
    n = float(sol.n_per_group)
    ch = choose_tests(model, as_is, np.array([n]))
    warnings: list[str] = list(sol.warnings)
    rng: tuple[float, float] | None
    if sol.test == "exact":
        found = implied_ratio_exact(model, n, ch.chars.at(0))
        rng = None if found is None else (found.low, found.high)
        ratio = None if found is None else found.point
        slope = _exact_slope(model, alpha, n)
        warnings.append(
            "exact power saw-tooths in size: the marginal power is the slope of a line "
            "fitted to exact power over sizes within 10% of the protocol's"
        )
    else:
        rng = None
        ratio = implied_ratio_normal(model, n, float(ch.z[0]))
        slope = _normal_slope(model, n, float(ch.z[0]))
    per_n = 1.0 + (sol.n_total - sol.n_per_group) / sol.n_per_group
    implied_missed = per_subject * per_n / (p_harm * slope) if slope > 0 and per_subject > 0 else None
    implied_false_alarm = implied_missed / ratio if implied_missed is not None and ratio else None
    return _Implied(ratio, rng, slope, implied_missed, implied_false_alarm, tuple(warnings))


def _audit_of(
    design: str | StudyDesign,
    sol: Solution,
    sides: int,
    alpha: float,
    effect: float,
    p_harm: float,
    per_subject: float,
    implied: _Implied,
    detect: dict[str, float | None],
    rule: DecisionRule,
    prior: EffectPrior | None,
    losses: ProtocolLosses | None,
) -> Audit:
    """The audit from its parts, with the probability of harm after each result by Bayes' rule."""
    neg = p_harm * sol.beta + (1 - p_harm) * (1 - sol.attained_alpha)
    pos = p_harm * sol.power + (1 - p_harm) * sol.attained_alpha
    return Audit(
        design=sol.design,
        test=sol.test,
        method=sol.method,
        sides=sides,
        alpha=alpha,
        attained_alpha=sol.attained_alpha,
        power=sol.power,
        beta=sol.beta,
        effect=effect,
        n_per_group=sol.n_per_group,
        n_total=sol.n_total,
        p_harm=p_harm,
        per_subject=per_subject,
        implied_cost_ratio=implied.cost_ratio,
        implied_cost_ratio_range=implied.cost_ratio_range,
        marginal_power_per_subject=implied.marginal_power_per_subject,
        implied_missed_hazard=implied.missed_hazard,
        implied_false_alarm=implied.false_alarm,
        # None where that result cannot happen (a study too small ever to be significant)
        p_harm_given_negative=p_harm * sol.beta / neg if neg > 0 else None,
        p_harm_given_positive=p_harm * sol.power / pos if pos > 0 else None,
        detectable_effects=detect,
        rules_out=_rules_out(detect, effect, get_design(design).effect_name),
        warnings=implied.warnings,
        rule=rule,
        prior=None if prior is None else prior.describe(),
        losses=losses,
    )


def _protocol_losses(problem: Problem, alpha: float, n: int, test: str) -> ProtocolLosses:
    """The protocol's expected loss by its stated costs, and the loss-optimal design beside it."""
    capped = Problem(
        problem.study,
        problem.effect,
        problem.p_harm,
        problem.consequences,
        Constraints(max_n_per_group=n, min_n_per_group=n),
    )
    protocol = _decide_policy(
        capped, Policy("protocol", "Protocol", "The protocol as it stands.", "fixed", "largest-allowed", alpha=alpha)
    )
    s = problem.study
    best = _optimize(
        Problem(
            Study(s.design, s.baseline, s.allocation, s.years, s.sides, test, s.continuity),
            problem.effect,
            problem.p_harm,
            problem.consequences,
        )
    )
    assert protocol.expected_loss is not None and protocol.loss_parts is not None
    assert protocol.net_benefit is not None
    study = best.action == "study" and best.expected_loss is not None
    best_loss = float(best.expected_loss) if study and best.expected_loss is not None else best.no_study_loss
    action = "study" if study else best.no_study_action
    c = problem.consequences
    assert c.missed_hazard is not None
    return ProtocolLosses(
        missed_hazard=c.missed_hazard,
        false_alarm=c.false_alarm,
        fixed=c.fixed,
        expected_loss=protocol.expected_loss,
        loss_parts=protocol.loss_parts,
        no_study=protocol.no_study,
        net_benefit=protocol.net_benefit,
        regret=protocol.expected_loss - best_loss,
        stated_cost_ratio=protocol.stated_cost_ratio,
        optimal_action=action,
        optimal_n_per_group=best.n_per_group if study else None,
        optimal_alpha=best.rule.cutoff_shown if study and best.rule is not None else None,
        optimal_test=best.test if study else None,
        optimal_expected_loss=best_loss,
    )


def _normal_slope(model: LossModel, n: float, z: float) -> float:
    """Marginal power per subject of the normal test: a central difference over 0.1 % of the size."""
    h = max(1e-3 * n, 1e-3)
    c = normal_at(model, np.array([n - h, n + h]), np.full(2, z))
    return float((c.design_power[1] - c.design_power[0]) / (2 * h))


def _exact_slope(model: Any, alpha: float, n: float) -> float:
    """Marginal power per subject of the exact test: the slope of a line fitted over sizes within 10 %."""
    s = model.setting
    sizes = np.unique(np.round(np.linspace(0.9 * n, 1.1 * n, 21)))
    sizes = sizes[sizes >= 1]
    if sizes.size < 2:
        sizes = np.array([n, n + 1.0])
    res = evaluate(s, np.asarray(alpha), sizes, np.asarray(float(model.effects[-1])))
    return float(np.polyfit(sizes, res.power, 1)[0])


def _detect(design: StudyDesign, sol: Solution, level: float) -> float | None:
    if level <= sol.alpha:
        return None
    allocation, years = design.applicable(sol.allocation, sol.years)
    try:
        return solve(
            design,
            baseline=sol.baseline,
            alpha=sol.alpha,
            power=level,
            n_per_group=sol.n_per_group,
            allocation=allocation,
            years=years,
            sides=sol.sides,
            test=sol.test.replace("normal-cc", "normal"),
            continuity=sol.test == "normal-cc",
        ).effect
    except DecideError:
        return None


def _rules_out(detect: dict[str, float | None], effect: float, effect_name: str) -> str:
    """What the study's power says about effects it could miss, as power statements only."""
    hi, mid, lo = detect.get("0.95"), detect.get("0.8"), detect.get("0.5")
    an = "an" if effect_name[0] in "aeiou" else "a"
    parts = []
    if mid is not None:
        parts.append(
            f"A study this size would have detected {an} {effect_name} of {mid:.3g} with 80% power"
            + (f", and one of {hi:.3g} with 95% power." if hi is not None else ".")
        )
    elif hi is not None:
        parts.append(f"A study this size would have detected {an} {effect_name} of {hi:.3g} with 95% power.")
    if lo is not None:
        parts.append(
            f"Against {an} {effect_name} below {lo:.3g} its power is under 50%: such an effect would "
            "be missed more often than detected, so a negative result says little about it."
        )
    if lo is not None and effect < lo:
        parts.append(f"That includes the protocol's own {effect_name} of {effect:.3g}.")
    return " ".join(parts)
