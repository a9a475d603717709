"""First-order conditions at the loss-optimal alpha, and the implied cost ratio.

At an interior optimum over alpha for a fixed size, one more unit of false
alarm probability must buy exactly its cost in caught hazards:

    p * E[M(theta) * (-d beta_theta / d alpha)] = (1 - p) * F * d alpha_attained / d alpha

(identity: the derivative of the expected loss with respect to alpha is
zero).  The derivatives here are central finite differences of
``decide.power.power``, a path independent of the optimiser's own critical
value search.  The expectation over the prior uses the prior's quadrature
nodes (:meth:`decide.prior.EffectPrior.nodes`); their accuracy is checked
against ``scipy.integrate.quad`` in ``test_decision_quadrature.py``.

Because the optimum sets ``p * dCaught = (1 - p) * F * dAlpha``, the cost
ratio at which the chosen alpha is optimal, which the decision reports, must
equal the stated ratio ``E[M] / F`` (normal tests), or, for an exact test
whose attainable sizes are discrete, its range must contain it (identity).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from decision_helpers import fixed_size_problem, power_kwargs

from decide.decision.optimize import optimize
from decide.decision.prior import EffectPrior
from decide.engine.power import power
from decide.scenario import load_scenario

REPO = Path(__file__).resolve().parents[1]
DERIVED = {"exposed_population": 2e4, "background_rate": 1e-3, "cost_per_case": 1e5, "horizon_years": 10.0}
CONSTANT = {"missed_hazard": 1e7}
POINT = EffectPrior.point(2.0)
WIDE = EffectPrior.from_interval(1.5, 4.0, 0.9)


NORMAL_CASES = [
    ("reference-rate", 1e-3, 1.0, 5.0, POINT, CONSTANT, 4000),
    ("reference-rate", 1e-3, 1.0, 5.0, EffectPrior.from_interval(1.3, 3.0, 0.8), DERIVED, 4000),
    ("cohort-rate", 2e-3, 3.0, 5.0, POINT, CONSTANT, 2000),  # unequal spreads
    ("cohort-rate", 2e-3, 0.5, 5.0, WIDE, DERIVED, 2000),
    ("cohort-risk", 0.01, 2.0, 1.0, WIDE, CONSTANT, 2000),
    ("cohort-risk", 0.002, 1.0, 1.0, POINT, DERIVED, 9000),
    ("case-control", 0.1, 4.0, 1.0, WIDE, DERIVED, 300),
    ("case-control", 0.2, 1.0, 1.0, POINT, CONSTANT, 300),
]


# The prior's far-left nodes (effects well below 1) give cells that expect few cases,
# where decide.power warns that the normal test is weak; that test is asked for here.
@pytest.mark.filterwarnings("ignore::decide.errors.ApproximationWarning")
@pytest.mark.parametrize(("design", "baseline", "allocation", "years", "prior", "missed", "n"), NORMAL_CASES)
def test_normal_optimum_meets_the_first_order_condition(
    design: str, baseline: float, allocation: float, years: float, prior: EffectPrior, missed: dict[str, float], n: int
) -> None:
    prob = fixed_size_problem(design, baseline, allocation, years, prior, missed, n)
    dec = optimize(prob)
    assert dec.test == "normal" and dec.n_per_group == n
    a = dec.alpha
    assert a is not None
    assert 1e-4 < a < 0.5  # interior
    # the optimiser minimises the loss under its search rule (with a panel edge at the
    # derived cost's kink); the condition holds for that rule's weights
    kink = 1.0 if prob.consequences.is_derived else None
    effects, weights = prior.nodes(kink=kink)
    cost = prob.consequences.missed_cost(effects)
    h = 1e-4 * a
    up = power(design, a + h, n, effects, baseline, **power_kwargs(prob))
    down = power(design, a - h, n, effects, baseline, **power_kwargs(prob))
    d_beta = -(up.power - down.power) / (2 * h)
    d_attained = float((up.attained_alpha[0] - down.attained_alpha[0]) / (2 * h))
    # measured 7.1e-12 (rounding in the difference quotient); about five times
    assert d_attained == pytest.approx(1.0, rel=4e-11)  # the plain normal test attains alpha
    gain = prob.p_harm * float(np.sum(weights * cost * -d_beta))
    # measured 5.2e-8; about five times
    assert gain == pytest.approx((1 - prob.p_harm) * prob.consequences.false_alarm * d_attained, rel=3e-7)
    # the implied cost ratio of the loss-optimal alpha is the stated one, E[M] / F
    fine, fine_weights = prior.nodes(512, kink=kink)  # E[M] to full accuracy
    stated = float(np.sum(fine_weights * prob.consequences.missed_cost(fine))) / prob.consequences.false_alarm
    assert dec.stated_cost_ratio == pytest.approx(stated, rel=1e-9)
    # measured 4.5e-8; about five times
    assert dec.implied_cost_ratio == pytest.approx(stated, rel=3e-7)


def test_continuity_corrected_optimum_weighs_the_attained_alpha() -> None:
    # With a continuity correction the attained alpha is below the nominal one and
    # moves at its own rate; the condition holds with d(attained)/d(alpha).
    prob = fixed_size_problem("cohort-risk", 0.01, 1.0, 1.0, POINT, CONSTANT, 1500, continuity=True)
    dec = optimize(prob)
    assert dec.test == "normal-cc"
    a = dec.alpha
    assert a is not None and dec.attained_alpha is not None
    h = 1e-4 * a
    up = power("cohort-risk", a + h, 1500, 2.0, 0.01, test="normal", continuity=True)
    down = power("cohort-risk", a - h, 1500, 2.0, 0.01, test="normal", continuity=True)
    assert dec.attained_alpha == pytest.approx(
        float(power("cohort-risk", a, 1500, 2.0, 0.01, test="normal", continuity=True).attained_alpha), rel=1e-9
    )
    assert dec.attained_alpha < a
    d_power = float(up.power - down.power) / (2 * h)
    d_attained = float(up.attained_alpha - down.attained_alpha) / (2 * h)
    # measured 3.8e-9; about five times
    assert prob.p_harm * 1e7 * d_power == pytest.approx(0.8 * 2e6 * d_attained, rel=2e-8)
    # measured 9.1e-9; about five times
    assert dec.implied_cost_ratio == pytest.approx(1e7 / 2e6, rel=5e-8)


# design, baseline, allocation, years, prior, missed cost, n (small studies: exact tests)
EXACT_CASES = [
    ("reference-rate", 1e-3, 1.0, 5.0, POINT, CONSTANT, 1500),
    ("reference-rate", 1e-3, 1.0, 5.0, EffectPrior.from_interval(1.3, 3.0, 0.8), DERIVED, 2000),
    ("cohort-rate", 2e-3, 3.0, 5.0, WIDE, CONSTANT, 400),
    ("cohort-risk", 0.01, 2.0, 1.0, WIDE, DERIVED, 300),
    ("cohort-risk", 0.005, 1.0, 1.0, POINT, CONSTANT, 800),
    ("case-control", 0.1, 2.0, 1.0, POINT, DERIVED, 40),
]


@pytest.mark.parametrize(("design", "baseline", "allocation", "years", "prior", "missed", "n"), EXACT_CASES)
def test_exact_optimum_implied_ratio_range_contains_the_stated_ratio(
    design: str, baseline: float, allocation: float, years: float, prior: EffectPrior, missed: dict[str, float], n: int
) -> None:
    prob = fixed_size_problem(design, baseline, allocation, years, prior, missed, n, test="exact")
    dec = optimize(prob)
    assert dec.test == "exact" and dec.n_per_group == n
    assert dec.implied_cost_ratio_range is not None
    lo, hi = dec.implied_cost_ratio_range
    effects, weights = prior.nodes()
    stated = float(np.sum(weights * prob.consequences.missed_cost(effects))) / prob.consequences.false_alarm
    assert lo * (1 - 1e-9) <= stated <= hi * (1 + 1e-9)
    assert dec.implied_cost_ratio is not None
    assert lo <= dec.implied_cost_ratio <= hi


def test_exact_implied_range_is_the_interval_of_ratios_that_pick_the_test() -> None:
    # Reference-rate exact test with a point effect: the test O >= c is loss-optimal
    # for cost ratios R = M/F with c = floor((ln k + (SIR-1)E)/ln SIR) + 1,
    # k = (1-p)/(p R) (Neyman-Pearson, identity), i.e. for
    # (1-p)/p * exp(-(c-1) ln SIR + (SIR-1)E) > R >= (1-p)/p * exp(-c ln SIR + (SIR-1)E).
    p, E, sir = 0.2, 7.5, 2.0
    prob = fixed_size_problem("reference-rate", 1e-3, 1.0, 5.0, POINT, CONSTANT, 1500, test="exact", p=p)
    dec = optimize(prob)
    k = (1 - p) * 2e6 / (p * 1e7)
    c = int(np.floor((np.log(k) + (sir - 1) * E) / np.log(sir))) + 1
    odds = (1 - p) / p
    expected = (odds * np.exp((sir - 1) * E - c * np.log(sir)), odds * np.exp((sir - 1) * E - (c - 1) * np.log(sir)))
    # measured 3.8e-15: rounding only
    assert dec.implied_cost_ratio_range == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("name", sorted(p.name for p in (REPO / "scenarios").glob("*.toml")))
def test_bundled_scenarios_loss_optimal_choice_implies_the_stated_ratio(name: str) -> None:
    prob = load_scenario(REPO / "scenarios" / name).problem
    dec = optimize(prob)
    assert dec.feasible
    assert dec.stated_cost_ratio is not None  # every bundled scenario gives a false alarm a cost
    if dec.test == "exact":
        assert dec.implied_cost_ratio_range is not None
        lo, hi = dec.implied_cost_ratio_range
        assert lo * (1 - 1e-9) <= dec.stated_cost_ratio <= hi * (1 + 1e-9)
    else:
        # measured 1.8e-8 over the bundled scenarios; about five times
        assert dec.implied_cost_ratio == pytest.approx(dec.stated_cost_ratio, rel=1e-7)
