"""Policies: value-laden standards for choosing alpha and the study size.

A policy states what it fixes and what it leaves free; whatever it leaves
free the engine chooses to minimise expected loss within the constraints.

The rules a policy may name are registered where they are defined, and
nowhere else: alpha rules are the classes of :mod:`decide.decision.rules`
(:data:`~decide.decision.rules.RULES`: ``fixed``, ``loss-optimal``,
``equal-to-beta``, ``posterior``, ``for-power``), size rules the entries of
:data:`decide.decision.sizes.SIZE_RULES` (``smallest-for-power``,
``largest-allowed``, ``loss-optimal``).  Each says which policy keys it
needs, and the checks here read that.

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

from .._checks import probability, scalar, show
from ..errors import DecideError
from .rules import RULES
from .sizes import SIZE_RULES


def alpha_rule_names() -> tuple[str, ...]:
    """Every alpha rule a policy may name, from the registry :data:`decide.decision.rules.RULES`."""
    return tuple(RULES)


def size_rule_names() -> tuple[str, ...]:
    """Every size rule a policy may name, from the registry :data:`decide.decision.sizes.SIZE_RULES`."""
    return tuple(SIZE_RULES)


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
        Names in :func:`alpha_rule_names` and :func:`size_rule_names`.
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
    alpha_rule: str
    size_rule: str
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
            ("alpha.rule", self.alpha_rule, alpha_rule_names()),
            ("size.rule", self.size_rule, size_rule_names()),
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
        """The keys each rule needs given with it; an ``alpha.*`` key only with a rule that takes it."""
        alpha_rule, size_rule = RULES[self.alpha_rule], SIZE_RULES[self.size_rule]
        for key, value in (("alpha.value", self.alpha), ("alpha.posterior_threshold", self.posterior_threshold)):
            if key in alpha_rule.needs and value is None:
                raise fail(key, f': is required with rule = "{self.alpha_rule}"')
            if key not in alpha_rule.needs and value is not None:
                takers = " or ".join(f'rule = "{n}"' for n, r in RULES.items() if key in r.needs)
                raise fail(key, f": applies to {takers} only, not {self.alpha_rule!r}, but got {show(value)}")
        if self.power is None:
            rules = (("size", self.size_rule, size_rule.needs), ("alpha", self.alpha_rule, alpha_rule.needs))
            needs = [f"{table}.rule = {name!r}" for table, name, keys in rules if "power.target" in keys]
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
