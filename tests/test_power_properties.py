"""Properties of power and the solver (hypothesis, deterministic profile from conftest.py).

- power rises with alpha and size (normal) and with alpha (exact);
- one-sided power rises with the effect (normal where every cell expects at
  least 10, exact everywhere);
- solve-then-evaluate round trips for size, alpha and effect;
- the person-time designs depend on baseline and years only through their
  product (rescaling the time unit changes nothing).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from decide import power
from decide.designs import AUTO_EXACT_BELOW
from decide.engine.exact import ALPHA_FLOOR
from decide.engine.solve import normal_size, solve
from decide.engine.study import check_setting

DESIGNS = ("cohort-risk", "case-control", "cohort-rate", "reference-rate")
#: design, baseline, effect, allocation and years (keywords), sides, continuity
Drawn = tuple[str, float, float, dict[str, Any], int, bool]
quiet = pytest.mark.filterwarnings("ignore::decide.errors.ApproximationWarning")


@st.composite
def studies(
    draw: st.DrawFn,
    designs: tuple[str, ...] = DESIGNS,
    low_baseline: float = 1e-5,
    max_effect: float = 10.0,
    binary: bool | None = None,
) -> Drawn:
    """A design with a baseline, an effect above 1, allocation, years and sides."""
    design = draw(st.sampled_from(designs))
    effect = draw(st.floats(1.1, max_effect))
    baseline = draw(st.floats(low_baseline, 0.5))
    if design == "cohort-risk":
        baseline = min(baseline, 0.9 / effect)
    extra: dict[str, Any] = {}
    if design != "reference-rate":
        extra["allocation"] = draw(st.sampled_from([0.5, 1.0, 2.0, 4.0]))
    if design in ("cohort-rate", "reference-rate"):
        extra["years"] = draw(st.floats(0.5, 10.0))
    sides = draw(st.sampled_from([1, 2]))
    continuity = design in ("cohort-risk", "case-control") and draw(st.booleans())
    return design, baseline, effect, extra, sides, continuity


def _nondecreasing(x: np.ndarray, tol: float = 1e-12) -> bool:
    return bool(np.all(np.diff(x) >= -tol))


# --------------------------------------------------------------------------
# monotonicity


@quiet
@given(studies(), st.floats(0, np.log(1e7)))
def test_normal_power_rises_with_alpha_and_size(study: Drawn, log_n: float) -> None:
    design, baseline, effect, extra, sides, cc = study
    n = float(np.ceil(np.exp(log_n)))
    alphas = np.array([1e-4, 0.001, 0.01, 0.025, 0.05, 0.1, 0.2, 0.4])
    by_alpha = power(design, alphas, n, effect, baseline, sides=sides, test="normal", continuity=cc, **extra)
    assert _nondecreasing(by_alpha.power)
    sizes = np.unique(np.ceil(n * np.geomspace(0.1, 10, 25)))
    by_n = power(design, 0.05, sizes, effect, baseline, sides=sides, test="normal", continuity=cc, **extra)
    assert _nondecreasing(by_n.power)


@quiet
@given(studies(), st.floats(np.log(20), np.log(1e7)), st.sampled_from([0.01, 0.05, 0.1]))
def test_normal_one_sided_power_rises_with_effect(study: Drawn, log_n: float, alpha: float) -> None:
    # Where a cell expects fewer than 10 the normal approximation's null
    # variance grows with the effect faster than the shift, and the formula
    # (like statsmodels' power_proportions_2indep) can dip below alpha just
    # above effect 1; the property is claimed where every cell expects >= 10.
    design, baseline, effect, extra, _, cc = study
    n = float(np.ceil(np.exp(log_n)))
    effects = np.linspace(1.0, effect, 40)
    r = power(design, alpha, n, effects, baseline, test="normal", continuity=cc, **extra)
    trusted = r.smallest_expected_count >= AUTO_EXACT_BELOW
    assume(trusted.sum() >= 2)
    assert _nondecreasing(r.power[trusted])


@quiet
@given(studies(), st.floats(np.log(20), np.log(1e7)), st.sampled_from([0.01, 0.05, 0.1]))
def test_normal_two_sided_power_rises_with_effect_above_alpha(study: Drawn, log_n: float, alpha: float) -> None:
    # Two-sided: with unequal null and alternative variances the test is
    # biased (power dips below alpha just above effect 1); past that dip,
    # power rises with the effect.
    design, baseline, effect, extra, _, cc = study
    n = float(np.ceil(np.exp(log_n)))
    effects = np.linspace(1.0, effect, 40)
    r = power(design, alpha, n, effects, baseline, sides=2, test="normal", continuity=cc, **extra)
    trusted = (r.smallest_expected_count >= AUTO_EXACT_BELOW) & (r.power > r.attained_alpha)
    past = np.cumsum(~trusted[::-1])[::-1] == 0  # the run of trusted effects at the top end
    assume(past.sum() >= 2)
    assert _nondecreasing(r.power[past])


@settings(max_examples=25)
@given(studies(low_baseline=1e-3), st.floats(0.5, 40.0))
def test_exact_power_rises_with_alpha_and_effect(study: Drawn, expected_cases: float) -> None:
    design, baseline, effect, extra, sides, _ = study
    # a size giving a handful of expected cases in the exposed group
    n = float(max(1, round(expected_cases / (baseline * extra.get("years", 1.0)))))
    assume(n <= 5000)
    alphas = np.array([0.001, 0.005, 0.01, 0.025, 0.05, 0.1, 0.2])
    r = power(design, alphas, n, effect, baseline, sides=sides, test="exact", **extra)
    assert _nondecreasing(r.power)
    assert np.all(r.attained_alpha <= alphas)
    assert _nondecreasing(r.attained_alpha)
    # one-sided exact tests reject an upper set of counts: power rises with the effect
    effects = np.linspace(1.0, effect, 12)
    r1 = power(design, 0.05, n, effects, baseline, sides=1, test="exact", **extra)
    assert _nondecreasing(r1.power, tol=1e-10)
    assert r1.power[0] == pytest.approx(r1.attained_alpha[0], rel=1e-9, abs=1e-15)


# --------------------------------------------------------------------------
# round trips, normal test


def _near_tail(
    design: str, alpha: float, n: int, effect: float, baseline: float, sides: int, cc: bool, extra: dict[str, Any]
) -> float:
    """Normal power without the far tail (what the size formula inverts)."""
    r = power(design, alpha / sides, n, effect, baseline, sides=1, test="normal", continuity=cc, **extra)
    return float(r.power)


@quiet
@given(
    studies(low_baseline=1e-4),
    st.floats(0.001, 0.2),
    st.floats(0.5, 0.99),
)
def test_normal_size_round_trip(study: Drawn, alpha: float, target: float) -> None:
    design, baseline, effect, extra, sides, cc = study
    assume(target > alpha + 0.05)
    s = solve(
        design,
        baseline=baseline,
        effect=effect,
        alpha=alpha,
        power=target,
        sides=sides,
        test="normal",
        continuity=cc,
        **extra,
    )
    assert s.test in ("normal", "normal-cc")
    assert s.power >= target
    assert _near_tail(design, alpha, s.n_per_group, effect, baseline, sides, cc, extra) >= target
    if s.n_per_group > 1:
        assert _near_tail(design, alpha, s.n_per_group - 1, effect, baseline, sides, cc, extra) < target


@quiet
@given(studies(low_baseline=1e-4), st.floats(0.005, 0.2), st.floats(0.5, 0.99))
def test_normal_alpha_round_trip(study: Drawn, alpha0: float, target: float) -> None:
    design, baseline, effect, extra, sides, cc = study
    assume(target > alpha0 + 0.05)
    setting = check_setting(design, baseline, extra.get("allocation"), extra.get("years"), sides, "normal", cc)
    n = int(np.ceil(normal_size(setting, np.asarray(alpha0), np.asarray(target), np.asarray(effect))))
    assume(1 <= n <= 10**8)
    s = solve(
        design,
        baseline=baseline,
        effect=effect,
        n_per_group=n,
        power=target,
        sides=sides,
        test="normal",
        continuity=cc,
        **extra,
    )
    assert 0 < s.alpha <= alpha0 * (1 + 1e-9)
    assert _near_tail(design, s.alpha, n, effect, baseline, sides, cc, extra) == pytest.approx(target, rel=1e-9)


@quiet
@given(studies(low_baseline=1e-4), st.floats(0.005, 0.2), st.floats(0.5, 0.99))
def test_normal_effect_round_trip(study: Drawn, alpha: float, target: float) -> None:
    design, baseline, effect0, extra, sides, cc = study
    assume(target > alpha + 0.05)
    setting = check_setting(design, baseline, extra.get("allocation"), extra.get("years"), sides, "normal", cc)
    n = int(np.ceil(normal_size(setting, np.asarray(alpha), np.asarray(target), np.asarray(effect0))))
    assume(1 <= n <= 10**8)
    s = solve(
        design,
        baseline=baseline,
        alpha=alpha,
        n_per_group=n,
        power=target,
        sides=sides,
        test="normal",
        continuity=cc,
        **extra,
    )
    assert 1 < s.effect <= effect0 * (1 + 1e-9)
    assert _near_tail(design, alpha, n, s.effect, baseline, sides, cc, extra) == pytest.approx(target, rel=1e-9)


# --------------------------------------------------------------------------
# round trips, exact test


def _exact_power(
    design: str, alpha: float | np.ndarray, n: int, effect: float, baseline: float, sides: int, extra: dict[str, Any]
) -> np.ndarray:
    return power(design, alpha, n, effect, baseline, sides=sides, test="exact", **extra).power


@settings(max_examples=10)
@given(studies(low_baseline=0.005), st.sampled_from([0.01, 0.05, 0.1]), st.sampled_from([0.5, 0.8, 0.9]))
def test_exact_size_round_trip(study: Drawn, alpha: float, target: float) -> None:
    design, baseline, effect, extra, sides, _ = study
    assume(effect >= 2.0)
    s = solve(design, baseline=baseline, effect=effect, alpha=alpha, power=target, sides=sides, test="exact", **extra)
    assume(s.n_per_group <= 2000)
    n = np.array([s.n_per_group - 1, s.n_per_group, s.n_stable], dtype=float)
    pw = _exact_power(design, alpha, np.maximum(n, 1), effect, baseline, sides, extra)
    assert pw[1] >= target and pw[2] >= target
    assert s.power == pytest.approx(pw[1], rel=1e-12)
    if s.n_per_group > 1:
        assert pw[0] < target


@settings(max_examples=12)
@given(studies(low_baseline=0.005), st.floats(1.0, 30.0), st.sampled_from([0.5, 0.8, 0.9]))
def test_exact_alpha_round_trip(study: Drawn, expected_cases: float, target: float) -> None:
    design, baseline, effect, extra, sides, _ = study
    n = int(max(1, round(expected_cases / (baseline * extra.get("years", 1.0)))))
    assume(n <= 3000)
    top = _exact_power(design, 0.999, n, effect, baseline, sides, extra)
    assume(top >= target)
    s = solve(design, baseline=baseline, effect=effect, n_per_group=n, power=target, sides=sides, test="exact", **extra)
    pw = _exact_power(design, np.array([s.alpha, s.alpha * (1 - 1e-7)]), n, effect, baseline, sides, extra)
    assert pw[0] >= target * (1 - 1e-12)
    assert s.power == pytest.approx(pw[0], rel=1e-12)
    # at an attainable level the size equals the level, up to float rounding
    assert s.attained_alpha <= s.alpha * (1 + 1e-12)
    if s.alpha == ALPHA_FLOOR:
        # reached even at the smallest level exact tests resolve: reported as such
        assert any("smallest level the exact tests resolve" in w for w in s.warnings)
    else:
        # the smallest attainable level: any smaller level rejects less
        assert pw[1] < target


@settings(max_examples=12)
@given(
    studies(low_baseline=0.005), st.floats(3.0, 30.0), st.sampled_from([0.5, 0.8, 0.9]), st.sampled_from([0.01, 0.05])
)
def test_exact_effect_round_trip(study: Drawn, expected_cases: float, target: float, alpha: float) -> None:
    design, baseline, _, extra, sides, _ = study
    n = int(max(1, round(expected_cases / (baseline * extra.get("years", 1.0)))))
    assume(n <= 3000)
    s = solve(design, baseline=baseline, alpha=alpha, n_per_group=n, power=target, sides=sides, test="exact", **extra)
    assert s.effect > 1
    assert s.power == pytest.approx(target, abs=1e-6)
    assert float(_exact_power(design, alpha, n, s.effect, baseline, sides, extra)) == pytest.approx(s.power, rel=1e-12)


# --------------------------------------------------------------------------
# rescaling person-time


@quiet
@given(
    st.sampled_from(["cohort-rate", "reference-rate"]),
    st.floats(1e-4, 0.1),
    st.floats(0.5, 10.0),
    st.floats(1e-3, 1e3),
    st.floats(1.1, 6.0),
    st.integers(1, 3000),
    st.sampled_from([1, 2]),
    st.sampled_from(["normal", "exact"]),
)
def test_person_time_rescaling(
    design: str, baseline: float, years: float, k: float, effect: float, n: int, sides: int, test: str
) -> None:
    extra: dict[str, Any] = {"allocation": 1.5} if design == "cohort-rate" else {}
    alphas = np.array([0.01, 0.05])
    a = power(design, alphas, n, effect, baseline, years=years, sides=sides, test=test, **extra)
    b = power(design, alphas, n, effect, baseline * k, years=years / k, sides=sides, test=test, **extra)
    np.testing.assert_allclose(b.power, a.power, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(b.attained_alpha, a.attained_alpha, rtol=1e-9, atol=1e-12)
