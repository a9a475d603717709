"""The loss-optimal design for many cost settings at once (normal tests).

The operating characteristics of a normal test (attained alpha, the
cost-weighted miss probability) depend on the study and the effect prior, not
on the prior probability of harm or on the costs.  So one prepared
:class:`~decide.decision.loss.LossModel` serves every setting of
``p_harm``, the missed-hazard cost (as a multiple of the model's), the
false-alarm cost and the per-subject cost: the loss of a test with critical
value ``z`` at size ``n`` is

    a_miss * miss(n, z) + a_fa * attained(n, z) + fixed + per_subject * n_total(n),

``a_miss = p_harm * scale`` and ``a_fa = (1 - p_harm) * false_alarm``.
:func:`batch_optimum` minimises it for arrays of settings: a table of the
characteristics on a grid of sizes and critical values, the best cell of each
row, then golden-section search in the size with the critical value
re-optimised inside, and the whole-subject sizes either side.  The tests check
it against :func:`decide.optimize` setting by setting.

References
----------
.. [1] Kiefer, J. (1953). Sequential minimax search for a maximum. *Proc.
   Amer. Math. Soc.* 4, 502-506 (golden-section search).
.. [2] Raiffa, H. and Schlaifer, R. (1961). *Applied Statistical Decision
   Theory*. Harvard University Press (from memory: the terminal loss is linear
   in the prior probability and the costs for a fixed design).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ..designs._base import FloatArray, NormalMoments
from ..engine import normal as _normal
from .loss import MISSED, Z_RANGE, LossModel, normal_at, root_decreasing

#: Sizes and critical values in the first table.
SIZE_POINTS, Z_POINTS = 81, 129
#: Rows of the table handled at once (bounds memory).
CHUNK = 256
_GOLDEN = (np.sqrt(5) - 1) / 2


@dataclass(frozen=True)
class BatchOptimum:
    """Loss-optimal normal tests for many settings (arrays of one length).

    ``feasible`` is False where no size within the constraints is allowed
    (the numbers there are NaN).  ``flag_now`` and ``clear_now`` are the
    losses of deciding without a study.
    """

    n: FloatArray
    z: FloatArray
    nominal: FloatArray
    attained: FloatArray
    power: FloatArray
    loss: FloatArray
    flag_now: FloatArray
    clear_now: FloatArray
    feasible: NDArray[np.bool_]


def normal_throughout(model: LossModel) -> bool:
    """Whether every size the optimiser might try runs the normal test."""
    lo = float(model.problem.constraints.min_n_per_group)
    sizes = np.geomspace(lo, max(lo, 1e9), 64)
    return not bool(model.uses_exact(sizes).any())


def _largest_sizes(model: LossModel, per_subject: FloatArray, flag: FloatArray, clear: FloatArray) -> FloatArray:
    """The largest size worth searching in each row (NaN where none is allowed or the search is unbounded)."""
    cons = model.problem.constraints
    fixed = model.problem.consequences.fixed
    lo = float(cons.min_n_per_group)
    per = per_subject * float(model.n_total(np.asarray(1e6))) / 1e6  # cost per exposed subject
    top = np.full(per.shape, np.inf if cons.max_n_per_group is None else float(cons.max_n_per_group))
    if cons.budget is not None:
        with np.errstate(divide="ignore"):
            guess = np.where(per > 0, np.floor((cons.budget - fixed) / per) + 2, np.inf)
        cand = np.asarray(np.clip(guess[:, None] - np.arange(5.0)[None, :], 1, 1e15), dtype=np.float64)
        cost = fixed + per_subject[:, None] * model.n_total(cand)
        ok = cost <= cons.budget * (1 + 1e-12)
        best = np.where(ok, cand, 0).max(axis=1)
        top = np.minimum(top, np.where(np.isfinite(guess), best, np.inf))
    study_lo = fixed + per_subject * float(model.n_total(np.asarray(lo)))
    with np.errstate(divide="ignore"):
        bound = np.where(per > 0, np.ceil((flag + clear + study_lo) / per) + 2, np.inf)
    hi = np.maximum(np.minimum(top, bound), lo)
    return np.where(np.isfinite(hi) & (top >= lo), hi, np.nan)


def _z_bounds(model: LossModel, n: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Critical values allowed at sizes ``n``: the alpha cap below, the power floor above."""
    s = model.setting
    cons = model.problem.constraints
    zlo = max(Z_RANGE[0], float(_normal.critical_z(np.asarray(1 - 1e-12), s.sides)))
    if cons.max_alpha < 1:
        zlo = max(zlo, float(_normal.critical_z(np.asarray(cons.max_alpha), s.sides)))
    lo = np.full(n.shape, zlo)
    hi = np.full(n.shape, Z_RANGE[1])
    if cons.min_power > 0:
        hi = root_decreasing(lambda z: normal_at(model, n, z).design_power - cons.min_power, lo, hi)
        hi = np.where(normal_at(model, n, lo).design_power >= cons.min_power - 1e-9, hi, np.nan)
    return lo, hi


def _moments(model: LossModel) -> tuple[NormalMoments, NormalMoments]:
    """Moments of the statistic under the model's effects and under no effect (computed once per model)."""
    key = id(model)
    if _MOMENTS.get(key, (None,))[0] is not model:
        s = model.setting
        d = s.design
        _MOMENTS.clear()
        _MOMENTS[key] = (
            model,
            d.normal_moments(s.baseline, model.effects, s.allocation, s.years, s.continuity),
            d.normal_moments(s.baseline, np.ones(1), s.allocation, s.years, s.continuity),
        )
    _, m, m0 = _MOMENTS[key]
    return m, m0


_MOMENTS: dict[int, tuple[LossModel, NormalMoments, NormalMoments]] = {}


def _error_loss(model: LossModel, a_miss: FloatArray, a_fa: FloatArray, n: FloatArray, z: FloatArray) -> FloatArray:
    """``a_miss * E[M (1 - P)] + a_fa * attained`` of the normal test (as :func:`normal_at`, moments reused)."""
    m, m0 = _moments(model)
    sides = model.setting.sides
    nn, zz = np.broadcast_arrays(np.asarray(n, dtype=np.float64), np.asarray(z, dtype=np.float64))
    miss = _normal.miss_at_z(m, nn[..., None], zz[..., None], sides) @ model.weights[MISSED]
    attained = _normal.power_at_z(m0, nn[..., None], zz[..., None], sides)[..., 0]
    return np.asarray(a_miss * miss + a_fa * attained)


def _best_z(
    model: LossModel, a_miss: FloatArray, a_fa: FloatArray, n: FloatArray, z0: FloatArray, width: float
) -> tuple[FloatArray, FloatArray]:
    """The critical value minimising the error loss at size ``n`` within ``width`` of ``z0``, and that loss.

    A grid of 9 points, then golden section on the best cell (to about 1e-6
    in ``z``, which leaves the loss within 1e-12 of its minimum).
    """
    lo, hi = _z_bounds(model, n)
    bad = ~np.isfinite(hi)
    hi = np.where(bad, lo, hi)
    a = np.clip(z0 - width, lo, hi)
    b = np.clip(z0 + width, lo, hi)
    t = np.linspace(0.0, 1.0, 9)
    grid = a[:, None] + (b - a)[:, None] * t
    values = _error_loss(model, a_miss[:, None], a_fa[:, None], n[:, None], grid)
    k = np.argmin(values, axis=1)
    rows = np.arange(n.size)
    a, b = grid[rows, np.maximum(k - 1, 0)], grid[rows, np.minimum(k + 1, 8)]
    for _ in range(22):
        c, d = b - _GOLDEN * (b - a), a + _GOLDEN * (b - a)
        fc, fd = _error_loss(model, a_miss[:, None], a_fa[:, None], n[:, None], np.stack([c, d], axis=1)).T
        left = fc <= fd
        a, b = np.where(left, a, c), np.where(left, d, b)
    z = (a + b) / 2
    loss = _error_loss(model, a_miss, a_fa, n, z)
    return z, np.where(bad, np.inf, loss)


def _table_start(
    model: LossModel, a_miss: FloatArray, a_fa: FloatArray, per: FloatArray, hi: FloatArray
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """The best cell of a size-by-critical-value table per row: a bracket in size and a start in z."""
    lo = float(model.problem.constraints.min_n_per_group)
    top = float(np.nanmax(hi))
    sizes = np.unique(np.round(np.geomspace(lo, max(lo, top), SIZE_POINTS)))
    zlo, zhi = _z_bounds(model, sizes)
    t = np.linspace(0.0, 1.0, Z_POINTS)
    zs = zlo[:, None] + (np.where(np.isfinite(zhi), zhi, zlo) - zlo)[:, None] * t
    c = normal_at(model, sizes[:, None], zs)
    att, miss = c.attained.ravel(), c.missed.ravel()
    allowed = np.repeat(np.isfinite(zhi), Z_POINTS)
    cost = np.repeat(model.n_total(sizes), Z_POINTS)
    size_of = np.repeat(sizes, Z_POINTS)
    best = np.empty(a_miss.size, dtype=np.int64)
    for s in range(0, a_miss.size, CHUNK):
        rows = slice(s, s + CHUNK)
        loss = a_miss[rows, None] * miss + a_fa[rows, None] * att + per[rows, None] * cost
        loss = np.where(allowed & (size_of <= hi[rows, None]), loss, np.inf)
        best[rows] = np.argmin(loss, axis=1)
    j, k = np.divmod(best, Z_POINTS)
    left = sizes[np.maximum(j - 1, 0)]
    right = np.minimum(sizes[np.minimum(j + 1, sizes.size - 1)], hi)
    return left, np.maximum(left, right), zs[j, k], sizes[j]


def _setting_rows(*settings: FloatArray) -> tuple[FloatArray, ...]:
    """The settings broadcast together and flattened, one row each."""
    return tuple(np.asarray(x, dtype=np.float64).ravel() for x in np.broadcast_arrays(*settings))


def _size_bracket(
    model: LossModel,
    a_miss: FloatArray,
    a_fa: FloatArray,
    per: FloatArray,
    hi: FloatArray,
    start: tuple[FloatArray, FloatArray] | None,
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Where the size search starts in each row: a bracket in size and a critical value.

    From the best cell of the table, or within 64 subjects of a given nearby optimum.
    """
    if start is None:
        left, right, z, _ = _table_start(model, a_miss, a_fa, per, hi)
        return left, right, z
    lo = float(model.problem.constraints.min_n_per_group)
    n0 = np.broadcast_to(np.asarray(start[0], dtype=np.float64), a_miss.shape)
    z = np.broadcast_to(np.asarray(start[1], dtype=np.float64), a_miss.shape)
    return np.clip(n0 - 64, lo, hi), np.clip(n0 + 64, lo, hi), z


def _whole_size_neighbours(
    model: LossModel,
    total: Callable[[FloatArray, FloatArray], tuple[FloatArray, FloatArray]],
    best: tuple[FloatArray, FloatArray, FloatArray],
    hi: FloatArray,
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Try the whole sizes around the best (size, critical value, loss) of each row; keep any better one.

    One step either way, or four when a comparison group of ``allocation * n``
    rounds (a fractional allocation).
    """
    n_best, z_best, f_best = best
    lo = float(model.problem.constraints.min_n_per_group)
    alloc = model.setting.allocation
    whole = model.setting.design.groups == 1 or float(alloc) == round(float(alloc))
    steps = (-1, 1) if whole else (-4, -3, -2, -1, 1, 2, 3, 4)
    for step in steps:
        cand = np.clip(n_best + step, lo, hi)
        zz, ff = total(cand, z_best)
        better = ff < f_best
        n_best, z_best, f_best = (
            np.where(better, cand, n_best),
            np.where(better, zz, z_best),
            np.where(better, ff, f_best),
        )
    return n_best, z_best, f_best


def batch_optimum(
    model: LossModel,
    p_harm: FloatArray,
    missed_scale: FloatArray,
    false_alarm: FloatArray,
    per_subject: FloatArray,
    *,
    start: tuple[FloatArray, FloatArray] | None = None,
) -> BatchOptimum:
    """Loss-optimal normal tests and sizes for arrays of settings.

    Parameters
    ----------
    model : LossModel
        The study and effect prior (its costs and ``p_harm`` are not used,
        except the fixed cost and the constraints).
    p_harm, missed_scale, false_alarm, per_subject : array_like
        One value per setting (broadcast together); ``missed_scale``
        multiplies the model's missed-hazard cost.
    start : (sizes, critical values), optional
        A nearby optimum (from neighbouring settings): the search then stays
        within 64 subjects and 0.25 in ``z`` of it instead of starting from the table.  For
        settings close to those of the start only; callers check the result.

    Returns
    -------
    BatchOptimum
    """
    p, scale, fa, per = _setting_rows(p_harm, missed_scale, false_alarm, per_subject)
    a_miss, a_fa = p * scale, (1 - p) * fa
    flag, clear = a_fa, a_miss * model.expected_missed
    hi = _largest_sizes(model, per, flag, clear)
    ok = np.isfinite(hi)
    hi_ = np.where(ok, hi, float(model.problem.constraints.min_n_per_group))
    left, right, z = _size_bracket(model, a_miss, a_fa, per, hi_, start)
    fixed = model.problem.consequences.fixed

    def total(n: FloatArray, z0: FloatArray) -> tuple[FloatArray, FloatArray]:
        zz, err = _best_z(model, a_miss, a_fa, n, z0, 0.5 if start is None else 0.25)
        return zz, err + fixed + per * model.n_total(n)

    best = _whole_size_neighbours(model, total, _golden_sizes(total, left, right, z), hi_)
    return _optimum(model, best, ok, flag, clear)


def _optimum(
    model: LossModel,
    best: tuple[FloatArray, FloatArray, FloatArray],
    ok: NDArray[np.bool_],
    flag: FloatArray,
    clear: FloatArray,
) -> BatchOptimum:
    """The best size, critical value and loss of each row with its characteristics (NaN where infeasible)."""
    best_n, best_z, best_f = best
    ch = normal_at(model, best_n, best_z)
    nan = np.where(ok & np.isfinite(best_f), 1.0, np.nan)
    return BatchOptimum(
        n=best_n * nan,
        z=best_z * nan,
        nominal=np.asarray(ch.nominal) * nan,
        attained=ch.attained * nan,
        power=ch.power * nan,
        loss=best_f * nan,
        flag_now=flag,
        clear_now=clear,
        feasible=np.asarray(ok & np.isfinite(best_f)),
    )


def _golden_sizes(
    total: Callable[[FloatArray, FloatArray], tuple[FloatArray, FloatArray]],
    a: FloatArray,
    b: FloatArray,
    z: FloatArray,
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Golden-section search on whole sizes in ``[a, b]`` row by row, to a bracket of 4."""
    a, b = np.round(a), np.round(b)
    c, d = b - np.round(_GOLDEN * (b - a)), a + np.round(_GOLDEN * (b - a))
    zc, fc = total(c, z)
    zd, fd = total(d, z)
    widest = float(np.max(b - a)) if a.size else 0.0
    steps = int(np.ceil(np.log(max(widest, 4.0) / 4.0) / np.log(1 / _GOLDEN))) + 1
    for _ in range(steps):
        left = fc <= fd
        a, b = np.where(left, a, c), np.where(left, d, b)
        new_c = np.where(left, b - np.round(_GOLDEN * (b - a)), d)
        new_d = np.where(left, c, a + np.round(_GOLDEN * (b - a)))
        zx, fx = total(np.where(left, new_c, new_d), np.where(left, zc, zd))
        zc, fc, zd, fd = (
            np.where(left, zx, zd),
            np.where(left, fx, fd),
            np.where(left, zc, zx),
            np.where(left, fc, fx),
        )
        c, d = new_c, new_d
    pick = fc <= fd
    return np.where(pick, c, d), np.where(pick, zc, zd), np.where(pick, fc, fd)


def missed_weight(model: LossModel) -> FloatArray:
    """The model's cost-weighted quadrature row (for callers that rescale it)."""
    return np.asarray(model.weights[MISSED])
