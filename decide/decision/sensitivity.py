"""Does the choice survive doubt?  One-way and two-way sensitivity, break-even values.

:func:`tornado` varies each input over a range with the others held and
reports, at each end, the loss-optimal design, the recommended action and the
least-loss standard policy, with the inputs ordered by the swing in expected
loss.  For each input it finds the break-even values where the recommended
action changes (study, flag now, clear now) and where the least-loss standard
changes, by root finding (:func:`scipy.optimize.brentq`) on the loss
difference inside brackets found by a scan.  :func:`two_way` tabulates the
optimum over a grid of two inputs.

The least-loss *standard* is the policy with the least expected loss among
those given other than the fully loss-optimal one, which wins by construction
and is the benchmark every regret is measured from.

Where the study is analysed by the normal test at every size the optimiser
may try, the loss-optimal design for many input values comes from one
prepared loss model (:func:`decide.decision.batch.batch_optimum`); otherwise
:func:`decide.optimize` runs at each value.  Break-even values are always
settled with :func:`decide.optimize` itself.

References
----------
.. [1] Brent, R. P. (1973). *Algorithms for Minimization without Derivatives*.
   Prentice-Hall, ch. 4 (the root finder).
.. [2] Eschenbach, T. G. (1992). Spiderplots versus tornado diagrams for
   sensitivity analysis. *Interfaces* 22(6), 40-46.
.. [3] Briggs, A., Claxton, K. and Sculpher, M. (2006). *Decision Modelling
   for Health Economic Evaluation*. Oxford University Press, ch. 4 (one-way,
   two-way and threshold analysis; from memory).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np
from scipy import optimize as _roots
from scipy import special

from .._results import PlainData
from ..designs._base import FloatArray
from .actions import NOT_AVAILABLE, STUDY, actions_of
from .batch import batch_optimum, normal_throughout
from .inputs import COST_RATIO, InputRange, default_range, input_names, value_of, with_value
from .loss import build_model
from .optimize import Decision, decide_policy, optimize
from .policies import Policy
from .problem import Problem

Progress = Callable[[int, int], None]

#: Input values scanned per input to bracket changes of the recommended action.
SCAN_POINTS = 33
#: Input values scanned per input when each needs a full optimisation (exact tests).
SLOW_SCAN_POINTS = 7
#: Points between each end and the central value where policies are compared.
POLICY_POINTS = 1
#: Relative tolerance of break-even values (the losses then agree far below 1e-6).
ROOT_RTOL = 1e-9

_COST_LIKE = {
    "prior.p_harm",
    "consequences.missed_hazard",
    "consequences.false_alarm",
    "consequences.per_subject",
    "consequences.exposed_population",
    "consequences.background_rate",
    "consequences.cost_per_case",
    "consequences.horizon_years",
    COST_RATIO,
}


@dataclass(frozen=True)
class Optima:
    """The loss-optimal design at each of several values of one input (arrays)."""

    values: FloatArray
    n_per_group: FloatArray
    alpha: FloatArray
    attained_alpha: FloatArray
    power: FloatArray
    expected_loss: FloatArray
    flag_now: FloatArray
    clear_now: FloatArray
    action: tuple[str, ...]


@dataclass(frozen=True)
class EndPoint(PlainData):
    """The loss-optimal design and the least-loss standard at one input value."""

    value: float
    alpha: float | None
    attained_alpha: float | None
    power: float | None
    n_per_group: int | None
    expected_loss: float | None
    action: str
    least_loss_policy: str | None


@dataclass(frozen=True)
class Threshold(PlainData):
    """A break-even value: where the recommended action or the least-loss standard changes.

    ``below`` and ``above`` name what is chosen just below and just above
    ``value``; ``losses`` are the two expected losses compared, at ``value``
    (equal there, up to the root finder's tolerance).  ``value`` is None when
    the change comes from a policy becoming infeasible, which has no loss
    difference to solve; ``between`` then brackets it.
    """

    input: str
    kind: str
    value: float | None
    below: str
    above: str
    losses: tuple[float, float] | None
    between: tuple[float, float]


@dataclass(frozen=True)
class OneWay(PlainData):
    """One input varied over ``[low.value, high.value]`` with the others held."""

    input: str
    scale: str
    central: float
    low: EndPoint
    high: EndPoint
    swing: float
    thresholds: tuple[Threshold, ...]


@dataclass(frozen=True)
class Tornado(PlainData):
    """A one-way analysis of every input, ordered by swing in expected loss (largest first)."""

    title: str
    central: EndPoint
    rows: tuple[OneWay, ...]
    policies: tuple[str, ...]
    method: str


# --------------------------------------------------------------------------
# the optimum at many values of one input


def _spaced(r: InputRange, points: int) -> FloatArray:
    """``points`` values from ``r.low`` to ``r.high`` (exactly), spaced on the range's scale."""
    if r.scale == "logit":
        x = np.asarray(special.expit(np.linspace(special.logit(r.low), special.logit(r.high), points)))
    elif r.scale == "log":
        x = np.geomspace(r.low, r.high, points)
    else:
        x = np.linspace(r.low, r.high, points)
    x[0], x[-1] = r.low, r.high
    return x


def fast_available(problem: Problem) -> bool:
    """Whether the batch optimum applies: the normal test at every size searched."""
    return normal_throughout(build_model(problem))


Settings = tuple[FloatArray, FloatArray, FloatArray, FloatArray]


def _batch_settings(problem: Problem, name: str, values: FloatArray) -> Settings:
    """``p_harm``, missed-cost scale, false-alarm cost and per-subject cost for each value."""
    c = problem.consequences
    n = values.size
    p, scale = np.full(n, problem.p_harm), np.ones(n)
    fa, per = np.full(n, c.false_alarm), np.full(n, c.per_subject)
    if name == "prior.p_harm":
        p = values.copy()
    elif name == "consequences.false_alarm":
        fa = values.copy()
    elif name == "consequences.per_subject":
        per = values.copy()
    else:  # a multiplicative part of the missed-hazard cost, or the cost ratio
        scale = values / value_of(problem, name)
    return p, scale, fa, per


def optima(problem: Problem, name: str, values: FloatArray, progress: Progress | None = None) -> Optima:
    """The loss-optimal design at each value of input ``name`` (others held)."""
    values = np.asarray(values, dtype=np.float64)
    model = build_model(problem)
    central = value_of(problem, name)
    if name in _COST_LIKE and normal_throughout(model) and (name not in _SCALED or central > 0):
        b = batch_optimum(model, *_batch_settings(problem, name, values))
        acts = actions_of(b.loss, b.flag_now, b.clear_now, b.feasible)
        return Optima(
            values, b.n, b.nominal, b.attained, b.power, b.loss, b.flag_now, b.clear_now, tuple(str(a) for a in acts)
        )
    rows: list[tuple[float, ...]] = []
    acts_: list[str] = []
    for i, v in enumerate(values):
        d = optimize(with_value(problem, name, float(v)))
        rows.append(_numbers(d))
        acts_.append(str(d.action))
        if progress is not None:
            progress(i + 1, values.size)
    cols = np.array(rows, dtype=np.float64).reshape(-1, 7).T
    return Optima(values, cols[0], cols[1], cols[2], cols[3], cols[4], cols[5], cols[6], tuple(acts_))


_SCALED = _COST_LIKE - {"prior.p_harm", "consequences.false_alarm", "consequences.per_subject"}


def _numbers(d: Decision) -> tuple[float, ...]:
    nan = math.nan
    return (
        nan if d.n_per_group is None else float(d.n_per_group),
        nan if d.alpha is None else d.alpha,
        nan if d.attained_alpha is None else d.attained_alpha,
        nan if d.power is None else d.power,
        nan if d.expected_loss is None else d.expected_loss,
        d.no_study["flag_now"],
        d.no_study["clear_now"],
    )


# --------------------------------------------------------------------------
# break-even values of the recommended action


def _action_gap(
    problem: Problem, name: str, study_vs_none: bool, seen: dict[float, Decision]
) -> Callable[[float], float]:
    """The loss difference whose sign gives the action, as a function of the input (by optimize).

    Decisions are kept in ``seen`` by input value, so no value is optimised twice.
    """

    def gap(x: float) -> float:
        if x not in seen:
            seen[x] = optimize(with_value(problem, name, x))
        d = seen[x]
        flag, clear = d.no_study["flag_now"], d.no_study["clear_now"]
        if not study_vs_none:
            return float(flag - clear)
        if d.expected_loss is None:
            return math.nan
        return float(d.expected_loss - min(flag, clear))

    return gap


def _settle_root(
    gap: Callable[[float], float], a: float, b: float, inner: tuple[float, float] | None = None
) -> float | None:
    """Brent's root of ``gap`` in ``[a, b]``, first inside the narrower bracket ``inner`` if it holds."""
    tol = ROOT_RTOL * max(abs(a), abs(b))
    if inner is not None:
        lo, hi = inner
        glo, ghi = gap(lo), gap(hi)
        if glo * ghi < 0:
            return float(_roots.brentq(gap, lo, hi, xtol=tol * 1e-3, rtol=ROOT_RTOL))
    ga, gb = gap(a), gap(b)
    if not (np.isfinite(ga) and np.isfinite(gb)) or ga * gb > 0:
        return None
    if ga == 0 or gb == 0:
        return a if ga == 0 else b
    return float(_roots.brentq(gap, a, b, xtol=tol * 1e-3, rtol=ROOT_RTOL))


def _batch_gap(
    problem: Problem, name: str, study_vs_none: bool, xs: FloatArray, start: tuple[FloatArray, FloatArray] | None = None
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """The action's loss difference at each value by the batch optimum, and the optimal sizes and z."""
    b = batch_optimum(build_model(problem), *_batch_settings(problem, name, xs), start=start)
    gap = b.flag_now - b.clear_now if not study_vs_none else b.loss - np.minimum(b.flag_now, b.clear_now)
    return gap, b.n, b.z


def _fast_root(problem: Problem, name: str, a: float, b: float, study_vs_none: bool) -> float | None:
    """The break-even value by Brent's method on the batch optimum's loss difference.

    A grid of 33 values narrows the bracket; Brent's method then runs on the
    batch optimum warm-started at the optimum of the bracket's end.  Callers
    confirm the value with :func:`decide.optimize`.
    """
    if name not in _COST_LIKE or not fast_available(problem):
        return None
    xs = np.linspace(a, b, 33)
    gap, n, z = _batch_gap(problem, name, study_vs_none, xs)
    change = np.flatnonzero(np.sign(gap[:-1]) * np.sign(gap[1:]) < 0)
    if change.size != 1:
        return None
    k = int(change[0])
    # start from the end where the study wins: its design carries on to the break-even value,
    # while on the other side the optimum may be a different, token study
    j = k if gap[k] < 0 else k + 1
    start = (n[j : j + 1], z[j : j + 1])
    if not np.all(np.isfinite(start[0])):
        return None

    def f(x: float) -> float:
        return float(_batch_gap(problem, name, study_vs_none, np.array([x]), start)[0][0])

    lo, hi = float(xs[k]), float(xs[k + 1])
    if not f(lo) * f(hi) < 0:
        return None
    return float(_roots.brentq(f, lo, hi, xtol=ROOT_RTOL * 1e-3 * max(abs(lo), abs(hi)), rtol=ROOT_RTOL))


def _loss_scale(d: Decision) -> float:
    return max(d.no_study["flag_now"], d.no_study["clear_now"], d.expected_loss or 0.0)


def action_thresholds(problem: Problem, name: str, scan: Optima) -> tuple[Threshold, ...]:
    """Break-even values of the recommended action between neighbouring scan values."""
    out = []
    v, acts = scan.values, scan.action
    for i in range(v.size - 1):
        left, right = acts[i], acts[i + 1]
        if left == right or NOT_AVAILABLE in (left, right):
            continue
        study_vs_none = STUDY in (left, right)
        a, b = float(v[i]), float(v[i + 1])
        seen: dict[float, Decision] = {}
        gap = _action_gap(problem, name, study_vs_none, seen)
        root = _fast_root(problem, name, a, b, study_vs_none)
        if root is not None and not abs(gap(root)) <= 1e-9 * abs(_loss_scale(seen[root])):
            root = None  # the warm-started batch went astray: settle it with the optimiser
        if root is None:
            root = _settle_root(gap, a, b)
        if root is None:
            continue
        gap(root)
        d = seen[root]
        flag, clear = d.no_study["flag_now"], d.no_study["clear_now"]
        if study_vs_none:
            loss = math.nan if d.expected_loss is None else d.expected_loss
            pair = (loss, min(flag, clear))
        else:
            pair = (flag, clear)
        out.append(Threshold(name, "action", root, left, right, (float(pair[0]), float(pair[1])), (a, b)))
    return tuple(out)


# --------------------------------------------------------------------------
# the least-loss standard policy


def is_benchmark(policy: Policy) -> bool:
    """The fully loss-optimal policy (loss-optimal alpha and size), which no standard can beat."""
    return policy.alpha_rule == "loss-optimal" and policy.size_rule == "loss-optimal" and policy.power is None


def _invariant(policy: Policy, problem: Problem, name: str) -> bool:
    """Whether the policy's design cannot depend on input ``name`` (its loss is then linear in it)."""
    if name not in _COST_LIKE:
        return False
    if name == "consequences.per_subject" and problem.constraints.budget is not None:
        return False
    free_alpha = policy.alpha_rule in ("fixed", "for-power", "equal-to-beta") or (
        policy.alpha_rule == "posterior" and name != "prior.p_harm"
    )
    return free_alpha and policy.size_rule in ("smallest-for-power", "largest-allowed")


def _relinked_loss(d: Decision, problem: Problem, at: Problem) -> float:
    """The loss of decision ``d`` (made for ``problem``) with ``at``'s prior and costs, same design."""
    if not d.feasible or d.loss_parts is None or d.attained_alpha is None or d.n_total is None:
        return math.inf
    c0, c = problem.consequences, at.consequences
    scale = _missed_scale(problem, at)
    missed = d.loss_parts["missed"] / problem.p_harm * at.p_harm * scale
    false_alarm = (1 - at.p_harm) * c.false_alarm * d.attained_alpha
    del c0
    return float(missed + false_alarm + c.fixed + c.per_subject * d.n_total)


def _missed_scale(problem: Problem, at: Problem) -> float:
    """The factor by which ``at``'s missed-hazard cost is ``problem``'s (same effect prior)."""
    c0, c = problem.consequences, at.consequences
    if c0.missed_hazard is not None and c.missed_hazard is not None:
        return c.missed_hazard / c0.missed_hazard if c0.missed_hazard > 0 else math.nan
    parts = ("exposed_population", "background_rate", "cost_per_case", "horizon_years")
    return float(np.prod([getattr(c, k) / getattr(c0, k) for k in parts]))


def policy_losses(
    problem: Problem, name: str, x: float, standards: Sequence[Policy], central: dict[str, Decision]
) -> dict[str, float]:
    """Expected loss of each standard with input ``name`` at ``x`` (inf where it cannot be met)."""
    at = with_value(problem, name, x)
    out = {}
    for pol in standards:
        if _invariant(pol, problem, name) and not (problem.consequences.missed_hazard == 0 and name != "prior.p_harm"):
            out[pol.name] = _relinked_loss(central[pol.name], problem, at)
        else:
            d = decide_policy(at, pol)
            out[pol.name] = math.inf if not d.feasible or d.expected_loss is None else d.expected_loss
    return out


def least_loss(losses: dict[str, float]) -> str | None:
    """The policy with the least finite loss (the first listed on a tie), or None."""
    finite = {k: v for k, v in losses.items() if np.isfinite(v)}
    return min(finite, key=finite.__getitem__) if finite else None


def _policy_gap(
    problem: Problem,
    name: str,
    pair: Sequence[Policy],
    central: dict[str, Decision],
    first: str,
    second: str,
    seen: dict[float, dict[str, float]],
) -> Callable[[float], float]:
    """The two standards' loss difference at each input value (kept in ``seen`` by value)."""

    def diff(x: float) -> float:
        if x not in seen:
            seen[x] = policy_losses(problem, name, x, pair, central)
        return float(seen[x][first] - seen[x][second])

    return diff


def policy_thresholds(
    problem: Problem,
    name: str,
    points: FloatArray,
    losses: list[dict[str, float]],
    standards: Sequence[Policy],
    central: dict[str, Decision],
) -> tuple[Threshold, ...]:
    """Break-even values where the least-loss standard changes between neighbouring points."""
    out = []
    for i in range(points.size - 1):
        a, b = float(points[i]), float(points[i + 1])
        left, right = least_loss(losses[i]), least_loss(losses[i + 1])
        if left == right or left is None or right is None:
            continue
        pair = [p for p in standards if p.name in (left, right)]
        ends_ok = all(np.isfinite(losses[j][k]) for j in (i, i + 1) for k in (left, right))
        if not ends_ok:
            out.append(Threshold(name, "policy", None, left, right, None, (a, b)))
            continue

        seen: dict[float, dict[str, float]] = {a: losses[i], b: losses[i + 1]}
        gap = _policy_gap(problem, name, pair, central, left, right, seen)
        root = _settle_root(gap, a, b, None)
        if root is None:
            out.append(Threshold(name, "policy", None, left, right, None, (a, b)))
            continue
        gap(root)
        at = seen[root]
        out.append(Threshold(name, "policy", root, left, right, (at[left], at[right]), (a, b)))
    return tuple(out)


# --------------------------------------------------------------------------
# the tornado


def _end_point(problem: Problem, value: float, standards_losses: dict[str, float] | None) -> EndPoint:
    d = optimize(problem)
    return EndPoint(
        value,
        d.alpha,
        d.attained_alpha,
        d.power,
        d.n_per_group,
        d.expected_loss,
        str(d.action),
        None if standards_losses is None else least_loss(standards_losses),
    )


def _scan_end(scan: Optima, i: int, standards_losses: dict[str, float] | None) -> EndPoint:
    def num(a: FloatArray) -> float | None:
        v = float(a[i])
        return v if np.isfinite(v) else None

    n = num(scan.n_per_group)
    return EndPoint(
        float(scan.values[i]),
        num(scan.alpha),
        num(scan.attained_alpha),
        num(scan.power),
        None if n is None else int(n),
        num(scan.expected_loss),
        scan.action[i],
        None if standards_losses is None else least_loss(standards_losses),
    )


def _policy_points(r: InputRange, per_side: int) -> FloatArray:
    """The ends, ``per_side`` points between each end and the central value, and the central value."""
    lo = _spaced(replace(r, high=r.central), per_side + 2) if r.central > r.low else np.array([r.low])
    hi = _spaced(replace(r, low=r.central), per_side + 2) if r.high > r.central else np.array([r.high])
    return np.unique(np.concatenate([lo, hi]))


def one_way(
    problem: Problem,
    r: InputRange,
    standards: Sequence[Policy],
    central: dict[str, Decision],
    points: int | None = None,
) -> OneWay:
    """One input over its range: the optimum at each end and every break-even value."""
    name = r.name
    if points is None:
        points = SCAN_POINTS if name in _COST_LIKE and fast_available(problem) else SLOW_SCAN_POINTS
    scan = optima(problem, name, _spaced(r, points)) if r.high > r.low else None
    thresholds: tuple[Threshold, ...] = () if scan is None else action_thresholds(problem, name, scan)
    ppoints = _policy_points(r, POLICY_POINTS) if standards and r.high > r.low else np.array([r.low, r.high])
    central_losses = {
        k: math.inf if not d.feasible or d.expected_loss is None else d.expected_loss for k, d in central.items()
    }
    plosses = (
        [
            central_losses if float(x) == r.central else policy_losses(problem, name, float(x), standards, central)
            for x in ppoints
        ]
        if standards
        else []
    )
    if standards and r.high > r.low:
        thresholds += policy_thresholds(problem, name, ppoints, plosses, standards, central)
    first, last = (plosses[0], plosses[-1]) if plosses else (None, None)
    if scan is not None and scan.values[0] == r.low and scan.values[-1] == r.high:
        low, high = _scan_end(scan, 0, first), _scan_end(scan, -1, last)
    else:
        low = _end_point(with_value(problem, name, r.low), r.low, first)
        high = _end_point(with_value(problem, name, r.high), r.high, last)
    swing = abs((high.expected_loss or math.nan) - (low.expected_loss or math.nan))
    ordered = tuple(sorted(thresholds, key=lambda t: t.value if t.value is not None else t.between[0]))
    return OneWay(name, r.scale, r.central, low, high, swing, ordered)


def tornado(
    problem: Problem,
    policies: Sequence[Policy] = (),
    ranges: dict[str, InputRange] | None = None,
    names: Sequence[str] | None = None,
    progress: Progress | None = None,
) -> Tornado:
    """One-way sensitivity of the loss-optimal choice to every input, with break-even values.

    Parameters
    ----------
    problem : Problem
    policies : sequence of Policy
        Standards to compare (the fully loss-optimal one, if given, is left
        out of the least-loss comparison); none to skip policies.
    ranges : dict, optional
        Ranges by input name; the rest use :func:`decide.decision.inputs.default_range`.
    names : sequence of str, optional
        The inputs to vary (default: every input of the problem).
    progress : callable, optional
        Called as ``progress(done, total)`` after each input.

    Returns
    -------
    Tornado
        Rows ordered by swing in expected loss, largest first.
    """
    names = tuple(names or input_names(problem))
    ranges = dict(ranges or {})
    standards = [p for p in policies if not is_benchmark(p)]
    central = {p.name: decide_policy(problem, p) for p in standards}
    central_losses = {
        k: math.inf if not d.feasible or d.expected_loss is None else d.expected_loss for k, d in central.items()
    }
    rows = []
    for i, name in enumerate(names):
        r = ranges.get(name) or default_range(problem, name)
        rows.append(one_way(problem, r, standards, central))
        if progress is not None:
            progress(i + 1, len(names))
    rows.sort(key=lambda w: -w.swing if np.isfinite(w.swing) else 0.0)
    method = "batch normal test" if fast_available(problem) else "optimiser at each value"
    centre = _end_point(problem, math.nan, central_losses if standards else None)
    return Tornado(problem.title, centre, tuple(rows), tuple(p.name for p in standards), method)


# --------------------------------------------------------------------------
# two-way grids


@dataclass(frozen=True)
class TwoWay(PlainData):
    """The loss-optimal design over a grid of two inputs.

    Tables are indexed ``[i][j]`` for ``y_values[i]`` and ``x_values[j]``.
    """

    title: str
    x: str
    y: str
    x_values: tuple[float, ...]
    y_values: tuple[float, ...]
    alpha: tuple[tuple[float, ...], ...]
    attained_alpha: tuple[tuple[float, ...], ...]
    n_per_group: tuple[tuple[float, ...], ...]
    expected_loss: tuple[tuple[float, ...], ...]
    action: tuple[tuple[str, ...], ...]
    method: str


def _table(a: FloatArray, shape: tuple[int, int]) -> tuple[tuple[float, ...], ...]:
    return tuple(tuple(float(v) for v in row) for row in np.asarray(a, dtype=np.float64).reshape(shape))


def two_way(
    problem: Problem, x: InputRange, y: InputRange, points: int = 25, progress: Progress | None = None
) -> TwoWay:
    """The loss-optimal attained alpha, size and action over a ``points`` x ``points`` grid.

    Both axes spaced as their ranges say (logit for ``p_harm``, log for
    positive quantities).  Where both inputs are prior or cost inputs and the
    study runs the normal test throughout, the whole grid is one batch;
    otherwise each row (a value of ``y``) is a batch or, for exact tests, each
    cell is an optimisation.
    """
    xs, ys = _spaced(x, points), _spaced(y, points)
    cost_axes = x.name in _COST_LIKE and y.name in _COST_LIKE
    if cost_axes and fast_available(problem) and x.name != y.name:
        return _two_way_batch(problem, x.name, y.name, xs, ys)
    return _two_way_by_rows(problem, x.name, y.name, xs, ys, progress)


def _grid_settings(problem: Problem, x: str, y: str, xs: FloatArray, ys: FloatArray) -> Settings:
    """``p_harm``, missed-cost scale, false-alarm and per-subject cost of each grid cell (``y`` slowest).

    Each is the ``x`` axis's setting times the ``y`` axis's over the central
    setting, so an axis that does not move it leaves it central (the ``x``
    axis's setting where the central one is 0).
    """
    px, sx, fx, cx = _batch_settings(problem, x, xs)
    py, sy, fy, cy = _batch_settings(problem, y, ys)
    grid = np.meshgrid(np.arange(xs.size), np.arange(ys.size))
    jx, iy = grid[0].ravel(), grid[1].ravel()
    settings = []
    for vx, vy, base in (
        (px, py, problem.p_harm),
        (sx, sy, 1.0),
        (fx, fy, problem.consequences.false_alarm),
        (cx, cy, problem.consequences.per_subject),
    ):
        settings.append(vx[jx] * vy[iy] / base if base != 0 else vx[jx])
    return settings[0], settings[1], settings[2], settings[3]


def _two_way_batch(problem: Problem, x: str, y: str, xs: FloatArray, ys: FloatArray) -> TwoWay:
    """The whole grid of two prior or cost inputs as one batch of normal tests."""
    shape = (ys.size, xs.size)
    b = batch_optimum(build_model(problem), *_grid_settings(problem, x, y, xs, ys))
    acts = actions_of(b.loss, b.flag_now, b.clear_now, b.feasible)
    return TwoWay(
        problem.title,
        x,
        y,
        tuple(map(float, xs)),
        tuple(map(float, ys)),
        _table(b.nominal, shape),
        _table(b.attained, shape),
        _table(b.n, shape),
        _table(b.loss, shape),
        tuple(tuple(str(a) for a in row) for row in acts.reshape(shape)),
        "batch normal test",
    )


def _two_way_by_rows(
    problem: Problem, x: str, y: str, xs: FloatArray, ys: FloatArray, progress: Progress | None
) -> TwoWay:
    """The grid one row (a value of ``y``) at a time: each row a batch, or an optimisation per cell."""
    shape = (ys.size, xs.size)
    rows = []
    for i, vy in enumerate(ys):
        rows.append(optima(with_value(problem, y, float(vy)), x, xs))
        if progress is not None:
            progress(i + 1, ys.size)

    def stack(field: str) -> tuple[tuple[float, ...], ...]:
        return _table(np.array([getattr(o, field) for o in rows]), shape)

    method = "batch normal test by row" if fast_available(problem) and x in _COST_LIKE else "optimiser at each cell"
    return TwoWay(
        problem.title,
        x,
        y,
        tuple(map(float, xs)),
        tuple(map(float, ys)),
        stack("alpha"),
        stack("attained_alpha"),
        stack("n_per_group"),
        stack("expected_loss"),
        tuple(o.action for o in rows),
        method,
    )
