"""The loss-optimal decision against closed-form Bayes rules.

Where the decision problem has a closed-form answer, ``optimize`` must find
it.  Every expected value here is computed in the test from the formula
(an identity), never pasted.

Sources
-------
* Berger, J. O. (1985). *Statistical Decision Theory and Bayesian Analysis*,
  2nd ed., Springer, sec. 4.4.3: the Bayes test rejects when the likelihood
  ratio exceeds ``k = (1 - p) F / (p M)`` (from memory); this is the
  likelihood-ratio form of the Neyman-Pearson lemma.
* For a one-sided z-test with shift ``d`` the likelihood ratio is
  ``exp(z d - d**2 / 2)``, so the Bayes critical value is
  ``z* = (ln k + d**2 / 2) / d`` (identity).
* Joint optimum over ``n``: by the envelope theorem the marginal value of a
  subject, ``p M phi(z* - d) d / (2 n)``, equals its cost (identity).
* Exact Poisson test: the likelihood ratio ``SIR**x exp(-(SIR - 1) E)``
  rises with ``x``, so the Bayes critical count is
  ``c* = floor((ln k + (SIR - 1) E) / ln SIR) + 1`` (identity).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize as sopt
from scipy import stats

from decide.decision.optimize import optimize
from decide.decision.prior import EffectPrior
from decide.decision.problem import Consequences, Constraints, Problem, Study


def reference_problem(
    p: float,
    false_alarm: float,
    missed: float,
    sir: float,
    *,
    baseline: float,
    years: float,
    test: str,
    per_subject: float = 1.0,
    fixed: float = 0.0,
    n: int | None = None,
    max_n: int | None = None,
) -> Problem:
    """A reference-rate (SIR) problem with a point effect and a constant missed cost."""
    cons = Constraints() if n is None else Constraints(min_n_per_group=n, max_n_per_group=n)
    if max_n is not None:
        cons = Constraints(max_n_per_group=max_n)
    return Problem(
        Study("reference-rate", baseline, years=years, test=test),
        EffectPrior.point(sir),
        p,
        Consequences(false_alarm=false_alarm, per_subject=per_subject, fixed=fixed, missed_hazard=missed),
        cons,
    )


def shift(n: float, baseline: float, years: float, sir: float) -> float:
    """d = 2 sqrt(E) (sqrt(SIR) - 1): the square-root statistic's shift in null SDs."""
    return 2 * math.sqrt(n * years * baseline) * (math.sqrt(sir) - 1)


def bayes_z(p: float, false_alarm: float, missed: float, d: float) -> float:
    k = (1 - p) * false_alarm / (p * missed)
    return (math.log(k) + d * d / 2) / d


# (p_harm, false alarm F, missed hazard M, n, SIR, baseline, years); every E = n*years*baseline >= 10
# so no normal test here runs where the normal approximation is flagged as weak.
FIXED_N = [
    (0.3, 1e6, 1e7, 2000, 2.0, 1e-3, 5.0),
    (0.1, 5e6, 1e8, 5000, 1.5, 1e-3, 5.0),
    (0.5, 1e5, 1e5, 4000, 3.0, 1e-3, 5.0),
    (0.05, 1e6, 1e9, 30000, 1.3, 1e-3, 5.0),
    (0.6, 2e6, 3e5, 400, 4.0, 4e-3, 8.0),
    (0.2, 1e7, 1e6, 3000, 2.5, 1e-3, 5.0),  # k = 40, d = 4.5: alpha about 2e-4
]
#: Both errors tiny: alpha about 4e-10 and beta 2e-8; alpha 1e-7 and beta 5e-7.
TINY_ERRORS = [(0.2, 1e7, 1e6, 20000, 2.5, 1e-3, 5.0), (0.6, 2e6, 3e5, 800, 4.0, 4e-3, 8.0)]


@pytest.mark.parametrize(
    ("p", "F", "M", "n", "sir", "baseline", "years"),
    # TINY_ERRORS: beta is tiny, so the missed loss must be computed from miss probabilities
    # directly (computing it as E[M] - E[M * power] once cost alpha 2e-5 of its digits)
    FIXED_N + TINY_ERRORS,
)
def test_normal_fixed_size_alpha_is_the_bayes_critical_value(
    p: float, F: float, M: float, n: int, sir: float, baseline: float, years: float
) -> None:
    # Square-root transform: 2(sqrt(O) - sqrt(E)) ~ N(0, 1) under no effect and
    # N(d, 1) under the SIR, equal spreads, so the z-test closed form applies.
    dec = optimize(reference_problem(p, F, M, sir, baseline=baseline, years=years, test="normal", n=n))
    d = shift(n, baseline, years, sir)
    z = bayes_z(p, F, M, d)
    alpha = stats.norm.sf(z)
    assert dec.test == "normal"
    assert dec.n_per_group == n
    # measured 3.2e-8: the loss is flat at its minimum, so the optimal z is found to about 1e-8; five times
    assert dec.alpha == pytest.approx(alpha, rel=2e-7, abs=0)
    assert dec.attained_alpha == pytest.approx(alpha, rel=2e-7, abs=0)
    assert dec.power is not None
    assert 1 - dec.power == pytest.approx(stats.norm.cdf(z - d), rel=2e-7, abs=0)
    loss = p * M * stats.norm.cdf(z - d) + (1 - p) * F * alpha + 1.0 * n
    assert dec.expected_loss == pytest.approx(loss, rel=1e-9)
    # the defining property: phi(z* - d) / phi(z*) = k
    k = (1 - p) * F / (p * M)
    z_dec = stats.norm.isf(dec.alpha)
    # measured 5.7e-8; about five times
    assert stats.norm.pdf(z_dec - d) / stats.norm.pdf(z_dec) == pytest.approx(k, rel=3e-7)


def marginal_value(n: float, p: float, F: float, M: float, sir: float, baseline: float, years: float) -> float:
    """p M phi(z* - d) d / (2n): the fall in expected error loss per extra subject."""
    d = shift(n, baseline, years, sir)
    z = bayes_z(p, F, M, d)
    return float(p * M * stats.norm.pdf(z - d) * d / (2 * n))


# (p_harm, F, M, SIR, baseline, years, per_subject)
JOINT = [
    (0.3, 1e6, 1e7, 2.0, 1e-3, 5.0, 20.0),
    (0.1, 5e6, 1e8, 1.5, 1e-3, 5.0, 50.0),
    (0.5, 1e5, 2e5, 3.0, 2e-3, 4.0, 2.0),
    (0.2, 3e7, 2e8, 1.8, 5e-4, 10.0, 100.0),
]


@pytest.mark.parametrize(("p", "F", "M", "sir", "baseline", "years", "per_subject"), JOINT)
def test_joint_optimum_meets_the_envelope_condition(
    p: float, F: float, M: float, sir: float, baseline: float, years: float, per_subject: float
) -> None:
    # Envelope theorem (identity): at the optimal n, p M phi(z* - d) d / (2n) equals
    # the cost of one more subject. A reference-rate study has one group, so the
    # cost per exposed subject is per_subject (the comparison group is empty).
    dec = optimize(
        reference_problem(p, F, M, sir, baseline=baseline, years=years, test="normal", per_subject=per_subject)
    )
    assert dec.test == "normal" and dec.feasible
    n = dec.n_per_group
    assert n is not None and dec.n_total == n
    args = (p, F, M, sir, baseline, years)
    # integer rounding: the marginal value is above the cost one subject before
    # the optimum and below it one subject after
    assert marginal_value(n - 1, *args) >= per_subject
    assert marginal_value(n + 1, *args) <= per_subject
    # and the continuous root of the condition is within one subject
    root = sopt.brentq(lambda x: marginal_value(x, *args) - per_subject, n / 4, n * 4, xtol=1e-9)
    assert abs(root - n) <= 1.0
    # alpha at that n is the fixed-n Bayes critical value
    z = bayes_z(p, F, M, shift(n, baseline, years, sir))
    # measured 1.7e-8 (z found to about 1e-8 on a flat loss); about five times
    assert dec.alpha == pytest.approx(stats.norm.sf(z), rel=1e-7, abs=0)


@pytest.mark.parametrize(
    ("p", "F", "M", "n", "sir", "baseline", "years"),
    FIXED_N
    + TINY_ERRORS
    + [
        (0.3, 1e6, 1e7, 1000, 2.0, 1e-3, 5.0),  # E = 5
        (0.5, 1e5, 1e5, 200, 3.0, 1e-3, 5.0),  # E = 1
        (0.05, 1e5, 1e8, 700, 6.0, 1e-3, 2.0),  # E = 1.4, large SIR
    ],
)
def test_exact_fixed_size_critical_count_is_the_bayes_count(
    p: float, F: float, M: float, n: int, sir: float, baseline: float, years: float
) -> None:
    dec = optimize(reference_problem(p, F, M, sir, baseline=baseline, years=years, test="exact", n=n))
    E = n * years * baseline
    k = (1 - p) * F / (p * M)
    c = math.floor((math.log(k) + (sir - 1) * E) / math.log(sir)) + 1
    assert c >= 1  # the test that always flags is not among the attainable ones
    assert dec.test == "exact" and dec.n_per_group == n
    # Reject when O >= c*: attained alpha P(Pois(E) >= c*), power P(Pois(SIR E) >= c*).
    # The exact engine neglects count tails below about 1e-12 in all (documented in
    # decide.power), so probabilities agree to that, absolutely.
    tail = 1e-12
    assert dec.attained_alpha == pytest.approx(stats.poisson.sf(c - 1, E), rel=1e-9, abs=tail)
    assert dec.power == pytest.approx(stats.poisson.sf(c - 1, sir * E), rel=1e-9, abs=tail)
    # and c* beats every other critical count (scipy.stats.poisson, all counts)
    counts = np.arange(1, int(stats.poisson.isf(1e-15, sir * E)) + 2)
    losses = p * M * stats.poisson.cdf(counts - 1, sir * E) + (1 - p) * F * stats.poisson.sf(counts - 1, E)
    assert counts[np.argmin(losses)] == c
    assert dec.loss_parts is not None
    errors = dec.loss_parts["missed"] + dec.loss_parts["false_alarm"]
    assert errors == pytest.approx(losses.min(), rel=1e-9, abs=(p * M + (1 - p) * F) * tail)
