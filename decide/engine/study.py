"""Validated study inputs, shared by the power function and the solver."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from .. import _checks
from ..designs import DESIGNS, StudyDesign, get_design
from ..designs._base import FloatArray
from ..errors import DecideError

TESTS = ("auto", "normal", "exact")


@dataclass(frozen=True)
class Setting:
    """The parts of a study that are neither the unknown nor alpha/power."""

    design: StudyDesign
    baseline: FloatArray
    allocation: FloatArray
    years: FloatArray
    sides: int
    test: str
    continuity: bool


def _designs_where(test: Callable[[StudyDesign], bool]) -> str:
    return ", ".join(name for name, d in DESIGNS.items() if test(d))


def _not_applicable(d: StudyDesign, name: str, why: str, takes: Callable[[StudyDesign], bool], got: Any) -> DecideError:
    return DecideError(
        f"{name} does not apply to the {d.name} design ({why}); it applies to {_designs_where(takes)}, "
        f"but got {_checks.show(got)}",
        (name,),
    )


def _setting_value(
    d: StudyDesign, name: str, value: ArrayLike | None, used: bool, limits: tuple[float, float], why: str
) -> FloatArray:
    """Allocation or years: refused where the design has no such setting (1, the neutral value, aside)."""
    if not used:
        given = None if value is None else _checks.as_float_array(name, value)
        if given is not None and np.any(given != 1):
            takes = (lambda x: x.groups == 2) if name == "allocation" else (lambda x: x.uses_years)
            raise _not_applicable(d, name, why, takes, float(given[given != 1].flat[0]))
        return np.ones(())
    arr = _checks.positive(name, 1.0 if value is None else value)
    return _checks.within(name, arr, *limits)


def check_setting(
    design: str | StudyDesign,
    baseline: ArrayLike,
    allocation: ArrayLike | None,
    years: ArrayLike | None,
    sides: Any,
    test: Any,
    continuity: Any,
) -> Setting:
    """Validate what describes the study, whatever is solved for.

    Allocation and years that the design has no use for are refused unless
    they are 1 (the value that changes nothing); the domain limits of
    :mod:`decide._checks` apply to the rest.
    """
    d = get_design(design)
    b = _checks.as_float_array("baseline", baseline)
    d.check_baseline(b)
    # rates per person-year; probabilities already lie well inside these limits
    _checks.within("baseline", b, *_checks.BASELINE_RATE_RANGE)
    alloc = _setting_value(d, "allocation", allocation, d.groups == 2, _checks.ALLOCATION_RANGE, "one group only")
    if d.groups == 2:
        d.check_allocation(alloc)
    yrs = _setting_value(d, "years", years, d.uses_years, _checks.YEARS_RANGE, "it counts cases, not person-time")
    s = _checks.sides(sides)
    t = _checks.choice("test", test, TESTS)
    if not isinstance(continuity, bool | np.bool_):
        raise DecideError(f"continuity must be true or false, but got {_checks.show(continuity)}", ("continuity",))
    if continuity and not d.binomial_groups:
        raise _not_applicable(d, "continuity", "a correction of two proportions", lambda x: x.binomial_groups, True)
    if t == "exact" and not d.exact_offered(alloc).all():
        raise DecideError(f"test: exact is not offered here: {d.no_exact_reason}", ("test",))
    return Setting(d, b, alloc, yrs, s, t, bool(continuity))


def check_effect(setting: Setting, effect: ArrayLike) -> FloatArray:
    """A positive effect that keeps the design's model valid."""
    e = _checks.within("effect", _checks.positive("effect", effect), *_checks.EFFECT_RANGE)
    limit = setting.design.effect_limit(setting.baseline)
    bad = np.broadcast_to(e >= limit, np.broadcast_shapes(e.shape, limit.shape))
    if bad.any():
        eb, lb, bb = np.broadcast_arrays(e, limit, setting.baseline)
        i = np.flatnonzero(bad)[0]
        raise DecideError(
            f"effect must be below {lb.flat[i]:g} for baseline {bb.flat[i]:g} "
            f"({setting.design.effect_limit_reason}), but got {eb.flat[i]:g}",
            ("effect", "baseline"),
        )
    return e


def check_alpha_power(alpha: ArrayLike | None, power: ArrayLike | None) -> None:
    """Alpha and power in (0, 1), power above alpha when both are given."""
    a = None if alpha is None else _checks.probability("alpha", alpha)
    p = None if power is None else _checks.probability("power", power)
    if a is not None and p is not None:
        bad = np.broadcast_to(p <= a, np.broadcast_shapes(a.shape, p.shape))
        if bad.any():
            pa, aa = np.broadcast_arrays(p, a)
            i = np.flatnonzero(bad)[0]
            raise DecideError(
                f"power must be above alpha, but got power {pa.flat[i]:g} with alpha {aa.flat[i]:g}",
                ("power", "alpha"),
            )
