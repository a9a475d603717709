"""A test's decision rule in counts, and its real false-alarm probability.

A significance level means little to a board; the counts that trigger a flag
mean a great deal.  Every test here, exact or normal, flags a set of count
outcomes:

* one-group designs (a cohort against a reference rate) flag when the
  observed count reaches a threshold ``c`` (two-sided: or falls to ``a``);
* two-group designs are conditional: given the total ``T`` (cases, or
  exposed subjects for case-control) the test flags when the exposed count
  reaches ``c(T)`` (two-sided: or falls to ``a(T)``).

The rule is stated over the totals that carry 99.9 % of the probability under
harm and under no harm.  Its *cut-off interval* ``[low, high)`` holds every
nominal alpha that gives the same flags when a p-value is compared with
``p <= alpha``, over the count outcomes of the exact-power grid (all but
about 1e-12 of the probability); the value shown is rounded into that
interval, never below it.

For a normal test the same counts give its *real* false-alarm probability:
the chance of a flag under the exact distribution of the counts when the
exposure is harmless, which can differ from the nominal alpha.  It is
computed on the exact-power grid wherever every cell expects at most
:data:`~decide.designs.EXACT_UP_TO` cases, and not otherwise.

References
----------
.. [1] Lehmann, E. L. and Romano, J. P. (2005). *Testing Statistical
   Hypotheses*, 3rd ed., Springer, sec. 3.1 and 4.4 (critical regions of
   discrete tests; conditional tests given a sufficient total).
.. [2] Breslow, N. E. and Day, N. E. (1987). *Statistical Methods in Cancer
   Research, vol. II*. IARC Scientific Publications 82, ch. 7 (the Poisson
   test of an observed against an expected count).
.. [3] Fleiss, J. L., Levin, B. and Paik, M. C. (2003). *Statistical Methods
   for Rates and Proportions*, 3rd ed., Wiley, ch. 4 (the normal test of two
   proportions from observed counts).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace

import numpy as np
from numpy.typing import NDArray
from scipy import special

from .._results import PlainData
from ..designs import EXACT_UP_TO, StudyDesign
from ..designs._base import CountModel, FloatArray
from . import exact as _exact
from . import normal as _normal
from .study import Setting

#: Probability under each hypothesis carried by the totals a rule table shows.
TABLE_MASS = 0.999
#: Fewest significant digits a shown cut-off has.
SHOWN_DIGITS = 4


@dataclass(frozen=True)
class Threshold(PlainData):
    """The flagging exposed counts for one total.

    ``flag_at_least``: the exposed count at or above which the test flags
    (``None``: no count of this total flags on the side of harm);
    ``flag_at_most``: for two-sided tests, the count at or below which it
    flags on the side of protection (``None``: none does).
    """

    total: int
    flag_at_least: int | None
    flag_at_most: int | None = None


@dataclass(frozen=True)
class DecisionRule(PlainData):
    """The counts that make a test flag the exposure.

    Attributes
    ----------
    design, test, sides, n_per_group
        The study and the test (``exact``, ``normal`` or ``normal-cc``).
    nominal_alpha : float
        The significance level the test was chosen at.
    cutoff : (float, float) or None
        ``[low, high)``: every nominal alpha in it gives the same flags with
        ``p <= alpha``; ``None`` where the counts are too many to lay out.
    cutoff_shown : str
        The nominal alpha to print: rounded into the cut-off interval.
    false_alarm : float or None
        Probability of a flag when the exposure is harmless, under the exact
        distribution of the counts (``None``: not computed).
    count_name, total_name : str
        What is counted: the count compared with the threshold, and (two
        groups) the total the thresholds depend on.
    expected_null : float or None
        One group: the count expected at the reference rate.
    flag_at_least, flag_at_most : int or None
        One group: the thresholds (as in :class:`Threshold`).
    thresholds : tuple of Threshold
        Two groups: one row per total, over the totals carrying
        :data:`TABLE_MASS` of the probability under harm and under no harm.
    statement : str
        The rule in a sentence.
    """

    design: str
    test: str
    sides: int
    n_per_group: int
    nominal_alpha: float
    cutoff: tuple[float, float] | None
    cutoff_shown: str
    false_alarm: float | None
    count_name: str
    total_name: str | None
    expected_null: float | None
    flag_at_least: int | None
    flag_at_most: int | None
    thresholds: tuple[Threshold, ...] = field(default=())
    statement: str = ""


# --------------------------------------------------------------------------
# p-values of the normal test, from counts


def normal_p_values(
    design: StudyDesign,
    exposed: FloatArray,
    other: FloatArray,
    n: FloatArray,
    baseline: FloatArray,
    allocation: FloatArray,
    years: FloatArray,
    sides: int,
    continuity: bool,
) -> FloatArray:
    """The normal test's p-value of each count outcome (1 where it is undefined)."""
    up, down = design.normal_statistic(exposed, other, n, baseline, allocation, years, continuity)
    p = special.ndtr(-up)
    if sides == 2:
        p = np.minimum(1.0, 2 * np.minimum(p, special.ndtr(down)))
    return np.asarray(np.where(np.isnan(p), 1.0, p), dtype=np.float64)


def _limit(alpha: float | FloatArray) -> FloatArray:
    return np.asarray(np.asarray(alpha) * (1 + _exact.REL_TOL), dtype=np.float64)


def normal_false_alarm(
    design: StudyDesign,
    alpha: FloatArray,
    n: FloatArray,
    baseline: FloatArray,
    allocation: FloatArray,
    years: FloatArray,
    sides: int,
    continuity: bool,
) -> FloatArray:
    """Real false-alarm probability of the normal test, for 1-D arrays of studies.

    Sums the probability, when the exposure is harmless, of every count
    outcome on the exact-power grid whose normal p-value is at most
    ``alpha``.  Studies where a cell expects more than
    :data:`~decide.designs.EXACT_UP_TO` get ``nan`` (not computed).
    """
    alpha, n, b, r, y = (
        np.asarray(x, dtype=np.float64) for x in np.broadcast_arrays(alpha, n, baseline, allocation, years)
    )
    out = np.full(n.shape, np.nan)
    ones = np.ones_like(n)
    small = (design.smallest_expected_count(n, b, ones, r, y) <= EXACT_UP_TO) & design.exact_offered(r)
    if not small.any():
        return out
    where = np.flatnonzero(small)
    model = design.count_model(n[where], b[where], ones[where][:, None], r[where], y[where])
    for idx in _exact.batches(model):
        grid = _exact.build_grid(_exact.take_rows(model, idx), sides)
        at = where[idx][:, None, None]
        x1 = grid.exposed_counts[:, :, None]
        x0 = grid.other_counts[:, None, :]
        p = normal_p_values(design, x1, x0, n[at], b[at], r[at], y[at], sides, continuity)
        flag = (p <= _limit(alpha[where[idx]])[:, None, None]) & np.isfinite(grid.p_value)
        mass = np.einsum("bij,bij->b", _exact.null_mass(grid), flag.astype(np.float64))
        out[where[idx]] = np.minimum(mass, 1.0)
    return out


# --------------------------------------------------------------------------
# one study's rule


@dataclass(frozen=True)
class _Study:
    """One study as 1-element arrays, and the test to state."""

    setting: Setting
    n: FloatArray
    baseline: FloatArray
    allocation: FloatArray
    years: FloatArray
    alpha: float
    exact: bool

    @classmethod
    def of(cls, setting: Setting, n: float, alpha: float, exact: bool) -> _Study:
        """The study of ``setting`` at size ``n``, its settings cut to their first element."""

        def one(x: FloatArray) -> FloatArray:
            return np.asarray(np.ravel(x)[:1], dtype=np.float64)

        return cls(
            setting,
            np.array([float(n)]),
            one(setting.baseline),
            one(setting.allocation),
            one(setting.years),
            float(alpha),
            exact,
        )

    @property
    def design(self) -> StudyDesign:
        return self.setting.design

    def normal_p(self, exposed: FloatArray, other: FloatArray) -> FloatArray:
        s = self.setting
        return normal_p_values(
            self.design, exposed, other, self.n, self.baseline, self.allocation, self.years, s.sides, s.continuity
        )


def decision_rule(setting: Setting, n: float, alpha: float, *, exact: bool, effect: float) -> DecisionRule:
    """The counts on which a test flags the exposure, and the alphas that give it.

    Parameters
    ----------
    setting : Setting
        The study (design, baseline, allocation, years, sides, continuity).
    n : float
        Exposed subjects (cases for case-control); a whole number.
    alpha : float
        The nominal level of the test: for an exact test, any level of its
        critical region (such as the p-value of its last flagged outcome);
        for a normal test, ``sides * Phi(-z)`` of its critical value ``z``.
    exact : bool
        The exact test (else the normal test, continuity-corrected if the
        setting says so).
    effect : float
        The effect under harm (the design effect), for the range of totals.

    Returns
    -------
    DecisionRule

    Examples
    --------
    >>> from decide.engine.study import check_setting
    >>> s = check_setting("reference-rate", 2.16e-4, None, 1.0, 1, "exact", False)
    >>> r = decision_rule(s, 10_000, 0.0682412207, exact=True, effect=3.0)
    >>> r.flag_at_least, r.cutoff_shown
    (5, '0.06825')
    """
    st = _Study.of(setting, n, alpha, exact)
    base = _rule_without_counts(st, n, alpha)
    d = setting.design
    smallest = float(d.smallest_expected_count(st.n, st.baseline, np.array([effect]), st.allocation, st.years)[0])
    if not exact and (smallest > EXACT_UP_TO or not d.exact_offered(st.allocation).all()):
        return _with_statement(base)
    model = d.count_model(st.n, st.baseline, np.array([[effect]]), st.allocation, st.years)
    grid = _exact.build_grid(model, setting.sides)
    never, cutoff, false_alarm = _critical_region(st, grid, alpha)
    rule = _replace(base, cutoff=cutoff, cutoff_shown=_shown(alpha, cutoff), false_alarm=false_alarm)
    if never:
        return _with_statement(rule)
    return _with_statement(_with_counts(rule, st, model, grid, n))


def _rule_without_counts(st: _Study, n: float, alpha: float) -> DecisionRule:
    """The rule before its counts are laid out: the study, the test and the nominal alpha."""
    s = st.setting
    count_name, total_name = _names(s.design)
    return DecisionRule(
        design=s.design.name,
        test="exact" if st.exact else ("normal-cc" if s.continuity else "normal"),
        sides=s.sides,
        n_per_group=int(n),
        nominal_alpha=float(alpha),
        cutoff=None,
        cutoff_shown=_shown(alpha, None),
        false_alarm=None,
        count_name=count_name,
        total_name=total_name,
        expected_null=None,
        flag_at_least=None,
        flag_at_most=None,
    )


def _critical_region(st: _Study, grid: _exact.CountGrid, alpha: float) -> tuple[bool, tuple[float, float], float]:
    """Whether the test never flags, the cut-off interval of its critical region, and its false-alarm probability.

    The critical region is the set of count outcomes on the grid whose
    p-value (exact, or normal from the counts) is at most ``alpha``; the
    cut-off interval ``[low, high)`` holds every level giving the same set.
    """
    p = (
        grid.p_value[0]
        if st.exact
        else np.where(
            np.isfinite(grid.p_value[0]),
            st.normal_p(grid.exposed_counts[0][:, None], grid.other_counts[0][None, :]),
            np.inf,
        )
    )
    # an exact level below the floor is the test that never flags (p-values under 1e-20 read as 0)
    never = alpha <= 0 or (st.exact and alpha < _exact.ALPHA_FLOOR)
    flag = np.zeros(p.shape, dtype=bool) if never else p <= _limit(alpha)
    false_alarm = float(min(1.0, np.sum(_exact.null_mass(grid)[0] * flag)))
    low = float(p[flag].max()) if flag.any() else 0.0
    rest = p[~flag & np.isfinite(p) & (p > 0)]
    high = float(rest.min()) if rest.size else math.inf
    if never and st.exact:
        high = _exact.ALPHA_FLOOR
    return never, (low, high), false_alarm


def _with_counts(rule: DecisionRule, st: _Study, model: CountModel, grid: _exact.CountGrid, n: float) -> DecisionRule:
    """The rule with its flagging counts: one threshold (one group), or one row per total (two groups)."""
    if model.conditional == "poisson":
        expected = float(st.baseline[0] * n * st.years[0])
        at_least, at_most = _one_group(st, expected)
        return _replace(rule, expected_null=expected, flag_at_least=at_least, flag_at_most=at_most)
    totals = _totals(grid)
    rows = _exact_rows(st, model, totals) if st.exact else _normal_rows(st, totals)
    return _replace(rule, thresholds=rows)


def _replace(rule: DecisionRule, **changes: object) -> DecisionRule:
    return replace(rule, **changes)  # type: ignore[arg-type]


def _names(d: StudyDesign) -> tuple[str, str | None]:
    return d.count_words


def _one_group(st: _Study, expected: float) -> tuple[int | None, int | None]:
    """Thresholds of a one-group test on the observed count."""
    s = st.setting
    if st.exact:  # a count whose upper tail is below alpha / 1000
        top = expected + 10 * math.sqrt(expected) + 10
        while special.pdtrc(top, expected) > min(st.alpha, 0.5) * 1e-3:
            top *= 2
        top += 1
    else:  # beyond it the square-root statistic exceeds the critical value
        z = float(_normal.critical_z(np.asarray(st.alpha), s.sides))
        top = (math.sqrt(expected) + abs(z) / 2) ** 2 + 2
    x = np.arange(0.0, math.ceil(top) + 1)[None, :]
    if st.exact:
        p = _exact.poisson_p_values(x, np.array([expected]), s.sides)[0]
    else:
        p = st.normal_p(x[0], np.zeros_like(x[0]))
    flagged = x[0][p <= _limit(st.alpha)]
    if s.sides == 1:
        return (int(flagged.min()) if flagged.size else None), None
    up, down = flagged[flagged > expected], flagged[flagged < expected]
    return (int(up.min()) if up.size else None), (int(down.max()) if down.size else None)


def _totals(grid: _exact.CountGrid) -> FloatArray:
    """Totals carrying :data:`TABLE_MASS` of the probability under no harm and under harm."""
    start = grid.exposed_counts[0, 0] + grid.other_counts[0, 0]
    lo, hi = math.inf, -math.inf
    tail = (1 - TABLE_MASS) / 2
    if grid.alt_joint is None:
        masses = [np.outer(grid.null_exposed[0], grid.other[0]), np.outer(grid.alt_exposed[0, 0], grid.other[0])]
    else:
        masses = [_exact.null_mass(grid)[0], grid.alt_joint.mass(slice(0, 1))[0, 0]]
    diagonal = np.add.outer(np.arange(masses[0].shape[0]), np.arange(masses[0].shape[1])).ravel()
    for mass in masses:
        cdf = np.cumsum(np.bincount(diagonal, weights=mass.ravel())).astype(np.float64)
        cdf /= cdf[-1]
        lo = min(lo, start + int(np.searchsorted(cdf, tail)))
        hi = max(hi, start + int(np.searchsorted(cdf, 1 - tail)))
    return np.arange(lo, hi + 1, dtype=np.float64)


def _exact_rows(st: _Study, model: CountModel, totals: FloatArray) -> tuple[Threshold, ...]:
    """Thresholds of the exact conditional test, from the null law of each row."""
    rows = _exact.conditional_rows(model, totals[None, :])
    x, lim, sides = rows.counts[0], _limit(st.alpha), st.setting.sides
    inside = x <= rows.last[0][:, None]
    up = inside & (np.minimum(1.0, sides * rows.upper[0]) <= lim)
    c = _first(x, up, fallback=np.where(rows.last[0] < rows.most[0], rows.last[0] + 1, np.nan))
    a = np.full(totals.shape, np.nan)
    if sides == 2:
        down = inside & (np.minimum(1.0, 2 * rows.lower[0]) <= lim)
        a = _last(x, down, fallback=np.where(rows.first[0] > rows.least[0], rows.first[0] - 1, np.nan))
    return _thresholds(totals, c, a)


def _first(x: FloatArray, mask: NDArray[np.bool_], fallback: FloatArray) -> FloatArray:
    """The smallest ``x`` of each row where ``mask`` holds, else ``fallback``."""
    return np.asarray(np.where(mask.any(axis=1), np.where(mask, x, np.inf).min(axis=1), fallback))


def _last(x: FloatArray, mask: NDArray[np.bool_], fallback: FloatArray) -> FloatArray:
    """The largest ``x`` of each row where ``mask`` holds, else ``fallback``."""
    return np.asarray(np.where(mask.any(axis=1), np.where(mask, x, -np.inf).max(axis=1), fallback))


def _support(st: _Study, totals: FloatArray) -> tuple[FloatArray, FloatArray]:
    """The exposed counts possible given each total."""
    d = st.design
    if d.binomial_groups:
        n0 = float(d.comparison_size(st.n, st.allocation)[0])
        return np.maximum(0.0, totals - n0), np.minimum(totals, st.n[0])
    return np.zeros_like(totals), totals


def _normal_rows(st: _Study, totals: FloatArray) -> tuple[Threshold, ...]:
    """Thresholds of the normal test by bisection on the exposed count of each total.

    The normal statistic rises with the exposed count at a fixed total, so
    the flagged counts of each side form one run at its end.
    """
    lo, hi = _support(st, totals)
    lim = _limit(st.alpha)

    def flags(x: FloatArray, side: int) -> NDArray[np.bool_]:
        up, down = st.design.normal_statistic(
            x, totals - x, st.n, st.baseline, st.allocation, st.years, st.setting.continuity
        )
        tail = special.ndtr(-up) if side > 0 else special.ndtr(down)
        return np.asarray(np.minimum(1.0, st.setting.sides * tail) <= lim)

    c = _bisect(lambda x: flags(x, 1), lo, hi, rising=True)
    a = _bisect(lambda x: flags(x, -1), lo, hi, rising=False) if st.setting.sides == 2 else np.full_like(c, np.nan)
    return _thresholds(totals, c, a)


def _bisect(f: Callable[[FloatArray], NDArray[np.bool_]], lo: FloatArray, hi: FloatArray, rising: bool) -> FloatArray:
    """The first (``rising``) or last flagged whole count in ``[lo, hi]``; ``nan`` if none."""
    left, right = lo - 1, hi + 1  # left never flags, right always does (rising), or mirrored
    if not rising:
        left, right = hi + 1, lo - 1
    steps = int(np.ceil(np.log2(max(2.0, float(np.max(hi - lo)) + 2)))) + 1
    for _ in range(steps):
        mid = np.floor((left + right) / 2)
        inside = np.abs(right - left) > 1
        hit = f(np.clip(mid, lo, hi)) & inside
        right = np.where(hit, mid, right)
        left = np.where(inside & ~hit, mid, left)
    ok = (right >= lo) & (right <= hi)
    return np.asarray(np.where(ok, right, np.nan))


def _thresholds(totals: FloatArray, c: FloatArray, a: FloatArray) -> tuple[Threshold, ...]:
    def whole(v: float) -> int | None:
        return None if np.isnan(v) else int(v)

    return tuple(Threshold(int(t), whole(ci), whole(ai)) for t, ci, ai in zip(totals, c, a, strict=True))


# --------------------------------------------------------------------------
# the shown cut-off and the sentence


def _shown(alpha: float, cutoff: tuple[float, float] | None) -> str:
    """The nominal alpha rounded into ``[low, high)``: the fewest digits that keep the rule.

    Rounds ``alpha`` to :data:`SHOWN_DIGITS` significant digits or more; where
    plain rounding would fall outside the interval, rounds its lower end up.
    """
    if cutoff is None:
        return f"{alpha:.{SHOWN_DIGITS}g}"
    low, high = cutoff
    for digits in range(SHOWN_DIGITS, 18):
        for text in (f"{alpha:.{digits}g}", _round_up(max(low, 0.0), digits)):
            if low <= float(text) < high and float(text) <= 1.0:
                return text
    return repr(alpha)


def _round_up(value: float, digits: int) -> str:
    """``value`` rounded up to ``digits`` significant digits, as text."""
    if value <= 0:
        return "0"
    exponent = math.floor(math.log10(value)) - digits + 1
    scaled = math.ceil(round(value / 10.0**exponent, 6))
    text = f"{scaled * 10.0**exponent:.{digits}g}"
    while float(text) < value:  # guard against the float scaling
        scaled += 1
        text = f"{scaled * 10.0**exponent:.{digits}g}"
    return text


def _with_statement(rule: DecisionRule) -> DecisionRule:
    return _replace(rule, statement=statement(rule))


def statement(rule: DecisionRule) -> str:
    """The rule in one sentence."""
    if rule.total_name is None and (rule.flag_at_least is not None or rule.flag_at_most is not None):
        parts = []
        if rule.flag_at_least is not None:
            parts.append(f"{rule.flag_at_least:,} or more")
        if rule.flag_at_most is not None:
            parts.append(f"{rule.flag_at_most:,} or fewer")
        assert rule.expected_null is not None
        return (
            f"Flag the exposure if {' or '.join(parts)} {rule.count_name} are observed "
            f"({rule.expected_null:.3g} expected at the reference rate)."
        )
    if rule.thresholds:
        return (
            f"Flag the exposure if the {rule.count_name} reach the threshold listed for the total "
            f"number of {rule.total_name} observed."
        )
    if rule.cutoff is not None:
        return "No outcome of the study flags the exposure."
    return (
        f"Flag the exposure if the {rule.test} test is significant at alpha = {rule.cutoff_shown} "
        "(the counts are too many to lay out)."
    )
