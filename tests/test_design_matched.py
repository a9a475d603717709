"""The 1:M matched case-control design against outside checks.

Sources of the expected values, named beside each check:

* the matched-pairs size formula (Miettinen 1968, as given by Schlesselman
  1982, *Case-Control Studies*, Oxford University Press, ch. 6, from
  memory), coded here from the discordant-pair probabilities; Dupont's (1988)
  method reduces to it for one control per case and no correlation;
* the relative efficiency ``2M/(M+1)`` of M controls per case against one,
  for odds ratios near 1 (Ury, H. K. 1975, *Biometrics* 31, 643-649;
  Miettinen, O. S. 1969, *Biometrics* 25, 339-355), reached by Dupont's
  sizes in the limit;
* ``scipy.stats.binomtest`` and ``statsmodels.stats.contingency_tables.mcnemar``
  for the exact McNemar p-values;
* brute-force enumeration of every pair of discordant counts, weighted by
  ``scipy.stats.multinomial``, for exact power;
* seeded simulations of matched sets, subject by subject.

Dupont's paper presents its results as graphs and worked examples; none of
its values could be re-read for these tests, so none is quoted: his method
is instead coded term by term here (``dupont_power``), checked against the
two limits above and against simulated sets.
"""

from __future__ import annotations

import json
import math
from functools import cache
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from numpy.typing import NDArray
from scipy import stats
from statsmodels.stats.contingency_tables import mcnemar
from typer.testing import CliRunner

from decide import power, solve
from decide.cli import app
from decide.decision.optimize import optimize
from decide.designs import DESIGNS, CountModel, StudyDesign, get_design
from decide.designs.matched_case_control import MatchedCaseControl
from decide.engine import exact as _exact
from decide.engine.solve import normal_size
from decide.engine.study import check_setting
from decide.errors import ApproximationWarning, DecideError
from decide.scenario import load_scenario

MATCHED = "matched-case-control"


def p_cases(odds_ratio: float, p0: float) -> float:
    """Exposure prevalence among cases for an odds ratio (Schlesselman 1982, ch. 6)."""
    odds = odds_ratio * p0 / (1 - p0)
    return odds / (1 + odds)


def discordant(p0: float, odds_ratio: float, phi: float) -> tuple[float, float]:
    """Probabilities of a pair with only the case / only the control exposed.

    Dupont's (1988) model for one control per case, written out here: the
    control is exposed with probability p0+ (case exposed) or p0- (case
    unexposed); a pair is discordant with probability t1 and, given that,
    the case is the exposed one with probability OR / (1 + OR).
    """
    p1 = p_cases(odds_ratio, p0)
    q0, q1 = 1 - p0, 1 - p1
    plus = p0 + phi * math.sqrt(q1 * p0 * q0 / p1)
    minus = p0 - phi * math.sqrt(p1 * p0 * q0 / q1)
    t1 = p1 * (1 - plus) + q1 * minus
    return t1 * odds_ratio / (1 + odds_ratio), t1 / (1 + odds_ratio)


# --------------------------------------------------------------------------
# the normal method


@pytest.mark.parametrize(
    ("p0", "odds_ratio", "alpha", "target"),
    [(0.3, 2.0, 0.05, 0.9), (0.4, 2.5, 0.05, 0.8), (0.6, 1.5, 0.01, 0.95), (0.2, 0.5, 0.05, 0.8)],
)
def test_pairs_reduce_to_the_discordant_pair_formula(p0: float, odds_ratio: float, alpha: float, target: float) -> None:
    # Schlesselman (1982) ch. 6: discordant pairs
    #   m = (z_{a/2}/2 + z_b*sqrt(P(1-P)))**2 / (P - 1/2)**2,  P = OR/(1+OR),
    # and pairs m / (p0*q1 + p1*q0).
    big_p = odds_ratio / (1 + odds_ratio)
    p1 = p_cases(odds_ratio, p0)
    z = stats.norm.ppf
    m = (z(1 - alpha / 2) / 2 + z(target) * math.sqrt(big_p * (1 - big_p))) ** 2 / (big_p - 0.5) ** 2
    want = m / (p0 * (1 - p1) + p1 * (1 - p0))
    setting = check_setting(MATCHED, p0, 1.0, None, 2, "normal", False)
    got = float(normal_size(setting, np.asarray(alpha), np.asarray(target), np.asarray(odds_ratio)))
    assert got == pytest.approx(want, rel=1e-12)
    if odds_ratio > 1:
        s = solve(MATCHED, baseline=p0, effect=odds_ratio, alpha=alpha, power=target, sides=2, test="normal")
        assert s.n_per_group == math.ceil(want - 1e-9)
        assert s.n_total == 2 * s.n_per_group


@pytest.mark.parametrize("controls", [2, 3, 5, 10])
@pytest.mark.parametrize("p0", [0.1, 0.4])
def test_efficiency_of_more_controls_near_no_effect(controls: int, p0: float) -> None:
    # Ury (1975), Miettinen (1969): M controls per case are worth 2M/(M+1)
    # times one control per case as the odds ratio tends to 1 (no correlation).
    # At OR 1.0001 the gap from the limit is of order 1e-4.
    def size(m: int) -> float:
        setting = check_setting(MATCHED, p0, float(m), None, 1, "normal", False)
        return float(normal_size(setting, np.asarray(0.05), np.asarray(0.8), np.asarray(1.0001)))

    assert size(1) / size(controls) == pytest.approx(2 * controls / (controls + 1), rel=1e-3)


def test_correlation_within_sets_costs_sets() -> None:
    # Dupont (1988), abstract and discussion: size grows with the correlation.
    sizes = [
        solve(
            MatchedCaseControl(phi), baseline=0.2, effect=2.0, alpha=0.05, power=0.8, allocation=2, test="normal"
        ).n_per_group
        for phi in (0.0, 0.1, 0.2, 0.4)
    ]
    assert sizes == sorted(sizes) and sizes[0] < sizes[-1]


def test_set_probabilities_against_simulated_sets() -> None:
    # Simulate 1:3 matched sets subject by subject under Dupont's model
    # (case exposed with p1; each control, given the case, with p0+ or p0-)
    # and compare the share of sets with m exposed, the correlation of case
    # and control exposure and the control prevalence with the model.
    rng = np.random.default_rng(20261202)
    p0, odds_ratio, phi, big_m, sets = 0.25, 2.5, 0.3, 3, 400_000
    p1 = p_cases(odds_ratio, p0)
    plus = p0 + phi * math.sqrt((1 - p1) * p0 * (1 - p0) / p1)
    minus = p0 - phi * math.sqrt(p1 * p0 * (1 - p0) / (1 - p1))
    case = rng.random(sets) < p1
    controls = rng.random((sets, big_m)) < np.where(case, plus, minus)[:, None]
    m = case + controls.sum(axis=1)
    from decide.designs.matched_case_control import set_probabilities

    t, _, _ = set_probabilities(np.asarray(p0), np.asarray(odds_ratio), np.asarray(float(big_m)), phi)
    seen = np.bincount(m, minlength=big_m + 2)[1 : big_m + 1] / sets
    se = np.sqrt(t[:big_m] * (1 - t[:big_m]) / sets)
    assert np.all(np.abs(seen - t[:big_m]) < 4 * se)
    assert np.corrcoef(case, controls[:, 0])[0, 1] == pytest.approx(phi, abs=4 / math.sqrt(sets))
    assert controls.mean() == pytest.approx(p0, abs=4 * math.sqrt(p0 * (1 - p0) / (sets * big_m)))


def _score_test_power(
    p0: float, odds_ratio: float, big_m: int, n: int, alpha: float, reps: int, seed: int
) -> tuple[float, float]:
    """Seeded simulation of the test Dupont's power formula approximates.

    Each replicate draws ``n`` matched sets subject by subject (no
    correlation), counts the exposed subjects ``m`` of each set and rejects
    when sum(case exposed - m/(M+1)) / sqrt(sum m(M+1-m)/(M+1)**2) exceeds
    z_alpha.  Returns the rejection rate and its standard error.
    """
    rng = np.random.default_rng(seed)
    p1 = p_cases(odds_ratio, p0)
    hits = 0
    for _ in range(reps // 500):
        case = rng.random((500, n)) < p1
        m = case + (rng.random((500, n, big_m)) < p0).sum(axis=2)
        score = (case - m / (big_m + 1)).sum(axis=1)
        var = (m * (big_m + 1 - m)).sum(axis=1) / (big_m + 1) ** 2
        hits += int(np.sum(score > stats.norm.isf(alpha) * np.sqrt(var)))
    rate = hits / reps
    return rate, math.sqrt(rate * (1 - rate) / reps)


@pytest.mark.parametrize(("big_m", "n"), [(1, 400), (4, 250)])
def test_normal_power_against_simulated_score_test(big_m: int, n: int) -> None:
    # With hundreds of informative sets the normal approximation is close:
    # measured, formula minus simulation is +0.0044 (2.5 standard errors of
    # 20,000 replicates, 0.0018) for 1:1 and -0.0009 for 1:4; the check
    # allows 4 standard errors (about 0.007).
    got = power(MATCHED, 0.05, n, 1.6, 0.3, allocation=big_m, test="normal")
    rate, se = _score_test_power(0.3, 1.6, big_m, n, 0.05, 20_000, seed=7 + big_m)
    assert float(got.power) == pytest.approx(rate, abs=4 * se)


# --------------------------------------------------------------------------
# the exact McNemar test


def _pair_axes(
    design: StudyDesign, n: int, p0: float, odds_ratio: float
) -> tuple[CountModel, NDArray[np.int64], NDArray[np.int64]]:
    model = design.count_model(np.array([float(n)]), np.array([p0]), np.array([[odds_ratio]]), np.ones(1), np.ones(1))
    lo1, hi1 = _exact._window(model.exposed_null)
    lo_alt, hi_alt = _exact._window(model.exposed_alt)
    x1 = np.arange(min(lo1[0], lo_alt.min()), max(hi1[0], hi_alt.max()) + 1)
    lo0, hi0 = _exact._x0_window(model)
    x0 = np.arange(lo0[0], hi0[0] + 1)
    return model, x1.astype(int), x0.astype(int)


@pytest.mark.parametrize("sides", [1, 2])
def test_mcnemar_p_values_against_scipy_and_statsmodels(sides: int) -> None:
    design = get_design(MATCHED)
    model, x1, x0 = _pair_axes(design, 60, 0.3, 2.5)
    p = _exact.build_grid(model, sides).p_value[0]
    checked = 0
    for i, b in enumerate(x1):
        for j, c in enumerate(x0):
            if b + c == 0 or b + c > 60:
                continue
            if sides == 1:
                # scipy.stats.binomtest(b, b + c, 0.5, alternative="greater").pvalue
                want = stats.binomtest(int(b), int(b + c), 0.5, alternative="greater").pvalue
            else:
                # mcnemar([[0, b], [c, 0]], exact=True).pvalue: twice the smaller binomial tail
                want = mcnemar(np.array([[0, b], [c, 0]]), exact=True).pvalue
                assert stats.binomtest(int(b), int(b + c), 0.5).pvalue == pytest.approx(want, rel=1e-12)
            if want > 1e-18:
                assert p[i, j] == pytest.approx(want, rel=1e-9), (b, c)
            checked += 1
    assert checked > 500


@cache
def _mcnemar_p(b: int, c: int, sides: int) -> float:
    if b + c == 0:
        return 1.0
    upper = stats.binomtest(b, b + c, 0.5, alternative="greater").pvalue
    if sides == 1:
        return float(upper)
    return float(mcnemar(np.array([[0, b], [c, 0]]), exact=True).pvalue)


def brute_force_mcnemar(
    n: int, p0: float, odds_ratio: float, phi: float, alpha: float, sides: int
) -> tuple[float, float]:
    """Power and attained alpha by enumerating every (b, c), b + c <= n."""
    out = []
    for effect in (odds_ratio, 1.0):
        pb, pc = discordant(p0, effect, phi)
        law = stats.multinomial(n, [pb, pc, 1 - pb - pc])
        total = 0.0
        for b in range(n + 1):
            for c in range(n + 1 - b):
                if _mcnemar_p(b, c, sides) <= alpha * (1 + 1e-10):
                    total += law.pmf([b, c, n - b - c])
        out.append(total)
    return out[0], out[1]


@pytest.mark.parametrize(
    ("n", "p0", "odds_ratio", "phi", "sides"),
    [
        (30, 0.2, 3.0, 0.0, 1),
        (30, 0.2, 3.0, 0.0, 2),
        (45, 0.4, 2.0, 0.2, 1),
        (45, 0.4, 2.0, 0.2, 2),
        (20, 0.1, 5.0, 0.0, 1),
        (35, 0.5, 0.4, 0.1, 2),  # protective: only a two-sided test sees it
    ],
)
def test_exact_power_against_brute_force(n: int, p0: float, odds_ratio: float, phi: float, sides: int) -> None:
    alphas = (0.01, 0.05, 0.1)
    got = power(MatchedCaseControl(phi), alphas, n, odds_ratio, p0, sides=sides, test="exact")
    assert got.exact.all()
    for i, alpha in enumerate(alphas):
        want_power, want_size = brute_force_mcnemar(n, p0, odds_ratio, phi, alpha, sides)
        assert got.power[i] == pytest.approx(want_power, rel=1e-9, abs=1e-12)
        assert got.attained_alpha[i] == pytest.approx(want_size, rel=1e-9, abs=1e-12)
        assert got.attained_alpha[i] <= alpha


def test_no_correlation_pairs_are_independent_case_and_control() -> None:
    # With phi = 0 Dupont's discordant probabilities are p1*q0 and q1*p0.
    p0, odds_ratio = 0.3, 2.2
    p1 = p_cases(odds_ratio, p0)
    assert discordant(p0, odds_ratio, 0.0) == pytest.approx((p1 * (1 - p0), (1 - p1) * p0), rel=1e-14)


def test_exact_power_against_simulated_pairs() -> None:
    # 40,000 studies of 80 pairs drawn subject by subject; each is tested
    # with the exact McNemar test (binomial tail from scipy).
    rng = np.random.default_rng(11)
    n, p0, odds_ratio, alpha, reps = 80, 0.15, 3.0, 0.05, 40_000
    p1 = p_cases(odds_ratio, p0)
    case = rng.random((reps, n)) < p1
    control = rng.random((reps, n)) < p0
    b = (case & ~control).sum(axis=1)
    c = (~case & control).sum(axis=1)
    pvalue = stats.binom.sf(b - 1, b + c, 0.5)  # P(Bin(b + c, 1/2) >= b)
    rate = float(np.mean(pvalue <= alpha))
    se = math.sqrt(rate * (1 - rate) / reps)
    got = power(MATCHED, alpha, n, odds_ratio, p0, test="exact")
    assert float(got.power) == pytest.approx(rate, abs=4 * se)


def test_exact_size_solve_reaches_the_target_and_is_the_first() -> None:
    s = solve(MATCHED, baseline=0.1, effect=4.0, alpha=0.05, power=0.8, test="exact")
    assert s.test == "exact" and s.power >= 0.8
    sizes = np.arange(1, s.n_per_group + 1)
    pw = power(MATCHED, 0.05, sizes, 4.0, 0.1, test="exact").power
    assert pw[-1] >= 0.8 and not (pw[:-1] >= 0.8).any()
    want, _ = brute_force_mcnemar(s.n_per_group, 0.1, 4.0, 0.0, 0.05, 1)
    assert s.power == pytest.approx(want, rel=1e-9)


# --------------------------------------------------------------------------
# what the design accepts, and what auto and exact do


def test_more_controls_run_the_normal_method_and_say_why() -> None:
    with pytest.warns(ApproximationWarning, match=r"as few as 2 expected.*1:1 matching only"):
        s = solve(MATCHED, baseline=0.05, effect=3.0, alpha=0.05, n_per_group=40, allocation=3)
    assert s.test == "normal" and "1:1 matching only" in s.test_reason
    with pytest.raises(DecideError, match=r"^test: exact is not offered here: exact power is offered for 1:1"):
        solve(MATCHED, baseline=0.05, effect=3.0, alpha=0.05, n_per_group=40, allocation=3, test="exact")
    with pytest.warns(ApproximationWarning, match="1:1 matching only"):
        power(MATCHED, 0.05, 10, 3.0, 0.05, allocation=2)
    pairs = solve(MATCHED, baseline=0.05, effect=3.0, alpha=0.05, n_per_group=40)
    assert pairs.test == "exact" and pairs.method.endswith("exact McNemar test, binomial on the discordant pairs")


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"allocation": 2.5}, r"^allocation \(controls per case\) must be a whole number from 1 to 10 .* got 2\.5"),
        ({"allocation": 11}, r"^allocation .* got 11"),
        ({"allocation": 0.5}, r"^allocation .* got 0\.5"),
        ({"baseline": 1.2}, r"^baseline must be strictly between 0 and 1"),
        ({"years": 2.0}, r"^years does not apply to the matched-case-control design"),
        ({"continuity": True}, r"^continuity does not apply to the matched-case-control design"),
    ],
)
def test_bad_settings_are_refused(kwargs: dict[str, Any], message: str) -> None:
    args: dict[str, Any] = {"baseline": 0.2, "effect": 2.0, "alpha": 0.05, "power": 0.8} | kwargs
    with pytest.raises(DecideError, match=message):
        solve(MATCHED, **args)


def test_correlation_setting_and_its_effect_limit() -> None:
    with pytest.raises(DecideError, match=r"^design_settings.correlation must be at least 0 and below 1"):
        get_design(MATCHED).configure({"correlation": 1.0})
    with pytest.raises(DecideError, match=r"^design_settings.rho: the matched-case-control design has no such"):
        get_design(MATCHED).configure({"rho": 0.1})
    with pytest.raises(DecideError, match=r"^design_settings.correlation: the cohort-risk design has no such"):
        get_design("cohort-risk").configure({"correlation": 0.1})
    d = get_design(MATCHED).configure({"correlation": 0.25})
    assert d == MatchedCaseControl(0.25) and hash(d) == hash(MatchedCaseControl(0.25))
    assert d != DESIGNS[MATCHED]
    # p0- = p0 - phi*sqrt(p0*q0*p1/q1) >= 0 exactly while OR <= 1/phi**2 = 16
    with pytest.raises(DecideError, match=r"effect must be below 16 .*1/phi\*\*2"):
        solve(d, baseline=0.2, effect=16.0, alpha=0.05, power=0.8)
    s = solve(d, baseline=0.2, effect=15.0, alpha=0.05, power=0.8)
    assert s.method.endswith("correlation 0.25")


# --------------------------------------------------------------------------
# Dupont's power written out term by term, for any M and correlation


def dupont_power(p0: float, odds_ratio: float, big_m: int, phi: float, n: int, alpha: float, sides: int) -> float:
    """Dupont (1988) power, coded here from scipy's binomial pmf, set type by set type."""
    p1 = p_cases(odds_ratio, p0)
    q0, q1 = 1 - p0, 1 - p1
    plus = p0 + phi * math.sqrt(q1 * p0 * q0 / p1)
    minus = p0 - phi * math.sqrt(p1 * p0 * q0 / q1)
    mean = var0 = var1 = 0.0
    for m in range(1, big_m + 1):
        t = p1 * stats.binom.pmf(m - 1, big_m, plus) + q1 * stats.binom.pmf(m, big_m, minus)
        e = m * odds_ratio / (m * odds_ratio + big_m - m + 1)
        mean += t * (e - m / (big_m + 1))
        var0 += t * m * (big_m - m + 1) / (big_m + 1) ** 2
        var1 += t * e * (1 - e)
    z = stats.norm.isf(alpha / sides)
    out = stats.norm.cdf((math.sqrt(n) * mean - z * math.sqrt(var0)) / math.sqrt(var1))
    if sides == 2:
        out += stats.norm.cdf((-math.sqrt(n) * mean - z * math.sqrt(var0)) / math.sqrt(var1))
    return float(out)


@pytest.mark.parametrize(
    ("p0", "odds_ratio", "big_m", "phi", "n", "sides"),
    [
        (0.2, 2.0, 1, 0.0, 150, 1),
        (0.2, 2.0, 3, 0.2, 120, 1),
        (0.05, 3.0, 10, 0.0, 300, 1),
        (0.5, 1.5, 5, 0.4, 400, 2),
        (0.3, 0.5, 2, 0.1, 300, 2),
    ],
)
def test_normal_power_is_duponts_formula(
    p0: float, odds_ratio: float, big_m: int, phi: float, n: int, sides: int
) -> None:
    got = power(MatchedCaseControl(phi), 0.05, n, odds_ratio, p0, allocation=big_m, sides=sides, test="normal")
    assert float(got.power) == pytest.approx(dupont_power(p0, odds_ratio, big_m, phi, n, 0.05, sides), rel=1e-12)
    assert float(got.attained_alpha) == pytest.approx(0.05, rel=1e-12)


# --------------------------------------------------------------------------
# the design in the decision layer, the scenario files and the command line

REPO = Path(__file__).resolve().parents[1]
BUNDLED = REPO / "scenarios" / "quillmere-matched.toml"


def run(*args: object) -> Any:
    return CliRunner().invoke(app, [str(a) for a in args], env={"COLUMNS": "100"})


def test_bundled_scenario_optimum_uses_the_exact_test_and_brute_force_agrees() -> None:
    loaded = load_scenario(BUNDLED)
    setting = loaded.problem.study.setting()
    assert setting.design == MatchedCaseControl(0.1) and float(setting.allocation) == 1.0
    d = optimize(loaded.problem)
    assert d.feasible and d.test == "exact" and d.method is not None and d.method.endswith("correlation 0.1")
    assert d.n_per_group is not None and d.alpha is not None
    want_power, want_size = brute_force_mcnemar(d.n_per_group, 0.06, 3.0, 0.1, d.alpha, 1)
    assert d.power_at_design_effect == pytest.approx(want_power, rel=1e-9)
    assert d.attained_alpha == pytest.approx(want_size, rel=1e-9)
    assert d.n_total == 2 * d.n_per_group


def test_one_to_three_variant_through_compare_and_optimize(tmp_path: Path) -> None:
    text = BUNDLED.read_text(encoding="utf-8").replace("allocation = 1.0", "allocation = 3.0")
    path = tmp_path / "three.toml"
    path.write_text(text, encoding="utf-8")
    res = run("compare", path, "--json")
    assert res.exit_code == 0, res.output
    rows = json.loads(res.stdout)["policies"]
    feasible = [r for r in rows if r["feasible"]]
    assert feasible and all(r["test"] == "normal" for r in feasible)
    assert all(r["n_total"] == 4 * r["n_per_group"] for r in feasible)
    best = min(r["expected_loss"] for r in feasible)
    optimum = json.loads(run("optimize", path, "--json").stdout)
    assert optimum["expected_loss"] == pytest.approx(best, rel=1e-9)
    # its power at the design effect is Dupont's, coded above
    want = dupont_power(0.06, 3.0, 3, 0.1, optimum["n_per_group"], optimum["alpha"], 1)
    assert optimum["power_at_design_effect"] == pytest.approx(want, rel=1e-9)


def test_scenario_refuses_bad_design_settings(tmp_path: Path) -> None:
    cases = [
        ("correlation = 0.1", "correlation = 1.5", "study.design_settings.correlation", "at least 0 and below 1"),
        ("correlation = 0.1", "rho = 0.1", "study.design_settings.rho", "no such setting"),
        ("allocation = 1.0", "allocation = 1.5", "study.allocation", "whole number from 1 to 10"),
    ]
    for old, new, key, reason in cases:
        path = tmp_path / "bad.toml"
        path.write_text(BUNDLED.read_text(encoding="utf-8").replace(old, new), encoding="utf-8")
        res = run("optimize", path)
        assert res.exit_code == 2, res.output
        line = res.stderr.strip()
        assert "\n" not in line and f"bad.toml: {key}: " in line and reason in line, line


def test_solve_and_audit_on_the_command_line() -> None:
    res = run(
        "solve",
        "--design",
        MATCHED,
        "--baseline",
        0.2,
        "--effect",
        2.0,
        "--alpha",
        0.05,
        "--power",
        0.8,
        "--allocation",
        2,
        "--design-setting",
        "correlation=0.2",
        "--json",
    )
    assert res.exit_code == 0, res.output
    s = json.loads(res.stdout)
    assert s["method"].endswith("(Dupont 1988), correlation 0.2")
    assert dupont_power(0.2, 2.0, 2, 0.2, s["n_per_group"], 0.05, 1) >= 0.8
    assert dupont_power(0.2, 2.0, 2, 0.2, s["n_per_group"] - 1, 0.05, 1) < 0.8
    res = run(
        "audit",
        "--design",
        MATCHED,
        "--baseline",
        0.2,
        "--effect",
        2.0,
        "--alpha",
        0.05,
        "--power",
        0.8,
        "--p-harm",
        0.2,
        "--per-subject",
        100,
        "--allocation",
        2,
        "--design-setting",
        "correlation=0.2",
        "--json",
    )
    assert res.exit_code == 0, res.output
    a = json.loads(res.stdout)
    assert a["n_per_group"] == s["n_per_group"] and a["n_total"] == 3 * a["n_per_group"]
    # at a loss-optimal size one more set costs what it saves: M = cost * 3 / (p_harm * dPower/dn)
    n = a["n_per_group"]
    slope = (dupont_power(0.2, 2.0, 2, 0.2, n + 1, 0.05, 1) - dupont_power(0.2, 2.0, 2, 0.2, n - 1, 0.05, 1)) / 2
    assert a["implied_missed_hazard"] == pytest.approx(100 * 3 / (0.2 * slope), rel=1e-4)
    bad = run(
        "solve",
        "--design",
        MATCHED,
        "--baseline",
        0.2,
        "--effect",
        2.0,
        "--alpha",
        0.05,
        "--power",
        0.8,
        "--design-setting",
        "correlation",
    )
    assert bad.exit_code == 2 and bad.stderr.strip() == (
        "decide solve: --design-setting must be KEY=VALUE with a number, but got 'correlation'"
    )


@pytest.mark.parametrize("n", [50, 20_000, 2_000_000])
def test_pair_probabilities_of_large_studies_against_scipy_multinomial(n: int) -> None:
    # The engine builds P(b, c) from the binomial total and log-gamma values
    # of the counts.  Outside values at every 7th pair of the grid:
    #   scipy.stats.multinomial(n, [pb, pc, 1 - pb - pc]).pmf([b, c, n - b - c])
    # where its log-factorials of n stay accurate (n up to 20,000), and the
    # other factorisation binom.pmf(b, n, pb) * binom.pmf(c, n - b, pc / (1 - pb))
    # for all n (scipy's binomial pmf does not cancel log-factorials).  The
    # measured largest relative gap to the latter over the whole grid is
    # 2.5e-13, so the check allows 1e-11.
    design = get_design(MATCHED)
    p0 = 20 / n if n > 1000 else 0.3
    model, x1, x0 = _pair_axes(design, n, p0, 2.0)
    grid = _exact.build_grid(model, 1)
    assert grid.null_joint is not None and grid.alt_joint is not None
    for effect, mass in ((1.0, grid.null_joint[0]), (2.0, grid.alt_joint.mass(slice(0, 1))[0, 0])):
        pb, pc = discordant(p0, effect, 0.0)
        law = stats.multinomial(n, [pb, pc, 1 - pb - pc])
        for i in range(0, x1.size, 7):
            for j in range(0, x0.size, 7):
                b, c = int(x1[i]), int(x0[j])
                want = stats.binom.pmf(b, n, pb) * stats.binom.pmf(c, n - b, pc / (1 - pb))
                if want > 1e-250:
                    assert mass[i, j] == pytest.approx(want, rel=1e-11), (b, c)
                    if n <= 20_000:
                        assert mass[i, j] == pytest.approx(law.pmf([b, c, n - b - c]), rel=1e-9)
        assert mass.sum() == pytest.approx(1.0, abs=1e-11)


def test_audit_of_a_pair_study_runs_the_exact_test() -> None:
    res = run(
        "audit",
        "--design",
        MATCHED,
        "--baseline",
        0.06,
        "--effect",
        3.0,
        "--alpha",
        0.05,
        "--n-per-group",
        120,
        "--p-harm",
        0.2,
        "--per-subject",
        800,
        "--design-setting",
        "correlation=0.1",
        "--json",
    )
    assert res.exit_code == 0, res.output
    a = json.loads(res.stdout)
    assert a["test"] == "exact" and a["n_total"] == 240
    want_power, want_size = brute_force_mcnemar(120, 0.06, 3.0, 0.1, 0.05, 1)
    assert a["power"] == pytest.approx(want_power, rel=1e-9)
    assert a["attained_alpha"] == pytest.approx(want_size, rel=1e-9)


@given(
    n=st.integers(1, 400),
    p0=st.floats(0.01, 0.9),
    odds_ratio=st.floats(0.2, 8.0),
    phi=st.floats(0.0, 0.3),
    alpha=st.floats(0.001, 0.3),
    sides=st.sampled_from([1, 2]),
)
def test_exact_attained_alpha_never_exceeds_alpha(
    n: int, p0: float, odds_ratio: float, phi: float, alpha: float, sides: int
) -> None:
    design = MatchedCaseControl(phi)
    if odds_ratio >= float(design.effect_limit(np.asarray(p0))):
        return
    r = power(design, alpha, n, odds_ratio, p0, sides=sides, test="exact")
    assert float(r.attained_alpha) <= alpha * (1 + 1e-9)
    # the two grids differ only in their truncation windows, which leave out
    # under 4e-13 of mass each (decide.engine.exact.TAIL)
    at_null = power(design, alpha, n, 1.0, p0, sides=sides, test="exact")
    assert float(at_null.power) == pytest.approx(float(r.attained_alpha), rel=0, abs=1e-12)


def test_normal_statistic_from_counts_is_mcnemars() -> None:
    # statsmodels: mcnemar([[0, b], [c, 0]], exact=False, correction=False).statistic == (b - c)**2 / (b + c)
    design = get_design(MATCHED)
    b = np.array([5.0, 12.0, 0.0, 30.0])
    c = np.array([1.0, 12.0, 4.0, 11.0])
    up, down = design.normal_statistic(b, c, np.full(4, 100.0), np.full(4, 0.2), np.ones(4), np.ones(4), False)
    for i in range(4):
        chi2 = mcnemar(np.array([[0, b[i]], [c[i], 0]]), exact=False, correction=False).statistic
        assert up[i] ** 2 == pytest.approx(chi2, rel=1e-12) and np.sign(up[i]) == np.sign(b[i] - c[i])
    assert np.array_equal(up, down)
    assert np.isnan(
        design.normal_statistic(b, c, np.full(4, 100.0), np.full(4, 0.2), np.full(4, 2.0), np.ones(4), False)[0]
    ).all()


def test_real_false_alarm_of_the_normal_pair_test_against_brute_force() -> None:
    # The normal test flags when (b - c) / sqrt(b + c) >= z_alpha; its real
    # false-alarm probability sums the multinomial (scipy) over the flagged
    # (b, c) when the exposure is harmless.
    from decide.engine.rule import normal_false_alarm

    n, p0, alpha = 40, 0.3, 0.05
    got = normal_false_alarm(
        get_design(MATCHED), np.array([alpha]), np.array([float(n)]), np.array([p0]), np.ones(1), np.ones(1), 1, False
    )
    pb, pc = discordant(p0, 1.0, 0.0)
    law = stats.multinomial(n, [pb, pc, 1 - pb - pc])
    z = stats.norm.isf(alpha)
    want = sum(
        law.pmf([b, c, n - b - c])
        for b in range(n + 1)
        for c in range(n + 1 - b)
        if b + c > 0 and (b - c) / math.sqrt(b + c) >= z
    )
    assert float(got[0]) == pytest.approx(want, rel=1e-9)
    more = normal_false_alarm(
        get_design(MATCHED),
        np.array([alpha]),
        np.array([float(n)]),
        np.array([p0]),
        np.full(1, 3.0),
        np.ones(1),
        1,
        False,
    )
    assert np.isnan(more[0])  # not computed without an exact law of the sets
