"""The action a decision recommends (study, flag now, clear now, or none available), on arrays.

A single :class:`~decide.decision.optimize.Decision` carries its ``action``;
:func:`actions_of` is the same rule for arrays of losses (the batch optimiser
and the sweeps).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from ..designs._base import FloatArray

STUDY, FLAG_NOW, CLEAR_NOW, NOT_AVAILABLE = "study", "flag-now", "clear-now", "not-available"
ACTIONS = (STUDY, FLAG_NOW, CLEAR_NOW, NOT_AVAILABLE)


def actions_of(
    loss: FloatArray, flag_now: FloatArray, clear_now: FloatArray, feasible: NDArray[np.bool_]
) -> NDArray[np.str_]:
    """The decision engine's action rule on arrays (``loss`` is the study's expected loss).

    ``study`` where the study costs less than deciding now; else flag now
    only where it is strictly cheaper than clearing; ``not-available`` where
    the policy cannot be met.
    """
    no_study = np.where(flag_now < clear_now, FLAG_NOW, CLEAR_NOW)
    out = np.where(loss < np.minimum(flag_now, clear_now), STUDY, no_study)
    return np.asarray(np.where(feasible, out, NOT_AVAILABLE))
