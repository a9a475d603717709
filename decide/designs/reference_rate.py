"""One exposed cohort against a known external rate (SIR / SMR study).

``n`` exposed subjects are each followed for ``years``; the baseline is the
reference incidence rate per person-year (from the general population), so
the expected count under no effect is ``E = baseline * n * years`` and the
effect is the standardised incidence ratio.

Exact test: the observed count ``O`` is Poisson; reject when
``P(Poisson(E) >= O) <= alpha``; exact power is ``P(Poisson(SIR*E) >= c)``.
Normal test (the fast path): the square-root transform,
``2*(sqrt(O) - sqrt(E))`` approximately standard normal under no effect,
which gives ``E = (z_a + z_b)**2 / (4*(sqrt(SIR) - 1)**2)``.

References
----------
.. [1] Breslow, N. E. and Day, N. E. (1987). *Statistical Methods in Cancer
   Research, vol. II: The Design and Analysis of Cohort Studies*. IARC
   Scientific Publications 82, Lyon, ch. 7.
.. [2] Samuels, S. J., Beaumont, J. J. and Breslow, N. E. (1991). Power and
   detectable risk of seven tests for standardized mortality ratios.
   *Am. J. Epidemiol.* 133, 1191-1197.
"""

from __future__ import annotations

import numpy as np

from .._checks import positive
from ._base import CountModel, FloatArray, Marginal, NormalMoments, StudyDesign


class ReferenceRate(StudyDesign):
    """Exposed cohort against a known reference rate; effect = SIR."""

    name = "reference-rate"
    title = "Cohort against a known reference rate (standardised incidence ratio)"
    effect_name = "standardised incidence ratio"
    baseline_name = "reference incidence rate per person-year"
    size_name = "exposed subjects"
    groups = 1
    allocation_name = None
    comparison_name = None
    uses_years = True
    binomial_groups = False
    exact_test = "poisson"
    count_words = ("cases", None)
    normal_method = "normal approximation, square-root transform of the Poisson count"
    exact_method = "exact Poisson test against the expected count"

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
        sd = 1 / (2 * np.sqrt(years * baseline))
        shift, sd = np.broadcast_arrays(np.sqrt(effect) - 1, sd)
        return NormalMoments(shift, sd, sd, np.zeros_like(shift))

    def cell_counts(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> dict[str, FloatArray]:
        expected = baseline * n * years
        return {"exposed cases": effect * expected, "expected at the reference rate": expected}

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
        """``2 * (sqrt(O) - sqrt(E))``, the square-root transform of the observed count."""
        z = np.asarray(2 * (np.sqrt(exposed) - np.sqrt(baseline * n * years)), dtype=np.float64)
        return z, z

    def count_model(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> CountModel:
        expected = baseline * n * years
        alt_mean = effect * (expected[:, None] if effect.ndim == 2 else expected)
        return CountModel(
            exposed_null=Marginal("poisson", np.full_like(expected, np.nan), expected),
            exposed_alt=Marginal("poisson", np.full_like(alt_mean, np.nan), alt_mean),
            other=None,
            conditional="poisson",
            reference_mean=expected,
        )


DESIGN = ReferenceRate()
