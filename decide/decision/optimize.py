"""Choose alpha and the study size under a policy, and explain the choice.

:func:`decide_policy` applies one :class:`~decide.policies.Policy` to a
:class:`~decide.problem.Problem`; :func:`optimize` is the loss-optimal
policy; :func:`compare` applies several side by side with their regret
against the loss-optimal choice.

For each candidate size the policy's alpha rule picks a test (a normal
critical value, or an attainable critical region of an exact test); the size
rule then picks the size.  Loss-optimal sizes are found on a geometric grid
refined to the whole subject; the refinement is checked against brute force
in the tests.

References
----------
.. [1] Berger, J. O. (1985). *Statistical Decision Theory and Bayesian
   Analysis*, 2nd ed., Springer, sec. 4.4.3: the Bayes test rejects when the
   likelihood ratio exceeds ``k = (1 - p) F / (p M)``.
.. [2] DeGroot, M. H. and Schervish, M. J. (2012). *Probability and
   Statistics*, 4th ed., Pearson, thm 9.2.1 (from memory).
.. [3] Mudge, J. F., Baker, L. F., Edge, C. B. and Houlahan, J. E. (2012).
   *PLoS ONE* 7, e32734 (alpha chosen to minimise weighted errors).
.. [4] Willan, A. R. and Pinto, E. M. (2005). *Stat. Med.* 24, 1791-1806
   (expected net benefit of sampling).
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray

from .._results import PlainData
from ..designs import AUTO_EXACT_BELOW, EXACT_UP_TO
from ..designs._base import FloatArray
from ..engine import exact as _exact
from ..engine import normal as _normal
from ..errors import ApproximationWarning, DecideError
from .loss import (
    MISSED,
    Z_RANGE,
    Characteristics,
    ExactOptions,
    LossModel,
    OperatingPoint,
    bisect_decreasing,
    build_model,
    exact_batches,
    minimise_on,
    normal_at,
    settle,
)
from .policies import LOSS_OPTIMAL, Policy, check_policies
from .problem import Problem, check_problem

#: Up to this many sizes below a smallest-for-power answer are all checked.
EVERY_SIZE = {"one-group": 2_000, "two-group": 500}
#: Size searched up to when nothing else bounds it (smallest-for-power).
SIZE_CEILING = 10**9
_TOL = 1e-9

# reasons a test or size fails a policy
OK, ALPHA_CAP, POWER_FLOOR, BETA_ABOVE_ALPHA, NO_TEST = 0, 1, 2, 3, 4


@dataclass(frozen=True)
class Choice:
    """The test a policy picks at each candidate size (arrays of one length)."""

    n: FloatArray
    exact: NDArray[np.bool_]
    chars: Characteristics
    z: FloatArray
    code: NDArray[np.int64]
    error_loss: FloatArray

    @property
    def meets_rules(self) -> NDArray[np.bool_]:
        return np.asarray(self.code == OK)


def _floor(model: LossModel, policy: Policy) -> float:
    return max(model.problem.constraints.min_power, policy.power or 0.0)


def _codes(model: LossModel, policy: Policy, c: Characteristics) -> NDArray[np.int64]:
    cons = model.problem.constraints
    floor = _floor(model, policy)
    code = np.zeros(np.shape(c.nominal), dtype=np.int64)
    bma = policy.beta_at_most_alpha & (1 - c.power > c.attained + 1e-9)
    code = np.where(bma, BETA_ABOVE_ALPHA, code)
    code = np.where(c.design_power < floor - 1e-9, POWER_FLOOR, code)
    code = np.where(c.nominal > cons.max_alpha * (1 + _TOL), ALPHA_CAP, code)
    return code


def _choose_normal(model: LossModel, policy: Policy, n: FloatArray) -> tuple[Characteristics, FloatArray]:
    s = model.setting
    p = model.problem
    cons = p.constraints
    # critical values whose nominal alpha stays below 1 (two-sided: z >= 0)
    zlo = np.full(n.shape, max(Z_RANGE[0], float(_normal.critical_z(np.asarray(1 - 1e-12), s.sides))))
    zhi = np.full(n.shape, Z_RANGE[1])

    def at(z: FloatArray) -> Characteristics:
        return normal_at(model, n[:, None] if z.ndim == 2 else n, z)

    def loss(z: FloatArray) -> FloatArray:
        c = at(z)
        return model.error_loss(c.attained, c.missed)

    def power_root(target: float) -> FloatArray:
        return bisect_decreasing(lambda z: at(z).design_power - target, zlo, zhi)

    def equal_root() -> FloatArray:
        def gap(z: FloatArray) -> FloatArray:
            c = at(z)
            return np.asarray(c.attained - (1 - c.power))

        return bisect_decreasing(gap, zlo, zhi)

    lo = zlo if cons.max_alpha >= 1 else np.maximum(zlo, _normal.critical_z(np.asarray(cons.max_alpha), s.sides))
    hi = zhi
    floor = _floor(model, policy)
    if floor > 0:
        hi = np.minimum(hi, power_root(floor))
    z_eq = equal_root() if policy.beta_at_most_alpha or policy.alpha_rule == "equal-to-beta" else zhi
    if policy.beta_at_most_alpha:
        hi = np.minimum(hi, z_eq)
    rule = policy.alpha_rule
    if rule == "fixed":
        assert policy.alpha is not None
        z = np.full(n.shape, float(_normal.critical_z(np.asarray(policy.alpha), s.sides)))
    elif rule == "loss-optimal":
        z = minimise_on(loss, lo, np.maximum(lo, hi))
    elif rule == "posterior":
        t = policy.posterior_threshold
        assert t is not None

        def score(z: FloatArray) -> FloatArray:
            c = at(z)
            return (1 - t) * p.p_harm * (1 - c.power) + t * (1 - p.p_harm) * c.attained

        z = minimise_on(score, zlo, zhi)
    elif rule == "equal-to-beta":
        z = z_eq
    else:  # for-power
        assert policy.power is not None
        z = power_root(policy.power)
        if policy.beta_at_most_alpha:
            z = np.minimum(z, z_eq)
    return at(z), z


def _choose_exact_batch(
    model: LossModel, policy: Policy, opts: ExactOptions
) -> tuple[NDArray[np.int64], NDArray[np.bool_]]:
    """The column (attainable test) the alpha rule picks in each row, and whether one was found."""
    c = opts.chars
    valid = opts.valid
    p = model.problem
    cols = np.arange(valid.shape[1])
    ok = valid & (_codes(model, policy, c) == OK)
    rule = policy.alpha_rule
    found: NDArray[np.bool_] = np.ones(valid.shape[0], dtype=bool)
    if rule == "fixed":
        assert policy.alpha is not None
        k = np.where(valid & (c.nominal <= policy.alpha * (1 + _exact.REL_TOL)), cols, 0).max(axis=1)
    elif rule == "loss-optimal":
        score = np.where(ok, model.error_loss(c.attained, c.missed), np.inf)
        k = np.argmin(score, axis=1)
        found = np.asarray(np.isfinite(score[np.arange(k.size), k]))
    elif rule == "posterior":
        t = policy.posterior_threshold
        assert t is not None
        score = (1 - t) * p.p_harm * (1 - c.power) + t * (1 - p.p_harm) * c.attained
        k = np.argmin(np.where(valid, score, np.inf), axis=1)
    elif rule == "equal-to-beta":
        k = np.argmin(np.where(valid, np.maximum(c.attained, 1 - c.power), np.inf), axis=1)
    else:  # for-power
        assert policy.power is not None
        cand = valid & (c.design_power >= policy.power - 1e-12)
        if policy.beta_at_most_alpha:
            cand &= 1 - c.power <= c.attained + 1e-12
        k = np.argmax(cand, axis=1)
        found = np.asarray(cand.any(axis=1))
    return k, found


def choose_tests(model: LossModel, policy: Policy, n: FloatArray) -> Choice:
    """The test the policy's alpha rule picks at each size in ``n``."""
    n = np.asarray(n, dtype=np.float64)
    exact = model.uses_exact(n)
    fields = {k: np.zeros(n.shape) for k in ("nominal", "attained", "power", "design_power", "missed")}
    z = np.full(n.shape, np.nan)
    found = np.ones(n.shape, dtype=bool)
    if (~exact).any():
        c, zz = _choose_normal(model, policy, n[~exact])
        for k in fields:
            fields[k][~exact] = getattr(c, k)
        z[~exact] = zz
        if policy.alpha_rule == "fixed":
            fields["nominal"][~exact] = policy.alpha  # exactly, not via the critical value
    if exact.any():
        where = np.flatnonzero(exact)
        for idx, opts in exact_batches(model, n[where]):
            col, f = _choose_exact_batch(model, policy, opts)
            rows = np.arange(col.size)
            for name in fields:
                fields[name][where[idx]] = getattr(opts.chars, name)[rows, col]
            if policy.alpha_rule == "fixed":
                # the test at level alpha is that of the largest breakpoint below it
                fields["nominal"][where[idx]] = policy.alpha
            found[where[idx]] = f
    chars = Characteristics(**fields)
    code = np.where(found, _codes(model, policy, chars), NO_TEST)
    return Choice(n, exact, chars, z, code, model.error_loss(chars.attained, chars.missed))


# --------------------------------------------------------------------------
# sizes


def _largest_affordable(model: LossModel) -> int | None:
    """The largest size the size cap and the budget allow (None if unbounded)."""
    cons = model.problem.constraints
    c = model.problem.consequences
    top = cons.max_n_per_group
    if cons.budget is not None and c.per_subject > 0:
        per = c.per_subject * float(model.n_total(np.asarray(1e6))) / 1e6  # cost per exposed subject
        guess = np.floor((cons.budget - c.fixed) / per) + 2
        if not guess <= SIZE_CEILING:  # beyond the largest size considered (or inf): that size binds
            return SIZE_CEILING if top is None else min(top, SIZE_CEILING)
        cand = np.arange(max(1.0, guess - 4), guess + 1)
        fits = cand[model.study_cost(cand) <= cons.budget * (1 + 1e-12)]
        n_budget = int(fits.max()) if fits.size else 0
        top = n_budget if top is None else min(top, n_budget)
    return None if top is None else int(top)


def _geometric(lo: float, hi: float, k: int) -> FloatArray:
    return np.unique(np.round(np.geomspace(lo, hi, k)))


def _refine_min(model: LossModel, policy: Policy, grid: FloatArray, loss: FloatArray) -> float:
    """Refine the best size of a coarse grid to the whole subject.

    Golden-section search on whole sizes inside the bracket of the grid's best
    point (batches of 25 sizes first where the test is normal, which is cheap),
    then every size within 8 of the best found (the exact tests'
    loss is only nearly smooth in the size).  Checked against a search of
    every size in the tests.
    """
    k = int(np.argmin(loss))
    a, b = int(grid[max(k - 1, 0)]), int(grid[min(k + 1, grid.size - 1)])
    seen: dict[int, float] = {int(g): float(v) for g, v in zip(grid, loss, strict=True)}

    def f(*sizes: int) -> list[float]:
        todo = [x for x in sizes if x not in seen]
        if todo:
            values = _total_loss(model, choose_tests(model, policy, np.array(todo, dtype=np.float64)))
            seen.update(zip(todo, (float(v) for v in values), strict=True))
        return [seen[x] for x in sizes]

    if not model.uses_exact(np.array([a, b], dtype=np.float64)).any():
        # normal tests are cheap: shrink the bracket with batches of 25 sizes
        while b - a > 8:
            cand = np.unique(np.round(np.linspace(a, b, 25))).astype(int)
            values = f(*(int(x) for x in cand))
            j = int(np.argmin(values))
            a, b = int(cand[max(j - 1, 0)]), int(cand[min(j + 1, cand.size - 1)])
    ratio = (np.sqrt(5) - 1) / 2
    c, d = b - round(ratio * (b - a)), a + round(ratio * (b - a))
    fc, fd = f(c, d)
    while b - a > 8:
        if fc <= fd:
            b, d, fd = d, c, fc
            c = b - round(ratio * (b - a))
            (fc,) = f(c)
        else:
            a, c, fc = c, d, fd
            d = a + round(ratio * (b - a))
            (fd,) = f(d)
    best = min(seen, key=seen.__getitem__)
    window = [x for x in range(best - 8, best + 9) if grid[0] <= x <= grid[-1]]
    f(*window)
    return float(min(seen, key=seen.__getitem__))


def _total_loss(model: LossModel, ch: Choice) -> FloatArray:
    return np.where(ch.meets_rules, ch.error_loss + model.study_cost(ch.n), np.inf)


def _coarse_losses(model: LossModel, policy: Policy, grid: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Losses on an increasing grid of sizes, skipping sizes that cannot win.

    The loss is at least the study cost, so once a size's study cost exceeds
    the best loss found so far, it and every larger size are left out.
    """
    losses: list[FloatArray] = []
    best = np.inf
    start = 0
    while start < grid.size:
        part = grid[start : start + 16]
        part = part[model.study_cost(part) < best]
        if part.size == 0:
            break
        losses.append(_total_loss(model, choose_tests(model, policy, part)))
        best = min(best, float(losses[-1].min()))
        start += 16
    kept = np.concatenate(losses) if losses else np.zeros(0)
    return grid[: kept.size], kept


def _first_meeting(model: LossModel, policy: Policy, lo: float, ceiling: float) -> tuple[float | None, int]:
    """The smallest size that meets the policy, and the failure code at the largest size tried.

    Sizes grow fourfold from ``lo`` until one meets the policy (or the ceiling
    is reached), so no size far beyond the answer is ever evaluated; the last
    bracket is then refined to the whole subject, and the sizes below the
    answer are checked one by one (exact power saw-tooths): all of them up to
    :data:`EVERY_SIZE`, else the 64 nearest.
    """
    below, hi = lo, lo
    while True:
        ch = choose_tests(model, policy, np.array([hi]))
        if ch.meets_rules[0]:
            break
        if hi >= ceiling:
            return None, int(ch.code[0])
        below, hi = hi, min(ceiling, hi * 4)
    if hi == lo:
        return lo, OK
    grid = np.unique(np.append(_geometric(below, hi, 33), hi))
    ok = choose_tests(model, policy, grid).meets_rules
    k = int(np.argmax(ok))
    if k == 0:
        return float(grid[0]), OK
    a, b = float(grid[k - 1]), float(grid[k])
    while b - a > 1:
        cand = np.unique(np.round(np.linspace(a, b, 42)))[1:-1]
        cand = cand[(cand > a) & (cand < b)]
        if cand.size == 0:
            break
        hit = choose_tests(model, policy, cand).meets_rules
        if hit.any():
            j = int(np.argmax(hit))
            b = float(cand[j])
            a = float(cand[j - 1]) if j > 0 else a
        else:
            a = float(cand[-1])
    span = EVERY_SIZE["one-group" if model.setting.design.allocation_name is None else "two-group"]
    early_sizes = np.arange(lo, b) if b - lo <= span else np.arange(max(lo, b - 64), b)
    if early_sizes.size:
        early = choose_tests(model, policy, early_sizes).meets_rules
        if early.any():
            b = float(early_sizes[int(np.argmax(early))])
    return b, OK


def _solver_size(model: LossModel, policy: Policy, lo: float) -> tuple[float | None, int]:
    """For a fixed alpha and a power target, the solver's smallest size, if it meets the policy.

    For the one-group design exact power saw-tooths strongly in the size and
    the solver finds the smallest size in closed form, segment by segment of
    the critical count, so it is asked first; its answer stands only if the
    policy's other requirements hold there too.
    """
    if policy.alpha_rule != "fixed" or policy.power is None or policy.alpha is None:
        return None, OK
    if model.setting.design.allocation_name is not None:
        return None, OK  # two-group designs barely saw-tooth; the general search is faster
    from ..engine.solve import solve

    s, study = model.setting, model.problem.study
    allocation, years = s.design.applicable(study.allocation, study.years)
    try:
        sol = solve(
            s.design, baseline=study.baseline, alpha=policy.alpha, power=policy.power,
            effect=model.problem.effect.median,
            allocation=allocation, years=years, sides=s.sides, test=s.test,
            continuity=s.continuity, max_n_per_group=SIZE_CEILING,
        )
    except DecideError:
        return None, OK
    n = float(max(sol.n_per_group, lo))
    ch = choose_tests(model, policy, np.array([n]))
    if ch.meets_rules[0] and bool(ch.exact[0]) == (sol.test == "exact"):
        return n, OK
    return None, OK


@dataclass(frozen=True)
class _Pick:
    n: float | None
    reason: str | None


def _pick_size(model: LossModel, policy: Policy) -> _Pick:
    cons = model.problem.constraints
    c = model.problem.consequences
    lo = float(cons.min_n_per_group)
    top = _largest_affordable(model)
    if top is not None and top < lo:
        return _Pick(None, "the budget does not cover the smallest allowed study")
    if policy.size_rule == "largest-allowed":
        if top is None:
            return _Pick(None, "takes the largest allowed size, but no size cap or budget is set")
        return _Pick(float(top), None)
    if policy.size_rule == "smallest-for-power":
        n, code = _solver_size(model, policy, lo)
        if n is None:
            n, code = _first_meeting(model, policy, lo, float(SIZE_CEILING))
        if n is None:
            why = _REASONS.get(code, "it fails the policy")
            return _Pick(None, f"no size up to {SIZE_CEILING:,} meets the policy: at that size {why}")
        if top is not None and n > top:
            return _Pick(n, f"needs {int(n):,} per group, more than the {int(top):,} the constraints allow")
        return _Pick(n, None)
    # loss-optimal size
    if c.per_subject == 0 and top is None:
        return _Pick(None, "with no per-subject cost and no size cap or budget, loss keeps falling with size")
    hi = float(top) if top is not None else np.inf
    if c.per_subject > 0:
        per = c.per_subject * float(model.n_total(np.asarray(1e6))) / 1e6  # cost per exposed subject
        bound = (model.flag_now + model.clear_now + float(model.study_cost(np.asarray(lo)))) / per + 2
        hi = min(hi, float(np.ceil(bound)))
    hi = max(hi, lo)
    grid, loss = _coarse_losses(model, policy, np.unique(np.append(_geometric(lo, hi, 65), hi)))
    if not np.isfinite(loss).any():
        return _Pick(None, "no size within the constraints meets the policy")
    return _Pick(_refine_min(model, policy, grid, loss), None)


# --------------------------------------------------------------------------
# the decision and its explanation


@dataclass(frozen=True)
class Decision(PlainData):
    """What a policy chooses for a problem, and what that choice implies.

    Costs are in the scenario's unit.  ``beta`` and ``power`` are averaged
    over the effect prior; ``power_at_design_effect`` is at the design effect
    (the point effect or the prior median).  ``implied_cost_ratio`` is the
    ratio of expected missed-hazard cost to false-alarm cost at which the
    chosen alpha would be loss-optimal for the chosen size (for exact tests,
    the geometric middle of ``implied_cost_ratio_range``).
    """

    policy: str
    title: str
    summary: str
    feasible: bool
    reason: str | None
    design: str
    test: str | None
    method: str | None
    alpha: float | None
    attained_alpha: float | None
    beta: float | None
    power: float | None
    power_at_design_effect: float | None
    design_effect: float
    n_per_group: int | None
    n_total: int | None
    expected_loss: float | None
    loss_parts: dict[str, float] | None
    no_study: dict[str, float]
    net_benefit: float | None
    recommendation: str
    p_harm_given_negative: float | None
    p_harm_given_positive: float | None
    detectable_effect: float | None
    implied_cost_ratio: float | None
    implied_cost_ratio_range: tuple[float, float] | None
    stated_cost_ratio: float | None
    regret: float | None = None
    warnings: tuple[str, ...] = field(default=())



def _implied_ratio_normal(model: LossModel, n: float, z: float) -> float | None:
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


def _implied_ratio_exact(
    model: LossModel, n: float, chosen: OperatingPoint
) -> tuple[tuple[float, float], bool] | None:
    """Cost ratios at which a loss-minimiser would pick a test of this attained size.

    The attainable tests at size ``n`` are points (attained alpha ``A``,
    caught hazard ``C``); for a cost ratio ``R`` the loss-optimal one
    maximises ``p R C - (1 - p) A``, so the optimal tests trace the upper
    concave hull of the points and ``R = (1 - p) / (p s)`` with ``s`` the
    hull's slope at ``A``.  At a hull vertex ``R`` spans an interval.  The
    hull value at ``A`` is found by its dual, ``min_s max_j (C_j - s A_j) + s A``.
    A test below the hull (beaten by a randomised mix of its neighbours) gets
    the slope of the hull segment above it.  Returns the interval and whether
    the chosen test lies below the hull.
    """
    p = model.problem
    if model.expected_missed <= 0:
        return None
    _, opts = next(exact_batches(model, np.array([n])))
    c, valid = opts.chars, opts.valid[0]
    total = float(model.weights[MISSED].sum())
    att, caught = c.attained[0][valid], (total - c.missed[0][valid]) / model.expected_missed
    a_star = float(chosen.attained)
    c_star = (total - chosen.missed) / model.expected_missed

    def dual(u: FloatArray) -> FloatArray:
        slope = np.exp(u)[..., None]
        return np.asarray(np.max(caught - slope * att, axis=-1) + slope[..., 0] * a_star)

    lo_u, hi_u = np.array([-40.0]), np.array([40.0])
    u = minimise_on(dual, lo_u, hi_u, points=33)  # the dual is convex in the slope
    hull = float(dual(u)[0])
    tol = 1e-12
    left, right = att < a_star - tol, att > a_star + tol
    with np.errstate(divide="ignore", invalid="ignore"):
        s_left = float(np.min((hull - caught[left]) / (a_star - att[left]))) if left.any() else np.inf
        s_right = float(np.max((caught[right] - hull) / (att[right] - a_star))) if right.any() else 0.0
    odds = (1 - p.p_harm) / p.p_harm
    lo = odds / s_left if s_left > 0 else np.inf
    hi = odds / s_right if s_right > 0 else np.inf
    return (float(min(lo, hi)), float(max(lo, hi))), c_star < hull - 1e-9


def _approximation_notes(model: LossModel, n: float, exact: bool) -> list[str]:
    """A note where the normal test runs on few expected cases, or exact gave way to normal."""
    s = model.setting
    smallest = float(s.design.smallest_expected_count(
        np.asarray(n), s.baseline, np.asarray(model.effects[-1]), s.allocation, s.years
    ))
    if not exact and smallest < AUTO_EXACT_BELOW:
        return [f"normal approximation with as few as {smallest:.3g} expected in a cell (below "
                f"{AUTO_EXACT_BELOW:g}); the exact test is safer here"]
    if not exact and s.test == "exact":
        return [f"exact test requested, but every cell expects more than {EXACT_UP_TO:g}: the normal "
                "approximation was used, which agrees closely there"]
    return []


def ratio_point(rng: tuple[float, float]) -> float | None:
    """One number for a range of implied ratios: its geometric middle, or its finite end."""
    lo, hi = rng
    if 0 < lo and np.isfinite(hi):
        return float(np.sqrt(lo * hi))
    return lo if lo > 0 else None


def _detectable(model: LossModel, alpha: float, n: float, exact: bool) -> float | None:
    s = model.setting
    study = model.problem.study
    allocation, years = s.design.applicable(study.allocation, study.years)
    return _detectable_effect(
        s.design.name,
        study.baseline,
        allocation,
        years,
        s.sides,
        s.continuity,
        alpha,
        int(n),
        exact,
    )


@lru_cache(maxsize=256)
def _detectable_effect(
    design: str,
    baseline: float,
    allocation: float | None,
    years: float | None,
    sides: int,
    continuity: bool,
    alpha: float,
    n: int,
    exact: bool,
) -> float | None:
    """The smallest effect detected with power 0.8 (cached: policies often share a study)."""
    from ..engine.solve import solve

    if not 0 < alpha < 0.8:
        return None
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ApproximationWarning)  # the decision notes it instead
            sol = solve(
                design, baseline=baseline, alpha=alpha, power=0.8, n_per_group=n, allocation=allocation,
                years=years, sides=sides, test="exact" if exact else "normal", continuity=continuity,
            )
    except DecideError:
        return None
    return sol.effect


_REASONS = {
    ALPHA_CAP: "alpha would exceed the cap constraints.max_alpha",
    POWER_FLOOR: "power at the design effect stays below the required level",
    BETA_ABOVE_ALPHA: "beta would exceed alpha",
    NO_TEST: "no attainable test meets the policy's power requirement",
}


def decide_policy(problem: Problem | LossModel, policy: Policy) -> Decision:
    """Apply one policy to a problem.

    Parameters
    ----------
    problem : Problem or LossModel
    policy : Policy

    Returns
    -------
    Decision
        ``feasible`` is False, with a ``reason``, when no size within the
        constraints meets the policy; where a size beyond them would, its
        numbers are still shown.
    """
    if not isinstance(problem, LossModel):
        check_problem(problem)
    check_policies([policy])
    model = problem if isinstance(problem, LossModel) else build_model(problem)
    p = model.problem
    pick = _pick_size(model, policy)
    no_study = {"flag_now": model.flag_now, "clear_now": model.clear_now}
    better = "flag" if model.flag_now < model.clear_now else "clear"
    best_none = min(model.flag_now, model.clear_now)
    # no finite ratio when a false alarm costs nothing: None, which the report puts in words
    stated = model.expected_missed / p.consequences.false_alarm if p.consequences.false_alarm > 0 else None
    d = model.setting.design
    empty = Decision(
        policy.name, policy.title, policy.summary, False, pick.reason, d.name, None, None, None, None,
        None, None, None, p.effect.median, None, None, None, None, no_study, None,
        f"{policy.title} cannot be met: {pick.reason}. Without a study, the better action is to "
        f"{better} now (expected loss {best_none:.4g}).",
        None, None, None, None, None, stated,
    )
    if pick.n is None:
        return empty
    n = pick.n
    ch = choose_tests(model, policy, np.array([n]))
    c = ch.chars.at(0)
    exact = bool(ch.exact[0])
    code = int(ch.code[0])
    reason = pick.reason or (None if code == OK else _REASONS[code])
    feasible = reason is None
    n_total = float(model.n_total(np.asarray(n)))
    study = float(model.study_cost(np.asarray(n)))
    accurate = settle(model, n, exact, float(ch.z[0]), c.nominal)
    missed = p.p_harm * accurate.missed
    false_alarm = (1 - p.p_harm) * p.consequences.false_alarm * c.attained
    loss = missed + false_alarm + study
    beta = 1 - accurate.power
    neg = p.p_harm * beta + (1 - p.p_harm) * (1 - c.attained)
    pos = p.p_harm * accurate.power + (1 - p.p_harm) * c.attained
    warns = _approximation_notes(model, n, exact)
    if exact:
        found = _implied_ratio_exact(model, n, c)
        rng = None if found is None else found[0]
        point = None
        if rng is not None:
            point = ratio_point(rng)
        test, method = "exact", d.exact_method
    else:
        rng = None
        point = _implied_ratio_normal(model, n, float(ch.z[0]))
        test = "normal-cc" if model.setting.continuity else "normal"
        method = d.normal_method + (", continuity-corrected" if model.setting.continuity else "")
    net = best_none - loss
    if feasible and net <= 0:
        rec = (f"No study is worth its cost under {policy.title.lower()}: {better} now "
               f"(expected loss {best_none:.4g}, against {loss:.4g} with the study).")
    elif feasible:
        sided = "one-sided" if model.setting.sides == 1 else "two-sided"
        rec = (f"Study {int(n):,} {d.size_name} ({int(n_total):,} subjects in all); flag the exposure "
               f"if the {sided} {test} test is significant at alpha = {c.nominal:.4g}. "
               f"Expected net benefit over deciding now (to {better}): {net:.4g}.")
    else:
        rec = f"{policy.title} cannot be met: {reason}."
    return replace(
        empty,
        feasible=feasible,
        reason=reason,
        test=test,
        method=method,
        alpha=c.nominal,
        attained_alpha=c.attained,
        beta=beta,
        power=accurate.power,
        power_at_design_effect=c.design_power,
        n_per_group=int(n),
        n_total=int(n_total),
        expected_loss=loss,
        loss_parts={"missed": missed, "false_alarm": false_alarm, "study": study},
        net_benefit=net,
        recommendation=rec,
        p_harm_given_negative=p.p_harm * beta / neg if neg > 0 else None,
        p_harm_given_positive=p.p_harm * c.power / pos if pos > 0 else None,
        detectable_effect=_detectable(model, c.nominal, n, exact),
        implied_cost_ratio=point,
        implied_cost_ratio_range=rng,
        warnings=tuple(warns),
    )


def optimize(problem: Problem) -> Decision:
    """The loss-optimal alpha and size (see :func:`decide_policy`).

    Examples
    --------
    >>> from decide.decision.problem import Problem, Study, Consequences
    >>> from decide.decision.prior import EffectPrior
    >>> prob = Problem(Study("reference-rate", 2e-4, years=5.0), EffectPrior.point(2.0), 0.3,
    ...                Consequences(false_alarm=1e6, per_subject=20.0, missed_hazard=1e8))
    >>> d = optimize(prob)
    >>> d.test, d.n_per_group, round(d.alpha, 3), d.net_benefit > 0
    ('normal', 18884, 0.225, True)
    """
    return decide_policy(problem, LOSS_OPTIMAL)


def compare(problem: Problem, policies: Sequence[Policy]) -> list[Decision]:
    """Apply each policy; regret is each one's extra loss over the loss-optimal choice."""
    check_problem(problem)
    check_policies(policies)
    model = build_model(problem)
    best = decide_policy(model, LOSS_OPTIMAL)
    out = []
    for pol in policies:
        dec = best if pol == LOSS_OPTIMAL else decide_policy(model, pol)
        regret = None
        if dec.feasible and dec.expected_loss is not None and best.expected_loss is not None:
            regret = dec.expected_loss - best.expected_loss
        out.append(replace(dec, regret=regret))
    return out
