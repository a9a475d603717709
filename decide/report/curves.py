"""The numbers behind the report's figures, computed by the decision core's own functions.

Each function returns arrays ready to plot; the figures module only draws
them.  Nothing here formats or rounds.

* :func:`loss_curve`: expected loss against the attained alpha at one size
  (every critical value of the normal test, or every attainable exact test);
* :func:`power_curves`: power against the effect for each available policy's
  design, and the prior's density over the same effects;
* :func:`optimal_alpha_curve`: the loss-optimal attained alpha as the cost
  ratio (missed hazard : false alarm) varies, the other inputs held.

References
----------
.. [1] Berger, J. O. (1985). *Statistical Decision Theory and Bayesian
   Analysis*, 2nd ed., Springer, sec. 4.4.3 (Bayes tests and their loss).
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import special

from ..decision.inputs import value_of
from ..decision.loss import build_model, exact_batches, normal_at
from ..decision.optimize import Decision
from ..decision.problem import Problem
from ..decision.sensitivity import optima
from ..designs._base import FloatArray
from ..engine.power import evaluate

#: Points along each plotted curve (normal tests and effect axes).
CURVE_POINTS = 120
#: The smallest attained alpha a loss curve shows (smaller ones crowd a log axis and change no choice).
SMALLEST_ALPHA = 1e-5


@dataclass(frozen=True)
class Curve:
    """One line of a figure: ``x`` and ``y`` of one length, and its label."""

    label: str
    x: FloatArray
    y: FloatArray


def loss_curve(problem: Problem, n_per_group: int) -> Curve:
    """Expected loss (errors and study) against the attained alpha at ``n_per_group``."""
    model = build_model(problem)
    n = np.array([float(n_per_group)])
    study = float(model.study_cost(n)[0])
    if bool(model.uses_exact(n)[0]):
        for _, opts in exact_batches(model, n):
            attained = np.asarray(opts.chars.attained[0], dtype=np.float64)
            missed = np.asarray(opts.chars.missed[0], dtype=np.float64)
        keep = (attained >= SMALLEST_ALPHA) & (attained < 1)
        order = np.argsort(attained[keep])
        a, m = attained[keep][order], missed[keep][order]
    else:
        sides = model.setting.sides
        nominal = np.geomspace(SMALLEST_ALPHA, 0.6, CURVE_POINTS)
        z = special.ndtri(1 - nominal / sides)
        c = normal_at(model, np.full(z.shape, n[0]), z)
        a, m = np.asarray(c.attained), np.asarray(c.missed)
    return Curve("expected loss", a, model.error_loss(a, m) + study)


def effect_axis(problem: Problem, decisions: Sequence[Decision]) -> FloatArray:
    """Effects from 1 to beyond the prior's bulk and every policy's detectable effect."""
    e = problem.effect
    top = e.quantile(0.995) if not e.is_point else e.median
    found = [d.detectable_effect for d in decisions if d.detectable_effect is not None]
    top = max([top * 1.3, 1.5, *[1.2 * x for x in found if np.isfinite(x)]])
    limit = float(problem.study.setting().design.effect_limit(np.asarray(problem.study.baseline, dtype=np.float64)))
    top = min(top, limit * 0.999)
    return np.linspace(1.0, top, CURVE_POINTS)


def power_curves(problem: Problem, decisions: Sequence[Decision]) -> tuple[FloatArray, list[Curve], FloatArray]:
    """Effects, one power curve per available policy, and the prior density over the effects.

    The density is zero everywhere for a point effect (the figure marks the point instead).
    """
    effects = effect_axis(problem, decisions)
    setting = problem.study.setting()
    curves = []
    for d in decisions:
        if not d.feasible or d.alpha is None or d.n_per_group is None:
            continue
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # approximation notes are in the decision's warnings
            r = evaluate(
                setting, np.full(effects.shape, d.alpha), np.full(effects.shape, float(d.n_per_group)), effects
            )
        curves.append(Curve(d.title, effects, np.asarray(r.power, dtype=np.float64)))
    e = problem.effect
    if e.is_point:
        density = np.zeros(effects.shape)
    else:
        u = np.log(effects / e.median) / e.log_sd
        density = np.exp(-u * u / 2) / (np.sqrt(2 * np.pi) * e.log_sd * effects)
    return effects, curves, density


def optimal_alpha_curve(problem: Problem, implied: Sequence[float], points: int) -> Curve:
    """The loss-optimal attained alpha against the cost ratio, over a range holding ``implied`` and the stated ratio."""
    stated = value_of(problem, "consequences.cost_ratio")
    marks = [x for x in (stated, *implied) if x is not None and np.isfinite(x) and x > 0]
    lo, hi = min(marks) / 4, max(marks) * 4
    ratios = np.geomspace(lo, hi, points)
    scan = optima(problem, "consequences.cost_ratio", ratios)
    return Curve("loss-optimal attained alpha", ratios, np.asarray(scan.attained_alpha, dtype=np.float64))
