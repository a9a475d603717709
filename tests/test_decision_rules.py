"""The alpha-rule registry: one class per rule, for the normal and the exact test alike.

Outside checks: the registry names exactly the rules a policy file may give
(the list in :mod:`decide.decision.policies`), and a rule class put in the
registry is what the decision runs, for the normal test (critical value) and
the exact test (critical region) alike: a rule that never flags gives power 0
and attained alpha 0 (definition of a test that never rejects).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from decision_helpers import fixed_size_problem
from numpy.typing import NDArray

from decide.decision import rules
from decide.decision.loss import ExactOptions, LossModel
from decide.decision.optimize import decide_policy
from decide.decision.policies import Policy, alpha_rule_names, size_rule_names
from decide.decision.prior import EffectPrior
from decide.designs._base import FloatArray
from decide.errors import DecideError


def test_the_registry_holds_every_rule_a_policy_may_name() -> None:
    assert alpha_rule_names() == ("fixed", "loss-optimal", "equal-to-beta", "posterior", "for-power")
    for name, rule in rules.RULES.items():
        assert rule.name == name and isinstance(rule, rules.AlphaRule)


class NeverFlag(rules.AlphaRule):
    """A rule that picks the test that never flags (an invented rule, for the test)."""

    name = "fixed"
    summary = "never flags."
    needs = ("alpha.value",)

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
    from decide.decision.sizes import SIZE_RULES

    assert size_rule_names() == tuple(SIZE_RULES) == ("smallest-for-power", "largest-allowed", "loss-optimal")


class FlagAtThreshold(rules.Fixed):
    """An invented rule for the tests: the fixed rule under a new name, taking ``alpha.value``."""

    name = "invented-threshold"
    summary = "an invented rule that flags at value."
    needs = ("alpha.value",)


def test_a_new_rule_is_one_registration(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    """Registered in RULES and nowhere else, a rule is named by a policy, a policy file and the schema."""
    from decide.scenario.policy_files import load_policy_file, policy_json_schema

    monkeypatch.setitem(rules.RULES, FlagAtThreshold.name, FlagAtThreshold())
    assert FlagAtThreshold.name in alpha_rule_names()
    policy = Policy("p", "P", "", FlagAtThreshold.name, "largest-allowed", alpha=0.05)
    assert rules.rule_of(policy).stated_alpha(policy) == 0.05
    with pytest.raises(DecideError, match=r'alpha\.value: is required with rule = "invented-threshold"'):
        Policy("p", "P", "", FlagAtThreshold.name, "largest-allowed")
    with pytest.raises(DecideError, match=r'applies to rule = "fixed" or rule = "invented-threshold" only'):
        Policy("p", "P", "", "loss-optimal", "largest-allowed", alpha=0.05)
    file = tmp_path / "invented.toml"
    file.write_text(
        'title = "Invented"\nsummary = "Invented."\n[alpha]\nrule = "invented-threshold"\nvalue = 0.05\n'
        '[size]\nrule = "largest-allowed"\n',
        encoding="utf-8",
    )
    assert load_policy_file(file).alpha_rule == FlagAtThreshold.name
    rule_schema = policy_json_schema()["$defs"]["AlphaTable"]["properties"]["rule"]
    assert FlagAtThreshold.name in rule_schema["enum"]
    assert "invented-threshold: an invented rule that flags at value." in rule_schema["description"]
