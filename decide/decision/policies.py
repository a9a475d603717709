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

from dataclasses import dataclass
from typing import Literal

from .._checks import open_unit
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
        where = f"policy {self.name}"
        if self.alpha_rule not in ALPHA_RULES:
            raise DecideError(f"{where}: alpha.rule must be one of {', '.join(ALPHA_RULES)}, "
                              f"but got {self.alpha_rule!r}", ())
        if self.size_rule not in SIZE_RULES:
            raise DecideError(f"{where}: size.rule must be one of {', '.join(SIZE_RULES)}, "
                              f"but got {self.size_rule!r}", ())
        if (self.alpha_rule == "fixed") != (self.alpha is not None):
            raise DecideError(f"{where}: alpha.value is needed with, and only with, alpha.rule = 'fixed'", ())
        if self.alpha is not None:
            open_unit(f"{where}: alpha.value", self.alpha)
        if self.power is not None:
            open_unit(f"{where}: power.target", self.power)
        if (self.alpha_rule == "posterior") != (self.posterior_threshold is not None):
            raise DecideError(
                f"{where}: alpha.posterior_threshold is needed with, and only with, alpha.rule = 'posterior'", ()
            )
        if self.posterior_threshold is not None:
            open_unit(f"{where}: alpha.posterior_threshold", self.posterior_threshold)
        if self.power is None and (self.size_rule == "smallest-for-power" or self.alpha_rule == "for-power"):
            raise DecideError(f"{where}: power.target is needed by the rule {self.size_rule!r}"
                              f" / {self.alpha_rule!r}", ())


#: The engine's own choice: everything free, loss minimised.
LOSS_OPTIMAL = Policy(
    name="loss-optimal",
    title="Loss-optimal",
    summary="Alpha and size chosen to minimise expected loss given the stated prior and costs.",
    alpha_rule="loss-optimal",
    size_rule="loss-optimal",
)
