"""Exact power by brute force, built only from scipy's tests and distributions.

These helpers are the outside check for :mod:`decide.engine.exact`: they
enumerate every count pair a small study can produce, ask scipy for the
p-value of each (``fisher_exact``, ``binomtest``, ``poisson``), and add up the
binomial or Poisson probabilities of the pairs the level-``alpha`` test
rejects.  They loop in Python and are meant for small studies only.

Two-sided tests are the central ones: twice the smaller one-sided p-value,
capped at 1.  Count ranges are cut where the neglected tail mass is below
``TAIL`` at each end.
"""

from __future__ import annotations

from collections.abc import Callable
from functools import cache

import numpy as np
from scipy import stats

TAIL = 1e-15
#: the same guard against float ties as the engine (p <= alpha * (1 + 1e-10))
TIE = 1e-10


def exposed_share_of_cases(odds_ratio: float, p0: float) -> float:
    """Exposure prevalence among cases for odds ratio ``odds_ratio`` (Schlesselman 1974)."""
    odds = odds_ratio * p0 / (1 - p0)
    return odds / (1 + odds)


def _binom_range(n: int, p: float) -> np.ndarray:
    lo = int(stats.binom.ppf(TAIL, n, p))
    hi = int(stats.binom.isf(TAIL, n, p))
    return np.arange(max(lo, 0), min(hi, n) + 1)


def _poisson_range(mean: float) -> np.ndarray:
    return np.arange(int(stats.poisson.ppf(TAIL, mean)), int(stats.poisson.isf(TAIL, mean)) + 1)


def central(upper: float, lower: float, sides: int) -> float:
    """One-sided (upper tail) or central two-sided p-value."""
    return upper if sides == 1 else min(1.0, 2 * min(upper, lower))


@cache
def fisher_p(x1: int, n1: int, x0: int, n0: int, sides: int) -> float:
    """Fisher's exact test of the table [[x1, n1-x1], [x0, n0-x0]] via scipy."""
    table = [[x1, n1 - x1], [x0, n0 - x0]]
    upper = stats.fisher_exact(table, alternative="greater").pvalue
    if sides == 1:
        return float(upper)
    lower = stats.fisher_exact(table, alternative="less").pvalue
    return central(float(upper), float(lower), sides)


@cache
def conditional_binomial_p(x1: int, x0: int, share: float, sides: int) -> float:
    """Exact conditional test of two Poisson counts via scipy.stats.binomtest."""
    total = x1 + x0
    if total == 0:
        return 1.0
    upper = stats.binomtest(x1, total, share, alternative="greater").pvalue
    if sides == 1:
        return float(upper)
    lower = stats.binomtest(x1, total, share, alternative="less").pvalue
    return central(float(upper), float(lower), sides)


def poisson_p(x: int, mean: float, sides: int) -> float:
    """Exact test of a Poisson count against a known mean via scipy.stats.poisson."""
    upper = float(stats.poisson.sf(x - 1, mean)) if x >= 1 else 1.0
    return central(upper, float(stats.poisson.cdf(x, mean)), sides)


def _rejected_mass(
    x1: np.ndarray, w1: np.ndarray, x0: np.ndarray, w0: np.ndarray, pvalue: Callable[[int, int], float], alpha: float
) -> float:
    total = 0.0
    for a, wa in zip(x1, w1, strict=True):
        for b, wb in zip(x0, w0, strict=True):
            if pvalue(int(a), int(b)) <= alpha * (1 + TIE):
                total += wa * wb
    return total


def two_binomials(n1: int, n0: int, p1: float, p0: float, alpha: float, sides: int) -> tuple[float, float]:
    """Power and attained alpha of Fisher's exact test, exposed risk ``p1`` vs ``p0``."""
    x0 = _binom_range(n0, p0)
    w0 = stats.binom.pmf(x0, n0, p0)

    def pvalue(a: int, b: int) -> float:
        return fisher_p(a, n1, b, n0, sides)

    out = []
    for p in (p1, p0):
        x1 = np.union1d(_binom_range(n1, p), _binom_range(n1, p0))
        out.append(_rejected_mass(x1, stats.binom.pmf(x1, n1, p), x0, w0, pvalue, alpha))
    return out[0], out[1]


def two_poissons(t1: float, t0: float, rate: float, ratio: float, alpha: float, sides: int) -> tuple[float, float]:
    """Power and attained alpha of the conditional binomial test of two Poisson rates."""
    share = t1 / (t1 + t0)
    x0 = _poisson_range(rate * t0)
    w0 = stats.poisson.pmf(x0, rate * t0)

    def pvalue(a: int, b: int) -> float:
        return conditional_binomial_p(a, b, share, sides)

    out = []
    for eff in (ratio, 1.0):
        x1 = np.union1d(_poisson_range(rate * eff * t1), _poisson_range(rate * t1))
        out.append(_rejected_mass(x1, stats.poisson.pmf(x1, rate * eff * t1), x0, w0, pvalue, alpha))
    return out[0], out[1]


def one_poisson(expected: float, sir: float, alpha: float, sides: int) -> tuple[float, float]:
    """Power and attained alpha of the exact Poisson test of ``O`` against ``expected``."""
    x = np.union1d(_poisson_range(sir * expected), _poisson_range(expected))
    reject = np.array([poisson_p(int(k), expected, sides) <= alpha * (1 + TIE) for k in x])
    return (
        float(stats.poisson.pmf(x[reject], sir * expected).sum()),
        float(stats.poisson.pmf(x[reject], expected).sum()),
    )
