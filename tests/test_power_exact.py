"""Exact power against brute force with scipy's exact tests, and the exact size solver.

The brute force (tests/brute_force.py) enumerates every count pair, asks
``scipy.stats.fisher_exact``, ``scipy.stats.binomtest`` or
``scipy.stats.poisson`` for its p-value and weights the rejected pairs by
``scipy.stats.binom`` / ``scipy.stats.poisson`` probabilities.  The comparison
group is ``allocation * n`` rounded half up, computed here.
"""

from __future__ import annotations

import math
from typing import Any

import brute_force as bf
import numpy as np
import pytest
from scipy import stats

from decide import power
from decide.engine.solve import solve

ALPHAS = (0.01, 0.05, 0.1)


def _half_up(x: float) -> int:
    return math.floor(x + 0.5)


# --------------------------------------------------------------------------
# exact power and attained alpha, brute force with scipy


@pytest.mark.parametrize("sides", [1, 2])
@pytest.mark.parametrize(
    ("n", "allocation", "p0", "rr"),
    [(40, 1.0, 0.05, 3.0), (25, 2.0, 0.10, 2.5), (15, 0.5, 0.20, 2.0), (300, 1.5, 0.005, 4.0)],
)
def test_cohort_risk_fisher_brute_force(n: int, allocation: float, p0: float, rr: float, sides: int) -> None:
    n0 = _half_up(allocation * n)
    got = power("cohort-risk", ALPHAS, n, rr, p0, allocation=allocation, sides=sides, test="exact")
    for i, alpha in enumerate(ALPHAS):
        want_power, want_size = bf.two_binomials(n, n0, rr * p0, p0, alpha, sides)
        assert got.power[i] == pytest.approx(want_power, rel=1e-9, abs=1e-12)
        assert got.attained_alpha[i] == pytest.approx(want_size, rel=1e-9, abs=1e-12)
        assert got.attained_alpha[i] <= alpha


@pytest.mark.parametrize("sides", [1, 2])
@pytest.mark.parametrize(
    ("n", "allocation", "p0", "odds_ratio"),
    [(30, 1.0, 0.2, 3.0), (20, 3.0, 0.3, 4.0), (45, 1.5, 0.1, 2.5), (9, 2.5, 0.4, 0.3)],
)
def test_case_control_fisher_brute_force(n: int, allocation: float, p0: float, odds_ratio: float, sides: int) -> None:
    n0 = _half_up(allocation * n)
    p1 = bf.exposed_share_of_cases(odds_ratio, p0)
    got = power("case-control", ALPHAS, n, odds_ratio, p0, allocation=allocation, sides=sides, test="exact")
    for i, alpha in enumerate(ALPHAS):
        want_power, want_size = bf.two_binomials(n, n0, p1, p0, alpha, sides)
        assert got.power[i] == pytest.approx(want_power, rel=1e-9, abs=1e-12)
        assert got.attained_alpha[i] == pytest.approx(want_size, rel=1e-9, abs=1e-12)
        assert got.attained_alpha[i] <= alpha


@pytest.mark.parametrize("sides", [1, 2])
@pytest.mark.parametrize(
    ("n", "allocation", "years", "rate", "ratio"),
    [(100, 1.0, 2.0, 0.02, 3.0), (50, 2.5, 1.5, 0.05, 2.0), (7, 0.5, 3.0, 0.3, 5.0), (2000, 1.0, 1.0, 1e-3, 2.0)],
)
def test_cohort_rate_conditional_brute_force(
    n: int, allocation: float, years: float, rate: float, ratio: float, sides: int
) -> None:
    t1, t0 = n * years, _half_up(allocation * n) * years
    got = power("cohort-rate", ALPHAS, n, ratio, rate, allocation=allocation, years=years, sides=sides, test="exact")
    for i, alpha in enumerate(ALPHAS):
        want_power, want_size = bf.two_poissons(t1, t0, rate, ratio, alpha, sides)
        assert got.power[i] == pytest.approx(want_power, rel=1e-9, abs=1e-12)
        assert got.attained_alpha[i] == pytest.approx(want_size, rel=1e-9, abs=1e-12)
        assert got.attained_alpha[i] <= alpha


@pytest.mark.parametrize("sides", [1, 2])
@pytest.mark.parametrize(
    ("n", "years", "rate", "sir"),
    [(1000, 2.0, 1e-3, 3.0), (50, 1.0, 0.01, 8.0), (3000, 5.0, 2e-3, 1.4), (40, 0.5, 0.05, 0.4)],
)
def test_reference_rate_poisson_brute_force(n: int, years: float, rate: float, sir: float, sides: int) -> None:
    got = power("reference-rate", ALPHAS, n, sir, rate, years=years, sides=sides, test="exact")
    for i, alpha in enumerate(ALPHAS):
        want_power, want_size = bf.one_poisson(rate * n * years, sir, alpha, sides)
        assert got.power[i] == pytest.approx(want_power, rel=1e-9, abs=1e-12)
        assert got.attained_alpha[i] == pytest.approx(want_size, rel=1e-9, abs=1e-12)
        assert got.attained_alpha[i] <= alpha


def test_attained_alpha_is_power_at_no_effect() -> None:
    # attained alpha = power at effect 1, for every design and both sidednesses
    studies: list[tuple[str, float, dict[str, Any]]] = [
        ("cohort-risk", 0.03, {"allocation": 2.0}),
        ("case-control", 0.2, {"allocation": 1.0}),
        ("cohort-rate", 0.01, {"allocation": 1.5, "years": 2.0}),
        ("reference-rate", 0.01, {"years": 2.0}),
    ]
    for design, baseline, extra in studies:
        for sides in (1, 2):
            r = power(design, ALPHAS, 120, 2.5, baseline, sides=sides, test="exact", **extra)
            r1 = power(design, ALPHAS, 120, 1.0, baseline, sides=sides, test="exact", **extra)
            np.testing.assert_allclose(r1.power, r.attained_alpha, rtol=1e-9, atol=1e-15)
            assert np.all(r.attained_alpha <= np.asarray(ALPHAS))
            assert np.all(r.attained_alpha > 0)


# --------------------------------------------------------------------------
# the exact size solver against power at every whole size


def _brute_sizes(powers: np.ndarray, target: float) -> tuple[int, int]:
    """First size reaching the target, and the size after the last dip below it."""
    ok = powers >= target
    first = int(np.argmax(ok)) + 1
    misses = np.flatnonzero(~ok) + 1
    stable = int(misses[-1]) + 1 if misses.size else 1
    return first, max(first, stable)


SIZE_CASES = [
    # (design, baseline, effect, alpha, target, sides, allocation, years)
    ("cohort-risk", 0.05, 4.0, 0.05, 0.8, 1, 1.0, None),
    ("cohort-risk", 0.05, 10.0, 0.05, 0.8, 2, 0.5, None),  # saw-tooth
    ("cohort-risk", 0.2, 4.0, 0.05, 0.9, 1, 1.0, None),  # saw-tooth
    ("case-control", 0.3, 6.0, 0.05, 0.9, 1, 1.0, None),  # saw-tooth
    ("case-control", 0.3, 6.0, 0.01, 0.9, 2, 1.0, None),  # saw-tooth, two-sided
    ("case-control", 0.1, 4.0, 0.05, 0.8, 1, 2.0, None),
    ("cohort-rate", 0.05, 10.0, 0.05, 0.8, 1, 0.5, 2.0),  # saw-tooth
    ("cohort-rate", 0.01, 20.0, 0.05, 0.9, 2, 0.5, 2.0),  # saw-tooth, two-sided
    ("cohort-rate", 0.01, 4.0, 0.05, 0.8, 1, 1.0, 3.0),
    ("reference-rate", 0.01, 3.0, 0.05, 0.9, 2, None, 2.0),  # two-sided: the scan
    # a dip between grid points (n = 157..161) that a sampled scan once missed
    ("reference-rate", 0.01, 2.0, 0.1, 0.5, 2, None, 3.0),
]


@pytest.mark.parametrize(
    "case", SIZE_CASES, ids=lambda c: f"{c[0]}-{c[5]}sided-{c[1]}-{c[2]}" if isinstance(c, tuple) else None
)
def test_exact_size_solver_against_every_size(case: tuple[Any, ...]) -> None:
    design, baseline, effect, alpha, target, sides, allocation, years = case
    s = solve(
        design,
        baseline=baseline,
        effect=effect,
        alpha=alpha,
        power=target,
        sides=sides,
        allocation=allocation,
        years=years,
        test="exact",
    )
    assert s.test == "exact"
    assert s.n_checked is not None and s.n_checked <= 3000
    n = np.arange(1, s.n_checked + 1)
    curve = power(
        design, alpha, n, effect, baseline, allocation=allocation, years=years, sides=sides, test="exact"
    ).power
    first, stable = _brute_sizes(curve, target)
    assert s.n_per_group == first
    assert s.n_stable == stable
    assert s.power == pytest.approx(curve[first - 1], rel=1e-12)
    assert s.power >= target
    assert bool(s.warnings) == (stable > first)


@pytest.mark.parametrize(
    ("baseline", "years", "sir", "alpha", "target"),
    [
        (0.01, 5.0, 2.0, 0.05, 0.8),
        (1e-3, 1.0, 3.0, 0.05, 0.9),
        (0.02, 1.0, 1.5, 0.01, 0.8),
        (0.05, 2.0, 5.0, 0.025, 0.95),
        (3e-4, 4.0, 2.5, 0.1, 0.5),
    ],
)
def test_reference_rate_segment_solver_against_scipy(
    baseline: float, years: float, sir: float, alpha: float, target: float
) -> None:
    # one-sided reference-rate sizes come from a closed-form segment solver;
    # check it against scipy.stats.poisson at every whole size
    s = solve(
        "reference-rate",
        baseline=baseline,
        effect=sir,
        alpha=alpha,
        power=target,
        years=years,
        test="exact",
    )
    assert s.n_checked is not None
    n = np.arange(1, s.n_checked + 1, dtype=np.float64)
    expected = baseline * years * n
    c = np.arange(0, 200)
    crit = np.argmax(stats.poisson.sf(c[None, :] - 1, expected[:, None]) <= alpha * (1 + 1e-10), axis=1)
    curve = stats.poisson.sf(crit - 1, sir * expected)
    first, stable = _brute_sizes(curve, target)
    assert s.n_per_group == first
    assert s.n_stable == stable
    assert s.power == pytest.approx(curve[first - 1], rel=1e-9)
    assert s.attained_alpha == pytest.approx(float(stats.poisson.sf(crit[first - 1] - 1, expected[first - 1])))


def test_grid_poisson_probabilities_match_scipy() -> None:
    """The grid's Poisson pmf (logarithms taken before broadcasting) against ``scipy.stats.poisson.pmf``.

    Means from zero (all mass on no cases) to 9,000; counts 0..12,000.  The
    largest relative gap measured is 2.9e-14 (at counts far in the tails,
    where both sides round ``x log(mean) - mean - log x!`` of size ~1e5).
    """
    from decide.engine.exact import _poisson_pmf

    counts = np.arange(0.0, 12_001.0)[None, :]
    means = np.array([0.0, 1e-9, 0.5, 3.0, 80.0, 1_500.0, 9_000.0])[:, None]
    ours = _poisson_pmf(counts, means)
    theirs = stats.poisson.pmf(counts, means)
    shown = theirs > 1e-250
    np.testing.assert_allclose(ours[shown], theirs[shown], rtol=1e-12)
    assert np.all(ours[~shown] < 1e-240)
    assert ours[0, 0] == 1.0 and not ours[0, 1:].any()
