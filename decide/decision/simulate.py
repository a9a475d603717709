"""A Monte Carlo check of a chosen design, independent of the analytic power.

:func:`simulate` draws the counts of many studies of the chosen size, under
no harm (effect 1) and under harm (the effect drawn from its prior), applies
the test as an analyst would with scipy's functions (Fisher's exact test,
the exact binomial test, the Poisson tail, McNemar's exact test, or the
normal statistic), and
sets the share of significant results beside the analytic false-alarm
probability and power, and the mean realised loss beside the expected loss.
It shares no code with the power engine: the counts come from numpy's
binomial, Poisson and multinomial generators, the tests from
:mod:`scipy.stats`.

Matched sets (1:M) are drawn from the model Dupont (1988) states: each set
holds ``k`` exposed subjects with probability
``t_k = p1*P(Bin(M, p0+) = k-1) + q1*P(Bin(M, p0-) = k)`` (case exposed,
or not, and the M controls independent given the case, with the
within-set correlation ``phi`` moving ``p0+`` and ``p0-`` apart), and
given ``k`` its case is the exposed one with probability
``k*psi / (k*psi + M + 1 - k)``.  The sets of a study are independent, so
the number of sets with each ``k`` is multinomial over the ``n`` sets and
the exposed cases among them binomial.  A 1:1 study is tested with the
exact McNemar test (``scipy.stats.binomtest`` on the discordant pairs), or
McNemar's normal statistic; a 1:M study with the Mantel-Haenszel statistic
for matched sets, the conditional score test at no effect.

A difference of more than 4 standard errors (of the analytic value under
binomial sampling) is flagged: the design's stated numbers and the test as
run disagree by more than chance allows.

References
----------
.. [1] Fisher, R. A. (1935). The logic of inductive inference. *J. R. Stat.
   Soc.* 98, 39-82 (the exact test of a 2 x 2 table).
.. [2] Breslow, N. E. and Day, N. E. (1987). *Statistical Methods in Cancer
   Research, vol. II*. IARC Scientific Publications 82, ch. 2-3 (the
   square-root statistic for an SIR, the log rate ratio, the conditional test
   of two Poisson counts).
.. [3] Clopper, C. J. and Pearson, E. S. (1934). The use of confidence or
   fiducial limits illustrated in the case of the binomial. *Biometrika* 26,
   404-413.
.. [4] Dupont, W. D. (1988). Power calculations for matched case-control
   studies. *Biometrics* 44, 1157-1168 (the model of matched sets).
.. [5] Breslow, N. E. and Day, N. E. (1980). *Statistical Methods in Cancer
   Research, vol. I*. IARC Scientific Publications 32, ch. 5 (the
   Mantel-Haenszel test for 1:M matched sets; section from memory).
.. [6] McNemar, Q. (1947). Note on the sampling error of the difference
   between correlated proportions or percentages. *Psychometrika* 12,
   153-157.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy import stats

from .._results import PlainData
from ..errors import DecideError, InfeasibleError
from .optimize import Decision
from .problem import Problem

FloatArray = NDArray[np.float64]

#: Differences beyond this many standard errors are flagged.
FLAG_AT = 4.0
#: Studies drawn at once (bounds memory).
CHUNK = 250_000
_REL = 1e-9  # p <= alpha, up to rounding of the breakpoint alpha itself


@dataclass(frozen=True)
class Interval(PlainData):
    """A confidence interval."""

    low: float
    high: float
    level: float


@dataclass(frozen=True)
class Check(PlainData):
    """A simulated quantity beside its analytic value."""

    name: str
    simulated: float
    interval: Interval | None
    analytic: float
    standard_error: float
    flagged: bool


@dataclass(frozen=True)
class Simulation(PlainData):
    """The result of :func:`simulate`; ``studies`` were drawn under each hypothesis."""

    title: str
    policy: str
    seed: int
    studies: int
    design: str
    test: str
    sides: int
    alpha: float
    n_per_group: int
    n_comparison: int
    false_alarm: Check
    power: Check
    loss: Check
    method: str

    @property
    def flagged(self) -> bool:
        return self.false_alarm.flagged or self.power.flagged or self.loss.flagged


SIMULATED = ("cohort-risk", "case-control", "cohort-rate", "reference-rate", "matched-case-control")
MATCHED = "matched-case-control"


def design_name(problem: Problem) -> str:
    """The study design's name (a study may carry the name or the design object)."""
    d = problem.study.design
    return d if isinstance(d, str) else str(d.name)


def _comparison(problem: Problem, n: int) -> int:
    s = problem.study
    if design_name(problem) == "reference-rate":
        return 0
    return int(math.floor(s.allocation * n + 0.5))


def _effects(problem: Problem, rng: np.random.Generator, size: int) -> FloatArray:
    e = problem.effect
    if e.is_point:
        return np.full(size, e.median)
    # the effect under harm is the lognormal prior truncated at 1: inverse CDF above Phi(at_one)
    floor = float(stats.norm.cdf(-np.log(e.median) / e.log_sd))
    u = stats.norm.ppf(floor + (1 - floor) * rng.uniform(size=size))
    theta = e.median * np.exp(e.log_sd * u)
    if design_name(problem) == "cohort-risk":  # the exposed risk stays below 1 (prior mass beyond < 1e-6)
        theta = np.minimum(theta, (1 - 1e-12) / problem.study.baseline)
    phi = _within_set_correlation(problem)
    if design_name(problem) == MATCHED and phi > 0:  # Dupont's model needs psi < 1/phi**2 (mass beyond < 1e-6)
        theta = np.minimum(theta, (1 - 1e-9) / phi**2)
    return np.asarray(theta)


def _within_set_correlation(problem: Problem) -> float:
    """The correlation of exposure within matched sets (the design setting; 0 for a design named by text)."""
    d = problem.study.design
    return 0.0 if isinstance(d, str) else float(getattr(d, "correlation", 0.0))


def matched_set_law(p0: float, psi: FloatArray, controls: int, phi: float) -> tuple[FloatArray, FloatArray]:
    """How many subjects of a matched set are exposed, and whether its case is one of them (Dupont 1988).

    Parameters
    ----------
    p0 : float
        Exposure prevalence among controls.
    psi : array of float
        Odds ratio of each study.
    controls : int
        Controls matched to each case, ``M``.
    phi : float
        Correlation of exposure between a case and a matched control.

    Returns
    -------
    t : array of float, shape (len(psi), M + 2)
        ``t[:, k]``: probability that a set holds k = 0..M+1 exposed subjects.
    e : array of float, shape (len(psi), M)
        ``e[:, k-1]``: probability that the case is exposed, given k = 1..M exposed in its set.

    Notes
    -----
    The case is exposed with probability ``p1 = psi*p0 / (1 + p0*(psi - 1))``;
    given the case, the controls are independent, exposed with probability
    ``p0+ = p0 + phi*sqrt(p0*q0*q1/p1)`` (case exposed) or
    ``p0- = p0 - phi*sqrt(p0*q0*p1/q1)`` (case unexposed), clipped to
    [0, 1].  Given k exposed, the case is exposed with the conditional
    probability ``k*psi / (k*psi + M + 1 - k)``.

    References
    ----------
    .. [1] Dupont, W. D. (1988). Power calculations for matched
       case-control studies. *Biometrics* 44, 1157-1168.
    """
    psi = np.asarray(psi, dtype=np.float64)[:, None]
    p1 = psi * p0 / (1 + p0 * (psi - 1))
    q0, q1 = 1 - p0, 1 - p1
    plus = np.clip(p0 + phi * np.sqrt(p0 * q0 * q1 / p1), 0.0, 1.0)
    minus = np.clip(p0 - phi * np.sqrt(p0 * q0 * p1 / q1), 0.0, 1.0)
    k = np.arange(controls + 2)
    t = p1 * stats.binom.pmf(k - 1, controls, plus) + q1 * stats.binom.pmf(k, controls, minus)
    exposed = k[1:-1]
    e = exposed * psi / (exposed * psi + controls + 1 - exposed)
    return np.asarray(t / t.sum(axis=1, keepdims=True)), np.asarray(e)


def _draw_matched(problem: Problem, n: int, theta: FloatArray, rng: np.random.Generator) -> tuple[FloatArray, ...]:
    """Exposed cases and sets of each study by the sets' exposed count k = 1..M (columns; others carry nothing)."""
    controls = int(round(problem.study.allocation))
    t, e = matched_set_law(problem.study.baseline, theta, controls, _within_set_correlation(problem))
    sets = rng.multinomial(n, t)[:, 1:-1]
    return rng.binomial(sets, e).astype(float), sets.astype(float)


def matched_statistic(cases: FloatArray, sets: FloatArray) -> FloatArray:
    """The Mantel-Haenszel statistic of each study of 1:M matched sets (harm: positive).

    Parameters
    ----------
    cases, sets : array of float, shape (studies, M)
        ``sets[:, k-1]`` sets with k exposed subjects, ``cases[:, k-1]``
        how many of them have their case exposed.

    Returns
    -------
    array of float
        The exposed cases minus their expectation given every set's
        exposed count, ``sum_k (cases_k - sets_k*k/(M+1))``, over its null
        standard error ``sqrt(sum_k sets_k*k*(M+1-k)/(M+1)**2)``; for 1:1
        McNemar's ``(b - c)/sqrt(b + c)``.  ``nan`` with no informative set.

    References
    ----------
    .. [1] Breslow, N. E. and Day, N. E. (1980). *Statistical Methods in
       Cancer Research, vol. I*. IARC Scientific Publications 32, ch. 5
       (the summary test for 1:M matching; section from memory).
    """
    controls = sets.shape[-1]
    share = np.arange(1, controls + 1) / (controls + 1)
    score = np.sum(cases - sets * share, axis=-1)
    variance = np.sum(sets * share * (1 - share), axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.asarray(score / np.sqrt(variance))


def _draw(problem: Problem, n: int, m: int, theta: FloatArray, rng: np.random.Generator) -> tuple[FloatArray, ...]:
    """Counts of each study: (exposed count, comparison count), (observed, expected) for one group,
    or (exposed cases, sets) by exposed count for matched sets."""
    s = problem.study
    b = s.baseline
    if design_name(problem) == MATCHED:
        return _draw_matched(problem, n, theta, rng)
    if design_name(problem) == "cohort-risk":
        return rng.binomial(n, b * theta).astype(float), rng.binomial(m, b, theta.size).astype(float)
    if design_name(problem) == "case-control":
        p1 = theta * b / (1 + b * (theta - 1))
        return rng.binomial(n, p1).astype(float), rng.binomial(m, b, theta.size).astype(float)
    if design_name(problem) == "cohort-rate":
        return (
            rng.poisson(n * s.years * b * theta).astype(float),
            rng.poisson(m * s.years * b, theta.size).astype(float),
        )
    expected = n * s.years * b
    return rng.poisson(expected * theta).astype(float), np.full(theta.size, expected)


def _normal_p(problem: Problem, x: FloatArray, y: FloatArray, n: int, m: int, sides: int) -> FloatArray:
    """p-values of the normal statistic of each study (harm: the upper tail)."""
    s = problem.study
    with np.errstate(divide="ignore", invalid="ignore"):
        if design_name(problem) == MATCHED:
            stat = matched_statistic(x, y)
        elif design_name(problem) in ("cohort-risk", "case-control"):
            p1, p0 = x / n, y / m
            pooled = (x + y) / (n + m)
            se = np.sqrt(pooled * (1 - pooled) * (1 / n + 1 / m))
            cc = (1 / n + 1 / m) / 2 if s.continuity else 0.0
            diff = p1 - p0
            stat = np.where(sides == 1, diff - cc, np.abs(diff) - cc) / se
        elif design_name(problem) == "cohort-rate":
            t1, t0 = n * s.years, m * s.years
            rate = (x + y) / (t1 + t0)
            stat = np.log((x / t1) / (y / t0)) / np.sqrt(1 / (rate * t1) + 1 / (rate * t0))
        else:
            stat = 2 * (np.sqrt(x) - np.sqrt(y))
    stat = np.where(np.isnan(stat), -np.inf if sides == 1 else 0.0, stat)
    if sides == 1:
        return np.asarray(stats.norm.sf(stat))
    return np.asarray(np.minimum(1.0, 2 * stats.norm.sf(np.abs(stat))))


def _unique_p(keys: NDArray[np.float64], one: object) -> FloatArray:
    """Apply a scalar scipy test to each distinct row of ``keys`` and spread the p-values back."""
    uniq, inverse = np.unique(keys, axis=0, return_inverse=True)
    ps = np.array([one(*row) for row in uniq], dtype=np.float64)  # type: ignore[operator]
    return np.asarray(ps[np.ravel(inverse)])


def _exact_p(problem: Problem, x: FloatArray, y: FloatArray, n: int, m: int, sides: int) -> FloatArray:
    """p-values of the design's exact test (two-sided: central, twice the smaller tail)."""

    def central(upper: float, lower: float) -> float:
        return upper if sides == 1 else min(1.0, 2 * min(upper, lower))

    if design_name(problem) == MATCHED:  # exact only for 1:1: only the m = 1 column, the discordant pairs

        def mcnemar(case_only: float, pairs: float) -> float:
            if pairs == 0:
                return 1.0
            side = "greater" if sides == 1 else "two-sided"  # two-sided, at 1/2: twice the smaller tail
            return float(stats.binomtest(int(case_only), int(pairs), 0.5, alternative=side).pvalue)

        return _unique_p(np.column_stack([x[:, 0], y[:, 0]]), mcnemar)
    if design_name(problem) in ("cohort-risk", "case-control"):

        def fisher(a: float, c: float) -> float:
            table = [[int(a), n - int(a)], [int(c), m - int(c)]]
            up = stats.fisher_exact(table, alternative="greater").pvalue
            return central(up, 1.0 if sides == 1 else stats.fisher_exact(table, alternative="less").pvalue)

        return _unique_p(np.column_stack([x, y]), fisher)
    if design_name(problem) == "cohort-rate":
        share = n / (n + m)  # person-time share of the exposed (same years each)

        def conditional(a: float, total: float) -> float:
            if total == 0:
                return 1.0
            up = stats.binomtest(int(a), int(total), share, alternative="greater").pvalue
            low = 1.0 if sides == 1 else stats.binomtest(int(a), int(total), share, alternative="less").pvalue
            return central(up, low)

        return _unique_p(np.column_stack([x, x + y]), conditional)
    upper = stats.poisson.sf(x - 1, y)
    lower = stats.poisson.cdf(x, y)
    return np.asarray(upper if sides == 1 else np.minimum(1.0, 2 * np.minimum(upper, lower)))


def _rate_check(name: str, hits: int, studies: int, analytic: float) -> Check:
    ci = stats.binomtest(hits, studies).proportion_ci(confidence_level=0.95, method="exact")
    se = math.sqrt(max(analytic * (1 - analytic), 0.0) / studies)
    share = hits / studies
    flagged = abs(share - analytic) > FLAG_AT * se if se > 0 else abs(share - analytic) > 0.5 / studies
    return Check(name, share, Interval(float(ci.low), float(ci.high), 0.95), analytic, se, bool(flagged))


@dataclass(frozen=True)
class _Tally:
    """What the simulated studies gave: significant results under no harm and under harm, and the missed costs."""

    null_hits: int
    harm_hits: int
    missed_sum: float
    missed_sq: float


def _check_simulable(problem: Problem, decision: Decision, studies: int) -> None:
    """Refuse a study count below 1, a design the simulation cannot draw, or a decision with no design."""
    if studies < 1:
        raise DecideError(f"studies must be at least 1, but got {studies}", ("studies",))
    if design_name(problem) not in SIMULATED:
        raise DecideError(
            f"simulate: the {design_name(problem)} design cannot be simulated yet; it can for {', '.join(SIMULATED)}",
            ("design",),
        )
    if not decision.feasible or decision.n_per_group is None or decision.alpha is None:
        raise InfeasibleError(f"the policy {decision.policy} has no feasible design to simulate")


def _run_studies(
    problem: Problem, n: int, m: int, alpha: float, exact: bool, sides: int, studies: int, seed: int
) -> _Tally:
    """Draw and test ``studies`` studies under no harm and as many under harm, in chunks of :data:`CHUNK`."""
    test_p = _exact_p if exact else _normal_p
    rng = np.random.default_rng(np.random.SeedSequence(seed))
    null_hits, harm_hits = 0, 0
    missed_sum, missed_sq = 0.0, 0.0
    cost = problem.consequences
    for start in range(0, studies, CHUNK):
        size = min(CHUNK, studies - start)
        x, y = _draw(problem, n, m, np.ones(size), rng)
        null_hits += int(np.count_nonzero(test_p(problem, x, y, n, m, sides) <= alpha * (1 + _REL)))
        theta = _effects(problem, rng, size)
        x, y = _draw(problem, n, m, theta, rng)
        caught = test_p(problem, x, y, n, m, sides) <= alpha * (1 + _REL)
        harm_hits += int(np.count_nonzero(caught))
        realised = np.where(caught, 0.0, cost.missed_cost(theta))
        missed_sum += float(realised.sum())
        missed_sq += float((realised**2).sum())
    return _Tally(null_hits, harm_hits, missed_sum, missed_sq)


def simulate(
    problem: Problem, decision: Decision, studies: int = 100_000, seed: int = 0, sides: int | None = None
) -> Simulation:
    """Simulate ``studies`` studies of the chosen design under each hypothesis.

    Parameters
    ----------
    problem : Problem
    decision : Decision
        A feasible decision for ``problem`` (its size, test and nominal alpha).
    studies : int
        Studies drawn under no harm, and as many under harm.
    seed : int
        Seed of ``numpy.random.SeedSequence``.
    sides : int, optional
        Apply a one- or two-sided rule instead of the study's (to see a
        mismatched analysis flagged).

    Returns
    -------
    Simulation
    """
    _check_simulable(problem, decision, studies)
    assert decision.n_per_group is not None and decision.alpha is not None
    assert decision.attained_alpha is not None and decision.power is not None
    assert decision.expected_loss is not None and decision.loss_parts is not None
    rule_sides = problem.study.sides if sides is None else sides
    n, alpha = decision.n_per_group, decision.alpha
    m = _comparison(problem, n)
    exact = decision.test == "exact"
    tally = _run_studies(problem, n, m, alpha, exact, rule_sides, studies, seed)
    false_alarm = _rate_check("false-alarm probability", tally.null_hits, studies, decision.attained_alpha)
    power = _rate_check("power (averaged over the effect prior)", tally.harm_hits, studies, decision.power)
    loss = _loss_check(problem, decision, studies, tally)
    method = (
        "exact test (scipy.stats fisher_exact / binomtest / poisson tail)"
        if exact
        else "normal statistic (scipy.stats.norm)"
    )
    if design_name(problem) == MATCHED:
        method = (
            "exact McNemar test (scipy.stats.binomtest on the discordant pairs)"
            if exact
            else "Mantel-Haenszel statistic of the matched sets (scipy.stats.norm)"
        )
    return Simulation(
        problem.title,
        decision.policy,
        int(seed),
        studies,
        design_name(problem),
        decision.test or "",
        rule_sides,
        alpha,
        n,
        m,
        false_alarm,
        power,
        loss,
        method,
    )


def _loss_check(problem: Problem, decision: Decision, studies: int, tally: _Tally) -> Check:
    """Mean realised loss (harm with probability p_harm, stratified) beside the expected loss."""
    p = problem.p_harm
    f = problem.consequences.false_alarm
    assert decision.loss_parts is not None and decision.expected_loss is not None
    study = decision.loss_parts["study"]
    share = tally.null_hits / studies
    mean_missed = tally.missed_sum / studies
    var_missed = max(tally.missed_sq / studies - mean_missed**2, 0.0)
    simulated = study + p * mean_missed + (1 - p) * f * share
    se = math.sqrt((p**2 * var_missed + (1 - p) ** 2 * f**2 * share * (1 - share)) / studies)
    diff = abs(simulated - decision.expected_loss)
    flagged = diff > FLAG_AT * se if se > 0 else diff > 1e-9 * abs(decision.expected_loss)
    return Check("mean realised loss", simulated, None, decision.expected_loss, se, bool(flagged))
