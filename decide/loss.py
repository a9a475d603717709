"""Expected loss of a study and the operating characteristics behind it.

For a test with attained size ``a``, power ``P(theta)`` against effect
``theta`` and a study of ``n`` exposed subjects (or cases), the expected loss
is

    p_harm * E[(1 - P(theta)) * M(theta)] + (1 - p_harm) * a * F
    + per_subject * n_total + fixed,

the expectation over the effect prior (Gauss-Hermite nodes), ``M`` the cost
of a missed hazard (constant or proportional to the excess cases) and ``F``
the cost of a false alarm.  Doing no study, one can flag now (loss
``(1 - p_harm) * F``) or clear now (loss ``p_harm * E[M]``).

Candidate tests are described on a common footing: for the normal test by
its critical value ``z``; for an exact test by the attainable critical
regions of the level-``alpha`` family (every distinct p-value is a
breakpoint), plus the test that never flags.

References
----------
.. [1] Raiffa, H. and Schlaifer, R. (1961). *Applied Statistical Decision
   Theory*. Harvard University Press (expected loss, value of sample
   information; from memory).
.. [2] Willan, A. R. and Pinto, E. M. (2005). The value of information and
   optimal clinical trial design. *Stat. Med.* 24, 1791-1806.
.. [3] Berger, J. O. (1985). *Statistical Decision Theory and Bayesian
   Analysis*, 2nd ed., Springer, ch. 4.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy import special

from ._study import Setting
from .designs import _exact, _normal
from .designs._base import FloatArray
from .power import choose_exact
from .problem import Problem

#: Rows of the weight matrix: cost-weighted, prior-averaged, at the design effect.
CAUGHT, AVERAGE, DESIGN = 0, 1, 2
#: Range of normal critical values searched (alpha from about 1 to 1e-300).
Z_RANGE = (-8.5, 37.0)


@dataclass(frozen=True)
class LossModel:
    """A problem prepared for fast evaluation.

    ``effects`` holds the prior's quadrature nodes followed by the design
    effect; ``weights`` (3 x nodes) turns per-effect power into the
    cost-weighted caught hazard, the prior-averaged power and the power at
    the design effect.
    """

    problem: Problem
    setting: Setting
    effects: FloatArray
    weights: FloatArray
    expected_missed: float

    @property
    def flag_now(self) -> float:
        """Loss of flagging the exposure without a study."""
        p = self.problem
        return (1 - p.p_harm) * p.consequences.false_alarm

    @property
    def clear_now(self) -> float:
        """Loss of clearing the exposure without a study."""
        return self.problem.p_harm * self.expected_missed

    def n_total(self, n: FloatArray) -> FloatArray:
        """Subjects in all groups."""
        d = self.setting.design
        return np.asarray(n + d.comparison_size(n, self.setting.allocation), dtype=np.float64)

    def study_cost(self, n: FloatArray) -> FloatArray:
        c = self.problem.consequences
        return np.asarray(c.fixed + c.per_subject * self.n_total(n), dtype=np.float64)

    def error_loss(self, attained: FloatArray, caught: FloatArray) -> FloatArray:
        """Expected loss from the two errors (no study cost)."""
        p = self.problem
        missed = p.p_harm * np.maximum(self.expected_missed - caught, 0.0)
        return np.asarray(missed + (1 - p.p_harm) * p.consequences.false_alarm * attained)

    def uses_exact(self, n: FloatArray) -> NDArray[np.bool_]:
        """Where the test at size ``n`` is exact (see :func:`decide.power.choose_exact`)."""
        s = self.setting
        if s.test == "normal":
            return np.zeros(np.shape(n), dtype=bool)
        design_effect = np.full(np.shape(n), self.effects[-1])
        smallest = s.design.smallest_expected_count(
            np.asarray(n, dtype=np.float64), s.baseline, design_effect, s.allocation, s.years
        )
        return choose_exact(s.test, smallest)


def build_model(problem: Problem) -> LossModel:
    """Quadrature nodes, missed-hazard costs and weights for a problem."""
    setting = problem.study.setting()
    nodes, w = problem.effect.nodes()
    limit = float(setting.design.effect_limit(setting.baseline))
    nodes = np.minimum(nodes, limit * (1 - 1e-9))
    missed = problem.consequences.missed_cost(nodes)
    effects = np.append(nodes, problem.effect.median)
    q = nodes.size
    weights = np.zeros((3, q + 1))
    weights[CAUGHT, :q] = w * missed
    weights[AVERAGE, :q] = w
    weights[DESIGN, q] = 1.0
    return LossModel(problem, setting, effects, weights, float(np.dot(w, missed)))


@dataclass(frozen=True)
class Characteristics:
    """Operating characteristics of tests, in arrays of one shape.

    ``caught`` is the cost-weighted probability of flagging a real hazard,
    ``E[P(theta) * M(theta)]``; ``power`` is averaged over the prior and
    ``design_power`` taken at the design effect.
    """

    nominal: FloatArray
    attained: FloatArray
    power: FloatArray
    design_power: FloatArray
    caught: FloatArray

    def at(self, i: int) -> OperatingPoint:
        """The characteristics of the ``i``-th test, as numbers."""
        return OperatingPoint(*(float(np.ravel(getattr(self, f))[i]) for f in _FIELDS))


_FIELDS = ("nominal", "attained", "power", "design_power", "caught")


@dataclass(frozen=True)
class OperatingPoint:
    """The characteristics of one test (see :class:`Characteristics`)."""

    nominal: float
    attained: float
    power: float
    design_power: float
    caught: float


# --------------------------------------------------------------------------
# normal tests, by critical value


def normal_at(model: LossModel, n: FloatArray, z: FloatArray) -> Characteristics:
    """Characteristics of the normal test with critical value ``z`` at size ``n``."""
    s = model.setting
    d = s.design
    m = d.normal_moments(s.baseline, model.effects, s.allocation, s.years, s.continuity)
    m0 = d.normal_moments(s.baseline, np.ones(1), s.allocation, s.years, s.continuity)
    nn, zz = np.broadcast_arrays(np.asarray(n, dtype=np.float64), np.asarray(z, dtype=np.float64))
    pw = _normal.power_at_z(m, nn[..., None], zz[..., None], s.sides)
    agg = pw @ model.weights.T
    attained = _normal.power_at_z(m0, nn[..., None], zz[..., None], s.sides)[..., 0]
    nominal = s.sides * special.ndtr(-zz)
    return Characteristics(
        np.asarray(nominal), np.asarray(attained), agg[..., AVERAGE], agg[..., DESIGN], agg[..., CAUGHT]
    )


def bisect_decreasing(
    g: Callable[[FloatArray], FloatArray], lo: FloatArray, hi: FloatArray, iterations: int = 64
) -> FloatArray:
    """Root of ``g`` (decreasing in its argument) in ``[lo, hi]``, row by row."""
    lo, hi = np.array(lo, dtype=np.float64), np.array(hi, dtype=np.float64)
    for _ in range(iterations):
        mid = (lo + hi) / 2
        pos = g(mid) > 0
        lo = np.where(pos, mid, lo)
        hi = np.where(pos, hi, mid)
    return (lo + hi) / 2


def minimise_on(
    f: Callable[[FloatArray], FloatArray], lo: FloatArray, hi: FloatArray, points: int = 129
) -> FloatArray:
    """Global minimiser of ``f`` on ``[lo, hi]`` row by row: a grid, then golden section.

    ``f`` takes arrays of shape ``(N, k)``.  The grid guards against several
    local minima; golden section polishes the best cell to 1e-10 of its width.
    """
    lo, hi = np.asarray(lo, dtype=np.float64), np.asarray(hi, dtype=np.float64)
    t = np.linspace(0.0, 1.0, points)
    x = lo[:, None] + (hi - lo)[:, None] * t
    k = np.argmin(f(x), axis=1)
    rows = np.arange(x.shape[0])
    a = x[rows, np.maximum(k - 1, 0)]
    b = x[rows, np.minimum(k + 1, points - 1)]
    g = (np.sqrt(5) - 1) / 2
    for _ in range(48):
        c = b - g * (b - a)
        e = a + g * (b - a)
        fc, fe = f(np.stack([c, e], axis=1)).T
        left = fc <= fe
        b = np.where(left, e, b)
        a = np.where(left, a, c)
    best = (a + b) / 2
    # keep the grid point if polishing did not beat it (flat or kinked losses)
    cand = np.stack([best, x[rows, k]], axis=1)
    return np.asarray(cand[rows, np.argmin(f(cand), axis=1)], dtype=np.float64)


# --------------------------------------------------------------------------
# exact tests, by attainable critical region


@dataclass(frozen=True)
class ExactOptions:
    """Every attainable level-alpha test at each size of a batch.

    Arrays are ``(B, K)``; column 0 is the test that never flags.  ``valid``
    marks attainable tests (the last of each run of tied p-values, with a
    nominal level in (0, 1)).
    """

    chars: Characteristics
    valid: NDArray[np.bool_]


def exact_batches(model: LossModel, n: FloatArray) -> Iterator[tuple[NDArray[np.int64], ExactOptions]]:
    """Exact options for sizes ``n``, in batches that keep memory bounded."""
    s = model.setting
    d = s.design
    n = np.asarray(n, dtype=np.float64)
    ones = np.ones_like(n)
    effects = np.broadcast_to(model.effects, (n.size, model.effects.size))
    full = d.count_model(n, s.baseline * ones, effects, s.allocation * ones, s.years * ones)
    for idx in _exact.batches(full):
        path = _exact.rejection_path(_exact.build_grid(_exact.take_rows(full, idx), s.sides), model.weights)
        yield idx, _options(path)


def _options(path: _exact.RejectionPath) -> ExactOptions:
    def lead(x: FloatArray) -> FloatArray:
        return np.concatenate([np.zeros_like(x[..., :1]), x], axis=-1)

    nominal = lead(path.p_value)
    valid = lead(path.last.astype(np.float64)).astype(bool) & (nominal >= _exact.ALPHA_FLOOR) & (nominal < 1)
    valid[:, 0] = True
    w = lead(path.weighted)
    chars = Characteristics(
        nominal,
        lead(path.null),
        np.minimum(w[:, AVERAGE], 1.0),
        np.minimum(w[:, DESIGN], 1.0),
        w[:, CAUGHT],
    )
    return ExactOptions(chars, valid)
