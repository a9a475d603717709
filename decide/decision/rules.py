"""Alpha rules: how a policy picks the test at a given study size.

Each rule is one class that knows how to pick a critical value for the
normal test (:meth:`AlphaRule.choose_normal`) and an attainable critical
region for an exact test (:meth:`AlphaRule.choose_exact`); :data:`RULES`
maps the name a policy file gives (``alpha.rule``) to the rule.  A new rule
is one new class registered here (its ``summary`` and ``needs`` tell the
policy checks and the policy file's schema what it is and which keys it
takes) and a policy file.

Both methods work on whole batches of sizes at once: the normal chooser on
an array of sizes through :class:`NormalSearch`, the exact chooser on the
``(sizes, attainable tests)`` arrays of :class:`~decide.decision.loss.ExactOptions`.

References
----------
.. [1] Berger, J. O. (1985). *Statistical Decision Theory and Bayesian
   Analysis*, 2nd ed., Springer, sec. 4.4.3: the Bayes test rejects when the
   likelihood ratio exceeds ``k = (1 - p) F / (p M)``.
.. [2] Mudge, J. F., Baker, L. F., Edge, C. B. and Houlahan, J. E. (2012).
   Setting an optimal alpha that minimizes errors in null hypothesis
   significance tests. *PLoS ONE* 7, e32734.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING, ClassVar

import numpy as np
from numpy.typing import NDArray

from ..designs._base import FloatArray
from ..engine import exact as _exact
from ..engine import normal as _normal
from .loss import Z_RANGE, Characteristics, ExactOptions, LossModel, minimise_on, normal_at, root_decreasing

if TYPE_CHECKING:  # policies read this registry to check a policy's rule
    from .policies import Policy

#: Relative slack on the alpha cap.
CAP_TOL = 1e-9

# why a test or a size fails a policy
OK, ALPHA_CAP, POWER_FLOOR, BETA_ABOVE_ALPHA, NO_TEST = 0, 1, 2, 3, 4


def power_floor(model: LossModel, policy: Policy) -> float:
    """The power at the design effect a policy and the constraints require."""
    return max(model.problem.constraints.min_power, policy.power or 0.0)


def failure_codes(model: LossModel, policy: Policy, c: Characteristics) -> NDArray[np.int64]:
    """For each test, :data:`OK` or why it fails the constraints and the policy."""
    cons = model.problem.constraints
    code = np.zeros(np.shape(c.nominal), dtype=np.int64)
    bma = policy.beta_at_most_alpha & (1 - c.power > c.attained + 1e-9)
    code = np.where(bma, BETA_ABOVE_ALPHA, code)
    code = np.where(c.design_power < power_floor(model, policy) - 1e-9, POWER_FLOOR, code)
    code = np.where(c.nominal > cons.max_alpha * (1 + CAP_TOL), ALPHA_CAP, code)
    return code


def posterior_score(model: LossModel, threshold: float, c: Characteristics) -> FloatArray:
    """Bayes risk of the test for a miss and a false alarm costing ``1 - t`` and ``t``."""
    p = model.problem.p_harm
    return np.asarray((1 - threshold) * p * (1 - c.power) + threshold * (1 - p) * c.attained)


@dataclass(frozen=True)
class NormalSearch:
    """The normal tests at a batch of sizes, by critical value ``z``.

    ``z_low`` and ``z_high`` bound the critical values whose nominal alpha
    stays in (0, 1); roots and bounds that several rules share are computed
    once, when first asked for.
    """

    model: LossModel
    policy: Policy
    n: FloatArray

    @cached_property
    def z_low(self) -> FloatArray:
        s = self.model.setting
        lowest = float(_normal.critical_z(np.asarray(1 - 1e-12), s.sides))
        return np.full(self.n.shape, max(Z_RANGE[0], lowest))

    @cached_property
    def z_high(self) -> FloatArray:
        return np.full(self.n.shape, Z_RANGE[1])

    def at(self, z: FloatArray) -> Characteristics:
        """Characteristics at critical values ``z`` (one per size, or a row of them per size)."""
        return normal_at(self.model, self.n[:, None] if z.ndim == 2 else self.n, z)

    def error_loss(self, z: FloatArray) -> FloatArray:
        c = self.at(z)
        return self.model.error_loss(c.attained, c.missed)

    def power_root(self, target: float) -> FloatArray:
        """The critical value giving ``target`` power at the design effect."""
        return root_decreasing(lambda z: self.at(z).design_power - target, self.z_low, self.z_high)

    @cached_property
    def equal_root(self) -> FloatArray:
        """The critical value at which attained alpha equals beta (averaged)."""

        def gap(z: FloatArray) -> FloatArray:
            c = self.at(z)
            return np.asarray(c.attained - (1 - c.power))

        return root_decreasing(gap, self.z_low, self.z_high)

    def allowed(self) -> tuple[FloatArray, FloatArray]:
        """The critical values the alpha cap, the power floor and beta <= alpha allow."""
        cap = self.model.problem.constraints.max_alpha
        sides = self.model.setting.sides
        lo = self.z_low if cap >= 1 else np.maximum(self.z_low, _normal.critical_z(np.asarray(cap), sides))
        hi = self.z_high
        floor = power_floor(self.model, self.policy)
        if floor > 0:
            hi = np.minimum(hi, self.power_root(floor))
        if self.policy.beta_at_most_alpha:
            hi = np.minimum(hi, self.equal_root)
        return lo, np.maximum(lo, hi)


class AlphaRule(ABC):
    """How a policy picks its test at each candidate size."""

    name: ClassVar[str]
    #: What the rule does, in one sentence (the policy file's schema shows it).
    summary: ClassVar[str]
    #: The policy keys the rule needs.  An ``alpha.*`` key is taken only by
    #: the rules that need it; ``power.target`` is a requirement any policy
    #: may state.
    needs: ClassVar[tuple[str, ...]] = ()

    @abstractmethod
    def choose_normal(self, search: NormalSearch) -> FloatArray:
        """The critical value of the normal test at each size of the search."""

    @abstractmethod
    def choose_exact(
        self, model: LossModel, policy: Policy, opts: ExactOptions
    ) -> tuple[NDArray[np.int64], NDArray[np.bool_]]:
        """The attainable test (column of ``opts``) picked in each row, and whether one was found."""

    def stated_alpha(self, policy: Policy) -> float | None:
        """The nominal alpha to report as stated, where the rule fixes it (else ``None``)."""
        return None

    def exact_level(self, policy: Policy) -> float | None:
        """The one level whose exact test the rule can pick, where it fixes one (else ``None``).

        With a level, the exact options hold only the never-flagging test and
        that level's test (:func:`~decide.decision.loss.exact_batches`).
        """
        return None


def _everywhere(rows: int) -> NDArray[np.bool_]:
    return np.ones(rows, dtype=bool)


class Fixed(AlphaRule):
    """alpha is the policy's ``alpha``; an exact test takes the largest region of level alpha."""

    name = "fixed"
    summary = "alpha is value."
    needs = ("alpha.value",)

    def choose_normal(self, search: NormalSearch) -> FloatArray:
        alpha = self.stated_alpha(search.policy)
        return np.full(search.n.shape, float(_normal.critical_z(np.asarray(alpha), search.model.setting.sides)))

    def choose_exact(
        self, model: LossModel, policy: Policy, opts: ExactOptions
    ) -> tuple[NDArray[np.int64], NDArray[np.bool_]]:
        alpha = self.stated_alpha(policy)
        cols = np.arange(opts.valid.shape[1])
        level = opts.valid & (opts.chars.nominal <= alpha * (1 + _exact.REL_TOL))
        return np.where(level, cols, 0).max(axis=1), _everywhere(opts.valid.shape[0])

    def stated_alpha(self, policy: Policy) -> float:
        assert policy.alpha is not None
        return policy.alpha

    def exact_level(self, policy: Policy) -> float:
        return self.stated_alpha(policy)


class LossOptimal(AlphaRule):
    """alpha minimises the expected loss of the two errors within the constraints."""

    name = "loss-optimal"
    summary = "alpha minimises expected loss."

    def choose_normal(self, search: NormalSearch) -> FloatArray:
        lo, hi = search.allowed()
        return minimise_on(search.error_loss, lo, hi)

    def choose_exact(
        self, model: LossModel, policy: Policy, opts: ExactOptions
    ) -> tuple[NDArray[np.int64], NDArray[np.bool_]]:
        c = opts.chars
        ok = opts.valid & (failure_codes(model, policy, c) == OK)
        score = np.where(ok, model.error_loss(c.attained, c.missed), np.inf)
        k = np.argmin(score, axis=1)
        return k, np.asarray(np.isfinite(score[np.arange(k.size), k]))


class Posterior(AlphaRule):
    """Flag when the posterior probability of harm exceeds the policy's threshold (the Bayes test)."""

    name = "posterior"
    summary = "flag when the posterior probability of harm exceeds posterior_threshold."
    needs = ("alpha.posterior_threshold",)

    def choose_normal(self, search: NormalSearch) -> FloatArray:
        t = self._threshold(search.policy)
        return minimise_on(lambda z: posterior_score(search.model, t, search.at(z)), search.z_low, search.z_high)

    def choose_exact(
        self, model: LossModel, policy: Policy, opts: ExactOptions
    ) -> tuple[NDArray[np.int64], NDArray[np.bool_]]:
        score = posterior_score(model, self._threshold(policy), opts.chars)
        k = np.argmin(np.where(opts.valid, score, np.inf), axis=1)
        return k, _everywhere(opts.valid.shape[0])

    @staticmethod
    def _threshold(policy: Policy) -> float:
        assert policy.posterior_threshold is not None
        return policy.posterior_threshold


class EqualToBeta(AlphaRule):
    """Attained alpha equals beta; for exact tests the larger of the two is made least."""

    name = "equal-to-beta"
    summary = "alpha equals beta."

    def choose_normal(self, search: NormalSearch) -> FloatArray:
        return search.equal_root

    def choose_exact(
        self, model: LossModel, policy: Policy, opts: ExactOptions
    ) -> tuple[NDArray[np.int64], NDArray[np.bool_]]:
        c = opts.chars
        k = np.argmin(np.where(opts.valid, np.maximum(c.attained, 1 - c.power), np.inf), axis=1)
        return k, _everywhere(opts.valid.shape[0])


class ForPower(AlphaRule):
    """The smallest alpha reaching the policy's power at the design effect (and beta <= alpha if asked)."""

    name = "for-power"
    summary = "the smallest alpha that reaches power.target."
    needs = ("power.target",)

    def choose_normal(self, search: NormalSearch) -> FloatArray:
        z = search.power_root(self._power(search.policy))
        return np.minimum(z, search.equal_root) if search.policy.beta_at_most_alpha else z

    def choose_exact(
        self, model: LossModel, policy: Policy, opts: ExactOptions
    ) -> tuple[NDArray[np.int64], NDArray[np.bool_]]:
        c = opts.chars
        cand = opts.valid & (c.design_power >= self._power(policy) - 1e-12)
        if policy.beta_at_most_alpha:
            cand &= 1 - c.power <= c.attained + 1e-12
        return np.argmax(cand, axis=1), np.asarray(cand.any(axis=1))

    @staticmethod
    def _power(policy: Policy) -> float:
        assert policy.power is not None
        return policy.power


#: Every alpha rule, by the name a policy file gives it.
RULES: dict[str, AlphaRule] = {
    rule.name: rule for rule in (Fixed(), LossOptimal(), EqualToBeta(), Posterior(), ForPower())
}


def rule_of(policy: Policy) -> AlphaRule:
    """The alpha rule a policy names."""
    return RULES[policy.alpha_rule]
