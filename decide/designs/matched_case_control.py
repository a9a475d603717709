"""Matched case-control study, 1:M (M controls per case); effect = odds ratio.

Each of ``n`` cases is matched with ``M = allocation`` controls (M a whole
number from 1 to 10).  The baseline is the exposure prevalence among
controls ``p0`` and the effect the odds ratio ``psi``, so the exposure
prevalence among cases is ``p1 = psi*p0 / (1 + p0*(psi - 1))``.  The design
setting ``correlation`` (``phi``, default 0) is the correlation of exposure
between a case and a matched control: matching on what drives exposure
makes matched subjects alike, which wastes sets.

The model of Dupont (1988): given the case's exposure the M controls are
independent, exposed with probability
``p0+ = p0 + phi*sqrt(p0*q0*q1/p1)`` (case exposed) or
``p0- = p0 - phi*sqrt(p0*q0*p1/q1)`` (case unexposed), so a set holds ``m``
exposed subjects with probability

    t_m = p1*C(M, m-1)*p0+**(m-1)*q0+**(M-m+1) + q1*C(M, m)*p0-**m*q0-**(M-m),

and, given ``m``, its case is the exposed one with probability
``e_m = m*psi / (m*psi + M - m + 1)`` (``m/(M+1)`` with no effect).  Sets
with no or all subjects exposed (m = 0 or M + 1) carry no information.

Normal test (Dupont 1988): the number of exposed cases minus its expectation
given each set's exposure count, summed over sets.  Per set its mean is
``sum_m t_m*(e_m - m/(M+1))``, its variance ``sum_m t_m*m*(M-m+1)/(M+1)**2``
with no effect and ``sum_m t_m*e_m*(1-e_m)`` under the effect, which gives
Dupont's size ``n = (z_a*sqrt(V0) + z_b*sqrt(V1))**2 / E**2``.

Exact test (1:1 only): the exact McNemar test, the binomial test with share
1/2 of the pairs where only the case is exposed among the discordant pairs.
Its power sums the conditional test's power over the number of discordant
pairs, binomial over the ``n`` pairs (the pair counts are two cells of one
multinomial).  For M > 1 the exact conditional test of the sets conditions on
the whole vector of set exposure counts, whose number grows as ``n**M``; its
power is not offered, and ``test="auto"`` runs Dupont's normal method (with a
warning where few informative sets are expected) while ``test="exact"`` is
refused with that reason.

With ``phi > 0`` the model needs ``phi**2 < psi < 1/phi**2`` (so that
``p0-`` and ``p0+`` are probabilities): odds ratios from ``1/phi**2`` up are
refused; below ``phi**2`` (only met by two-sided tests) the conditional
exposure probabilities are clipped to [0, 1].

References
----------
.. [1] Dupont, W. D. (1988). Power calculations for matched case-control
   studies. *Biometrics* 44, 1157-1168.
.. [2] McNemar, Q. (1947). Note on the sampling error of the difference
   between correlated proportions or percentages. *Psychometrika* 12,
   153-157.
.. [3] Breslow, N. E. and Day, N. E. (1980). *Statistical Methods in Cancer
   Research, vol. I: The Analysis of Case-Control Studies*. IARC Scientific
   Publications 32, Lyon, ch. 5 (the conditional analysis of matched sets).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy import special

from .._checks import as_float_array, open_unit
from ..errors import DecideError
from ._base import CountModel, FloatArray, Marginal, NormalMoments, StudyDesign
from .case_control import exposure_among_cases

#: The largest number of controls matched to a case.
MOST_CONTROLS = 10


def set_probabilities(
    p0: FloatArray, psi: FloatArray, controls: FloatArray, phi: float
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """``t_m``, ``e_m`` and ``m/(M+1)`` for m = 1..10 on a trailing axis (zero where m > M).

    ``t_m`` is the probability that a matched set holds ``m`` exposed
    subjects, ``e_m`` the probability that its case is one of them under the
    odds ratio (Dupont 1988).
    """
    p0, psi, big_m = (np.asarray(x, dtype=np.float64)[..., None] for x in np.broadcast_arrays(p0, psi, controls))
    m = np.arange(1, MOST_CONTROLS + 1, dtype=np.float64)
    p1 = exposure_among_cases(psi, p0)
    q0, q1 = 1 - p0, 1 - p1
    spread = phi * np.sqrt(p0 * q0 * p1 * q1)
    plus = np.clip(p0 + spread / p1, 0.0, 1.0)
    minus = np.clip(p0 - spread / q1, 0.0, 1.0)
    inside = m <= big_m
    k = np.where(inside, big_m, m)  # keeps comb() finite where m > M
    t = p1 * special.comb(k, m - 1) * plus ** (m - 1) * (1 - plus) ** (k - m + 1)
    t = t + q1 * special.comb(k, m) * minus**m * (1 - minus) ** (k - m)
    e = m * psi / (m * psi + k - m + 1)
    return np.where(inside, t, 0.0), e, np.where(inside, m / (k + 1), 0.0)


class MatchedCaseControl(StudyDesign):
    """Matched case-control study, 1:M; effect = odds ratio.

    Parameters
    ----------
    correlation : float
        Correlation of exposure between a case and a matched control, in
        [0, 1) (Dupont's ``phi``); default 0.
    """

    name = "matched-case-control"
    title = "Case-control study, matched 1:M (odds ratio)"
    effect_name = "odds ratio"
    baseline_name = "exposure prevalence among controls"
    size_name = "matched sets (cases)"
    groups = 2
    allocation_name = "controls matched to each case"
    comparison_name = "controls"
    uses_years = False
    binomial_groups = False
    exact_test = "binomial"
    count_words = ("pairs with only the case exposed", "discordant pairs")
    normal_method = "normal approximation for matched sets (Dupont 1988)"
    exact_method = "exact McNemar test, binomial on the discordant pairs"
    effect_limit_reason = "with a correlation phi of exposure within sets the odds ratio must stay below 1/phi**2"
    no_exact_reason = (
        "exact power is offered for 1:1 matching only (one control per case); with more "
        "controls per case Dupont's normal method runs"
    )
    settings = {"correlation": "correlation of exposure between a case and a matched control, in [0, 1)"}

    def __init__(self, correlation: float = 0.0) -> None:
        phi = float(as_float_array("design_settings.correlation", correlation))
        if not 0.0 <= phi < 1.0:
            raise DecideError(
                f"design_settings.correlation must be at least 0 and below 1, but got {phi:g}",
                ("design_settings.correlation",),
            )
        self.correlation = phi

    def configure(self, values: Mapping[str, Any]) -> StudyDesign:
        unknown = [k for k in values if k not in self.settings]
        if unknown:
            return super().configure({unknown[0]: values[unknown[0]]})
        return MatchedCaseControl(values.get("correlation", self.correlation))

    def setting_values(self) -> dict[str, float]:
        return {"correlation": self.correlation} if self.correlation else {}

    def check_baseline(self, baseline: FloatArray) -> None:
        open_unit("baseline", baseline)

    def check_allocation(self, allocation: FloatArray) -> None:
        bad = (allocation != np.round(allocation)) | (allocation < 1) | (allocation > MOST_CONTROLS)
        if bad.any():
            raise DecideError(
                f"allocation (controls per case) must be a whole number from 1 to {MOST_CONTROLS} "
                f"for the {self.name} design, but got {float(allocation[bad].flat[0]):g}",
                ("allocation",),
            )

    def exact_offered(self, allocation: FloatArray) -> NDArray[np.bool_]:
        return np.asarray(np.asarray(allocation) == 1)

    def effect_limit(self, baseline: FloatArray) -> FloatArray:
        top = np.inf if self.correlation == 0 else 1 / self.correlation**2
        return np.full_like(np.asarray(baseline, dtype=np.float64), top)

    def normal_moments(
        self,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
        continuity: bool,
    ) -> NormalMoments:
        t, e, share = set_probabilities(baseline, effect, allocation, self.correlation)
        shift = np.sum(t * (e - share), axis=-1)
        var_null = np.sum(t * share * (1 - share), axis=-1)  # m*(M-m+1)/(M+1)**2
        var_alt = np.sum(t * e * (1 - e), axis=-1)
        return NormalMoments(shift, np.sqrt(var_null), np.sqrt(var_alt), np.zeros_like(shift))

    def cell_counts(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> dict[str, FloatArray]:
        t, e, _ = set_probabilities(baseline, effect, allocation, self.correlation)
        return {
            "informative sets, case exposed": n * np.sum(t * e, axis=-1),
            "informative sets, case unexposed": n * np.sum(t * (1 - e), axis=-1),
        }

    def normal_statistic(
        self,
        exposed: FloatArray,
        other: FloatArray,
        n: FloatArray,
        baseline: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
        continuity: bool,
    ) -> tuple[FloatArray, FloatArray]:
        """Dupont's statistic from the discordant pairs of a 1:1 study: McNemar's ``(b - c) / sqrt(b + c)``.

        ``exposed`` pairs with only the case exposed, ``other`` with only the
        control: the exposed cases minus their expectation given the sets,
        ``(b - c) / 2``, over its null standard error ``sqrt(b + c) / 2``.
        ``nan`` with no discordant pair, and for more controls per case,
        whose statistic needs every set's exposure count.
        """
        b, c, m = np.broadcast_arrays(
            np.asarray(exposed, dtype=np.float64),
            np.asarray(other, dtype=np.float64),
            np.asarray(allocation, dtype=np.float64),
        )
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.where((b + c > 0) & (m == 1), (b - c) / np.sqrt(b + c), np.nan)
        return np.asarray(z), np.asarray(z)

    def count_model(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> CountModel:
        """The discordant pairs of a 1:1 study: only the case, or only the control, exposed."""
        p0 = baseline[:, None] if effect.ndim == 2 else baseline
        t_alt, e_alt, _ = set_probabilities(p0, effect, np.ones_like(p0), self.correlation)
        t_null, _, _ = set_probabilities(baseline, np.ones_like(baseline), np.ones_like(baseline), self.correlation)
        case_alt, control_alt = t_alt[..., 0] * e_alt[..., 0], t_alt[..., 0] * (1 - e_alt[..., 0])
        half = t_null[..., 0] / 2
        trials = np.broadcast_to(n[:, None], case_alt.shape) if effect.ndim == 2 else n
        trials = np.asarray(trials, dtype=np.float64)
        return CountModel(
            exposed_null=Marginal("binomial", n, half),
            exposed_alt=Marginal("binomial", trials, case_alt),
            other=Marginal("binomial", n, half),
            conditional="binomial",
            share_exposed=np.full_like(n, 0.5),
            other_alt=Marginal("binomial", trials, control_alt),
            units=n,
        )


DESIGN = MatchedCaseControl()
