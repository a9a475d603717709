"""Policies: value-laden standards for choosing alpha and the study size.

A policy states what it fixes and what it leaves free; whatever it leaves
free the engine chooses to minimise expected loss within the constraints.

Alpha rules
-----------
``fixed``
    alpha is ``alpha`` (conventional science).
``loss-optimal``
    alpha minimises expected loss.
``equal-to-beta``
    attained alpha equals beta (beta averaged over the effect prior); for
    exact tests the attainable test that makes the larger of the two least.
``posterior``
    flag when the posterior probability of harm given the result exceeds
    ``posterior_threshold``: the Bayes rule with the costs of a miss and of a
    false alarm in the ratio ``(1 - t) : t``.
``for-power``
    the smallest alpha that reaches ``power`` at the design effect (alpha
    rises as needed, as a precautionary standard allows).

Size rules
----------
``smallest-for-power``
    the smallest size whose power at the design effect reaches ``power``.
``largest-allowed``
    the largest size the constraints (size cap, budget) allow.
``loss-optimal``
    the size that minimises expected loss.

``power`` is a requirement at the design effect (the point effect or the
prior median); ``beta_at_most_alpha`` additionally requires beta (averaged
over the prior) not to exceed the attained alpha.

References
----------
.. [1] Mudge, J. F., Baker, L. F., Edge, C. B. and Houlahan, J. E. (2012).
   Setting an optimal alpha that minimizes errors in null hypothesis
   significance tests. *PLoS ONE* 7, e32734.
.. [2] Berger, J. O. (1985). *Statistical Decision Theory and Bayesian
   Analysis*, 2nd ed., Springer, sec. 4.4.3 (the Bayes test).
.. [3] Cohen, J. (1988). *Statistical Power Analysis for the Behavioral
   Sciences*, 2nd ed., Erlbaum, sec. 2.4 (the 0.05/0.80 convention; from
   memory).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

from .._checks import probability, scalar, show
from ..errors import DecideError

AlphaRule = Literal["fixed", "loss-optimal", "equal-to-beta", "posterior", "for-power"]
SizeRule = Literal["smallest-for-power", "largest-allowed", "loss-optimal"]
ALPHA_RULES: tuple[str, ...] = ("fixed", "loss-optimal", "equal-to-beta", "posterior", "for-power")
SIZE_RULES: tuple[str, ...] = ("smallest-for-power", "largest-allowed", "loss-optimal")


@dataclass(frozen=True)
class Policy:
    """A standard for choosing alpha and the study size.

    Attributes
    ----------
    name : str
        Identifier (the policy file's stem), e.g. ``conventional-science``.
    title : str
        A short plain-words name.
    summary : str
        One or two sentences on what the policy stands for.
    alpha_rule, size_rule : str
        See the module documentation.
    alpha : float or None
        The fixed alpha (``alpha_rule = "fixed"``).
    power : float or None
        Required power at the design effect.
    posterior_threshold : float or None
        For ``alpha_rule = "posterior"``.
    beta_at_most_alpha : bool
        Require beta not to exceed the attained alpha.
    """

    name: str
    title: str
    summary: str
    alpha_rule: AlphaRule
    size_rule: SizeRule
    alpha: float | None = None
    power: float | None = None
    posterior_threshold: float | None = None
    beta_at_most_alpha: bool = False

    def __post_init__(self) -> None:
        for key in ("name", "title", "summary"):
            if not isinstance(getattr(self, key), str):
                raise DecideError(f"policy {key} must be text, but got {show(getattr(self, key))}", (key,))
        where = f"policy {self.name}"

        def fail(key: str, message: str) -> DecideError:
            return DecideError(f"{where}: {key}{message}", (key,))

        for key, word, rules in (
            ("alpha.rule", self.alpha_rule, ALPHA_RULES),
            ("size.rule", self.size_rule, SIZE_RULES),
        ):
            if word not in rules:
                raise fail(key, f" must be one of {', '.join(rules)}, but got {show(word)}")
        self._check_keys(fail)
        for key, value in (
            ("alpha.value", self.alpha),
            ("power.target", self.power),
            ("alpha.posterior_threshold", self.posterior_threshold),
        ):
            if value is not None:
                try:
                    probability(key, scalar(key, value))
                except DecideError as e:
                    raise DecideError(f"{where}: {e}", (key,)) from None
        if self.alpha is not None and self.power is not None and self.power <= self.alpha:
            raise fail("power.target", f" must be above alpha.value ({self.alpha:g}), but got {show(self.power)}")
        if not isinstance(self.beta_at_most_alpha, bool):
            raise fail("power.beta_at_most_alpha", f" must be true or false, but got {show(self.beta_at_most_alpha)}")

    def _check_keys(self, fail: Callable[[str, str], DecideError]) -> None:
        """Each rule's keys given with it, and only with it."""
        rule = self.alpha_rule
        for key, value, wanted in (
            ("alpha.value", self.alpha, "fixed"),
            ("alpha.posterior_threshold", self.posterior_threshold, "posterior"),
        ):
            if rule == wanted and value is None:
                raise fail(key, f': is required with rule = "{wanted}"')
            if rule != wanted and value is not None:
                raise fail(key, f': applies to rule = "{wanted}" only, not {rule!r}, but got {show(value)}')
        if self.power is None:
            rules = (("size", self.size_rule), ("alpha", self.alpha_rule))
            needs = [f"{t}.rule = {r!r}" for t, r in rules if r in ("smallest-for-power", "for-power")]
            if needs:
                raise fail("power.target", f": is required with {needs[0]}")


#: The engine's own choice: everything free, loss minimised.
LOSS_OPTIMAL = Policy(
    name="loss-optimal",
    title="Loss-optimal",
    summary="Alpha and size chosen to minimise expected loss given the stated prior and costs.",
    alpha_rule="loss-optimal",
    size_rule="loss-optimal",
)


def check_policies(policies: object) -> None:
    """Refuse anything but a sequence of :class:`Policy` objects (names are looked up by the caller)."""
    items = list(policies) if isinstance(policies, list | tuple) else None
    bad = [p for p in items if not isinstance(p, Policy)] if items is not None else [policies]
    if bad:
        raise DecideError(
            f"policies must be Policy objects (load them with decide.scenario.load_policies), but got {show(bad[0])}",
            ("policies",),
        )
