"""The action a decision recommends: study, flag now, clear now, or none available.

One small helper, so that the rest of the sensitivity and simulation code
reads the action the same way wherever a :class:`Decision` comes from.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from ..designs._base import FloatArray
from .optimize import Decision

STUDY, FLAG_NOW, CLEAR_NOW, NOT_AVAILABLE = "study", "flag-now", "clear-now", "not-available"
ACTIONS = (STUDY, FLAG_NOW, CLEAR_NOW, NOT_AVAILABLE)


def recommended_action(decision: Decision) -> str:
    """``study`` if the study's expected net benefit is positive, else the better no-study action.

    A policy that cannot be met recommends nothing (``not-available``).
    Ties between flagging and clearing go to clearing, as in the decision
    engine (flag only when it is strictly cheaper).  The decision carries
    this as its ``action``; :func:`actions_of` is the same rule on arrays.
    """
    return str(decision.action)


def actions_of(
    loss: FloatArray, flag_now: FloatArray, clear_now: FloatArray, feasible: NDArray[np.bool_]
) -> NDArray[np.str_]:
    """The same rule on arrays of losses (``loss`` is the study's expected loss)."""
    no_study = np.where(flag_now < clear_now, FLAG_NOW, CLEAR_NOW)
    out = np.where(loss < np.minimum(flag_now, clear_now), STUDY, no_study)
    return np.asarray(np.where(feasible, out, NOT_AVAILABLE))
