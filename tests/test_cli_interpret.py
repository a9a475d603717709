"""The ``interpret`` command and ``decide.interpret``: bundled invented data, formats and bad input.

Output is read from ``--json``; errors exit with status 2 and one line on
stderr naming the file and the count, never a traceback.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path
from typing import Any

import pytest
from typer.testing import CliRunner

import decide
from decide.cli import app
from decide.decision.observed import READERS, reader_of
from decide.errors import DecideError
from decide.report.text import CAUTION
from decide.scenario import load_policies, load_scenario

REPO = Path(__file__).resolve().parents[1]
OBSERVED = sorted((REPO / "scenarios" / "observed").glob("*.toml"))
ENV = {"COLUMNS": "100"}
KEYS = {
    "estimate",
    "ci_low",
    "ci_high",
    "p_value",
    "posterior_harm",
    "loss_flag",
    "loss_clear",
    "recommendation",
    "verdicts",
    "excludes_above",
    "detectable",
    "method",
    "caution",
}


def run(*args: str) -> Any:
    return CliRunner().invoke(app, list(args), env=ENV)


def scenario_of(data: Path) -> Path:
    return REPO / "scenarios" / data.name


def _has_reader(path: Path) -> bool:
    try:
        reader_of(load_scenario(path).problem.study.design)
    except DecideError:
        return False
    return True


def test_every_bundled_scenario_has_invented_observed_data() -> None:
    # designs without a reader yet are refused in one line (see below)
    names = {p.name for p in (REPO / "scenarios").glob("*.toml") if _has_reader(p)}
    assert {p.name for p in OBSERVED} == names
    for p in OBSERVED:
        assert "INVENTED" in p.read_text(encoding="utf-8")


def test_a_design_without_a_reader_is_refused_on_the_command_line(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # every design has a reader now: take one away to see the refusal a new design would meet
    monkeypatch.delitem(READERS, "matched-case-control")
    path = REPO / "scenarios" / "quillmere-matched.toml"
    assert not _has_reader(path)
    data = tmp_path / "data.toml"
    data.write_text("[observed]\ncases = 3\n", encoding="utf-8")
    res = run("interpret", str(path), "--data", str(data))
    assert res.exit_code == 2
    assert "reading observed data is not available for the matched-case-control design yet" in res.stderr
    assert "\n" not in res.stderr.strip()


@pytest.mark.parametrize("data", OBSERVED, ids=lambda p: p.stem)
def test_json_matches_the_api(data: Path) -> None:
    res = run("interpret", str(scenario_of(data)), "--data", str(data), "--json")
    assert res.exit_code == 0, res.output
    out = json.loads(res.stdout)
    assert KEYS <= set(out)
    assert out["caution"] == CAUTION
    loaded = load_scenario(scenario_of(data))
    policies = list(load_policies(()).values())
    from decide.scenario.observed_file import load_observed

    api = decide.interpret(loaded.problem, load_observed(data, loaded.problem), policies)
    assert len(out["verdicts"]) == len(policies)
    assert [v["verdict"] for v in out["verdicts"]] == [v.verdict for v in api.verdicts]
    for key in ("p_value", "posterior_harm", "loss_flag", "loss_clear", "ci_low"):
        assert out[key] == getattr(api, key)
    assert out["recommendation"] == api.recommendation in ("flag", "clear")


def test_table_and_markdown_carry_the_caution(tmp_path: Path) -> None:
    data = REPO / "scenarios" / "observed" / "solvent-cohort.toml"
    scen = str(scenario_of(data))
    res = run("interpret", scen, "--data", str(data), "--policy", "loss-optimal")
    assert res.exit_code == 0, res.output
    words = " ".join(res.stdout.replace("│", " ").split())  # rich wraps the notes panel
    assert "cannot exclude a risk ratio of" in words and "Decision support, not a decision" in words
    target = tmp_path / "reading.md"
    res = run("interpret", scen, "--data", str(data), "--policy", "loss-optimal", "--markdown", "--output", str(target))
    assert res.exit_code == 0, res.output
    text = target.read_text(encoding="utf-8")
    assert "cannot exclude a risk ratio of" in text and CAUTION in text
    res = run("interpret", scen, "--data", str(data), "--markdown", "--output", str(target))
    assert res.exit_code == 2 and "already exists" in res.stderr


def _data(tmp_path: Path, body: str) -> Path:
    p = tmp_path / "observed.toml"
    p.write_text(body, encoding="utf-8")
    return p


SOLVENT = str(REPO / "scenarios" / "solvent-cohort.toml")
RATE = str(REPO / "scenarios" / "depot-cohort-rate.toml")
REFERENCE = str(REPO / "scenarios" / "water-supply-reference.toml")


@pytest.mark.parametrize(
    ("scenario", "body", "key", "reason"),
    [
        (
            SOLVENT,
            "cases_exposed = -1\nn_exposed = 10\ncases_unexposed = 0\nn_unexposed = 10",
            "observed.cases_exposed",
            "must not be negative (got -1)",
        ),
        (
            SOLVENT,
            "cases_exposed = 11\nn_exposed = 10\ncases_unexposed = 0\nn_unexposed = 10",
            "observed.cases_exposed",
            "must not exceed observed.n_exposed",
        ),
        (
            SOLVENT,
            "cases_exposed = 1\nn_exposed = 10\ncases_unexposed = 12\nn_unexposed = 10",
            "observed.cases_unexposed",
            "must not exceed observed.n_unexposed",
        ),
        (SOLVENT, "cases = 3\nexpected = 2.0", "observed.cases", "not a count of the cohort-risk design"),
        (SOLVENT, "cases_exposed = 1\nn_exposed = 10\ncases_unexposed = 0", "observed.n_unexposed", "missing"),
        (
            SOLVENT,
            "cases_exposed = 1.5\nn_exposed = 10\ncases_unexposed = 0\nn_unexposed = 10",
            "observed.cases_exposed",
            "whole number",
        ),
        (
            RATE,
            "cases_exposed = 1\nperson_years_exposed = 0.0\ncases_unexposed = 0\nperson_years_unexposed = 9.0",
            "observed.person_years_exposed",
            "must be above 0 (got 0)",
        ),
        (REFERENCE, "cases = 2\nexpected = 2.0\nperson_years = 100.0", "observed.expected", "one of the two"),
        (REFERENCE, "cases = 2\ncolour = 3", "observed.colour", "is not a known key"),
    ],
)
def test_bad_counts_exit_2_with_one_line_naming_the_count(
    tmp_path: Path, scenario: str, body: str, key: str, reason: str
) -> None:
    data = _data(tmp_path, "[observed]\n" + body + "\n")
    res = run("interpret", scenario, "--data", str(data), "--json")
    assert res.exit_code == 2
    assert res.stdout == ""
    line = res.stderr.strip()
    assert "\n" not in line and "Traceback" not in line
    assert line.startswith(f"decide interpret: {data}: {key}: ") and reason in line


def test_design_mismatch_and_missing_file(tmp_path: Path) -> None:
    data = _data(tmp_path, 'design = "case-control"\n[observed]\ncases = 1\nexpected = 2.0\n')
    res = run("interpret", REFERENCE, "--data", str(data))
    assert res.exit_code == 2 and ": design: the scenario's design is reference-rate" in res.stderr
    res = run("interpret", REFERENCE, "--data", str(tmp_path / "none.toml"))
    assert res.exit_code == 2 and "no such file" in res.stderr


def test_api_raises_decide_error_naming_the_count() -> None:
    problem = load_scenario(SOLVENT).problem
    with pytest.raises(decide.DecideError, match=r"^observed\.cases_unexposed must not be negative, but got -2$"):
        decide.interpret(problem, {"cases_exposed": 1, "n_exposed": 9, "cases_unexposed": -2, "n_unexposed": 9})
    with pytest.raises(decide.DecideError, match="confidence must be in"):
        decide.interpret(
            problem, {"cases_exposed": 1, "n_exposed": 9, "cases_unexposed": 2, "n_unexposed": 9}, confidence=1.0
        )


def test_a_design_without_a_reader_is_refused_in_one_line(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delitem(READERS, "matched-case-control")
    with pytest.raises(
        decide.DecideError,
        match=r"^observed: reading observed data is not available for the "
        r"matched-case-control design yet \(available: .*\)$",
    ):
        reader_of("matched-case-control")


def test_zero_cases_print_no_infinity(tmp_path: Path) -> None:
    # no case among the unexposed: no upper limit, no estimate
    data = _data(
        tmp_path,
        "[observed]\ncases_exposed = 4\nperson_years_exposed = 9000.0\n"
        "cases_unexposed = 0\nperson_years_unexposed = 18000.0\n",
    )
    res = run("interpret", RATE, "--data", str(data), "--json", "--policy", "loss-optimal")
    assert res.exit_code == 0, res.output
    assert "Infinity" not in res.stdout and "NaN" not in res.stdout
    out = json.loads(res.stdout)
    assert out["estimate"] is None and out["ci_high"] is None and out["excludes_above"] is None
    assert out["ci_low"] > 0 and 0 < out["posterior_harm"] < 1
    assert "cannot exclude any rate ratio" in out["sentences"]["rules_out"]
    res = run("interpret", RATE, "--data", str(data), "--policy", "loss-optimal")
    words = " ".join(res.stdout.replace("│", " ").split())
    assert res.exit_code == 0 and "no upper limit" in words and " inf" not in words
    # no case at all, two groups: the posterior is the prior
    data = _data(
        tmp_path,
        "[observed]\ncases_exposed = 0\nperson_years_exposed = 9000.0\n"
        "cases_unexposed = 0\nperson_years_unexposed = 18000.0\n",
    )
    out = json.loads(run("interpret", RATE, "--data", str(data), "--json", "--policy", "loss-optimal").stdout)
    problem = load_scenario(RATE).problem
    assert out["posterior_harm"] == pytest.approx(problem.p_harm, rel=1e-12)
    assert out["p_value"] == 1.0 and out["warnings"]
    # reference rate, no case: Garwood's upper limit -ln(0.025) / E, E at the reference rate
    data = _data(tmp_path, "[observed]\ncases = 0\nperson_years = 50000.0\n")
    out = json.loads(run("interpret", REFERENCE, "--data", str(data), "--json", "--policy", "loss-optimal").stdout)
    expected = 50000.0 * load_scenario(REFERENCE).problem.study.baseline
    assert out["ci_low"] == 0 and out["excludes_above"] == pytest.approx(-math.log(0.025) / expected, rel=1e-12)


def test_schema_of_the_data_file_lists_every_designs_keys() -> None:
    res = run("schema", "observed")
    assert res.exit_code == 0
    schema = json.loads(res.stdout)
    keys = set(schema["$defs"]["ObservedModel"]["properties"])
    from decide.decision.observed import READERS

    for reader in READERS.values():
        for key in reader.keys:
            assert set(key.split(" | ")) <= keys


def test_one_policy_still_gets_the_loss_optimal_reading() -> None:
    loaded = load_scenario(REFERENCE)
    policies = load_policies(())
    obs = {"cases": 5, "expected": 2.0}
    alone = decide.interpret(loaded.problem, obs, [policies["conventional-science"]])
    both = decide.interpret(loaded.problem, obs, [policies["conventional-science"], decide.LOSS_OPTIMAL])
    assert [v.policy for v in alone.verdicts] == ["conventional-science"]
    assert alone.loss_optimal_verdict == both.loss_optimal_verdict == both.verdicts[1].verdict
    assert alone.detect_alpha == both.verdicts[1].alpha
    other = load_scenario(SOLVENT).problem
    counts = decide.interpret(other, {"cases_exposed": 1, "n_exposed": 9, "cases_unexposed": 2, "n_unexposed": 9})
    assert counts.design == "cohort-risk"
    from decide.decision.interpret import read_counts

    with pytest.raises(decide.DecideError, match="^observed: counts of the cohort-risk design, but the scenario"):
        decide.interpret(
            loaded.problem,
            read_counts(other, {"cases_exposed": 1, "n_exposed": 9, "cases_unexposed": 2, "n_unexposed": 9}),
        )


def test_detectable_ratio_of_the_study_as_done_against_scipy() -> None:
    """Reference rate, exact test: the critical count and the SIR with 80% power from scipy's Poisson law."""
    from scipy import optimize, stats

    loaded = load_scenario(REFERENCE)
    r = decide.interpret(loaded.problem, {"cases": 0, "person_years": 71400.0})
    e = 71400.0 * loaded.problem.study.baseline
    # scipy 1.17: the smallest c with poisson.sf(c - 1, e) <= alpha, then poisson.sf(c - 1, sir * e) = 0.8
    c = next(c for c in range(100) if stats.poisson.sf(c - 1, e) <= r.detect_alpha * (1 + 1e-10))
    sir = optimize.brentq(lambda t: stats.poisson.sf(c - 1, t * e) - 0.8, 1.0, 100.0, xtol=1e-12)
    assert r.detectable == pytest.approx(sir, rel=1e-6)


@pytest.mark.parametrize(
    ("scenario", "counts", "reason"),
    [
        (
            SOLVENT,
            {"cases_exposed": -1, "n_exposed": 10, "cases_unexposed": 0, "n_unexposed": 10},
            "observed.cases_exposed must not be negative, but got -1",
        ),
        (
            RATE,
            {"cases_exposed": 1, "person_years_exposed": 0.0, "cases_unexposed": 0, "person_years_unexposed": 9.0},
            "observed.person_years_exposed must be above 0, but got 0",
        ),
    ],
)
def test_the_api_refuses_bad_counts_with_the_files_reason(scenario: str, counts: dict[str, float], reason: str) -> None:
    """The core owns the ranges of the counts: the API says what the data file's error says."""
    from decide.decision.interpret import read_counts
    from decide.errors import DecideError
    from decide.scenario.files import load_scenario

    with pytest.raises(DecideError, match=re.escape(reason)):
        read_counts(load_scenario(scenario).problem, counts)


def test_markdown_escapes_a_currency_label_in_every_sentence(tmp_path: Path) -> None:
    """The currency is the user's text: in Markdown it is escaped in the tables and in the sentences alike."""
    data = REPO / "scenarios" / "observed" / "solvent-cohort.toml"
    text = scenario_of(data).read_text(encoding="utf-8")
    assert 'currency = "EUR"' in text
    scen = tmp_path / "scenario.toml"
    scen.write_text(text.replace('currency = "EUR"', 'currency = "*EUR*"'), encoding="utf-8")
    res = run("interpret", str(scen), "--data", str(data), "--policy", "loss-optimal", "--markdown")
    assert res.exit_code == 0, res.output
    assert "*EUR*" not in res.stdout.replace("\\*EUR\\*", "")
    assert res.stdout.count("\\*EUR\\*") >= 3  # two table rows and the sentence on the losses
