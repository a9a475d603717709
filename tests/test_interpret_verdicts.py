"""The normal statistics a verdict reads, against statsmodels, and the verdict rule itself.

Counts are invented.
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import pytest
from scipy import special
from statsmodels.stats import rates as sm_rates
from statsmodels.stats.proportion import proportions_ztest
from test_interpret_exact import cc, rate, ref, risk

from decide.decision.interpret import Evidence, evidence, policy_verdict
from decide.decision.observed import READERS
from decide.decision.optimize import Decision, optimize
from decide.scenario import load_scenario

REPO_SCENARIO = Path(__file__).resolve().parents[1] / "scenarios" / "water-supply-reference.toml"


@pytest.mark.parametrize(("x1", "t1", "x0", "t0"), [(5, 2.0e4, 2, 2.1e4), (40, 1e5, 55, 2.2e5), (3, 900.0, 9, 800.0)])
def test_rate_statistic_is_the_score_log_statistic_of_statsmodels(x1: int, t1: float, x0: int, t0: float) -> None:
    # statsmodels 0.15: test_poisson_2indep(x1, t1, x0, t0, method="score-log").statistic
    # (log rate ratio over its standard error at the pooled rate)
    want = sm_rates.test_poisson_2indep(x1, t1, x0, t0, method="score-log", alternative="larger").statistic
    assert evidence(rate(x1, t1, x0, t0)).z == pytest.approx(want, rel=1e-10)


@pytest.mark.parametrize(("x", "e"), [(7, 4.2), (0, 2.0), (30, 18.5)])
def test_reference_statistic_is_the_square_root_statistic_of_statsmodels(x: int, e: float) -> None:
    # statsmodels 0.15: test_poisson(x, e, 1.0, method="sqrt").statistic, that is 2 (sqrt(x) - sqrt(e))
    want = sm_rates.test_poisson(x, e, 1.0, method="sqrt", alternative="larger").statistic
    assert evidence(ref(x, e)).z == pytest.approx(want, rel=1e-12, abs=1e-12)


@pytest.mark.parametrize(("a", "n1", "b", "n0"), [(30, 200, 40, 400), (4, 2150, 1, 2150), (9, 90, 3, 120)])
def test_two_proportion_statistic_is_the_pooled_z_of_statsmodels(a: int, n1: int, b: int, n0: int) -> None:
    # statsmodels 0.15: proportions_ztest([a, b], [n1, n0], alternative="larger")[0] (pooled variance)
    want = proportions_ztest([a, b], [n1, n0], alternative="larger")[0]
    assert evidence(risk(a, n1, b, n0)).z == pytest.approx(want, rel=1e-10)
    assert evidence(cc(n1, a, n0, b)).z == pytest.approx(want, rel=1e-10)
    # closed form: the continuity correction (1/n1 + 1/n0) / 2 comes off the difference of proportions
    diff = a / n1 - b / n0
    corr = (1 / n1 + 1 / n0) / 2
    assert evidence(risk(a, n1, b, n0)).z_cc == pytest.approx(want * (diff - corr) / diff, rel=1e-10)


def test_no_spread_gives_statistic_zero_and_infinite_ratios_give_infinite_statistics() -> None:
    assert evidence(risk(0, 50, 0, 50)).z == 0.0
    assert evidence(rate(4, 1e4, 0, 1e4)).z == math.inf
    assert evidence(rate(0, 1e4, 4, 1e4)).z == -math.inf


def _decision() -> Decision:
    return optimize(load_scenario(REPO_SCENARIO).problem)


def test_exact_verdict_flags_at_the_cut_off_and_not_above_it() -> None:
    d = replace(_decision(), test="exact", alpha=0.05, sides=1)
    at = Evidence(p_upper=0.05, p_lower=0.99, p_mid=0.03, z=0.0, z_cc=0.0)
    above = replace(at, p_upper=0.05 * (1 + 1e-6))
    assert policy_verdict(d, at) == "flag" and policy_verdict(d, above) == "clear"
    # two-sided: twice the smaller tail, and only a deviation towards harm flags
    d2 = replace(d, sides=2)
    assert policy_verdict(d2, replace(at, p_upper=0.02)) == "flag"
    assert policy_verdict(d2, replace(at, p_upper=0.03)) == "clear"
    assert policy_verdict(d2, replace(at, p_upper=0.999, p_lower=0.001)) == "clear"


def test_normal_verdict_compares_the_statistic_with_the_critical_value() -> None:
    d = replace(_decision(), test="normal", alpha=0.05, sides=1)
    z = float(-special.ndtri(0.05))  # 1.645, closed form
    ev = Evidence(p_upper=1.0, p_lower=1.0, p_mid=1.0, z=z + 1e-9, z_cc=z - 1e-9)
    assert policy_verdict(d, ev) == "flag"
    assert policy_verdict(replace(d, test="normal-cc"), ev) == "clear"
    assert policy_verdict(replace(d, sides=2), ev) == "clear"  # two-sided critical value 1.96
    assert policy_verdict(replace(d, test=None, alpha=None), ev) is None


def test_every_design_has_a_reader_and_method() -> None:
    from decide.decision.interpret import _METHODS
    from decide.designs import DESIGNS

    assert set(READERS) == set(_METHODS) == set(DESIGNS)
