"""Power and size against published tables, worked examples and closed forms.

Each check names its source beside it; "from memory" marks values recalled
rather than re-read in the source.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from decide import power
from decide.engine.solve import normal_size, solve
from decide.engine.study import check_setting

Z = stats.norm.ppf


def _p1_from_or(odds_ratio: float, p0: float) -> float:
    odds = odds_ratio * p0 / (1 - p0)
    return odds / (1 + odds)


# --------------------------------------------------------------------------
# Fleiss' tables, continuity-corrected, two-sided alpha 0.05, power 0.80


@pytest.mark.parametrize(
    ("p0", "p1", "table_n"),
    [
        # Fleiss, Statistical Methods for Rates and Proportions, 2nd ed. (1981),
        # and Fleiss, Levin & Paik, 3rd ed. (2003), Wiley: the appendix table of
        # sizes per group for two proportions, continuity-corrected; from memory,
        # table number not re-read.  The test also recomputes each value from the
        # published formula (Casagrande, Pike & Smith 1978).
        (0.05, 0.10, 474),
        (0.10, 0.20, 219),
    ],
)
def test_fleiss_table_corrected_sizes(p0: float, p1: float, table_n: int) -> None:
    s = solve(
        "cohort-risk",
        baseline=p0,
        effect=p1 / p0,
        alpha=0.05,
        power=0.80,
        sides=2,
        test="normal",
        continuity=True,
    )
    assert s.n_per_group == table_n
    assert s.n_total == 2 * table_n
    assert s.test == "normal-cc"
    # Casagrande, Pike & Smith (1978) Biometrics 34:483-486, computed here: the table's value
    # is the corrected size rounded up
    n = _uncorrected_size(p1, p0, 1.0, 0.05, 0.20, 2)
    assert np.ceil(n / 4 * (1 + np.sqrt(1 + 4 / (n * (p1 - p0)))) ** 2) == table_n
    assert s.power >= 0.80


def _uncorrected_size(p1: float, p0: float, r: float, alpha: float, beta: float, sides: int) -> float:
    """Fleiss, Levin & Paik (2003) ch. 4: pooled variance under H0, unpooled under H1."""
    za, zb = Z(1 - alpha / sides), Z(1 - beta)
    pbar = (p1 + r * p0) / (1 + r)
    top = za * np.sqrt((r + 1) * pbar * (1 - pbar)) + zb * np.sqrt(r * p1 * (1 - p1) + p0 * (1 - p0))
    return float(top**2 / (r * (p1 - p0) ** 2))


@pytest.mark.parametrize(
    ("p0", "rr", "r", "alpha", "beta", "sides"),
    [
        (0.05, 2.0, 1.0, 0.05, 0.20, 2),
        (0.10, 2.0, 1.0, 0.05, 0.20, 2),
        (0.01, 3.0, 2.0, 0.05, 0.10, 1),
        (0.002, 5.0, 4.0, 0.01, 0.20, 1),
        (0.20, 1.5, 0.5, 0.10, 0.20, 2),
        (0.30, 2.0, 3.0, 0.05, 0.20, 2),
    ],
)
def test_continuity_corrected_size_formula(
    p0: float, rr: float, r: float, alpha: float, beta: float, sides: int
) -> None:
    # Casagrande, Pike & Smith (1978) Biometrics 34:483-486 (r = 1) and
    # Fleiss, Tytun & Ury (1980) Biometrics 36:343-346 (unequal groups):
    # n_cc = n/4 * (1 + sqrt(1 + 2(r+1)/(r n |d|)))^2, computed here.
    p1 = rr * p0
    n = _uncorrected_size(p1, p0, r, alpha, beta, sides)
    n_cc = n / 4 * (1 + np.sqrt(1 + 2 * (r + 1) / (r * n * abs(p1 - p0)))) ** 2
    plain = check_setting("cohort-risk", p0, r, None, sides, "normal", False)
    corrected = check_setting("cohort-risk", p0, r, None, sides, "normal", True)
    a, pw, e = np.asarray(alpha), np.asarray(1 - beta), np.asarray(rr)
    assert float(normal_size(plain, a, pw, e)) == pytest.approx(n, rel=1e-10)
    assert float(normal_size(corrected, a, pw, e)) == pytest.approx(n_cc, rel=1e-10)


def test_continuity_corrected_size_reaches_power_exactly() -> None:
    # The corrected size inverts the corrected power (Fleiss, Tytun & Ury 1980):
    # at the continuous size the near-tail power is the target.
    st = check_setting("cohort-risk", 0.02, 2.5, None, 1, "normal", True)
    n = float(normal_size(st, np.asarray(0.05), np.asarray(0.9), np.asarray(2.0)))
    p1, p0, r = 0.04, 0.02, 2.5
    pbar = (p1 + r * p0) / (1 + r)
    se0 = np.sqrt(pbar * (1 - pbar) * (1 + 1 / r) / n)
    se1 = np.sqrt((p1 * (1 - p1) + p0 * (1 - p0) / r) / n)
    cc = (1 + 1 / r) / (2 * n)
    near = stats.norm.cdf((p1 - p0 - cc - Z(0.95) * se0) / se1)
    assert near == pytest.approx(0.9, rel=1e-10)


# --------------------------------------------------------------------------
# Schlesselman's case-control size


def test_schlesselman_worked_example() -> None:
    # Schlesselman (1974) Am J Epidemiol 99:381-384 form; worked example
    # p0 = 0.30, OR = 2, two-sided alpha 0.05, power 0.90 -> 188 cases and
    # 188 controls, pbar = 0.3808 (from memory, not re-read in the paper).  The
    # size is also recomputed from the paper's formula below.
    s = solve("case-control", baseline=0.30, effect=2.0, alpha=0.05, power=0.90, sides=2, test="normal")
    assert s.n_per_group == 188
    assert s.n_total == 376
    p1 = _p1_from_or(2.0, 0.30)
    assert round((p1 + 0.30) / 2, 4) == 0.3808
    # n = (z_a sqrt(2 pbar qbar) + z_b sqrt(p1 q1 + p0 q0))^2 / (p1 - p0)^2 = 187.8, computed here
    pbar = (p1 + 0.30) / 2
    top = Z(0.975) * np.sqrt(2 * pbar * (1 - pbar)) + Z(0.90) * np.sqrt(p1 * (1 - p1) + 0.30 * 0.70)
    assert np.ceil(top**2 / (p1 - 0.30) ** 2) == 188
    assert s.expected_cases["exposed controls"] == pytest.approx(188 * 0.30)
    assert s.expected_cases["exposed cases"] == pytest.approx(188 * p1)


# --------------------------------------------------------------------------
# Breslow & Day vol. II (1987) ch. 7: cohort against a reference rate


@pytest.mark.parametrize(
    ("sir", "alpha", "beta", "sides"),
    [(1.5, 0.05, 0.20, 1), (2.0, 0.05, 0.10, 1), (3.0, 0.01, 0.20, 1), (1.2, 0.05, 0.20, 2), (5.0, 0.05, 0.5, 2)],
)
@pytest.mark.parametrize(("baseline", "years"), [(1e-3, 1.0), (2e-5, 7.5)])
def test_square_root_expected_cases(
    sir: float, alpha: float, beta: float, sides: int, baseline: float, years: float
) -> None:
    # Breslow & Day vol. II (1987) ch. 7, square-root form (from memory):
    # E = (z_a + z_b)^2 / (4 (sqrt(SIR) - 1)^2), computed here.
    expected = (Z(1 - alpha / sides) + Z(1 - beta)) ** 2 / (4 * (np.sqrt(sir) - 1) ** 2)
    st = check_setting("reference-rate", baseline, None, years, sides, "normal", False)
    n = float(normal_size(st, np.asarray(alpha), np.asarray(1 - beta), np.asarray(sir)))
    assert n * years * baseline == pytest.approx(expected, rel=1e-10)


def _scipy_poisson_test(expected: np.ndarray, sir: np.ndarray, alpha: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Critical count c = min{c : P(Pois(E) >= c) <= alpha}; power P(Pois(SIR*E) >= c)."""
    c = np.arange(0, 400)
    upper = stats.poisson.sf(c[None, :] - 1, expected[:, None])
    crit = np.argmax(upper <= alpha[:, None] * (1 + 1e-10), axis=1)
    return stats.poisson.sf(crit - 1, sir * expected), stats.poisson.sf(crit - 1, expected)


def test_exact_poisson_power_against_scipy() -> None:
    # Breslow & Day vol. II (1987) ch. 7 exact test (memory); values from
    # scipy.stats.poisson directly.
    rng = np.random.default_rng(20240611)
    k = 400
    expected = np.exp(rng.uniform(np.log(0.05), np.log(80), k))
    sir = np.exp(rng.uniform(0, np.log(8), k))
    alpha = rng.choice([0.001, 0.01, 0.025, 0.05, 0.1, 0.2], k)
    baseline = np.exp(rng.uniform(np.log(1e-5), np.log(1e-2), k))
    years = expected / baseline / np.round(rng.uniform(50, 5000, k))
    n = np.round(expected / (baseline * years))
    expected = baseline * n * years
    want_power, want_size = _scipy_poisson_test(expected, sir, alpha)
    r = power("reference-rate", alpha, n, sir, baseline, years=years, test="exact")
    np.testing.assert_allclose(r.power, want_power, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(r.attained_alpha, want_size, rtol=1e-9, atol=1e-12)
    assert np.all(r.attained_alpha <= alpha)
