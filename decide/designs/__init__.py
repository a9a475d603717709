"""Study designs, one module each, behind :class:`StudyDesign`.

To add a design, write a module with a :class:`StudyDesign` subclass and a
module-level ``DESIGN`` instance, and add the module's name to
:data:`MODULES`: every list of designs (the command line's choices, the
scenario schema and template, the README's table, checked by a test) is read
from :data:`DESIGNS`.
"""

from __future__ import annotations

from importlib import import_module

from ..errors import DecideError
from ._base import AUTO_EXACT_BELOW, EXACT_UP_TO, CountModel, Marginal, NormalMoments, StudyDesign

#: The design modules, in the order their designs are listed to users.
MODULES = ("cohort_risk", "cohort_rate", "reference_rate", "case_control", "matched_case_control")


def _load(module: str) -> StudyDesign:
    design = import_module(f"{__name__}.{module}").DESIGN
    assert isinstance(design, StudyDesign), module
    return design


#: The designs by name (each module's ``DESIGN``), in the order of :data:`MODULES`.
DESIGNS: dict[str, StudyDesign] = {d.name: d for d in map(_load, MODULES)}


def get_design(design: str | StudyDesign) -> StudyDesign:
    """Look a design up by name (a key of :data:`DESIGNS`); a design object is returned as is."""
    if isinstance(design, StudyDesign):
        return design
    try:
        return DESIGNS[design]
    except (KeyError, TypeError):
        raise DecideError(f"design must be one of {', '.join(DESIGNS)}, but got {design!r}") from None


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
