"""The power engine: normal and exact tests, power and the solver.

Depends only on :mod:`decide.designs` (and the package's checks and
errors); the decision layer builds on it.
"""

from __future__ import annotations

from .power import PowerResult, power
from .solve import Solution, SolutionArray, solve

__all__ = ["PowerResult", "Solution", "SolutionArray", "power", "solve"]
