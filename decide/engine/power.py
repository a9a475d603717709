"""Power of a study, vectorised over alpha, size, effect and baseline.

>>> from decide import power
>>> r = power("reference-rate", alpha=0.05, n_per_group=1000, effect=3.0, baseline=1e-3, years=2)
>>> r.test_used(), round(float(r.power), 4), round(float(r.attained_alpha), 4)
('exact', 0.5543, 0.0166)

The same numbers from scipy: 2 cases are expected, and the exact test at 0.05
flags 6 or more (P(5 or more) = 0.053 is above 0.05); its size and its power
against 3 times the expected 2 cases are Poisson tail sums.

>>> from scipy.stats import poisson
>>> round(float(poisson.sf(4, 2.0)), 3), round(float(poisson.sf(5, 6.0)), 4), round(float(poisson.sf(5, 2.0)), 4)
(0.053, 0.5543, 0.0166)
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .. import _checks
from ..designs import AUTO_EXACT_BELOW, EXACT_UP_TO, StudyDesign
from ..designs._base import FloatArray
from ..errors import ApproximationWarning
from . import exact as _exact
from . import normal as _normal
from .study import Setting, check_effect, check_setting


@dataclass(frozen=True)
class PowerResult:
    """Power of a study (arrays broadcast over the inputs).

    Attributes
    ----------
    design, sides, test, continuity
        The study and the test requested (``auto``, ``normal`` or ``exact``).
    alpha, n_per_group, effect, baseline, allocation, years : ndarray
        The inputs, broadcast to one shape.
    power : ndarray
        Probability of a significant result under the effect.
    attained_alpha : ndarray
        Probability of a significant result under no effect: equal to
        ``alpha`` for the plain normal test, at most ``alpha`` for the exact
        and continuity-corrected tests.
    exact : ndarray of bool
        Where the exact test ran.
    smallest_expected_count : ndarray
        The smallest expected cell count under either hypothesis, which is
        what ``test="auto"`` looks at.
    warnings : tuple of str
    """

    design: str
    sides: int
    test: str
    continuity: bool
    alpha: FloatArray
    n_per_group: FloatArray
    effect: FloatArray
    baseline: FloatArray
    allocation: FloatArray
    years: FloatArray
    power: FloatArray
    attained_alpha: FloatArray
    exact: NDArray[np.bool_]
    smallest_expected_count: FloatArray
    warnings: tuple[str, ...] = field(default=())

    @property
    def beta(self) -> FloatArray:
        """Probability of missing the effect, ``1 - power``."""
        return np.asarray(1.0 - self.power)

    def false_alarm(self) -> FloatArray:
        """Probability of a flag when the exposure is harmless, under the exact law of the counts.

        For the exact test this is ``attained_alpha``.  For the normal test it
        is its real false-alarm probability, summed over the count outcomes of
        the exact-power grid whose normal p-value is at most ``alpha``; it is
        ``nan`` (not computed) where a cell expects more than
        :data:`~decide.designs.EXACT_UP_TO`.  Computed on request: it costs an
        exact grid per study.
        """
        from ..designs import get_design
        from .rule import normal_false_alarm

        out = np.where(self.exact, self.attained_alpha, np.nan)
        todo = ~self.exact
        if todo.any():
            out[todo] = normal_false_alarm(
                get_design(self.design),
                self.alpha[todo],
                self.n_per_group[todo],
                self.baseline[todo],
                self.allocation[todo],
                self.years[todo],
                self.sides,
                self.continuity,
            )
        return np.asarray(out)

    def test_used(self) -> str:
        """``exact``, ``normal``, ``normal-cc`` or ``mixed`` (for arrays)."""
        if self.exact.all():
            return "exact"
        if self.exact.any():
            return "mixed"
        return "normal-cc" if self.continuity else "normal"


def choose_exact(test: str, smallest_count: FloatArray, offered: NDArray[np.bool_] | bool = True) -> NDArray[np.bool_]:
    """Where the exact test runs.

    ``auto``: where a cell expects fewer than 10.  ``exact``: everywhere but
    where every cell expects more than :data:`EXACT_UP_TO`.  Never where the
    design offers no exact test (``offered``, see
    :meth:`~decide.designs.StudyDesign.exact_offered`).
    """
    if test == "exact":
        return np.asarray((smallest_count <= EXACT_UP_TO) & offered)
    if test == "normal":
        return np.zeros(smallest_count.shape, dtype=bool)
    return np.asarray((smallest_count < AUTO_EXACT_BELOW) & offered)


def normal_power(
    design: StudyDesign,
    alpha: FloatArray,
    n: FloatArray,
    effect: FloatArray,
    baseline: FloatArray,
    allocation: FloatArray,
    years: FloatArray,
    sides: int,
    continuity: bool,
) -> tuple[FloatArray, FloatArray]:
    """Power and attained size of the normal test (clean inputs)."""
    m = design.normal_moments(baseline, effect, allocation, years, continuity)
    m0 = design.normal_moments(baseline, np.ones_like(effect), allocation, years, continuity)
    return _normal.power(m, n, alpha, sides), _normal.power(m0, n, alpha, sides)


def exact_power(
    design: StudyDesign,
    alpha: FloatArray,
    n: FloatArray,
    effect: FloatArray,
    baseline: FloatArray,
    allocation: FloatArray,
    years: FloatArray,
    sides: int,
) -> tuple[FloatArray, FloatArray]:
    """Power and attained size of the exact test for 1-D arrays (clean inputs).

    The rejection region of the exact test at a level depends on the study
    (size, baseline, allocation, years) and the level, never on the effect,
    so each distinct study gets one grid of count pairs, shared by every
    effect and alpha asked of it (:func:`decide.engine.exact.shared_power`).
    Grids are grouped by size and built in batches that keep memory bounded.
    """
    arrays = np.broadcast_arrays(n, effect, baseline, allocation, years, alpha)
    nn, e, b, r, y, a = (np.asarray(x, dtype=np.float64) for x in arrays)
    _, study = np.unique(np.stack([nn, b, r, y]), axis=1, return_inverse=True)
    members = design.count_model(nn, b, e[:, None], r, y)
    return _exact.shared_power(members, study.reshape(-1).astype(np.int64), a, sides)


def evaluate(
    setting: Setting,
    alpha: FloatArray,
    n: FloatArray,
    effect: FloatArray,
) -> PowerResult:
    """Power for validated inputs (the solver and optimiser call this)."""
    d = setting.design
    arrays = np.broadcast_arrays(alpha, n, effect, setting.baseline, setting.allocation, setting.years)
    a, nn, e, b, r, y = (np.array(x, dtype=np.float64) for x in arrays)
    smallest = d.smallest_expected_count(nn, b, e, r, y)
    use_exact = choose_exact(setting.test, smallest, d.exact_offered(r))
    pw, size = normal_power(d, a, nn, e, b, r, y, setting.sides, setting.continuity)
    if use_exact.any():
        sel = use_exact
        ep, es = exact_power(d, a[sel], nn[sel], e[sel], b[sel], r[sel], y[sel], setting.sides)
        pw[sel], size[sel] = ep, es
    notes: list[str] = []
    if setting.test == "exact" and not use_exact.all():
        notes.append(
            f"exact test requested, but where every cell expects more than {EXACT_UP_TO:g} the normal "
            "approximation was used (the two agree closely there)"
        )
    weak = ~use_exact & (smallest < AUTO_EXACT_BELOW)
    if weak.any():
        safer = "the exact test is safer here" if d.exact_offered(r)[weak].all() else d.no_exact_reason
        note = (
            f"normal approximation with as few as {float(smallest[weak].min()):.3g} expected "
            f"in a cell (below {AUTO_EXACT_BELOW:g}); {safer}"
        )
        warnings.warn(note, ApproximationWarning, stacklevel=3)
        notes.append(note)
    return PowerResult(
        design=d.name,
        sides=setting.sides,
        test=setting.test,
        continuity=setting.continuity,
        alpha=a,
        n_per_group=nn,
        effect=e,
        baseline=b,
        allocation=r,
        years=y,
        power=np.clip(pw, 0.0, 1.0),
        attained_alpha=np.clip(size, 0.0, 1.0),
        exact=use_exact,
        smallest_expected_count=smallest,
        warnings=tuple(notes),
    )


def power(
    design: str | StudyDesign,
    alpha: ArrayLike,
    n_per_group: ArrayLike,
    effect: ArrayLike,
    baseline: ArrayLike,
    *,
    allocation: ArrayLike | None = None,
    years: ArrayLike | None = None,
    sides: int = 1,
    test: str = "auto",
    continuity: bool = False,
) -> PowerResult:
    """Power of a study to detect an effect, with the test that suits it.

    Parameters
    ----------
    design : str or StudyDesign
        A design name (a key of :data:`decide.designs.DESIGNS`) or a configured one (:meth:`~.StudyDesign.configure`).
    alpha : array_like
        Nominal significance level, in (0, 1).
    n_per_group : array_like
        Exposed subjects (cohorts) or cases (case-control); whole numbers.
    effect : array_like
        Risk ratio, rate ratio, SIR or odds ratio, by design.
    baseline : array_like
        The design's ``baseline_name``: risk over follow-up, rate per person-year, reference rate per person-year,
        or exposure prevalence among controls.
    allocation, years : array_like, optional
        The design's ``allocation_name``: unexposed subjects per exposed subject, or controls per case (default 1;
        not for one-group designs); follow-up per subject for the person-time designs (default 1).
    sides : {1, 2}
        One-sided test of harm (default) or two-sided.
    test : {"auto", "normal", "exact"}
        ``auto`` runs the exact test wherever a cell expects fewer than 10; a normal test used there emits an
        :class:`~decide.errors.ApproximationWarning`.  The exact power neglects tails of total mass below about 1e-12.
    continuity : bool
        Continuity-correct the normal test of two proportions.

    Returns
    -------
    PowerResult

    References
    ----------
    .. [1] Fleiss, J. L., Levin, B. and Paik, M. C. (2003). *Statistical Methods for Rates and Proportions*, 3rd
       ed., Wiley, ch. 4.
    .. [2] Breslow, N. E. and Day, N. E. (1987). *Statistical Methods in Cancer Research, vol. II*. IARC Scientific
       Publications 82, ch. 7.

    Examples
    --------
    A usage example, not a check (the tests check exact power against scipy enumerations and a seeded simulation):

    >>> from decide import power
    >>> r = power("cohort-risk", 0.05, 2000, 3.0, 8e-4)
    >>> r.test_used(), round(float(r.power), 3)
    ('exact', 0.191)
    """
    setting = check_setting(design, baseline, allocation, years, sides, test, continuity)
    return evaluate(setting, *_checked_quantities(setting, alpha, n_per_group, effect))


def _checked_quantities(
    setting: Setting, alpha: ArrayLike, n_per_group: ArrayLike, effect: ArrayLike
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Alpha, size and effect checked for range and for broadcasting with the study's arrays."""
    a = _checks.open_unit("alpha", alpha)
    n = _checks.whole_at_least_one("n_per_group", n_per_group)
    _checks.broadcast(
        ("alpha", "n_per_group", "effect", "baseline", "allocation", "years"),
        a,
        n,
        _checks.as_float_array("effect", effect),
        setting.baseline,
        setting.allocation,
        setting.years,
    )
    return a, n, check_effect(setting, effect)
