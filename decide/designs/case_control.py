"""Unmatched case-control study; effect = odds ratio.

``n`` cases and ``allocation * n`` controls; the baseline is the exposure
prevalence among controls ``p0`` and the effect the odds ratio, so the
exposure prevalence among cases is ``p1 = OR*p0 / (1 + p0*(OR - 1))``.
The test compares the exposure proportions of cases and controls.

Normal test: the two-proportion form of Schlesselman (pooled variance under
no effect, unpooled under the effect; Fleiss, Levin & Paik), optionally
continuity-corrected.  Exact test: Fisher's exact test on the 2x2 table of
exposure by case status, conditional on the total exposed.

References
----------
.. [1] Schlesselman, J. J. (1974). Sample size requirements in cohort and
   case-control studies of disease. *Am. J. Epidemiol.* 99, 381-384.
.. [2] Schlesselman, J. J. (1982). *Case-Control Studies: Design, Conduct,
   Analysis*. Oxford University Press, ch. 6.
.. [3] Fleiss, J. L., Levin, B. and Paik, M. C. (2003). *Statistical Methods
   for Rates and Proportions*, 3rd ed., Wiley, ch. 4.
"""

from __future__ import annotations

import numpy as np

from .._checks import open_unit
from . import _two_proportions
from ._base import CountModel, FloatArray, NormalMoments, StudyDesign


def exposure_among_cases(odds_ratio: FloatArray, p0: FloatArray) -> FloatArray:
    """Exposure prevalence among cases for a given odds ratio."""
    return np.asarray(odds_ratio * p0 / (1 + p0 * (odds_ratio - 1)), dtype=np.float64)


class CaseControl(StudyDesign):
    """Unmatched case-control study; effect = odds ratio."""

    name = "case-control"
    title = "Case-control study, unmatched (odds ratio)"
    effect_name = "odds ratio"
    baseline_name = "exposure prevalence among controls"
    size_name = "cases"
    groups = 2
    allocation_name = "controls per case"
    comparison_name = "controls"
    uses_years = False
    binomial_groups = True
    exact_test = "fisher"
    count_words = ("exposed cases", "exposed subjects (cases and controls)")
    normal_method = "normal approximation, two proportions (Schlesselman form)"
    exact_method = "Fisher's exact test, conditional on the total exposed"

    def check_baseline(self, baseline: FloatArray) -> None:
        open_unit("baseline", baseline)

    def effect_limit(self, baseline: FloatArray) -> FloatArray:
        return np.full_like(baseline, np.inf)

    def normal_moments(
        self,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
        continuity: bool,
    ) -> NormalMoments:
        p1 = exposure_among_cases(effect, baseline)
        return _two_proportions.normal_moments(p1, baseline, allocation, continuity)

    def cell_counts(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> dict[str, FloatArray]:
        n0 = self.comparison_size(n, allocation)
        p1 = exposure_among_cases(effect, baseline)
        return {
            "exposed cases": n * p1,
            "exposed controls": n0 * baseline,
            "unexposed cases": n * (1 - p1),
            "unexposed controls": n0 * (1 - baseline),
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
        return _two_proportions.normal_statistic(exposed, other, n, self.comparison_size(n, allocation), continuity)

    def count_model(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> CountModel:
        p0 = baseline[:, None] if effect.ndim == 2 else baseline
        p1 = exposure_among_cases(effect, p0)
        return _two_proportions.count_model(n, self.comparison_size(n, allocation), p1, baseline)


DESIGN = CaseControl()
