"""The interface every study design implements.

A study design turns the trade's inputs (baseline, effect, size, allocation,
follow-up years) into two things the shared engines understand:

* :class:`NormalMoments`, the mean and spread of a normal test statistic
  per exposed subject, for the closed-form approximations; and
* :class:`CountModel`, the distributions of the counts an exact test sees
  and the conditional test it runs on them.

The engines in :mod:`decide.engine.normal` and :mod:`decide.engine.exact`
do the rest, so a new design is one new module with one class.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar, Literal

import numpy as np
from numpy.typing import NDArray

from ..errors import DecideError

FloatArray = NDArray[np.float64]

#: The smallest expected count, in any cell, at which ``test="auto"`` still
#: trusts the normal approximation.
AUTO_EXACT_BELOW = 10.0
#: Above this smallest expected count even ``test="exact"`` runs the normal
#: approximation: every cell then holds thousands of cases, the two tests
#: agree closely, and an exact grid would hold millions of count pairs.
EXACT_UP_TO = 2000.0


@dataclass(frozen=True)
class NormalMoments:
    """Moments of a normal test statistic, scaled to one exposed subject.

    With ``n`` exposed subjects the statistic is distributed as
    ``N(0, sd_null**2 / n)`` when the exposure is harmless and as
    ``N(shift, sd_alt**2 / n)`` under the stated effect; the continuity
    correction subtracted from the shift is ``correction / n``.
    """

    shift: FloatArray
    sd_null: FloatArray
    sd_alt: FloatArray
    correction: FloatArray


@dataclass(frozen=True)
class Marginal:
    """A binomial or Poisson count, batched over the leading axis."""

    family: Literal["binomial", "poisson"]
    #: number of trials (binomial) or ``nan`` (Poisson)
    trials: FloatArray
    #: success probability (binomial) or mean (Poisson)
    parameter: FloatArray


@dataclass(frozen=True)
class CountModel:
    """What an exact test sees, for a batch of studies.

    ``exposed_null`` and ``exposed_alt`` describe the exposed count under no
    effect and under the stated effect (the latter may carry an extra
    trailing axis of effects); ``other`` is the comparison count, distributed
    alike under both hypotheses unless ``other_alt`` gives its law under the
    effect, or ``None`` for a one-group design.  The two counts are
    independent, unless ``units`` is given: then they are two cells of one
    multinomial over ``units`` independent units (matched sets), the third
    cell holding the rest.
    ``conditional`` names the exact test run on the counts:

    ``"fisher"``
        hypergeometric, given the total (Fisher's exact test), needs
        ``n_exposed`` and ``n_other``;
    ``"binomial"``
        binomial given the total, success probability ``share_exposed``
        (the exact conditional test of two Poisson rates);
    ``"poisson"``
        the exposed count against a Poisson mean ``reference_mean``.
    """

    exposed_null: Marginal
    exposed_alt: Marginal
    other: Marginal | None
    conditional: Literal["fisher", "binomial", "poisson"]
    n_exposed: FloatArray | None = None
    n_other: FloatArray | None = None
    share_exposed: FloatArray | None = None
    reference_mean: FloatArray | None = None
    other_alt: Marginal | None = None
    units: FloatArray | None = None


class StudyDesign(ABC):
    """A study design: its vocabulary, its capabilities, its normal moments and its counts.

    The engines, the decision layer, the file formats and the command line
    ask a design what it can do through the class attributes below and
    never test its name.
    """

    #: the design's name in files and on the command line
    name: ClassVar[str]
    title: ClassVar[str]
    effect_name: ClassVar[str]
    baseline_name: ClassVar[str]
    #: what ``n_per_group`` counts (exposed subjects, cases, matched sets)
    size_name: ClassVar[str]
    #: groups of subjects the study enrols: 1 (one cohort against a known
    #: rate) or 2 (a second group of ``allocation * n`` subjects)
    groups: ClassVar[int]
    #: what ``allocation`` means (two-group designs); ``None`` for one group
    allocation_name: ClassVar[str | None]
    #: who the second group is (unexposed subjects, controls); ``None`` for one group
    comparison_name: ClassVar[str | None]
    uses_years: ClassVar[bool]
    #: whether the normal test may be continuity-corrected (two proportions)
    binomial_groups: ClassVar[bool]
    #: the exact test run on the counts (as :attr:`CountModel.conditional`)
    exact_test: ClassVar[Literal["fisher", "binomial", "poisson"]]
    normal_method: ClassVar[str]
    exact_method: ClassVar[str]
    #: the count a decision rule in counts is stated in, and the total it is conditional on
    #: (``None`` for a one-group test)
    count_words: ClassVar[tuple[str, str | None]] = ("exposed cases", "cases (exposed and unexposed)")
    #: why ``effect_limit`` bounds the effect, in words
    effect_limit_reason: ClassVar[str] = "the exposed risk must stay below 1"
    #: settings of the design itself (name: description), see :meth:`configure`
    settings: ClassVar[Mapping[str, str]] = {}

    def configure(self, values: Mapping[str, Any]) -> StudyDesign:
        """This design with its own settings (:attr:`settings`) set; validated."""
        for key in values:
            takes = ", ".join(self.settings) or "none"
            raise DecideError(
                f"design_settings.{key}: the {self.name} design has no such setting (it takes: {takes})",
                (f"design_settings.{key}",),
            )
        return self

    def setting_values(self) -> dict[str, float]:
        """The values of this design's own settings (empty if it has none)."""
        return {}

    def describe_settings(self) -> str:
        """The design's own settings in words, to append to a method (empty if none)."""
        return "".join(f", {key} {value:g}" for key, value in self.setting_values().items())

    def __eq__(self, other: object) -> bool:
        return (
            isinstance(other, StudyDesign)
            and other.name == self.name
            and other.setting_values() == self.setting_values()
        )

    def __hash__(self) -> int:
        return hash((self.name, tuple(sorted(self.setting_values().items()))))

    def __repr__(self) -> str:
        values = ", ".join(f"{key}={value!r}" for key, value in self.setting_values().items())
        return f"{type(self).__name__}({values})"

    def check_allocation(self, allocation: FloatArray) -> None:
        """Raise :class:`~decide.errors.DecideError` if the allocation is impossible.

        Only called for two-group designs; any positive ratio by default.
        """
        return None

    def exact_offered(self, allocation: FloatArray) -> NDArray[np.bool_]:
        """Where the design has an exact test (everywhere by default)."""
        return np.ones(np.shape(allocation), dtype=bool)

    #: why the exact test is not offered where :meth:`exact_offered` is false
    no_exact_reason: ClassVar[str] = ""

    @abstractmethod
    def check_baseline(self, baseline: FloatArray) -> None:
        """Raise :class:`~decide.errors.DecideError` if the baseline is impossible."""

    @abstractmethod
    def effect_limit(self, baseline: FloatArray) -> FloatArray:
        """The effect (exclusive) above which the design's model breaks; ``inf`` if none."""

    def applicable(self, allocation: float, years: float) -> tuple[float | None, float | None]:
        """Allocation and follow-up years where this design uses them, else ``None``.

        The API refuses a value for a setting the design does not have, so
        callers passing a study's settings on use this.
        """
        return (None if self.groups == 1 else allocation, years if self.uses_years else None)

    def comparison_size(self, n: FloatArray, allocation: FloatArray) -> FloatArray:
        """Subjects in the comparison group (0 for a one-group design).

        Groups are whole subjects: ``allocation * n`` rounded half up.  The
        exact tests use this count; the normal formulas use the ratio itself,
        as the published formulas do (they differ by under half a subject).
        """
        if self.groups == 1:
            return np.zeros_like(n * allocation)
        return np.asarray(np.floor(allocation * n + 0.5), dtype=np.float64)

    @abstractmethod
    def normal_moments(
        self,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
        continuity: bool,
    ) -> NormalMoments:
        """Moments of the normal test statistic per exposed subject."""

    @abstractmethod
    def cell_counts(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> dict[str, FloatArray]:
        """Expected counts in the cells a test relies on, under the effect.

        Keys name the cell in the design's words.  The first entry is the
        exposed group's count under the stated effect.
        """

    def smallest_expected_count(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> FloatArray:
        """The smallest expected cell count under either hypothesis."""
        alt = self.cell_counts(n, baseline, effect, allocation, years)
        null = self.cell_counts(n, baseline, np.ones_like(effect), allocation, years)
        return np.asarray(
            np.minimum(
                np.minimum.reduce(list(np.broadcast_arrays(*alt.values()))),
                np.minimum.reduce(list(np.broadcast_arrays(*null.values()))),
            ),
            dtype=np.float64,
        )

    @abstractmethod
    def normal_statistic(
        self,
        exposed: FloatArray,
        other: FloatArray,
        n: FloatArray,
        baseline: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
        continuity: bool,
    ) -> tuple[FloatArray, FloatArray]:
        """The normal test statistic computed from observed counts.

        ``exposed`` is the count the exact test looks at (exposed cases, or
        exposed cases among cases for case-control), ``other`` the comparison
        count (ignored by one-group designs); the study is ``n`` exposed
        subjects (or cases) with its comparison group of
        :meth:`comparison_size`.  Returns the statistic in null standard
        errors toward harm and toward protection (they differ only by a
        continuity correction): the test flags harm when the first reaches
        the critical value ``z`` (and, two-sided, protection when the second
        falls to ``-z``).  ``nan`` where the statistic is undefined (no case
        at all); such counts never flag.
        """

    @abstractmethod
    def count_model(
        self,
        n: FloatArray,
        baseline: FloatArray,
        effect: FloatArray,
        allocation: FloatArray,
        years: FloatArray,
    ) -> CountModel:
        """The counts an exact test sees; ``effect`` may have a trailing axis."""
