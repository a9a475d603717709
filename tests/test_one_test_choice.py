"""One choice of test (normal or exact) everywhere, made at the size reported.

``test="auto"`` runs the exact test where a cell expects fewer than 10 cases.
The solver, a policy in a comparison, the loss-optimal decision and the audit
must give one study the same test and size, and the reason printed must hold
at that size.

Outside check: with 5e-5 cases per person-year, 5 years' follow-up and equal
groups, the unexposed group expects ``n * 2.5e-4`` cases under either
hypothesis and the exposed group as many under no effect (the smallest cell),
so every cell expects at least 10 exactly from ``n = 40,000`` on (closed form).
"""

from __future__ import annotations

import pytest

from decide.decision.audit import audit
from decide.decision.optimize import compare, optimize
from decide.decision.prior import EffectPrior
from decide.decision.problem import Consequences, Constraints, Problem, Study
from decide.engine.selection import choose_test
from decide.engine.solve import solve
from decide.engine.study import check_setting
from decide.scenario import load_policies

BASELINE, YEARS = 5e-5, 5.0


def four_ways(effect: float) -> list[tuple[str, str | None, int | None]]:
    """Test and size from solve, audit, compare (conventional science) and optimize, same inputs."""
    sol = solve("cohort-rate", effect=effect, alpha=0.05, power=0.8, baseline=BASELINE, years=YEARS)
    aud = audit(
        "cohort-rate",
        effect=effect,
        alpha=0.05,
        power=0.8,
        p_harm=0.2,
        per_subject=10.0,
        baseline=BASELINE,
        years=YEARS,
    )
    prob = Problem(
        Study("cohort-rate", 5e-5, years=5.0),
        EffectPrior.point(effect),
        0.2,
        Consequences(false_alarm=1e6, per_subject=10.0, missed_hazard=1e7),
    )
    cmp = compare(prob, [load_policies()["conventional-science"]])
    # the loss-optimal decision at the same size (pinned by the constraints), so its test can be compared
    n = sol.n_per_group
    pinned = Problem(
        prob.study, prob.effect, prob.p_harm, prob.consequences, Constraints(min_n_per_group=n, max_n_per_group=n)
    )
    opt = optimize(pinned)
    return [
        ("solve", sol.test, sol.n_per_group),
        ("audit", aud.test, aud.n_per_group),
        ("compare", cmp[0].test, cmp[0].n_per_group),
        ("optimize", opt.test, opt.n_per_group),
    ]


def test_the_four_commands_agree_where_the_exact_size_would_need_no_exact_test() -> None:
    # The normal test needs 36,141, where a cell expects 9.04 (< 10): exact then. The exact test
    # first reaches 80 % at 41,429, where every cell expects 10.4: normal there. The one rule
    # applied at the reported size gives the smallest size whose own test reaches the target.
    got = four_ways(2.5)
    assert {(test, n) for _, test, n in got} == {("normal", 40_000)}, got
    sol = solve("cohort-rate", effect=2.5, alpha=0.05, power=0.8, baseline=BASELINE, years=YEARS)
    assert sol.smallest_expected_count == pytest.approx(40_000 * 2.5e-4, rel=1e-12)
    assert sol.smallest_expected_count >= 10
    assert sol.test_reason.startswith("auto: normal") and "< 10" not in sol.test_reason
    assert sol.power >= 0.8


def test_the_four_commands_agree_on_an_exact_study() -> None:
    got = four_ways(5.0)
    assert len({(test, n) for _, test, n in got}) == 1, got
    assert got[0][1] == "exact"
    sol = solve("cohort-rate", effect=5.0, alpha=0.05, power=0.8, baseline=BASELINE, years=YEARS)
    assert sol.smallest_expected_count < 10 and "(< 10)" in sol.test_reason


def test_the_choice_switches_where_the_smallest_cell_reaches_ten() -> None:
    s = check_setting("cohort-rate", 5e-5, None, 5.0, 1, "auto", False)
    below, at = choose_test(s, 39_999, 2.5), choose_test(s, 40_000, 2.5)
    assert below.exact and not at.exact
    assert below.smallest_count == pytest.approx(39_999 * 2.5e-4) and at.smallest_count >= 10
    assert "exact" in below.reason and "normal" in at.reason
