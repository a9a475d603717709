"""The decision rule and the audit on the command line, read back from ``--json``.

Outside checks: the thresholds against ``scipy.stats.poisson.sf`` and
``scipy.stats.hypergeom`` / ``scipy.stats.fisher_exact``; the normal test's
real false-alarm probability against a brute-force sum over the counts with
``scipy.stats.poisson`` and the log rate-ratio statistic written out here.
Scenario inputs are read with :func:`decide.scenario.load_scenario`.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy import special, stats
from typer.testing import CliRunner

from decide.cli import app
from decide.report.rule_words import NOMINAL_AND_ATTAINED
from decide.report.text import CAUTION
from decide.scenario import load_scenario

REPO = Path(__file__).resolve().parents[1]
ENV = {"COLUMNS": "100"}


def run(*args: Any) -> Any:
    return CliRunner().invoke(app, [str(a) for a in args], env=ENV)


@pytest.fixture(scope="module")
def optimized() -> dict[str, dict[str, Any]]:
    out = {}
    for stem in ("water-supply-reference", "solvent-cohort", "depot-cohort-rate"):
        res = run("optimize", REPO / "scenarios" / f"{stem}.toml", "--json")
        assert res.exit_code == 0, res.output
        out[stem] = json.loads(res.stdout)
    return out


def test_one_group_rule_in_counts(optimized: dict[str, dict[str, Any]]) -> None:
    d = optimized["water-supply-reference"]
    rule = d["rule"]
    s = load_scenario(REPO / "scenarios" / "water-supply-reference.toml").problem.study
    expected = s.baseline * s.years * d["n_per_group"]
    assert rule["expected_null"] == pytest.approx(expected, rel=1e-12)
    c = rule["flag_at_least"]
    # scipy.stats.poisson.sf(c - 1, E) = P(O >= c)
    assert stats.poisson.sf(c - 1, expected) <= d["alpha"] * (1 + 1e-10)
    assert stats.poisson.sf(c - 2, expected) > d["alpha"]
    shown = float(rule["cutoff_shown"])
    assert stats.poisson.sf(c - 1, expected) <= shown < stats.poisson.sf(c - 2, expected)
    assert rule["cutoff"][0] <= d["alpha"] < rule["cutoff"][1]
    assert f"{c} or more cases" in rule["statement"]
    assert f"alpha = {rule['cutoff_shown']}" in d["recommendation"]


def test_conditional_rule_in_counts(optimized: dict[str, dict[str, Any]]) -> None:
    d = optimized["solvent-cohort"]
    rule = d["rule"]
    assert d["test"] == "exact" and rule["false_alarm"] == pytest.approx(d["attained_alpha"], rel=1e-9)
    n1 = d["n_per_group"]
    n0 = d["n_total"] - n1
    alpha = d["alpha"]
    assert rule["thresholds"]
    for row in rule["thresholds"]:
        t, c = row["total"], row["flag_at_least"]
        if c is None:
            assert stats.hypergeom.sf(min(t, n1) - 1, n1 + n0, n1, t) > alpha
            continue
        assert stats.fisher_exact([[c, n1 - c], [t - c, n0 - t + c]], alternative="greater")[1] <= alpha * (1 + 1e-9)
        if c - 1 >= max(0, t - n0):
            assert stats.hypergeom.sf(c - 2, n1 + n0, n1, t) > alpha


def test_normal_rule_and_real_false_alarm(optimized: dict[str, dict[str, Any]]) -> None:
    d = optimized["depot-cohort-rate"]
    assert d["test"] == "normal"
    s = load_scenario(REPO / "scenarios" / "depot-cohort-rate.toml").problem.study
    n1 = d["n_per_group"]
    n0 = d["n_total"] - n1
    z = -special.ndtri(d["alpha"])
    x1 = np.arange(0, 400)[:, None]
    x0 = np.arange(0, 400)[None, :]
    share = n1 / (n1 + n0)
    with np.errstate(divide="ignore", invalid="ignore"):
        stat = (np.log(x1 / n1) - np.log(x0 / n0)) * np.sqrt((x1 + x0) * share * (1 - share))
    stat = np.where((x1 > 0) & (x0 > 0), stat, np.nan)  # no log rate ratio without a case in each group
    pmf = stats.poisson.pmf(x1, s.baseline * s.years * n1) * stats.poisson.pmf(x0, s.baseline * s.years * n0)
    want = float((pmf * (stat >= z)).sum())
    assert d["rule"]["false_alarm"] == pytest.approx(want, rel=1e-8)
    for row in d["rule"]["thresholds"]:
        t = row["total"]
        flagged = [x for x in range(t + 1) if stat[x, t - x] >= z] if t < 400 else []
        assert row["flag_at_least"] == (min(flagged) if flagged else None)


def test_optimize_markdown_writes_the_rule_and_the_caution(tmp_path: Path) -> None:
    out = tmp_path / "optimum.md"
    res = run("optimize", REPO / "scenarios" / "water-supply-reference.toml", "--markdown", "--output", out)
    assert res.exit_code == 0, res.output
    text = out.read_text()
    assert "### Decision rule" in text and "5 or more cases are observed" in text
    assert CAUTION in text and NOMINAL_AND_ATTAINED in text
    again = run("optimize", REPO / "scenarios" / "water-supply-reference.toml", "--markdown", "--output", out)
    assert again.exit_code == 2


def test_optimize_refuses_conflicting_flags_at_once() -> None:
    res = run("optimize", REPO / "scenarios" / "depot-cohort-rate.toml", "--json", "--markdown")
    assert res.exit_code == 2
    assert "choose one of --json and --markdown" in res.output


AUDIT = (
    "audit",
    "--design",
    "reference-rate",
    "--baseline",
    "2.4e-5",
    "--years",
    "10",
    "--alpha",
    "0.05",
    "--effect",
    "3",
    "--p-harm",
    "0.2",
    "--per-subject",
    "30",
    "--n-per-group",
    "9000",
)


def test_audit_json_with_costs_and_a_lognormal_prior() -> None:
    res = run(
        *AUDIT,
        "--missed-hazard",
        "5e7",
        "--false-alarm",
        "1e7",
        "--effect-low",
        "1.2",
        "--effect-high",
        "4",
        "--effect-level",
        "0.8",
        "--json",
    )
    assert res.exit_code == 0, res.output
    a = json.loads(res.stdout)
    assert a["prior"] == "lognormal, median 2.19, 80% between 1.2 and 4"
    x = a["losses"]
    assert x["no_study"]["flag_now"] == pytest.approx(0.8 * 1e7)
    assert x["net_benefit"] == pytest.approx(min(0.8e7, 0.2 * 5e7) - x["expected_loss"], rel=1e-12)
    assert x["regret"] == pytest.approx(x["expected_loss"] - x["optimal_expected_loss"], rel=1e-12)
    assert x["regret"] >= 0
    e = 2.4e-5 * 10 * 9000
    c = a["rule"]["flag_at_least"]
    assert stats.poisson.sf(c - 1, e) <= 0.05 < stats.poisson.sf(c - 2, e)
    assert x["loss_parts"]["false_alarm"] == pytest.approx(0.8 * 1e7 * stats.poisson.sf(c - 1, e), rel=1e-9)


def test_audit_markdown_output(tmp_path: Path) -> None:
    out = tmp_path / "audit.md"
    res = run(*AUDIT, "--missed-hazard", "5e7", "--false-alarm", "1e7", "--markdown", "--output", out)
    assert res.exit_code == 0, res.output
    text = out.read_text()
    assert "regret of the protocol" in text and "## Decision rule" in text and CAUTION in text


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        (("--missed-hazard", "5e7"), "--missed-hazard and --false-alarm"),
        (("--effect-low", "1.2"), "--effect-low and --effect-high"),
        (("--effect-low", "1.2", "--effect-high", "4"), "needs the protocol's costs"),
        (("--output", "x.md"), "--output needs one of --json or --markdown"),
        (
            ("--missed-hazard", "5e7", "--false-alarm", "1e7", "--effect-low", "4", "--effect-high", "1.2"),
            "--effect-high must be above --effect-low",
        ),
    ],
)
def test_audit_usage_errors_are_one_line(extra: tuple[str, ...], message: str) -> None:
    res = run(*AUDIT, *extra)
    assert res.exit_code == 2
    assert message in res.output
    assert len(res.output.strip().splitlines()) == 1


def test_compare_markdown_lists_each_rule(tmp_path: Path) -> None:
    res = run(
        "compare",
        REPO / "scenarios" / "water-supply-reference.toml",
        "--policy",
        "loss-optimal",
        "--policy",
        "conventional-science",
        "--markdown",
    )
    assert res.exit_code == 0, res.output
    assert "## Decision rules" in res.stdout
    assert res.stdout.count("Flag the exposure if") >= 1
