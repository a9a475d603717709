"""The decision commands of the ``decide`` command line.

Every bundled scenario runs through ``optimize --json`` and ``compare
--json``; the machine formats (JSON, CSV) are parsed back and checked
against the Python API; error paths exit with status 2 and one line on
stderr naming the file and the key, never a traceback.  Output is read from
``--json`` rather than from tables that rich may wrap, with ``COLUMNS``
fixed in the environment (typer's testing advice).
"""

from __future__ import annotations

import csv
import io
import json
import os
import subprocess
import sys
import zipfile
from pathlib import Path
from typing import Any

import pytest
from typer.testing import CliRunner

from decide.cli import app
from decide.decision.optimize import compare, optimize
from decide.report.text import CAUTION
from decide.scenario import BUILTIN_ORDER, load_policies, load_scenario

REPO = Path(__file__).resolve().parents[1]
SCENARIOS = sorted((REPO / "scenarios").glob("*.toml"))
ENV = {"COLUMNS": "100"}

DECISION_KEYS = {
    "alpha",
    "attained_alpha",
    "beta",
    "power",
    "n_per_group",
    "n_total",
    "expected_loss",
    "loss_parts",
    "no_study",
    "net_benefit",
    "recommendation",
    "test",
    "warnings",
}
COMPARE_KEYS = (DECISION_KEYS - {"no_study"}) | {
    "policy",
    "feasible",
    "regret",
    "implied_cost_ratio",
    "p_harm_given_negative",
    "detectable_effect",
}


def run(*args: str | Path) -> Any:
    return CliRunner().invoke(app, [str(a) for a in args], env=ENV)


def strict_json(text: str) -> Any:
    """Parse JSON, refusing NaN and infinities (not standard JSON)."""

    def refuse(constant: str) -> None:
        raise AssertionError(f"non-standard JSON constant {constant}")

    return json.loads(text, parse_constant=refuse)


def one_line_error(result: Any, *fragments: str) -> None:
    assert result.exit_code == 2, result.stdout + result.stderr
    assert result.stdout == ""
    err = result.stderr
    assert err.endswith("\n") and err.count("\n") == 1, err
    assert "Traceback" not in err
    for fragment in fragments:
        assert fragment in err, err


@pytest.fixture(scope="module")
def compared() -> dict[str, list[dict[str, Any]]]:
    """``compare --json`` of every bundled scenario, run once."""
    out = {}
    for path in SCENARIOS:
        result = run("compare", path, "--json")
        assert result.exit_code == 0, result.stderr
        out[path.stem] = strict_json(result.stdout)["policies"]
    return out


@pytest.mark.parametrize("path", SCENARIOS, ids=[p.stem for p in SCENARIOS])
def test_optimize_json_runs_every_bundled_scenario(path: Path) -> None:
    result = run("optimize", path, "--json")
    assert result.exit_code == 0, result.stderr
    data = strict_json(result.stdout)
    assert DECISION_KEYS <= set(data)
    assert set(data["loss_parts"]) == {"missed", "false_alarm", "study"}
    assert set(data["no_study"]) == {"flag_now", "clear_now"}
    loaded = load_scenario(path)
    assert data["scenario"] == loaded.title
    dec = optimize(loaded.problem)
    assert data["expected_loss"] == pytest.approx(dec.expected_loss, rel=1e-12)
    assert data["n_per_group"] == dec.n_per_group and data["test"] == dec.test
    assert sum(data["loss_parts"].values()) == pytest.approx(data["expected_loss"], rel=1e-12)
    assert isinstance(data["warnings"], list)


@pytest.mark.parametrize("stem", [p.stem for p in SCENARIOS])
def test_compare_json_runs_every_bundled_scenario(compared: dict[str, list[dict[str, Any]]], stem: str) -> None:
    rows = compared[stem]
    assert [r["policy"] for r in rows] == list(BUILTIN_ORDER)
    problem = load_scenario(REPO / "scenarios" / f"{stem}.toml").problem
    api = compare(problem, list(load_policies().values()))
    for row, dec in zip(rows, api, strict=True):
        assert COMPARE_KEYS <= set(row)
        assert row["feasible"] == dec.feasible
        if dec.feasible:
            assert row["expected_loss"] == pytest.approx(dec.expected_loss, rel=1e-12)
            assert row["regret"] == pytest.approx(dec.regret, rel=1e-12, abs=1e-9)
        else:
            assert row["regret"] is None and row["reason"]
    best = rows[BUILTIN_ORDER.index("loss-optimal")]
    assert best["regret"] == 0.0


def test_compare_chosen_policies_in_the_order_given(compared: dict[str, list[dict[str, Any]]]) -> None:
    path = REPO / "scenarios" / "depot-cohort-rate.toml"
    result = run(
        "compare",
        path,
        "--policy",
        "equal-errors",
        "--policy",
        "conventional-science",
        "--policy",
        "equal-errors",
        "--json",
    )
    assert result.exit_code == 0, result.stderr
    rows = strict_json(result.stdout)["policies"]
    assert [r["policy"] for r in rows] == ["equal-errors", "conventional-science"]
    full = {r["policy"]: r for r in compared["depot-cohort-rate"]}
    # regret is against the loss-optimal choice even when that policy is not listed
    assert rows[0]["regret"] == pytest.approx(full["equal-errors"]["regret"], rel=1e-12)


def test_compare_csv_parses_and_matches_json(compared: dict[str, list[dict[str, Any]]]) -> None:
    result = run("compare", REPO / "scenarios" / "trade-case-control.toml", "--csv")
    assert result.exit_code == 0, result.stderr
    rows = list(csv.DictReader(io.StringIO(result.stdout)))
    ref = compared["trade-case-control"]
    assert [r["policy"] for r in rows] == [r["policy"] for r in ref]
    for row, want in zip(rows, ref, strict=True):
        for key in ("alpha", "attained_alpha", "beta", "expected_loss", "regret", "implied_cost_ratio"):
            if want[key] is None:
                assert row[key] == ""
            else:
                assert float(row[key]) == pytest.approx(want[key], rel=1e-12)
        assert int(row["n_per_group"]) == want["n_per_group"]


def test_compare_markdown_carries_the_caution() -> None:
    result = run("compare", REPO / "scenarios" / "solvent-cohort.toml", "--markdown")
    assert result.exit_code == 0, result.stderr
    text = result.stdout
    assert "not a decision" in CAUTION and "competent authority" in CAUTION
    assert CAUTION in text
    title = load_scenario(REPO / "scenarios" / "solvent-cohort.toml").title
    assert text.startswith(f"# {title}")
    assert "| policy |" in text
    # the infeasible policies are explained
    assert "2,150" in text


def test_compare_output_writes_once_and_refuses_to_overwrite(tmp_path: Path) -> None:
    path = REPO / "scenarios" / "depot-cohort-rate.toml"
    target = tmp_path / "out.json"
    first = run("compare", path, "--policy", "loss-optimal", "--json", "--output", target)
    assert first.exit_code == 0, first.stderr
    assert first.stdout == ""
    written = target.read_text(encoding="utf-8")
    assert strict_json(written)["policies"][0]["policy"] == "loss-optimal"
    assert [p.name for p in tmp_path.iterdir()] == ["out.json"]  # no temporary file left behind
    # a second run without --force leaves the file alone
    target.write_text("keep me", encoding="utf-8")
    again = run("compare", path, "--policy", "loss-optimal", "--json", "--output", target)
    one_line_error(again, str(target), "already exists")
    assert target.read_text(encoding="utf-8") == "keep me"
    forced = run("compare", path, "--policy", "loss-optimal", "--csv", "--output", target, "--force")
    assert forced.exit_code == 0, forced.stderr
    assert target.read_text(encoding="utf-8").startswith("policy,")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.json"]


def test_compare_output_needs_a_plain_format(tmp_path: Path) -> None:
    result = run(
        "compare",
        REPO / "scenarios" / "depot-cohort-rate.toml",
        "--policy",
        "loss-optimal",
        "--output",
        tmp_path / "x.txt",
    )
    one_line_error(result, "--output")
    assert not (tmp_path / "x.txt").exists()


def test_schema_prints_json_schemas() -> None:
    scenario = run("schema")
    assert scenario.exit_code == 0
    data = strict_json(scenario.stdout)
    assert data["$schema"].startswith("https://json-schema.org/")
    assert {"study", "effect", "prior", "consequences", "constraints"} <= set(data["properties"])
    policy = run("schema", "policy")
    assert policy.exit_code == 0
    assert {"alpha", "size"} <= set(strict_json(policy.stdout)["properties"])
    one_line_error(run("schema", "nonsense"), "scenario or policy")


def test_new_template_loads_and_runs_through_compare(tmp_path: Path) -> None:
    target = tmp_path / "mine.toml"
    made = run("new", target)
    assert made.exit_code == 0, made.stderr
    assert "decide compare" in made.stderr
    loaded = load_scenario(target)
    assert "invented" in loaded.title.lower() or "invented" in target.read_text().lower()
    result = run("compare", target, "--json")
    assert result.exit_code == 0, result.stderr
    rows = strict_json(result.stdout)["policies"]
    assert len(rows) == len(BUILTIN_ORDER) and any(r["feasible"] for r in rows)
    # and `new` will not overwrite it
    one_line_error(run("new", target), str(target), "already exists")


def template_with(tmp_path: Path, *edits: tuple[str, str]) -> Path:
    """The `decide new` template with each (old, new) text replaced once."""
    run("new", tmp_path / "base.toml")
    text = (tmp_path / "base.toml").read_text(encoding="utf-8")
    for old, new in edits:
        assert old in text
        text = text.replace(old, new, 1)
    path = tmp_path / "edited.toml"
    path.write_text(text, encoding="utf-8")
    return path


BAD_FILES = [
    ("syntax", "[prior]", "[prior", "line "),
    ("unknown key", "fixed = 50000.0", "fixd = 50000.0", "consequences.fixd"),
    ("negative cost", "false_alarm = 2.0e7", "false_alarm = -3.0", "consequences.false_alarm"),
    ("probability", "p_harm = 0.2", "p_harm = 1.5", "prior.p_harm"),
    ("wrong type", 'design = "cohort-risk"', "design = 3", "study.design"),
]


@pytest.mark.parametrize("command", ["optimize", "compare"])
@pytest.mark.parametrize(("what", "old", "new", "key"), BAD_FILES, ids=[b[0] for b in BAD_FILES])
def test_bad_scenario_file_is_one_line_naming_file_and_key(
    tmp_path: Path, command: str, what: str, old: str, new: str, key: str
) -> None:
    path = template_with(tmp_path, (old, new))
    one_line_error(run(command, path, "--json"), f"decide {command}: ", str(path), key)


def test_missing_scenario_file(tmp_path: Path) -> None:
    one_line_error(run("optimize", tmp_path / "nowhere.toml"), "nowhere.toml", "no such file")


def test_unknown_policy_exits_2_naming_it() -> None:
    result = run("compare", REPO / "scenarios" / "depot-cohort-rate.toml", "--policy", "no-such-policy")
    one_line_error(result, "--policy", "'no-such-policy'", "loss-optimal")


def test_infeasible_optimum_exits_1_with_the_reason(tmp_path: Path) -> None:
    # a power floor that no size within the cap reaches at an alpha within its cap
    path = template_with(tmp_path, ("min_power = 0.0", "min_power = 0.999"), ("max_alpha = 1.0", "max_alpha = 0.05"))
    result = run("optimize", path, "--json")
    assert result.exit_code == 1
    data = strict_json(result.stdout)
    assert data["feasible"] is False and data["reason"]


def test_policies_json_lists_the_bundled_policies() -> None:
    result = run("policies", "--json")
    assert result.exit_code == 0
    rows = strict_json(result.stdout)
    assert [r["name"] for r in rows] == list(BUILTIN_ORDER)
    assert len(rows) == 8
    assert {r["alpha_rule"] for r in rows} == {"fixed", "loss-optimal", "equal-to-beta", "posterior", "for-power"}


CUSTOM = """\
title = "Invented test policy: one in a hundred"
summary = "Alpha fixed at 0.01, size from the constraints."
[alpha]
rule = "fixed"
value = 0.01
[size]
rule = "largest-allowed"
"""


def test_policy_dir_adds_a_custom_policy(tmp_path: Path) -> None:
    folder = tmp_path / "mine"
    folder.mkdir()
    (folder / "one-in-a-hundred.toml").write_text(CUSTOM, encoding="utf-8")
    listed = run("policies", "--json", "--policy-dir", folder)
    assert listed.exit_code == 0, listed.stderr
    names = [r["name"] for r in strict_json(listed.stdout)]
    assert names == [*BUILTIN_ORDER, "one-in-a-hundred"]
    result = run(
        "compare",
        REPO / "scenarios" / "trade-case-control.toml",
        "--policy-dir",
        folder,
        "--policy",
        "one-in-a-hundred",
        "--policy",
        "loss-optimal",
        "--json",
    )
    assert result.exit_code == 0, result.stderr
    mine, best = strict_json(result.stdout)["policies"]
    assert mine["policy"] == "one-in-a-hundred" and mine["feasible"]
    assert mine["alpha"] == 0.01 and mine["n_per_group"] == 300  # the registry's 300 cases
    assert mine["regret"] >= 0 and best["regret"] == 0


def test_missing_policy_dir_is_one_line(tmp_path: Path) -> None:
    one_line_error(run("policies", "--policy-dir", tmp_path / "absent"), "absent", "no such policy folder")


# Building a wheel takes seconds: CI runs it (CI set in the environment), local runs skip it.
@pytest.mark.skipif(not os.environ.get("CI"), reason="builds a wheel; runs where CI is set")
@pytest.mark.slow
def test_non_editable_wheel_carries_the_bundled_policies(tmp_path: Path) -> None:
    pytest.importorskip("hatchling")  # the build backend, used in place (--no-build-isolation)
    out = tmp_path / "wheels"
    subprocess.run(
        [sys.executable, "-m", "pip", "wheel", ".", "--no-deps", "--no-build-isolation", "-w", str(out), "-q"],
        cwd=REPO,
        check=True,
        capture_output=True,
        text=True,
        timeout=300,
    )
    (wheel,) = out.glob("decide-*.whl")
    with zipfile.ZipFile(wheel) as z:
        names = set(z.namelist())
    assert {f"decide/_policies/{name}.toml" for name in BUILTIN_ORDER} <= names
