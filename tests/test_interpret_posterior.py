"""The posterior probability of harm and the Bayes action, against the world.

* direct numerical integration over the effect prior (scipy.integrate.quad)
  with the likelihood from scipy's own distributions;
* a seeded simulation: studies drawn from the prior, kept where they match
  the observed counts, the harmful share counted (within Monte Carlo error);
* coherence: with a point effect and the loss-optimal exact test of
  ``decide optimize``, the action minimising the posterior expected loss is
  the verdict of the optimal test, count by count (random scenarios).  This
  is checked for the reference-rate design, where the test and the
  likelihood see the same single count; in the two-group designs the
  optimiser orders count pairs by their conditional p-value while the
  posterior conditions on the total, so the two rules may part near the
  threshold and are not expected to agree exactly;
* monotone likelihood ratio: more exposed cases never lower the posterior.

All scenarios and counts are invented.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import assume, given
from hypothesis import strategies as st
from scipy import integrate, special, stats

from decide.decision.interpret import evidence, policy_verdict, posterior, read_counts
from decide.decision.optimize import optimize
from decide.decision.prior import EffectPrior
from decide.decision.problem import Consequences, Constraints, Problem, Study
from decide.engine.exact import ALPHA_FLOOR

LOGNORMAL = EffectPrior.from_interval(1.5, 6.0, 0.9)
FIXED = Consequences(false_alarm=4e6, per_subject=10.0, missed_hazard=3e7)
DERIVED = Consequences(
    false_alarm=4e6,
    per_subject=10.0,
    exposed_population=5e4,
    background_rate=2e-4,
    cost_per_case=2e5,
    horizon_years=10.0,
)

CASES: dict[str, tuple[Study, dict[str, float]]] = {
    "reference-rate": (Study("reference-rate", 3e-5, years=8.0), {"cases": 6, "expected": 2.5}),
    "cohort-rate": (
        Study("cohort-rate", 4e-4, allocation=2.0, years=6.0),
        {"cases_exposed": 9, "person_years_exposed": 12000.0, "cases_unexposed": 7, "person_years_unexposed": 25000.0},
    ),
    "cohort-risk": (
        Study("cohort-risk", 8e-3),
        {"cases_exposed": 8, "n_exposed": 600, "cases_unexposed": 3, "n_unexposed": 650},
    ),
    "case-control": (
        Study("case-control", 0.05, allocation=3.0),
        {"cases": 120, "exposed_cases": 11, "controls": 360, "exposed_controls": 15},
    ),
}


def scipy_likelihood(design: str, obs: dict[str, float], baseline: float, theta: float) -> float:
    """The exact (conditional) likelihood from scipy's distributions, independent of decide."""
    if design == "reference-rate":
        return float(stats.poisson.pmf(obs["cases"], theta * obs["expected"]))
    if design == "cohort-rate":
        t1, t0 = obs["person_years_exposed"], obs["person_years_unexposed"]
        x1, x0 = obs["cases_exposed"], obs["cases_unexposed"]
        return float(stats.binom.pmf(x1, x1 + x0, theta * t1 / (theta * t1 + t0)))
    if design == "cohort-risk":
        x1, n1, x0, n0 = obs["cases_exposed"], obs["n_exposed"], obs["cases_unexposed"], obs["n_unexposed"]
        p1 = theta * baseline
        odds = p1 / (1 - p1) / (baseline / (1 - baseline))
    else:
        x1, n1, x0, n0 = obs["exposed_cases"], obs["cases"], obs["exposed_controls"], obs["controls"]
        odds = theta
    return float(stats.nchypergeom_fisher.pmf(x1, n1 + n0, n1, x1 + x0, odds))


def quad_posterior(problem: Problem, obs: dict[str, float]) -> tuple[float, float]:
    """P(harm | data) and E[missed cost | data, harm] by scipy.integrate.quad over the truncated prior."""
    e, s = problem.effect, problem.study
    design = s.setting().design.name
    m, sd = math.log(e.median), e.log_sd
    mass = special.ndtr(m / sd)  # prior mass above a ratio of 1

    def density(v: float) -> float:  # in v = log(theta), truncated to v > 0
        return float(stats.norm.pdf(v, m, sd) / mass)

    def lik(v: float) -> float:
        return scipy_likelihood(design, obs, s.baseline, math.exp(v))

    top = m + 9 * sd
    if design == "cohort-risk":
        top = min(top, math.log(0.999999 / s.baseline))
    opts = {"limit": 400, "epsabs": 0.0, "epsrel": 1e-11}
    harm = integrate.quad(lambda v: lik(v) * density(v), 0.0, top, **opts)[0]
    cost = integrate.quad(
        lambda v: float(problem.consequences.missed_cost(np.array([math.exp(v)]))[0]) * lik(v) * density(v),
        0.0,
        top,
        **opts,
    )[0]
    p = problem.p_harm
    null = scipy_likelihood(design, obs, s.baseline, 1.0)
    return p * harm / (p * harm + (1 - p) * null), cost / harm


@pytest.mark.parametrize("design", list(CASES))
@pytest.mark.parametrize("cost", [FIXED, DERIVED], ids=["fixed", "derived"])
def test_posterior_matches_direct_integration(design: str, cost: Consequences) -> None:
    study, obs = CASES[design]
    problem = Problem(study, LOGNORMAL, 0.2, cost)
    got = posterior(problem, read_counts(problem, obs))
    want_p, want_cost = quad_posterior(problem, obs)
    assert got.p_harm == pytest.approx(want_p, rel=1e-8)
    assert got.missed_given_harm == pytest.approx(want_cost, rel=1e-8)


@pytest.mark.parametrize("design", list(CASES))
def test_point_effect_posterior_is_bayes_rule_in_closed_form(design: str) -> None:
    study, obs = CASES[design]
    problem = Problem(study, EffectPrior.point(3.0), 0.3, FIXED)
    lr = scipy_likelihood(design, obs, study.baseline, 3.0) / scipy_likelihood(design, obs, study.baseline, 1.0)
    got = posterior(problem, read_counts(problem, obs))
    assert got.p_harm == pytest.approx(0.3 * lr / (0.3 * lr + 0.7), rel=1e-10)


def _draw_effects(rng: np.random.Generator, harm: np.ndarray, effect: EffectPrior) -> np.ndarray:
    """Ratios: 1 where harmless; from the lognormal prior truncated above 1 where harmful."""
    lo = special.ndtr(-math.log(effect.median) / effect.log_sd)
    u = special.ndtri(lo + rng.random(harm.size) * (1 - lo))
    return np.where(harm, effect.median * np.exp(effect.log_sd * u), 1.0)


@pytest.mark.parametrize("design", ["reference-rate", "cohort-rate", "case-control"])
def test_posterior_matches_seeded_simulation(design: str) -> None:
    study, obs = CASES[design]
    problem = Problem(study, LOGNORMAL, 0.2, FIXED)
    rng = np.random.default_rng(20260412)
    draws = 400_000
    harm = rng.random(draws) < problem.p_harm
    theta = _draw_effects(rng, harm, problem.effect)
    x: np.ndarray
    if design == "reference-rate":
        x, want = rng.poisson(theta * obs["expected"]), obs["cases"]
    elif design == "cohort-rate":
        t1, t0 = obs["person_years_exposed"], obs["person_years_unexposed"]
        events = int(obs["cases_exposed"] + obs["cases_unexposed"])
        x, want = rng.binomial(events, theta * t1 / (theta * t1 + t0)), obs["cases_exposed"]
    else:  # given the total exposed, Fisher's noncentral law at the odds ratio
        n1, n0 = int(obs["cases"]), int(obs["controls"])
        total = int(obs["exposed_cases"] + obs["exposed_controls"])
        x, want = _fisher_draws(rng, n1, n0, total, theta), obs["exposed_cases"]
    kept = x == want
    share = harm[kept].mean()
    se = math.sqrt(share * (1 - share) / kept.sum())
    got = posterior(problem, read_counts(problem, obs)).p_harm
    assert kept.sum() > 2000
    assert abs(got - share) < 4.5 * se


def _fisher_draws(rng: np.random.Generator, n1: int, n0: int, total: int, odds: np.ndarray) -> np.ndarray:
    """One draw of Fisher's noncentral law per odds ratio, by inverting its cdf.

    The law is written from its definition, ``C(n1, x) C(n0, t - x) psi**x``
    normalised over the support (checked against scipy's
    ``nchypergeom_fisher`` in test_interpret_exact.py).
    """
    support = np.arange(max(0, total - n0), min(total, n1) + 1)
    weight = special.comb(n1, support) * special.comb(n0, total - support) * odds[:, None] ** support
    cdf = np.cumsum(weight, axis=1) / weight.sum(axis=1, keepdims=True)
    u = rng.random(odds.size)
    return np.asarray(support[np.minimum((cdf < u[:, None]).sum(axis=1), support.size - 1)], dtype=float)


@given(
    baseline=st.floats(1e-5, 1e-3),
    years=st.floats(1.0, 10.0),
    effect=st.floats(1.3, 6.0),
    p_harm=st.floats(0.02, 0.9),
    ratio=st.floats(0.2, 200.0),
    cap=st.integers(200, 20_000),
)
def test_bayes_action_is_the_loss_optimal_exact_test(
    baseline: float, years: float, effect: float, p_harm: float, ratio: float, cap: int
) -> None:
    """Point effect, reference rate, a study worth doing: the Bayes rule and the optimal threshold agree.

    The likelihood ratio rises with the count, so the Bayes rule flags from some count on; the
    optimiser picks the exact test minimising the same loss, which is that region.
    """
    cost = Consequences(false_alarm=1e6, per_subject=1.0, missed_hazard=1e6 * ratio)
    study = Study("reference-rate", baseline, years=years, test="exact")
    problem = Problem(study, EffectPrior.point(effect), p_harm, cost, Constraints(max_n_per_group=cap))
    d = optimize(problem)
    # where no study is worth its cost the optimiser decides now instead (flagging now is the
    # "always flag" test, which the exact family of attainable levels below 1 does not hold)
    assume(d.action == "study" and d.test == "exact" and d.n_per_group is not None and d.alpha is not None)
    assert d.n_per_group is not None and d.alpha is not None
    expected = baseline * d.n_per_group * years
    for x in range(0, int(expected * effect + 10 * math.sqrt(expected * effect) + 10)):
        c = read_counts(problem, {"cases": x, "expected": expected})
        if stats.poisson.sf(x - 1, expected) < ALPHA_FLOOR:
            break  # tests beyond the resolved levels are not offered to the optimiser
        post = posterior(problem, c)
        flag, clear = (1 - post.p_harm) * cost.false_alarm, post.p_harm * post.missed_given_harm
        if abs(flag - clear) <= 1e-9 * max(flag, clear):
            continue  # a tie: either action is optimal
        assert policy_verdict(d, evidence(c)) == ("flag" if flag < clear else "clear"), x


@pytest.mark.parametrize("prior", [EffectPrior.point(2.0), LOGNORMAL], ids=["point", "lognormal"])
def test_decisive_data_neither_overflow_nor_underflow(prior: EffectPrior) -> None:
    study = Study("reference-rate", 3e-5, years=8.0)
    problem = Problem(study, prior, 0.2, FIXED)
    # 400 cases where 20 are expected: the likelihood ratio is far beyond the float range
    high = posterior(problem, read_counts(problem, {"cases": 400, "expected": 20.0}))
    # no case where 3000 are expected
    low = posterior(problem, read_counts(problem, {"cases": 0, "expected": 3000.0}))
    assert high.p_harm == 1.0 and math.isfinite(high.missed_given_harm)
    if prior.is_point:  # closed form: odds p / (1 - p) times LR = 2**0 exp(-3000)
        assert low.p_harm == pytest.approx(0.25 * math.exp(-3000.0), abs=0.0) and low.p_harm == 0.0
    else:
        # the truncated prior puts density g(0) at log ratio 0, where the likelihood ratio
        # exp(-E (e**v - 1)) integrates to about 1/E (1 - 1/E): Laplace's method, closed form
        m, sd = math.log(prior.median), prior.log_sd
        g0 = stats.norm.pdf(0.0, m, sd) / special.ndtr(m / sd)
        lr = g0 / 3000.0 * (1 - 1 / 3000.0)
        assert low.p_harm == pytest.approx(0.25 * lr / (1 + 0.25 * lr), rel=1e-2)


@given(
    design=st.sampled_from(["reference-rate", "cohort-rate", "case-control", "cohort-risk"]),
    x=st.integers(0, 25),
    point=st.booleans(),
)
def test_more_exposed_cases_never_lower_the_posterior(design: str, x: int, point: bool) -> None:
    study, obs = CASES[design]
    problem = Problem(study, EffectPrior.point(2.5) if point else LOGNORMAL, 0.2, FIXED)
    key = {"reference-rate": "cases", "case-control": "exposed_cases"}.get(design, "cases_exposed")
    low = posterior(problem, read_counts(problem, {**obs, key: x})).p_harm
    high = posterior(problem, read_counts(problem, {**obs, key: x + 1})).p_harm
    assert high >= low * (1 - 1e-12)
