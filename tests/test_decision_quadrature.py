"""The effect prior and the expected loss over it, against scipy.

* ``EffectPrior.from_interval``: ``log_sd = (ln high - ln low) / (2 z)``,
  ``z = Phi^-1((1 + level) / 2)`` (identity: the central interval of a
  lognormal), and its quantiles and masses against ``scipy.stats.lognorm``
  (scipy 1.17; shape ``s = log_sd``, ``scale = median``).
* The effect under harm is the prior truncated to ratios above 1 and
  renormalised.  The composite Gauss-Legendre nodes against the moments of
  that truncated lognormal, ``E[theta^j | theta > 1] = median^j exp(j^2 s^2 / 2)
  Phi((ln median + j s^2) / s) / Phi(ln median / s)`` (identity: the partial
  moments of a lognormal), and against ``scipy.integrate.quad``.
* The expected loss of a decision against ``scipy.integrate.quad`` over the
  truncated lognormal density of ``(1 - P(theta)) M(theta)``, the power ``P`` taken
  from ``decide.power.power`` (normal tests) or ``scipy.stats.poisson``
  (the exact SIR test), the loss assembled in the test from its definition:
  ``p E[(1 - P) M] + (1 - p) alpha_attained F + fixed + per_subject n_total``.
* With the missed cost derived from excess cases, ``M = c (theta - 1)^+``,
  and ``E[(theta - 1)^+] = m e^{s^2/2} Phi((ln m + s^2)/s) - Phi(ln m / s)``
  for a lognormal with median ``m`` (identity; the partial expectation of a
  lognormal, as in the Black-Scholes call price), divided by the prior's mass
  above 1 for the effect under harm.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import decision_helpers as helpers
import numpy as np
import pytest
from scipy import integrate, stats

from decide.decision.optimize import Decision, optimize
from decide.decision.prior import EffectPrior
from decide.decision.problem import Problem
from decide.designs import get_design
from decide.engine.power import power
from decide.errors import DecideError
from decide.scenario import load_scenario

REPO = Path(__file__).resolve().parents[1]
DERIVED = {"exposed_population": 1e4, "background_rate": 1e-3, "cost_per_case": 1e5, "horizon_years": 10.0}
CONSTANT = {"missed_hazard": 1e7}


# --------------------------------------------------------------------------
# the prior itself


@pytest.mark.parametrize(
    ("low", "high", "level"), [(1.5, 6.0, 0.9), (1.1, 3.0, 0.5), (2.0, 2.5, 0.99), (0.8, 4.0, 0.8)]
)
def test_from_interval_matches_scipy_lognormal(low: float, high: float, level: float) -> None:
    prior = EffectPrior.from_interval(low, high, level)
    z = stats.norm.ppf((1 + level) / 2)
    assert prior.log_sd == pytest.approx((np.log(high) - np.log(low)) / (2 * z), rel=1e-12)
    assert prior.median == pytest.approx(np.sqrt(low * high), rel=1e-12)
    ref = stats.lognorm(s=prior.log_sd, scale=prior.median)
    # the stated interval is the central `level` interval
    assert ref.ppf((1 - level) / 2) == pytest.approx(low, rel=1e-10)
    assert ref.ppf((1 + level) / 2) == pytest.approx(high, rel=1e-10)
    for q in (1e-6, 0.01, 0.3, 0.5, 0.77, 0.999):
        assert prior.quantile(q) == pytest.approx(ref.ppf(q), rel=1e-10)
    for x in (0.5, 1.0, low, prior.median, high, 10.0):
        assert prior.mass_below(x) == pytest.approx(ref.cdf(x), rel=1e-10, abs=1e-300)


def test_from_interval_with_a_median_off_centre() -> None:
    # A median away from the geometric mean: log_sd still spans the interval by 2 z.
    prior = EffectPrior.from_interval(1.2, 5.0, 0.9, median=3.0)
    z = stats.norm.ppf(0.95)
    assert prior.median == 3.0
    assert prior.log_sd == pytest.approx(np.log(5.0 / 1.2) / (2 * z), rel=1e-12)
    assert prior.quantile(0.5) == pytest.approx(3.0, rel=1e-12)


@pytest.mark.parametrize(
    ("low", "high", "level", "median", "key"),
    [
        (3.0, 2.0, 0.9, None, "effect.high"),
        (1.5, 4.0, 1.0, None, "effect.level"),
        (1.5, 4.0, 0.9, 5.0, "effect.median"),
        (0.0, 4.0, 0.9, None, "effect.low"),
    ],
)
def test_from_interval_rejects_bad_intervals(
    low: float, high: float, level: float, median: float | None, key: str
) -> None:
    with pytest.raises(DecideError, match=key.replace(".", r"\.")):
        EffectPrior.from_interval(low, high, level, median)


def truncated_moment(median: float, s: float, j: int) -> float:
    """E[theta^j | theta > 1] for a lognormal (identity: its partial moments over the mass above 1)."""
    m = np.log(median)
    return float(median**j * np.exp(j * j * s * s / 2) * stats.norm.cdf((m + j * s * s) / s) / stats.norm.cdf(m / s))


@pytest.mark.parametrize("log_sd", [0.05, 0.3, 0.7])
def test_nodes_reproduce_the_moments_of_the_prior_above_one(log_sd: float) -> None:
    prior = EffectPrior(2.5, log_sd)
    x, w = prior.nodes()
    assert w.sum() == pytest.approx(1.0, rel=1e-14)
    assert x.min() >= 1.0
    ref = stats.lognorm(s=log_sd, scale=2.5)
    assert prior.truncated_share == pytest.approx(ref.cdf(1.0), rel=1e-12, abs=1e-300)
    for j in (1, 2, 3):
        # the same moment by scipy.integrate.quad over the lognormal density above 1
        by_quad, err = integrate.quad(lambda t, j=j: t**j * ref.pdf(t), 1.0, np.inf, epsabs=0, epsrel=1e-12)
        by_quad /= ref.sf(1.0)
        assert truncated_moment(2.5, log_sd, j) == pytest.approx(by_quad, rel=1e-10)
        # measured: the search rule's largest gap is 5.3e-10 (j = 3, log_sd = 0.7, the mass of
        # theta^3 beyond the rule's reach); allow about four times that
        assert float(np.sum(w * x**j)) == pytest.approx(truncated_moment(2.5, log_sd, j), rel=2e-9)


@pytest.mark.parametrize(("low", "high"), [(1.1, 10.0), (0.8, 4.0), (1.5, 4.0)])
def test_expected_derived_cost_is_over_the_prior_above_one(low: float, high: float) -> None:
    # a missed cost bending at 1 integrated over the truncated lognormal by scipy.integrate.quad
    prior = EffectPrior.from_interval(low, high, 0.9)
    ref = stats.lognorm(s=prior.log_sd, scale=prior.median)
    by_quad, _ = integrate.quad(lambda t: (t - 1.0) * ref.pdf(t), 1.0, np.inf, epsabs=0, epsrel=1e-12)
    x, w = prior.nodes(128, kink=1.0)
    assert float(np.sum(w * (x - 1.0))) == pytest.approx(by_quad / ref.sf(1.0), rel=1e-10)


def test_point_prior_is_one_node() -> None:
    x, w = EffectPrior.point(2.0).nodes()
    assert x.tolist() == [2.0] and w.tolist() == [1.0]


# --------------------------------------------------------------------------
# expected loss against quad


def fixed_size_problem(
    design: str,
    baseline: float,
    allocation: float,
    years: float,
    prior: EffectPrior,
    missed: dict[str, float],
    test: str,
    n: int,
) -> Problem:
    return helpers.fixed_size_problem(design, baseline, allocation, years, prior, missed, n, test=test)


def quad_loss(problem: Problem, dec: Decision) -> tuple[float, float]:
    """The missed-hazard part and the whole expected loss, integrated by scipy.integrate.quad."""
    s = problem.study
    d = get_design(s.design)
    prior = problem.effect
    n = dec.n_per_group
    assert n is not None and dec.attained_alpha is not None
    kw: dict[str, Any] = {
        "allocation": s.allocation if d.allocation_name else None,
        "years": s.years if d.uses_years else None,
        "sides": s.sides,
        "test": dec.test,
    }
    if dec.test == "exact" and s.design == "reference-rate":
        # the exact SIR test rejects O >= c with P(Pois(E) >= c) = attained alpha
        expected = n * s.baseline * s.years
        counts = np.arange(0, 400)
        c = counts[np.argmin(np.abs(stats.poisson.sf(counts - 1, expected) - dec.attained_alpha))]
        attained = float(stats.poisson.sf(c - 1, expected))

        def pw(t: float) -> float:
            return float(stats.poisson.sf(c - 1, t * expected))
    else:
        alpha = dec.alpha
        assert alpha is not None
        attained = float(power(s.design, alpha, n, prior.median, s.baseline, **kw).attained_alpha)

        def pw(t: float) -> float:
            return float(power(s.design, alpha, n, t, s.baseline, **kw).power)

    # the effect under harm: the lognormal truncated to ratios above 1, renormalised
    ref = stats.lognorm(s=prior.log_sd, scale=prior.median)
    cost = problem.consequences

    def integrand(t: float) -> float:
        return (1 - pw(t)) * float(cost.missed_cost(np.array(t))) * float(ref.pdf(t) / ref.sf(1.0))

    lo, hi = max(1.0, prior.quantile(1e-13)), prior.quantile(1 - 1e-13)
    value, err = integrate.quad(integrand, lo, hi, limit=400, epsabs=0, epsrel=1e-11)
    assert err <= 1e-9 * value
    missed = problem.p_harm * value
    n_total = n + (int(np.floor(s.allocation * n + 0.5)) if d.allocation_name else 0)
    loss = missed + (1 - problem.p_harm) * attained * cost.false_alarm + cost.fixed + cost.per_subject * n_total
    return missed, loss


# design, baseline, allocation, years, prior, missed cost, test, n
AGREE: list[Any] = [
    ("cohort-risk", 0.01, 2.0, 1.0, EffectPrior.from_interval(1.5, 4.0, 0.9), CONSTANT, "normal", 2000),
    ("case-control", 0.1, 4.0, 1.0, EffectPrior.from_interval(1.5, 4.0, 0.9), CONSTANT, "normal", 200),
    ("reference-rate", 1e-3, 1.0, 5.0, EffectPrior.from_interval(1.3, 3.0, 0.8), CONSTANT, "exact", 2000),
    ("cohort-rate", 2e-3, 2.0, 5.0, EffectPrior.from_interval(1.5, 4.0, 0.9), CONSTANT, "exact", 200),
    # derived cost, the prior's mass far above the kink at effect 1
    ("case-control", 0.1, 4.0, 1.0, EffectPrior.from_interval(3.0, 6.0, 0.9), DERIVED, "normal", 200),
    ("cohort-rate", 2e-3, 2.0, 5.0, EffectPrior.from_interval(3.0, 6.0, 0.9), DERIVED, "normal", 300),
    ("reference-rate", 1e-3, 1.0, 5.0, EffectPrior.from_interval(2.5, 5.0, 0.9), DERIVED, "exact", 1000),
    ("cohort-risk", 0.01, 1.0, 1.0, EffectPrior.from_interval(2.5, 5.0, 0.9), DERIVED, "exact", 150),
]

# Cases that once failed and are kept as checks: a derived cost's kink at effect 1 inside
# the prior, and a power curve rising from 0 to 1 within a small part of a wide prior
# (an earlier fixed 64-node Gauss-Hermite rule was off by up to 4.6 % in the missed part).
ONCE_FAILED: list[Any] = [
    pytest.param(
        "case-control",
        0.1,
        4.0,
        1.0,
        EffectPrior.from_interval(1.5, 4.0, 0.9),
        DERIVED,
        "normal",
        2000,
    ),
    pytest.param(
        "reference-rate",
        1e-3,
        1.0,
        5.0,
        EffectPrior.from_interval(1.3, 3.0, 0.8),
        DERIVED,
        "exact",
        2000,
    ),
    pytest.param(
        "case-control",
        0.1,
        4.0,
        1.0,
        EffectPrior.from_interval(1.1, 10.0, 0.9),
        CONSTANT,
        "normal",
        2000,
    ),
]


# The prior's far-left nodes give cells with few expected cases, where the normal
# test (asked for here) is flagged as weak.
@pytest.mark.filterwarnings("ignore::decide.errors.ApproximationWarning")
@pytest.mark.parametrize(
    ("design", "baseline", "allocation", "years", "prior", "missed", "test", "n"), AGREE + ONCE_FAILED
)
def test_expected_loss_matches_quad_over_the_lognormal_density(
    design: str,
    baseline: float,
    allocation: float,
    years: float,
    prior: EffectPrior,
    missed: dict[str, float],
    test: str,
    n: int,
) -> None:
    prob = fixed_size_problem(design, baseline, allocation, years, prior, missed, test, n)
    dec = optimize(prob)
    assert dec.test == test
    missed_part, loss = quad_loss(prob, dec)
    # measured: at most 1.2e-12 apart (the exact engine's neglected count tails); the
    # decision settles its integrals to 1e-9, so allow about eight times the measured gap
    assert dec.loss_parts is not None
    assert dec.loss_parts["missed"] == pytest.approx(missed_part, rel=1e-11)
    assert dec.expected_loss == pytest.approx(loss, rel=1e-11)


@pytest.mark.filterwarnings("ignore::decide.errors.ApproximationWarning")
def test_bundled_water_supply_expected_loss_matches_quad() -> None:
    prob = load_scenario(REPO / "scenarios" / "water-supply-reference.toml").problem
    dec = optimize(prob)
    missed_part, loss = quad_loss(prob, dec)
    # measured: 4e-16 apart; the same allowance as the cases above
    assert dec.loss_parts is not None
    assert dec.loss_parts["missed"] == pytest.approx(missed_part, rel=1e-11)
    assert dec.expected_loss == pytest.approx(loss, rel=1e-11)


def partial_expectation(median: float, s: float) -> float:
    """E[(theta - 1)^+] for a lognormal with the given median and log-sd (identity)."""
    m = np.log(median)
    return float(median * np.exp(s * s / 2) * stats.norm.cdf((m + s * s) / s) - stats.norm.cdf(m / s))


@pytest.mark.parametrize(
    ("low", "high"),
    [
        (3.0, 6.0),
        (2.5, 5.0),
        (1.5, 4.0),
        (1.3, 3.0),
    ],
)
def test_clear_now_with_derived_cost_is_the_lognormal_partial_expectation(low: float, high: float) -> None:
    prior = EffectPrior.from_interval(low, high, 0.9)
    prob = fixed_size_problem("reference-rate", 1e-3, 1.0, 5.0, prior, DERIVED, "exact", 500)
    dec = optimize(prob)
    c = DERIVED["exposed_population"] * DERIVED["background_rate"] * DERIVED["cost_per_case"] * DERIVED["horizon_years"]
    # over the effect under harm: the prior above 1, renormalised
    ref = stats.lognorm(s=prior.log_sd, scale=prior.median)
    expected = prob.p_harm * c * partial_expectation(prior.median, prior.log_sd) / ref.sf(1.0)
    # the same value by scipy.stats.lognorm.expect, as a check on the identity
    by_scipy = prob.p_harm * c * ref.expect(lambda t: t - 1.0, lb=1.0, epsabs=0, epsrel=1e-12, conditional=False)
    by_scipy /= ref.sf(1.0)
    assert expected == pytest.approx(by_scipy, rel=1e-9)
    # measured: at most 5.4e-14 apart; allow about five times that
    assert dec.no_study["clear_now"] == pytest.approx(expected, rel=3e-13)


@pytest.mark.parametrize(("low", "high", "noted"), [(1.1, 10.0, True), (0.8, 4.0, True), (1.5, 4.0, False)])
def test_a_decision_notes_the_share_of_the_prior_at_or_below_one(low: float, high: float, noted: bool) -> None:
    prior = EffectPrior.from_interval(low, high, 0.9)
    share = stats.lognorm(s=prior.log_sd, scale=prior.median).cdf(1.0)  # 3.7 %, 12 %, 0.13 %
    assert (share > 0.01) == noted
    prob = fixed_size_problem("reference-rate", 1e-3, 1.0, 5.0, prior, CONSTANT, "exact", 500)
    dec = optimize(prob)
    notes = [w for w in dec.warnings if "at or below a ratio of 1" in w]
    if noted:
        assert len(notes) == 1 and f"{100 * share:.3g} %" in notes[0]
    else:
        assert notes == []
