"""Apply policies to a problem: the decision each implies, and deciding now beside them.

:func:`decide_policy` applies one :class:`~decide.decision.policies.Policy`
to a :class:`~decide.decision.problem.Problem`; :func:`optimize` is the
loss-optimal policy; :func:`compare` applies several side by side, with the
two actions that need no study (flag now, clear now), and measures each
policy's regret against the best of all of them.

The size rule (:mod:`.sizes`) picks the size; at every size the policy's
alpha rule (:mod:`.rules`) picks the test; :mod:`.implied` says what the
chosen test implies.  Results are facts (which action, which numbers); the
sentences for people are composed in :mod:`decide.report`.

References
----------
.. [1] Berger, J. O. (1985). *Statistical Decision Theory and Bayesian
   Analysis*, 2nd ed., Springer, sec. 4.4.3.
.. [2] Raiffa, H. and Schlaifer, R. (1961). *Applied Statistical Decision
   Theory*. Harvard University Press (the value of sample information;
   from memory).
.. [3] Willan, A. R. and Pinto, E. M. (2005). *Stat. Med.* 24, 1791-1806
   (expected net benefit of sampling).
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field, replace
from typing import Literal, overload

import numpy as np

from .._results import PlainData
from ..designs import AUTO_EXACT_BELOW, EXACT_UP_TO
from ..engine.rule import DecisionRule, decision_rule
from ..engine.selection import smallest_count
from .choice import choose_tests
from .implied import detectable_effect, implied_ratio_exact, implied_ratio_normal
from .loss import LossModel, OperatingPoint, build_model, settle
from .policies import LOSS_OPTIMAL, Policy, check_policies
from .problem import Problem, check_problem
from .rules import OK
from .sizes import REASONS, pick_size

Action = Literal["study", "flag-now", "clear-now", "not-available"]
NoStudyAction = Literal["flag-now", "clear-now"]


@dataclass(frozen=True)
class Decision(PlainData):
    """What a policy chooses for a problem, and what that choice implies.

    Costs are in the scenario's unit.  ``action`` is ``study`` when the
    policy's study is worth its cost, the better no-study action
    (``flag-now`` or ``clear-now``) when it is not, and ``not-available``
    when no size within the constraints meets the policy; the numbers of the
    study it would need are kept where there is one.  ``beta`` and ``power``
    are averaged over the effect prior; ``power_at_design_effect`` is at the
    design effect (the point effect or the prior median).
    ``implied_cost_ratio`` is the ratio of expected missed-hazard cost to
    false-alarm cost at which the chosen alpha would be loss-optimal for the
    chosen size; for an exact test that is a range, ``implied_cost_ratio_range``
    (low, high), and ``implied_cost_ratio`` its geometric middle.
    ``regret`` is set by :func:`compare`.  ``rule`` states the chosen test in
    counts (:class:`~decide.engine.rule.DecisionRule`); for a normal test
    ``attained_alpha`` is the normal approximation's level, which the loss
    uses, and ``rule.false_alarm`` its real false-alarm probability under the
    exact law of the counts.
    """

    policy: str
    title: str
    summary: str
    feasible: bool
    action: Action
    reason: str | None
    design: str
    sides: int
    design_effect: float
    stated_cost_ratio: float | None
    no_study: dict[str, float]
    no_study_action: NoStudyAction
    no_study_loss: float
    test: str | None = None
    method: str | None = None
    alpha: float | None = None
    attained_alpha: float | None = None
    beta: float | None = None
    power: float | None = None
    power_at_design_effect: float | None = None
    n_per_group: int | None = None
    n_total: int | None = None
    expected_loss: float | None = None
    loss_parts: dict[str, float] | None = None
    net_benefit: float | None = None
    p_harm_given_negative: float | None = None
    p_harm_given_positive: float | None = None
    detectable_effect: float | None = None
    implied_cost_ratio: float | None = None
    implied_cost_ratio_range: tuple[float, float] | None = None
    regret: float | None = None
    warnings: tuple[str, ...] = field(default=())
    rule: DecisionRule | None = None


def _approximation_notes(model: LossModel, n: float, exact: bool) -> list[str]:
    """A note where the normal test runs on few expected cases, or exact gave way to normal."""
    s = model.setting
    smallest = float(smallest_count(s, n, model.effects[-1]))
    if not exact and smallest < AUTO_EXACT_BELOW:
        return [
            f"normal approximation with as few as {smallest:.3g} expected in a cell (below "
            f"{AUTO_EXACT_BELOW:g}); the exact test is safer here"
        ]
    if not exact and s.test == "exact":
        return [
            f"exact test requested, but every cell expects more than {EXACT_UP_TO:g}: the normal "
            "approximation was used, which agrees closely there"
        ]
    return []


def _starting_point(model: LossModel, policy: Policy, reason: str | None) -> Decision:
    """The facts every decision carries, before a study is looked at."""
    p = model.problem
    better: NoStudyAction = "flag-now" if model.flag_now < model.clear_now else "clear-now"
    false_alarm = p.consequences.false_alarm
    return Decision(
        policy=policy.name,
        title=policy.title,
        summary=policy.summary,
        feasible=False,
        action="not-available",
        reason=reason,
        design=model.setting.design.name,
        sides=model.setting.sides,
        design_effect=p.effect.median,
        # no finite ratio when a false alarm costs nothing: None, which the report puts in words
        stated_cost_ratio=float(model.expected_missed / false_alarm) if false_alarm > 0 else None,
        no_study={"flag_now": model.flag_now, "clear_now": model.clear_now},
        no_study_action=better,
        no_study_loss=min(model.flag_now, model.clear_now),
    )


def _test_name(model: LossModel, exact: bool) -> tuple[str, str]:
    """The test's short name and its method, in the design's words."""
    d, cc = model.setting.design, model.setting.continuity
    if exact:
        return "exact", d.exact_method + d.describe_settings()
    normal = d.normal_method + d.describe_settings() + (", continuity-corrected" if cc else "")
    return ("normal-cc" if cc else "normal"), normal


def _implied(
    model: LossModel, n: float, exact: bool, z: float, c: OperatingPoint
) -> tuple[float | None, tuple[float, float] | None]:
    """The implied cost ratio, and for an exact test the range (low, high) it stands for."""
    if not exact:
        return implied_ratio_normal(model, n, z), None
    found = implied_ratio_exact(model, n, c)
    return (None, None) if found is None else (found.point, (found.low, found.high))


def _study_facts(model: LossModel, policy: Policy, n: float, start: Decision) -> Decision:
    """The decision at size ``n``: the test, its errors, its loss and what it implies."""
    p = model.problem
    ch = choose_tests(model, policy, np.array([n]))
    c, exact, code = ch.chars.at(0), bool(ch.exact[0]), int(ch.code[0])
    reason = start.reason or (None if code == OK else REASONS[code])
    study = float(model.study_cost(np.asarray(n)))
    accurate = settle(model, n, exact, float(ch.z[0]), c.nominal)
    missed = p.p_harm * accurate.missed
    false_alarm = (1 - p.p_harm) * p.consequences.false_alarm * c.attained
    loss = missed + false_alarm + study
    beta = 1 - accurate.power
    neg = p.p_harm * beta + (1 - p.p_harm) * (1 - c.attained)
    pos = p.p_harm * accurate.power + (1 - p.p_harm) * c.attained
    net = start.no_study_loss - loss
    action: Action = "not-available" if reason is not None else ("study" if net > 0 else start.no_study_action)
    test, method = _test_name(model, exact)
    ratio, ratio_range = _implied(model, n, exact, float(ch.z[0]), c)
    return replace(
        start,
        feasible=reason is None,
        action=action,
        reason=reason,
        test=test,
        method=method,
        alpha=c.nominal,
        attained_alpha=c.attained,
        beta=beta,
        power=accurate.power,
        power_at_design_effect=c.design_power,
        n_per_group=int(n),
        n_total=int(model.n_total(np.asarray(n))),
        expected_loss=loss,
        loss_parts={"missed": missed, "false_alarm": false_alarm, "study": study},
        net_benefit=net,
        p_harm_given_negative=p.p_harm * beta / neg if neg > 0 else None,
        p_harm_given_positive=p.p_harm * accurate.power / pos if pos > 0 else None,
        detectable_effect=detectable_effect(model, c.nominal, n, exact),
        warnings=(*model.notes, *_approximation_notes(model, n, exact)),
        implied_cost_ratio=ratio,
        implied_cost_ratio_range=ratio_range,
        rule=decision_rule(model.setting, n, c.nominal, exact=exact, effect=float(model.effects[-1])),
    )


def decide_policy(problem: Problem | LossModel, policy: Policy) -> Decision:
    """Apply one policy to a problem.

    Parameters
    ----------
    problem : Problem or LossModel
    policy : Policy

    Returns
    -------
    Decision
        ``feasible`` is False (``action`` ``not-available``), with a
        ``reason``, when no size within the constraints meets the policy;
        where a size beyond them would, its numbers are still given.
    """
    if not isinstance(problem, LossModel):
        check_problem(problem)
    check_policies([policy])
    model = problem if isinstance(problem, LossModel) else build_model(problem)
    pick = pick_size(model, policy)
    start = _starting_point(model, policy, pick.reason)
    if pick.n is None:
        return start
    return _study_facts(model, policy, pick.n, start)


def optimize(problem: Problem) -> Decision:
    """The loss-optimal alpha and size (see :func:`decide_policy`).

    Examples
    --------
    Usage example (the numbers are checked in the tests, not here):

    >>> from decide.decision.problem import Problem, Study, Consequences
    >>> from decide.decision.prior import EffectPrior
    >>> prob = Problem(Study("reference-rate", 2e-4, years=5.0), EffectPrior.point(2.0), 0.3,
    ...                Consequences(false_alarm=1e6, per_subject=20.0, missed_hazard=1e8))
    >>> d = optimize(prob)
    >>> d.action, d.test, d.n_per_group, round(d.alpha, 3), d.net_benefit > 0
    ('study', 'normal', 18884, 0.225, True)
    """
    return decide_policy(problem, LOSS_OPTIMAL)


@dataclass(frozen=True)
class Comparison(PlainData):
    """Policies side by side with the two actions that need no study.

    Iterating over a comparison gives its decisions.  ``best_action`` is the
    action of least expected loss among every available study and deciding
    now (``study``, ``flag-now`` or ``clear-now``); ``best_policy`` names the
    policy whose study that is (``None`` for a no-study action) and
    ``best_loss`` its expected loss.  Each available decision's ``regret`` is
    its expected loss less ``best_loss``; a policy that is not available has
    none.
    """

    decisions: tuple[Decision, ...]
    flag_now: float
    clear_now: float
    best_action: Literal["study", "flag-now", "clear-now"]
    best_policy: str | None
    best_loss: float

    def __iter__(self) -> Iterator[Decision]:
        return iter(self.decisions)

    def __len__(self) -> int:
        return len(self.decisions)

    @overload
    def __getitem__(self, i: int) -> Decision: ...
    @overload
    def __getitem__(self, i: slice) -> tuple[Decision, ...]: ...
    def __getitem__(self, i: int | slice) -> Decision | tuple[Decision, ...]:
        return self.decisions[i]


def _best_study(best: Decision, decisions: Sequence[Decision]) -> Decision | None:
    """The study to beat: the loss-optimal one if available, else the best available of the rest."""
    if best.feasible:
        return best
    available = [d for d in decisions if d.feasible and d.expected_loss is not None]
    return min(available, key=lambda d: float(d.expected_loss or 0.0), default=None)


def compare(problem: Problem, policies: Sequence[Policy]) -> Comparison:
    """Apply each policy, and set every one beside deciding now without a study.

    Regret is each available policy's extra expected loss over the best of
    all actions: the loss-optimal study, or flagging or clearing now, if one
    of those costs less.
    """
    check_problem(problem)
    check_policies(policies)
    model = build_model(problem)
    best = decide_policy(model, LOSS_OPTIMAL)
    decisions = [best if pol == LOSS_OPTIMAL else decide_policy(model, pol) for pol in policies]
    study = _best_study(best, decisions)
    options: list[tuple[float, Literal["study", "flag-now", "clear-now"], str | None]] = [
        (model.flag_now, "flag-now", None),
        (model.clear_now, "clear-now", None),
    ]
    if study is not None and study.expected_loss is not None:
        options.insert(0, (study.expected_loss, "study", study.policy))
    best_loss, action, name = min(options, key=lambda o: o[0])
    out = tuple(
        replace(d, regret=d.expected_loss - best_loss if d.feasible and d.expected_loss is not None else None)
        for d in decisions
    )
    return Comparison(
        decisions=out,
        flag_now=model.flag_now,
        clear_now=model.clear_now,
        best_action=action,
        best_policy=name,
        best_loss=best_loss,
    )
