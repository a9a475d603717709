"""Exact intervals, p-values and likelihoods of observed counts, against scipy and statsmodels.

Each check pastes the outside call it compares with.  Counts are invented.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy import stats
from scipy.stats.contingency import odds_ratio
from statsmodels.stats import rates as sm_rates

from decide.decision.interpret import _conditional_mle, _law_interval, evidence
from decide.decision.observed import (
    READERS,
    Counts,
    fisher_log_pmf,
    fisher_support,
    log_likelihood,
    odds_to_risk,
    risk_to_odds,
)


def rate(x1: int, t1: float, x0: int, t0: float) -> Counts:
    return READERS["cohort-rate"].read(
        {"cases_exposed": x1, "person_years_exposed": t1, "cases_unexposed": x0, "person_years_unexposed": t0}, 1e-3
    )


def risk(x1: int, n1: int, x0: int, n0: int) -> Counts:
    return READERS["cohort-risk"].read(
        {"cases_exposed": x1, "n_exposed": n1, "cases_unexposed": x0, "n_unexposed": n0}, 1e-3
    )


def cc(n1: int, x1: int, n0: int, x0: int) -> Counts:
    return READERS["case-control"].read(
        {"cases": n1, "exposed_cases": x1, "controls": n0, "exposed_controls": x0}, 0.05
    )


def ref(x: int, e: float) -> Counts:
    return READERS["reference-rate"].read({"cases": x, "expected": e}, 1e-4)


RATE_CASES = [(5, 20000.0, 2, 21000.0), (0, 1500.0, 3, 900.0), (12, 3.0e4, 0, 5.0e4), (40, 1e5, 55, 2.2e5)]
TABLES = [(4, 2150, 1, 2150), (30, 200, 40, 400), (0, 500, 6, 800), (7, 90, 0, 120), (3, 40, 5, 41)]


@pytest.mark.parametrize(("x1", "t1", "x0", "t0"), RATE_CASES)
def test_rate_p_value_matches_statsmodels_and_scipy(x1: int, t1: float, x0: int, t0: float) -> None:
    ev = evidence(rate(x1, t1, x0, t0))
    # statsmodels 0.15: test_poisson_2indep(x1, t1, x0, t0, method="exact-cond", alternative="larger").pvalue
    with warnings.catch_warnings():  # statsmodels divides by a zero rate for its summary ratio only
        warnings.simplefilter("ignore", RuntimeWarning)
        sm = sm_rates.test_poisson_2indep(x1, t1, x0, t0, method="exact-cond", alternative="larger").pvalue
    # scipy 1.17: binomtest(x1, x1 + x0, p=t1 / (t1 + t0), alternative="greater").pvalue
    sp = stats.binomtest(x1, x1 + x0, p=t1 / (t1 + t0), alternative="greater").pvalue
    assert ev.p_upper == pytest.approx(sm, rel=1e-10)
    assert ev.p_upper == pytest.approx(sp, rel=1e-10)


@pytest.mark.parametrize(("x1", "t1", "x0", "t0"), RATE_CASES)
@pytest.mark.parametrize("conf", [0.9, 0.95, 0.99])
def test_rate_interval_matches_clopper_pearson_in_scipy(x1: int, t1: float, x0: int, t0: float, conf: float) -> None:
    low, high = _law_interval(rate(x1, t1, x0, t0), conf)
    # scipy 1.17: binomtest(x1, x1 + x0).proportion_ci(confidence_level=conf, method="exact"),
    # a share pi carried to the rate ratio pi / (1 - pi) * t0 / t1
    ci = stats.binomtest(x1, x1 + x0).proportion_ci(confidence_level=conf, method="exact")
    assert low == pytest.approx(ci.low / (1 - ci.low) * t0 / t1, rel=1e-9, abs=1e-300)
    if ci.high == 1:
        assert math.isinf(high)
    else:
        assert high == pytest.approx(ci.high / (1 - ci.high) * t0 / t1, rel=1e-9)


@pytest.mark.parametrize(("x1", "t1", "x0", "t0"), [c for c in RATE_CASES if c[2] > 0])
def test_rate_upper_limit_inverts_the_statsmodels_test(x1: int, t1: float, x0: int, t0: float) -> None:
    _, high = _law_interval(rate(x1, t1, x0, t0), 0.95)
    # statsmodels 0.15: test_poisson_2indep(x1, t1, x0, t0, value=high, method="exact-cond",
    # alternative="smaller").pvalue is 0.025 at the upper limit of the 95% interval
    p = sm_rates.test_poisson_2indep(x1, t1, x0, t0, value=high, method="exact-cond", alternative="smaller").pvalue
    assert p == pytest.approx(0.025, rel=1e-7)


@pytest.mark.parametrize(("x", "e"), [(7, 4.2), (0, 2.142), (1, 0.3), (150, 120.5)])
def test_reference_rate_against_scipy_poisson_and_statsmodels(x: int, e: float) -> None:
    c = ref(x, e)
    # scipy 1.17: poisson.sf(x - 1, e) is P(X >= x)
    assert evidence(c).p_upper == pytest.approx(stats.poisson.sf(x - 1, e), rel=1e-12)
    # statsmodels 0.15: sm_rates.confint_poisson(x, e, method="exact-c", alpha=0.05)  (Garwood's interval)
    low, high = _law_interval(c, 0.95)
    sm_low, sm_high = sm_rates.confint_poisson(x, e, method="exact-c", alpha=0.05)
    assert low == pytest.approx(float(sm_low), rel=1e-10, abs=1e-300)
    assert high == pytest.approx(float(sm_high), rel=1e-10)


@pytest.mark.parametrize(("a", "n1", "b", "n0"), TABLES)
def test_fisher_p_value_and_odds_interval_match_scipy(a: int, n1: int, b: int, n0: int) -> None:
    table = [[a, n1 - a], [b, n0 - b]]
    c = risk(a, n1, b, n0)
    # scipy 1.17: fisher_exact(table, alternative="greater").pvalue
    assert evidence(c).p_upper == pytest.approx(stats.fisher_exact(table, alternative="greater").pvalue, rel=1e-9)
    # scipy 1.17: odds_ratio(table, kind="conditional").confidence_interval(confidence_level=0.95)
    ci = odds_ratio(table, kind="conditional").confidence_interval(confidence_level=0.95)
    low, high = _law_interval(c, 0.95)
    assert low == pytest.approx(ci.low, rel=1e-6, abs=1e-12)
    assert high == pytest.approx(ci.high, rel=1e-6) if math.isfinite(ci.high) else math.isinf(high)


@pytest.mark.parametrize(("a", "n1", "b", "n0"), TABLES)
def test_case_control_estimate_is_scipys_conditional_mle(a: int, n1: int, b: int, n0: int) -> None:
    c = cc(n1, a, n0, b)
    # scipy 1.17: odds_ratio([[a, n1 - a], [b, n0 - b]], kind="conditional").statistic
    want = odds_ratio([[a, n1 - a], [b, n0 - b]], kind="conditional").statistic
    got = _conditional_mle(c)
    if math.isinf(want):
        assert got is None
    else:
        assert got == pytest.approx(want, rel=1e-6, abs=1e-12)


@given(n1=st.integers(1, 60), n0=st.integers(1, 60), frac=st.floats(0, 1), psi=st.floats(0.05, 20.0))
def test_fisher_law_is_scipys_noncentral_hypergeometric(n1: int, n0: int, frac: float, psi: float) -> None:
    t = int(round(frac * (n1 + n0)))
    x1 = min(t, n1)
    c = Counts("case-control", "fisher", x1, t - x1, float(n1), float(n0), {})
    x = fisher_support(c)
    # scipy 1.17: nchypergeom_fisher.pmf(x, M=n1 + n0, n=n1, N=t, odds=psi)
    want = stats.nchypergeom_fisher.pmf(x, n1 + n0, n1, t, psi)
    np.testing.assert_allclose(np.exp(fisher_log_pmf(c, np.asarray(np.log(psi)))), want, rtol=1e-8, atol=1e-300)


def test_likelihoods_are_scipys_laws() -> None:
    theta = np.array([0.5, 1.0, 2.0, 7.0])
    c = rate(5, 2.0e4, 2, 2.1e4)
    share = theta * 2.0e4 / (theta * 2.0e4 + 2.1e4)
    # scipy 1.17: binom.logpmf(5, 7, share)
    np.testing.assert_allclose(log_likelihood(c, theta), stats.binom.logpmf(5, 7, share), rtol=1e-12)
    c = ref(7, 4.2)
    # scipy 1.17: poisson.logpmf(7, theta * 4.2)
    np.testing.assert_allclose(log_likelihood(c, theta), stats.poisson.logpmf(7, theta * 4.2), rtol=1e-12)


@given(theta=st.floats(0.01, 500.0), p0=st.floats(1e-6, 0.5))
def test_risk_and_odds_ratios_round_trip(theta: float, p0: float) -> None:
    # closed form: the odds ratio of exposed risk theta * p0 against p0
    if theta * p0 >= 1:
        return
    psi = float(risk_to_odds(np.asarray(theta), p0))
    p1 = theta * p0
    assert psi == pytest.approx(p1 / (1 - p1) / (p0 / (1 - p0)), rel=1e-10)
    assert float(odds_to_risk(np.asarray(psi), p0)) == pytest.approx(theta, rel=1e-9)


def test_zero_cases_give_one_sided_intervals_and_no_infinite_numbers() -> None:
    # no exposed case: lower limit 0, upper finite
    low, high = _law_interval(risk(0, 500, 6, 800), 0.95)
    assert low == 0 and math.isfinite(high)
    # no unexposed case: no upper limit
    low, high = _law_interval(rate(12, 3.0e4, 0, 5.0e4), 0.95)
    assert low > 0 and math.isinf(high)
    # no case at all: nothing ruled out, p-value 1, statistic 0
    c = rate(0, 3.0e4, 0, 5.0e4)
    assert _law_interval(c, 0.95) == (0.0, math.inf)
    ev = evidence(c)
    assert ev.p_upper == 1.0 and ev.z == 0.0
    c = risk(0, 100, 0, 100)
    assert _law_interval(c, 0.95) == (0.0, math.inf)
    assert evidence(c).p_upper == 1.0
    # reference rate with no case: Garwood's upper limit, -ln(0.025) / E in closed form
    low, high = _law_interval(ref(0, 2.0), 0.95)
    assert low == 0 and high == pytest.approx(-math.log(0.025) / 2.0, rel=1e-12)


@given(
    law=st.sampled_from(["poisson", "binomial", "fisher"]),
    x1=st.integers(0, 30),
    x0=st.integers(0, 30),
    size=st.floats(0.5, 40.0),
    tail=st.floats(0.005, 0.2),
)
def test_interval_inverts_the_one_sided_test(law: str, x1: int, x0: int, size: float, tail: float) -> None:
    """The lower limit of the (1 - 2 tail) interval is above 1 exactly when the one-sided p-value is below tail."""
    if law == "poisson":
        c = ref(x1, size)
    elif law == "binomial":
        c = rate(x1, 1000.0 * size, x0, 1000.0)
    else:
        c = cc(x1 + 3 + int(size), x1, x0 + 5, x0)
    p = evidence(c).p_upper
    low, high = _law_interval(c, 1 - 2 * tail)
    assert low <= high
    if abs(p - tail) > 1e-9 * tail:
        assert (p < tail) == (low > 1.0), (p, tail, low)


@pytest.mark.parametrize(("x1", "t1", "x0", "t0"), RATE_CASES)
def test_mid_p_values_against_statsmodels_and_scipy(x1: int, t1: float, x0: int, t0: float) -> None:
    with warnings.catch_warnings():  # statsmodels divides by a zero rate for its summary ratio only
        warnings.simplefilter("ignore", RuntimeWarning)
        # statsmodels 0.15: test_poisson_2indep(x1, t1, x0, t0, method="cond-midp", alternative="larger").pvalue
        sm = sm_rates.test_poisson_2indep(x1, t1, x0, t0, method="cond-midp", alternative="larger").pvalue
    assert evidence(rate(x1, t1, x0, t0)).p_mid == pytest.approx(sm, rel=1e-10)


@pytest.mark.parametrize(("a", "n1", "b", "n0"), TABLES)
def test_fisher_and_poisson_mid_p_values_against_scipy(a: int, n1: int, b: int, n0: int) -> None:
    # scipy 1.17: hypergeom.sf(a, n1 + n0, n1, a + b) + hypergeom.pmf(a, n1 + n0, n1, a + b) / 2
    want = stats.hypergeom.sf(a, n1 + n0, n1, a + b) + stats.hypergeom.pmf(a, n1 + n0, n1, a + b) / 2
    assert evidence(risk(a, n1, b, n0)).p_mid == pytest.approx(want, rel=1e-9)
    # scipy 1.17: poisson.sf(a, 3.5) + poisson.pmf(a, 3.5) / 2
    want = stats.poisson.sf(a, 3.5) + stats.poisson.pmf(a, 3.5) / 2
    assert evidence(ref(a, 3.5)).p_mid == pytest.approx(want, rel=1e-10)
