"""The effect under harm: a point or a lognormal prior, and its quadrature.

References
----------
.. [1] O'Hagan, A., Stevens, J. W. and Campbell, M. J. (2005). Assurance in
   clinical trial design. *Pharm. Stat.* 4, 187-201 (power averaged over a
   prior on the effect).
.. [2] Abramowitz, M. and Stegun, I. A. (1964). *Handbook of Mathematical
   Functions*, National Bureau of Standards, 25.4.46 (Gauss-Hermite rule).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import special

from ._checks import open_unit, positive
from .designs._base import FloatArray
from .errors import DecideError

#: Gauss-Hermite nodes used for a lognormal prior.
QUADRATURE_NODES = 64
#: Nodes whose weight is below this are dropped (their mass is negligible).
NODE_WEIGHT_FLOOR = 1e-14


@lru_cache(maxsize=8)
def _hermite(k: int) -> tuple[FloatArray, FloatArray]:
    x, w = np.polynomial.hermite.hermgauss(k)
    return x * np.sqrt(2.0), w / np.sqrt(np.pi)


@dataclass(frozen=True)
class EffectPrior:
    """The effect (risk, rate or odds ratio, or SIR) if the exposure is harmful.

    ``log_sd == 0`` is a point effect.  Otherwise the effect is lognormal with
    median ``median`` and log-scale standard deviation ``log_sd``.

    The *design effect* is the median: the effect that power targets of
    conventional policies refer to.
    """

    median: float
    log_sd: float = 0.0

    @classmethod
    def point(cls, ratio: float) -> EffectPrior:
        """A single effect."""
        return cls(float(positive("effect.ratio", ratio)))

    @classmethod
    def from_interval(
        cls, low: float, high: float, level: float, median: float | None = None
    ) -> EffectPrior:
        """Lognormal whose central ``level`` interval is ``[low, high]``.

        ``log_sd = (ln high - ln low) / (2 z)``, ``z = Phi^-1((1 + level)/2)``;
        the median defaults to the geometric mean of ``low`` and ``high``.
        """
        lo = float(positive("effect.low", low))
        hi = float(positive("effect.high", high))
        lev = float(open_unit("effect.level", level))
        if hi <= lo:
            raise DecideError(
                f"effect.high must be above effect.low, but got low {lo:g} and high {hi:g}",
                ("effect.high", "effect.low"),
            )
        z = float(special.ndtri((1 + lev) / 2))
        med = float(np.sqrt(lo * hi)) if median is None else float(positive("effect.median", median))
        if not lo < med < hi:
            raise DecideError(
                f"effect.median must lie between effect.low and effect.high, but got {med:g}",
                ("effect.median", "effect.low", "effect.high"),
            )
        return cls(med, float((np.log(hi) - np.log(lo)) / (2 * z)))

    @property
    def is_point(self) -> bool:
        return self.log_sd == 0.0

    def nodes(self, k: int = QUADRATURE_NODES) -> tuple[FloatArray, FloatArray]:
        """Effects and weights that integrate smooth functions of the effect.

        A point effect gives one node of weight 1.
        """
        if self.is_point:
            return np.array([self.median]), np.array([1.0])
        x, w = _hermite(k)
        keep = w >= NODE_WEIGHT_FLOOR
        x, w = x[keep], w[keep]
        return self.median * np.exp(self.log_sd * x), w / w.sum()

    def quantile(self, q: float) -> float:
        """The effect below which the prior puts probability ``q``."""
        return float(self.median * np.exp(self.log_sd * special.ndtri(q)))

    def mass_below(self, effect: float) -> float:
        """Prior probability of an effect below ``effect``."""
        if self.is_point:
            return float(self.median < effect)
        return float(special.ndtr(np.log(effect / self.median) / self.log_sd))
