"""Exact power by summing over the counts a study can produce.

Every exact test here sees at most two counts: the exposed count ``x1`` and
a comparison count ``x0`` (absent for a one-group design), either independent
or two cells of one multinomial over matched sets (``CountModel.units``).  Each
count's distribution is truncated to the window outside of which its tail
mass is below :data:`TAIL`, so the neglected mass is below ``4 * TAIL``
(about 1e-12) in all.  On the grid of ``(x1, x0)`` pairs the engine computes
the conditional exact p-value of each pair; the test at level ``alpha``
rejects the pairs with ``p <= alpha`` and its power is the probability of
those pairs under the effect.  Its attained size is their probability under
no effect, which never exceeds ``alpha``.

Two-sided exact tests are the central (equal-tailed) tests: the p-value is
twice the smaller one-sided p-value, capped at 1.

Everything is batched over a leading axis of studies; grids of different
widths are padded, the padding carrying no mass and p-value ``inf``.

References
----------
.. [1] Fisher, R. A. (1935). The logic of inductive inference. *J. R. Stat.
   Soc.* 98, 39-82 (the conditional test of a 2x2 table).
.. [2] Przyborowski, J. and Wilenski, H. (1940). Homogeneity of results in
   testing samples from Poisson series. *Biometrika* 31, 313-323.
.. [3] Breslow, N. E. and Day, N. E. (1987). *Statistical Methods in Cancer
   Research, vol. II: The Design and Analysis of Cohort Studies*. IARC
   Scientific Publications 82, Lyon, ch. 7.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import NDArray
from scipy import special, stats

from ..designs._base import CountModel, FloatArray, Marginal
from ..errors import InfeasibleError

#: Tail mass left out at each end of each count's window.
TAIL = 1e-13
#: Relative tolerance of the comparison ``p <= alpha`` (guards float ties).
REL_TOL = 1e-10
#: The smallest significance level exact tests resolve: conditional p-values
#: are exact above about 1e-20 and only known to be tiny below, so levels
#: below this floor are not offered.
ALPHA_FLOOR = 1e-15
#: Rough cap on grid cells held in memory at once.
CELL_BUDGET = 4_000_000
#: The most count pairs one study's grid may hold: about 20 floats of working
#: memory each, so some 650 MB and a few seconds at the limit.
#: Beyond it :func:`build_grid` raises :class:`~decide.errors.InfeasibleError`
#: before allocating anything.
MAX_COUNT_PAIRS = 4_000_000

IntArray = NDArray[np.int64]


@dataclass(frozen=True)
class CountGrid:
    """Padded grids of count pairs for a batch of ``B`` studies.

    Attributes
    ----------
    null_exposed : (B, W1) probabilities of the exposed count under no effect
    alt_exposed : (B, Q, W1) the same under each of ``Q`` effects
    other : (B, W0) probabilities of the comparison count (both hypotheses)
    p_value : (B, W1, W0) exact p-value of each pair; ``inf`` on padding
    exposed_counts : (B, W1) the exposed counts of the rows (padding continues past the window)
    other_counts : (B, W0) the comparison counts of its columns (0 for one group)
    null_joint : (B, W1, W0) or None
        Where the two counts are not independent, the probability of each
        pair under no effect (then ``null_exposed``, ``alt_exposed`` and
        ``other`` are only the marginals of the counts under no effect, and
        use :func:`null_mass`, :func:`split_mass` and :func:`rejection_path`
        for masses) ...
    alt_joint : PairLaw or None
        ... and under each effect, computed a few effects at a time.
    """

    null_exposed: FloatArray
    alt_exposed: FloatArray
    other: FloatArray
    p_value: FloatArray
    exposed_counts: FloatArray
    other_counts: FloatArray
    null_joint: FloatArray | None = None
    alt_joint: PairLaw | None = None


@dataclass(frozen=True)
class PairLaw:
    """Probabilities of the count pairs of two multinomial cells, under each of ``Q`` effects.

    ``P_q(x1, x0) = Bin(d; n, t_q) * C(d, x1) * s_q**x1 * (1 - s_q)**x0`` with
    ``d = x1 + x0`` (see :func:`_pair_law`).  Held in factors, so that the
    ``(Q, W1, W0)`` array is never built whole: :meth:`mass` gives a few
    effects at a time.
    """

    log_total: FloatArray  # (B, Q, W1 + W0 - 1): log Bin(d; n, t_q), d from x1[0] + x0[0] up
    coefficient: FloatArray  # (B, W1, W0): log C(d, x1), -inf on padding
    x1: FloatArray  # (B, W1)
    x0: FloatArray  # (B, W0)
    log_share: FloatArray  # (B, Q): log s_q
    log_rest: FloatArray  # (B, Q): log(1 - s_q)

    def mass(self, q: slice) -> FloatArray:
        """Pair probabilities under the effects ``q``, (B, q, W1, W0)."""
        w0 = self.coefficient.shape[2]
        # pair (i, j) has total index i + j: a sliding window over the totals, no copy
        total = np.lib.stride_tricks.sliding_window_view(self.log_total[:, q], w0, axis=-1)
        log_p = total + self.coefficient[:, None]
        log_p += self.x1[:, None, :, None] * self.log_share[:, q, None, None]
        log_p += self.x0[:, None, None, :] * self.log_rest[:, q, None, None]
        return np.asarray(np.exp(log_p, out=log_p))

    def slices(self) -> Iterator[slice]:
        """Effects a few at a time, keeping each :meth:`mass` under :data:`CELL_BUDGET` cells."""
        step = max(1, CELL_BUDGET // self.coefficient.size)
        for start in range(0, self.log_total.shape[1], step):
            yield slice(start, min(self.log_total.shape[1], start + step))


def null_mass(grid: CountGrid) -> FloatArray:
    """Probability of each count pair under no effect, (B, W1, W0)."""
    if grid.null_joint is not None:
        return grid.null_joint
    return np.asarray(grid.null_exposed[:, :, None] * grid.other[:, None, :])


def split_mass(grid: CountGrid, reject: NDArray[np.bool_]) -> tuple[FloatArray, FloatArray]:
    """Mass of the rejected and of the kept pairs under each effect, (B, Q) each."""
    if grid.alt_joint is not None:
        law = grid.alt_joint
        caught, kept = np.empty(law.log_share.shape), np.empty(law.log_share.shape)
        for q in law.slices():
            mass = law.mass(q)
            caught[:, q] = np.einsum("bqij,bij->bq", mass, reject)
            kept[:, q] = np.einsum("bqij,bij->bq", mass, ~reject)
        return caught, kept
    caught = np.einsum("bij,bj->bi", reject, grid.other)
    kept = np.einsum("bij,bj->bi", ~reject, grid.other)
    return np.einsum("bqi,bi->bq", grid.alt_exposed, caught), np.einsum("bqi,bi->bq", grid.alt_exposed, kept)


def _window(m: Marginal) -> tuple[FloatArray, FloatArray]:
    if m.family == "binomial":
        lo = stats.binom.ppf(TAIL, m.trials, m.parameter)
        hi = stats.binom.isf(TAIL, m.trials, m.parameter)
    else:
        lo = stats.poisson.ppf(TAIL, m.parameter)
        hi = stats.poisson.isf(TAIL, m.parameter)
    return np.asarray(lo, dtype=np.float64), np.asarray(hi, dtype=np.float64)


def _alt_window(m: Marginal) -> tuple[FloatArray, FloatArray]:
    """The union of the windows along a trailing axis of effects: (B,) each.

    Binomial counts of fixed trials and Poisson counts are stochastically
    increasing in their parameter, so each tail quantile is too: the union
    runs from the low end at the smallest parameter to the high end at the
    largest, and only those two are computed.
    """
    if m.parameter.ndim < 2:
        return _window(m)
    rows = np.arange(m.parameter.shape[0])
    trials = np.broadcast_to(m.trials, m.parameter.shape)
    ends = np.stack([np.argmin(m.parameter, axis=-1), np.argmax(m.parameter, axis=-1)], axis=1)
    lo, hi = _window(Marginal(m.family, trials[rows[:, None], ends], m.parameter[rows[:, None], ends]))
    return lo[:, 0], hi[:, 1]


def _pmf(family: str, trials: FloatArray, parameter: FloatArray, x: FloatArray) -> FloatArray:
    if family == "binomial":
        return np.asarray(stats.binom.pmf(x, trials, parameter), dtype=np.float64)
    return _poisson_pmf(x, parameter)


def _poisson_pmf(x: FloatArray, mean: FloatArray) -> FloatArray:
    """Poisson probabilities of the counts ``x`` (non-negative whole numbers).

    The formula of ``scipy.stats.poisson.pmf``, ``exp(x log(mean) - mean -
    log x!)``, with the logarithms taken before broadcasting: ``log x!`` over
    the counts and ``log(mean)`` over the means.  On a grid of counts by
    effects scipy would evaluate both once per cell.
    """
    mean = np.asarray(mean, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_mean = np.log(mean)  # over the means only, not over every cell as xlogy would
        log_pmf = x * log_mean
    if np.any(mean == 0):  # a zero mean puts all its mass on no cases
        log_pmf = np.where(mean == 0, np.where(x == 0, 0.0, -np.inf), log_pmf)
    log_pmf -= mean
    log_pmf -= special.gammaln(x + 1)
    return np.exp(log_pmf, out=log_pmf)


def _axis(lo: FloatArray, hi: FloatArray) -> tuple[FloatArray, NDArray[np.bool_]]:
    width = int(np.max(hi - lo)) + 1
    x = lo[:, None] + np.arange(width, dtype=np.float64)
    return x, x <= hi[:, None]


def _poisson_p(x1: FloatArray, mean: FloatArray, sides: int) -> FloatArray:
    m = mean[:, None]
    upper = np.where(x1 >= 1, special.pdtrc(np.maximum(x1 - 1, 0), m), 1.0)
    if sides == 1:
        return np.asarray(upper[:, :, None])
    lower = special.pdtr(x1, m)
    return np.asarray(np.minimum(1.0, 2 * np.minimum(upper, lower))[:, :, None])


def _row_span(
    t: FloatArray, tvalid: NDArray[np.bool_], law: Callable[[FloatArray], _RowLaw]
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """Null law of ``x1`` given each total ``t`` (B, T), over the span of its mass.

    Each row spans 11 standard deviations and 11 counts either side of the
    mean, where the tails beyond hold less than about 1e-20.  The row is
    built from the exact ratio of successive probabilities and normalised
    over that span, which avoids the cancellation of log-factorials of large
    groups.  Returns the first and last count of each row (B, T), the counts
    (B, T, W) and their probabilities (zero on padding).
    """
    reach = 11.0
    rows = law(t)
    lo = np.maximum(rows.support_lo, np.floor(rows.mean - reach * rows.sd - reach))
    hi = np.minimum(rows.support_hi, np.ceil(rows.mean + reach * rows.sd + reach))
    hi = np.where(tvalid, hi, lo)
    width = int(np.max(hi - lo)) + 1
    x = lo[:, :, None] + np.arange(width, dtype=np.float64)  # (B, T, W)
    inside = x <= hi[:, :, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        step = rows.log_step(x[:, :, :-1])
    step[~inside[:, :, 1:]] = 0.0  # a step out of the span (only the last count of a row steps to it)
    logf = np.zeros_like(x)
    np.cumsum(step, axis=2, out=logf[:, :, 1:])
    logf[~inside] = -np.inf
    logf -= logf.max(axis=2, keepdims=True)
    f = np.exp(logf, out=logf)
    f /= f.sum(axis=2, keepdims=True)
    return lo, hi, x, f


def _row_tails(
    x1: FloatArray,
    x0: FloatArray,
    hi1: FloatArray,
    hi0: FloatArray,
    law: Callable[[FloatArray], _RowLaw],
    sides: int,
) -> FloatArray:
    """Conditional p-values on the grid, one row per total ``t = x1 + x0``.

    The rows come from :func:`_row_span`.  Grid points below the span get
    upper p-value 1 (lower 0), points above it upper p-value 0 (lower 1):
    p-values under about 1e-20 are reported as 0.
    """
    lo1 = x1[:, 0]
    tmin, tmax = lo1 + x0[:, 0], hi1 + hi0
    t, tvalid = _axis(tmin, tmax)  # (B, T)
    lo, hi, x, f = _row_span(t, tvalid, law)
    width = x.shape[2]
    b = np.arange(x1.shape[0])[:, None, None]
    row = np.clip((x1[:, :, None] + x0[:, None, :] - tmin[:, None, None]).astype(np.int64), 0, t.shape[1] - 1)
    offset = x1[:, :, None] - lo[b, row]
    below = offset < 0
    above = x1[:, :, None] > hi[b, row]
    col = np.clip(offset.astype(np.int64), 0, width - 1)
    upper = np.cumsum(f[:, :, ::-1], axis=2)[:, :, ::-1][b, row, col]
    upper = np.where(below, 1.0, np.where(above, 0.0, upper))
    if sides == 1:
        return np.asarray(upper)
    lower = np.cumsum(f, axis=2)[b, row, col]
    lower = np.where(below, 0.0, np.where(above, 1.0, lower))
    return np.asarray(np.minimum(1.0, 2 * np.minimum(upper, lower)))


@dataclass(frozen=True)
class _RowLaw:
    """Null law of ``x1`` given the total, for rows of totals ``t`` (B, T)."""

    support_lo: FloatArray
    support_hi: FloatArray
    mean: FloatArray
    sd: FloatArray
    #: log f(x+1)/f(x) at x, for x of shape (B, T, W)
    log_step: Callable[[FloatArray], FloatArray]


def _hypergeometric(n1: FloatArray, n0: FloatArray) -> Callable[[FloatArray], _RowLaw]:
    """Fisher: ``x1`` given ``t`` is hypergeometric (``n1`` of ``n1 + n0`` drawn)."""

    def law(t: FloatArray) -> _RowLaw:
        a, c = n1[:, None], n0[:, None]
        share = a / (a + c)
        var = t * share * (1 - share) * np.maximum(a + c - t, 0) / np.maximum(a + c - 1, 1)
        tt, a3, c3 = t[:, :, None], a[:, :, None], c[:, :, None]
        return _RowLaw(
            np.maximum(0.0, t - c),
            np.minimum(t, a),
            t * share,
            np.sqrt(var),
            lambda x: np.log((tt - x) * (a3 - x) / ((x + 1) * (c3 - tt + x + 1))),
        )

    return law


def _binomial(share: FloatArray) -> Callable[[FloatArray], _RowLaw]:
    """Two Poisson counts: ``x1`` given ``t`` is binomial with the exposed share."""

    def law(t: FloatArray) -> _RowLaw:
        pi = share[:, None]
        tt, odds = t[:, :, None], np.log(pi / (1 - pi))[:, :, None]
        return _RowLaw(
            np.zeros_like(t),
            t,
            t * pi,
            np.sqrt(t * pi * (1 - pi)),
            lambda x: np.log(tt - x) - np.log(x + 1) + odds,
        )

    return law


def _x0_window(model: CountModel) -> tuple[FloatArray, FloatArray]:
    """The comparison count's window, under no effect and under every effect."""
    assert model.other is not None
    lo0, hi0 = _window(model.other)
    if model.other_alt is not None:
        lo_alt, hi_alt = _alt_window(model.other_alt)
        lo0, hi0 = np.minimum(lo0, lo_alt), np.maximum(hi0, hi_alt)
    return lo0, hi0


def _pair_law(model: CountModel, x1: FloatArray, x0: FloatArray, valid: NDArray[np.bool_]) -> tuple[PairLaw, PairLaw]:
    """The pair laws of two cells of one multinomial over ``model.units``, no effect and each effect.

    With cell probabilities ``p1`` and ``p0``, the pair total ``d = x1 + x0``
    is ``Bin(n, t)`` with ``t = p1 + p0`` and, given it, ``x1`` is
    ``Bin(d, s)`` with ``s = p1 / t``: ``P(x1, x0) = Bin(d; n, t) * C(d, x1) *
    s**x1 * (1 - s)**x0``.  The first factor comes from scipy's binomial pmf
    over the totals (1-D), the binomial coefficient from log-gamma values of
    counts no larger than the totals, so no log-factorial of ``n`` enters a
    difference.
    """
    assert model.units is not None and model.other is not None
    n = model.units
    alt_other = model.other if model.other_alt is None else model.other_alt
    lo = x1[:, 0] + x0[:, 0]
    d = np.arange(x1.shape[1] + x0.shape[1] - 1, dtype=np.float64) + lo[:, None]  # (B, WD)
    at = (x1[:, :, None] + x0[:, None, :] - lo[:, None, None]).astype(np.int64).reshape(n.size, -1)
    coefficient = (
        np.take_along_axis(special.gammaln(d + 1), at, axis=1).reshape(valid.shape)
        - special.gammaln(x1 + 1)[:, :, None]
        - special.gammaln(x0 + 1)[:, None, :]
    )
    coefficient = np.where(valid, coefficient, -np.inf)

    def law(p1: FloatArray, p0: FloatArray) -> PairLaw:
        p1, p0 = p1.reshape(n.size, -1), p0.reshape(n.size, -1)  # (B, Q)
        t = p1 + p0
        share = np.where(t > 0, p1 / np.where(t > 0, t, 1.0), 0.5)
        with np.errstate(divide="ignore"):
            # pmf (not logpmf): scipy's binomial pmf is accurate for large n
            log_total = np.log(stats.binom.pmf(d[:, None, :], n[:, None, None], t[:, :, None]))
            return PairLaw(log_total, coefficient, x1, x0, np.log(share), np.log1p(-share))

    return law(model.exposed_null.parameter, model.other.parameter), law(
        model.exposed_alt.parameter, alt_other.parameter
    )


def _check_size(w1: FloatArray, w0: FloatArray) -> None:
    """Refuse, before allocating, a study whose grid holds more than :data:`MAX_COUNT_PAIRS`.

    Batches of several studies are kept within :data:`CELL_BUDGET` by
    :func:`batches`; this bounds the one study a batch always holds.
    """
    pairs = float(np.max(w1 * w0))
    if not pairs <= MAX_COUNT_PAIRS:
        raise InfeasibleError(
            f"the exact test would need {pairs:.3g} count pairs, beyond the limit of "
            f"{MAX_COUNT_PAIRS:,} that keeps memory and time bounded; use the normal test, "
            "which agrees closely at counts this large, or ask for a smaller study",
            (),
        )


def build_grid(model: CountModel, sides: int) -> CountGrid:
    """Lay out the count pairs of a batch of studies and their p-values.

    ``model.exposed_alt`` carries a trailing axis of ``Q`` effects; the
    exposed window is the union of the windows under no effect and under
    every effect.
    """
    lo_null, hi_null = _window(model.exposed_null)
    lo_alt, hi_alt = _alt_window(model.exposed_alt)
    lo1 = np.minimum(lo_null, lo_alt)
    hi1 = np.maximum(hi_null, hi_alt)
    lo0, hi0 = (np.zeros_like(lo1), np.zeros_like(hi1)) if model.other is None else _x0_window(model)
    _check_size(hi1 - lo1 + 1, hi0 - lo0 + 1)
    x1, valid1 = _axis(lo1, hi1)
    null = model.exposed_null
    null_exposed = _pmf(null.family, null.trials[:, None], null.parameter[:, None], x1) * valid1
    alt = model.exposed_alt
    alt_exposed = _pmf(alt.family, alt.trials[..., None], alt.parameter[..., None], x1[:, None, :]) * valid1[:, None, :]
    if model.other is None:
        x0 = np.zeros((x1.shape[0], 1))
        valid0 = np.ones_like(x0, dtype=bool)
        hi0 = np.zeros(x1.shape[0])
        other = np.ones_like(x0)
    else:
        o = model.other
        x0, valid0 = _axis(lo0, hi0)
        other = _pmf(o.family, o.trials[:, None], o.parameter[:, None], x0) * valid0
    if model.conditional == "poisson":
        assert model.reference_mean is not None
        p = _poisson_p(x1, model.reference_mean, sides)
    else:
        p = _row_tails(x1, x0, hi1, hi0, _conditional_law(model), sides)
    valid = valid1[:, :, None] & valid0[:, None, :]
    p = np.where(valid, p, np.inf)
    if model.units is None:
        return CountGrid(null_exposed, alt_exposed, other, p, x1, x0)
    null_law, alt_law = _pair_law(model, x1, x0, valid)
    return CountGrid(null_exposed, alt_exposed, other, p, x1, x0, null_law.mass(slice(0, 1))[:, 0], alt_law)


def _conditional_law(model: CountModel) -> Callable[[FloatArray], _RowLaw]:
    if model.conditional == "binomial":
        assert model.share_exposed is not None
        return _binomial(model.share_exposed)
    assert model.n_exposed is not None and model.n_other is not None
    return _hypergeometric(model.n_exposed, model.n_other)


def poisson_p_values(counts: FloatArray, mean: FloatArray, sides: int) -> FloatArray:
    """Exact p-values (B, W) of exposed ``counts`` (B, W) against Poisson means (B,)."""
    return np.asarray(_poisson_p(counts, mean, sides)[:, :, 0])


@dataclass(frozen=True)
class ConditionalRows:
    """The null law of the exposed count given each total, for a batch of studies.

    ``counts`` (B, T, W) runs over each row's span (see :func:`_row_span`),
    ``upper`` and ``lower`` are ``P(x1 >= count | total)`` and
    ``P(x1 <= count | total)``; ``first`` and ``last`` (B, T) bound the span
    and ``least`` and ``most`` the counts possible at all given the total.
    Counts above the span have upper tail below about 1e-20 (taken as 0),
    counts below it lower tail below that.
    """

    counts: FloatArray
    upper: FloatArray
    lower: FloatArray
    first: FloatArray
    last: FloatArray
    least: FloatArray
    most: FloatArray


def conditional_rows(model: CountModel, totals: FloatArray) -> ConditionalRows:
    """Conditional tails of the exposed count given ``totals`` (B, T), for the two-group tests."""
    law = _conditional_law(model)
    lo, hi, x, f = _row_span(totals, np.ones(totals.shape, dtype=bool), law)
    support = law(totals)
    inside = x <= hi[:, :, None]
    upper = np.where(inside, np.cumsum(f[:, :, ::-1], axis=2)[:, :, ::-1], 0.0)
    lower = np.where(inside, np.cumsum(f, axis=2), 1.0)
    return ConditionalRows(x, upper, lower, lo, hi, support.support_lo, support.support_hi)


def rejection_mass(grid: CountGrid, alpha: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Power (B, Q) and attained size (B,) of the level-``alpha`` tests."""
    reject = grid.p_value <= (alpha * (1 + REL_TOL))[:, None, None]
    power, _ = split_mass(grid, reject)
    size = np.einsum("bij,bij->b", null_mass(grid), reject)
    return np.minimum(power, 1.0), np.minimum(size, 1.0)


@dataclass(frozen=True)
class RejectionPath:
    """Every test of the level-``alpha`` family of one batch of studies.

    Ordering the count pairs by p-value, the test at level ``p_value[..., k]``
    rejects pairs ``0..k``; ``null[..., k]`` is its attained size,
    ``weighted[..., w, k]`` the mass it rejects under the ``w``-th weighting
    of the effects and ``kept[..., w, k]`` the mass it does not reject (summed
    from the other end, so that small misses keep their digits).  ``last``
    marks the end of each run of tied p-values: only those positions are
    attainable tests.
    """

    p_value: FloatArray
    null: FloatArray
    weighted: FloatArray
    kept: FloatArray
    last: NDArray[np.bool_]


def rejection_path(grid: CountGrid, weights: FloatArray) -> RejectionPath:
    """Cumulative masses along the p-value order (``weights`` is ``(K, Q)``)."""
    nb = grid.p_value.shape[0]
    p = grid.p_value.reshape(nb, -1)
    order = np.argsort(p, axis=1, kind="stable")
    p_sorted = np.take_along_axis(p, order, axis=1)
    null = null_mass(grid).reshape(nb, -1)
    if grid.alt_joint is not None:
        alt = np.zeros((nb, weights.shape[0], p.shape[1]))
        for q in grid.alt_joint.slices():
            alt += np.einsum("kq,bqij->bkij", weights[:, q], grid.alt_joint.mass(q)).reshape(alt.shape)
    else:
        alt = np.einsum("kq,bqi->bki", weights, grid.alt_exposed)
        alt = (alt[:, :, :, None] * grid.other[:, None, None, :]).reshape(nb, weights.shape[0], -1)
    null_c = np.cumsum(np.take_along_axis(null, order, axis=1), axis=1)
    alt_sorted = np.take_along_axis(alt, order[:, None, :], axis=2)
    alt_c = np.cumsum(alt_sorted, axis=2)
    kept = np.cumsum(alt_sorted[:, :, ::-1], axis=2)[:, :, ::-1]
    kept = np.concatenate([kept[:, :, 1:], np.zeros_like(kept[:, :, :1])], axis=2)
    nxt = np.concatenate([p_sorted[:, 1:], np.full((nb, 1), np.inf)], axis=1)
    last = (nxt > p_sorted * (1 + REL_TOL)) & np.isfinite(p_sorted)
    return RejectionPath(p_sorted, np.minimum(null_c, 1.0), alt_c, kept, last)


def _take(x: FloatArray | None, idx: NDArray[np.int64]) -> FloatArray | None:
    return None if x is None else x[idx]


def _take_marginal(m: Marginal, idx: NDArray[np.int64]) -> Marginal:
    return Marginal(m.family, m.trials[idx], m.parameter[idx])


def take_rows(model: CountModel, idx: NDArray[np.int64]) -> CountModel:
    """The studies ``idx`` of a batched model."""
    return CountModel(
        _take_marginal(model.exposed_null, idx),
        _take_marginal(model.exposed_alt, idx),
        None if model.other is None else _take_marginal(model.other, idx),
        model.conditional,
        _take(model.n_exposed, idx),
        _take(model.n_other, idx),
        _take(model.share_exposed, idx),
        _take(model.reference_mean, idx),
        None if model.other_alt is None else _take_marginal(model.other_alt, idx),
        _take(model.units, idx),
    )


def count_pairs(model: CountModel) -> FloatArray:
    """Count pairs in each study's grid, from its count windows (cheap to compute)."""
    lo_null, hi_null = _window(model.exposed_null)
    lo_alt, hi_alt = _alt_window(model.exposed_alt)
    w1 = np.maximum(hi_null, hi_alt) - np.minimum(lo_null, lo_alt) + 1
    if model.other is None:
        return np.asarray(w1, dtype=np.float64)
    lo0, hi0 = _x0_window(model)
    return np.asarray(w1 * (hi0 - lo0 + 1), dtype=np.float64)


def grid_cells(model: CountModel) -> NDArray[np.int64]:
    """Cells each study's grid will hold, from its count windows (cheap to compute).

    Counts the ``(x1, x0)`` grid once per effect plus the conditional rows
    (about as many again) and the working copies made along the way.
    """
    lo_null, hi_null = _window(model.exposed_null)
    lo_alt, hi_alt = _alt_window(model.exposed_alt)
    w1 = np.maximum(hi_null, hi_alt) - np.minimum(lo_null, lo_alt) + 1
    if model.other is None:
        w0 = np.ones_like(w1)
    else:
        lo0, hi0 = _x0_window(model)
        w0 = hi0 - lo0 + 1
    effects = model.exposed_alt.parameter.shape[-1] if model.exposed_alt.parameter.ndim == 2 else 1
    return np.asarray(w1 * w0 * (8 + effects) + 64, dtype=np.int64)


def batches(model: CountModel) -> Iterator[NDArray[np.int64]]:
    """Index sets of studies, grouped by grid size, whose grids fit :data:`CELL_BUDGET` together."""
    cells = grid_cells(model)
    order = np.argsort(cells, kind="stable")
    start = 0
    while start < order.size:
        rest = cells[order[start:]]
        span = np.arange(1, rest.size + 1) * rest
        fits = int(np.searchsorted(span, CELL_BUDGET, side="right"))
        alike = int(np.searchsorted(rest, 1.5 * rest[0], side="right"))  # little padding
        stop = start + max(1, min(fits, alike))
        yield order[start:stop]
        start = stop


def chunks(rows: int, cells_per_row: int) -> Iterator[slice]:
    """Slices of the batch that keep each grid under :data:`CELL_BUDGET` cells."""
    step = max(1, CELL_BUDGET // max(1, cells_per_row))
    for start in range(0, rows, step):
        yield slice(start, min(rows, start + step))


def _lowest_per_group(group: IntArray, key: FloatArray, groups: int) -> IntArray:
    """Index of the member with the smallest ``key`` in each of ``groups`` groups."""
    order = np.lexsort((key, group))
    return np.asarray(order[np.searchsorted(group[order], np.arange(groups))], dtype=np.int64)


def study_models(members: CountModel, study: IntArray, studies: int) -> CountModel:
    """One model per study, its effect axis spanning the exposed windows of its members.

    ``members`` holds one row per requested (study, effect) with an effect
    axis of one; ``study`` numbers each row's study (size, baseline,
    allocation, years) from 0 to ``studies - 1``.  The model returned holds,
    per study, the member whose exposed window starts lowest and the member
    whose window ends highest, so that :func:`build_grid` lays out one window
    covering every member's.  The rejection region and the comparison count do
    not depend on the effect, so that one grid serves every member.
    """
    alt = members.exposed_alt
    trials = np.broadcast_to(alt.trials, alt.parameter.shape).reshape(-1)
    lo, hi = _window(alt)
    ends = np.stack(
        [_lowest_per_group(study, lo.reshape(-1), studies), _lowest_per_group(study, -hi.reshape(-1), studies)],
        axis=1,
    )
    spans = Marginal(alt.family, np.asarray(trials[ends]), np.asarray(alt.parameter.reshape(-1)[ends]))
    return replace(take_rows(members, ends[:, 0]), exposed_alt=spans)


def _caught(grid: CountGrid, rows: IntArray, alpha: FloatArray) -> FloatArray:
    """Per exposed count, the comparison-count mass the level-``alpha`` test rejects: (P, W1)."""
    out = np.empty((rows.size, grid.p_value.shape[1]))
    for part in chunks(rows.size, grid.p_value.shape[1] * grid.p_value.shape[2]):
        r = rows[part]
        reject = grid.p_value[r] <= (alpha[part] * (1 + REL_TOL))[:, None, None]
        out[part] = np.einsum("pij,pj->pi", reject, grid.other[r])
    return out


def _grouped(label: IntArray, groups: int) -> tuple[IntArray, IntArray]:
    """Members sorted by ``label`` and where each label's run starts (``groups + 1`` bounds)."""
    order = np.argsort(label, kind="stable")
    return order, np.searchsorted(label[order], np.arange(groups + 1))


def shared_power(members: CountModel, study: IntArray, alpha: FloatArray, sides: int) -> tuple[FloatArray, FloatArray]:
    """Power and attained size of exact tests, one grid per study shared by its effects and alphas.

    For each distinct (study, alpha) the mass the test rejects is summed over
    the comparison count once, ``caught(x1) = sum_x0 [p(x1, x0) <= alpha]
    P(x0)``; the power at each effect is then ``sum_x1 P_effect(x1)
    caught(x1)`` and the attained size the same sum under no effect.  Where
    the two counts are not independent (``members.units``), see
    :func:`_joint_power`.
    """
    if members.units is not None:
        return _joint_power(members, study, alpha, sides)
    studies = int(study.max()) + 1
    model = study_models(members, study, studies)
    pairs, pair_of = np.unique(np.stack([study.astype(np.float64), alpha]), axis=1, return_inverse=True)
    pair_of = pair_of.reshape(-1)
    pair_study = pairs[0].astype(np.int64)
    groups = list(batches(model))
    label = np.empty(studies, dtype=np.int64)
    local = np.empty(studies, dtype=np.int64)
    for g, idx in enumerate(groups):
        label[idx], local[idx] = g, np.arange(idx.size)
    pair_order, pair_bounds = _grouped(label[pair_study], len(groups))
    member_order, member_bounds = _grouped(label[study], len(groups))
    alt = members.exposed_alt
    trials = np.broadcast_to(alt.trials, alt.parameter.shape).reshape(-1)
    parameter = alt.parameter.reshape(-1)
    out_power, out_size = np.empty(study.size), np.empty(study.size)
    position = np.empty(pair_study.size, dtype=np.int64)
    for g, idx in enumerate(groups):
        grid = build_grid(take_rows(model, idx), sides)
        these = pair_order[pair_bounds[g] : pair_bounds[g + 1]]
        position[these] = np.arange(these.size)
        caught = _caught(grid, local[pair_study[these]], pairs[1][these])
        size = np.einsum("pi,pi->p", grid.null_exposed[local[pair_study[these]]], caught)
        mine = member_order[member_bounds[g] : member_bounds[g + 1]]
        for part in chunks(mine.size, grid.p_value.shape[1]):
            els = mine[part]
            x1 = grid.exposed_counts[local[study[els]]]
            pmf = _pmf(alt.family, trials[els][:, None], parameter[els][:, None], x1)
            at = position[pair_of[els]]
            out_power[els] = np.einsum("mi,mi->m", pmf, caught[at])
            out_size[els] = size[at]
    return np.minimum(out_power, 1.0), np.minimum(out_size, 1.0)


def _joint_power(members: CountModel, study: IntArray, alpha: FloatArray, sides: int) -> tuple[FloatArray, FloatArray]:
    """Power and attained size where the counts are two cells of one multinomial.

    The pairs' masses then change with the effect on both axes, so each
    distinct (study, effect) gets its grid, ordered once by p-value; every
    alpha asked of it is one comparison along that order.
    """
    key = np.stack([study.astype(np.float64), members.exposed_alt.parameter.reshape(-1)])
    _, first, back = np.unique(key, axis=1, return_index=True, return_inverse=True)
    back = back.reshape(-1)
    model = take_rows(members, first)
    out_power, out_size = np.zeros(study.size), np.zeros(study.size)
    row_of = np.empty(first.size, dtype=np.int64)
    for idx in batches(model):
        path = rejection_path(build_grid(take_rows(model, idx), sides), np.ones((1, 1)))
        row_of[:] = -1
        row_of[idx] = np.arange(idx.size)
        mine = np.flatnonzero(row_of[back] >= 0)
        for part in chunks(mine.size, path.p_value.shape[1]):
            els = mine[part]
            rows = row_of[back[els]]
            k = (path.p_value[rows] <= (alpha[els] * (1 + REL_TOL))[:, None]).sum(axis=1)
            at = np.maximum(k - 1, 0)
            out_power[els] = np.where(k > 0, path.weighted[rows, 0, at], 0.0)
            out_size[els] = np.where(k > 0, path.null[rows, at], 0.0)
    return np.minimum(out_power, 1.0), np.minimum(out_size, 1.0)
