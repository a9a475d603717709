"""Which test a study runs: one rule, applied to the study as finally sized.

``test="auto"`` runs the exact test where a cell expects fewer than
:data:`~decide.designs.AUTO_EXACT_BELOW` cases and the normal test
elsewhere; ``test="exact"`` runs the exact test except where every cell
expects more than :data:`~decide.designs.EXACT_UP_TO`.  The solver, the
optimiser, the comparison of policies and the audit all ask this module, at
the size they finally report, so that one study never gets two tests.

References
----------
.. [1] Cochran, W. G. (1954). Some methods for strengthening the common
   chi-squared tests. *Biometrics* 10, 417-451 (the rule of thumb on small
   expected counts; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..designs import AUTO_EXACT_BELOW, EXACT_UP_TO
from .power import choose_exact
from .study import Setting


@dataclass(frozen=True)
class TestChoice:
    """The test one study runs, and the count it was chosen on.

    ``requested`` is ``auto``, ``normal`` or ``exact``; ``smallest_count``
    the smallest expected cell count under either hypothesis at the study's
    size and design effect.
    """

    requested: str
    exact: bool
    smallest_count: float
    #: why the design offers no exact test here (empty where it does)
    no_exact: str = ""

    @property
    def reason(self) -> str:
        """Why this test, in one clause that holds at the study's size."""
        smallest = self.smallest_count
        if self.requested == "auto" and self.no_exact:
            return f"auto: normal, because {self.no_exact}"
        if self.requested == "exact" and not self.exact:
            return (
                f"exact test requested, but every cell expects more than {EXACT_UP_TO:g} ({smallest:.3g}): "
                "the normal approximation was used, which agrees closely there"
            )
        if self.requested != "auto":
            return f"{self.requested} test requested"
        if self.exact:
            return f"auto: exact, because the smallest expected cell count is {smallest:.3g} (< {AUTO_EXACT_BELOW:g})"
        return f"auto: normal, because every cell expects at least {AUTO_EXACT_BELOW:g} ({smallest:.3g})"


def smallest_count(setting: Setting, n: ArrayLike, effect: ArrayLike) -> NDArray[np.float64]:
    """The smallest expected cell count under either hypothesis at size ``n``."""
    d = setting.design
    return np.asarray(
        d.smallest_expected_count(
            np.asarray(n, dtype=np.float64),
            setting.baseline,
            np.asarray(effect, dtype=np.float64),
            setting.allocation,
            setting.years,
        ),
        dtype=np.float64,
    )


def uses_exact(setting: Setting, n: ArrayLike, effect: ArrayLike) -> NDArray[np.bool_]:
    """Where the study of size ``n`` (at the design effect ``effect``) runs the exact test."""
    offered = setting.design.exact_offered(setting.allocation)
    return choose_exact(setting.test, smallest_count(setting, n, effect), offered)


def choose_test(setting: Setting, n: float, effect: float) -> TestChoice:
    """The test a study of ``n`` per group runs, with the count behind the choice.

    Examples
    --------
    Usage example (10 expected cases in each group decides it):

    >>> from decide.engine.study import check_setting
    >>> s = check_setting("cohort-rate", 5e-5, None, 5.0, 1, "auto", False)
    >>> choose_test(s, 40_000, 2.5).exact, choose_test(s, 39_999, 2.5).exact
    (False, True)
    """
    smallest = float(smallest_count(setting, n, effect))
    offered = setting.design.exact_offered(setting.allocation)
    exact = bool(choose_exact(setting.test, np.asarray(smallest), offered))
    no_exact = "" if offered.all() else setting.design.no_exact_reason
    return TestChoice(requested=setting.test, exact=exact, smallest_count=smallest, no_exact=no_exact)


def first_normal_size(setting: Setting, effect: float, lo: int, hi: int) -> int:
    """The smallest whole size in ``[lo, hi]`` at which the normal test is the one run.

    Expected counts grow with the size, so the sizes that run the normal test
    form an upper range; ``hi`` must be one of them.
    """
    if not uses_exact(setting, lo, effect):
        return lo
    while hi - lo > 1:  # uses_exact(lo) and not uses_exact(hi)
        mid = (lo + hi) // 2
        if uses_exact(setting, mid, effect):
            lo = mid
        else:
            hi = mid
    return hi
