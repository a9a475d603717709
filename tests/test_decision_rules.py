"""The alpha-rule registry: one class per rule, for the normal and the exact test alike.

Outside checks: the registry names exactly the rules a policy file may give
(the list in :mod:`decide.decision.policies`), and a rule class put in the
registry is what the decision runs, for the normal test (critical value) and
the exact test (critical region) alike: a rule that never flags gives power 0
and attained alpha 0 (definition of a test that never rejects).
"""

from __future__ import annotations

import numpy as np
import pytest
from decision_helpers import fixed_size_problem
from numpy.typing import NDArray

from decide.decision import rules
from decide.decision.loss import ExactOptions, LossModel
from decide.decision.optimize import decide_policy
from decide.decision.policies import ALPHA_RULES, Policy
from decide.decision.prior import EffectPrior
from decide.designs._base import FloatArray


def test_the_registry_holds_every_rule_a_policy_may_name() -> None:
    assert set(rules.RULES) == set(ALPHA_RULES)
    for name, rule in rules.RULES.items():
        assert rule.name == name and isinstance(rule, rules.AlphaRule)


class NeverFlag(rules.AlphaRule):
    """A rule that picks the test that never flags (an invented rule, for the test)."""

    name = "fixed"

    def choose_normal(self, search: rules.NormalSearch) -> FloatArray:
        return search.z_high

    def choose_exact(
        self, model: LossModel, policy: Policy, opts: ExactOptions
    ) -> tuple[NDArray[np.int64], NDArray[np.bool_]]:
        rows = opts.valid.shape[0]
        return np.zeros(rows, dtype=np.int64), np.ones(rows, dtype=bool)  # column 0: never flags


@pytest.mark.parametrize("test", ["normal", "exact"])
def test_a_registered_rule_runs_for_both_tests(test: str, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(rules.RULES, "fixed", NeverFlag())
    prob = fixed_size_problem(
        "reference-rate", 1e-3, 1.0, 5.0, EffectPrior.point(2.0), {"missed_hazard": 1e7}, 400, test=test
    )
    policy = Policy("never", "Never flag", "", "fixed", "largest-allowed", alpha=0.05)
    dec = decide_policy(prob, policy)
    assert dec.test == test and dec.n_per_group == 400
    assert dec.attained_alpha == pytest.approx(0.0, abs=1e-12)
    assert dec.power == pytest.approx(0.0, abs=1e-12)


def test_the_size_registry_holds_every_size_rule_a_policy_may_name() -> None:
    from decide.decision.policies import SIZE_RULES as NAMES
    from decide.decision.sizes import SIZE_RULES

    assert set(SIZE_RULES) == set(NAMES)
