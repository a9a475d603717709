"""The audit judged by the protocol's own costs and prior, and the audit's wording.

Outside checks:

* the exact Poisson test of an observed against an expected count has the
  closed-form region "O >= c", ``c`` the smallest count with
  ``scipy.stats.poisson.sf(c - 1, E) <= alpha``; its power at a ratio
  ``theta`` is ``poisson.sf(c - 1, theta E)``.  The expected loss is then
  ``p M (1 - power) + (1 - p) F attained + per_subject n + fixed``
  (definition), with the lognormal prior integrated by
  ``scipy.integrate.quad`` against ``scipy.stats.norm.pdf`` (conditioned on a
  ratio above 1, as the effect under harm is);
* the loss-optimal design's loss is compared with a scan over sizes and
  critical counts of the same closed form;
* the lognormal prior entered as a central interval reproduces it by
  ``scipy.stats.lognorm.ppf``.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from rich.console import Console
from scipy import integrate, stats

from decide.decision.audit import Audit, audit
from decide.decision.prior import EffectPrior
from decide.errors import DecideError
from decide.report.audit_words import IMPLIED_MISSED_HAZARD, explanations
from decide.report.console import audit_table

# invented protocol: a cohort against a reference rate
RATE, YEARS, N, ALPHA, EFFECT = 2.4e-5, 10.0, 9000, 0.05, 3.0
P, M, F, PER, FIXED = 0.2, 5e7, 1e7, 30.0, 1e5


def _critical(expected: float, alpha: float) -> int:
    c = 0
    while stats.poisson.sf(c - 1, expected) > alpha:
        c += 1
    return c


def _protocol(prior: EffectPrior | None = None) -> Audit:
    return audit(
        "reference-rate",
        baseline=RATE,
        alpha=ALPHA,
        effect=EFFECT,
        p_harm=P,
        per_subject=PER,
        n_per_group=N,
        years=YEARS,
        test="exact",
        missed_hazard=M,
        false_alarm=F,
        fixed=FIXED,
        prior=prior,
    )


def test_point_prior_loss_matches_the_closed_form() -> None:
    a = _protocol()
    e = RATE * N * YEARS
    c = _critical(e, ALPHA)
    miss = stats.poisson.cdf(c - 1, EFFECT * e)
    attained = stats.poisson.sf(c - 1, e)
    want = P * M * miss + (1 - P) * F * attained + PER * N + FIXED
    assert a.losses is not None
    assert a.losses.expected_loss == pytest.approx(want, rel=1e-9)
    assert a.losses.loss_parts["missed"] == pytest.approx(P * M * miss, rel=1e-9)
    assert a.losses.no_study == pytest.approx({"flag_now": (1 - P) * F, "clear_now": P * M}, rel=1e-12)
    assert a.losses.net_benefit == pytest.approx(min((1 - P) * F, P * M) - want, rel=1e-9)
    assert a.losses.stated_cost_ratio == pytest.approx(M / F)
    assert a.rule is not None and a.rule.flag_at_least == c


def test_lognormal_prior_loss_matches_quadrature_and_is_echoed_as_entered() -> None:
    prior = EffectPrior.from_interval(1.2, 4.0, 0.8)
    # scipy.stats.lognorm(s=log_sd, scale=median).ppf(0.1), .ppf(0.9) give back the interval
    dist = stats.lognorm(s=prior.log_sd, scale=prior.median)
    assert dist.ppf(0.1) == pytest.approx(1.2, rel=1e-12)
    assert dist.ppf(0.9) == pytest.approx(4.0, rel=1e-12)
    a = _protocol(prior)
    assert a.prior == "lognormal, median 2.19, 80% between 1.2 and 4"
    e = RATE * N * YEARS
    c = _critical(e, ALPHA)
    # the effect under harm is the lognormal conditioned on a ratio above 1 (truncated at 1, renormalised)
    u0 = math.log(1 / prior.median) / prior.log_sd
    miss, _ = integrate.quad(
        lambda u: stats.norm.pdf(u) * stats.poisson.cdf(c - 1, prior.median * math.exp(prior.log_sd * u) * e),
        u0,
        12,
        epsabs=1e-13,
        epsrel=1e-11,
        limit=200,
    )
    miss /= stats.norm.sf(u0)
    want = P * M * miss + (1 - P) * F * stats.poisson.sf(c - 1, e) + PER * N + FIXED
    assert a.losses is not None
    assert a.losses.expected_loss == pytest.approx(want, rel=1e-8)


def test_regret_is_measured_against_a_scan_of_the_closed_form() -> None:
    a = _protocol()
    assert a.losses is not None and a.losses.regret is not None
    assert a.losses.optimal_n_per_group is not None and a.losses.optimal_expected_loss is not None
    assert a.losses.regret == pytest.approx(a.losses.expected_loss - a.losses.optimal_expected_loss, rel=1e-12)
    # the closed-form loss of the best critical count at every size of a wide grid
    sizes = np.unique(
        np.concatenate(
            [
                np.geomspace(100, 200_000, 400).round(),
                np.arange(a.losses.optimal_n_per_group - 30, a.losses.optimal_n_per_group + 31),
            ]
        )
    )
    counts = np.arange(0, 200)[:, None]
    e = RATE * YEARS * sizes[None, :]
    losses = (
        P * M * stats.poisson.cdf(counts - 1, EFFECT * e)
        + (1 - P) * F * stats.poisson.sf(counts - 1, e)
        + PER * sizes
        + FIXED
    )
    best_scan = float(losses.min())
    assert a.losses.optimal_expected_loss <= best_scan * (1 + 1e-9)
    # and the reported optimum is a real design: its own closed-form loss
    n_opt = a.losses.optimal_n_per_group
    e_opt = RATE * YEARS * n_opt
    assert a.losses.optimal_expected_loss == pytest.approx(
        float(
            (
                P * M * stats.poisson.cdf(counts - 1, EFFECT * e_opt)
                + (1 - P) * F * stats.poisson.sf(counts - 1, e_opt)
            ).min()
            + PER * n_opt
            + FIXED
        ),
        rel=1e-9,
    )
    assert a.losses.regret >= 0


def test_costs_come_in_pairs() -> None:
    with pytest.raises(DecideError, match="missed_hazard and false_alarm"):
        audit(
            "reference-rate",
            baseline=RATE,
            alpha=ALPHA,
            effect=EFFECT,
            p_harm=P,
            per_subject=PER,
            n_per_group=N,
            years=YEARS,
            missed_hazard=M,
        )


def test_without_costs_there_is_no_loss_and_the_rule_is_still_stated() -> None:
    a = audit(
        "reference-rate",
        baseline=RATE,
        alpha=ALPHA,
        effect=EFFECT,
        p_harm=P,
        per_subject=PER,
        n_per_group=N,
        years=YEARS,
    )
    assert a.losses is None and a.prior is None
    assert a.rule is not None and "or more cases are observed" in a.rule.statement


# --------------------------------------------------------------------------
# wording


def _screen(a: Audit, width: int) -> str:
    con = Console(width=width, record=True, color_system=None)
    con.print(audit_table(a, "EUR"))
    text = con.export_text()
    return " ".join(re.sub(r"[│┃║╭╮╰╯─━┌┐└┘├┤┬┴┼]", " ", text).split())


def test_case_control_says_case_and_power_is_stated_as_power() -> None:
    a = audit(
        "case-control",
        baseline=0.2,
        alpha=0.05,
        effect=2.0,
        p_harm=0.15,
        per_subject=250.0,
        n_per_group=150,
        test="normal",
    )
    shown = _screen(a, 200)
    assert "power gained per extra case" in shown
    assert "per extra exposed subject" not in shown
    mid, hi = a.detectable_effects["0.8"], a.detectable_effects["0.95"]
    assert mid is not None and hi is not None
    assert f"would have detected an odds ratio of {mid:.3g} with 80% power" in a.rules_out
    assert f"one of {hi:.3g} with 95% power" in a.rules_out
    assert "unlikely" not in a.rules_out


@pytest.mark.parametrize("width", [80, 100, 140])
def test_no_note_is_cut_off(width: int) -> None:
    a = _protocol(EffectPrior.from_interval(1.2, 4.0, 0.8))
    shown = _screen(a, width)
    for note in [a.rules_out, *explanations(a, "EUR"), *(f"Note: {w}" for w in a.warnings)]:
        assert " ".join(note.split()) in shown
    assert IMPLIED_MISSED_HAZARD.format(unit="exposed subject") in shown
    if width >= 140:  # narrower tables wrap the cell beside its label
        assert "80% between 1.2 and 4" in shown
