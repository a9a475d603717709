"""What a decision reports, checked from its definitions and by simulation.

Each reported number is recomputed in the test from its definition:

* ``expected_loss`` is the sum of the three parts, each recomputed here:
* ``missed = p E[beta(theta) M(theta)]`` and
  ``false_alarm = (1 - p) alpha_attained F``, the power and attained alpha
  taken from ``decide.power.power`` (a path separate from the optimiser's);
* ``study = fixed + per_subject * n_total``;
* no study: flag now costs ``(1 - p) F``, clear now ``p E[M]``;
* ``net_benefit = min(no study) - expected loss``, and the recommendation
  says no study is worth its cost exactly when that is not positive;
* ``P(harm | negative) = p beta / (p beta + (1 - p)(1 - alpha))`` (Bayes' rule).

Finally a seeded Monte Carlo simulation of the whole decision process
(harm or not, an effect from the prior above 1, counts from the design's Poisson
distributions, the exact conditional test by scipy p-values, the costs
charged) must agree with the expected loss within four standard errors.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from decide.decision.optimize import Decision, compare, decide_policy, optimize
from decide.decision.prior import EffectPrior
from decide.decision.problem import Consequences, Constraints, Problem, Study
from decide.designs import get_design
from decide.engine.power import power
from decide.errors import ApproximationWarning
from decide.report.sentences import recommendation
from decide.scenario import load_policies, load_scenario

REPO = Path(__file__).resolve().parents[1]
SCENARIOS = sorted((REPO / "scenarios").glob("*.toml"))
DERIVED = {"exposed_population": 1e4, "background_rate": 1e-3, "cost_per_case": 1e5, "horizon_years": 10.0}


def constructed_problems() -> list[Problem]:
    return [
        Problem(
            Study("cohort-rate", 2e-3, allocation=2.0, years=3.0, test="exact"),
            EffectPrior.from_interval(1.5, 6.0, 0.9),
            0.3,
            Consequences(false_alarm=3e6, per_subject=20.0, fixed=1e4, **DERIVED),
            Constraints(min_n_per_group=300, max_n_per_group=500),
        ),
        Problem(
            Study("cohort-risk", 0.004, allocation=1.5, test="normal", continuity=True),
            EffectPrior.point(2.5),
            0.2,
            Consequences(false_alarm=5e6, per_subject=30.0, fixed=2e4, missed_hazard=4e7),
            Constraints(max_n_per_group=20000, budget=1.5e6),
        ),
        Problem(
            Study("case-control", 0.15, allocation=3.0, sides=2, test="auto"),
            EffectPrior.from_interval(1.8, 4.0, 0.8),
            0.4,
            Consequences(false_alarm=2e6, per_subject=100.0, missed_hazard=1e7),
            Constraints(max_n_per_group=400),
        ),
    ]


PROBLEMS = [load_scenario(p).problem for p in SCENARIOS] + constructed_problems()
IDS = [p.stem for p in SCENARIOS] + ["cohort-rate-exact", "cohort-risk-cc", "case-control-two-sided"]


def n_total(problem: Problem, n: int) -> int:
    s = problem.study
    d = get_design(s.design)
    return n + (int(np.floor(s.allocation * n + 0.5)) if d.allocation_name else 0)


def recompute(problem: Problem, dec: Decision) -> dict[str, float]:
    """The decision's numbers from their definitions, power from decide.power.power."""
    s = problem.study
    d = get_design(s.design)
    cost = problem.consequences
    # the decision's numbers are integrated over the prior to 1e-9: compare with a finer rule
    # (composite Gauss-Legendre, 128 panels, a panel edge at the cost's kink at effect 1)
    effects, weights = problem.effect.nodes(128, kink=1.0 if cost.is_derived else None)
    missed_cost = cost.missed_cost(effects)
    assert dec.alpha is not None and dec.n_per_group is not None and dec.test is not None
    r = power(
        s.design,
        dec.alpha,
        dec.n_per_group,
        effects,
        s.baseline,
        allocation=s.allocation if d.allocation_name else None,
        years=s.years if d.uses_years else None,
        sides=s.sides,
        test="exact" if dec.test == "exact" else "normal",
        continuity=s.continuity,
    )
    p = problem.p_harm
    attained = float(r.attained_alpha[0])
    beta = float(np.sum(weights * (1 - r.power)))
    assert dec.n_per_group is not None
    return {
        "missed": p * float(np.sum(weights * (1 - r.power) * missed_cost)),
        "false_alarm": (1 - p) * attained * cost.false_alarm,
        "study": cost.fixed + cost.per_subject * n_total(problem, dec.n_per_group),
        "flag_now": (1 - p) * cost.false_alarm,
        "clear_now": p * float(np.sum(weights * missed_cost)),
        "attained": attained,
        "beta": beta,
        "given_negative": p * beta / (p * beta + (1 - p) * (1 - attained)),
        "given_positive": p * (1 - beta) / (p * (1 - beta) + (1 - p) * attained),
    }


# The prior's far-left nodes give cells with few expected cases, where decide.power
# warns about the normal test that the scenario's analysis uses.
@pytest.mark.filterwarnings("ignore::decide.errors.ApproximationWarning")
@pytest.mark.parametrize("problem", PROBLEMS, ids=IDS)
def test_every_feasible_policy_reports_consistent_numbers(problem: Problem) -> None:
    decisions = compare(problem, list(load_policies().values()))
    assert any(d.feasible for d in decisions)
    for dec in decisions:
        if dec.n_per_group is None:
            continue
        ref = recompute(problem, dec)
        parts = dec.loss_parts
        assert parts is not None and set(parts) == {"missed", "false_alarm", "study"}
        # the engine neglects count tails below 1e-12 (decide.power), hence the abs terms
        scale = ref["clear_now"] / problem.p_harm + problem.consequences.false_alarm  # E[M] + F
        total = ref["missed"] + ref["false_alarm"] + ref["study"]
        assert dec.expected_loss == pytest.approx(total, rel=1e-9, abs=1e-11 * scale)
        assert parts["missed"] == pytest.approx(ref["missed"], rel=1e-9, abs=1e-11 * scale)
        assert parts["false_alarm"] == pytest.approx(ref["false_alarm"], rel=1e-9, abs=1e-11 * scale)
        assert parts["study"] == pytest.approx(ref["study"], rel=1e-12)
        assert dec.n_total == n_total(problem, dec.n_per_group)
        assert dec.attained_alpha == pytest.approx(ref["attained"], rel=1e-9, abs=1e-12)
        assert dec.beta == pytest.approx(ref["beta"], rel=1e-9, abs=1e-12)
        assert dec.no_study == pytest.approx({"flag_now": ref["flag_now"], "clear_now": ref["clear_now"]}, rel=1e-12)
        assert dec.net_benefit == pytest.approx(
            min(ref["flag_now"], ref["clear_now"]) - total, rel=1e-9, abs=1e-11 * scale
        )
        assert dec.p_harm_given_negative == pytest.approx(ref["given_negative"], rel=1e-8)
        assert dec.p_harm_given_positive == pytest.approx(ref["given_positive"], rel=1e-8)
        says_no_study = "No study is worth its cost" in recommendation(dec)
        assert dec.net_benefit is not None
        assert says_no_study == (dec.feasible and dec.net_benefit <= 0)
        assert (dec.action in ("flag-now", "clear-now")) == says_no_study


def costly_study() -> Problem:
    # A fixed cost above both no-study losses: no study can pay for itself.
    return Problem(
        Study("cohort-rate", 1e-3, allocation=1.0, years=5.0, test="normal"),
        EffectPrior.point(2.0),
        0.3,
        Consequences(false_alarm=1e6, per_subject=5.0, fixed=5e5, missed_hazard=1e6),
        Constraints(max_n_per_group=50000),
    )


def test_no_study_is_recommended_when_every_study_costs_more_than_it_saves() -> None:
    prob = costly_study()
    dec = optimize(prob)
    flag, clear = 0.7 * 1e6, 0.3 * 1e6
    assert dec.no_study == pytest.approx({"flag_now": flag, "clear_now": clear})
    assert dec.feasible
    assert dec.expected_loss is not None
    assert dec.expected_loss > 5e5 > min(flag, clear)
    # the loss of the chosen test recomputed from its definition, power from decide.power.power
    assert dec.alpha is not None and dec.n_per_group is not None
    r = power("cohort-rate", dec.alpha, dec.n_per_group, 2.0, 1e-3, allocation=1.0, years=5.0, test="normal")
    assert dec.n_total is not None
    loss = 0.3 * (1 - float(r.power)) * 1e6 + 0.7 * float(r.attained_alpha) * 1e6 + 5e5 + 5.0 * dec.n_total
    assert dec.expected_loss == pytest.approx(loss, rel=1e-9)
    assert dec.net_benefit == pytest.approx(min(flag, clear) - loss, rel=1e-9)
    assert dec.net_benefit is not None
    assert dec.net_benefit < 0
    assert recommendation(dec).startswith("No study is worth its cost")
    assert "clear now" in recommendation(dec)  # clearing costs 3e5, flagging 7e5
    assert dec.action == "clear-now" and dec.no_study_loss == pytest.approx(clear)
    # the same problem with no fixed cost is worth a study
    cheap = Problem(
        prob.study,
        prob.effect,
        prob.p_harm,
        Consequences(false_alarm=1e6, per_subject=5.0, missed_hazard=1e6),
        prob.constraints,
    )
    worth = optimize(cheap)
    assert worth.net_benefit is not None
    assert worth.net_benefit > 0
    assert "No study is worth its cost" not in recommendation(worth)
    assert recommendation(worth).startswith(f"Study {worth.n_per_group:,} ")


def test_no_study_recommendation_names_the_action_once() -> None:
    dec = optimize(costly_study())
    assert "now now" not in recommendation(dec)


def test_two_sided_probabilities_stay_probabilities() -> None:
    # Harm is likely (p = 0.9) and a miss costs as much as a false alarm, so the
    # loss-optimal choice is to flag whatever the study finds: alpha near 1.
    prob = Problem(
        Study("cohort-rate", 1e-3, years=5.0, sides=2, test="normal"),
        EffectPrior.point(1.5),
        0.9,
        Consequences(false_alarm=1e6, per_subject=1.0, missed_hazard=1e6),
        Constraints(min_n_per_group=500, max_n_per_group=500),
    )
    dec = optimize(prob)
    for value in (dec.alpha, dec.attained_alpha, dec.beta, dec.power, dec.power_at_design_effect):
        assert value is not None and 0.0 <= value <= 1.0
    # the same test through decide.power.power, and its loss from the definition
    with pytest.warns(ApproximationWarning):  # 2.5 expected cases per group
        assert dec.alpha is not None
        r = power("cohort-rate", dec.alpha, 500, 1.5, 1e-3, allocation=1.0, years=5.0, sides=2, test="normal")
    assert dec.alpha is not None and dec.attained_alpha is not None
    assert dec.alpha > 0.99 and dec.attained_alpha == pytest.approx(float(r.attained_alpha), rel=1e-12)
    assert dec.beta == pytest.approx(1 - float(r.power), rel=1e-6, abs=1e-15)
    loss = 0.9 * 1e6 * (1 - float(r.power)) + 0.1 * 1e6 * float(r.attained_alpha) + 1.0 * 1000
    assert dec.expected_loss == pytest.approx(loss, rel=1e-12)
    # flagging always (alpha -> 1) costs (1 - p) F plus the study: nothing does better here
    assert dec.expected_loss == pytest.approx(0.1 * 1e6 + 1000, rel=1e-11)


def test_seeded_simulation_of_the_decision_process_agrees_with_expected_loss() -> None:
    # Exposed and unexposed person-time cohorts, exact conditional test, lognormal
    # prior and a missed cost that grows with the effect.
    prob = constructed_problems()[0]
    dec = optimize(prob)
    assert dec.test == "exact" and dec.feasible
    s, cost = prob.study, prob.consequences
    n = dec.n_per_group
    assert n is not None and dec.alpha is not None and dec.expected_loss is not None and dec.loss_parts is not None
    n0 = int(np.floor(s.allocation * n + 0.5))
    share = n / (n + n0)  # T1 / (T1 + T0), equal follow-up
    rng = np.random.default_rng(20240611)
    draws = 400_000
    harmful = rng.random(draws) < prob.p_harm
    # the effect under harm: the lognormal prior above a ratio of 1 (inverse-cdf draws of the
    # standard normal truncated below at the point where the ratio is 1)
    at_one = stats.norm.cdf(-np.log(prob.effect.median) / prob.effect.log_sd)
    u = stats.norm.ppf(at_one + rng.random(draws) * (1 - at_one))
    theta = prob.effect.median * np.exp(prob.effect.log_sd * u)
    x1 = rng.poisson(s.baseline * n * s.years * np.where(harmful, theta, 1.0))
    x0 = rng.poisson(s.baseline * n0 * s.years, size=draws)
    # one-sided conditional binomial test: P(Bin(x1 + x0, share) >= x1)
    p_value = stats.binom.sf(x1 - 1, x1 + x0, share)
    for i in range(5):  # the same p-values as scipy.stats.binomtest
        ref = stats.binomtest(int(x1[i]), int(x1[i] + x0[i]), share, alternative="greater").pvalue
        assert p_value[i] == pytest.approx(ref, rel=1e-10) or x1[i] + x0[i] == 0
    flagged = p_value <= dec.alpha * (1 + 1e-10)
    charged = (
        np.where(harmful & ~flagged, cost.missed_cost(theta), 0.0)
        + np.where(~harmful & flagged, cost.false_alarm, 0.0)
        + cost.fixed
        + cost.per_subject * (n + n0)
    )
    mean, se = charged.mean(), charged.std(ddof=1) / np.sqrt(draws)
    assert abs(mean - dec.expected_loss) < 4 * se
    # and the parts separately, each within four of its standard errors
    false_alarms = np.where(~harmful & flagged, cost.false_alarm, 0.0)
    assert abs(false_alarms.mean() - dec.loss_parts["false_alarm"]) < 4 * false_alarms.std() / np.sqrt(draws)
    assert se < 0.01 * dec.expected_loss  # the check has teeth


def test_decide_policy_takes_a_prepared_model_or_a_problem() -> None:
    from decide.decision.loss import build_model

    prob = constructed_problems()[1]
    policy = load_policies()["equal-errors"]
    assert decide_policy(prob, policy) == decide_policy(build_model(prob), policy)


def test_a_weak_normal_approximation_is_noted_in_the_decision() -> None:
    # E = 400 * 5 * 1e-3 = 2 expected cases at the reference rate, normal test asked for
    prob = Problem(
        Study("reference-rate", 1e-3, years=5.0, test="normal"),
        EffectPrior.point(3.0),
        0.3,
        Consequences(false_alarm=1e6, per_subject=1.0, missed_hazard=1e7),
        Constraints(min_n_per_group=400, max_n_per_group=400),
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ApproximationWarning)
        dec = optimize(prob)
    assert dec.test == "normal"
    assert any("expected" in note for note in dec.warnings)
