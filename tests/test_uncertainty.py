"""Probabilistic inputs: distributions, draws, and what they do to the choice.

Outside references: scipy.stats (``beta``, ``lognorm``) for the distributions;
:func:`decide.optimize` and :func:`decide.decide_policy` for every loss; the
Monte Carlo error of a sample quantile, ``sqrt(q (1 - q) / N) / f(x_q)``
(Serfling 1980, *Approximation Theorems of Mathematical Statistics*, Wiley,
sec. 2.3.3; from memory).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from decide import DecideError, decide_policy, optimize
from decide.decision.policies import Policy
from decide.decision.problem import Constraints
from decide.decision.uncertainty import (
    BetaInput,
    Distribution,
    LognormalInput,
    Probabilistic,
    draw_inputs,
    probabilistic,
)
from decide.scenario import ScenarioError, load_policies, load_scenario

REPO = Path(__file__).resolve().parents[1]
LOADED = load_scenario(REPO / "scenarios" / "mill-dust-uncertain.toml")
MILL = LOADED.problem
POLICIES = list(load_policies().values())


def test_scenario_table_gives_the_distributions() -> None:
    assert LOADED.model.uncertainty is not None
    inputs = LOADED.model.uncertainty.to_inputs()
    beta = inputs["prior.p_harm"]
    assert isinstance(beta, BetaInput)
    # scipy.stats.beta(a, b).mean() and .std() give back the stated mean and sd
    assert stats.beta(beta.a, beta.b).mean() == pytest.approx(0.25)
    assert stats.beta(beta.a, beta.b).std() == pytest.approx(0.12)
    fa = inputs["consequences.false_alarm"]
    assert isinstance(fa, LognormalInput)
    # scipy.stats.lognorm.ppf([0.05, 0.95], s=log_sd, scale=median) gives back the stated interval
    assert stats.lognorm.ppf([0.05, 0.95], s=fa.log_sd, scale=fa.median) == pytest.approx([5e6, 4.5e7])


def test_lognormal_draws_match_scipy_quantiles() -> None:
    dist = LognormalInput.from_interval(5e6, 4.5e7, 0.9, "consequences.false_alarm")
    n = 40_000
    x = draw_inputs({"consequences.false_alarm": dist}, n, seed=7)["consequences.false_alarm"]
    frozen = stats.lognorm(s=dist.log_sd, scale=dist.median)
    for q in (0.05, 0.25, 0.5, 0.75, 0.95):
        ref = frozen.ppf(q)
        se = np.sqrt(q * (1 - q) / n) / frozen.pdf(ref)
        assert abs(np.quantile(x, q) - ref) < 4 * se, q


def test_beta_draws_match_scipy_quantiles() -> None:
    dist = BetaInput.from_mean_sd(0.25, 0.12)
    n = 40_000
    x = draw_inputs({"prior.p_harm": dist}, n, seed=11)["prior.p_harm"]
    frozen = stats.beta(dist.a, dist.b)
    for q in (0.05, 0.5, 0.95):
        ref = frozen.ppf(q)
        assert abs(np.quantile(x, q) - ref) < 4 * np.sqrt(q * (1 - q) / n) / frozen.pdf(ref)
        assert dist.quantile(q) == pytest.approx(ref)


def test_degenerate_distributions_give_the_deterministic_optimum() -> None:
    c = MILL.consequences
    inputs: dict[str, Distribution] = {
        "prior.p_harm": BetaInput.from_mean_sd(MILL.p_harm, 0.0),
        "consequences.false_alarm": LognormalInput.from_interval(c.false_alarm, c.false_alarm, 0.9, "f"),
    }
    r = probabilistic(MILL, inputs, 50, seed=3, policies=POLICIES)
    d = optimize(MILL)
    assert d.expected_loss is not None and d.n_per_group is not None
    spreads = {s.name: s for s in r.spreads}
    for name, value in (
        ("expected_loss", d.expected_loss),
        ("n_per_group", d.n_per_group),
        ("attained_alpha", d.attained_alpha),
        ("power", d.power),
    ):
        assert all(v == pytest.approx(value, rel=1e-7) for v in spreads[name].quantiles), name
    assert r.evpi == 0.0
    assert r.expected_regret_of_central == pytest.approx(0.0, abs=1e-9 * d.expected_loss)
    assert r.average_optimum.n_per_group == d.n_per_group
    assert r.average_optimum.average_loss == pytest.approx(d.expected_loss, rel=1e-9)
    assert r.action_probability["study"] == 1.0


@pytest.fixture(scope="module")
def draws_result() -> Probabilistic:
    assert LOADED.model.uncertainty is not None
    return probabilistic(MILL, LOADED.model.uncertainty.to_inputs(), 400, seed=2026, policies=POLICIES)


def test_same_seed_same_numbers(draws_result: Probabilistic) -> None:
    assert LOADED.model.uncertainty is not None
    again = probabilistic(MILL, LOADED.model.uncertainty.to_inputs(), 400, seed=2026, policies=POLICIES)
    assert again.to_dict() == draws_result.to_dict()
    other = probabilistic(MILL, LOADED.model.uncertainty.to_inputs(), 400, seed=2027, policies=POLICIES)
    assert other.evpi != draws_result.evpi


def test_evpi_and_regret_are_ordered(draws_result: Probabilistic) -> None:
    r = draws_result
    assert r.evpi >= 0
    # committing to the central optimum can do no better than the averaged-loss design
    assert r.expected_regret_of_central >= r.evpi - 1e-9 * r.mean_optimal_loss
    assert r.average_optimum.average_loss <= r.central_optimum.average_loss * (1 + 1e-12)
    assert sum(r.action_probability.values()) == pytest.approx(1.0)
    assert max(r.policy_least_loss_probability.values()) > 0


def test_averaged_loss_of_a_fixed_design_matches_decide_policy_draw_by_draw(draws_result: Probabilistic) -> None:
    """The central optimum's average loss, recomputed draw by draw with a fixed-alpha, fixed-size policy."""
    r = draws_result
    assert LOADED.model.uncertainty is not None
    values = draw_inputs(LOADED.model.uncertainty.to_inputs(), 400, seed=2026)
    d0 = optimize(MILL)
    assert d0.alpha is not None and d0.n_per_group is not None
    fixed = Policy("fixed-design", "fixed design", "", "fixed", "largest-allowed", alpha=d0.alpha)
    losses = []
    for i in range(0, 400, 40):  # every 40th draw
        c = MILL.consequences
        prob = replace(
            MILL,
            p_harm=float(values["prior.p_harm"][i]),
            consequences=replace(
                c,
                missed_hazard=float(values["consequences.missed_hazard"][i]),
                false_alarm=float(values["consequences.false_alarm"][i]),
                per_subject=float(values["consequences.per_subject"][i]),
            ),
            constraints=Constraints(max_n_per_group=d0.n_per_group, min_n_per_group=d0.n_per_group),
        )
        d = decide_policy(prob, fixed)
        assert d.expected_loss is not None
        losses.append(d.expected_loss)
    # the same draws, through the linear recomputation the analysis uses
    from decide.decision.uncertainty import _design_losses, _settings

    mine = _design_losses(d0, MILL, _settings(MILL, values, 400))[::40]
    assert np.allclose(mine, losses, rtol=1e-9)
    assert r.central_optimum.average_loss == pytest.approx(
        float(np.mean(_design_losses(d0, MILL, _settings(MILL, values, 400)))), rel=1e-12
    )


@pytest.mark.parametrize(
    ("make", "match"),
    [
        (lambda: BetaInput.from_mean_sd(0.2, 0.5), "sd must be below"),
        (lambda: BetaInput.from_mean_sd(1.2, 0.1), "mean must be strictly"),
        (lambda: BetaInput.from_shapes(-1.0, 2.0), "must be finite and above 0"),
        (lambda: LognormalInput.from_interval(5.0, 2.0, 0.9, "consequences.false_alarm"), "high must be"),
        (lambda: LognormalInput.from_interval(0.0, 2.0, 0.9, "consequences.false_alarm"), "low must be above"),
        (lambda: LognormalInput.from_interval(1.0, 2.0, 1.0, "consequences.false_alarm"), "level must be"),
    ],
)
def test_impossible_parameters_raise(make: Callable[[], object], match: str) -> None:
    with pytest.raises(DecideError, match=match):
        make()


def test_zero_draws_raise() -> None:
    with pytest.raises(DecideError, match="draws must be at least 1"):
        probabilistic(MILL, {"prior.p_harm": BetaInput.from_mean_sd(0.2, 0.1)}, 0, seed=1)


def test_a_distribution_reaching_invalid_values_is_refused() -> None:
    # a baseline of 0.3 with a risk ratio of 3 cannot go much higher in a cohort-risk study
    risk = load_scenario(REPO / "scenarios" / "solvent-cohort.toml").problem
    risk = replace(risk, study=replace(risk.study, baseline=0.3), constraints=Constraints())
    with pytest.raises(DecideError, match="invalid values"):
        probabilistic(risk, {"study.baseline": LognormalInput.from_interval(0.2, 0.4, 0.9, "b")}, 10, seed=1)


@pytest.mark.parametrize(
    ("table", "key"),
    [
        ("[uncertainty.prior.p_harm]\nmean = 0.2\nsd = 0.9\n", "uncertainty.prior.p_harm.sd"),
        ("[uncertainty.prior.p_harm]\nmean = 0.2\n", "uncertainty.prior.p_harm.sd"),
        (
            "[uncertainty.consequences.false_alarm]\nlow = 5.0\nhigh = 2.0\nlevel = 0.9\n",
            "uncertainty.consequences.false_alarm.high",
        ),
        (
            "[uncertainty.consequences.cost_per_case]\nlow = 1.0\nhigh = 2.0\nlevel = 0.9\n",
            "uncertainty.consequences.cost_per_case",
        ),
        ("[uncertainty.prior.p_harm]\nmedian = 0.2\n", "uncertainty.prior.p_harm.median"),
    ],
)
def test_file_errors_name_the_key(tmp_path: Path, table: str, key: str) -> None:
    text = (REPO / "scenarios" / "solvent-cohort.toml").read_text(encoding="utf-8") + "\n" + table
    path = tmp_path / "s.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ScenarioError) as info:
        load_scenario(path)
    assert f": {key}: " in str(info.value) and "\n" not in str(info.value)
