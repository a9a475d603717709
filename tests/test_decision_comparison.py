"""Policies beside deciding now: the comparison's no-study options, best action and regret.

Outside checks (definitions and closed forms computed in the test):

* flagging now costs ``(1 - p) F`` and clearing now ``p M`` (constant
  missed-hazard cost, point effect);
* regret is a policy's expected loss less the least expected loss of every
  available action, a study or none (definition), so it is never negative
  and zero only for the best action;
* a policy that cannot meet the constraints is not available: it has no
  regret and never ranks above the loss-optimal choice.
"""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from decide.cli import app
from decide.decision.optimize import Comparison, compare, optimize
from decide.decision.prior import EffectPrior
from decide.decision.problem import Consequences, Constraints, Problem, Study
from decide.report.sentences import best_action, recommendation
from decide.scenario import load_policies

POLICIES = load_policies()
REPO = Path(__file__).resolve().parents[1]


def problem(*, fixed: float = 0.0, per_subject: float = 5.0, p: float = 0.3, cap: int | None = 50_000) -> Problem:
    """Invented: a cohort of person-time, normal test, point effect 2, constant costs."""
    return Problem(
        Study("cohort-rate", 1e-3, allocation=1.0, years=5.0, test="normal"),
        EffectPrior.point(2.0),
        p,
        Consequences(false_alarm=1e6, per_subject=per_subject, fixed=fixed, missed_hazard=1e6),
        Constraints(max_n_per_group=cap),
    )


def test_no_study_wins_when_the_fixed_cost_exceeds_both_no_study_losses() -> None:
    cmp = compare(problem(fixed=5e5), list(POLICIES.values()))
    assert isinstance(cmp, Comparison)
    assert (cmp.flag_now, cmp.clear_now) == pytest.approx((0.7 * 1e6, 0.3 * 1e6))
    assert cmp.best_action == "clear-now" and cmp.best_policy is None
    assert cmp.best_loss == pytest.approx(0.3 * 1e6)
    best = next(d for d in cmp if d.policy == "loss-optimal")
    assert best.action == "clear-now" and best.no_study_action == "clear-now"
    assert best.expected_loss is not None and best.regret is not None
    # regret against deciding now, not against the loss-optimal study (which would make it 0)
    assert best.regret == pytest.approx(best.expected_loss - 0.3e6, rel=1e-12)
    assert best.regret > 2e5  # the fixed cost alone is 5e5
    for d in cmp:
        if d.feasible:
            assert d.regret is not None and d.regret > 0
    assert best_action(cmp).startswith("No study is worth its cost: the best action is to clear now")


def test_a_worthwhile_study_is_the_best_action_with_zero_regret() -> None:
    cmp = compare(problem(), list(POLICIES.values()))
    best = next(d for d in cmp if d.policy == "loss-optimal")
    assert cmp.best_action == "study" and cmp.best_policy == "loss-optimal"
    assert best.action == "study" and best.regret == 0.0 and best.expected_loss is not None
    assert cmp.best_loss == best.expected_loss < min(cmp.flag_now, cmp.clear_now)
    for d in cmp:
        if d.feasible:
            assert d.regret is not None and d.regret >= -1e-9 * best.expected_loss


def test_a_prohibitive_subject_cost_is_a_decision_now_not_a_one_subject_study() -> None:
    # Each subject costs more than the whole no-study loss: the best "study" is the smallest allowed,
    # which the decision must not present as the thing to do.
    dec = optimize(problem(per_subject=1e6))
    assert dec.feasible and dec.net_benefit is not None and dec.net_benefit < 0
    assert dec.action == "clear-now"
    assert recommendation(dec).startswith("No study is worth its cost")


def test_unavailable_policies_keep_their_numbers_but_get_no_regret() -> None:
    cmp = compare(problem(cap=500), list(POLICIES.values()))
    science = next(d for d in cmp if d.policy == "conventional-science")
    assert not science.feasible and science.action == "not-available"
    assert science.n_per_group is not None and science.n_per_group > 500  # what it would need
    assert science.expected_loss is not None and science.regret is None
    assert cmp.best_policy != "conventional-science"
    assert "cannot be met" in recommendation(science)


def test_a_comparison_iterates_and_indexes_like_its_decisions() -> None:
    chosen = [POLICIES["equal-errors"], POLICIES["loss-optimal"]]
    cmp = compare(problem(), chosen)
    assert [d.policy for d in cmp] == ["equal-errors", "loss-optimal"]
    assert len(cmp) == 2 and cmp[1].policy == "loss-optimal" and cmp[:1] == cmp.decisions[:1]
    data = cmp.to_dict()
    assert data["best_action"] == "study" and len(data["decisions"]) == 2


def test_the_command_line_leads_with_deciding_now_when_no_study_pays(tmp_path: Path) -> None:
    # the bundled invented depot scenario with a fixed study cost above the loss of flagging now
    text = (REPO / "scenarios" / "depot-cohort-rate.toml").read_text()
    text = text.replace("fixed = 2.0e5", "fixed = 2.9e7").replace("budget = 3.2e6", "budget = 4.0e7")
    path = tmp_path / "costly.toml"
    path.write_text(text)
    shown = CliRunner().invoke(app, ["compare", str(path)], env={"COLUMNS": "120"})
    assert shown.exit_code == 0, shown.stderr
    assert shown.stdout.startswith("No study is worth its cost: the best action is to flag now")
    shown = CliRunner().invoke(app, ["optimize", str(path)], env={"COLUMNS": "120"})
    assert shown.stdout.startswith("No study is worth its cost under loss-optimal: flag now")
    data = json.loads(CliRunner().invoke(app, ["compare", str(path), "--json"], env={"COLUMNS": "120"}).stdout)
    flag_now = 0.8 * 3.0e7  # (1 - p_harm) * false_alarm
    assert data["no_study"]["flag_now"] == pytest.approx(flag_now, rel=1e-12)
    assert data["best"]["action"] == "flag-now" and data["best"]["policy"] is None
    for row in data["policies"]:
        assert row["recommendation"]
        if row["feasible"]:
            assert row["action"] == "flag-now"
            assert row["regret"] == pytest.approx(row["expected_loss"] - flag_now, rel=1e-12)
        else:
            assert row["action"] == "not-available" and row["regret"] is None


def test_csv_carries_the_action_and_both_posterior_probabilities() -> None:
    from decide.report.tables import to_csv

    cmp = compare(problem(fixed=5e5), [POLICIES["loss-optimal"]])
    (row,) = list(csv.DictReader(io.StringIO(to_csv(cmp.decisions))))
    d = cmp[0]
    assert row["action"] == "clear-now"
    assert d.p_harm_given_positive is not None and d.p_harm_given_negative is not None
    # Bayes' rule from the decision's own error rates (p = 0.3)
    p, power, attained = 0.3, d.power, d.attained_alpha
    assert power is not None and attained is not None
    assert float(row["p_harm_given_positive"]) == pytest.approx(p * power / (p * power + (1 - p) * attained), rel=1e-9)
