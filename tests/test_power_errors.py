"""Error paths of power() and solve(), the approximation warning, and `decide solve` on the command line."""

from __future__ import annotations

import json
import math
from typing import Any, NoReturn

import pytest
from typer.testing import CliRunner, Result

from decide import ApproximationWarning, DecideError, InfeasibleError, power
from decide.cli import app
from decide.engine.solve import Solution, solve
from decide.report.numbers import for_json

GOOD = {"baseline": 0.01, "effect": 3.0, "alpha": 0.05, "power": 0.8}


def _solve(design: str = "cohort-risk", **changes: Any) -> Solution:
    kwargs = {**GOOD, **changes}
    sol = solve(design, **{k: v for k, v in kwargs.items() if v is not None})
    assert isinstance(sol, Solution)  # scalar inputs
    return sol


# --------------------------------------------------------------------------
# the Python API


@pytest.mark.parametrize(
    ("design", "changes", "match"),
    [
        ("cohort-risk", {"baseline": 0.0}, r"^baseline must be strictly between 0 and 1, but got 0$"),
        ("cohort-risk", {"baseline": 1.0}, r"^baseline must be strictly between 0 and 1"),
        ("case-control", {"baseline": 1.5}, r"^baseline must be strictly between 0 and 1, but got 1\.5"),
        ("cohort-rate", {"baseline": -1.0}, r"^baseline must be a finite number above 0"),
        ("reference-rate", {"baseline": math.inf}, r"^baseline must be a finite number above 0"),
        ("cohort-risk", {"baseline": math.nan}, r"^baseline must be a number, but got NaN"),
        ("cohort-risk", {"alpha": 0.0}, r"^alpha must be strictly between 0 and 1, but got 0$"),
        ("cohort-risk", {"alpha": 1.0}, r"^alpha must be strictly between 0 and 1"),
        ("cohort-risk", {"power": 1.0}, r"^power must be strictly between 0 and 1"),
        ("cohort-risk", {"power": -0.2}, r"^power must be strictly between 0 and 1"),
        (
            "cohort-risk",
            {"alpha": 0.2, "power": 0.1},
            r"^power must be above alpha, but got power 0\.1 with alpha 0\.2",
        ),
        ("cohort-risk", {"alpha": 0.3, "power": 0.3}, r"^power must be above alpha"),
        # a risk ratio that pushes the exposed risk past 1
        ("cohort-risk", {"baseline": 0.4, "effect": 3.0}, r"^effect must be below 2\.5 for baseline 0\.4"),
        ("cohort-risk", {"effect": -2.0}, r"^effect must be a finite number above 0"),
        ("cohort-risk", {"effect": 0.5}, r"^effect must be above 1 for a one-sided test of harm"),
        ("cohort-risk", {"effect": 1.0, "sides": 2}, r"^effect must differ from 1"),
        ("cohort-rate", {"years": 0.0}, r"^years must be a finite number above 0, but got 0"),
        ("cohort-rate", {"allocation": -1.0}, r"^allocation must be a finite number above 0"),
        ("reference-rate", {"allocation": 2.0}, r"^allocation does not apply to the reference-rate design"),
        ("case-control", {"years": 2.0}, r"^years does not apply to the case-control design"),
        ("cohort-rate", {"continuity": True}, r"^continuity does not apply to the cohort-rate design"),
        ("cohort-risk", {"sides": 3}, r"^sides must be 1 or 2 \(a whole number\), but got 3"),
        ("cohort-risk", {"test": "bayes"}, r"^test must be one of auto, normal, exact"),
        ("cohort-study", {}, r"^design must be one of cohort-risk, cohort-rate, reference-rate, case-control"),
        ("cohort-risk", {"max_n_per_group": 0}, r"^max_n_per_group must be a whole number not less than 1"),
    ],
)
def test_impossible_input(design: str, changes: dict[str, Any], match: str) -> None:
    with pytest.raises(DecideError, match=match) as info:
        _solve(design, **changes)
    assert not isinstance(info.value, InfeasibleError)
    assert "\n" not in str(info.value)


@pytest.mark.parametrize("n", [0, -5, 10.5])
def test_sizes_must_be_whole_and_positive(n: float) -> None:
    with pytest.raises(DecideError, match=r"^n_per_group must be a whole number not less than 1"):
        _solve(power=None, n_per_group=n)
    with pytest.raises(DecideError, match=r"^n_per_group must be a whole number not less than 1"):
        power("cohort-risk", 0.05, n, 3.0, 0.01)


def test_exactly_one_unknown() -> None:
    with pytest.raises(DecideError, match=r"leave out exactly one .* power and n_per_group were left out"):
        _solve(power=None)
    with pytest.raises(DecideError, match=r"leave out exactly one .* all four were given"):
        _solve(n_per_group=100)


def test_power_rejects_bad_arrays() -> None:
    with pytest.raises(DecideError, match=r"^alpha must be strictly between 0 and 1, but got 1\.2"):
        power("cohort-risk", [0.05, 1.2], 100, 3.0, 0.1)
    with pytest.raises(DecideError, match=r"^effect must be below 5 for baseline 0\.2"):
        power("cohort-risk", 0.05, 100, [2.0, 6.0], [0.1, 0.2])


@pytest.mark.parametrize(
    ("design", "changes", "match"),
    [
        # a size beyond the cap, normal and exact; the normal size is statsmodels' (0.15):
        # samplesize_proportions_2indep_onetail(diff=0.01, prop2=0.01, power=0.8, ratio=1,
        #     alpha=0.05, alternative="larger") = 1825.899..., rounded up to a whole subject
        ("cohort-risk", {"effect": 2.0, "max_n_per_group": 100}, r"^n_per_group: the normal test needs 1,826"),
        (
            "cohort-risk",
            {"effect": 2.0, "max_n_per_group": 100, "test": "exact"},
            r"^n_per_group: no size up to the cap of 100 reaches power 0\.8",
        ),
        (
            "reference-rate",
            {"baseline": 1e-3, "effect": 2.0, "max_n_per_group": 50},
            r"^n_per_group: the exact test needs [\d,]+ per group, more than the cap of 50$",
        ),
        # no effect up to the cap reaches the power
        (
            "reference-rate",
            {"baseline": 1e-6, "effect": None, "n_per_group": 10},
            r"^effect: no standardised incidence ratio up to 10000 reaches power 0\.8 with 10 per group",
        ),
        (
            "cohort-risk",
            {"baseline": 0.4, "effect": None, "power": 0.99, "n_per_group": 5},
            r"^effect: no risk ratio up to 2\.5 reaches power 0\.99",
        ),
        # no level below 1 reaches the power
        (
            "cohort-risk",
            {"effect": 1.2, "alpha": None, "power": 0.99, "n_per_group": 5},
            r"^alpha: no significance level below 1 gives power 0\.99 with 5 per group",
        ),
    ],
)
def test_infeasible(design: str, changes: dict[str, Any], match: str) -> None:
    with pytest.raises(InfeasibleError, match=match):
        _solve(design, **changes)


def test_normal_forced_with_few_expected_cases_warns() -> None:
    with pytest.warns(ApproximationWarning, match=r"as few as 0\.1 expected"):
        r = power("reference-rate", 0.05, 10, 3.0, 0.01, test="normal")
    assert r.warnings and "exact test is safer" in r.warnings[0]
    with pytest.warns(ApproximationWarning, match="normal approximation with as few as"):
        s = solve("cohort-rate", baseline=0.01, effect=3.0, alpha=0.05, n_per_group=100, test="normal")
    assert s.test == "normal" and any("exact test is safer" in w for w in s.warnings)


def test_auto_does_not_warn() -> None:
    # filterwarnings = error: any warning here fails the test
    r = power("reference-rate", 0.05, 10, 3.0, 0.01)
    assert r.test_used() == "exact" and r.warnings == ()
    s = _solve()
    assert s.warnings == ()


# --------------------------------------------------------------------------
# the command line


@pytest.fixture
def runner() -> CliRunner:
    return CliRunner()


def _run(runner: CliRunner, *args: str) -> Result:
    return runner.invoke(app, ["solve", *args])


SOLVE_KEYS = {
    "design",
    "test",
    "alpha",
    "attained_alpha",
    "beta",
    "power",
    "effect",
    "n_per_group",
    "n_total",
    "expected_cases",
    "warnings",
}


def _no_nan(text: str) -> dict[str, Any]:
    def refuse(token: str) -> NoReturn:
        raise AssertionError(f"non-standard JSON constant {token}")

    data: dict[str, Any] = json.loads(text, parse_constant=refuse)
    return data


@pytest.mark.parametrize(
    ("args", "option"),
    [
        (
            ["--design", "cohort-risk", "--baseline", "1.5", "--effect", "2", "--power", "0.8", "--alpha", "0.05"],
            "--baseline",
        ),
        (
            ["--design", "cohort-risk", "--baseline", "0.01", "--effect", "2", "--power", "0.8", "--alpha", "1.5"],
            "--alpha",
        ),
        (
            [
                "--design",
                "cohort-risk",
                "--baseline",
                "0.01",
                "--effect",
                "2",
                "--power",
                "0.8",
                "--alpha",
                "0.05",
                "--sides",
                "3",
            ],
            "--sides",
        ),
        (
            ["--design", "cohort-risk", "--baseline", "0.01", "--effect", "2", "--power", "0.8", "--n-per-group", "0"],
            "--n-per-group",
        ),
        (
            [
                "--design",
                "cohort-rate",
                "--baseline",
                "0.01",
                "--effect",
                "2",
                "--power",
                "0.8",
                "--alpha",
                "0.05",
                "--years",
                "-1",
            ],
            "--years",
        ),
        (["--design", "cohort-risk", "--baseline", "abc"], "--baseline"),
        (["--design", "no-such-design", "--baseline", "0.1"], "--design"),
    ],
)
def test_cli_bad_input_exit_2_one_line(runner: CliRunner, args: list[str], option: str) -> None:
    result = _run(runner, *args)
    assert result.exit_code == 2
    err = result.stderr
    assert "Traceback" not in err and "Traceback" not in result.stdout
    assert err.endswith("\n") and err.count("\n") == 1
    assert option in err


def test_cli_leaving_two_out_exit_2(runner: CliRunner) -> None:
    result = _run(runner, "--design", "cohort-risk", "--baseline", "0.01", "--effect", "2")
    assert result.exit_code == 2
    assert result.stderr.count("\n") == 1
    assert "--power" in result.stderr and "--n-per-group" in result.stderr


def test_cli_infeasible_exit_1(runner: CliRunner) -> None:
    result = _run(
        runner,
        "--design",
        "cohort-risk",
        "--baseline",
        "0.01",
        "--effect",
        "2",
        "--power",
        "0.8",
        "--alpha",
        "0.05",
        "--max-n-per-group",
        "10",
    )
    assert result.exit_code == 1
    assert result.stderr.count("\n") == 1 and "Traceback" not in result.stderr
    assert "cannot be done" in result.stderr and "--n-per-group" in result.stderr


@pytest.mark.parametrize(
    "args",
    [
        [
            "--design",
            "case-control",
            "--baseline",
            "0.3",
            "--effect",
            "2",
            "--power",
            "0.9",
            "--alpha",
            "0.05",
            "--sides",
            "2",
            "--test",
            "normal",
        ],
        [
            "--design",
            "reference-rate",
            "--baseline",
            "0.01",
            "--effect",
            "2",
            "--power",
            "0.8",
            "--alpha",
            "0.05",
            "--years",
            "5",
        ],
        [
            "--design",
            "cohort-rate",
            "--baseline",
            "0.01",
            "--effect",
            "3",
            "--power",
            "0.8",
            "--n-per-group",
            "200",
            "--years",
            "2",
            "--allocation",
            "2",
        ],
        [
            "--design",
            "cohort-risk",
            "--baseline",
            "0.05",
            "--alpha",
            "0.05",
            "--power",
            "0.8",
            "--n-per-group",
            "300",
            "--continuity",
            "--test",
            "normal",
        ],
    ],
)
def test_cli_json(runner: CliRunner, args: list[str]) -> None:
    result = _run(runner, *args, "--json")
    assert result.exit_code == 0, result.stderr
    data = _no_nan(result.stdout)
    assert SOLVE_KEYS <= set(data)
    assert data["beta"] == pytest.approx(1 - data["power"], abs=1e-15)
    assert data["attained_alpha"] <= data["alpha"] * (1 + 1e-12)
    assert data["n_total"] >= data["n_per_group"] >= 1
    assert isinstance(data["warnings"], list)


def test_cli_json_matches_api(runner: CliRunner) -> None:
    # Schlesselman (1974) worked example through the command line: 188 + 188
    result = _run(
        runner,
        "--design",
        "case-control",
        "--baseline",
        "0.3",
        "--effect",
        "2",
        "--power",
        "0.9",
        "--alpha",
        "0.05",
        "--sides",
        "2",
        "--test",
        "normal",
        "--json",
    )
    data = _no_nan(result.stdout)
    api = solve("case-control", baseline=0.3, effect=2.0, power=0.9, alpha=0.05, sides=2, test="normal")
    # the command line writes the API's result with snake_case keys (decide.report.numbers.for_json)
    assert data == json.loads(json.dumps(for_json(api.to_dict())))
    assert set(data["expected_cases"]) == {"exposed_cases", "unexposed_cases", "exposed_controls", "unexposed_controls"}
    assert (data["n_per_group"], data["n_total"]) == (188, 376)
