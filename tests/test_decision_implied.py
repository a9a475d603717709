"""What a chosen test implies: the implied cost ratio and the smallest effect detected.

Outside checks (each computed in the test, independent of the optimiser):

* normal test against a reference rate, square-root transform: the statistic
  has equal spreads under both hypotheses and shift
  ``d = 2 sqrt(E) (sqrt(SIR) - 1)`` (Breslow & Day 1987, vol. II, ch. 2;
  from memory), so with a point effect and a constant missed-hazard cost the
  loss ``p M Phi(z - d) + (1 - p) F (1 - Phi(z))`` is stationary in ``z`` at
  the cost ratio ``R = (1 - p) phi(z) / (p phi(z - d))`` (identity);
* exact one-sided Poisson test ``O >= c`` with a point effect: by
  Neyman-Pearson the test is loss-optimal for ratios between
  ``odds * exp((SIR - 1)E - c ln SIR)`` and ``odds * exp((SIR - 1)E - (c - 1) ln SIR)``
  (identity);
* the smallest effect detected with power 0.8 by "flag on any case", the
  test an exact Poisson test at a nominal alpha near 1 becomes:
  ``1 - exp(-SIR * E) = 0.8``, so ``SIR = ln 5 / E`` (closed form); and for
  smaller alphas the solver's effect (itself checked against published tables
  in the power tests).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from decision_helpers import fixed_size_problem
from scipy import stats

from decide.decision.implied import (
    ImpliedRange,
    detectable_effect,
    implied_ratio_exact,
    implied_ratio_normal,
    ratio_point,
)
from decide.decision.loss import LossModel, OperatingPoint, build_model
from decide.decision.prior import EffectPrior
from decide.engine.power import power
from decide.engine.solve import solve

CONSTANT = {"missed_hazard": 1e7}
POINT = EffectPrior.point(2.0)


@pytest.mark.parametrize("z", [0.5, 1.2, 2.0, 2.8])
def test_normal_implied_ratio_is_the_stationary_point_of_the_loss(z: float) -> None:
    n, p = 1500, 0.2
    prob = fixed_size_problem("reference-rate", 1e-3, 1.0, 5.0, POINT, CONSTANT, n, p=p)
    d = 2 * math.sqrt(n * 5e-3) * (math.sqrt(2.0) - 1)
    expected = (1 - p) * stats.norm.pdf(z) / (p * stats.norm.pdf(z - d))
    # central differences with step 1e-5: relative error about 1e-10 times the curvature
    assert implied_ratio_normal(build_model(prob), n, z) == pytest.approx(expected, rel=1e-6)


def test_exact_implied_range_is_the_neyman_pearson_interval() -> None:
    p, e, sir, n = 0.2, 7.5, 2.0, 1500
    prob = fixed_size_problem("reference-rate", 1e-3, 1.0, 5.0, POINT, CONSTANT, n, test="exact", p=p)
    model = build_model(prob)
    odds = (1 - p) / p
    for c in (6, 9, 12):  # flag if c or more cases are observed
        attained = float(stats.poisson.sf(c - 1, e))
        miss = float(stats.poisson.cdf(c - 1, sir * e))
        chosen = OperatingPoint(attained, attained, 1 - miss, 1 - miss, miss * 1e7)
        found = implied_ratio_exact(model, n, chosen)
        assert isinstance(found, ImpliedRange) and not found.dominated
        low = odds * math.exp((sir - 1) * e - c * math.log(sir))
        high = odds * math.exp((sir - 1) * e - (c - 1) * math.log(sir))
        assert (found.low, found.high) == pytest.approx((low, high), rel=1e-6)
        assert found.point == pytest.approx(math.sqrt(low * high), rel=1e-6)


def test_ratio_point_is_the_geometric_middle_or_the_finite_end() -> None:
    assert ratio_point(2.0, 8.0) == pytest.approx(4.0)
    assert ratio_point(3.0, math.inf) == 3.0
    assert ratio_point(0.0, 5.0) is None


def exact_reference(n: int) -> LossModel:
    prob = fixed_size_problem("reference-rate", 1e-3, 1.0, 5.0, POINT, CONSTANT, n, test="exact")
    return build_model(prob)


@pytest.mark.parametrize("alpha", [0.8, 0.9, 0.9998])
def test_detectable_effect_exists_at_every_alpha_of_an_exact_test(alpha: float) -> None:
    # E = 200 * 5e-3 = 1 expected case; any nominal alpha from 1 - e^-1 = 0.632 up flags on one case
    found = detectable_effect(exact_reference(200), alpha, 200, True)
    assert found is not None and found == pytest.approx(math.log(5.0), rel=1e-7)
    at = power("reference-rate", alpha=alpha, n_per_group=200, effect=found, baseline=1e-3, years=5.0, test="exact")
    assert float(at.power) == pytest.approx(0.8, abs=1e-7)


def test_detectable_effect_below_the_power_level_is_the_solvers() -> None:
    found = detectable_effect(exact_reference(200), 0.05, 200, True)
    sol = solve("reference-rate", baseline=1e-3, years=5.0, alpha=0.05, power=0.8, n_per_group=200, test="exact")
    assert found == sol.effect


def test_normal_test_flagging_most_harmless_exposures_detects_every_harm() -> None:
    # the plain normal test flags with probability alpha = 0.85 >= 0.8 at effect 1, and more above it
    prob = fixed_size_problem("reference-rate", 1e-3, 1.0, 5.0, POINT, CONSTANT, 2000)
    assert detectable_effect(build_model(prob), 0.85, 2000, False) == 1.0
    at = power(
        "reference-rate",
        alpha=0.85,
        n_per_group=2000,
        effect=np.array([1.0, 1.01]),
        baseline=1e-3,
        years=5.0,
        test="normal",
    )
    assert np.all(at.power >= 0.85 - 1e-12)
