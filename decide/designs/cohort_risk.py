"""Cohort study of cumulative incidence: exposed against unexposed, risk ratio.

``n`` exposed subjects and ``allocation * n`` unexposed subjects are followed
for the same period; the baseline is the risk of disease over that period in
the unexposed, and the effect is the risk ratio, so the exposed risk is
``effect * baseline`` (which must stay below 1).

Normal test: difference of two proportions, pooled variance under no effect
and unpooled under the effect, optionally continuity-corrected.  Exact test:
one-sided Fisher exact test, conditional on the total number of cases.

References
----------
.. [1] Fleiss, J. L., Levin, B. and Paik, M. C. (2003). *Statistical Methods
   for Rates and Proportions*, 3rd ed., Wiley, ch. 4.
.. [2] Schlesselman, J. J. (1974). Sample size requirements in cohort and
   case-control studies of disease. *Am. J. Epidemiol.* 99, 381-384.
.. [3] Fleiss, J. L., Tytun, A. and Ury, H. K. (1980). *Biometrics* 36, 343-346.
"""

from __future__ import annotations

import numpy as np

from .._checks import open_unit
from . import _two_proportions
from ._base import CountModel, FloatArray, NormalMoments, StudyDesign


class CohortRisk(StudyDesign):
    """Cumulative-incidence cohort; effect = risk ratio."""

    name = "cohort-risk"
    title = "Cohort study, cumulative incidence (risk ratio)"
    effect_name = "risk ratio"
    baseline_name = "risk over follow-up in the unexposed"
    size_name = "exposed subjects"
    groups = 2
    allocation_name = "unexposed subjects per exposed subject"
    comparison_name = "unexposed subjects"
    uses_years = False
    binomial_groups = True
    exact_test = "fisher"
    normal_method = "normal approximation, two proportions (pooled variance under H0)"
    exact_method = "Fisher's exact test, conditional on the total cases"

    def check_baseline(self, baseline: FloatArray) -> None:
        open_unit("baseline", baseline)

    def effect_limit(self, baseline: FloatArray) -> FloatArray:
        return np.asarray(1.0 / baseline, dtype=np.float64)

    def normal_moments(
        self,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
        continuity: bool,
    ) -> NormalMoments:
        return _two_proportions.normal_moments(effect * baseline, baseline, allocation, continuity)

    def cell_counts(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> dict[str, FloatArray]:
        n0 = self.comparison_size(n, allocation)
        p1 = effect * baseline
        return {
            "exposed cases": n * p1,
            "unexposed cases": n0 * baseline,
            "exposed non-cases": n * (1 - p1),
            "unexposed non-cases": n0 * (1 - baseline),
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
        p1 = effect * (baseline[:, None] if effect.ndim == 2 else baseline)
        return _two_proportions.count_model(n, self.comparison_size(n, allocation), p1, baseline)


DESIGN = CohortRisk()
