"""The row-by-row root finder of the decision layer against scipy's Brent method."""

from __future__ import annotations

import numpy as np
from scipy import optimize, special

from decide.decision.loss import ROOT_XTOL, root_decreasing


def test_roots_match_brent_row_by_row() -> None:
    """Power-like decreasing curves (normal tails, some steep, some flat) over the search range of z."""
    rng = np.random.default_rng(7)
    centre, scale, level = rng.uniform(-3, 8, 300), rng.uniform(0.05, 5, 300), rng.uniform(0.01, 0.8, 300)

    def g(z: np.ndarray) -> np.ndarray:
        return np.asarray(special.ndtr(-(z - centre) / scale) - level)

    lo, hi = np.full(300, -8.0), np.full(300, 40.0)
    ours = root_decreasing(g, lo, hi)
    for i, (c, s, p) in enumerate(zip(centre, scale, level, strict=True)):
        theirs = optimize.brentq(lambda z, c=c, s=s, p=p: float(special.ndtr(-(z - c) / s) - p), -8.0, 40.0, xtol=1e-15)
        assert abs(ours[i] - theirs) <= 2 * ROOT_XTOL * max(1.0, abs(theirs))


def test_without_a_sign_change_the_end_bisection_would_reach() -> None:
    lo, hi = np.array([0.0, 0.0, 2.0]), np.array([1.0, 1.0, 3.0])
    values = np.array([1.0, -1.0, 0.0])  # above 0, below 0, zero throughout

    def flat(z: np.ndarray) -> np.ndarray:
        return np.broadcast_to(values, z.shape).copy()

    np.testing.assert_array_equal(root_decreasing(flat, lo, hi), [1.0, 0.0, 2.0])


def test_an_exact_zero_is_returned_as_it_is() -> None:
    def line(z: np.ndarray) -> np.ndarray:
        return np.asarray(1.0 - z)

    assert root_decreasing(line, np.array([0.0]), np.array([2.0]))[0] == 1.0
