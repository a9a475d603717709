"""The solver over arrays: the one unknown solved elementwise, broadcast over the inputs.

:func:`decide.solve` sends array inputs here.  Where the normal test runs,
each unknown has a vectorised answer (closed form for size and alpha, a
batched bracket for the effect), and every element is solved at once.  The
exact test needs a search per study (its power saw-tooths in the size); those
elements are solved by the scalar solver once per distinct design point, so
a sweep that repeats a study costs one search, never one per element.  Power
is computed for every element at once, exact or normal.

An element with no answer within the caps (the scalar solver's
:class:`~decide.errors.InfeasibleError`) gets ``nan`` in the solved quantity
and in everything that depends on it.

References
----------
.. [1] Fleiss, J. L., Levin, B. and Paik, M. C. (2003). *Statistical Methods
   for Rates and Proportions*, 3rd ed., Wiley, ch. 4.
.. [2] Chernick, M. R. and Liu, C. Y. (2002). The saw-toothed behavior of
   power versus sample size and software solutions: single binomial
   proportion using exact methods. *Am. Stat.* 56, 149-155.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..designs import AUTO_EXACT_BELOW, EXACT_UP_TO
from ..designs._base import FloatArray
from ..errors import InfeasibleError
from .power import evaluate
from .selection import uses_exact
from .study import Setting

#: The numeric fields of a :class:`~decide.engine.solve.Solution`, as arrays in an array solve.
NUMERIC = (
    "alpha",
    "attained_alpha",
    "power",
    "beta",
    "effect",
    "n_per_group",
    "n_total",
    "smallest_expected_count",
    "n_stable",
    "n_checked",
    "false_alarm",
)
#: The text fields, one string per element.
TEXT = ("test", "test_reason", "method")
#: The given and solved quantities of a study, in the order the scalar solver takes them.
QUANTITIES = ("alpha", "power", "n_per_group", "effect")

Scalar = Callable[..., Any]


def _flat(setting: Setting, given: dict[str, Any]) -> tuple[Setting, dict[str, FloatArray], tuple[int, ...]]:
    """The setting and the given quantities broadcast to one shape, flattened."""
    parts = [np.asarray(v, dtype=np.float64) for v in given.values()]
    shape = np.broadcast_shapes(
        *(p.shape for p in parts), setting.baseline.shape, setting.allocation.shape, setting.years.shape
    )
    b, r, y = (
        np.broadcast_to(x, shape).ravel().astype(np.float64)
        for x in (setting.baseline, setting.allocation, setting.years)
    )
    flat = {k: np.broadcast_to(p, shape).ravel().astype(np.float64) for k, p in zip(given, parts, strict=True)}
    return replace(setting, baseline=b, allocation=r, years=y), flat, shape


def _normal_answer(setting: Setting, unknown: str, q: dict[str, FloatArray], cap: int) -> tuple[FloatArray, Any]:
    """The unknown where the normal test runs (``nan`` where none), and where the exact test runs instead."""
    from .solve import effect_cap, normal_alpha, normal_effect, normal_size

    if unknown == "power":
        return np.full(q["alpha"].shape, np.nan), uses_exact(setting, q["n_per_group"], q["effect"])
    if unknown == "n_per_group":
        guess = normal_size(setting, q["alpha"], q["power"], q["effect"])
        n = np.maximum(1.0, np.ceil(guess - 1e-9))
        return np.where(n <= cap, n, np.nan), uses_exact(setting, n, q["effect"])
    if unknown == "alpha":
        a = normal_alpha(setting, q["n_per_group"], q["power"], q["effect"])
        return np.where((a > 0) & (a < 1), a, np.nan), uses_exact(setting, q["n_per_group"], q["effect"])
    found = normal_effect(setting, q["alpha"], q["n_per_group"], q["power"])
    probe = np.where(np.isfinite(found), found, effect_cap(setting))
    return found, uses_exact(setting, q["n_per_group"], probe)


def _reasons(requested: str, exact: NDArray[np.bool_], smallest: FloatArray) -> NDArray[np.str_]:
    """Why each element runs its test, in the scalar solver's words (see ``TestChoice.reason``)."""
    count = np.char.mod("%.3g", smallest)
    if requested == "normal":
        return np.full(exact.shape, "normal test requested")
    if requested == "exact":
        fell_back = np.char.add(
            np.char.add(f"exact test requested, but every cell expects more than {EXACT_UP_TO:g} (", count),
            "): the normal approximation was used, which agrees closely there",
        )
        return np.where(exact, "exact test requested", fell_back)
    as_exact = np.char.add(
        np.char.add("auto: exact, because the smallest expected cell count is ", count), f" (< {AUTO_EXACT_BELOW:g})"
    )
    as_normal = np.char.add(
        np.char.add(f"auto: normal, because every cell expects at least {AUTO_EXACT_BELOW:g} (", count), ")"
    )
    return np.where(exact, as_exact, as_normal)


def _finish(setting: Setting, q: dict[str, FloatArray], exact: NDArray[np.bool_]) -> dict[str, Any]:
    """Every field of the solved studies in ``q`` (all finite), each test as chosen, all at once."""
    d = setting.design
    out: dict[str, Any] = {k: np.full(exact.shape, np.nan) for k in NUMERIC}
    warnings: list[str] = []
    for use_exact in (False, True):
        sel = exact == use_exact
        if not sel.any():
            continue
        part = replace(
            setting,
            baseline=setting.baseline[sel],
            allocation=setting.allocation[sel],
            years=setting.years[sel],
            test="exact" if use_exact else "normal",
        )
        res = evaluate(part, q["alpha"][sel], q["n_per_group"][sel], q["effect"][sel])
        out["attained_alpha"][sel] = res.attained_alpha
        out["power"][sel] = res.power
        out["smallest_expected_count"][sel] = res.smallest_expected_count
        out["false_alarm"][sel] = res.false_alarm()
        warnings += res.warnings
    n = q["n_per_group"]
    out.update(
        alpha=q["alpha"],
        effect=q["effect"],
        n_per_group=n,
        beta=1 - out["power"],
        n_total=n + d.comparison_size(n, setting.allocation),
    )
    sided = "one-sided (harm)" if setting.sides == 1 else "two-sided (equal tails)"
    normal = d.normal_method + (", continuity-corrected" if setting.continuity else "")
    out["test"] = np.where(exact, "exact", "normal-cc" if setting.continuity else "normal")
    out["method"] = np.where(exact, f"{sided} {d.exact_method}", f"{sided} {normal}")
    out["test_reason"] = _reasons(setting.test, exact, out["smallest_expected_count"])
    out["expected_cases"] = {
        k: np.asarray(v, dtype=np.float64)
        for k, v in d.cell_counts(n, setting.baseline, q["effect"], setting.allocation, setting.years).items()
    }
    out["warnings"] = warnings
    return out


def _blank(size: int, keys: list[str]) -> dict[str, Any]:
    out: dict[str, Any] = {k: np.full(size, np.nan) for k in NUMERIC}
    out.update({k: np.full(size, "", dtype=object) for k in TEXT})
    out["expected_cases"] = {k: np.full(size, np.nan) for k in keys}
    return out


def _put(into: dict[str, Any], at: NDArray[np.intp], part: dict[str, Any]) -> None:
    for k in NUMERIC + TEXT:
        into[k][at] = part[k]
    for k, v in part["expected_cases"].items():
        into["expected_cases"][k][at] = v


def _one_by_one(
    scalar: Scalar, setting: Setting, unknown: str, q: dict[str, FloatArray], where: NDArray[np.intp], cap: int
) -> tuple[list[tuple[NDArray[np.intp], Any]], list[str]]:
    """Scalar solves of the elements at ``where``, once per distinct design point."""
    given = [k for k in QUANTITIES if k != unknown]
    table = np.stack(
        [q[k][where] for k in given] + [setting.baseline[where], setting.allocation[where], setting.years[where]],
        axis=1,
    )
    points, which = np.unique(table, axis=0, return_inverse=True)
    found: list[tuple[NDArray[np.intp], Any]] = []
    notes: list[str] = []
    for i, row in enumerate(points):
        values = dict(zip(given, row[:3].tolist(), strict=True))
        if "n_per_group" in values:
            values["n_per_group"] = int(values["n_per_group"])
        try:
            sol = scalar(
                setting.design,
                baseline=float(row[3]),
                allocation=float(row[4]),
                years=float(row[5]),
                sides=setting.sides,
                test=setting.test,
                continuity=setting.continuity,
                max_n_per_group=cap,
                **values,
            )
        except InfeasibleError:
            continue
        found.append((where[np.ravel(which) == i], sol))
        notes += sol.warnings
    return found, notes


def solve_many(scalar: Scalar, setting: Setting, unknown: str, given: dict[str, Any], cap: int) -> dict[str, Any]:
    """The fields of an array :class:`~decide.engine.solve.Solution`, the unknown solved elementwise.

    ``scalar`` is the scalar solver, run once per distinct design point
    where the exact test runs and its answer needs a search (every unknown
    but power).  ``given`` holds the three known quantities; inputs are
    validated by the caller.
    """
    flat_setting, q, shape = _flat(setting, given)
    q.update(baseline=flat_setting.baseline, allocation=flat_setting.allocation, years=flat_setting.years)
    value, exact = _normal_answer(flat_setting, unknown, q, cap)
    searched = exact if unknown != "power" else np.zeros_like(exact)
    q = {**q, unknown: value} if unknown != "power" else q
    known = q[unknown] if unknown != "power" else np.zeros(exact.shape)
    direct = np.flatnonzero(~searched & np.isfinite(known))
    keys = list(
        flat_setting.design.cell_counts(
            np.ones(1), flat_setting.baseline[:1], np.ones(1), flat_setting.allocation[:1], flat_setting.years[:1]
        )
    )
    out = _blank(exact.size, keys)
    notes: list[str] = []
    if direct.size:
        sub = replace(
            flat_setting,
            baseline=flat_setting.baseline[direct],
            allocation=flat_setting.allocation[direct],
            years=flat_setting.years[direct],
        )
        part = _finish(sub, {k: q[k][direct] for k in ("alpha", "n_per_group", "effect")}, exact[direct])
        _put(out, direct, part)
        notes += part["warnings"]
    found, more = _one_by_one(scalar, flat_setting, unknown, q, np.flatnonzero(searched), cap)
    for at, sol in found:
        numbers = {k: np.nan if getattr(sol, k) is None else getattr(sol, k) for k in NUMERIC}
        _put(out, at, {**numbers, **{k: getattr(sol, k) for k in TEXT}, "expected_cases": sol.expected_cases})
    notes += more
    return _shaped(out, q, unknown, shape, list(dict.fromkeys(notes)))


def _shaped(
    out: dict[str, Any], q: dict[str, FloatArray], unknown: str, shape: tuple[int, ...], notes: list[str]
) -> dict[str, Any]:
    """The flat fields in the inputs' broadcast shape, with the solve's targets and notes."""
    fields: dict[str, Any] = {k: np.asarray(out[k], dtype=np.float64).reshape(shape) for k in NUMERIC}
    fields.update({k: np.asarray(out[k], dtype=str).reshape(shape) for k in TEXT})
    fields["expected_cases"] = {k: v.reshape(shape) for k, v in out["expected_cases"].items()}
    fields["target_power"] = None if unknown == "power" else q["power"].reshape(shape)
    fields.update({k: q[k].reshape(shape) for k in ("baseline", "allocation", "years")})
    fields["warnings"] = tuple(notes)
    return fields
