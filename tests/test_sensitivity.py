"""One-way and two-way sensitivity, break-even values, and the batch optimum behind them.

Outside references: :func:`decide.optimize` and :func:`decide.decide_policy`
recompute every break-even value and every batch result (the batch optimum is
a separate search over the same loss); the monotonicity properties follow
from revealed preference (for two costs ``F1 < F2`` with optima ``d1, d2``,
``L_F1(d1) <= L_F1(d2)`` and ``L_F2(d2) <= L_F2(d1)`` give
``(F2 - F1) (a2 - a1) <= 0`` for the attained alphas ``a``; likewise for the
per-subject cost and the size).
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from decide import DecideError, Decision, decide_policy, optimize
from decide.decision.batch import batch_optimum
from decide.decision.inputs import checked_range, default_range, input_names, value_of, with_value
from decide.decision.loss import build_model
from decide.decision.prior import EffectPrior
from decide.decision.problem import Consequences, Constraints, Problem, Study
from decide.decision.sensitivity import Tornado, is_benchmark, least_loss, tornado, two_way
from decide.scenario import load_policies, load_scenario

REPO = Path(__file__).resolve().parents[1]
MILL = load_scenario(REPO / "scenarios" / "mill-dust-uncertain.toml").problem
POLICIES = load_policies()


def _loss(d: Decision) -> float:
    assert d.expected_loss is not None
    return d.expected_loss


def _rel(a: float, b: float) -> float:
    return abs(a - b) / max(abs(a), abs(b), 1e-300)


@pytest.fixture(scope="module")
def mill_tornado() -> Tornado:
    """p_harm and the false-alarm cost over ranges that cross changes of action and of standard."""
    pols = [
        POLICIES[k]
        for k in ("conventional-science", "optimal-alpha-fixed-size", "more-likely-than-not", "loss-optimal")
    ]
    ranges = {
        "prior.p_harm": checked_range(MILL, "prior.p_harm", 0.01, 0.95),
        "consequences.false_alarm": checked_range(MILL, "consequences.false_alarm", 1e6, 2e8),
    }
    return tornado(MILL, pols, ranges, names=tuple(ranges))


def test_tornado_finds_action_changes(mill_tornado: Tornado) -> None:
    kinds = {(t.input, t.kind) for r in mill_tornado.rows for t in r.thresholds}
    assert ("prior.p_harm", "action") in kinds and ("consequences.false_alarm", "action") in kinds
    assert [r.swing for r in mill_tornado.rows] == sorted((r.swing for r in mill_tornado.rows), reverse=True)


def test_action_thresholds_balance_the_losses_recomputed_by_optimize(mill_tornado: Tornado) -> None:
    found = [t for r in mill_tornado.rows for t in r.thresholds if t.kind == "action"]
    assert found
    for t in found:
        assert t.value is not None
        d = optimize(with_value(MILL, t.input, t.value))
        flag, clear = d.no_study["flag_now"], d.no_study["clear_now"]
        assert d.expected_loss is not None
        pair = (d.expected_loss, min(flag, clear)) if "study" in (t.below, t.above) else (flag, clear)
        assert _rel(*pair) < 1e-6, (t, pair)
        below = str(optimize(with_value(MILL, t.input, t.value * (1 - 1e-5))).action)
        above = str(optimize(with_value(MILL, t.input, t.value * (1 + 1e-5))).action)
        assert (below, above) == (t.below, t.above)


def test_policy_thresholds_balance_the_losses_recomputed_by_decide_policy(mill_tornado: Tornado) -> None:
    found = [t for r in mill_tornado.rows for t in r.thresholds if t.kind == "policy" and t.value is not None]
    assert found
    for t in found:
        assert t.value is not None
        losses: dict[str, dict[str, float]] = {}
        for side, x in (("at", t.value), ("below", t.value * (1 - 1e-5)), ("above", t.value * (1 + 1e-5))):
            prob = with_value(MILL, t.input, x)
            losses[side] = {k: _loss(decide_policy(prob, POLICIES[k])) for k in (t.below, t.above)}
        assert _rel(losses["at"][t.below], losses["at"][t.above]) < 1e-6
        assert losses["below"][t.below] < losses["below"][t.above]
        assert losses["above"][t.above] < losses["above"][t.below]


def test_no_change_is_reported_as_none(mill_tornado: Tornado) -> None:
    narrow = tornado(
        MILL, (), {"study.baseline": checked_range(MILL, "study.baseline", 1.1e-3, 1.3e-3)}, names=("study.baseline",)
    )
    assert narrow.rows[0].thresholds == ()
    assert narrow.rows[0].low.action == narrow.rows[0].high.action == "study"


def test_end_points_match_optimize(mill_tornado: Tornado) -> None:
    for r in mill_tornado.rows:
        for e in (r.low, r.high):
            d = optimize(with_value(MILL, r.input, e.value))
            assert e.action == str(d.action)
            if d.expected_loss is not None and e.expected_loss is not None:
                assert _rel(e.expected_loss, d.expected_loss) < 1e-9
                assert e.n_per_group is not None and d.n_per_group is not None
                assert abs(e.n_per_group - d.n_per_group) <= 2


def test_least_loss_standard_leaves_out_the_benchmark() -> None:
    assert is_benchmark(POLICIES["loss-optimal"]) and not is_benchmark(POLICIES["optimal-alpha-fixed-size"])
    assert least_loss({"a": 3.0, "b": 2.0, "c": math.inf}) == "b"
    assert least_loss({"a": math.inf}) is None


# --- the batch optimum against optimize ------------------------------------


@pytest.mark.parametrize(
    ("p", "scale", "fa", "per"),
    [(0.25, 1.0, 1.5e7, 400.0), (0.05, 3.0, 4e6, 100.0), (0.6, 0.2, 9e7, 900.0), (0.9, 10.0, 1e6, 50.0)],
)
def test_batch_optimum_equals_optimize(p: float, scale: float, fa: float, per: float) -> None:
    c = MILL.consequences
    assert c.missed_hazard is not None
    prob = replace(
        MILL, p_harm=p, consequences=replace(c, missed_hazard=c.missed_hazard * scale, false_alarm=fa, per_subject=per)
    )
    b = batch_optimum(build_model(MILL), np.array([p]), np.array([scale]), np.array([fa]), np.array([per]))
    d = optimize(prob)
    assert d.expected_loss is not None and d.n_per_group is not None and d.attained_alpha is not None
    assert _rel(float(b.loss[0]), d.expected_loss) < 1e-9
    assert abs(float(b.n[0]) - d.n_per_group) <= 2
    assert abs(float(b.attained[0]) - d.attained_alpha) < 1e-5


def test_two_way_cells_match_optimize() -> None:
    x = checked_range(MILL, "prior.p_harm", 0.02, 0.9)
    y = checked_range(MILL, "consequences.cost_ratio", 0.05, 50.0)
    grid = two_way(MILL, x, y, points=5)
    assert grid.method == "batch normal test"
    assert {a for row in grid.action for a in row} >= {"study", "flag-now", "clear-now"}
    for i, j in ((0, 0), (2, 3), (4, 1), (3, 4)):
        prob = with_value(
            with_value(MILL, "prior.p_harm", grid.x_values[j]), "consequences.cost_ratio", grid.y_values[i]
        )
        d = optimize(prob)
        assert d.expected_loss is not None
        assert _rel(grid.expected_loss[i][j], d.expected_loss) < 1e-9
        assert grid.action[i][j] == str(d.action)


def test_two_way_by_rows_when_an_axis_moves_the_study() -> None:
    x = checked_range(MILL, "prior.p_harm", 0.05, 0.5)
    y = checked_range(MILL, "study.baseline", 8e-4, 1.6e-3)
    grid = two_way(MILL, x, y, points=3)
    d = optimize(with_value(with_value(MILL, "study.baseline", grid.y_values[2]), "prior.p_harm", grid.x_values[1]))
    assert d.expected_loss is not None
    assert _rel(grid.expected_loss[2][1], d.expected_loss) < 1e-9


# --- inputs, ranges and bad input -------------------------------------------


def test_default_ranges_follow_the_stated_factors() -> None:
    assert default_range(MILL, "prior.p_harm").low == 0.01 and default_range(MILL, "prior.p_harm").high == 0.99
    r = default_range(MILL, "consequences.false_alarm")
    assert r.low == pytest.approx(1.5e6) and r.high == pytest.approx(1.5e8) and r.scale == "log"
    assert default_range(MILL, "study.baseline").high == pytest.approx(2.4e-3)
    e = default_range(MILL, "effect.ratio")
    assert e.low > 1 and e.high == pytest.approx(2.7)


def test_default_range_is_pulled_in_where_the_problem_would_be_invalid() -> None:
    # cohort-risk with baseline 0.3 and a risk ratio 3: doubling the baseline would give a risk above 1
    prob = Problem(
        Study("cohort-risk", 0.3, test="normal"),
        EffectPrior.point(3.0),
        0.2,
        Consequences(false_alarm=1e6, per_subject=10.0, missed_hazard=5e6),
    )
    r = default_range(prob, "study.baseline")
    assert 0.3 < r.high < 1 / 3
    with_value(prob, "study.baseline", r.high)  # valid


def test_derived_missed_cost_is_varied_by_its_parts() -> None:
    water = load_scenario(REPO / "scenarios" / "water-supply-reference.toml").problem
    names = input_names(water)
    assert "consequences.cost_per_case" in names and "consequences.missed_hazard" not in names
    assert "effect.median" in names
    doubled = with_value(water, "consequences.cost_ratio", 2 * value_of(water, "consequences.cost_ratio"))
    assert value_of(doubled, "consequences.cost_ratio") == pytest.approx(2 * value_of(water, "consequences.cost_ratio"))
    # the closed-form expected missed cost agrees with the engine's quadrature
    assert build_model(water).expected_missed == pytest.approx(
        value_of(water, "consequences.cost_ratio") * water.consequences.false_alarm, rel=1e-8
    )


@pytest.mark.parametrize(
    ("name", "lo", "hi", "match"),
    [
        ("prior.harm", 0.1, 0.2, "unknown input"),
        ("prior.p_harm", 0.5, 1.2, "valid domain"),
        ("prior.p_harm", 0.5, 0.2, "lower to a higher"),
        ("consequences.false_alarm", -1.0, 5.0, "valid domain"),
    ],
)
def test_bad_ranges_name_vary(name: str, lo: float, hi: float, match: str) -> None:
    with pytest.raises(DecideError, match=match) as info:
        checked_range(MILL, name, lo, hi)
    assert info.value.params == ("vary",)


# --- monotonicity on random valid scenarios ---------------------------------


@st.composite
def scenarios(draw: st.DrawFn) -> Problem:
    design = draw(st.sampled_from(["cohort-risk", "cohort-rate", "reference-rate", "case-control"]))
    baseline = {
        "cohort-risk": draw(st.floats(2e-4, 5e-3)),
        "cohort-rate": draw(st.floats(2e-4, 5e-3)),
        "reference-rate": draw(st.floats(1e-4, 2e-3)),
        "case-control": draw(st.floats(0.02, 0.3)),
    }[design]
    study = Study(design, baseline, years=draw(st.sampled_from([1.0, 5.0])) if "rate" in design else 1.0, test="normal")
    missed = 10 ** draw(st.floats(6.0, 9.0))
    return Problem(
        study,
        EffectPrior.point(draw(st.floats(1.5, 4.0))),
        draw(st.floats(0.05, 0.6)),
        Consequences(
            false_alarm=10 ** draw(st.floats(5.5, 8.5)),
            per_subject=10 ** draw(st.floats(0.5, 3.0)),
            missed_hazard=missed,
        ),
        Constraints(max_n_per_group=draw(st.sampled_from([None, 3000, 50000]))),
    )


@settings(max_examples=12)
@given(scenarios(), st.floats(1.2, 4.0))
def test_raising_p_harm_never_lowers_the_optimal_power(prob: Problem, factor: float) -> None:
    hi = min(0.95, prob.p_harm * factor)
    a, b = optimize(prob), optimize(replace(prob, p_harm=hi))
    assert a.power is not None and b.power is not None
    assert b.power >= a.power - 1e-6


@settings(max_examples=12)
@given(scenarios(), st.floats(1.2, 10.0))
def test_raising_the_false_alarm_cost_never_raises_the_optimal_attained_alpha(prob: Problem, factor: float) -> None:
    c = prob.consequences
    a, b = optimize(prob), optimize(replace(prob, consequences=replace(c, false_alarm=c.false_alarm * factor)))
    assert a.attained_alpha is not None and b.attained_alpha is not None
    assert b.attained_alpha <= a.attained_alpha + 1e-6


@settings(max_examples=12)
@given(scenarios(), st.floats(1.2, 10.0))
def test_raising_the_per_subject_cost_never_raises_the_optimal_size(prob: Problem, factor: float) -> None:
    c = prob.consequences
    a, b = optimize(prob), optimize(replace(prob, consequences=replace(c, per_subject=c.per_subject * factor)))
    assert a.n_per_group is not None and b.n_per_group is not None
    assert b.n_per_group <= a.n_per_group
