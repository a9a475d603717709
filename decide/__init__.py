"""decide: choose alpha, beta and study size for rare-disease risk studies.

Decision support, not a decision: the value judgments belong to the
responsible body; defer to applicable regulations, the competent authority
and licensed professional judgment.
"""

from __future__ import annotations

from .designs import DESIGNS, StudyDesign, get_design
from .errors import ApproximationWarning, DecideError, InfeasibleError
from .power import PowerResult, power

__version__ = "0.1.0"

__all__ = [
    "DESIGNS",
    "ApproximationWarning",
    "DecideError",
    "InfeasibleError",
    "PowerResult",
    "StudyDesign",
    "get_design",
    "power",
]
