"""Solve the power equation for whichever of alpha, power, size, effect is missing.

Fix three of alpha, power, size (exposed subjects or cases) and effect, and
:func:`solve` returns the fourth, with the test that suits the study.

With an exact test the power is a saw-tooth in the size: a larger study can
have less power, because the critical count jumps.  A size solve then reports
both the smallest size that reaches the target and the *stable* size beyond
which power never falls below it again (checked over the range it states).

References
----------
.. [1] Fleiss, J. L., Levin, B. and Paik, M. C. (2003). *Statistical Methods
   for Rates and Proportions*, 3rd ed., Wiley, ch. 4.
.. [2] Chernick, M. R. and Liu, C. Y. (2002). The saw-toothed behavior of
   power versus sample size and software solutions: single binomial
   proportion using exact methods. *Am. Stat.* 56, 149-155.
.. [3] Breslow, N. E. and Day, N. E. (1987). *Statistical Methods in Cancer
   Research, vol. II*. IARC Scientific Publications 82, ch. 7.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any, NamedTuple, overload

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

from .. import _checks
from .._results import PlainData
from ..designs import StudyDesign
from ..designs._base import FloatArray
from ..errors import DecideError, InfeasibleError
from . import exact as _exact
from . import normal as _normal
from .power import evaluate, exact_power
from .selection import TestChoice, choose_test, first_normal_size
from .solve_many import solve_many
from .study import Setting, check_alpha_power, check_effect, check_setting

UNKNOWNS = ("alpha", "power", "n_per_group", "effect")
#: Default cap on the exposed group (or cases) for size solves.
MAX_N_PER_GROUP = _checks.LARGEST_SIZE
#: Default cap on the effect for effect solves where the design sets none
#: (the largest effect decide considers).
MAX_EFFECT = _checks.EFFECT_RANGE[1]
#: The largest critical count the one-group exact size search goes to.
MAX_CRITICAL_COUNT = 2**20
#: The most count pairs, over all the grids it builds, one exact size scan may
#: go through (ten seconds or so at the limit).
MAX_SEARCH_PAIRS = 10_000_000


@dataclass(frozen=True)
class Solution(PlainData):
    """One solved study: the four quantities, the test and how it was chosen.

    ``alpha`` is the nominal level; ``attained_alpha`` the probability of a
    significant result when the exposure is harmless (at most ``alpha`` for
    exact and continuity-corrected tests).  For a size solve, ``power`` is the
    power at the reported whole size, which is at least the target, and with
    an exact test ``n_stable`` is the size beyond which power stays at or
    above the target (checked up to ``n_checked``).

    Scalar inputs give this; array inputs give a :class:`SolutionArray`.
    """

    design: str
    solved_for: str
    test: str
    test_reason: str
    method: str
    sides: int
    baseline: float
    allocation: float
    years: float
    alpha: float
    attained_alpha: float
    power: float
    beta: float
    effect: float
    n_per_group: int
    n_total: int
    expected_cases: dict[str, float]
    smallest_expected_count: float
    target_power: float | None = None
    n_stable: int | None = None
    n_checked: int | None = None
    warnings: tuple[str, ...] = field(default=())
    #: probability of a flag when harmless under the exact law of the counts
    #: (the normal test's real false-alarm probability); None where not computed
    false_alarm: float | None = None


@dataclass(frozen=True)
class SolutionArray(PlainData):
    """Many solved studies at once: the fields of :class:`Solution`, one element per study.

    Every field but ``design``, ``solved_for``, ``sides`` and ``warnings`` is
    an ndarray of the inputs' broadcast shape: numbers as float64 (sizes too,
    whole-valued), with ``nan`` where an element has no answer within the
    caps or a value does not apply (``n_stable`` of a normal-test element);
    ``test``, ``test_reason`` and ``method`` are arrays of strings;
    ``expected_cases`` is a dict of arrays; ``warnings`` gathers every
    element's notes once.  Each element equals the scalar solve of its inputs.
    """

    design: str
    solved_for: str
    test: NDArray[np.str_]
    test_reason: NDArray[np.str_]
    method: NDArray[np.str_]
    sides: int
    baseline: FloatArray
    allocation: FloatArray
    years: FloatArray
    alpha: FloatArray
    attained_alpha: FloatArray
    power: FloatArray
    beta: FloatArray
    effect: FloatArray
    n_per_group: FloatArray
    n_total: FloatArray
    expected_cases: dict[str, FloatArray]
    smallest_expected_count: FloatArray
    target_power: FloatArray | None = None
    n_stable: FloatArray | None = None
    n_checked: FloatArray | None = None
    warnings: tuple[str, ...] = field(default=())
    false_alarm: FloatArray | None = None


# --------------------------------------------------------------------------
# vectorised normal solves


def _moments(setting: Setting, effect: FloatArray) -> Any:
    return setting.design.normal_moments(
        setting.baseline, effect, setting.allocation, setting.years, setting.continuity
    )


def normal_size(setting: Setting, alpha: FloatArray, power: FloatArray, effect: FloatArray) -> FloatArray:
    """Continuous exposed-group size for the normal test (near tail only)."""
    return _normal.size(_moments(setting, effect), alpha, power, setting.sides)


def normal_alpha(setting: Setting, n: FloatArray, power: FloatArray, effect: FloatArray) -> FloatArray:
    """Nominal alpha at which ``n`` reaches ``power`` with the normal test (near tail)."""
    return _normal.alpha_for(_moments(setting, effect), n, power, setting.sides)


def _bracket_increasing(
    f: Callable[[FloatArray], FloatArray],
    lo: FloatArray,
    hi: FloatArray,
    target: FloatArray,
    points: int,
    rounds: int,
) -> FloatArray:
    """Smallest x in (lo, hi] with f(x) >= target, for f increasing in x.

    Each round evaluates ``points`` interior points of every bracket at once
    (so ``f`` sees arrays of shape ``(E, points)``) and keeps the sub-bracket
    holding the crossing; the bracket shrinks by ``points + 1`` a round.
    """
    lo, hi = np.array(lo, dtype=np.float64), np.array(hi, dtype=np.float64)
    frac = np.arange(1, points + 1) / (points + 1)
    for _ in range(rounds):
        x = lo[:, None] + (hi - lo)[:, None] * frac
        above = f(x) >= target[:, None]
        k = np.where(above.any(axis=1), above.argmax(axis=1), points)
        new_hi = np.where(k < points, x[np.arange(x.shape[0]), np.minimum(k, points - 1)], hi)
        lo = np.where(k > 0, x[np.arange(x.shape[0]), np.maximum(k - 1, 0)], lo)
        hi = new_hi
    return hi


def effect_cap(setting: Setting) -> FloatArray:
    """The largest effect an effect solve may return."""
    limit = setting.design.effect_limit(setting.baseline)
    return np.asarray(np.where(np.isfinite(limit), limit * (1 - 1e-12), MAX_EFFECT))


def normal_effect(setting: Setting, alpha: FloatArray, n: FloatArray, power: FloatArray) -> FloatArray:
    """Smallest effect above 1 the normal test detects with the given power.

    Returns ``nan`` where no effect up to the cap (:func:`effect_cap`) does.
    """
    a, nn, p, b, r, y = np.broadcast_arrays(alpha, n, power, setting.baseline, setting.allocation, setting.years)
    shape = a.shape
    a, nn, p, b, r, y = (np.ravel(x) for x in (a, nn, p, b, r, y))
    cap = np.log(np.ravel(np.broadcast_to(effect_cap(setting), shape)))
    d = setting.design

    def near_tail(log_effect: FloatArray) -> FloatArray:
        m = d.normal_moments(b[:, None], np.exp(log_effect), r[:, None], y[:, None], setting.continuity)
        return (
            _normal.power(m, nn[:, None], a[:, None], 1)
            if setting.sides == 1
            else (_normal.power(m, nn[:, None], a[:, None] / 2, 1))
        )

    reach = near_tail(cap[:, None])[:, 0] >= p
    found = _bracket_increasing(near_tail, np.zeros_like(cap), cap, p, 31, 12)
    return np.asarray(np.where(reach, np.exp(found), np.nan).reshape(shape))


# --------------------------------------------------------------------------
# exact solves (scalar studies; the searches inside are batched)


def _exact_curve(setting: Setting, alpha: float, effect: float) -> Callable[[FloatArray], FloatArray]:
    """Exact power as a function of the size, within a budget of :data:`MAX_SEARCH_PAIRS`."""
    d = setting.design
    spent = [0.0]

    def curve(n: FloatArray) -> FloatArray:
        n = np.asarray(n, dtype=np.float64)
        flat = n.ravel()
        full = np.ones_like(flat)
        b, r, y = (float(v) * full for v in (setting.baseline, setting.allocation, setting.years))
        pairs = _exact.count_pairs(d.count_model(flat, b, effect * full[:, None], r, y))
        # a one-group grid needs no conditional rows: about an eighth of the work per count
        spent[0] += float(pairs.sum()) / (8.0 if d.groups == 1 else 1.0)
        if spent[0] > MAX_SEARCH_PAIRS:
            raise InfeasibleError(
                f"n_per_group: the exact size search would go through more than {MAX_SEARCH_PAIRS:,} count "
                "pairs, the limit that keeps its time bounded; use the normal test, which agrees closely "
                "at counts this large"
            )
        pw, _ = exact_power(
            d,
            alpha * full,
            flat,
            effect * full,
            float(setting.baseline) * full,
            float(setting.allocation) * full,
            float(setting.years) * full,
            setting.sides,
        )
        return pw.reshape(n.shape)

    return curve


def _first_crossing(curve: Callable[[FloatArray], FloatArray], below: int, above: int, target: float) -> int:
    """Smallest whole size in (below, above] with power >= target, scanning in batches."""
    while above - below > 1:
        cand = np.unique(np.linspace(below, above, 66).round()[1:-1]).astype(np.float64)
        cand = cand[(cand > below) & (cand < above)]
        if cand.size == 0:
            break
        hit = curve(cand) >= target
        if hit.any():
            k = int(hit.argmax())
            above = int(cand[k])
            below = int(cand[k - 1]) if k > 0 else below
        else:
            below = int(cand[-1])
    return above


def _last_failure(curve: Callable[[FloatArray], FloatArray], below: int, above: int, target: float) -> int:
    """Given power(below) < target <= power(n) for n in a checked tail, the size after the last dip."""
    while above - below > 1:
        cand = np.unique(np.linspace(below, above, 66).round()[1:-1]).astype(np.float64)
        cand = cand[(cand > below) & (cand < above)]
        if cand.size == 0:
            break
        miss = curve(cand) < target
        if miss.any():
            k = int(np.flatnonzero(miss)[-1])
            below = int(cand[k])
            above = int(cand[k + 1]) if k + 1 < cand.size else above
        else:
            above = int(cand[0])
    return above


def _exact_size_scan(
    setting: Setting, alpha: float, target: float, effect: float, guess: float, cap: int
) -> tuple[int, int, int]:
    """Smallest and stable sizes by a batched scan of exact power.

    Where the range to check is small (see :data:`EVERY_SIZE`) every whole
    size is evaluated; otherwise a geometric grid is refined to the whole
    subject around the first crossing and the last dip it finds, and the 256
    sizes either side are checked one by one.  A dip narrower than the grid
    spacing far from both can then go unseen; two-group designs saw-tooth
    far less than one-group ones, which the larger limit covers.
    """
    curve = _exact_curve(setting, alpha, effect)
    hi = int(min(cap, max(16, np.ceil(2 * guess))))
    while curve(np.array([float(hi)]))[0] < target:
        if hi >= cap:
            raise InfeasibleError(
                f"n_per_group: no size up to the cap of {cap:,} reaches power {target:g} with the exact test"
            )
        hi = min(cap, hi * 2)
    checked = min(cap, 2 * hi)
    if checked <= _every_size_limit(setting):
        return _every_size(curve, target, checked)
    grid = np.unique(np.concatenate([np.geomspace(1, hi, 97).round(), np.linspace(hi, checked, 33).round()]))
    pw = curve(grid)
    first = int(np.argmax(pw >= target))
    n_first = int(grid[0]) if first == 0 else _first_crossing(curve, int(grid[first - 1]), int(grid[first]), target)
    local = np.arange(max(1, n_first - 256), n_first, dtype=np.float64)
    if local.size:
        early = curve(local) >= target
        if early.any():
            n_first = int(local[int(early.argmax())])
    misses = np.flatnonzero(pw < target)
    misses = misses[grid[misses] > n_first]
    if misses.size == 0:
        n_stable = n_first
        tail = np.arange(n_first, min(n_first + 256, checked) + 1, dtype=np.float64)
        dips = np.flatnonzero(curve(tail) < target)
        if dips.size:
            n_stable = int(tail[dips[-1]]) + 1
    else:
        k = int(misses[-1])
        n_stable = _last_failure(curve, int(grid[k]), int(grid[k + 1]), target)
    return n_first, max(n_stable, n_first), checked


#: Up to this many whole sizes, an exact size solve evaluates every one of them.
EVERY_SIZE = {"one-group": 200_000, "two-group": 200}


def _every_size_limit(setting: Setting) -> int:
    return EVERY_SIZE["one-group" if setting.design.groups == 1 else "two-group"]


def _every_size(curve: Callable[[FloatArray], FloatArray], target: float, checked: int) -> tuple[int, int, int]:
    """First and stable sizes from the exact power at every whole size up to ``checked``."""
    sizes = np.arange(1, checked + 1, dtype=np.float64)
    ok = np.concatenate([curve(part) for part in np.array_split(sizes, max(1, sizes.size // 20_000))]) >= target
    n_first = int(sizes[int(np.argmax(ok))])
    misses = np.flatnonzero(~ok)
    n_stable = int(sizes[misses[-1]]) + 1 if misses.size else n_first
    return n_first, max(n_first, n_stable), checked


def _poisson_test_sizes(setting: Setting, alpha: float, target: float, effect: float, cap: int) -> tuple[int, int, int]:
    """Exact one-sided sizes for the Poisson test against an expected count, segment by segment.

    With ``u`` expected cases per subject, the critical count is ``c`` for
    ``E = n*u`` in ``(e_(c-1), e_c]`` where ``P(Poisson(e_c) >= c) = alpha``,
    and within that segment power ``P(Poisson(SIR*E) >= c)`` rises with ``n``:
    both follow from the regularized incomplete gamma function, so every
    segment is solved in closed form.
    """
    one = np.ones(1)
    model = setting.design.count_model(one, setting.baseline * one, one, setting.allocation * one, setting.years * one)
    assert model.reference_mean is not None
    u = float(model.reference_mean[0])  # expected cases per subject under no effect
    c_max = 64
    while True:
        c = np.arange(1, c_max + 1, dtype=np.float64)
        edge = special.gammaincinv(c, alpha)
        start = np.floor(np.concatenate([[0.0], edge[:-1]]) / u) + 1
        end = np.floor(edge / u)
        need = np.ceil(special.gammaincinv(c, target) / (effect * u))
        reach = np.maximum(start, need)
        ok = (reach <= end) & (start <= end)
        start_power = special.gammainc(c, effect * start * u)
        if ok.any():
            fails = np.flatnonzero((start <= end) & (start_power < target))
            first_ok = int(np.flatnonzero(ok)[0])
            settled = fails.size == 0 or fails[-1] < 0.8 * c_max
            if settled or start[-1] > cap:
                break
        elif start[-1] > cap:
            raise InfeasibleError(f"n_per_group: no size up to the cap of {cap:,} reaches power {target:g}")
        if c_max >= MAX_CRITICAL_COUNT:
            raise InfeasibleError(
                f"n_per_group: the exact test would need a critical count above {MAX_CRITICAL_COUNT:,}, "
                "the limit that keeps the search bounded; use the normal test, which agrees closely "
                "at counts this large"
            )
        c_max *= 2
    n_first = int(reach[first_ok])
    if fails.size == 0:
        n_stable = n_first
    else:
        last = int(fails[-1])
        n_stable = int(reach[last]) if ok[last] else int(end[last]) + 1
    return n_first, max(n_first, n_stable), int(end[-1])


# --------------------------------------------------------------------------
# the public solver


def _only_unknown(values: dict[str, Any]) -> str:
    missing = [k for k, v in values.items() if v is None]
    if len(missing) != 1:
        given = "none" if not missing else " and ".join(missing)
        raise DecideError(
            f"leave out exactly one of alpha, power, n_per_group, effect to solve for it, "
            f"but {'all four were given' if not missing else given + ' were left out'}",
            UNKNOWNS,
        )
    return missing[0]


@overload
def solve(
    design: str | StudyDesign,
    *,
    baseline: float,
    alpha: float | None = None,
    power: float | None = None,
    n_per_group: float | None = None,
    effect: float | None = None,
    allocation: float | None = None,
    years: float | None = None,
    sides: int = 1,
    test: str = "auto",
    continuity: bool = False,
    max_n_per_group: int = MAX_N_PER_GROUP,
) -> Solution: ...


@overload
def solve(
    design: str | StudyDesign,
    *,
    baseline: ArrayLike,
    alpha: ArrayLike | None = None,
    power: ArrayLike | None = None,
    n_per_group: ArrayLike | None = None,
    effect: ArrayLike | None = None,
    allocation: ArrayLike | None = None,
    years: ArrayLike | None = None,
    sides: int = 1,
    test: str = "auto",
    continuity: bool = False,
    max_n_per_group: int = MAX_N_PER_GROUP,
) -> Solution | SolutionArray: ...


def solve(
    design: str | StudyDesign,
    *,
    baseline: ArrayLike,
    alpha: ArrayLike | None = None,
    power: ArrayLike | None = None,
    n_per_group: ArrayLike | None = None,
    effect: ArrayLike | None = None,
    allocation: ArrayLike | None = None,
    years: ArrayLike | None = None,
    sides: int = 1,
    test: str = "auto",
    continuity: bool = False,
    max_n_per_group: int = MAX_N_PER_GROUP,
) -> Solution | SolutionArray:
    """Solve for the one of alpha, power, n_per_group, effect left out.

    Parameters
    ----------
    design, baseline, allocation, years, sides, test, continuity
        As in :func:`decide.power`.
    alpha, power, n_per_group, effect : float, array_like or None
        Exactly one is ``None``: the unknown (a solved effect is the smallest above 1 detectable with the given
        power).  Arrays, here or in ``baseline``, ``allocation``, ``years``, broadcast together; each is solved.
    max_n_per_group : int
        Cap on a solved size; beyond it the solve reports infeasibility.

    Returns
    -------
    Solution or SolutionArray
        A :class:`Solution` of Python scalars for scalar inputs; for array inputs a :class:`SolutionArray` of
        the broadcast shape, each element equal to the scalar solve of its inputs: the normal-test elements are
        answered at once from the closed forms, the exact-test ones searched once per distinct design point
        (:mod:`~.solve_many`).

    Raises
    ------
    DecideError
        Impossible input (the message names the parameter).
    InfeasibleError
        No answer within the caps (size or effect), for scalar inputs; an array solve puts ``nan`` there instead.

    References
    ----------
    .. [1] Fleiss, J. L., Levin, B. and Paik, M. C. (2003). *Statistical Methods for Rates and Proportions*, 3rd
       ed., Wiley, ch. 4.
    .. [2] Schlesselman, J. J. (1974). *Am. J. Epidemiol.* 99, 381-384.

    Examples
    --------
    >>> from decide import solve
    >>> s = solve("case-control", baseline=0.3, effect=2.0, alpha=0.05, power=0.9, sides=2, test="normal")
    >>> s.n_per_group, s.n_total
    (188, 376)
    >>> many = solve("case-control", baseline=0.3, effect=[1.5, 2.0], alpha=0.05, power=0.9, sides=2, test="normal")
    >>> many.n_per_group.tolist()
    [569.0, 188.0]
    """
    q = _checked_question(
        design, baseline, alpha, power, n_per_group, effect, allocation, years, sides, test, continuity, max_n_per_group
    )
    return _answer(q)


class _Question(NamedTuple):
    """A checked solve: the study, the unknown, whether arrays were given, the four quantities and the size cap."""

    setting: Setting
    unknown: str
    arrays: bool
    alpha: Any
    power: Any
    n_per_group: Any
    effect: Any
    cap: int

    def given(self) -> dict[str, Any]:
        """The quantities given (all but the unknown), in the order of :data:`UNKNOWNS`."""
        values = (self.alpha, self.power, self.n_per_group, self.effect)
        return {k: v for k, v in zip(UNKNOWNS, values, strict=True) if v is not None}


def _answer(q: _Question) -> Solution | SolutionArray:
    """Solve a checked question: elementwise for arrays (:mod:`~.solve_many`), else by the unknown's solver."""
    if q.arrays:
        fields = solve_many(solve, q.setting, q.unknown, q.given(), q.cap)
        return SolutionArray(design=q.setting.design.name, solved_for=q.unknown, sides=q.setting.sides, **fields)
    return _SOLVERS[q.unknown](q.setting, q.alpha, q.power, q.n_per_group, q.effect, q.cap)


def _checked_question(
    design: str | StudyDesign,
    baseline: ArrayLike,
    alpha: ArrayLike | None,
    power: ArrayLike | None,
    n_per_group: ArrayLike | None,
    effect: ArrayLike | None,
    allocation: ArrayLike | None,
    years: ArrayLike | None,
    sides: int,
    test: str,
    continuity: bool,
    max_n_per_group: int,
) -> _Question:
    """Check a solve's inputs (the unknown, their shapes, the study, then each quantity) in that order."""
    unknown = _only_unknown({"alpha": alpha, "power": power, "n_per_group": n_per_group, "effect": effect})
    named = {
        "alpha": alpha,
        "power": power,
        "n_per_group": n_per_group,
        "effect": effect,
        "baseline": baseline,
        "allocation": allocation,
        "years": years,
    }
    arrays = any(v is not None and np.ndim(v) for v in named.values())
    if arrays:
        given = {k: v for k, v in named.items() if v is not None}
        _checks.broadcast(tuple(given), *(_checks.as_float_array(k, v) for k, v in given.items()))
    else:
        alpha, power, effect = (
            None if v is None else _checks.scalar(k, v)
            for k, v in (("alpha", alpha), ("power", power), ("effect", effect))
        )
    setting = check_setting(design, baseline, allocation, years, sides, test, continuity)
    check_alpha_power(alpha, power)
    if n_per_group is not None:
        whole = _checks.whole_at_least_one("n_per_group", n_per_group)
        n_per_group = whole if arrays else int(_checks.scalar("n_per_group", whole))
    cap = int(_checks.scalar("max_n_per_group", _checks.whole_at_least_one("max_n_per_group", max_n_per_group)))
    if effect is not None:
        check_effect(setting, effect)
        _check_detectable(unknown, setting.sides, np.asarray(effect, dtype=np.float64))
    return _Question(setting, unknown, arrays, alpha, power, n_per_group, effect, cap)


def _check_detectable(unknown: str, sides: int, effect: FloatArray) -> None:
    """An effect a size or alpha solve can look for: above 1 (one-sided, or any size solve), never 1."""

    def first(bad: Any) -> float:
        return float(np.ravel(effect)[np.flatnonzero(np.ravel(bad))[0]])

    if unknown in ("n_per_group", "alpha") and sides == 1 and np.any(effect <= 1):
        raise DecideError(f"effect must be above 1 for a one-sided test of harm, but got {first(effect <= 1):g}")
    if unknown in ("n_per_group", "alpha") and np.any(effect == 1):
        raise DecideError("effect must differ from 1 to be detectable, but got 1")
    if unknown == "n_per_group" and np.any(effect < 1):
        raise DecideError(f"effect must be above 1: size solves look for harm, but got {first(effect < 1):g}")


def _finish(
    setting: Setting,
    solved_for: str,
    alpha: float,
    n: int,
    effect: float,
    use_exact: bool,
    target: float | None,
    n_stable: int | None = None,
    n_checked: int | None = None,
    extra: tuple[str, ...] = (),
) -> Solution:
    d = setting.design
    forced = replace(setting, test="exact" if use_exact else "normal")
    res = evaluate(forced, np.asarray(alpha), np.asarray(float(n)), np.asarray(effect))
    b, r, y = setting.baseline, setting.allocation, setting.years
    nn = np.asarray(float(n))
    cells = d.cell_counts(nn, b, np.asarray(effect), r, y)
    smallest = float(res.smallest_expected_count)
    no_exact = "" if d.exact_offered(r).all() else d.no_exact_reason
    test, method = _test_and_method(setting, use_exact)
    return Solution(
        design=d.name,
        solved_for=solved_for,
        test=test,
        test_reason=TestChoice(
            requested=setting.test, exact=use_exact, smallest_count=smallest, no_exact=no_exact
        ).reason,
        method=method,
        sides=setting.sides,
        baseline=float(b),
        allocation=float(r),
        years=float(y),
        alpha=float(alpha),
        attained_alpha=float(res.attained_alpha),
        power=float(res.power),
        beta=float(1 - res.power),
        effect=float(effect),
        n_per_group=int(n),
        n_total=int(n + d.comparison_size(nn, r)),
        expected_cases={k: float(v) for k, v in cells.items()},
        smallest_expected_count=smallest,
        target_power=target,
        n_stable=n_stable,
        n_checked=n_checked,
        warnings=tuple(extra) + res.warnings,
        false_alarm=_computed(res.false_alarm()),
    )


def _test_and_method(setting: Setting, use_exact: bool) -> tuple[str, str]:
    """The test's name and the method that ran, sides first."""
    d = setting.design
    if use_exact:
        test = "exact"
        method = d.exact_method + d.describe_settings()
    else:
        test = "normal-cc" if setting.continuity else "normal"
        method = d.normal_method + d.describe_settings() + (", continuity-corrected" if setting.continuity else "")
    sided = "one-sided (harm)" if setting.sides == 1 else "two-sided (equal tails)"
    return test, f"{sided} {method}"


def _computed(x: FloatArray) -> float | None:
    value = float(np.ravel(x)[0])
    return None if np.isnan(value) else value


def _wants_exact(setting: Setting, n: float, effect: float) -> bool:
    return choose_test(setting, n, effect).exact


def _solve_power(setting: Setting, alpha: Any, power: Any, n: Any, effect: Any, cap: int) -> Solution:
    return _finish(setting, "power", alpha, n, effect, _wants_exact(setting, n, effect), None)


def _solve_size(setting: Setting, alpha: Any, target: Any, n: Any, effect: Any, cap: int) -> Solution:
    a, p, e = np.asarray(alpha), np.asarray(target), np.asarray(effect)
    guess = float(normal_size(setting, a, p, e))
    n_normal = max(1, int(np.ceil(guess - 1e-9)))
    if not _wants_exact(setting, n_normal, effect):
        if n_normal > cap:
            raise InfeasibleError(
                f"n_per_group: the normal test needs {n_normal:,} per group, more than the cap of {cap:,}"
            )
        return _finish(setting, "n_per_group", alpha, n_normal, effect, False, target)
    if setting.design.exact_test == "poisson" and setting.sides == 1:
        first, stable, checked = _poisson_test_sizes(setting, alpha, target, effect, cap)
    else:
        first, stable, checked = _exact_size_scan(setting, alpha, target, effect, guess, cap)
    if first > cap:
        raise InfeasibleError(f"n_per_group: the exact test needs {first:,} per group, more than the cap of {cap:,}")
    if not _wants_exact(setting, first, effect):
        # the test is chosen at the size reported: where the exact test first reaches the target
        # every cell expects enough for the normal test, which reaches it from a smaller size on
        n_switch = first_normal_size(setting, effect, n_normal, first)
        note = (
            f"the exact test first reaches power {target:g} at {first:,}; from {n_switch:,} on, "
            "every cell expects enough cases for the normal test, which reaches it there"
        )
        return _finish(setting, "n_per_group", alpha, n_switch, effect, False, target, extra=(note,))
    notes: tuple[str, ...] = ()
    if stable > first:
        notes = (
            f"exact power saw-tooths in size: {first:,} is the smallest size reaching power "
            f"{target:g}, but power dips below it again until {stable:,} (checked to {checked:,})",
        )
    return _finish(setting, "n_per_group", alpha, first, effect, True, target, stable, checked, notes)


def _solve_alpha(setting: Setting, alpha: Any, target: Any, n: Any, effect: Any, cap: int) -> Solution:
    nn, p, e = np.asarray(float(n)), np.asarray(target), np.asarray(effect)
    if not _wants_exact(setting, n, effect):
        a = float(normal_alpha(setting, nn, p, e))
        if not 0 < a < 1:
            raise InfeasibleError(f"alpha: no significance level below 1 gives power {target:g} with {n:,} per group")
        return _finish(setting, "alpha", a, n, effect, False, target)
    d = setting.design
    model = d.count_model(
        nn[None], setting.baseline[None], e[None, None], setting.allocation[None], setting.years[None]
    )
    path = _exact.rejection_path(_exact.build_grid(model, setting.sides), np.ones((1, 1)))
    reach = path.last[0] & (path.weighted[0, 0] >= target * (1 - 1e-12)) & (path.p_value[0] < 1)
    if not reach.any():
        raise InfeasibleError(
            f"alpha: no significance level below 1 gives power {target:g} with {n:,} per group under the exact test"
        )
    a = float(path.p_value[0, int(reach.argmax())])
    notes: tuple[str, ...] = ()
    if a < _exact.ALPHA_FLOOR:
        a = _exact.ALPHA_FLOOR
        notes = (
            f"power {target:g} is reached even at alpha {a:g}, the smallest level the exact tests "
            "resolve; that level is reported",
        )
    return _finish(setting, "alpha", a, n, effect, True, target, extra=notes)


def _solve_effect(setting: Setting, alpha: Any, target: Any, n: Any, effect: Any, cap: int) -> Solution:
    a, nn, p = np.asarray(alpha), np.asarray(float(n)), np.asarray(target)
    found = float(normal_effect(setting, a, nn, p))
    top = float(effect_cap(setting))
    probe = found if np.isfinite(found) else top
    use_exact = _wants_exact(setting, n, probe)
    if use_exact:
        # bracket upwards from the normal answer, so that no grid is built for
        # absurd effects (the grid grows with the expected counts)
        curve = _exact_effect_curve(setting, alpha, n)
        hi = min(top, 2.0 * found if np.isfinite(found) else 2.0)
        while curve(np.array([[np.log(hi)]]))[0, 0] < target and hi < top:
            hi = min(top, hi * 2.0)
        if curve(np.array([[np.log(hi)]]))[0, 0] < target:
            found = np.nan
        else:
            found = float(np.exp(_bracket_increasing(curve, np.zeros(1), np.log([hi]), p[None], 15, 6)[0]))
    if not np.isfinite(found):
        raise InfeasibleError(
            f"effect: no {setting.design.effect_name} up to {top:g} reaches power {target:g} with {n:,} per group"
        )
    return _finish(setting, "effect", alpha, n, found, use_exact, target)


#: The scalar solver of each unknown.
_SOLVERS: dict[str, Callable[[Setting, Any, Any, Any, Any, int], Solution]] = {
    "power": _solve_power,
    "n_per_group": _solve_size,
    "alpha": _solve_alpha,
    "effect": _solve_effect,
}


def _exact_effect_curve(setting: Setting, alpha: float, n: int) -> Callable[[FloatArray], FloatArray]:
    """Exact power at fixed size and level as a function of the log effect.

    The rejection region does not depend on the effect, so all the effects
    asked for at once share one grid (one p-value per count pair) and only
    the exposed count's distribution changes.
    """
    d = setting.design
    one = np.ones(1)

    def curve(log_effect: FloatArray) -> FloatArray:
        e = np.exp(log_effect).reshape(1, -1)
        model = d.count_model(n * one, setting.baseline * one, e, setting.allocation * one, setting.years * one)
        grid = _exact.build_grid(model, setting.sides)
        power, _ = _exact.rejection_mass(grid, alpha * one)
        return power.reshape(log_effect.shape)

    return curve
