"""Closed-form power and size for a normal test statistic.

All four designs reduce, under the normal approximation, to a statistic ``T``
with ``T ~ N(0, s0**2/n)`` under no effect and ``T ~ N(d, s1**2/n)`` under
the effect (:class:`~decide.designs._base.NormalMoments`).  The one-sided test
rejects when ``T - c/n > z_alpha * s0 / sqrt(n)``, with ``c`` the continuity
correction (zero unless asked for).

References
----------
.. [1] Fleiss, J. L., Levin, B. and Paik, M. C. (2003). *Statistical Methods
   for Rates and Proportions*, 3rd ed., Wiley, ch. 4 (pooled variance under
   the null, unpooled under the alternative).
.. [2] Fleiss, J. L., Tytun, A. and Ury, H. K. (1980). A simple approximation
   for calculating sample sizes for comparing independent proportions.
   *Biometrics* 36, 343-346 (the continuity-corrected size, which is the
   exact inverse of the corrected power used here).
"""

from __future__ import annotations

import numpy as np
from scipy import special

from ..designs._base import FloatArray, NormalMoments


def critical_z(alpha: FloatArray, sides: int) -> FloatArray:
    """Upper critical value of the standard normal for level ``alpha``."""
    return np.asarray(-special.ndtri(alpha / sides), dtype=np.float64)


def power(m: NormalMoments, n: FloatArray, alpha: FloatArray, sides: int) -> FloatArray:
    """Power of the normal test; two-sided power includes the far tail."""
    return power_at_z(m, n, critical_z(alpha, sides), sides)


def power_at_z(m: NormalMoments, n: FloatArray, z: FloatArray, sides: int) -> FloatArray:
    """Power of the normal test with critical value ``z`` (in null standard errors)."""
    root = np.sqrt(n)
    step = m.correction / root
    out = special.ndtr((m.shift * root - step - z * m.sd_null) / m.sd_alt)
    if sides == 2:
        out = out + special.ndtr((-m.shift * root - step - z * m.sd_null) / m.sd_alt)
    return np.asarray(out, dtype=np.float64)


def miss_at_z(m: NormalMoments, n: FloatArray, z: FloatArray, sides: int) -> FloatArray:
    """``1 - power_at_z``, computed without cancellation when power is near 1."""
    root = np.sqrt(n)
    step = m.correction / root
    out = special.ndtr(-(m.shift * root - step - z * m.sd_null) / m.sd_alt)
    if sides == 2:
        out = out - special.ndtr((-m.shift * root - step - z * m.sd_null) / m.sd_alt)
    return np.asarray(np.maximum(out, 0.0), dtype=np.float64)


def size(m: NormalMoments, alpha: FloatArray, target: FloatArray, sides: int) -> FloatArray:
    """Exposed subjects (continuous) for the target power, near tail only.

    ``n = ((z_a s0 + z_b s1) / d)**2``; with a continuity correction ``c``
    the corrected power inverts exactly to
    ``n_c = n/4 * (1 + sqrt(1 + 4 c / (d n)))**2`` (Fleiss, Tytun & Ury 1980).
    The far tail of a two-sided test is neglected, as in the published tables;
    it adds less than ``alpha/2`` of power.  Returns 0 where any size will do.
    """
    k = critical_z(alpha, sides) * m.sd_null + special.ndtri(target) * m.sd_alt
    k = np.maximum(k, 0.0)
    base = (k / m.shift) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        corrected = base / 4 * (1 + np.sqrt(1 + 4 * m.correction / (m.shift * base))) ** 2
    return np.asarray(np.where(m.correction > 0, np.where(base > 0, corrected, 0.0), base))


def alpha_for(m: NormalMoments, n: FloatArray, target: FloatArray, sides: int) -> FloatArray:
    """The significance level at which size ``n`` reaches the target power (near tail)."""
    root = np.sqrt(n)
    z = (m.shift * root - m.correction / root - special.ndtri(target) * m.sd_alt) / m.sd_null
    return np.asarray(sides * special.ndtr(-z), dtype=np.float64)
