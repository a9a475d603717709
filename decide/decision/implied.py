"""What a chosen test implies: the cost ratio it is optimal for, the effect it detects.

* :func:`implied_ratio_normal`: the ratio ``R`` of expected missed-hazard
  cost to false-alarm cost at which a normal test's critical value is
  loss-optimal for its size: the loss ``p R C(z) ... - (1 - p) A(z)`` is
  stationary there, so ``R = (1 - p) A'(z) / (p C'(z))`` with ``A`` the
  attained alpha and ``C`` the share of the expected missed-hazard cost the
  test catches.
* :func:`implied_ratio_exact`: an exact test is one of finitely many, so it is
  loss-optimal for a whole range of ratios (an interval with ends
  ``low <= high``, possibly up to infinity), read off the upper concave hull
  of the attainable tests' points ``(A, C)``.
* :func:`detectable_effect`: the smallest effect above 1 the test detects
  with a given power, for every alpha.

References
----------
.. [1] Berger, J. O. (1985). *Statistical Decision Theory and Bayesian
   Analysis*, 2nd ed., Springer, sec. 4.4.3 (Bayes tests; the likelihood
   ratio threshold ``(1 - p) F / (p M)``).
.. [2] Mudge, J. F., Baker, L. F., Edge, C. B. and Houlahan, J. E. (2012).
   *PLoS ONE* 7, e32734 (alpha chosen to minimise weighted errors).
.. [3] Boyd, S. and Vandenberghe, L. (2004). *Convex Optimization*,
   Cambridge University Press, sec. 3.3 (the conjugate, used for the hull).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ..designs import StudyDesign
from ..designs._base import FloatArray
from ..engine.power import evaluate
from ..engine.solve import effect_cap, solve
from ..engine.study import Setting
from ..errors import ApproximationWarning, DecideError
from .loss import MISSED, LossModel, OperatingPoint, exact_batches, minimise_on, normal_at


@dataclass(frozen=True)
class ImpliedRange:
    """The cost ratios (miss : false alarm) at which an exact test is loss-optimal.

    ``low <= high``; ``high`` may be infinite.  ``dominated`` is true when
    the test lies below the hull of attainable tests (a randomised mix of its
    neighbours would beat it for every ratio); it then gets the slope of the
    hull segment above it.
    """

    low: float
    high: float
    dominated: bool

    @property
    def point(self) -> float | None:
        """One number for the range (see :func:`ratio_point`)."""
        return ratio_point(self.low, self.high)


def ratio_point(low: float, high: float) -> float | None:
    """One number for a range of implied ratios: its geometric middle, or its finite end.

    Examples
    --------
    >>> ratio_point(4.0, 9.0), ratio_point(6.5, float("inf")), ratio_point(0.0, 3.0)
    (6.0, 6.5, None)
    """
    if 0 < low and np.isfinite(high):
        return float(np.sqrt(low * high))
    return low if low > 0 else None


def implied_ratio_normal(model: LossModel, n: float, z: float) -> float | None:
    """The cost ratio at which the normal test with critical value ``z`` is loss-optimal at size ``n``.

    The derivatives are central differences with step 1e-5 in ``z``.
    ``None`` where the prior puts no cost on a miss or the test catches
    nothing more as ``z`` falls.
    """
    p = model.problem
    if model.expected_missed <= 0:
        return None
    h = 1e-5
    c = normal_at(model, np.full(2, n), np.array([z - h, z + h]))
    d_att = c.attained[0] - c.attained[1]
    d_caught = (c.missed[1] - c.missed[0]) / model.expected_missed
    if d_caught <= 0:
        return None
    return float((1 - p.p_harm) * d_att / (p.p_harm * d_caught))


def implied_ratio_exact(model: LossModel, n: float, chosen: OperatingPoint) -> ImpliedRange | None:
    """Cost ratios at which a loss-minimiser would pick an exact test of this attained size.

    The attainable tests at size ``n`` are points (attained alpha ``A``,
    caught hazard ``C``); for a cost ratio ``R`` the loss-optimal one
    maximises ``p R C - (1 - p) A``, so the optimal tests trace the upper
    concave hull of the points and ``R = (1 - p) / (p s)`` with ``s`` the
    hull's slope at ``A``.  At a hull vertex ``R`` spans an interval.  The
    hull value at ``A`` is found by its dual, ``min_s max_j (C_j - s A_j) + s A``.
    """
    if model.expected_missed <= 0:
        return None
    _, opts = next(exact_batches(model, np.array([n])))
    c, valid = opts.chars, opts.valid[0]
    total = float(model.weights[MISSED].sum())
    att, caught = c.attained[0][valid], (total - c.missed[0][valid]) / model.expected_missed
    a_star = float(chosen.attained)
    c_star = (total - chosen.missed) / model.expected_missed
    hull = _hull_at(att, caught, a_star)
    tol = 1e-12
    left, right = att < a_star - tol, att > a_star + tol
    with np.errstate(divide="ignore", invalid="ignore"):
        s_left = float(np.min((hull - caught[left]) / (a_star - att[left]))) if left.any() else np.inf
        s_right = float(np.max((caught[right] - hull) / (att[right] - a_star))) if right.any() else 0.0
    odds = (1 - model.problem.p_harm) / model.problem.p_harm
    lo = odds / s_left if s_left > 0 else np.inf
    hi = odds / s_right if s_right > 0 else np.inf
    return ImpliedRange(low=float(min(lo, hi)), high=float(max(lo, hi)), dominated=bool(c_star < hull - 1e-9))


def _hull_at(att: FloatArray, caught: FloatArray, a_star: float) -> float:
    """The upper concave hull of the points ``(att, caught)`` at ``a_star``, by its dual."""

    def dual(u: FloatArray) -> FloatArray:
        slope = np.exp(u)[..., None]
        return np.asarray(np.max(caught - slope * att, axis=-1) + slope[..., 0] * a_star)

    u = minimise_on(dual, np.array([-40.0]), np.array([40.0]), points=33)  # convex in the slope
    return float(dual(u)[0])


def detectable_effect(model: LossModel, alpha: float, n: float, exact: bool, level: float = 0.8) -> float | None:
    """The smallest effect above 1 that the chosen test detects with power ``level``.

    Found for every alpha: where the test already flags with probability
    ``level`` or more when the exposure is harmless, every harmful effect is
    detected and the answer is 1.  ``None`` where no effect up to the
    design's cap is detected.
    """
    s = model.setting
    study = model.problem.study
    allocation, years = s.design.applicable(study.allocation, study.years)
    return _detectable(
        s.design, study.baseline, allocation, years, s.sides, s.continuity, float(alpha), int(n), exact, level
    )


@lru_cache(maxsize=256)
def _detectable(
    design: StudyDesign,
    baseline: float,
    allocation: float | None,
    years: float | None,
    sides: int,
    continuity: bool,
    alpha: float,
    n: int,
    exact: bool,
    level: float,
) -> float | None:
    """Cached: the policies of one comparison often share a study."""
    from ..engine.study import check_setting

    test = "exact" if exact else "normal"
    setting = check_setting(design, baseline, allocation, years, sides, test, continuity)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ApproximationWarning)  # the decision notes it instead
        if _power_at(setting, alpha, n, np.zeros(1))[0] >= level:
            return 1.0
        if alpha < level:
            try:
                return solve(
                    design,
                    baseline=baseline,
                    alpha=alpha,
                    power=level,
                    n_per_group=n,
                    allocation=allocation,
                    years=years,
                    sides=sides,
                    test=test,
                    continuity=continuity,
                ).effect
            except DecideError:
                return None
        return _bracket_effect(setting, alpha, n, level)


def _power_at(setting: Setting, alpha: float, n: int, log_effect: FloatArray) -> FloatArray:
    res = evaluate(setting, np.asarray(alpha), np.asarray(float(n)), np.exp(log_effect))
    return np.asarray(res.power, dtype=np.float64)


def _bracket_effect(setting: Setting, alpha: float, n: int, level: float) -> float | None:
    """The effect reaching ``level`` by bracketing in the log effect (alpha at or above ``level``).

    Power rises with the effect above 1; 31 points a round narrow the
    bracket 32-fold, six rounds to a relative width below 1e-9.
    """
    top = float(np.log(effect_cap(setting)))
    if _power_at(setting, alpha, n, np.array([top]))[0] < level:
        return None
    lo, hi = 0.0, top
    for _ in range(6):
        x = np.linspace(lo, hi, 33)[1:-1]
        above = _power_at(setting, alpha, n, x) >= level
        k = int(np.argmax(above)) if above.any() else x.size
        hi = float(x[k]) if k < x.size else hi
        lo = float(x[k - 1]) if k > 0 else lo
    return float(np.exp(hi))
