"""The decision rule in counts and the normal test's real false-alarm probability, against scipy.

Every threshold is checked at the boundary with scipy's own tests: the
p-value of the threshold count is at most the cut-off and that of one count
fewer is above it (``scipy.stats.poisson.sf``, ``scipy.stats.binomtest``,
``scipy.stats.fisher_exact``, ``scipy.stats.hypergeom``).  The real
false-alarm probability of the normal test is checked against a brute-force
sum over every count outcome with scipy's distributions, the test statistic
written out here from its textbook form (Fleiss, Levin & Paik 2003, ch. 4;
Breslow & Day 1987, ch. 7).
"""

from __future__ import annotations

import math
import warnings
from typing import Any

import numpy as np
import pytest
from scipy import special, stats

from decide import power
from decide.designs import get_design
from decide.engine.rule import TABLE_MASS, decision_rule
from decide.engine.study import Setting, check_setting
from decide.errors import ApproximationWarning


def _half_up(x: float) -> int:
    return math.floor(x + 0.5)


def _setting(
    design: str,
    baseline: float,
    allocation: float | None,
    years: float | None,
    sides: int = 1,
    continuity: bool = False,
) -> Setting:
    return check_setting(design, baseline, allocation, years, sides, "auto", continuity)


# --------------------------------------------------------------------------
# one group: the exact Poisson test


@pytest.mark.parametrize("expected", [0.3, 2.16, 7.5, 40.0])
@pytest.mark.parametrize("alpha", [0.001, 0.05, 0.2, 0.9])
def test_one_group_exact_threshold_against_poisson_sf(expected: float, alpha: float) -> None:
    years = 2.0
    n = 1000
    s = _setting("reference-rate", expected / (n * years), None, years)
    r = decision_rule(s, n, alpha, exact=True, effect=2.0)
    c = r.flag_at_least
    assert c is not None
    # scipy.stats.poisson.sf(c - 1, E) = P(O >= c)
    assert stats.poisson.sf(c - 1, expected) <= alpha
    assert c == 0 or stats.poisson.sf(c - 2, expected) > alpha
    assert r.expected_null == pytest.approx(expected, rel=1e-12)
    assert r.cutoff is not None
    assert r.cutoff[0] == pytest.approx(stats.poisson.sf(c - 1, expected), rel=1e-10)
    assert r.cutoff[1] == pytest.approx(stats.poisson.sf(c - 2, expected) if c >= 1 else math.inf, rel=1e-10)
    # the exact test's false-alarm probability is that of its region
    assert r.false_alarm == pytest.approx(stats.poisson.sf(c - 1, expected), rel=1e-9, abs=1e-13)


@pytest.mark.parametrize("expected", [2.0, 12.0])
def test_one_group_two_sided_thresholds(expected: float) -> None:
    alpha = 0.05
    s = _setting("reference-rate", expected / 500, None, 1.0, sides=2)
    r = decision_rule(s, 500, alpha, exact=True, effect=2.0)
    c, a = r.flag_at_least, r.flag_at_most

    def p(x: int) -> float:  # central two-sided p-value, twice the smaller tail
        return min(1.0, 2 * min(float(stats.poisson.sf(x - 1, expected)), float(stats.poisson.cdf(x, expected))))

    assert c is not None and p(c) <= alpha < p(c - 1)
    if a is None:  # no count is low enough: even 0 is not significant
        assert p(0) > alpha
    else:
        assert p(a) <= alpha < p(a + 1)


def test_water_supply_cut_off_is_shown_in_the_safe_direction() -> None:
    """Invented example: 2.16 cases expected; the region of 5 or more cases.

    The cut-off is the p-value of 5 cases, 0.0682412...; printed with 4
    significant digits it would read 0.06824, below the p-value of 5 cases.
    """
    expected = 2.16
    cut = float(stats.poisson.sf(4, expected))  # P(O >= 5) = 0.068241...
    s = _setting("reference-rate", expected / 10_000, None, 1.0)
    r = decision_rule(s, 10_000, cut, exact=True, effect=3.0)
    assert r.flag_at_least == 5
    shown = float(r.cutoff_shown)
    assert cut <= shown < stats.poisson.sf(3, expected)
    assert r.cutoff_shown == "0.06825"
    # a p-value of 5 cases printed to 6 digits also reads as a flag
    assert round(cut, 6) <= shown
    assert "5 or more cases" in r.statement and "2.16 expected" in r.statement


def test_shown_cut_off_prefers_the_nominal_alpha_when_it_reproduces_the_rule() -> None:
    s = _setting("reference-rate", 3e-4, None, 1.0)
    r = decision_rule(s, 10_000, 0.05, exact=True, effect=3.0)
    assert r.cutoff_shown == "0.05"
    assert r.cutoff is not None and r.cutoff[0] <= 0.05 < r.cutoff[1]


# --------------------------------------------------------------------------
# two groups: conditional thresholds


@pytest.mark.parametrize("sides", [1, 2])
@pytest.mark.parametrize(
    ("n", "allocation", "rate", "years", "alpha"),
    [(2000, 1.0, 1e-3, 5.0, 0.05), (800, 2.0, 5e-4, 4.0, 0.01), (300, 0.5, 2e-3, 3.0, 0.3)],
)
def test_cohort_rate_thresholds_against_binomtest(
    n: int, allocation: float, rate: float, years: float, alpha: float, sides: int
) -> None:
    s = _setting("cohort-rate", rate, allocation, years, sides)
    r = decision_rule(s, n, alpha, exact=True, effect=2.0)
    n0 = _half_up(allocation * n)
    share = n / (n + n0)
    alternative = "greater" if sides == 1 else "two-sided"
    assert r.thresholds
    for row in r.thresholds:
        t, c = row.total, row.flag_at_least
        if c is None:
            assert sides == 2 or stats.binom.sf(t - 1, t, share) > alpha
            continue

        def p(x: int, t: int = t) -> float:
            if sides == 1:
                return float(stats.binomtest(x, t, share, alternative=alternative).pvalue)
            return min(1.0, 2 * min(float(stats.binom.sf(x - 1, t, share)), float(stats.binom.cdf(x, t, share))))

        assert p(c) <= alpha * (1 + 1e-9)
        assert c == 0 or p(c - 1) > alpha


@pytest.mark.parametrize(
    ("design", "n", "allocation", "baseline", "effect", "alpha"),
    [
        ("cohort-risk", 2150, 1.0, 8e-4, 3.0, 0.05),
        ("cohort-risk", 400, 2.0, 0.01, 2.5, 0.2),
        ("case-control", 60, 1.0, 0.2, 3.0, 0.05),
        ("case-control", 40, 3.0, 0.3, 2.0, 0.01),
    ],
)
def test_fisher_thresholds_against_fisher_exact(
    design: str, n: int, allocation: float, baseline: float, effect: float, alpha: float
) -> None:
    s = _setting(design, baseline, allocation, None)
    r = decision_rule(s, n, alpha, exact=True, effect=effect)
    n0 = _half_up(allocation * n)
    for row in r.thresholds:
        t, c = row.total, row.flag_at_least
        top = min(t, n)
        if c is None:
            # scipy.stats.hypergeom.sf(top - 1, n + n0, n, t): the most extreme table
            assert stats.hypergeom.sf(top - 1, n + n0, n, t) > alpha
            continue
        table = [[c, n - c], [t - c, n0 - t + c]]
        assert stats.fisher_exact(table, alternative="greater")[1] <= alpha * (1 + 1e-9)
        assert stats.hypergeom.sf(c - 1, n + n0, n, t) <= alpha * (1 + 1e-9)
        if c - 1 >= max(0, t - n0):
            assert stats.hypergeom.sf(c - 2, n + n0, n, t) > alpha


def test_totals_carry_the_stated_mass_under_both_hypotheses() -> None:
    n, rate, years, effect = 2000, 1e-3, 5.0, 2.0
    r = decision_rule(_setting("cohort-rate", rate, 1.0, years), n, 0.05, exact=True, effect=effect)
    lo, hi = r.thresholds[0].total, r.thresholds[-1].total
    for mean in (2 * n * years * rate, (1 + effect) * n * years * rate):
        # scipy.stats.poisson: the total of two Poisson counts is Poisson
        mass = stats.poisson.cdf(hi, mean) - stats.poisson.cdf(lo - 1, mean)
        assert mass >= TABLE_MASS
    assert [row.total for row in r.thresholds] == list(range(lo, hi + 1))


# --------------------------------------------------------------------------
# the normal test from counts: brute force


def _statistic(
    design: str, x1: Any, x0: Any, n: float, n0: float, baseline: float, years: float, continuity: bool
) -> Any:
    """The normal statistic toward harm, written out from its textbook form."""
    if design == "reference-rate":
        return 2 * (np.sqrt(x1) - np.sqrt(baseline * n * years))
    if design == "cohort-rate":
        share = n / (n + n0)
        with np.errstate(divide="ignore", invalid="ignore"):
            z = (np.log(x1 / n) - np.log(x0 / n0)) * np.sqrt((x1 + x0) * share * (1 - share))
        return np.where((x1 > 0) & (x0 > 0), z, np.nan)  # no log rate ratio without a case in each group
    pooled = (x1 + x0) / (n + n0)
    cc = (1 / n + 1 / n0) / 2 if continuity else 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        return (x1 / n - x0 / n0 - cc) / np.sqrt(pooled * (1 - pooled) * (1 / n + 1 / n0))


def _brute_false_alarm(
    design: str, n: int, allocation: float, baseline: float, years: float, alpha: float, continuity: bool = False
) -> float:
    z = -special.ndtri(alpha)
    n0 = 0 if design == "reference-rate" else _half_up(allocation * n)
    if design == "reference-rate":
        x1 = np.arange(0, 2000)
        pmf1 = stats.poisson.pmf(x1, baseline * n * years)
        return float(pmf1[_statistic(design, x1, 0, n, n0, baseline, years, continuity) >= z].sum())
    if design == "cohort-rate":
        x1 = np.arange(0, 1500)
        x0 = np.arange(0, 1500)
        pmf1 = stats.poisson.pmf(x1, baseline * n * years)
        pmf0 = stats.poisson.pmf(x0, baseline * n0 * years)
    else:
        x1, x0 = np.arange(0, n + 1), np.arange(0, n0 + 1)
        pmf1, pmf0 = stats.binom.pmf(x1, n, baseline), stats.binom.pmf(x0, n0, baseline)
    zz = _statistic(design, x1[:, None], x0[None, :], n, n0, baseline, years, continuity)
    return float((pmf1[:, None] * pmf0[None, :] * (zz >= z)).sum())


@pytest.mark.parametrize(
    ("design", "n", "allocation", "baseline", "years", "alpha", "continuity"),
    [
        ("reference-rate", 5000, None, 2e-3, 1.0, 0.05, False),
        ("reference-rate", 300, None, 1e-2, 1.0, 0.01, False),
        ("cohort-rate", 1000, 1.0, 2e-3, 5.0, 0.05, False),
        ("cohort-rate", 600, 2.0, 1e-3, 10.0, 0.1, False),
        ("cohort-risk", 400, 1.0, 0.05, None, 0.05, False),
        ("cohort-risk", 300, 1.5, 0.08, None, 0.025, True),
        ("case-control", 150, 1.0, 0.2, None, 0.05, False),
    ],
)
def test_normal_false_alarm_against_brute_force(
    design: str,
    n: int,
    allocation: float | None,
    baseline: float,
    years: float | None,
    alpha: float,
    continuity: bool,
) -> None:
    want = _brute_false_alarm(design, n, allocation or 1.0, baseline, years or 1.0, alpha, continuity)
    with warnings.catch_warnings():  # few expected cases: the approximation warning is not under test
        warnings.simplefilter("ignore", ApproximationWarning)
        res = power(
            design,
            [alpha, alpha],
            [n, n],
            2.0,
            baseline,
            allocation=allocation,
            years=years,
            test="normal",
            continuity=continuity,
        )
    got = res.false_alarm()
    assert got == pytest.approx([want, want], rel=1e-7, abs=1e-12)
    # the nominal level is not the real one
    assert abs(want - alpha) > 1e-6
    s = _setting(design, baseline, allocation, years, continuity=continuity)
    r = decision_rule(s, n, alpha, exact=False, effect=2.0)
    assert r.false_alarm == pytest.approx(want, rel=1e-7, abs=1e-12)


def test_false_alarm_of_exact_tests_is_the_attained_alpha_and_of_huge_studies_not_computed() -> None:
    res = power("cohort-rate", 0.05, [500, 2_000_000], 2.0, 1e-3, years=5.0, test="auto")
    got = res.false_alarm()
    assert res.exact[0] and got[0] == res.attained_alpha[0]
    assert not res.exact[1] and np.isnan(got[1])


@pytest.mark.parametrize(
    ("design", "n", "allocation", "baseline", "years", "sides"),
    [
        ("cohort-rate", 1000, 1.0, 2e-3, 5.0, 1),
        ("cohort-rate", 1000, 2.0, 2e-3, 5.0, 2),
        ("cohort-risk", 400, 1.0, 0.05, None, 1),
        ("case-control", 150, 2.0, 0.2, None, 2),
    ],
)
def test_normal_thresholds_against_the_statistic(
    design: str, n: int, allocation: float, baseline: float, years: float | None, sides: int
) -> None:
    alpha = 0.05
    z = -special.ndtri(alpha / sides)
    s = _setting(design, baseline, allocation, years, sides)
    r = decision_rule(s, n, alpha, exact=False, effect=2.0)
    n0 = _half_up(allocation * n)
    assert r.thresholds
    for row in r.thresholds:
        t = row.total
        lo, hi = (max(0, t - n0), min(t, n)) if design != "cohort-rate" else (0, t)
        x = np.arange(lo, hi + 1)
        zz = _statistic(design, x.astype(float), (t - x).astype(float), n, n0, baseline, years or 1.0, False)
        up = x[zz >= z]
        assert row.flag_at_least == (int(up.min()) if up.size else None)
        if sides == 2:
            down = x[zz <= -z]
            assert row.flag_at_most == (int(down.max()) if down.size else None)


def test_normal_one_group_threshold_is_the_square_root_rule() -> None:
    expected, alpha = 30.0, 0.05
    s = _setting("reference-rate", expected / 1000, None, 1.0)
    r = decision_rule(s, 1000, alpha, exact=False, effect=2.0)
    z = -special.ndtri(alpha)
    # 2 (sqrt(O) - sqrt(E)) >= z  <=>  O >= (sqrt(E) + z/2)^2
    assert r.flag_at_least == math.ceil((math.sqrt(expected) + z / 2) ** 2)


def test_normal_statistic_is_undefined_without_cases() -> None:
    d = get_design("cohort-risk")
    up, down = d.normal_statistic(
        np.array([0.0]), np.array([0.0]), np.array([10.0]), np.array([0.1]), np.array([1.0]), np.array([1.0]), False
    )
    assert np.isnan(up).all() and np.isnan(down).all()


def test_solve_reports_the_normal_test_real_false_alarm() -> None:
    from decide.engine.solve import solve

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ApproximationWarning)
        sol = solve("cohort-rate", baseline=2e-3, alpha=0.05, n_per_group=1000, effect=2.0, years=5.0, test="normal")
    assert sol.false_alarm == pytest.approx(_brute_false_alarm("cohort-rate", 1000, 1.0, 2e-3, 5.0, 0.05), rel=1e-7)
    assert sol.attained_alpha == pytest.approx(0.05)  # the normal approximation's own level


def test_grouped_thresholds_cover_every_total_once() -> None:
    from decide.report.rule_words import runs

    s = _setting("cohort-risk", 0.01, 1.0, None)
    r = decision_rule(s, 3000, 0.05, exact=True, effect=1.5)
    groups = runs(r)
    spelled = {t: (up, down) for first, last, up, down in groups for t in range(first, last + 1)}
    assert spelled == {row.total: (row.flag_at_least, row.flag_at_most) for row in r.thresholds}
    assert all(a[2:] != b[2:] for a, b in zip(groups, groups[1:], strict=False))


@pytest.mark.parametrize("design", ["reference-rate", "cohort-rate", "cohort-risk"])
@pytest.mark.parametrize("exact", [True, False])
def test_extreme_levels_give_a_stated_rule(design: str, exact: bool) -> None:
    s = _setting(design, 1e-3, None if design == "reference-rate" else 1.0, None if design == "cohort-risk" else 1.0)
    never = decision_rule(s, 5, 0.0, exact=exact, effect=2.8)
    assert never.false_alarm == 0.0 and never.statement == "No outcome of the study flags the exposure."
    tiny = decision_rule(s, 50, 1e-300, exact=exact, effect=2.8)
    assert tiny.false_alarm is not None and tiny.false_alarm <= 1e-15
    loose = decision_rule(s, 50, 0.99999, exact=exact, effect=2.8)
    assert loose.false_alarm is not None and 0 < loose.false_alarm <= 1.0
    if design == "reference-rate" and exact:  # 0.05 expected: any case at all flags
        assert loose.flag_at_least == 1
        assert loose.false_alarm == pytest.approx(stats.poisson.sf(0, 0.05), rel=1e-9)
    if exact:  # an exact test never exceeds its level
        assert loose.false_alarm <= 0.99999 * (1 + 1e-9)
