"""The test a policy picks at each candidate size, normal or exact alike.

:func:`choose_tests` asks :mod:`decide.engine.selection` which test each
size runs, hands the sizes to the policy's alpha rule (:mod:`.rules`) and
returns the chosen tests' operating characteristics with, for each size,
whether it meets the policy and the constraints.

References
----------
.. [1] Berger, J. O. (1985). *Statistical Decision Theory and Bayesian
   Analysis*, 2nd ed., Springer, ch. 4 (tests as decision rules).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from ..designs._base import FloatArray
from .loss import Characteristics, LossModel, exact_batches
from .rules import NO_TEST, OK, NormalSearch, failure_codes, rule_of

if TYPE_CHECKING:  # policies read the rule registries to check a policy
    from .policies import Policy

_FIELDS = ("nominal", "attained", "power", "design_power", "missed")


@dataclass(frozen=True)
class Choice:
    """The test a policy picks at each candidate size (arrays of one length).

    ``z`` is the normal test's critical value (``nan`` where the test is
    exact); ``code`` is :data:`~decide.decision.rules.OK` or why the size
    fails the policy.
    """

    n: FloatArray
    exact: NDArray[np.bool_]
    chars: Characteristics
    z: FloatArray
    code: NDArray[np.int64]
    error_loss: FloatArray

    @property
    def meets_rules(self) -> NDArray[np.bool_]:
        return np.asarray(self.code == OK)


def choose_tests(model: LossModel, policy: Policy, n: FloatArray) -> Choice:
    """The test the policy's alpha rule picks at each size in ``n``."""
    n = np.asarray(n, dtype=np.float64)
    exact = model.uses_exact(n)
    rule = rule_of(policy)
    stated = rule.stated_alpha(policy)
    fields = {k: np.zeros(n.shape) for k in _FIELDS}
    z = np.full(n.shape, np.nan)
    found = np.ones(n.shape, dtype=bool)
    if (~exact).any():
        search = NormalSearch(model, policy, n[~exact])
        z[~exact] = rule.choose_normal(search)
        c = search.at(z[~exact])
        for k in _FIELDS:
            fields[k][~exact] = getattr(c, k)
    if exact.any():
        where = np.flatnonzero(exact)
        for idx, opts in exact_batches(model, n[where], level=rule.exact_level(policy)):
            col, f = rule.choose_exact(model, policy, opts)
            rows = np.arange(col.size)
            for name in _FIELDS:
                fields[name][where[idx]] = getattr(opts.chars, name)[rows, col]
            found[where[idx]] = f
    if stated is not None:
        # reported as stated, not via the critical value; for an exact test the
        # region picked is that of the largest breakpoint at or below it
        fields["nominal"][:] = stated
    chars = Characteristics(**fields)
    code = np.where(found, failure_codes(model, policy, chars), NO_TEST)
    loss = model.error_loss(chars.attained, chars.missed)
    return Choice(n=n, exact=exact, chars=chars, z=z, code=code, error_loss=loss)
