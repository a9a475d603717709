"""Validated study inputs, shared by the power function and the solver."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from .. import _checks
from ..designs import StudyDesign, get_design
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


def check_setting(
    design: str | StudyDesign,
    baseline: ArrayLike,
    allocation: ArrayLike | None,
    years: ArrayLike | None,
    sides: int,
    test: str,
    continuity: bool,
) -> Setting:
    """Validate what describes the study, whatever is solved for."""
    d = get_design(design)
    b = _checks.as_float_array("baseline", baseline)
    d.check_baseline(b)
    if d.groups == 1:
        if allocation is not None and np.any(np.asarray(allocation) != 1):
            raise DecideError(f"allocation does not apply to the {d.name} design (one group only)")
        alloc = np.ones(())
    else:
        alloc = _checks.positive("allocation", 1.0 if allocation is None else allocation)
        d.check_allocation(alloc)
    if not d.uses_years:
        if years is not None and np.any(np.asarray(years) != 1):
            raise DecideError(
                f"years does not apply to the {d.name} design (it counts cases, not person-time)"
            )
        yrs = np.ones(())
    else:
        yrs = _checks.positive("years", 1.0 if years is None else years)
    s = _checks.sides(sides)
    t = _checks.choice("test", test, TESTS)
    if continuity and not d.binomial_groups:
        raise DecideError(
            f"continuity correction applies to the two-proportion designs, not to {d.name}",
            ("continuity",),
        )
    if t == "exact" and not d.exact_offered(alloc).all():
        raise DecideError(f"test: exact is not offered here: {d.no_exact_reason}", ("test",))
    return Setting(d, b, alloc, yrs, s, t, bool(continuity))


def check_effect(setting: Setting, effect: ArrayLike) -> FloatArray:
    """A positive effect that keeps the design's model valid."""
    e = _checks.positive("effect", effect)
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
    a = None if alpha is None else _checks.open_unit("alpha", alpha)
    p = None if power is None else _checks.open_unit("power", power)
    if a is not None and p is not None:
        bad = np.broadcast_to(p <= a, np.broadcast_shapes(a.shape, p.shape))
        if bad.any():
            pa, aa = np.broadcast_arrays(p, a)
            i = np.flatnonzero(bad)[0]
            raise DecideError(
                f"power must be above alpha, but got power {pa.flat[i]:g} with alpha {aa.flat[i]:g}",
                ("power", "alpha"),
            )
