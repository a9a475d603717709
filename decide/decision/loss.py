"""Expected loss of a study and the operating characteristics behind it.

For a test with attained size ``a``, power ``P(theta)`` against effect
``theta`` and a study of ``n`` exposed subjects (or cases), the expected loss
is

    p_harm * E[(1 - P(theta)) * M(theta)] + (1 - p_harm) * a * F
    + per_subject * n_total + fixed,

the expectation over the effect prior (composite Gauss-Legendre), ``M`` the cost
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
from functools import cached_property

import numpy as np
from numpy.typing import NDArray
from scipy import special

from .._checks import EFFECT_RANGE
from ..designs._base import FloatArray, NormalMoments
from ..engine import exact as _exact
from ..engine import normal as _normal
from ..engine.selection import uses_exact
from ..engine.study import Setting
from .prior import SEARCH_PANELS, TRUNCATION_NOTED_ABOVE
from .problem import Problem

#: Rows of the weight matrix: cost-weighted, prior-averaged, at the design effect.
MISSED, AVERAGE, DESIGN = 0, 1, 2
#: Relative agreement at which the final quadrature stops refining.
SETTLE_TOL = 1e-9
#: Range of normal critical values searched (alpha from about 1 to 1e-300).
Z_RANGE = (-8.5, 37.0)


@dataclass(frozen=True)
class LossModel:
    """A problem prepared for fast evaluation.

    ``effects`` holds the prior's quadrature nodes followed by the design
    effect; ``weights`` (3 x nodes) turns per-effect probabilities into
    cost-weighted sums over the prior (row ``MISSED``, applied to miss
    probabilities), prior averages (``AVERAGE``) and values at the design
    effect (``DESIGN``).  ``expected_missed`` is ``E[M(effect)]``, integrated
    to :data:`SETTLE_TOL`.  Every expectation is over the effect under harm,
    the prior truncated to ratios above 1 (:class:`~decide.decision.prior.EffectPrior`);
    ``notes`` says so when that leaves out more than 1 % of the stated prior.
    """

    problem: Problem
    setting: Setting
    effects: FloatArray
    weights: FloatArray
    expected_missed: float
    notes: tuple[str, ...] = ()

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

    def error_loss(self, attained: FloatArray, missed: FloatArray) -> FloatArray:
        """Expected loss from the two errors (no study cost).

        ``missed`` is the cost-weighted miss probability ``E[M (1 - P)]``.
        """
        p = self.problem
        return np.asarray(p.p_harm * missed + (1 - p.p_harm) * p.consequences.false_alarm * attained)

    @property
    def kink(self) -> float | None:
        """The effect where a derived missed-hazard cost bends (1), if any."""
        return 1.0 if self.problem.consequences.is_derived else None

    def prior_nodes(self, panels: int) -> tuple[FloatArray, FloatArray]:
        """Quadrature nodes kept below the design's effect limit, and weights."""
        nodes, w = self.problem.effect.nodes(panels, self.kink)
        limit = float(self.setting.design.effect_limit(self.setting.baseline))
        low, high = EFFECT_RANGE  # nodes beyond carry less than 1e-6 of the mass (checked by Problem)
        return np.clip(nodes, low, min(limit * (1 - 1e-9), high)), w

    @cached_property
    def normal_moments(self) -> tuple[NormalMoments, NormalMoments]:
        """Moments of the normal statistic at ``effects`` and under no effect (computed once)."""
        s = self.setting
        m = s.design.normal_moments(s.baseline, self.effects, s.allocation, s.years, s.continuity)
        return m, s.design.normal_moments(s.baseline, np.ones(1), s.allocation, s.years, s.continuity)

    def uses_exact(self, n: FloatArray) -> NDArray[np.bool_]:
        """Where the test at size ``n`` is exact (see :func:`decide.engine.selection.uses_exact`)."""
        return uses_exact(self.setting, n, np.full(np.shape(n), self.effects[-1]))


def build_model(problem: Problem) -> LossModel:
    """Quadrature nodes, missed-hazard costs and weights for a problem."""
    model = LossModel(
        problem=problem,
        setting=problem.study.setting(),
        effects=np.zeros(0),
        weights=np.zeros((3, 0)),
        expected_missed=0.0,
    )
    nodes, w = model.prior_nodes(SEARCH_PANELS)
    missed = problem.consequences.missed_cost(nodes)
    effects = np.append(nodes, problem.effect.median)
    q = nodes.size
    weights = np.zeros((3, q + 1))
    weights[MISSED, :q] = w * missed
    weights[AVERAGE, :q] = w
    weights[DESIGN, q] = 1.0

    def expected(panels: int) -> FloatArray:
        x, v = model.prior_nodes(panels)
        return np.array([np.dot(v, problem.consequences.missed_cost(x))])

    return LossModel(
        problem=problem,
        setting=model.setting,
        effects=effects,
        weights=weights,
        expected_missed=float(_refine(expected)[0]),
        notes=_truncation_notes(problem),
    )


def _truncation_notes(problem: Problem) -> tuple[str, ...]:
    share = problem.effect.truncated_share
    if problem.effect.is_point or share <= TRUNCATION_NOTED_ABOVE:
        return ()
    return (
        f"the effect prior puts {100 * share:.3g} % of its mass at or below a ratio of 1, which is no harm: "
        "the effect under harm is taken as the prior above 1, rescaled to sum to 1",
    )


def _refine(integral: Callable[[int], FloatArray]) -> FloatArray:
    """Double the quadrature panels until the integrals agree to :data:`SETTLE_TOL`."""
    panels = 2 * SEARCH_PANELS
    last = integral(panels)
    while panels < 1024:
        panels *= 2
        now = integral(panels)
        if np.all(np.abs(now - last) <= SETTLE_TOL * np.maximum(np.abs(now), 1e-300)):
            return now
        last = now
    return last


@dataclass(frozen=True)
class Characteristics:
    """Operating characteristics of tests, in arrays of one shape.

    ``missed`` is the cost-weighted probability of missing a real hazard,
    ``E[(1 - P(theta)) * M(theta)]``; ``power`` is averaged over the prior
    and ``design_power`` taken at the design effect.
    """

    nominal: FloatArray
    attained: FloatArray
    power: FloatArray
    design_power: FloatArray
    missed: FloatArray

    def at(self, i: int) -> OperatingPoint:
        """The characteristics of the ``i``-th test, as numbers."""
        return OperatingPoint(**{f: float(np.ravel(getattr(self, f))[i]) for f in _FIELDS})


_FIELDS = ("nominal", "attained", "power", "design_power", "missed")


@dataclass(frozen=True)
class OperatingPoint:
    """The characteristics of one test (see :class:`Characteristics`)."""

    nominal: float
    attained: float
    power: float
    design_power: float
    missed: float


# --------------------------------------------------------------------------
# normal tests, by critical value


def normal_at(model: LossModel, n: FloatArray, z: FloatArray) -> Characteristics:
    """Characteristics of the normal test with critical value ``z`` at size ``n``."""
    s = model.setting
    m, m0 = model.normal_moments
    nn, zz = np.broadcast_arrays(np.asarray(n, dtype=np.float64), np.asarray(z, dtype=np.float64))
    pw = _normal.power_at_z(m, nn[..., None], zz[..., None], s.sides) @ model.weights.T
    miss = _normal.miss_at_z(m, nn[..., None], zz[..., None], s.sides) @ model.weights[MISSED]
    attained = _normal.power_at_z(m0, nn[..., None], zz[..., None], s.sides)[..., 0]
    nominal = s.sides * special.ndtr(-zz)
    return Characteristics(
        nominal=np.asarray(nominal),
        attained=np.asarray(attained),
        power=pw[..., AVERAGE],
        design_power=pw[..., DESIGN],
        missed=miss,
    )


#: Width of the bracket at which :func:`root_decreasing` stops (critical values are of order 1-10).
ROOT_XTOL = 1e-13


def root_decreasing(
    g: Callable[[FloatArray], FloatArray], lo: FloatArray, hi: FloatArray, xtol: float = ROOT_XTOL
) -> FloatArray:
    """Root of ``g`` (decreasing in its argument) in ``[lo, hi]``, row by row.

    The Illinois method: regula falsi on the bracket, halving the value kept
    at an end that stays twice running, with a bisection step every third
    step so that the bracket at least halves every three evaluations.  Rows
    where ``g`` does not change sign get the end a bisection would approach:
    ``hi`` where ``g > 0`` throughout, ``lo`` where ``g <= 0``.  Stops when
    every bracket is narrower than ``xtol`` (or a row hits its root exactly).

    References
    ----------
    .. [1] Dowell, M. and Jarratt, P. (1971). A modified regula falsi method
       for computing the root of an equation. *BIT* 11, 168-174.
    """
    lo, hi = np.array(lo, dtype=np.float64), np.array(hi, dtype=np.float64)
    glo, ghi = np.asarray(g(lo), dtype=np.float64), np.asarray(g(hi), dtype=np.float64)
    root = np.where(ghi > 0, hi, lo)  # no sign change: the end bisection would approach
    active = (glo > 0) & (ghi <= 0) & (hi - lo > xtol)
    kept = np.zeros(lo.shape, dtype=np.int8)  # which end stayed at the last step: -1 lo, +1 hi
    step = 0
    while active.any() and step < 200:
        with np.errstate(invalid="ignore", divide="ignore"):
            x = (lo * ghi - hi * glo) / (ghi - glo)
        bisect = (step % 3 == 2) | ~np.isfinite(x) | (x <= lo) | (x >= hi)
        x = np.where(bisect, (lo + hi) / 2, x)
        x = np.where(active, x, root)
        gx = np.asarray(g(x), dtype=np.float64)
        right = active & (gx > 0)  # the root lies above x: lo moves, hi stays
        left = active & ~(gx > 0)
        ghi = np.where(right & (kept == 1) & ~bisect, ghi / 2, ghi)
        glo = np.where(left & (kept == -1) & ~bisect, glo / 2, glo)
        lo, glo = np.where(right, x, lo), np.where(right, gx, glo)
        hi, ghi = np.where(left, x, hi), np.where(left, gx, ghi)
        kept = np.where(right, 1, np.where(left, -1, kept)).astype(np.int8)
        exact = active & (gx == 0)
        root = np.where(exact, x, np.where(active, (lo + hi) / 2, root))
        active &= ~exact & (hi - lo > xtol)
        step += 1
    return np.asarray(root)


def minimise_on(f: Callable[[FloatArray], FloatArray], lo: FloatArray, hi: FloatArray, points: int = 129) -> FloatArray:
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


def exact_batches(
    model: LossModel, n: FloatArray, level: float | None = None
) -> Iterator[tuple[NDArray[np.int64], ExactOptions]]:
    """Exact options for sizes ``n``, in batches that keep memory bounded.

    With a ``level``, each size gets two options only: the test that never
    flags and the largest region of that level (all a rule with a fixed
    alpha can pick), summed directly instead of ordering every count pair.
    """
    s = model.setting
    d = s.design
    n = np.asarray(n, dtype=np.float64)
    ones = np.ones_like(n)
    effects = np.broadcast_to(model.effects, (n.size, model.effects.size))
    full = d.count_model(n, s.baseline * ones, effects, s.allocation * ones, s.years * ones)
    for idx in _exact.batches(full):
        grid = _exact.build_grid(_exact.take_rows(full, idx), s.sides)
        if level is None:
            yield idx, _options(_exact.rejection_path(grid, model.weights))
        else:
            yield idx, _level_options(grid, model.weights, level)


def _level_options(grid: _exact.CountGrid, weights: FloatArray, level: float) -> ExactOptions:
    """The never-flagging test and the level-``level`` test, as columns 0 and 1."""
    reject = grid.p_value <= level * (1 + _exact.REL_TOL)
    caught, kept = _exact.split_mass(grid, reject)
    flagged, missed = caught @ weights.T, kept @ weights.T  # (B, K): each weighting of the effects
    attained = np.minimum(np.einsum("bij,bij->b", _exact.null_mass(grid), reject), 1.0)
    nominal = np.max(np.where(reject, grid.p_value, 0.0), axis=(1, 2))
    never = np.zeros_like(attained)

    def columns(first: FloatArray, second: FloatArray) -> FloatArray:
        return np.stack([first, second], axis=1)

    chars = Characteristics(
        nominal=columns(never, nominal),
        attained=columns(never, attained),
        power=columns(never, np.minimum(flagged[:, AVERAGE], 1.0)),
        design_power=columns(never, np.minimum(flagged[:, DESIGN], 1.0)),
        missed=columns(flagged[:, MISSED] + missed[:, MISSED], missed[:, MISSED]),
    )
    attainable = reject.any(axis=(1, 2)) & (nominal >= _exact.ALPHA_FLOOR) & (nominal < 1)
    return ExactOptions(chars=chars, valid=columns(np.ones_like(attainable), attainable).astype(bool))


def _options(path: _exact.RejectionPath) -> ExactOptions:
    def lead(x: FloatArray) -> FloatArray:
        return np.concatenate([np.zeros_like(x[..., :1]), x], axis=-1)

    nominal = lead(path.p_value)
    valid = lead(path.last.astype(np.float64)).astype(bool) & (nominal >= _exact.ALPHA_FLOOR) & (nominal < 1)
    valid[:, 0] = True
    w = lead(path.weighted)
    total = path.weighted[:, MISSED, -1:] + path.kept[:, MISSED, -1:]
    missed = np.concatenate([total, path.kept[:, MISSED]], axis=-1)
    chars = Characteristics(
        nominal=nominal,
        attained=lead(path.null),
        power=np.minimum(w[:, AVERAGE], 1.0),
        design_power=np.minimum(w[:, DESIGN], 1.0),
        missed=missed,
    )
    return ExactOptions(chars=chars, valid=valid)


# --------------------------------------------------------------------------
# the chosen test, integrated over the prior to full accuracy


@dataclass(frozen=True)
class Settled:
    """Prior-averaged power and cost-weighted miss of one test, to :data:`SETTLE_TOL`."""

    power: float
    missed: float


def settle(model: LossModel, n: float, exact: bool, z: float, nominal: float) -> Settled:
    """Integrate the chosen test's power and miss over the prior to full accuracy.

    The search uses a fixed rule; the reported numbers come from doubling the
    panels until successive results agree to :data:`SETTLE_TOL`.
    """
    cost = model.problem.consequences

    def integral(panels: int) -> FloatArray:
        x, w = model.prior_nodes(panels) if panels else (model.effects[-1:], np.ones(1))
        power, miss = _power_and_miss(model, n, exact, z, nominal, x)
        return np.array([np.dot(w, power), np.dot(w * cost.missed_cost(x), miss)])

    out = integral(0) if model.problem.effect.is_point else _refine(integral)
    return Settled(power=float(out[0]), missed=float(out[1]))


def _power_and_miss(
    model: LossModel, n: float, exact: bool, z: float, nominal: float, effects: FloatArray
) -> tuple[FloatArray, FloatArray]:
    s = model.setting
    if not exact:
        m = s.design.normal_moments(s.baseline, effects, s.allocation, s.years, s.continuity)
        return _normal.power_at_z(m, np.asarray(n), np.asarray(z), s.sides), _normal.miss_at_z(
            m, np.asarray(n), np.asarray(z), s.sides
        )
    power, miss = np.ones(effects.size), np.zeros(effects.size)
    if nominal < _exact.ALPHA_FLOOR:  # the test that never flags
        return np.zeros(effects.size), np.ones(effects.size)
    order = np.argsort(effects)
    one = np.ones(1)
    for part in np.array_split(order, max(1, effects.size // 128)):
        e = effects[part][None, :]
        cm = s.design.count_model(n * one, s.baseline * one, e, s.allocation * one, s.years * one)
        grid = _exact.build_grid(cm, s.sides)
        caught, kept = _exact.split_mass(grid, grid.p_value <= nominal * (1 + _exact.REL_TOL))
        power[part], miss[part] = caught[0], kept[0]
        if miss[part].max() < 1e-16:  # larger effects are caught for certain
            later = order[np.searchsorted(effects[order], effects[part].max(), side="right") :]
            power[later], miss[later] = 1.0, 0.0
            break
    return power, miss
