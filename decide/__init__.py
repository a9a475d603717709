"""decide: choose alpha, beta and study size for rare-disease risk studies.

Decision support, not a decision: the value judgments belong to the
responsible body; defer to applicable regulations, the competent authority
and licensed professional judgment.

The main entry points are re-exported here: :func:`power`, :func:`solve`,
:func:`optimize`, :func:`compare`, :func:`decide_policy`, :func:`audit` and
:func:`interpret` (a finished study's counts read against a scenario).
(The modules of the same names stay importable as ``decide.solve`` and so
on with ``from decide.solve import ...``.)
"""

from __future__ import annotations

from importlib.metadata import PackageNotFoundError
from importlib.metadata import version as _installed_version

from .decision.audit import Audit, audit
from .decision.interpret import Interpretation, interpret
from .decision.optimize import Comparison, Decision, compare, decide_policy, optimize
from .decision.policies import LOSS_OPTIMAL, Policy
from .decision.prior import EffectPrior
from .decision.problem import Consequences, Constraints, Problem, Study
from .designs import DESIGNS, StudyDesign, get_design
from .engine.power import PowerResult, power
from .engine.solve import Solution, SolutionArray, solve
from .errors import ApproximationWarning, DecideError, InfeasibleError

try:
    #: The version, as installed (pyproject.toml is the one place it is written).
    __version__ = _installed_version("decide")
except PackageNotFoundError:  # a source tree that was never installed
    __version__ = "0+unknown"

__all__ = [
    "DESIGNS",
    "LOSS_OPTIMAL",
    "ApproximationWarning",
    "Audit",
    "Comparison",
    "Consequences",
    "Constraints",
    "DecideError",
    "Decision",
    "EffectPrior",
    "InfeasibleError",
    "Interpretation",
    "Policy",
    "PowerResult",
    "Problem",
    "Solution",
    "SolutionArray",
    "StudyDesign",
    "Study",
    "audit",
    "compare",
    "decide_policy",
    "get_design",
    "interpret",
    "optimize",
    "power",
    "solve",
]
