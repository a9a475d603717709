"""Observed counts of a finished study, one reader per design, and their exact laws.

Each design reads its ``[observed]`` keys into :class:`Counts` (the exposed
count ``x1``, the comparison count ``x0`` where there is one, and the sizes
they come from) and names the exact law the counts follow given the total
where the design has a nuisance baseline:

* ``cohort-rate``: given the total ``t = x1 + x0``, ``x1`` is binomial with
  share ``theta T1 / (theta T1 + T0)`` (two Poisson counts, rate ratio
  ``theta``, person-years ``T1``, ``T0``);
* ``reference-rate``: ``x1`` is Poisson with mean ``theta E``;
* ``cohort-risk`` and ``case-control``: given the total ``t``, ``x1`` follows
  Fisher's noncentral hypergeometric law at odds ratio ``psi`` (for the risk
  ratio ``theta`` of a cohort, ``psi = theta (1 - p0) / (1 - theta p0)`` at the
  scenario's baseline risk ``p0``);
* ``matched-case-control`` (1:1 pairs): given the discordant pairs
  ``t = x1 + x0`` (only the case exposed, only the control exposed), ``x1``
  is binomial with share ``psi / (1 + psi)``: the binomial law above with
  ``T1 = T0 = 1``, whose exact test is McNemar's.

A new design is one :class:`Reader` entry in :data:`READERS`.

References
----------
.. [1] Breslow, N. E. and Day, N. E. (1980, 1987). *Statistical Methods in
   Cancer Research*, vols. I and II, IARC Scientific Publications 32 and 82,
   Lyon (the conditional likelihood of a 2x2 table, sec. 4.2 of vol. I; the
   exact Poisson and conditional binomial methods, ch. 2 and 3 of vol. II).
.. [2] Fisher, R. A. (1935). The logic of inductive inference. *J. R. Stat.
   Soc.* 98, 39-82.
.. [3] Przyborowski, J. and Wilenski, H. (1940). *Biometrika* 31, 313-323.
.. [4] McNemar, Q. (1947). Note on the sampling error of the difference
   between correlated proportions or percentages. *Psychometrika* 12,
   153-157.
.. [5] Breslow, N. E. and Day, N. E. (1980). *Statistical Methods in Cancer
   Research, vol. I*, IARC Scientific Publications 32, Lyon, sec. 5.2 (the
   conditional binomial law of the discordant pairs of 1:1 matched pairs).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Literal

import numpy as np
from scipy import special

from ..designs import StudyDesign, get_design
from ..designs._base import FloatArray
from ..errors import DecideError

Law = Literal["poisson", "binomial", "fisher"]
#: Cells (ratios x support) of Fisher's law held in memory at once.
_CELLS = 2_000_000


@dataclass(frozen=True)
class Counts:
    """A finished study's counts, in the form its exact law needs.

    ``x1`` is the exposed count (exposed cases; exposed cases among the
    cases for case-control; all cases for reference-rate; pairs with only
    the case exposed for matched pairs), ``x0`` the comparison count
    (unexposed cases; exposed controls; pairs with only the control exposed)
    or ``None``.  ``size1`` and ``size0`` are what they come from: subjects
    (risk groups, cases and controls), person-years, 1 and 1 for matched
    pairs, or for reference-rate the expected count ``E`` at the reference
    rate (``size0`` ``None``).  ``values``
    keeps the keys as given, for showing back.
    """

    design: str
    law: Law
    x1: int
    x0: int | None
    size1: float
    size0: float | None
    values: dict[str, float]

    @property
    def total(self) -> int:
        """What the conditional law is given: cases (exposed subjects, case-control; discordant pairs, matched)."""
        return self.x1 + (self.x0 or 0)


def _whole(key: str, v: float) -> int:
    if v < 0:
        raise DecideError(f"observed.{key} must not be negative, but got {v:g}", (f"observed.{key}",))
    if not np.isfinite(v) or float(v) != int(v):
        raise DecideError(f"observed.{key} must be a whole number, but got {v:g}", (f"observed.{key}",))
    return int(v)


def _positive(key: str, v: float) -> float:
    if not v > 0 or not np.isfinite(v):
        raise DecideError(f"observed.{key} must be above 0, but got {v:g}", (f"observed.{key}",))
    return float(v)


def _within(count: str, size: str, x: int, n: float) -> None:
    if x > n:
        raise DecideError(
            f"observed.{count} must not exceed observed.{size} ({n:g}), but got {x}", (f"observed.{count}",)
        )


def _keys(values: Mapping[str, float], design: str, needed: tuple[str, ...]) -> None:
    for k in values:
        if k not in needed:
            raise DecideError(
                f"observed.{k}: not a count of the {design} design, which takes {', '.join(needed)}",
                (f"observed.{k}",),
            )
    for k in needed:
        if k not in values:
            raise DecideError(f"observed.{k}: missing; the {design} design needs it", (f"observed.{k}",))


def _read_cohort_risk(v: Mapping[str, float], baseline: float) -> Counts:
    keys = ("cases_exposed", "n_exposed", "cases_unexposed", "n_unexposed")
    _keys(v, "cohort-risk", keys)
    x1, x0 = _whole(keys[0], v[keys[0]]), _whole(keys[2], v[keys[2]])
    n1, n0 = _whole(keys[1], v[keys[1]]), _whole(keys[3], v[keys[3]])
    _positive(keys[1], n1), _positive(keys[3], n0)
    _within(keys[0], keys[1], x1, n1)
    _within(keys[2], keys[3], x0, n0)
    return Counts("cohort-risk", "fisher", x1, x0, float(n1), float(n0), {k: v[k] for k in keys})


def _read_case_control(v: Mapping[str, float], baseline: float) -> Counts:
    keys = ("cases", "exposed_cases", "controls", "exposed_controls")
    _keys(v, "case-control", keys)
    n1, x1 = _whole(keys[0], v[keys[0]]), _whole(keys[1], v[keys[1]])
    n0, x0 = _whole(keys[2], v[keys[2]]), _whole(keys[3], v[keys[3]])
    _positive(keys[0], n1), _positive(keys[2], n0)
    _within(keys[1], keys[0], x1, n1)
    _within(keys[3], keys[2], x0, n0)
    return Counts("case-control", "fisher", x1, x0, float(n1), float(n0), {k: v[k] for k in keys})


def _read_cohort_rate(v: Mapping[str, float], baseline: float) -> Counts:
    keys = ("cases_exposed", "person_years_exposed", "cases_unexposed", "person_years_unexposed")
    _keys(v, "cohort-rate", keys)
    x1, x0 = _whole(keys[0], v[keys[0]]), _whole(keys[2], v[keys[2]])
    t1, t0 = _positive(keys[1], v[keys[1]]), _positive(keys[3], v[keys[3]])
    return Counts("cohort-rate", "binomial", x1, x0, t1, t0, {k: v[k] for k in keys})


def _read_reference_rate(v: Mapping[str, float], baseline: float) -> Counts:
    given = [k for k in ("expected", "person_years") if k in v]
    if len(given) != 1:
        raise DecideError(
            "observed.expected: give the expected count or the person_years (at the scenario's "
            "reference rate), one of the two",
            ("observed.expected",),
        )
    keys = ("cases", given[0])
    _keys(v, "reference-rate", keys)
    x = _whole("cases", v["cases"])
    size = _positive(given[0], v[given[0]])
    expected = size if given[0] == "expected" else size * baseline
    return Counts("reference-rate", "poisson", x, None, expected, None, {k: v[k] for k in keys})


MATCHED_PAIR_KEYS = ("both_exposed", "case_only_exposed", "control_only_exposed", "neither_exposed")


def _read_matched_pairs(v: Mapping[str, float], baseline: float) -> Counts:
    keys = MATCHED_PAIR_KEYS
    _keys(v, "matched-case-control", keys)
    both, x1, x0, neither = (_whole(k, v[k]) for k in keys)
    if both + x1 + x0 + neither == 0:
        raise DecideError(
            f"observed.{keys[0]}: the four counts of pairs hold no pair; at least one matched pair is needed",
            (f"observed.{keys[0]}",),
        )
    return Counts("matched-case-control", "binomial", x1, x0, 1.0, 1.0, {k: v[k] for k in keys})


def mcnemar_statistics(c: Counts) -> tuple[float, float]:
    """McNemar's normal statistic of the discordant pairs, and with the continuity correction.

    ``z = (x1 - x0) / sqrt(x1 + x0)``; corrected,
    ``sign(x1 - x0) (|x1 - x0| - 1) / sqrt(x1 + x0)`` (0 where the counts
    differ by less than 1).  0 with no discordant pair.  ``z**2`` is
    McNemar's chi-squared statistic [1]_.

    References
    ----------
    .. [1] McNemar, Q. (1947). *Psychometrika* 12, 153-157.
    """
    assert c.x0 is not None
    if c.total == 0:
        return 0.0, 0.0
    diff, root = c.x1 - c.x0, float(np.sqrt(c.total))
    return diff / root, float(np.sign(diff) * max(abs(diff) - 1, 0) / root)


def _pairs_study(c: Counts) -> tuple[int, float | None, float | None]:
    """The study as done, for matched pairs: every pair (all four counts), one control per case."""
    return int(sum(c.values.values())), 1.0, None


def _one_control_per_case(allocation: float) -> None:
    if allocation != 1:
        raise DecideError(
            "observed: only 1:1 matched pairs (one control per case) can be read so far, but the scenario "
            f"matches {allocation:g} controls to each case",
            ("observed",),
        )


@dataclass(frozen=True)
class Reader:
    """How one design reads its observed counts and maps its ratio to the law's parameter.

    ``read(values, baseline)`` validates and returns :class:`Counts`;
    ``to_law(theta, baseline)`` maps the design's ratio to the parameter of
    the exact law (the odds ratio for a cohort's risk ratio; else itself) and
    ``from_law`` back.  The optional fields give what a design does its own
    way: ``statistic(counts)`` its normal statistic and the continuity-
    corrected one (else the law's); ``study(counts)`` the size, allocation
    and years of the study as done, for its detectable ratio (else read
    from the law's sizes); ``allocation(allocation)`` refuses a scenario's
    allocation the reader cannot read; ``no_information`` is what having no
    informative count means, ``no_estimate`` why the ratio is not estimable
    when the comparison count is 0.
    """

    read: Callable[[Mapping[str, float], float], Counts]
    to_law: Callable[[FloatArray, float], FloatArray]
    from_law: Callable[[FloatArray, float], FloatArray]
    keys: tuple[str, ...]
    #: estimate the ratio by conditional maximum likelihood (else the ratio of the observed rates)
    conditional_estimate: bool = False
    statistic: Callable[[Counts], tuple[float, float]] | None = None
    study: Callable[[Counts], tuple[int, float | None, float | None]] | None = None
    allocation: Callable[[float], None] | None = None
    no_information: str = "no case at all"
    no_estimate: str = "no case in the comparison group"


def _same(x: FloatArray, baseline: float) -> FloatArray:
    return np.asarray(x, dtype=np.float64)


def risk_to_odds(theta: FloatArray, p0: float) -> FloatArray:
    """The odds ratio of a risk ratio at baseline risk ``p0``: ``theta (1 - p0) / (1 - theta p0)``."""
    theta = np.asarray(theta, dtype=np.float64)
    with np.errstate(divide="ignore"):
        return np.asarray(np.where(theta * p0 < 1, theta * (1 - p0) / (1 - theta * p0), np.inf))


def odds_to_risk(psi: FloatArray, p0: float) -> FloatArray:
    """The risk ratio of an odds ratio at baseline risk ``p0`` (``1 / p0`` for an infinite one)."""
    psi = np.asarray(psi, dtype=np.float64)
    with np.errstate(invalid="ignore"):
        return np.asarray(np.where(np.isfinite(psi), psi / (1 - p0 + p0 * psi), 1 / p0))


#: One reader per design.  A new design adds one entry here.
READERS: dict[str, Reader] = {
    "cohort-risk": Reader(
        _read_cohort_risk, risk_to_odds, odds_to_risk, ("cases_exposed", "n_exposed", "cases_unexposed", "n_unexposed")
    ),
    "cohort-rate": Reader(
        _read_cohort_rate,
        _same,
        _same,
        ("cases_exposed", "person_years_exposed", "cases_unexposed", "person_years_unexposed"),
    ),
    "reference-rate": Reader(_read_reference_rate, _same, _same, ("cases", "expected | person_years")),
    "case-control": Reader(
        _read_case_control,
        _same,
        _same,
        ("cases", "exposed_cases", "controls", "exposed_controls"),
        conditional_estimate=True,
    ),
    "matched-case-control": Reader(
        _read_matched_pairs,
        _same,
        _same,
        MATCHED_PAIR_KEYS,
        statistic=mcnemar_statistics,
        study=_pairs_study,
        allocation=_one_control_per_case,
        no_information="no discordant pair",
        no_estimate="no pair with only the control exposed",
    ),
}


def reader_of(design: str | StudyDesign) -> Reader:
    """The reader of a design's observed counts; a one-line error for a design without one."""
    design = get_design(design).name
    try:
        return READERS[design]
    except KeyError:
        raise DecideError(
            f"observed: reading observed data is not available for the {design} design yet "
            f"(available: {', '.join(READERS)})",
            ("observed",),
        ) from None


def reader_for(design: str | StudyDesign, allocation: float) -> Reader:
    """The reader of a design's counts, once it is known to read the scenario's allocation."""
    reader = reader_of(design)
    if reader.allocation is not None:
        reader.allocation(float(allocation))
    return reader


# --------------------------------------------------------------------------
# the exact laws, as functions of the law's parameter (array)


def fisher_support(c: Counts) -> FloatArray:
    """The values ``x1`` can take given the total, for Fisher's law."""
    assert c.size0 is not None
    t = c.total
    return np.arange(max(0, t - int(c.size0)), min(t, int(c.size1)) + 1, dtype=np.float64)


def fisher_log_pmf(c: Counts, log_psi: FloatArray) -> FloatArray:
    """Log of Fisher's noncentral hypergeometric pmf over the support, rows per ``log_psi``.

    ``P(x | psi) = C(n1, x) C(n0, t - x) psi**x / sum_y C(n1, y) C(n0, t - y) psi**y``.
    """
    assert c.size0 is not None
    x = fisher_support(c)
    n1, n0, t = c.size1, c.size0, float(c.total)
    base = (
        special.gammaln(n1 + 1)
        - special.gammaln(x + 1)
        - special.gammaln(n1 - x + 1)
        + special.gammaln(n0 + 1)
        - special.gammaln(t - x + 1)
        - special.gammaln(n0 - t + x + 1)
    )
    lp = np.asarray(log_psi, dtype=np.float64)[..., None]
    with np.errstate(invalid="ignore"):
        terms = base + np.where(x == 0, 0.0, x * lp)
    return np.asarray(terms - special.logsumexp(terms, axis=-1, keepdims=True), dtype=np.float64)


def log_likelihood(c: Counts, parameter: FloatArray) -> FloatArray:
    """Log-likelihood of the counts at the law's parameter (conditional on the total where there is one).

    ``parameter`` is the rate ratio (cohort-rate), the SIR (reference-rate)
    or the odds ratio (Fisher); it may be ``inf`` for Fisher's law.
    """
    par = np.asarray(parameter, dtype=np.float64)
    if c.law == "poisson":
        mean = par * c.size1
        return np.asarray(special.xlogy(c.x1, mean) - mean - special.gammaln(c.x1 + 1), dtype=np.float64)
    if c.law == "binomial":
        assert c.size0 is not None and c.x0 is not None
        share = par * c.size1 / (par * c.size1 + c.size0)
        coef = special.gammaln(c.total + 1) - special.gammaln(c.x1 + 1) - special.gammaln(c.x0 + 1)
        return np.asarray(coef + special.xlogy(c.x1, share) + special.xlog1py(c.x0, -share), dtype=np.float64)
    x = fisher_support(c)
    with np.errstate(divide="ignore"):
        log_psi = np.log(np.where(np.isfinite(par), par, 1e300)).ravel()
    at = int(c.x1 - x[0])
    step = max(1, _CELLS // x.size)  # keep each block of (ratios x support) bounded
    out = np.concatenate([fisher_log_pmf(c, log_psi[i : i + step])[:, at] for i in range(0, log_psi.size, step)])
    return np.asarray(out.reshape(par.shape), dtype=np.float64)


def upper_tail(c: Counts, parameter: float) -> float:
    """``P(X >= x1)`` under the law at ``parameter``: the exact one-sided p-value at 1."""
    if c.law == "poisson":
        return float(special.pdtrc(c.x1 - 1, parameter * c.size1)) if c.x1 > 0 else 1.0
    if c.law == "binomial":
        assert c.size0 is not None
        share = parameter * c.size1 / (parameter * c.size1 + c.size0)
        return float(special.bdtrc(c.x1 - 1, c.total, share)) if c.x1 > 0 else 1.0
    x = fisher_support(c)
    pmf = np.exp(fisher_log_pmf(c, np.asarray(np.log(parameter))))
    return float(min(1.0, pmf[x >= c.x1].sum()))


def lower_tail(c: Counts, parameter: float) -> float:
    """``P(X <= x1)`` under the law at ``parameter``."""
    if c.law == "poisson":
        return float(special.pdtr(c.x1, parameter * c.size1))
    if c.law == "binomial":
        assert c.size0 is not None
        share = parameter * c.size1 / (parameter * c.size1 + c.size0)
        return float(special.bdtr(c.x1, c.total, share))
    x = fisher_support(c)
    pmf = np.exp(fisher_log_pmf(c, np.asarray(np.log(parameter))))
    return float(min(1.0, pmf[x <= c.x1].sum()))


def point_mass(c: Counts, parameter: float) -> float:
    """``P(X = x1)`` under the law at ``parameter`` (for the mid-p-value)."""
    return float(np.exp(log_likelihood(c, np.asarray(parameter))))
