"""Reading 1:1 matched pairs after the study: the exact McNemar test and its interval.

Given the discordant pairs ``d = b + c`` (``b`` pairs with only the case
exposed, ``c`` with only the control), ``b`` is binomial with share
``psi / (1 + psi)`` (Breslow and Day 1980, vol. I, sec. 5.2).  Every number is
checked against scipy and statsmodels, or a closed form computed here.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.contingency_tables import mcnemar
from typer.testing import CliRunner

import decide
from decide.cli import app
from decide.decision.interpret import evidence, read_counts
from decide.errors import DecideError
from decide.scenario import load_policies, load_scenario
from decide.scenario.observed_file import load_observed

REPO = Path(__file__).resolve().parents[1]
SCENARIO = REPO / "scenarios" / "quillmere-matched.toml"
DATA = REPO / "scenarios" / "observed" / "quillmere-matched.toml"
KEYS = ("both_exposed", "case_only_exposed", "control_only_exposed", "neither_exposed")
POLICIES = list(load_policies(()).values())
#: (both, case only, control only, neither): the bundled file, a strong and a null result,
#: effects pointing away from harm, a case-only and a control-only extreme.
TABLES = [(3, 14, 7, 126), (10, 25, 5, 110), (2, 9, 9, 80), (4, 3, 12, 131), (0, 6, 0, 44), (1, 0, 5, 20)]


def _pairs(t: tuple[int, int, int, int]) -> dict[str, float]:
    return dict(zip(KEYS, t, strict=True))


def _run(*args: str) -> Any:
    return CliRunner().invoke(app, list(args), env={"COLUMNS": "100"})


@pytest.fixture(scope="module")
def problem() -> decide.Problem:
    return load_scenario(SCENARIO).problem


@pytest.mark.parametrize("t", TABLES, ids=str)
def test_p_values_are_the_exact_mcnemar_test(problem: decide.Problem, t: tuple[int, int, int, int]) -> None:
    both, b, c, neither = t
    r = decide.interpret(problem, _pairs(t))
    # scipy 1.17: stats.binomtest(b, b + c, 0.5, alternative="greater").pvalue
    assert r.p_value == pytest.approx(stats.binomtest(b, b + c, 0.5, alternative="greater").pvalue, rel=1e-12)
    # statsmodels 0.15: mcnemar([[both, b], [c, neither]], exact=True).pvalue (two-sided, twice the smaller tail)
    two = mcnemar(np.array([[both, b], [c, neither]]), exact=True).pvalue
    assert r.p_value_two_sided == pytest.approx(two, rel=1e-12)
    # scipy's two-sided binomial test at share 1/2 is the same (a symmetric law)
    assert r.p_value_two_sided == pytest.approx(stats.binomtest(b, b + c, 0.5).pvalue, rel=1e-12)
    # mid-p: P(X > b) + P(X = b) / 2
    mid = stats.binom.sf(b, b + c, 0.5) + stats.binom.pmf(b, b + c, 0.5) / 2
    assert r.p_value_mid == pytest.approx(mid, rel=1e-12)


@pytest.mark.parametrize("t", TABLES, ids=str)
def test_interval_is_clopper_pearson_on_the_share_and_the_estimate_b_over_c(
    problem: decide.Problem, t: tuple[int, int, int, int]
) -> None:
    _, b, c, _ = t
    r = decide.interpret(problem, _pairs(t))
    # scipy 1.17: stats.binomtest(b, b + c).proportion_ci(0.95, method="exact"), then psi = share / (1 - share)
    ci = stats.binomtest(b, b + c).proportion_ci(0.95, method="exact")
    assert r.ci_low == pytest.approx(ci.low / (1 - ci.low), rel=1e-9, abs=1e-12)
    if ci.high == 1:
        assert r.ci_high == math.inf and r.excludes_above == math.inf
    else:
        assert r.ci_high == pytest.approx(ci.high / (1 - ci.high), rel=1e-9)
    if c == 0:
        assert r.estimate is None  # infinite
    else:
        assert r.estimate == pytest.approx(b / c, rel=1e-12)
    assert r.effect_name == "odds ratio"
    assert "exact McNemar test" in r.method and "discordant pairs" in r.method


@pytest.mark.parametrize("t", [t for t in TABLES if t[1] + t[2] > 0], ids=str)
def test_normal_statistic_is_mcnemars(problem: decide.Problem, t: tuple[int, int, int, int]) -> None:
    both, b, c, neither = t
    ev = evidence(read_counts(problem, _pairs(t)))
    table = np.array([[both, b], [c, neither]])
    # statsmodels 0.15: mcnemar(table, exact=False, correction=False).statistic is (b - c)**2 / (b + c)
    assert ev.z**2 == pytest.approx(mcnemar(table, exact=False, correction=False).statistic, rel=1e-12)
    # correction=True: (|b - c| - 1)**2 / (b + c)
    if abs(b - c) >= 1:
        assert ev.z_cc**2 == pytest.approx(mcnemar(table, exact=False, correction=True).statistic, rel=1e-12)
    else:
        assert ev.z_cc == 0.0
    assert np.sign(ev.z) == np.sign(ev.z_cc) == np.sign(b - c)
    assert decide.interpret(problem, _pairs(t)).statistic == ev.z


def test_no_discordant_pair_leaves_the_prior_and_says_why(problem: decide.Problem) -> None:
    r = decide.interpret(problem, _pairs((5, 0, 0, 20)))
    assert r.p_value == 1.0 and r.ci_low == 0.0 and r.ci_high == math.inf and r.statistic == 0.0
    assert r.posterior_harm == pytest.approx(problem.p_harm, rel=1e-12)
    assert r.warnings and r.warnings[0].startswith("no discordant pair:")


@pytest.mark.parametrize("b", range(6, 20))
def test_verdicts_flag_exactly_when_the_exact_p_value_is_at_most_alpha(problem: decide.Problem, b: int) -> None:
    r = decide.interpret(problem, _pairs((3, b, 7, 140 - b)), POLICIES)
    p = stats.binomtest(b, b + 7, 0.5, alternative="greater").pvalue  # the scenario is one-sided
    exact = [v for v in r.verdicts if v.test == "exact"]
    assert exact
    for v in exact:
        assert v.alpha is not None
        assert v.verdict == ("flag" if p <= v.alpha else "clear"), v.policy
    for v in r.verdicts:
        if v.test == "normal":  # McNemar's z against the normal critical value
            assert v.alpha is not None
            z = (b - 7) / math.sqrt(b + 7)
            assert v.verdict == ("flag" if z > stats.norm.isf(v.alpha) else "clear"), v.policy


def _exact_power(n: int, p0: float, psi: float, phi: float, alpha: float) -> float:
    """Power of the one-sided exact McNemar test over ``n`` pairs (Dupont 1988 model of exposure in a pair).

    Given the case's exposure the control is exposed with probability
    ``p0 + phi sqrt(p0 q0 q1 / p1)`` (case exposed) or ``p0 - phi sqrt(p0 q0 p1 / q1)``
    (case unexposed); the discordant pairs are binomial over the ``n`` pairs, and
    in each the case is the exposed one with probability ``psi / (1 + psi)``
    (Dupont 1988, Biometrics 44, 1157-1168, the model of a set with one exposed
    subject).  Given their number ``d`` the test rejects from the smallest ``k``
    with ``P(Bin(d, 1/2) >= k) <= alpha``.
    """
    p1 = psi * p0 / (1 + p0 * (psi - 1))
    q0, q1 = 1 - p0, 1 - p1
    plus = p0 + phi * math.sqrt(p0 * q0 * q1 / p1)
    minus = p0 - phi * math.sqrt(p0 * q0 * p1 / q1)
    case_only, control_only = p1 * (1 - plus), q1 * minus
    total = 0.0
    for d in range(n + 1):
        k = np.arange(d + 1)
        reject = k[stats.binom.sf(k - 1, d, 0.5) <= alpha * (1 + 1e-10)]
        if reject.size:
            share = psi / (1 + psi)
            total += stats.binom.pmf(d, n, case_only + control_only) * stats.binom.sf(reject[0] - 1, d, share)
    return total


def test_detectable_ratio_is_solved_at_every_pair_with_the_scenarios_correlation(tmp_path: Path) -> None:
    text = SCENARIO.read_text(encoding="utf-8")
    assert 'test = "auto"' in text and "correlation = 0.1" in text
    scen = tmp_path / "exact.toml"
    scen.write_text(text.replace('test = "auto"', 'test = "exact"'), encoding="utf-8")
    problem = load_scenario(scen).problem
    r = decide.interpret(problem, load_observed(DATA, problem))
    n = 3 + 14 + 7 + 126  # every pair, concordant ones too
    assert r.detectable is not None
    assert _exact_power(n, 0.06, r.detectable, 0.1, r.detect_alpha) == pytest.approx(0.8, abs=1e-6)
    # without the correlation, pairs are less alike: a smaller ratio is detectable
    scen.write_text(text.replace('test = "auto"', 'test = "exact"').replace("correlation = 0.1", "correlation = 0.0"))
    free = decide.interpret(load_scenario(scen).problem, _pairs((3, 14, 7, 126)))
    assert free.detectable is not None and free.detectable < r.detectable
    assert _exact_power(n, 0.06, free.detectable, 0.0, free.detect_alpha) == pytest.approx(0.8, abs=1e-6)


def _one_to_two(tmp_path: Path) -> Path:
    text = SCENARIO.read_text(encoding="utf-8")
    assert "allocation = 1.0" in text
    scen = tmp_path / "one-to-two.toml"
    scen.write_text(text.replace("allocation = 1.0", "allocation = 2.0"), encoding="utf-8")
    return scen


def test_more_controls_per_case_are_refused_in_one_line(tmp_path: Path) -> None:
    scen = _one_to_two(tmp_path)
    reason = "only 1:1 matched pairs (one control per case) can be read so far"
    res = _run("interpret", str(scen), "--data", str(DATA))
    assert res.exit_code == 2
    line = res.stderr.strip()
    assert "\n" not in line and "Traceback" not in line and reason in line and "2 controls" in line
    with pytest.raises(DecideError, match=re.escape(reason)):
        decide.interpret(load_scenario(scen).problem, _pairs((3, 14, 7, 126)))
    # counts read under a 1:1 scenario are refused against the 1:2 one as well
    counts = load_observed(DATA, load_scenario(SCENARIO).problem)
    with pytest.raises(DecideError, match=re.escape(reason)):
        decide.interpret(load_scenario(scen).problem, counts)


BAD = [
    ({"case_only_exposed": -1}, "case_only_exposed", "must not be negative"),
    ({"neither_exposed": 12.5}, "neither_exposed", "whole number"),
    (
        {"both_exposed": 0, "case_only_exposed": 0, "control_only_exposed": 0, "neither_exposed": 0},
        "both_exposed",
        "no pair",
    ),
    ({"control_only_exposed": None}, "control_only_exposed", "missing"),
    ({"cases": 3}, "cases", "not a count of the matched-case-control design"),
]


def _bad_counts(change: dict[str, float | None]) -> dict[str, float]:
    counts = {**_pairs((3, 14, 7, 126)), **change}
    return {k: v for k, v in counts.items() if v is not None}


@pytest.mark.parametrize(("change", "key", "reason"), BAD, ids=[b[1] + ":" + b[2] for b in BAD])
def test_bad_counts_exit_2_naming_the_key_with_the_apis_reason(
    tmp_path: Path, problem: decide.Problem, change: dict[str, float | None], key: str, reason: str
) -> None:
    counts = _bad_counts(change)
    data = tmp_path / "bad.toml"
    body = "".join(f"{k} = {v!r}\n" for k, v in counts.items())
    data.write_text("[observed]\n" + body, encoding="utf-8")
    res = _run("interpret", str(SCENARIO), "--data", str(data), "--json")
    assert res.exit_code == 2
    assert res.stdout == ""
    line = res.stderr.strip()
    assert "\n" not in line and "Traceback" not in line
    assert line.startswith(f"decide interpret: {data}: observed.{key}: ") and reason in line
    with pytest.raises(DecideError, match=rf"^observed\.{key}\b.*{re.escape(reason)}"):
        decide.interpret(problem, counts)


def test_json_runs_on_the_bundled_file() -> None:
    res = _run("interpret", str(SCENARIO), "--data", str(DATA), "--json")
    assert res.exit_code == 0, res.output
    out = json.loads(res.stdout)
    assert out["design"] == "matched-case-control"
    assert out["observed"] == _pairs((3, 14, 7, 126))
    assert out["estimate"] == pytest.approx(2.0, rel=1e-12)
    assert out["p_value"] == pytest.approx(stats.binomtest(14, 21, 0.5, alternative="greater").pvalue, rel=1e-12)
    assert "INVENTED" in DATA.read_text(encoding="utf-8")


def test_no_pair_with_only_the_control_exposed_is_said_in_the_pairs_words(problem: decide.Problem) -> None:
    from decide.report.interpretation import estimate_sentence

    r = decide.interpret(problem, _pairs((0, 6, 0, 44)))
    assert r.estimate is None
    assert estimate_sentence(r).startswith("Odds ratio not estimable (no pair with only the control exposed);")


def test_posterior_under_a_point_effect_is_bayes_rule_on_the_binomial_likelihood() -> None:
    from decide.decision.prior import EffectPrior
    from decide.decision.problem import Consequences, Problem, Study

    p, psi = 0.2, 3.0
    costs = Consequences(false_alarm=4e6, per_subject=800.0, missed_hazard=1.5e7)
    prob = Problem(Study("matched-case-control", 0.06), EffectPrior.point(psi), p, costs)
    r = decide.interpret(prob, _pairs((3, 14, 7, 126)))
    # closed form: L(psi) = binom.pmf(b, b + c, psi / (1 + psi)), L(1) = binom.pmf(b, b + c, 1/2)
    lr = stats.binom.pmf(14, 21, psi / (1 + psi)) / stats.binom.pmf(14, 21, 0.5)
    assert r.posterior_harm == pytest.approx(p * lr / (p * lr + 1 - p), rel=1e-10)
    assert r.loss_flag == pytest.approx((1 - r.posterior_harm) * 4e6, rel=1e-12)
    assert r.loss_clear == pytest.approx(r.posterior_harm * 1.5e7, rel=1e-12)
