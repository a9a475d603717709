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


@pytest.mark.parametrize(
    ("design", "baseline", "allocation", "years"),
    [
        ("cohort-risk", 0.01, 1.5, 1.0),
        ("cohort-rate", 2e-3, 2.0, 3.0),
        ("reference-rate", 1e-3, 1.0, 5.0),
        ("case-control", 0.2, 2.0, 1.0),
        ("matched-case-control", 0.3, 1.0, 1.0),
    ],
)
@pytest.mark.parametrize("alpha", [0.01, 0.05, 0.2])
def test_the_level_test_alone_equals_its_column_of_the_whole_family(
    design: str, baseline: float, allocation: float, years: float, alpha: float
) -> None:
    """A rule with a fixed alpha gets the level test summed directly; the family's ordered path agrees.

    The two sum the same masses in different orders: measured gaps are below
    1e-13 relative (7e-14 at most over the designs and levels here).
    """
    from decide.decision.loss import build_model, exact_batches

    prior = EffectPrior.from_interval(1.5, 4.0, 0.9)
    prob = fixed_size_problem(design, baseline, allocation, years, prior, {"missed_hazard": 1e7}, 300, test="exact")
    model = build_model(prob)
    sizes = np.array([40.0, 137.0, 300.0, 811.0])
    policy = Policy("p", "P", "", "fixed", "largest-allowed", alpha=alpha)
    for (idx, whole), (idx_level, alone) in zip(
        exact_batches(model, sizes), exact_batches(model, sizes, level=alpha), strict=True
    ):
        np.testing.assert_array_equal(idx, idx_level)
        col, _ = rules.Fixed().choose_exact(model, policy, whole)
        col_level, _ = rules.Fixed().choose_exact(model, policy, alone)
        rows = np.arange(col.size)
        assert set(col_level) <= {0, 1} and np.array_equal(col == 0, col_level == 0)
        assert (col_level == 1).any()  # the level test is attainable at some size
        for name in ("nominal", "attained", "power", "design_power", "missed"):
            np.testing.assert_allclose(
                getattr(alone.chars, name)[rows, col_level],
                getattr(whole.chars, name)[rows, col],
                rtol=1e-12,
                atol=1e-300,
                err_msg=name,
            )
