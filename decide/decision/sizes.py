"""The search over study sizes: largest allowed, smallest for power, loss-optimal.

A policy's size rule picks one size; at every size tried the policy's alpha
rule picks the test (:func:`~decide.decision.choice.choose_tests`).

* ``largest-allowed``: the largest size the size cap and the budget allow.
* ``smallest-for-power``: sizes grow fourfold until one meets the policy,
  then the last bracket is refined to the whole subject and the sizes just
  below are checked one by one (exact power saw-tooths in the size).
* ``loss-optimal``: a geometric grid of sizes, cut where the study cost alone
  exceeds the best loss found, refined by golden-section search to the whole
  subject.  The refinement is checked against a search of every size in the
  tests.

References
----------
.. [1] Kiefer, J. (1953). Sequential minimax search for a maximum.
   *Proc. Amer. Math. Soc.* 4, 502-506 (golden-section search).
.. [2] Chernick, M. R. and Liu, C. Y. (2002). The saw-toothed behavior of
   power versus sample size and software solutions. *Am. Stat.* 56, 149-155.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..designs._base import FloatArray
from ..engine.solve import solve
from ..errors import DecideError
from .choice import Choice, choose_tests
from .loss import LossModel
from .rules import ALPHA_CAP, BETA_ABOVE_ALPHA, NO_TEST, OK, POWER_FLOOR

if TYPE_CHECKING:  # policies read this registry to check a policy's size rule
    from .policies import Policy

#: Up to this many sizes below a smallest-for-power answer are all checked.
EVERY_SIZE = {"one-group": 2_000, "two-group": 500}
#: Size searched up to when nothing else bounds it (smallest-for-power).
SIZE_CEILING = 10**9

#: Why a size fails a policy, in words.
REASONS = {
    ALPHA_CAP: "alpha would exceed the cap constraints.max_alpha",
    POWER_FLOOR: "power at the design effect stays below the required level",
    BETA_ABOVE_ALPHA: "beta would exceed alpha",
    NO_TEST: "no attainable test meets the policy's power requirement",
}


@dataclass(frozen=True)
class SizePick:
    """The size a policy's size rule picks (``None`` if none), and why it falls short, if it does."""

    n: float | None
    reason: str | None


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
            values = total_loss(model, choose_tests(model, policy, np.array(todo, dtype=np.float64)))
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


def total_loss(model: LossModel, ch: Choice) -> FloatArray:
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
        losses.append(total_loss(model, choose_tests(model, policy, part)))
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
    failed = [grid[:k]]  # sizes seen to fail, not asked again below
    a, b = float(grid[k - 1]), float(grid[k])
    while b - a > 1:
        cand = np.unique(np.round(np.linspace(a, b, 42)))[1:-1]
        cand = cand[(cand > a) & (cand < b)]
        if cand.size == 0:
            break
        hit = choose_tests(model, policy, cand).meets_rules
        j = int(np.argmax(hit)) if hit.any() else cand.size
        failed.append(cand[:j])
        if j < cand.size:
            b = float(cand[j])
            a = float(cand[j - 1]) if j > 0 else a
        else:
            a = float(cand[-1])
    span = EVERY_SIZE["one-group" if model.setting.design.groups == 1 else "two-group"]
    early_sizes = np.arange(lo, b) if b - lo <= span else np.arange(max(lo, b - 64), b)
    early_sizes = early_sizes[~np.isin(early_sizes, np.concatenate(failed))]
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
    if model.setting.design.groups != 1:
        return None, OK  # two-group designs barely saw-tooth; the general search is faster
    s, study = model.setting, model.problem.study
    allocation, years = s.design.applicable(study.allocation, study.years)
    try:
        sol = solve(
            s.design,
            baseline=study.baseline,
            alpha=policy.alpha,
            power=policy.power,
            effect=model.problem.effect.median,
            allocation=allocation,
            years=years,
            sides=s.sides,
            test=s.test,
            continuity=s.continuity,
            max_n_per_group=SIZE_CEILING,
        )
    except DecideError:
        return None, OK
    n = float(max(sol.n_per_group, lo))
    ch = choose_tests(model, policy, np.array([n]))
    if ch.meets_rules[0] and bool(ch.exact[0]) == (sol.test == "exact"):
        return n, OK
    return None, OK


def _largest_allowed(model: LossModel, policy: Policy, lo: float, top: int | None) -> SizePick:
    if top is None:
        return SizePick(n=None, reason="takes the largest allowed size, but no size cap or budget is set")
    return SizePick(n=float(top), reason=None)


def _smallest_for_power(model: LossModel, policy: Policy, lo: float, top: int | None) -> SizePick:
    n, code = _solver_size(model, policy, lo)
    if n is None:
        n, code = _first_meeting(model, policy, lo, float(SIZE_CEILING))
    if n is None:
        why = REASONS.get(code, "it fails the policy")
        return SizePick(n=None, reason=f"no size up to {SIZE_CEILING:,} meets the policy: at that size {why}")
    if top is not None and n > top:
        return SizePick(n=n, reason=f"needs {int(n):,} per group, more than the {int(top):,} the constraints allow")
    return SizePick(n=n, reason=None)


def _loss_optimal(model: LossModel, policy: Policy, lo: float, top: int | None) -> SizePick:
    c = model.problem.consequences
    if c.per_subject == 0 and top is None:
        why = "with no per-subject cost and no size cap or budget, loss keeps falling with size"
        return SizePick(n=None, reason=why)
    hi = float(top) if top is not None else np.inf
    if c.per_subject > 0:
        # no size whose study cost alone exceeds both no-study losses (and the smallest study) can win
        per = c.per_subject * float(model.n_total(np.asarray(1e6))) / 1e6  # cost per exposed subject
        bound = (model.flag_now + model.clear_now + float(model.study_cost(np.asarray(lo)))) / per + 2
        hi = min(hi, float(np.ceil(bound)))
    hi = max(hi, lo)
    grid, loss = _coarse_losses(model, policy, np.unique(np.append(_geometric(lo, hi, 65), hi)))
    if not np.isfinite(loss).any():
        return SizePick(n=None, reason="no size within the constraints meets the policy")
    return SizePick(n=_refine_min(model, policy, grid, loss), reason=None)


@dataclass(frozen=True)
class SizeRule:
    """A size rule: how it picks, what it does in one sentence, and the policy keys it needs."""

    pick: Callable[[LossModel, Policy, float, int | None], SizePick]
    summary: str
    needs: tuple[str, ...] = ()


#: Every size rule, by the name a policy file gives it: (model, policy, smallest, largest allowed) -> pick.
SIZE_RULES: dict[str, SizeRule] = {
    "smallest-for-power": SizeRule(
        _smallest_for_power, "the smallest size reaching power.target.", needs=("power.target",)
    ),
    "largest-allowed": SizeRule(_largest_allowed, "the largest size the constraints allow."),
    "loss-optimal": SizeRule(_loss_optimal, "the size minimising expected loss."),
}


def pick_size(model: LossModel, policy: Policy) -> SizePick:
    """The size the policy's size rule picks within the constraints (see :data:`SIZE_RULES`)."""
    lo = float(model.problem.constraints.min_n_per_group)
    top = _largest_affordable(model)
    if top is not None and top < lo:
        return SizePick(n=None, reason="the budget does not cover the smallest allowed study")
    return SIZE_RULES[policy.size_rule].pick(model, policy, lo, top)
