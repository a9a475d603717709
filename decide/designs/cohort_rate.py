"""Cohort study with person-time: exposed against unexposed, rate ratio.

``n`` exposed subjects and ``allocation * n`` unexposed subjects are each
followed for ``years``, so the person-time is ``T1 = n*years`` and
``T0 = n0*years`` with ``n0 = allocation*n`` rounded to whole subjects.  The baseline is the incidence rate per
person-year in the unexposed and the effect the rate ratio.

Normal test: the log rate ratio, with its variance under no effect taken at
the expected total count (the score form) and under the effect unconstrained.
Exact test: given the total count ``N``, the exposed count is binomial with
share ``T1 / (T1 + T0)`` under no effect; exact power sums the conditional
test's power over the Poisson distribution of ``N``.

References
----------
.. [1] Przyborowski, J. and Wilenski, H. (1940). Homogeneity of results in
   testing samples from Poisson series. *Biometrika* 31, 313-323.
.. [2] Gail, M. (1974). Power computations for designing comparative Poisson
   trials. *Biometrics* 30, 231-237.
.. [3] Breslow, N. E. and Day, N. E. (1987). *Statistical Methods in Cancer
   Research, vol. II*. IARC Scientific Publications 82, ch. 7.
.. [4] Zhu, H. and Lakkis, H. (2014). Sample size calculation for comparing
   two negative binomial rates. *Stat. Med.* 33, 376-387 (the log-ratio
   normal form with the null variance, Poisson case).
"""

from __future__ import annotations

import numpy as np

from .._checks import positive
from ._base import CountModel, FloatArray, Marginal, NormalMoments, StudyDesign


class CohortRate(StudyDesign):
    """Person-time cohort; effect = rate ratio."""

    name = "cohort-rate"
    title = "Cohort study, person-time (rate ratio)"
    effect_name = "rate ratio"
    baseline_name = "incidence rate per person-year in the unexposed"
    size_name = "exposed subjects"
    groups = 2
    allocation_name = "unexposed subjects per exposed subject"
    comparison_name = "unexposed subjects"
    uses_years = True
    binomial_groups = False
    exact_test = "binomial"
    normal_method = "normal approximation, log rate ratio (null variance)"
    exact_method = "exact conditional binomial test of two Poisson rates"

    def check_baseline(self, baseline: FloatArray) -> None:
        positive("baseline", baseline)

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
        r = allocation
        rate1 = effect * baseline
        sd_null = (1 + r) / np.sqrt(r * years * (rate1 + r * baseline))
        sd_alt = np.sqrt(1 / (years * rate1) + 1 / (r * years * baseline))
        shift = np.log(effect)
        shift, sd_null, sd_alt = np.broadcast_arrays(shift, sd_null, sd_alt)
        return NormalMoments(shift, sd_null, sd_alt, np.zeros_like(shift))

    def cell_counts(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> dict[str, FloatArray]:
        return {
            "exposed cases": effect * baseline * n * years,
            "unexposed cases": baseline * self.comparison_size(n, allocation) * years,
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
        """``log(rate ratio) * sqrt(N pi (1 - pi))``, ``N`` the observed total, ``pi`` the exposed share.

        The null variance of the log rate ratio at the observed total, as the
        design formula takes it at the expected total.  With no case in either
        group the log rate ratio has no value: the statistic is ``nan`` and
        such counts never flag.
        """
        t1 = n * years
        t0 = self.comparison_size(n, allocation) * years
        share = t1 / (t1 + t0)
        with np.errstate(divide="ignore", invalid="ignore"):
            z = (np.log(exposed / t1) - np.log(other / t0)) * np.sqrt((exposed + other) * share * (1 - share))
        z = np.asarray(np.where((exposed > 0) & (other > 0), z, np.nan), dtype=np.float64)
        return z, z

    def count_model(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> CountModel:
        t1 = n * years
        t0 = self.comparison_size(n, allocation) * years
        mean1 = baseline * t1
        alt_mean = effect * (mean1[:, None] if effect.ndim == 2 else mean1)
        nan = np.full_like(mean1, np.nan)
        return CountModel(
            exposed_null=Marginal("poisson", nan, mean1),
            exposed_alt=Marginal("poisson", np.full_like(alt_mean, np.nan), alt_mean),
            other=Marginal("poisson", nan, baseline * t0),
            conditional="binomial",
            share_exposed=t1 / (t1 + t0),
        )


DESIGN = CohortRate()
