"""Exact power against a seeded Monte Carlo simulation of the same test.

Each case draws study outcomes with ``numpy.random.default_rng(seed)``,
computes every p-value with scipy (``fisher_exact``, ``binomtest``,
``poisson``; two-sided = central), rejects at alpha, and compares the
rejection rate with the engine's exact power within 4 standard errors.
The simulation also runs under no effect, against the attained alpha.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import brute_force as bf
import numpy as np
import pytest

from decide import power

DRAWS = 20_000
#: p-value of the (exposed, comparison) counts
PValue = Callable[[int, int], float]
#: design, n, allocation, baseline, effect, years, alpha, sides, seed
Case = tuple[str, int, float | None, float, float, float | None, float, int, int]


def _rejection_rate(pvalue: PValue, x1: np.ndarray, x0: np.ndarray, alpha: float) -> float:
    pairs, counts = np.unique(np.stack([x1, x0]), axis=1, return_counts=True)
    p = np.array([pvalue(int(a), int(b)) for a, b in pairs.T])
    return float(counts[p <= alpha * (1 + bf.TIE)].sum() / x1.size)


def _draw(
    design: str, rng: np.random.Generator, n: int, n0: int, baseline: float, effect: float, years: float
) -> tuple[np.ndarray, np.ndarray]:
    """One batch of simulated counts (exposed, comparison) under the given effect."""
    if design == "cohort-risk":
        return rng.binomial(n, effect * baseline, DRAWS), rng.binomial(n0, baseline, DRAWS)
    if design == "case-control":
        p1 = bf.exposed_share_of_cases(effect, baseline)
        return rng.binomial(n, p1, DRAWS), rng.binomial(n0, baseline, DRAWS)
    if design == "cohort-rate":
        return rng.poisson(effect * baseline * n * years, DRAWS), rng.poisson(baseline * n0 * years, DRAWS)
    return rng.poisson(effect * baseline * n * years, DRAWS), np.zeros(DRAWS, dtype=np.int64)


def _scipy_pvalue(design: str, n: int, n0: int, baseline: float, years: float | None, sides: int) -> PValue:
    if design in ("cohort-risk", "case-control"):
        return lambda a, b: bf.fisher_p(a, n, b, n0, sides)
    if design == "cohort-rate":
        return lambda a, b: bf.conditional_binomial_p(a, b, n / (n + n0), sides)
    expected = baseline * n * (years or 1.0)
    return lambda a, b: bf.poisson_p(a, expected, sides)


CASES: list[Case] = [
    # (design, n, allocation, baseline, effect, years, alpha, sides, seed)
    ("cohort-risk", 200, 1.0, 0.02, 3.0, None, 0.05, 1, 101),
    ("cohort-risk", 120, 2.5, 0.05, 2.5, None, 0.05, 2, 102),
    ("case-control", 60, 1.0, 0.2, 2.5, None, 0.05, 1, 103),
    ("case-control", 35, 3.0, 0.1, 4.0, None, 0.01, 2, 104),
    ("cohort-rate", 150, 1.0, 0.01, 3.0, 2.0, 0.05, 1, 105),
    ("cohort-rate", 80, 0.5, 0.05, 3.0, 1.5, 0.05, 2, 106),
    ("reference-rate", 500, None, 4e-3, 2.0, 3.0, 0.05, 1, 107),
    ("reference-rate", 300, None, 0.01, 1.8, 2.0, 0.05, 2, 108),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: f"{c[0]}-{c[7]}sided")
def test_exact_power_against_simulation(case: Case) -> None:
    design, n, allocation, baseline, effect, years, alpha, sides, seed = case
    n0 = 0 if allocation is None else math.floor(allocation * n + 0.5)
    got = power(design, alpha, n, effect, baseline, allocation=allocation, years=years, sides=sides, test="exact")
    rng = np.random.default_rng(seed)
    pvalue = _scipy_pvalue(design, n, n0, baseline, years, sides)
    for effect_now, engine in ((effect, float(got.power)), (1.0, float(got.attained_alpha))):
        x1, x0 = _draw(design, rng, n, n0, baseline, effect_now, years or 1.0)
        rate = _rejection_rate(pvalue, x1, x0, alpha)
        se = math.sqrt(max(engine * (1 - engine), 1e-4) / DRAWS)
        assert abs(rate - engine) <= 4 * se, (effect_now, rate, engine, se)
    # the cases are chosen so that the power check is informative
    assert 0.1 < float(got.power) < 0.95
