"""Study designs, one module each, behind :class:`StudyDesign`.

To add a design, write a module with a :class:`StudyDesign` subclass and a
module-level ``DESIGN`` instance, and list it in :data:`DESIGNS`: every list
of designs (the command line's choices, the scenario schema, the docs'
table, checked by a test) is read from there.
"""

from __future__ import annotations

from ..errors import DecideError
from . import case_control, cohort_rate, cohort_risk, matched_case_control, reference_rate
from ._base import AUTO_EXACT_BELOW, EXACT_UP_TO, CountModel, Marginal, NormalMoments, StudyDesign

#: The designs by name, in the order they are listed to users.
DESIGNS: dict[str, StudyDesign] = {
    d.name: d
    for d in (
        cohort_risk.DESIGN,
        cohort_rate.DESIGN,
        reference_rate.DESIGN,
        case_control.DESIGN,
        matched_case_control.DESIGN,
    )
}


def get_design(design: str | StudyDesign) -> StudyDesign:
    """Look a design up by name (a key of :data:`DESIGNS`); a design object is returned as is."""
    if isinstance(design, StudyDesign):
        return design
    try:
        return DESIGNS[design]
    except (KeyError, TypeError):
        raise DecideError(
            f"design must be one of {', '.join(DESIGNS)}, but got {design!r}"
        ) from None


__all__ = [
    "AUTO_EXACT_BELOW",
    "EXACT_UP_TO",
    "DESIGNS",
    "CountModel",
    "Marginal",
    "NormalMoments",
    "StudyDesign",
    "get_design",
]
