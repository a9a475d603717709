"""Shared pieces of the two designs that compare two binomial proportions.

Both the cumulative-incidence cohort (risk ratio) and the unmatched
case-control study (odds ratio) compare a proportion ``p1`` in a first group
of ``n`` subjects with ``p0`` in a second group of ``r * n``; only the
mapping from the effect to ``p1`` differs.

References
----------
.. [1] Fleiss, J. L., Levin, B. and Paik, M. C. (2003). *Statistical Methods
   for Rates and Proportions*, 3rd ed., Wiley, sec. 4.2.
.. [2] Casagrande, J. T., Pike, M. C. and Smith, P. G. (1978). An improved
   approximate formula for calculating sample sizes for comparing two
   binomial distributions. *Biometrics* 34, 483-486.
.. [3] Fleiss, J. L., Tytun, A. and Ury, H. K. (1980). A simple approximation
   for calculating sample sizes for comparing independent proportions.
   *Biometrics* 36, 343-346.
"""

from __future__ import annotations

import numpy as np

from ._base import CountModel, FloatArray, Marginal, NormalMoments


def normal_moments(p1: FloatArray, p0: FloatArray, ratio: FloatArray, continuity: bool) -> NormalMoments:
    """Moments of ``p1_hat - p0_hat`` per subject of the first group.

    Pooled variance ``pbar*qbar*(1 + 1/r)`` under no effect, with
    ``pbar = (p1 + r*p0)/(1 + r)``; unpooled ``p1*q1 + p0*q0/r`` under the
    effect; continuity correction ``(1 + 1/r)/2`` when asked for.
    """
    p1, p0, ratio = np.broadcast_arrays(p1, p0, ratio)
    pooled = (p1 + ratio * p0) / (1 + ratio)
    sd_null = np.sqrt(pooled * (1 - pooled) * (1 + 1 / ratio))
    sd_alt = np.sqrt(p1 * (1 - p1) + p0 * (1 - p0) / ratio)
    correction = (1 + 1 / ratio) / 2 if continuity else np.zeros_like(ratio)
    return NormalMoments(p1 - p0, sd_null, sd_alt, np.asarray(correction, dtype=np.float64))


def count_model(n1: FloatArray, n0: FloatArray, p1: FloatArray, p0: FloatArray) -> CountModel:
    """Two independent binomial counts and Fisher's exact test.

    ``p1`` may carry a trailing axis of effects; ``n1``, ``n0`` and ``p0``
    are one value per study.
    """
    trials = np.broadcast_to(n1[:, None], p1.shape) if p1.ndim == 2 else n1
    return CountModel(
        exposed_null=Marginal("binomial", n1, p0),
        exposed_alt=Marginal("binomial", np.asarray(trials, dtype=np.float64), p1),
        other=Marginal("binomial", n0, p0),
        conditional="fisher",
        n_exposed=n1,
        n_other=n0,
    )


def normal_statistic(
    x1: FloatArray, x0: FloatArray, n1: FloatArray, n0: FloatArray, continuity: bool
) -> tuple[FloatArray, FloatArray]:
    """``(p1_hat - p0_hat -+ c) / se0`` from observed counts, pooled null standard error.

    ``se0 = sqrt(pbar*(1 - pbar)*(1/n1 + 1/n0))`` with ``pbar`` the pooled
    proportion; ``c = (1/n1 + 1/n0)/2`` when continuity-corrected.  ``nan``
    where ``pbar`` is 0 or 1.
    """
    inv = 1 / n1 + 1 / n0
    pooled = (x1 + x0) / (n1 + n0)
    se = np.sqrt(pooled * (1 - pooled) * inv)
    diff = x1 / n1 - x0 / n0
    c = inv / 2 if continuity else np.zeros_like(inv)
    with np.errstate(divide="ignore", invalid="ignore"):
        up = np.where(se > 0, (diff - c) / se, np.nan)
        down = np.where(se > 0, (diff + c) / se, np.nan)
    return np.asarray(up, dtype=np.float64), np.asarray(down, dtype=np.float64)
