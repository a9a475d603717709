"""``solve()`` over arrays: the one unknown solved elementwise, as a loop of scalar solves would.

Two outside checks: every element of an array solve equals the scalar solve
of that element (which the rest of the suite checks against published tables,
statsmodels and enumeration), and array sizes of the normal test equal
statsmodels' own array call, rounded up to a whole subject.
"""

from __future__ import annotations

import math
import warnings
from typing import Any

import numpy as np
import pytest
from statsmodels.stats import proportion as sm_proportion

from decide import solve
from decide.engine.solve_many import NUMERIC, TEXT
from decide.errors import ApproximationWarning, DecideError, InfeasibleError

#: Invented sweeps, each mixing studies that run the exact test and studies that run the normal one.
SWEEPS: list[tuple[str, str, dict[str, Any]]] = [
    (
        "cohort-risk",
        "n_per_group",
        {"baseline": 8e-4, "effect": np.array([2.0, 3.0, 4.0, 3.0]), "alpha": 0.05, "power": np.array([[0.8], [0.9]])},
    ),
    (
        "cohort-rate",
        "n_per_group",
        {
            "baseline": 5e-5,
            "years": np.array([5.0, 8.0]),
            "effect": np.array([[2.5], [1.6]]),
            "alpha": 0.05,
            "power": 0.8,
        },
    ),
    (
        "reference-rate",
        "n_per_group",
        {"baseline": np.array([3e-5, 1e-3]), "years": 8.0, "effect": 3.0, "alpha": 0.05, "power": 0.8},
    ),
    (
        "case-control",
        "n_per_group",
        {
            "baseline": np.array([0.03, 0.2]),
            "allocation": 4.0,
            "effect": np.array([[3.0], [1.8]]),
            "alpha": 0.05,
            "power": 0.8,
        },
    ),
    (
        "cohort-risk",
        "power",
        {"baseline": 8e-4, "effect": 3.0, "alpha": np.array([0.01, 0.05]), "n_per_group": np.array([[2150], [40_000]])},
    ),
    (
        "case-control",
        "power",
        {"baseline": 0.03, "allocation": 4.0, "effect": 3.0, "alpha": 0.05, "n_per_group": np.array([60, 300, 3000])},
    ),
    (
        "cohort-risk",
        "alpha",
        {
            "baseline": 8e-4,
            "effect": 3.0,
            "power": np.array([0.5, 0.8, 0.99]),
            "n_per_group": np.array([[2150], [9000]]),
        },
    ),
    (
        "reference-rate",
        "alpha",
        {"baseline": 3e-5, "years": 8.0, "effect": np.array([2.0, 3.0]), "power": 0.8, "n_per_group": 9000},
    ),
    (
        "cohort-rate",
        "effect",
        {"baseline": 5e-5, "years": 5.0, "alpha": 0.05, "power": 0.8, "n_per_group": np.array([2000, 10_000, 60_000])},
    ),
    (
        "reference-rate",
        "effect",
        {"baseline": np.array([1e-6, 3e-5]), "years": 8.0, "alpha": 0.05, "power": 0.8, "n_per_group": 10},
    ),
]


#: Sweeps in which some studies run the exact test and others the normal one.
MIXED = {("cohort-risk", "n_per_group"), ("cohort-risk", "power"), ("case-control", "n_per_group")}


def _scalar(design: str, inputs: dict[str, Any], index: tuple[int, ...], shape: tuple[int, ...]) -> Any:
    one = {k: np.broadcast_to(v, shape)[index].item() if isinstance(v, np.ndarray) else v for k, v in inputs.items()}
    if "n_per_group" in one:
        one["n_per_group"] = int(one["n_per_group"])
    try:
        return solve(design, **one)
    except InfeasibleError:
        return None


def _same(ours: Any, theirs: Any) -> None:
    if theirs is None:
        assert math.isnan(ours)
    else:
        assert ours == pytest.approx(theirs, rel=1e-12, abs=1e-300)


@pytest.mark.parametrize(
    ("design", "unknown", "inputs"), SWEEPS, ids=[f"{d}-{u}-{i}" for i, (d, u, _) in enumerate(SWEEPS)]
)
def test_array_solve_equals_a_loop_of_scalar_solves(design: str, unknown: str, inputs: dict[str, Any]) -> None:
    many = solve(design, **inputs)
    shape = np.asarray(many.alpha).shape
    assert shape == np.broadcast_shapes(*(np.shape(v) for v in inputs.values()))
    assert many.solved_for == unknown
    assert all(np.asarray(getattr(many, k)).shape == shape for k in ("baseline", "allocation", "years"))
    seen_exact = seen_normal = False
    for index in np.ndindex(*shape):
        one = _scalar(design, inputs, index, shape)
        if one is None:  # no answer within the caps: nan in the solved quantity
            assert math.isnan(getattr(many, unknown)[index])
            continue
        for key in NUMERIC:
            _same(getattr(many, key)[index], getattr(one, key))
        for key in TEXT:
            assert getattr(many, key)[index] == getattr(one, key), key
        for key, value in one.expected_cases.items():
            _same(many.expected_cases[key][index], value)
        assert set(one.warnings) <= set(many.warnings)
        seen_exact |= one.test == "exact"
        seen_normal |= one.test != "exact"
    if (design, unknown) in MIXED:
        assert seen_exact and seen_normal, "the sweep should mix both tests"


def test_infeasible_elements_are_nan_not_an_error() -> None:
    # the second study (one in a million per person-year, ten subjects) can detect no SIR up to the cap
    many = solve("reference-rate", baseline=np.array([3e-5, 1e-6]), years=8.0, alpha=0.05, power=0.8, n_per_group=10)
    assert np.isfinite(many.effect[0]) and math.isnan(many.effect[1])  # type: ignore[index]
    with pytest.raises(InfeasibleError):
        solve("reference-rate", baseline=1e-6, years=8.0, alpha=0.05, power=0.8, n_per_group=10)


def test_scalar_inputs_still_give_scalars() -> None:
    s = solve("cohort-risk", baseline=8e-4, effect=3.0, alpha=0.05, power=0.8)
    assert isinstance(s.n_per_group, int) and isinstance(s.alpha, float) and isinstance(s.test, str)
    one = solve("cohort-risk", baseline=np.array([8e-4]), effect=3.0, alpha=0.05, power=0.8)
    assert np.asarray(one.n_per_group).shape == (1,) and np.asarray(one.n_per_group)[0] == s.n_per_group


@pytest.mark.parametrize("sides", [1, 2])
def test_array_sizes_of_the_normal_test_match_statsmodels(sides: int) -> None:
    rng = np.random.default_rng(20261202)
    baseline = np.exp(rng.uniform(np.log(0.05), np.log(0.3), 40))
    effect = np.exp(rng.uniform(np.log(1.2), np.log(2.0), 40))
    allocation = rng.choice([1.0, 2.0, 4.0], 40)
    alpha = rng.choice([0.01, 0.05, 0.1], 40)
    power = rng.uniform(0.6, 0.95, 40)
    with warnings.catch_warnings():  # a few small studies expect under 10 cases in a cell; sizes still compare
        warnings.simplefilter("ignore", ApproximationWarning)
        many = solve(
            "cohort-risk",
            baseline=baseline,
            effect=effect,
            allocation=allocation,
            alpha=alpha,
            power=power,
            sides=sides,
            test="normal",
        )
    # statsmodels 0.14/0.15, one array call (its two-sided size neglects the far tail, as ours does):
    theirs = sm_proportion.samplesize_proportions_2indep_onetail(
        diff=effect * baseline - baseline,
        prop2=baseline,
        power=power,
        ratio=allocation,
        alpha=alpha,
        alternative={1: "larger", 2: "two-sided"}[sides],
    )
    want = np.maximum(1, np.ceil(np.asarray(theirs) - 1e-9))
    np.testing.assert_array_equal(many.n_per_group, want)
    assert (many.power >= power).all()


def test_bad_array_input_names_the_element() -> None:
    with pytest.raises(DecideError, match=r"effect must be above 1 for a one-sided test of harm, but got 0\.5"):
        solve("cohort-risk", baseline=8e-4, effect=np.array([2.0, 0.5]), alpha=0.05, power=0.8)
    with pytest.raises(DecideError, match=r"power must be above alpha"):
        solve("cohort-risk", baseline=8e-4, effect=2.0, alpha=np.array([0.05, 0.9]), power=0.8)


def test_arrays_give_a_solution_array_and_scalars_a_solution() -> None:
    """The result's type says which it is: scalar fields (Solution) or arrays (SolutionArray)."""
    from decide import Solution, SolutionArray

    one = solve("case-control", baseline=0.3, effect=2.0, alpha=0.05, power=0.9, sides=2, test="normal")
    many = solve("case-control", baseline=0.3, effect=[1.5, 2.0], alpha=0.05, power=0.9, sides=2, test="normal")
    assert isinstance(one, Solution) and isinstance(one.n_per_group, int)
    assert isinstance(many, SolutionArray) and many.n_per_group.shape == (2,)
    assert many.n_per_group[1] == one.n_per_group
