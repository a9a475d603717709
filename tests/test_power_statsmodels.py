"""Normal power and size against statsmodels (an outside reference), to 1e-12 relative.

Both sides are closed forms, so they agree to rounding (measured: 6e-15).

statsmodels 0.14/0.15:
- ``stats.proportion.samplesize_proportions_2indep_onetail(diff, prop2, power,
  ratio, alpha, alternative)``: the size of the exposed group; its two-sided
  size neglects the far tail, as ours does.
- ``stats.proportion.power_proportions_2indep(diff, prop2, nobs1, ratio, alpha,
  alternative, return_results=False)``: power including the far tail.
- ``stats.rates.power_poisson_ratio_2indep(rate1, rate2, nobs1, nobs_ratio,
  exposure, value=1, method_var="score", alternative, return_results=False)``;
  ``value=1`` must be passed (its default 0 takes log(0)).
"""

from __future__ import annotations

import numpy as np
import pytest
from statsmodels.stats import proportion as sm_proportion
from statsmodels.stats import rates as sm_rates

from decide.designs import get_design
from decide.engine.power import normal_power
from decide.engine.solve import normal_size
from decide.engine.study import check_setting

ALTERNATIVE = {1: "larger", 2: "two-sided"}


def _cases(seed: int, k: int) -> dict[str, np.ndarray]:
    """A spread of inputs, rare baselines included (log-uniform 1e-5 .. 0.3)."""
    rng = np.random.default_rng(seed)
    return {
        "baseline": np.exp(rng.uniform(np.log(1e-5), np.log(0.3), k)),
        "effect": np.exp(rng.uniform(np.log(1.05), np.log(3.0), k)),
        "allocation": rng.choice([0.25, 0.5, 1.0, 2.0, 3.0, 4.0], k),
        "alpha": rng.choice([0.001, 0.01, 0.025, 0.05, 0.1], k),
        "power": rng.uniform(0.5, 0.99, k),
        "n": np.round(np.exp(rng.uniform(np.log(20), np.log(2e6), k))),
        "years": rng.uniform(0.5, 20, k),
    }


def _p1(design: str, baseline: np.ndarray, effect: np.ndarray) -> np.ndarray:
    if design == "cohort-risk":
        return np.asarray(effect * baseline)
    odds = effect * baseline / (1 - baseline)  # case-control: exposure among cases
    return np.asarray(odds / (1 + odds))


@pytest.mark.parametrize("sides", [1, 2])
@pytest.mark.parametrize("design", ["cohort-risk", "case-control"])
def test_normal_size_matches_statsmodels(design: str, sides: int) -> None:
    c = _cases(11 + sides, 60)
    p1 = _p1(design, c["baseline"], c["effect"])
    st = check_setting(design, c["baseline"], c["allocation"], None, sides, "normal", False)
    ours = normal_size(st, c["alpha"], c["power"], c["effect"])
    for i in range(ours.size):
        theirs = sm_proportion.samplesize_proportions_2indep_onetail(
            diff=p1[i] - c["baseline"][i],
            prop2=c["baseline"][i],
            power=c["power"][i],
            ratio=c["allocation"][i],
            alpha=c["alpha"][i],
            alternative=ALTERNATIVE[sides],
        )
        # measured 6.1e-15: both closed forms, rounding only
        assert ours[i] == pytest.approx(theirs, rel=1e-12), i


@pytest.mark.parametrize("sides", [1, 2])
@pytest.mark.parametrize("design", ["cohort-risk", "case-control"])
def test_normal_power_matches_statsmodels(design: str, sides: int) -> None:
    c = _cases(23 + sides, 60)
    # sizes around the one needed, so powers spread over (alpha, 1)
    st = check_setting(design, c["baseline"], c["allocation"], None, sides, "normal", False)
    n = np.ceil(normal_size(st, c["alpha"], c["power"], c["effect"]) * np.linspace(0.05, 2, 60))
    p1 = _p1(design, c["baseline"], c["effect"])
    ours, size = normal_power(
        get_design(design),
        c["alpha"],
        n,
        c["effect"],
        c["baseline"],
        c["allocation"],
        np.ones(60),
        sides,
        False,
    )
    np.testing.assert_allclose(size, c["alpha"], rtol=1e-9)
    for i in range(ours.size):
        theirs = sm_proportion.power_proportions_2indep(
            diff=p1[i] - c["baseline"][i],
            prop2=c["baseline"][i],
            nobs1=n[i],
            ratio=c["allocation"][i],
            alpha=c["alpha"][i],
            alternative=ALTERNATIVE[sides],
            return_results=False,
        )
        # measured 6.0e-15: both closed forms, rounding only
        assert ours[i] == pytest.approx(float(theirs), rel=1e-12), i


@pytest.mark.parametrize("sides", [1, 2])
def test_cohort_rate_normal_power_matches_statsmodels(sides: int) -> None:
    c = _cases(37 + sides, 60)
    rate0 = c["baseline"]
    rate1 = c["effect"] * rate0
    # nobs so that the exposed group expects between 1 and 2000 cases
    n = np.ceil(np.exp(np.linspace(0, np.log(2000), 60)) / (rate1 * c["years"]))
    ours, _ = normal_power(
        get_design("cohort-rate"),
        c["alpha"],
        n,
        c["effect"],
        rate0,
        c["allocation"],
        c["years"],
        sides,
        False,
    )
    for i in range(ours.size):
        theirs = sm_rates.power_poisson_ratio_2indep(
            rate1[i],
            rate0[i],
            n[i],
            c["allocation"][i],
            exposure=c["years"][i],
            value=1,
            method_var="score",
            alpha=c["alpha"][i],
            alternative=ALTERNATIVE[sides],
            return_results=False,
        )
        # measured 3.8e-15: both closed forms, rounding only
        assert ours[i] == pytest.approx(float(theirs), rel=1e-12), i
