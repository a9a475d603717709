"""The numbers of a report, gathered once, and their shown form for the page.

:func:`gather` runs every computation a report needs (the comparison, the
one-way and two-way sensitivity, the draws, the simulation, the figures'
curves; with a finished study's counts, their reading against the plan) and
returns a frozen :class:`ReportResults`.  :func:`page` turns it
into plain data for the templates: every number is a :class:`Num` holding
the engine's value, its shown text (from :mod:`decide.report.numbers`) and
the result field it comes from (``decision.alpha``,
``comparison.decisions[2].regret``), which the HTML carries as ``data-key``.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .. import __version__
from ..decision import inputs as _inputs
from ..decision.interpret import Interpretation, interpret_planned
from ..decision.observed import Counts
from ..decision.optimize import Comparison, Decision, compare
from ..decision.policies import LOSS_OPTIMAL, Policy
from ..decision.sensitivity import Tornado, TwoWay, fast_available, tornado, two_way
from ..decision.simulate import SIMULATED, Simulation, design_name, simulate
from ..decision.uncertainty import Probabilistic, probabilistic
from ..scenario import LoadedScenario
from . import curves as cv

#: Studies simulated under each hypothesis in a full report.
SIMULATED_STUDIES = 20_000
#: Draws of the probabilistic part, when the scenario has an [uncertainty] table.
DRAWS = 2_000
#: Points per axis of the two-way map (normal test; exact tests are slower).
GRID_POINTS = {True: 25, False: 7}
#: Points of the optimal-alpha curve (normal test; exact tests are slower).
ALPHA_POINTS = {True: 60, False: 9}

Progress = Callable[[str], None]


@dataclass(frozen=True)
class AfterStudy:
    """A finished study's counts read against the report's plan, and the data file they came from."""

    reading: Interpretation
    file_name: str
    sha256: str


@dataclass(frozen=True)
class ReportResults:
    """Everything a report shows, computed once (``None`` where a part was skipped)."""

    loaded: LoadedScenario
    comparison: Comparison
    decision: Decision
    tornado: Tornado | None
    grid: TwoWay | None
    probabilistic: Probabilistic | None
    simulation: Simulation | None
    loss_curve: cv.Curve | None
    power: tuple[Any, list[cv.Curve], Any]
    alpha_curve: cv.Curve | None
    quick: bool
    seed: int | None
    sha256: str
    version: str
    date: str
    after: AfterStudy | None = None


def file_sha256(path: Any) -> str:
    """The SHA-256 of a file's bytes, in hex."""
    with open(path, "rb") as f:
        return hashlib.sha256(f.read()).hexdigest()


def _with_optimum(policies: Sequence[Policy]) -> list[Policy]:
    return list(policies) if LOSS_OPTIMAL in policies else [*policies, LOSS_OPTIMAL]


def gather(
    loaded: LoadedScenario,
    policies: Sequence[Policy],
    quick: bool = False,
    seed: int = 0,
    progress: Progress | None = None,
    today: _dt.date | None = None,
    observed: Counts | None = None,
    observed_path: Any = None,
) -> ReportResults:
    """Run every computation of a report (``quick`` skips the sensitivity, draws and simulation).

    ``observed`` (read from the data file ``observed_path``) adds the reading
    of a finished study's counts against the policies compared, as
    ``decide interpret`` gives it.
    """
    step = progress or (lambda what: None)
    problem = loaded.problem
    step("comparing policies")
    comparison = compare(problem, _with_optimum(policies))
    decision = next(d for d in comparison if d.policy == LOSS_OPTIMAL.name)
    after = None
    if observed is not None:
        step("reading the observed counts")
        reading = interpret_planned(problem, observed, list(comparison), len(policies))
        after = AfterStudy(reading, Path(observed_path).name, file_sha256(observed_path))
    fast = fast_available(problem)
    step("drawing the figures' curves")
    loss = cv.loss_curve(problem, decision.n_per_group) if decision.n_per_group is not None else None
    power = cv.power_curves(problem, list(comparison))
    implied = [d.implied_cost_ratio for d in comparison if d.implied_cost_ratio is not None]
    alpha = cv.optimal_alpha_curve(problem, implied, ALPHA_POINTS[fast])
    tor = grid = drawn = sim = None
    if not quick:
        step("one-way sensitivity")
        tor = tornado(problem)
        step("two-way map")
        x = _inputs.default_range(problem, "prior.p_harm")
        y = _inputs.default_range(problem, "consequences.cost_ratio")
        grid = two_way(problem, x, y, GRID_POINTS[fast])
        unc = loaded.model.uncertainty
        if unc is not None:
            step("probabilistic draws")
            drawn = probabilistic(problem, unc.to_inputs(), DRAWS, seed, list(policies))
        if decision.n_per_group is not None and decision.alpha is not None and design_name(problem) in SIMULATED:
            step("simulating studies")
            sim = simulate(problem, decision, SIMULATED_STUDIES, seed)
    return ReportResults(
        loaded=loaded,
        comparison=comparison,
        decision=decision,
        tornado=tor,
        grid=grid,
        probabilistic=drawn,
        simulation=sim,
        loss_curve=loss,
        power=power,
        alpha_curve=alpha,
        quick=quick,
        seed=None if quick else seed,
        sha256=file_sha256(loaded.path),
        version=__version__,
        date=(today or _dt.datetime.now(_dt.UTC).date()).isoformat(),
        after=after,
    )
