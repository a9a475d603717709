"""The effect under harm: a point or a lognormal prior, and its quadrature.

References
----------
.. [1] O'Hagan, A., Stevens, J. W. and Campbell, M. J. (2005). Assurance in
   clinical trial design. *Pharm. Stat.* 4, 187-201 (power averaged over a
   prior on the effect).
.. [2] Davis, P. J. and Rabinowitz, P. (1984). *Methods of Numerical
   Integration*, 2nd ed., Academic Press, ch. 2 (compound Gauss-Legendre rules).
.. [3] Johnson, N. L., Kotz, S. and Balakrishnan, N. (1994). *Continuous
   Univariate Distributions*, vol. 1, 2nd ed., Wiley, ch. 13 (truncated normal
   distributions) and ch. 14 (lognormal distributions).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import special

from .. import _checks
from .._checks import at_most, non_negative, positive, probability, within
from ..designs._base import FloatArray
from ..errors import DecideError

#: Panels and Gauss-Legendre order of the quadrature used while optimising.
SEARCH_PANELS, ORDER = 16, 6
#: Half-width, in prior standard deviations, of the range integrated over;
#: the prior mass beyond is below 1e-13.
REACH = 7.5
#: The widest prior accepted: log-scale standard deviation.
LARGEST_LOG_SD = 10.0
#: Share of a lognormal prior at or below a ratio of 1 above which a decision
#: notes that the effect under harm leaves it out.
TRUNCATION_NOTED_ABOVE = 0.01


@lru_cache(maxsize=8)
def _legendre(order: int) -> tuple[FloatArray, FloatArray]:
    x, w = np.polynomial.legendre.leggauss(order)
    return x, w


def composite_rule(lo: float, hi: float, panels: int, breaks: tuple[float, ...] = ()) -> tuple[FloatArray, FloatArray]:
    """Nodes and weights of composite Gauss-Legendre on ``[lo, hi]``.

    Panel edges are equally spaced, plus ``breaks`` (points where the
    integrand has a kink), so each panel integrates a smooth piece.
    """
    edges = np.unique(np.concatenate([np.linspace(lo, hi, panels + 1), [b for b in breaks if lo < b < hi]]))
    x, w = _legendre(ORDER)
    half = np.diff(edges)[:, None] / 2
    mid = (edges[:-1] + edges[1:])[:, None] / 2
    return (mid + half * x).ravel(), (half * w).ravel()


@dataclass(frozen=True)
class EffectPrior:
    """The effect (risk, rate or odds ratio, or SIR) if the exposure is harmful.

    ``log_sd == 0`` is a point effect.  Otherwise the effect is lognormal with
    median ``median`` and log-scale standard deviation ``log_sd``.

    The *design effect* is the median: the effect that power targets of
    conventional policies refer to.  ``entered`` keeps the central interval
    ``(low, high, level)`` a lognormal prior was given by, so that it can be
    shown back as entered.

    Notes
    -----
    The prior describes the effect *if the exposure is harmful*, so a ratio
    at or below 1 is no harm.  A lognormal stated by its median and spread may
    still put some mass there; the effect under harm is then the lognormal
    conditioned on a ratio above 1, that is truncated at 1 and renormalised
    (:attr:`truncated_share` is the mass left out).  :meth:`nodes` integrates
    that conditional law; :meth:`quantile` and :meth:`mass_below` describe the
    lognormal as stated.
    """

    median: float
    log_sd: float = 0.0
    entered: tuple[float, float, float] | None = None

    def __post_init__(self) -> None:
        median = positive("effect.median", _checks.scalar("effect.median", self.median))
        within("effect.median", median, *_checks.EFFECT_RANGE)
        log_sd = non_negative("effect.log_sd", _checks.scalar("effect.log_sd", self.log_sd))
        at_most("effect.log_sd", log_sd, LARGEST_LOG_SD, "a spread of more than a factor e^10 per standard deviation")

    @classmethod
    def point(cls, ratio: float) -> EffectPrior:
        """A single effect, above 1 (the effect if harmful)."""
        r = float(positive("effect.ratio", _checks.scalar("effect.ratio", ratio)))
        if r <= 1:
            raise DecideError(
                f"effect.ratio must be above 1 (the effect if harmful), but got {_checks.show(r)}", ("effect.ratio",)
            )
        at_most("effect.ratio", np.asarray(r), _checks.EFFECT_RANGE[1], "the largest effect decide considers")
        return cls(r)

    @classmethod
    def from_interval(cls, low: float, high: float, level: float, median: float | None = None) -> EffectPrior:
        """Lognormal whose central ``level`` interval is ``[low, high]``.

        ``log_sd = (ln high - ln low) / (2 z)``, ``z = Phi^-1((1 + level)/2)``;
        the median defaults to the geometric mean of ``low`` and ``high``.
        """
        top = _checks.EFFECT_RANGE[1]
        lo = float(
            at_most(
                "effect.low",
                positive("effect.low", _checks.scalar("effect.low", low)),
                top,
                "the largest effect decide considers",
            )
        )
        hi = float(
            at_most(
                "effect.high",
                positive("effect.high", _checks.scalar("effect.high", high)),
                top,
                "the largest effect decide considers",
            )
        )
        lev = float(probability("effect.level", _checks.scalar("effect.level", level)))
        if hi <= lo:
            raise DecideError(
                f"effect.high must be above effect.low ({lo:g}), but got {_checks.show(hi)}",
                ("effect.high", "effect.low"),
            )
        z = float(special.ndtri((1 + lev) / 2))
        med = float(np.sqrt(lo * hi)) if median is None else float(positive("effect.median", median))
        if not lo < med < hi:
            raise DecideError(
                f"effect.median must lie between effect.low and effect.high, but got {_checks.show(med)}",
                ("effect.median", "effect.low", "effect.high"),
            )
        return cls(med, float((np.log(hi) - np.log(lo)) / (2 * z)), (lo, hi, lev))

    def describe(self) -> str:
        """The prior in words, as it was entered."""
        if self.is_point:
            return f"{self.median:g}"
        if self.entered is not None:
            lo, hi, level = self.entered
            return f"lognormal, median {self.median:.3g}, {level * 100:g}% between {lo:g} and {hi:g}"
        return (
            f"lognormal, median {self.median:.3g}, 90% between {self.quantile(0.05):.3g} and {self.quantile(0.95):.3g}"
        )

    @property
    def is_point(self) -> bool:
        return self.log_sd == 0.0

    @property
    def truncated_share(self) -> float:
        """Share of the stated prior at or below a ratio of 1, left out of the effect under harm."""
        if self.is_point:
            return float(self.median <= 1.0)
        return float(special.ndtr(-np.log(self.median) / self.log_sd))

    def nodes(self, panels: int = SEARCH_PANELS, kink: float | None = None) -> tuple[FloatArray, FloatArray]:
        """Effects and weights that integrate functions of the effect under harm.

        Composite Gauss-Legendre in the standard normal variable ``u`` of
        ``log(effect) = log(median) + log_sd * u``, over ``|u| <= 7.5``
        (shifted up by ``log_sd``, where integrands grow with the effect),
        with a panel edge at ``kink`` (an effect where the integrand bends,
        such as a missed-hazard cost proportional to ``effect - 1``).  The
        range starts no lower than a ratio of 1 and the weights sum to 1: the
        prior truncated at 1 and renormalised (see the class notes).
        A point effect gives one node of weight 1.
        """
        if self.is_point:
            return np.array([self.median]), np.array([1.0])
        at_one = float(-np.log(self.median) / self.log_sd)
        lo = max(-REACH, at_one)
        hi = max(REACH, lo + REACH) + self.log_sd
        breaks = () if kink is None else (float(np.log(kink / self.median) / self.log_sd),)
        u, w = composite_rule(lo, hi, panels, breaks)
        w = w * np.exp(-u * u / 2) / np.sqrt(2 * np.pi)
        return self.median * np.exp(self.log_sd * u), w / w.sum()

    def quantile(self, q: float) -> float:
        """The effect below which the prior puts probability ``q``."""
        return float(self.median * np.exp(self.log_sd * special.ndtri(q)))

    def mass_below(self, effect: float) -> float:
        """Prior probability of an effect below ``effect``."""
        if self.is_point:
            return float(self.median < effect)
        return float(special.ndtr(np.log(effect / self.median) / self.log_sd))
