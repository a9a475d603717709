"""Auditing a protocol: the value judgments its alpha and size imply.

Outside checks:

* at a loss-optimal size one more subject costs what it saves,
  ``per_subject (1 + allocation) = p M dPower/dn`` (envelope condition,
  identity), so the implied ``M`` follows; ``dPower/dn`` is taken here by a
  central finite difference of ``decide.power.power`` over whole sizes;
* at a loss-optimal alpha ``p M dPower = (1 - p) F dAlpha`` (first-order
  condition, identity), so the implied ratio ``M/F`` follows, again from
  finite differences of ``decide.power.power``;
* for the exact SIR test the implied ratios are those for which the
  protocol's critical count is the count the Neyman-Pearson lemma gives for
  the weighted losses (Neyman, J. and Pearson, E. S. (1933). On the problem
  of the most efficient tests of statistical hypotheses. *Phil. Trans. R.
  Soc. A* 231, 289-337; identity, computed in the test);
* detectable effects have the stated power by ``decide.power.power``;
* ``P(harm | negative)`` by Bayes' rule.
"""

from __future__ import annotations

import math
from typing import Any

import pytest
from scipy import stats

from decide.decision.audit import audit
from decide.engine.power import power
from decide.errors import DecideError

# (design, baseline, allocation, years, effect, n_per_group)
NORMAL_PROTOCOLS = [
    ("cohort-rate", 1e-3, 2.0, 5.0, 2.0, 3000),
    ("cohort-risk", 0.01, 1.0, None, 2.0, 2500),
    ("case-control", 0.2, 3.0, None, 1.8, 400),
    ("reference-rate", 1e-3, None, 5.0, 1.5, 8000),
]


def kwargs(allocation: float | None, years: float | None) -> dict[str, Any]:
    return {"allocation": allocation, "years": years, "test": "normal"}


@pytest.mark.parametrize(("design", "baseline", "allocation", "years", "effect", "n"), NORMAL_PROTOCOLS)
def test_implied_missed_hazard_from_the_marginal_power_of_a_subject(
    design: str, baseline: float, allocation: float | None, years: float | None, effect: float, n: int
) -> None:
    p, per_subject, alpha = 0.15, 40.0, 0.05
    a = audit(
        design,
        baseline=baseline,
        alpha=alpha,
        effect=effect,
        p_harm=p,
        per_subject=per_subject,
        n_per_group=n,
        allocation=allocation,
        years=years,
        test="normal",
    )
    assert a.test == "normal" and a.n_per_group == n
    # central differences over whole sizes, steps h and 2h, Richardson-extrapolated (error O(h^4))
    h = max(1, round(n / 200))

    def central(step: int) -> float:
        up = power(design, alpha, n + step, effect, baseline, **kwargs(allocation, years)).power
        down = power(design, alpha, n - step, effect, baseline, **kwargs(allocation, years)).power
        return float(up - down) / (2 * step)

    slope = (4 * central(h) - central(2 * h)) / 3
    # measured 6.5e-6 (the Richardson-extrapolated difference); about five times
    assert a.marginal_power_per_subject == pytest.approx(slope, rel=3e-5)
    per_exposed = 1 + (allocation or 0.0)  # every allocation here makes whole comparison groups
    assert a.n_total == pytest.approx(n * per_exposed)
    assert a.implied_missed_hazard == pytest.approx(per_subject * per_exposed / (p * slope), rel=3e-5)
    # the implied ratio: at this alpha, p M dPower/dalpha = (1 - p) F dAlpha/dalpha
    da = 1e-5
    hi = power(design, alpha + da, n, effect, baseline, **kwargs(allocation, years))
    lo = power(design, alpha - da, n, effect, baseline, **kwargs(allocation, years))
    ratio = (1 - p) * float(hi.attained_alpha - lo.attained_alpha) / (p * float(hi.power - lo.power))
    # measured 3.9e-8 (the audit's own step in z of 1e-5); about five times
    assert a.implied_cost_ratio == pytest.approx(ratio, rel=2e-7)
    assert a.implied_false_alarm is not None and a.implied_missed_hazard is not None
    assert a.implied_false_alarm == pytest.approx(a.implied_missed_hazard / ratio, rel=2e-7)


def test_audit_sized_by_power_matches_the_solver_size_and_bayes_rule() -> None:
    a = audit(
        "cohort-rate",
        baseline=1e-3,
        alpha=0.05,
        effect=2.0,
        p_harm=0.1,
        per_subject=100.0,
        power=0.8,
        years=5.0,
        allocation=2.0,
        test="normal",
    )
    r = power("cohort-rate", 0.05, a.n_per_group, 2.0, 1e-3, allocation=2.0, years=5.0, test="normal")
    assert float(r.power) >= 0.8 and a.power == pytest.approx(float(r.power), rel=1e-12)
    smaller = power("cohort-rate", 0.05, a.n_per_group - 1, 2.0, 1e-3, allocation=2.0, years=5.0, test="normal")
    assert float(smaller.power) < 0.8
    beta, alpha = 1 - a.power, a.attained_alpha
    assert a.p_harm_given_negative == pytest.approx(0.1 * beta / (0.1 * beta + 0.9 * (1 - alpha)), rel=1e-12)
    assert a.p_harm_given_positive == pytest.approx(0.1 * a.power / (0.1 * a.power + 0.9 * alpha), rel=1e-12)


@pytest.mark.parametrize(("design", "baseline", "allocation", "years", "effect", "n"), NORMAL_PROTOCOLS)
def test_detectable_effects_have_the_stated_power(
    design: str, baseline: float, allocation: float | None, years: float | None, effect: float, n: int
) -> None:
    a = audit(
        design,
        baseline=baseline,
        alpha=0.05,
        effect=effect,
        p_harm=0.2,
        per_subject=10.0,
        n_per_group=n,
        allocation=allocation,
        years=years,
        test="normal",
    )
    assert set(a.detectable_effects) == {"0.5", "0.8", "0.95"}
    for level, found in a.detectable_effects.items():
        assert found is not None and found > 1
        r = power(design, 0.05, n, found, baseline, **kwargs(allocation, years))
        # measured 1.6e-15: the effect is a root found to rounding
        assert float(r.power) == pytest.approx(float(level), rel=1e-12)


def test_exact_audit_detectable_effects_and_implied_ratio_range() -> None:
    # SIR study, E = 2.5 expected cases at the reference rate.
    n, baseline, years, sir, p = 5000, 1e-4, 5.0, 2.5, 0.2
    a = audit(
        "reference-rate",
        baseline=baseline,
        alpha=0.05,
        effect=sir,
        p_harm=p,
        per_subject=10.0,
        n_per_group=n,
        years=years,
        test="exact",
    )
    assert a.test == "exact"
    E = n * baseline * years
    c = int(stats.poisson.isf(0.05, E)) + 1  # smallest c with P(Pois(E) >= c) <= 0.05
    assert stats.poisson.sf(c - 1, E) <= 0.05 < stats.poisson.sf(c - 2, E)
    assert a.attained_alpha == pytest.approx(stats.poisson.sf(c - 1, E), rel=1e-9)
    assert a.power == pytest.approx(stats.poisson.sf(c - 1, sir * E), rel=1e-9)
    # Neyman-Pearson: O >= c is the Bayes test for M/F between these two ratios
    odds = (1 - p) / p
    expected = (
        odds * math.exp((sir - 1) * E - c * math.log(sir)),
        odds * math.exp((sir - 1) * E - (c - 1) * math.log(sir)),
    )
    # measured 1.6e-16: rounding only
    assert a.implied_cost_ratio_range == pytest.approx(expected, rel=1e-12)
    # the smallest effect detected with each power: exact power is continuous and rising in the SIR
    for level, found in a.detectable_effects.items():
        assert found is not None
        # measured 3.9e-8 (the root's tolerance in the effect); about five times
        assert stats.poisson.sf(c - 1, found * E) == pytest.approx(float(level), rel=2e-7)


def test_exactly_one_of_power_and_size() -> None:
    common: dict[str, Any] = {
        "baseline": 1e-3,
        "alpha": 0.05,
        "effect": 2.0,
        "p_harm": 0.2,
        "per_subject": 10.0,
        "years": 5.0,
    }
    with pytest.raises(DecideError, match="exactly one of power and n_per_group"):
        audit("cohort-rate", power=0.8, n_per_group=1000, **common)
    with pytest.raises(DecideError, match="exactly one of power and n_per_group"):
        audit("cohort-rate", **common)


@pytest.mark.parametrize(("key", "value"), [("p_harm", 1.0), ("p_harm", 0.0), ("per_subject", -1.0)])
def test_audit_rejects_bad_judgments(key: str, value: float) -> None:
    args: dict[str, Any] = {
        "baseline": 1e-3,
        "alpha": 0.05,
        "effect": 2.0,
        "p_harm": 0.2,
        "per_subject": 10.0,
        "years": 5.0,
        "n_per_group": 1000,
        key: value,
    }
    with pytest.raises(DecideError, match=key):
        audit("cohort-rate", **args)


def test_continuity_corrected_audit_detects_with_the_stated_power() -> None:
    a = audit(
        "cohort-risk",
        baseline=0.01,
        alpha=0.05,
        effect=2.0,
        p_harm=0.2,
        per_subject=10.0,
        n_per_group=3000,
        test="normal",
        continuity=True,
    )
    assert a.test == "normal-cc"
    for level, found in a.detectable_effects.items():
        assert found is not None
        r = power("cohort-risk", 0.05, 3000, found, 0.01, test="normal", continuity=True)
        # measured 6.7e-16: rounding only
        assert float(r.power) == pytest.approx(float(level), rel=1e-12)
