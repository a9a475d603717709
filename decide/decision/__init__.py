"""The decision engine: problem, prior, loss, policies, optimiser and audit.

Depends on :mod:`decide.engine` and :mod:`decide.designs`; the scenario
files, the reports and the command line build on it.
"""

from __future__ import annotations

from .audit import Audit, audit
from .optimize import Comparison, Decision, compare, decide_policy, optimize
from .policies import LOSS_OPTIMAL, Policy
from .prior import EffectPrior
from .problem import Consequences, Constraints, Problem, Study

__all__ = [
    "LOSS_OPTIMAL",
    "Audit",
    "Comparison",
    "Consequences",
    "Constraints",
    "Decision",
    "EffectPrior",
    "Policy",
    "Problem",
    "Study",
    "audit",
    "compare",
    "decide_policy",
    "optimize",
]
