"""Probabilistic inputs: draws of the prior and the costs, and what they do to the choice.

Each uncertain input has a distribution: a beta for the prior probability of
harm (by its mean and standard deviation, or its two shape parameters) and a
lognormal for a cost or the baseline (by a central interval).  A standard
deviation of 0, or an interval of zero width, is a point mass.

:func:`probabilistic` draws the inputs (independently, from
``numpy.random.default_rng(SeedSequence(seed))``) and reports the spread of
the loss-optimal alpha, power and size, how often each action is best, the
probability that each policy's design (as chosen at the central inputs) has
the least loss, the design that minimises the loss averaged over the draws,
the expected regret of committing to the central optimum, and the expected
value of perfect information (EVPI) about the uncertain inputs.

References
----------
.. [1] Claxton, K. (1999). The irrelevance of inference: a decision-making
   approach to the stochastic evaluation of health care technologies.
   *J. Health Econ.* 18, 341-364 (EVPI from probabilistic draws).
.. [2] Briggs, A., Claxton, K. and Sculpher, M. (2006). *Decision Modelling
   for Health Economic Evaluation*. Oxford University Press, ch. 4 (beta and
   lognormal input distributions, method of moments; from memory).
.. [3] Raiffa, H. and Schlaifer, R. (1961). *Applied Statistical Decision
   Theory*. Harvard University Press (expected value of perfect information).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
from scipy import special, stats

from .._results import PlainData
from ..designs._base import FloatArray
from ..errors import ApproximationWarning, DecideError
from .actions import ACTIONS, actions_of
from .batch import batch_optimum, normal_throughout
from .inputs import check_name, value_of, with_value
from .loss import build_model
from .optimize import Decision, compare, optimize
from .policies import LOSS_OPTIMAL, Policy
from .problem import Problem
from .sensitivity import Progress

#: Draws whose own optimum competes for the least averaged loss when the baseline is uncertain.
CANDIDATES = 200
QUANTILES = (0.05, 0.25, 0.5, 0.75, 0.95)
#: Inputs that may carry a distribution, and the family each takes.
FAMILIES = {
    "prior.p_harm": "beta",
    "consequences.missed_hazard": "lognormal",
    "consequences.cost_per_case": "lognormal",
    "consequences.false_alarm": "lognormal",
    "consequences.per_subject": "lognormal",
    "study.baseline": "lognormal",
}


@dataclass(frozen=True)
class BetaInput:
    """A beta distribution for a probability; ``a = b = inf`` with ``mean`` set is a point mass."""

    mean: float
    a: float
    b: float

    @classmethod
    def from_mean_sd(cls, mean: float, sd: float, name: str = "prior.p_harm") -> BetaInput:
        """Method of moments: ``a + b = mean (1 - mean) / sd**2 - 1``."""
        if not 0 < mean < 1:
            raise DecideError(f"{name}.mean must be strictly between 0 and 1, but got {mean:g}", (name,))
        if sd < 0:
            raise DecideError(f"{name}.sd must be >= 0, but got {sd:g}", (name,))
        if sd == 0:
            return cls(mean, math.inf, math.inf)
        limit = math.sqrt(mean * (1 - mean))
        if sd >= limit:
            raise DecideError(
                f"{name}.sd must be below sqrt(mean (1 - mean)) = {limit:.4g} for a beta distribution, but got {sd:g}",
                (name,),
            )
        total = mean * (1 - mean) / sd**2 - 1
        return cls(mean, mean * total, (1 - mean) * total)

    @classmethod
    def from_shapes(cls, a: float, b: float, name: str = "prior.p_harm") -> BetaInput:
        if not (a > 0 and b > 0 and math.isfinite(a) and math.isfinite(b)):
            raise DecideError(f"{name}.a and {name}.b must be finite and above 0, but got {a:g} and {b:g}", (name,))
        return cls(a / (a + b), a, b)

    @property
    def is_point(self) -> bool:
        return math.isinf(self.a)

    def draw(self, rng: np.random.Generator, size: int) -> FloatArray:
        if self.is_point:
            return np.full(size, self.mean)
        return np.asarray(rng.beta(self.a, self.b, size))

    def quantile(self, q: float) -> float:
        return self.mean if self.is_point else float(special.betaincinv(self.a, self.b, q))


@dataclass(frozen=True)
class LognormalInput:
    """A lognormal distribution by its median and log-scale standard deviation (0: a point mass)."""

    median: float
    log_sd: float

    @classmethod
    def from_interval(cls, low: float, high: float, level: float, name: str) -> LognormalInput:
        """Lognormal whose central ``level`` interval is ``[low, high]`` (equal ends: a point mass)."""
        if not (low > 0 and math.isfinite(low)):
            raise DecideError(f"{name}.low must be above 0, but got {low:g}", (name,))
        if not (high >= low and math.isfinite(high)):
            raise DecideError(f"{name}.high must be at least {name}.low ({low:g}), but got {high:g}", (name,))
        if not 0 < level < 1:
            raise DecideError(f"{name}.level must be strictly between 0 and 1, but got {level:g}", (name,))
        z = float(special.ndtri((1 + level) / 2))
        return cls(math.sqrt(low * high), (math.log(high) - math.log(low)) / (2 * z))

    @property
    def is_point(self) -> bool:
        return self.log_sd == 0

    def draw(self, rng: np.random.Generator, size: int) -> FloatArray:
        if self.is_point:
            return np.full(size, self.median)
        return np.asarray(self.median * np.exp(self.log_sd * rng.standard_normal(size)))

    def quantile(self, q: float) -> float:
        return float(self.median * np.exp(self.log_sd * special.ndtri(q)))


Distribution = BetaInput | LognormalInput


def check_uncertainty(problem: Problem, inputs: dict[str, Distribution]) -> None:
    """Raise :class:`DecideError` for an input that cannot carry a distribution in this problem."""
    for name, dist in inputs.items():
        if name not in FAMILIES:
            raise DecideError(
                f"uncertainty: {name} cannot carry a distribution; choose from {', '.join(FAMILIES)}", ("uncertainty",)
            )
        check_name(problem, name)
        family = "beta" if isinstance(dist, BetaInput) else "lognormal"
        if family != FAMILIES[name]:
            raise DecideError(f"uncertainty: {name} takes a {FAMILIES[name]} distribution", ("uncertainty",))
        for q in (1e-6, 1 - 1e-6):
            try:
                with_value(problem, name, dist.quantile(q) if not dist.is_point else value_of(problem, name))
            except DecideError as exc:
                raise DecideError(
                    f"uncertainty: {name}: the distribution reaches invalid values: {exc}", ("uncertainty",)
                ) from None


@dataclass(frozen=True)
class Spread(PlainData):
    """Quantiles of one output over the draws (``quantiles`` at ``QUANTILES``)."""

    name: str
    mean: float
    quantiles: tuple[float, ...]


@dataclass(frozen=True)
class DesignSummary(PlainData):
    """A design (test and size) and its loss averaged over the draws."""

    label: str
    alpha: float | None
    attained_alpha: float | None
    n_per_group: int | None
    average_loss: float


@dataclass(frozen=True)
class Probabilistic(PlainData):
    """What the draws say about the choice; see the module documentation."""

    title: str
    seed: int
    draws: int
    inputs: dict[str, str]
    quantile_levels: tuple[float, ...]
    spreads: tuple[Spread, ...]
    action_probability: dict[str, float]
    policy_least_loss_probability: dict[str, float]
    central_optimum: DesignSummary
    average_optimum: DesignSummary
    expected_regret_of_central: float
    evpi: float
    mean_optimal_loss: float
    method: str


def _describe(dist: Distribution) -> str:
    if isinstance(dist, BetaInput):
        return f"point mass at {dist.mean:g}" if dist.is_point else f"beta(a={dist.a:.4g}, b={dist.b:.4g})"
    if dist.is_point:
        return f"point mass at {dist.median:g}"
    return f"lognormal(median={dist.median:.4g}, log_sd={dist.log_sd:.4g})"


def draw_inputs(inputs: dict[str, Distribution], draws: int, seed: int) -> dict[str, FloatArray]:
    """Independent draws of each input, in the order of the input names (sorted)."""
    rng = np.random.default_rng(np.random.SeedSequence(seed))
    return {name: inputs[name].draw(rng, draws) for name in sorted(inputs)}


def _settings(
    problem: Problem, values: dict[str, FloatArray], size: int
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """``p_harm``, missed-cost scale, false-alarm and per-subject cost of each draw."""
    c = problem.consequences
    p = values.get("prior.p_harm", np.full(size, problem.p_harm))
    scale = np.ones(size)
    for name in ("consequences.missed_hazard", "consequences.cost_per_case"):
        if name in values:
            scale = scale * values[name] / value_of(problem, name)
    fa = values.get("consequences.false_alarm", np.full(size, c.false_alarm))
    per = values.get("consequences.per_subject", np.full(size, c.per_subject))
    return p, scale, fa, per


def _design_losses(
    d: Decision, problem: Problem, settings: tuple[FloatArray, FloatArray, FloatArray, FloatArray]
) -> FloatArray:
    """The loss of a fixed design (made for ``problem``) under each draw of the prior and costs."""
    p, scale, fa, per = settings
    if not d.feasible or d.loss_parts is None or d.attained_alpha is None or d.n_total is None:
        return np.full(p.shape, np.inf)
    missed_unit = d.loss_parts["missed"] / problem.p_harm
    return np.asarray(
        p * scale * missed_unit + (1 - p) * fa * d.attained_alpha + problem.consequences.fixed + per * d.n_total
    )


def _certainty_equivalent(problem: Problem, settings: tuple[FloatArray, FloatArray, FloatArray, FloatArray]) -> Problem:
    """A problem whose loss equals, for every design, the loss averaged over the draws.

    The loss is linear in ``p_harm * scale``, ``(1 - p_harm) * false_alarm``
    and ``per_subject``, so a problem with those three averages (``p_harm`` at
    its mean) has the averaged loss of every design.
    """
    p, scale, fa, per = settings
    pm = float(np.mean(p))
    c = problem.consequences
    m_scale = float(np.mean(p * scale)) / pm
    cons = replace(c, false_alarm=float(np.mean((1 - p) * fa)) / (1 - pm), per_subject=float(np.mean(per)))
    if c.missed_hazard is not None:
        cons = replace(cons, missed_hazard=c.missed_hazard * m_scale)
    else:
        assert c.cost_per_case is not None
        cons = replace(cons, cost_per_case=c.cost_per_case * m_scale)
    return replace(problem, p_harm=pm, consequences=cons)


def _optima_per_draw(
    problem: Problem, values: dict[str, FloatArray], size: int, progress: Progress | None
) -> tuple[dict[str, FloatArray], tuple[str, ...], str, list[Decision]]:
    """The loss-optimal design of each draw: one batch for the normal test, else one optimisation each.

    Also returns the decisions of the first :data:`CANDIDATES` draws (slow path only).
    """
    model = build_model(problem)
    if "study.baseline" not in values and normal_throughout(model):
        b = batch_optimum(model, *_settings(problem, values, size))
        acts = actions_of(b.loss, b.flag_now, b.clear_now, b.feasible)
        out = {
            "alpha": b.nominal,
            "attained_alpha": b.attained,
            "power": b.power,
            "n_per_group": b.n,
            "expected_loss": b.loss,
        }
        return out, tuple(str(a) for a in acts), "batch normal test", []
    cols: dict[str, list[float]] = {k: [] for k in ("alpha", "attained_alpha", "power", "n_per_group", "expected_loss")}
    acts_: list[str] = []
    seen: list[Decision] = []
    for i in range(size):
        prob = problem
        for name, v in values.items():
            prob = with_value(prob, name, float(v[i]))
        d = optimize(prob)
        if len(seen) < CANDIDATES:
            seen.append(replace(d, policy=f"draw {i}"))
        for k in cols:
            v_ = getattr(d, k)
            cols[k].append(math.nan if v_ is None else float(v_))
        acts_.append(str(d.action))
        if progress is not None and (i + 1) % 50 == 0:
            progress(i + 1, size)
    return {k: np.array(v) for k, v in cols.items()}, tuple(acts_), "optimiser at each draw", seen


def _summary(label: str, d: Decision, average: float) -> DesignSummary:
    return DesignSummary(label, d.alpha, d.attained_alpha, d.n_per_group, average)


@dataclass(frozen=True)
class _DrawOptima:
    """The drawn inputs and the loss-optimal design of each draw.

    ``own`` holds the optimum's numbers by field (NaN where none), ``actions``
    the recommended action of each draw, ``method`` how the optima were found,
    and ``candidates`` the first :data:`CANDIDATES` draws' own decisions
    (labelled ``draw i``; only when each draw was optimised on its own).
    """

    seed: int
    size: int
    inputs: dict[str, Distribution]
    values: dict[str, FloatArray]
    own: dict[str, FloatArray]
    actions: tuple[str, ...]
    method: str
    candidates: list[Decision]


def probabilistic(
    problem: Problem,
    inputs: dict[str, Distribution],
    draws: int,
    seed: int,
    policies: Sequence[Policy] = (),
    progress: Progress | None = None,
) -> Probabilistic:
    """Draw the uncertain inputs and report what they do to the loss-optimal choice.

    Parameters
    ----------
    problem : Problem
        The central problem (the inputs at their stated values).
    inputs : dict
        A :class:`BetaInput` or :class:`LognormalInput` by input name.
    draws : int
        Number of draws, at least 1.
    seed : int
        Seed of ``numpy.random.SeedSequence``; the same seed gives the same numbers.
    policies : sequence of Policy
        Standards whose designs (chosen at the central inputs) compete in each draw.

    Returns
    -------
    Probabilistic

    Notes
    -----
    The design minimising the averaged loss, the expected regret and the EVPI
    are found exactly when only the prior and the costs are uncertain (the
    loss is linear in them for a fixed design).  With an uncertain baseline
    the operating characteristics change from draw to draw; the averaged-loss
    design is then sought among the central optimum, each draw's optimum (up
    to 200 of them) and the policies' designs, which bounds the EVPI from
    below; the result says so in ``method``.
    """
    if draws < 1:
        raise DecideError(f"draws must be at least 1, but got {draws}", ("draws",))
    check_uncertainty(problem, inputs)
    values = draw_inputs(inputs, draws, seed)
    own, acts, method, seen = _optima_per_draw(problem, values, draws, progress)
    drawn = _DrawOptima(seed, draws, inputs, values, own, acts, method, seen)
    pols = list(policies) if any(p == LOSS_OPTIMAL for p in policies) else [LOSS_OPTIMAL, *policies]
    decisions = list(compare(problem, pols))
    central = next(d for d in decisions if d.policy == LOSS_OPTIMAL.name)
    if "study.baseline" in values:
        return _with_baseline(problem, drawn, decisions, central)
    return _with_fixed_baseline(problem, drawn, decisions, central)


def _no_study_losses(
    problem: Problem, settings: tuple[FloatArray, FloatArray, FloatArray, FloatArray]
) -> tuple[FloatArray, FloatArray]:
    """The loss in each draw of flagging the hazard now and of clearing it now, without a study."""
    p, scale, fa, _ = settings
    return (1 - p) * fa, p * scale * build_model(problem).expected_missed


def _with_fixed_baseline(
    problem: Problem, drawn: _DrawOptima, decisions: list[Decision], central: Decision
) -> Probabilistic:
    """What the draws say when only the prior and the costs are drawn (each design's loss is linear in them)."""
    settings = _settings(problem, drawn.values, drawn.size)
    design_losses = {d.policy: _design_losses(d, problem, settings) for d in decisions}
    # every design's loss is linear in the drawn inputs, so the certainty-equivalent
    # problem's loss is the averaged loss, and its optimum minimises it
    avg = optimize(_certainty_equivalent(problem, settings))
    avg_loss = avg.expected_loss if avg.feasible and avg.expected_loss is not None else math.inf
    flag, clear = _no_study_losses(problem, settings)
    own_loss = np.fmin(drawn.own["expected_loss"], np.minimum(flag, clear))
    best_avg = min(avg_loss, float(np.mean(flag)), float(np.mean(clear)))
    committed = _committed(central, design_losses[central.policy], flag, clear)
    average = _summary("least average loss", avg, avg_loss)
    return _result(problem, drawn, own_loss, design_losses, central, committed, average, best_avg, drawn.method)


def _committed(central: Decision, study: FloatArray, flag: FloatArray, clear: FloatArray) -> FloatArray:
    """Loss in each draw of doing what the central optimum recommends (the study, or flag or clear now)."""
    action = str(central.action)
    if action == "flag-now":
        return flag
    if action == "clear-now":
        return clear
    return study


def _spreads(own: dict[str, FloatArray]) -> tuple[Spread, ...]:
    """Mean and quantiles over the draws of each number of the draws' own optima (none if no draw has one)."""
    if not np.isfinite(own["expected_loss"]).any():
        return ()
    return tuple(
        Spread(k, float(np.nanmean(own[k])), tuple(float(v) for v in np.nanquantile(own[k], QUANTILES)))
        for k in ("alpha", "attained_alpha", "power", "n_per_group", "expected_loss")
    )


def _least_loss_shares(design_losses: dict[str, FloatArray]) -> dict[str, float]:
    """The share of draws in which each design has the least loss (ties, up to rounding, count for each)."""
    names = list(design_losses)
    table = np.vstack([design_losses[k] for k in names])
    best = np.min(table, axis=0)
    tied = np.isfinite(table) & (table <= best + 1e-9 * np.abs(best))
    return {k: float(np.mean(tied[i])) for i, k in enumerate(names)}


def _result(
    problem: Problem,
    drawn: _DrawOptima,
    own_loss: FloatArray,
    design_losses: dict[str, FloatArray],
    central: Decision,
    central_losses: FloatArray,
    average: DesignSummary,
    best_avg: float,
    method: str,
) -> Probabilistic:
    spreads = _spreads(drawn.own)
    share = _least_loss_shares(design_losses)
    action_share = {a: float(np.mean(np.asarray(drawn.actions) == a)) for a in ACTIONS}
    # regret and EVPI are measured against each draw's best choice, a study or none
    regret = float(np.mean(np.fmin(central_losses, np.inf) - own_loss))
    mean_own = float(np.mean(own_loss))
    evpi = best_avg - mean_own
    if abs(evpi) <= 1e-9 * abs(mean_own):  # zero up to rounding (it cannot be negative)
        evpi = 0.0
    return Probabilistic(
        problem.title,
        int(drawn.seed),
        drawn.size,
        {k: _describe(v) for k, v in sorted(drawn.inputs.items())},
        QUANTILES,
        spreads,
        action_share,
        share,
        _summary("optimum at the central inputs", central, float(np.mean(central_losses))),
        average,
        regret,
        evpi,
        float(np.mean(own_loss)),
        method,
    )


def _losses_at_drawn_baselines(
    problem: Problem,
    designs: list[Decision],
    settings: tuple[FloatArray, FloatArray, FloatArray, FloatArray],
    baselines: FloatArray,
) -> dict[str, FloatArray]:
    """The loss of each fixed design in each draw, its power and attained alpha recomputed at the draw's baseline.

    The effects of the prior's quadrature are held just below the design's
    largest possible effect at each baseline.
    """
    from ..engine.power import power as _power

    p, scale, fa, per = settings
    s = problem.study
    model = build_model(problem)
    design = model.setting.design
    nodes, weights = problem.effect.nodes()
    effects = np.minimum(nodes[None, :], np.asarray(design.effect_limit(baselines))[:, None] * (1 - 1e-9))
    m_cost = problem.consequences.missed_cost(nodes)
    losses: dict[str, FloatArray] = {}
    for d in designs:
        assert d.alpha is not None and d.n_per_group is not None and d.n_total is not None
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ApproximationWarning)
            res = _power(
                s.design,
                d.alpha,
                d.n_per_group,
                effects,
                baselines[:, None],
                allocation=s.allocation if design.allocation_name else None,
                years=s.years if design.uses_years else None,
                sides=s.sides,
                test="exact" if d.test == "exact" else "normal",
                continuity=s.continuity,
            )
        miss = (1 - res.power) @ (weights * m_cost)
        att = res.attained_alpha[:, 0]
        losses[d.policy] = np.asarray(
            p * scale * miss + (1 - p) * fa * att + problem.consequences.fixed + per * d.n_total
        )
    return losses


def _with_baseline(problem: Problem, drawn: _DrawOptima, decisions: list[Decision], central: Decision) -> Probabilistic:
    """What the draws say when they move the baseline: each design re-evaluated per draw.

    The policies' designs in ``decisions`` and the first draws' own optima
    (labelled ``draw i``) are the candidates for the least averaged loss.
    """
    settings = _settings(problem, drawn.values, drawn.size)
    candidates = [d for d in decisions + drawn.candidates if d.feasible]
    losses = _losses_at_drawn_baselines(problem, candidates, settings, drawn.values["study.baseline"])
    flag, clear = _no_study_losses(problem, settings)
    own_loss = np.fmin(drawn.own["expected_loss"], np.minimum(flag, clear))
    avg_key = min(losses, key=lambda k: float(np.mean(losses[k])))
    avg_d = next(d for d in candidates if d.policy == avg_key)
    best_avg = min(float(np.mean(losses[avg_key])), float(np.mean(flag)), float(np.mean(clear)))
    design_losses = {k: v for k, v in losses.items() if not k.startswith("draw ")}
    central_losses = _committed(central, losses.get(central.policy, np.full(drawn.size, np.inf)), flag, clear)
    average = _summary("least average loss among candidates", avg_d, float(np.mean(losses[avg_key])))
    method = drawn.method + "; averaged-loss design among candidates (baseline uncertain)"
    return _result(problem, drawn, own_loss, design_losses, central, central_losses, average, best_avg, method)


def lognormal_check_quantiles(dist: LognormalInput, qs: Sequence[float]) -> FloatArray:
    """scipy's quantiles of the same lognormal (for checks and reports)."""
    return np.asarray(stats.lognorm.ppf(qs, s=dist.log_sd, scale=dist.median))
