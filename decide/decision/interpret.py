"""Read a finished study's counts under the chosen policies, and say what they rule out.

:func:`interpret` takes a :class:`~decide.decision.problem.Problem` and the
observed counts of its design and returns an :class:`Interpretation`:

* the estimate of the ratio and an exact confidence interval: exact
  conditional (Clopper-Pearson) for two person-time groups, exact Poisson
  (Garwood) for the reference-rate design, exact conditional (inverting
  Fisher's noncentral hypergeometric law) for two risk groups and for
  case-control, exact conditional binomial on the discordant pairs for 1:1
  matched pairs (the exact McNemar test).  The interval is not mid-p: it inverts the very test the
  verdicts use.  For the risk ratio of a cohort the odds-ratio interval is
  carried to the risk-ratio scale at the scenario's baseline risk;
* the exact one-sided p-value (harm), the mid-p-value beside it, and the
  normal statistic of the design (McNemar's for matched pairs);
* the verdict (flag or clear) under each policy's test and threshold
  (:func:`policy_verdict`, the one place that applies a policy to data);
* the posterior probability of harm given the data, under the scenario's
  prior on harm and on the effect (a lognormal effect truncated to ratios
  above 1 and renormalised), with the exact likelihood of
  :mod:`decide.decision.observed`;
* the expected loss of flagging and of clearing given the data, and the
  action that minimises it (the Bayes action);
* the largest ratio the data are compatible with (the interval's upper end),
  and the ratio the study had 80% power to detect.

References
----------
.. [1] Clopper, C. J. and Pearson, E. S. (1934). *Biometrika* 26, 404-413.
.. [2] Garwood, F. (1936). Fiducial limits for the Poisson distribution.
   *Biometrika* 28, 437-442.
.. [3] Cornfield, J. (1956). A statistical problem arising from retrospective
   studies. *Proc. Third Berkeley Symp.* 4, 135-148 (the exact conditional
   interval for the odds ratio).
.. [4] Breslow, N. E. and Day, N. E. (1987). *Statistical Methods in Cancer
   Research, vol. II*. IARC Scientific Publications 82, ch. 2 and 3.
.. [5] Berger, J. O. (1985). *Statistical Decision Theory and Bayesian
   Analysis*, 2nd ed., Springer, sec. 4.4 (the Bayes action minimises the
   posterior expected loss).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
from scipy import optimize as _opt
from scipy import special

from .._results import PlainData
from ..designs import get_design
from ..designs._base import FloatArray
from ..engine.exact import REL_TOL
from ..engine.selection import uses_exact
from ..engine.study import check_setting
from ..errors import DecideError
from .implied import _detectable
from .observed import (
    Counts,
    fisher_log_pmf,
    fisher_support,
    log_likelihood,
    lower_tail,
    point_mass,
    reader_for,
    reader_of,
    upper_tail,
)
from .optimize import Decision, compare
from .policies import LOSS_OPTIMAL, Policy
from .prior import REACH, composite_rule
from .problem import Problem

Verdict = Literal["flag", "clear"]
#: Power at which the detectable ratio is reported.
DETECT_POWER = 0.8
#: Subjects standing for person-time when a rate study's detectable ratio is solved.
_PT_SUBJECTS = 10**6
_METHODS = {
    "cohort-risk": "risk ratio of the observed risks; exact conditional interval for the odds ratio (Fisher's "
    "noncentral hypergeometric), carried to the risk ratio at the scenario's baseline risk; "
    "Fisher's exact test",
    "case-control": "exact conditional interval for the odds ratio (Fisher's noncentral hypergeometric), "
    "conditional maximum-likelihood estimate; Fisher's exact test",
    "cohort-rate": "exact conditional binomial interval (Clopper-Pearson) for the rate ratio given "
    "the total cases; exact conditional binomial test",
    "reference-rate": "exact Poisson interval (Garwood) for the standardised incidence ratio; exact Poisson test",
    "matched-case-control": "exact conditional binomial interval (Clopper-Pearson) for the odds ratio given the "
    "discordant pairs, conditional maximum-likelihood estimate; exact McNemar test",
}


@dataclass(frozen=True)
class Evidence:
    """What one set of counts says, test by test: the inputs a verdict needs.

    ``p_upper`` and ``p_lower`` are the exact one-sided p-values towards
    harm and away from it, ``p_mid`` the one-sided mid-p-value
    ``P(X > x) + P(X = x) / 2`` (shown beside the exact one; verdicts use
    the exact one, the test the policies were chosen for); ``z`` is the design's normal statistic (``inf``
    or ``-inf`` where an estimate is infinite or zero), ``z_cc`` the same
    with the continuity correction (two-proportion designs).
    """

    p_upper: float
    p_lower: float
    p_mid: float
    z: float
    z_cc: float


@dataclass(frozen=True)
class PolicyVerdict(PlainData):
    """The verdict of one policy's test on the data.

    ``verdict`` is ``None`` where the policy names no test (no size meets it
    and none beyond the limits would).  ``alpha`` is the policy's nominal
    cut-off and ``attained_alpha`` the false-alarm probability of its test
    at the planned size; ``alpha_shown`` is the cut-off as the policy's
    decision rule shows it (rounded into the interval of alphas that flag
    the same counts, :class:`~decide.engine.rule.DecisionRule`), so that the
    verdicts and the plan print the same number.  ``available`` is False
    where the policy's study could not be met within the constraints.
    """

    policy: str
    title: str
    available: bool
    test: str | None
    alpha: float | None
    attained_alpha: float | None
    verdict: Verdict | None
    alpha_shown: str | None = None


@dataclass(frozen=True)
class Interpretation(PlainData):
    """A finished study read against a scenario.

    Ratios are in the design's terms (``effect_name``); ``method`` names the
    interval and test.  ``estimate`` is ``None`` where it is infinite or
    undefined (no case in the comparison group).  ``ci_low`` and ``ci_high``
    bound the exact two-sided interval at ``confidence``; ``ci_high`` is
    ``inf`` where the data set no upper limit (no case in the comparison
    group, or none at all).  ``excludes_above`` is ``ci_high``: ratios above
    it are ruled out at that confidence.  ``p_value`` is the exact one-sided
    p-value (harm), ``p_value_two_sided`` the central two-sided one,
    ``p_value_mid`` the one-sided mid-p-value, ``statistic`` the design's
    normal statistic.  ``verdicts`` hold each policy's verdict and
    ``loss_optimal_verdict`` the loss-optimal policy's.  ``posterior_harm``
    is ``P(harm | data)`` (``prior_harm`` before); ``loss_flag`` and
    ``loss_clear`` are the posterior expected losses and ``recommendation``
    the action of the smaller (``clear`` on a tie).  ``detectable`` is the
    ratio the study as done had ``detect_power`` power to detect at
    ``detect_alpha`` (the loss-optimal policy's alpha; 0.05 where it has
    none), ``None`` if no ratio within the design's range;
    ``detect_alpha_shown`` is that alpha as the policy's decision rule shows
    it (as in :class:`PolicyVerdict`).
    """

    design: str
    effect_name: str
    method: str
    observed: dict[str, float]
    confidence: float
    estimate: float | None
    ci_low: float
    ci_high: float
    p_value: float
    p_value_two_sided: float
    p_value_mid: float
    statistic: float
    posterior_harm: float
    loss_flag: float
    loss_clear: float
    recommendation: Verdict
    verdicts: tuple[PolicyVerdict, ...]
    loss_optimal_verdict: Verdict | None
    excludes_above: float
    detectable: float | None
    detect_alpha: float
    detect_power: float
    prior_harm: float
    sides: int
    warnings: tuple[str, ...] = field(default=())
    detect_alpha_shown: str | None = None


# --------------------------------------------------------------------------
# intervals and estimates


def _law_interval(c: Counts, confidence: float) -> tuple[float, float]:
    """Equal-tailed exact interval for the law's parameter (rate ratio, SIR or odds ratio)."""
    tail = (1 - confidence) / 2
    if c.law == "poisson":
        low = special.gammaincinv(c.x1, tail) / c.size1 if c.x1 > 0 else 0.0
        return float(low), float(special.gammaincinv(c.x1 + 1, 1 - tail) / c.size1)
    if c.law == "binomial":
        assert c.size0 is not None and c.x0 is not None
        if c.total == 0:
            return 0.0, np.inf
        lo = special.betaincinv(c.x1, c.x0 + 1, tail) if c.x1 > 0 else 0.0
        hi = special.betaincinv(c.x1 + 1, c.x0, 1 - tail) if c.x0 > 0 else 1.0
        odds = c.size0 / c.size1
        return float(lo / (1 - lo) * odds), float(hi / (1 - hi) * odds) if hi < 1 else np.inf
    x = fisher_support(c)
    low = 0.0 if c.x1 <= x[0] else _fisher_root(c, tail, upper=True)
    high = np.inf if c.x1 >= x[-1] else _fisher_root(c, tail, upper=False)
    return low, high


def _fisher_root(c: Counts, tail: float, upper: bool) -> float:
    """The odds ratio at which ``P(X >= x1)`` (``upper``) or ``P(X <= x1)`` equals ``tail``."""
    x = fisher_support(c)
    keep = x >= c.x1 if upper else x <= c.x1

    def gap(log_psi: float) -> float:
        mass = np.exp(fisher_log_pmf(c, np.asarray(log_psi)))[keep].sum()
        return float(np.log(max(mass, 1e-300)) - np.log(tail))

    lo, hi = -50.0, 50.0
    return float(np.exp(_opt.brentq(gap, lo, hi, xtol=1e-13, rtol=1e-13)))


def _estimate(c: Counts) -> float | None:
    """The ratio's point estimate; ``None`` where it is 0/0 or infinite."""
    if c.law == "poisson":
        return c.x1 / c.size1
    assert c.x0 is not None and c.size0 is not None
    if reader_of(c.design).conditional_estimate:
        return _conditional_mle(c)
    if c.x0 == 0:  # infinite, or 0/0 with no case at all
        return None
    return (c.x1 / c.size1) / (c.x0 / c.size0)


def _conditional_mle(c: Counts) -> float | None:
    """Conditional maximum-likelihood odds ratio: the mean of Fisher's law equals ``x1``."""
    x = fisher_support(c)
    if x.size == 1 or c.x1 >= x[-1]:
        return None
    if c.x1 <= x[0]:
        return 0.0

    def gap(log_psi: float) -> float:
        return float(np.exp(fisher_log_pmf(c, np.asarray(log_psi))) @ x - c.x1)

    return float(np.exp(_opt.brentq(gap, -50.0, 50.0, xtol=1e-13, rtol=1e-13)))


# --------------------------------------------------------------------------
# the evidence a test reads


def _normal_statistics(c: Counts) -> tuple[float, float]:
    """The design's normal statistic, and with the continuity correction.

    Two proportions: ``(p1 - p0) / sqrt(pbar qbar (1/n1 + 1/n0))``, the
    correction ``(1/n1 + 1/n0) / 2`` taken off the difference; rates: the log
    rate ratio over its null standard error at the total count; reference
    rate: ``2 (sqrt(O) - sqrt(E))``; a design whose reader has its own
    statistic (McNemar's for matched pairs) uses it.  Where there is no
    spread (no case at all, or every subject a case) the statistic is 0.
    """
    own = reader_of(c.design).statistic
    if own is not None:
        return own(c)
    if c.law == "poisson":
        z = 2 * (np.sqrt(c.x1) - np.sqrt(c.size1))
        return float(z), float(z)
    assert c.x0 is not None and c.size0 is not None
    if c.law == "binomial":
        if c.total == 0:
            return 0.0, 0.0
        share = c.size1 / (c.size1 + c.size0)
        with np.errstate(divide="ignore"):
            log_ratio = np.log(c.x1 / c.size1) - np.log(c.x0 / c.size0)
        z = float(log_ratio * np.sqrt(c.total * share * (1 - share)))
        return z, z
    pbar = c.total / (c.size1 + c.size0)
    inv = 1 / c.size1 + 1 / c.size0
    se = np.sqrt(pbar * (1 - pbar) * inv)
    if se == 0:
        return 0.0, 0.0
    diff = c.x1 / c.size1 - c.x0 / c.size0
    shrunk = np.sign(diff) * max(abs(diff) - inv / 2, 0.0)
    return float(diff / se), float(shrunk / se)


def evidence(c: Counts) -> Evidence:
    """Exact p-values and normal statistics of the counts (no effect as the null)."""
    z, z_cc = _normal_statistics(c)
    upper = upper_tail(c, 1.0)
    return Evidence(
        p_upper=upper, p_lower=lower_tail(c, 1.0), p_mid=max(0.0, upper - point_mass(c, 1.0) / 2), z=z, z_cc=z_cc
    )


def policy_verdict(d: Decision, ev: Evidence) -> Verdict | None:
    """Flag or clear under the policy's chosen test and threshold.

    Exact test: flag when the exact p-value (one-sided towards harm, or the
    central two-sided one with the data pointing to harm) is at most the
    policy's nominal alpha.  Normal test: flag when the design's normal
    statistic (continuity-corrected for ``normal-cc``) exceeds the critical
    value of the nominal alpha.
    """
    if d.test is None or d.alpha is None:
        return None
    if d.test == "exact":
        p = ev.p_upper if d.sides == 1 else min(1.0, 2 * min(ev.p_upper, ev.p_lower))
        harmful = d.sides == 1 or ev.p_upper < ev.p_lower
        return "flag" if harmful and p <= d.alpha * (1 + REL_TOL) else "clear"
    z = ev.z_cc if d.test == "normal-cc" else ev.z
    critical = -special.ndtri(d.alpha / d.sides)
    return "flag" if z > critical else "clear"


# --------------------------------------------------------------------------
# the posterior


@dataclass(frozen=True)
class Posterior:
    """``P(harm | data)`` and the posterior expected cost of a miss (given harm)."""

    p_harm: float
    missed_given_harm: float


def _effect_nodes(problem: Problem, c: Counts, panels: int) -> tuple[FloatArray, FloatArray]:
    """Ratios and prior weights integrating over the effect prior truncated to ratios above 1.

    Composite Gauss-Legendre in the prior's standard normal variable over
    where the prior times the likelihood is within ``exp(-60)`` of its
    largest value (found on a fine grid), so a sharp likelihood is not missed.
    """
    e = problem.effect
    setting = problem.study.setting()
    limit = float(setting.design.effect_limit(setting.baseline))
    lo = max(-REACH, -np.log(e.median) / e.log_sd)
    top = min(REACH + e.log_sd, np.log(limit * (1 - 1e-9) / e.median) / e.log_sd)
    grid = np.linspace(lo, top, 4001)
    score = -(grid**2) / 2 + log_likelihood_ratio(problem, c, e.median * np.exp(e.log_sd * grid))
    inside = np.flatnonzero(score > score.max() - 60)
    step = grid[1] - grid[0]
    a, b = max(lo, grid[inside[0]] - step), min(top, grid[inside[-1]] + step)
    u, w = composite_rule(a, b, panels)
    dens = w * np.exp(-u * u / 2) / np.sqrt(2 * np.pi)
    mass = special.ndtr(-lo) - special.ndtr(-top)  # prior mass of the truncated range
    return e.median * np.exp(e.log_sd * u), dens / mass


def log_likelihood_ratio(problem: Problem, c: Counts, ratio: FloatArray) -> FloatArray:
    """``log L(ratio) - log L(1)``: the exact (conditional) likelihood at the design's ratio."""
    reader = reader_of(c.design)
    baseline = float(problem.study.baseline)
    par = reader.to_law(np.asarray(ratio, dtype=np.float64), baseline)
    return np.asarray(log_likelihood(c, par) - log_likelihood(c, np.ones(1)), dtype=np.float64)


def posterior(problem: Problem, c: Counts) -> Posterior:
    """``P(harm | data)`` and ``E[M(theta) | data, harm]`` by quadrature over the effect prior.

    Point effect: ``p L(theta) / (p L(theta) + (1 - p) L(1))``.  Lognormal:
    ``L(theta) / L(1)`` is integrated over the truncated prior, doubling the
    panels until two results agree to 1e-10; sums are kept in logs so that
    decisive data neither overflow nor underflow.
    """
    p, cost = problem.p_harm, problem.consequences
    if problem.effect.is_point:
        theta = np.array([problem.effect.median])
        log_ratio = float(log_likelihood_ratio(problem, c, theta)[0])
        missed = float(cost.missed_cost(theta)[0])
    else:
        last = None
        for panels in (32, 64, 128, 256, 512):
            x, w = _effect_nodes(problem, c, panels)
            llr = log_likelihood_ratio(problem, c, x)
            top = float(llr.max())
            weights = w * np.exp(llr - top)
            now = np.array([weights.sum(), weights @ cost.missed_cost(x)])
            if last is not None and np.all(np.abs(now - last) <= 1e-10 * np.abs(now)):
                break
            last = now
        log_ratio = top + float(np.log(now[0]))
        missed = float(now[1] / now[0])
    # P(harm | data) = 1 / (1 + (1 - p) / (p LR)), in logs
    return Posterior(float(special.expit(log_ratio + np.log(p) - np.log1p(-p))), missed)


# --------------------------------------------------------------------------
# the whole reading


def _detectable_ratio(problem: Problem, c: Counts, alpha: float) -> float | None:
    """The ratio the study as done had :data:`DETECT_POWER` power to detect at ``alpha``.

    The study's test (normal or exact) is chosen by the scenario's rule at
    the observed size and the design effect.  Person-time is carried as
    ``10**6`` subjects followed for the matching years; a design whose
    reader reads the study's size its own way (every matched pair) uses it.
    """
    s = problem.study
    own = reader_of(c.design).study
    if own is not None:
        n, alloc, years = own(c)
    elif c.law == "poisson":
        n, alloc, years = _PT_SUBJECTS, None, c.size1 / (s.baseline * _PT_SUBJECTS)
    elif c.law == "binomial":
        assert c.size0 is not None
        n, alloc, years = _PT_SUBJECTS, c.size0 / c.size1, c.size1 / _PT_SUBJECTS
    else:
        assert c.size0 is not None
        n, alloc, years = int(c.size1), c.size0 / c.size1, None
    try:
        setting = check_setting(s.design, s.baseline, alloc, years, s.sides, s.test, s.continuity)
        exact = bool(uses_exact(setting, n, problem.effect.median))
        return _detectable(
            s.design, float(s.baseline), alloc, years, s.sides, s.continuity, float(alpha), n, exact, DETECT_POWER
        )
    except DecideError:
        return None


def _policy_verdicts(decisions: Sequence[Decision], ev: Evidence) -> tuple[PolicyVerdict, ...]:
    return tuple(
        PolicyVerdict(
            policy=d.policy,
            title=d.title,
            available=d.feasible,
            test=d.test,
            alpha=d.alpha,
            attained_alpha=d.attained_alpha,
            verdict=policy_verdict(d, ev),
            alpha_shown=None if d.rule is None else d.rule.cutoff_shown,
        )
        for d in decisions
    )


def read_counts(problem: Problem, observed: Mapping[str, float]) -> Counts:
    """Validate the observed counts against the problem's design."""
    return reader_for(problem.study.design, problem.study.allocation).read(observed, float(problem.study.baseline))


def interpret(
    problem: Problem,
    observed: Mapping[str, float] | Counts,
    policies: Sequence[Policy] = (LOSS_OPTIMAL,),
    confidence: float = 0.95,
) -> Interpretation:
    """Read a finished study's counts against a scenario.

    Parameters
    ----------
    problem : Problem
        The scenario the study was planned under.
    observed : mapping or Counts
        The design's observed counts (keys as in the ``[observed]`` table of
        a data file, e.g. ``cases_exposed``, ``n_exposed``, ``cases_unexposed``,
        ``n_unexposed`` for ``cohort-risk``).
    policies : sequence of Policy
        Policies whose verdicts are reported (as in :func:`compare`); the
        loss-optimal policy is always applied for ``loss_optimal_verdict``
        and ``detect_alpha``.
    confidence : float
        Confidence of the two-sided, equal-tailed interval.

    Returns
    -------
    Interpretation

    Raises
    ------
    DecideError
        If a count is negative, not whole, exceeds its group, or is not one
        of the design's; or ``confidence`` is not in (0, 1).

    Examples
    --------
    Usage example (an invented cohort against a reference rate, no case where
    1.5 were expected; a miss costs a hundred false alarms, so flagging still
    has the smaller expected loss; the numbers are checked in the tests):

    >>> from decide.decision.problem import Problem, Study, Consequences
    >>> from decide.decision.prior import EffectPrior
    >>> prob = Problem(Study("reference-rate", 2e-4, years=5.0), EffectPrior.point(2.0), 0.3,
    ...                Consequences(false_alarm=1e6, per_subject=20.0, missed_hazard=1e8))
    >>> r = interpret(prob, {"cases": 0, "expected": 1.5})
    >>> r.ci_low, round(r.excludes_above, 3), r.p_value, round(r.posterior_harm, 4), r.recommendation
    (0.0, 2.459, 1.0, 0.0873, 'flag')
    """
    c = _checked_counts(problem, observed, confidence)
    asked = list(policies)
    decisions = list(compare(problem, asked + ([] if LOSS_OPTIMAL in asked else [LOSS_OPTIMAL])))
    return interpret_planned(problem, c, decisions, len(asked), confidence)


def interpret_planned(
    problem: Problem,
    observed: Mapping[str, float] | Counts,
    decisions: Sequence[Decision],
    shown: int,
    confidence: float = 0.95,
) -> Interpretation:
    """Read a finished study's counts against decisions already made, as :func:`interpret` does.

    ``decisions`` are the policies' decisions on ``problem`` as
    :func:`~decide.decision.optimize.compare` returns them, the loss-optimal
    policy's among them; the first ``shown`` get a verdict.  A report that
    has compared the policies reads the data with this, so that the policies
    are not compared twice; :func:`interpret` is this after the comparison.

    Raises
    ------
    DecideError
        As :func:`interpret`; also if no decision is the loss-optimal policy's.
    """
    c = _checked_counts(problem, observed, confidence)
    best = next((d for d in decisions if d.policy == LOSS_OPTIMAL.name), None)
    if best is None:
        raise DecideError("decisions: the loss-optimal policy's decision is needed", ("decisions",))
    ev = evidence(c)
    verdicts = _policy_verdicts(list(decisions)[:shown], ev)
    return _reading(problem, c, confidence, ev, verdicts, best)


def _checked_counts(problem: Problem, observed: Mapping[str, float] | Counts, confidence: float) -> Counts:
    """The observed counts, read and checked against the problem's design, once ``confidence`` is checked."""
    if not 0 < confidence < 1:
        raise DecideError(f"confidence must be in (0, 1), but got {confidence:g}", ("confidence",))
    reader_for(problem.study.design, problem.study.allocation)
    c = observed if isinstance(observed, Counts) else read_counts(problem, observed)
    if c.design != get_design(problem.study.design).name:
        raise DecideError(
            f"observed: counts of the {c.design} design, but the scenario's design is "
            f"{get_design(problem.study.design).name}",
            ("observed",),
        )
    return c


def _reading(
    problem: Problem,
    c: Counts,
    confidence: float,
    ev: Evidence,
    verdicts: tuple[PolicyVerdict, ...],
    best: Decision,
) -> Interpretation:
    """The reading of the counts: estimate and interval, the posterior and the loss of each action, the verdicts."""
    post = posterior(problem, c)
    loss_flag = (1 - post.p_harm) * problem.consequences.false_alarm
    loss_clear = post.p_harm * post.missed_given_harm
    alpha = best.alpha if best.alpha is not None else 0.05
    low, high = _effect_interval(c, confidence, float(problem.study.baseline))
    return Interpretation(
        design=c.design,
        effect_name=problem.study.setting().design.effect_name,
        method=_METHODS[c.design],
        observed=dict(c.values),
        confidence=confidence,
        estimate=_estimate(c),
        ci_low=low,
        ci_high=high,
        p_value=ev.p_upper,
        p_value_two_sided=min(1.0, 2 * min(ev.p_upper, ev.p_lower)),
        p_value_mid=ev.p_mid,
        statistic=ev.z,
        posterior_harm=post.p_harm,
        loss_flag=loss_flag,
        loss_clear=loss_clear,
        recommendation="flag" if loss_flag < loss_clear else "clear",
        verdicts=verdicts,
        loss_optimal_verdict=policy_verdict(best, ev),
        excludes_above=high,
        detectable=_detectable_ratio(problem, c, alpha),
        detect_alpha=alpha,
        detect_alpha_shown=best.rule.cutoff_shown if best.alpha is not None and best.rule is not None else None,
        detect_power=DETECT_POWER,
        prior_harm=problem.p_harm,
        sides=problem.study.sides,
        warnings=_notes(c),
    )


def _effect_interval(c: Counts, confidence: float, baseline: float) -> tuple[float, float]:
    """The confidence interval of the design's effect, from the interval of the counts' law."""
    reader = reader_of(c.design)
    lo_law, hi_law = _law_interval(c, confidence)
    low = float(reader.from_law(np.asarray(lo_law), baseline))
    high = float(reader.from_law(np.asarray(hi_law), baseline)) if np.isfinite(hi_law) else np.inf
    return low, high


def _notes(c: Counts) -> tuple[str, ...]:
    if c.total == 0 and c.law != "poisson":
        lost = reader_of(c.design).no_information
        return (f"{lost}: the conditional analysis has no information; the posterior equals the prior",)
    return ()
