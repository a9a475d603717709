"""Errors and warnings raised by `decide`.

Every input error is a :class:`DecideError` (a ``ValueError``) whose message
names the parameter, the rule it broke and the value received, so that the
command line can print it as one line.
"""

from __future__ import annotations


class DecideError(ValueError):
    """Invalid input: the message names the parameter and the reason.

    ``params`` lists the parameter names the message mentions, so that a
    front end can show them in its own spelling (``n_per_group`` becomes
    ``--n-per-group`` on the command line).  By default it is the message's
    first word.
    """

    def __init__(self, message: str, params: tuple[str, ...] | None = None) -> None:
        super().__init__(message)
        first = message.split(" ", 1)[0].rstrip(":")
        self.params: tuple[str, ...] = params if params is not None else (first,)


class InfeasibleError(DecideError):
    """A well-posed question with no answer within the stated limits.

    Raised, for example, when no size up to the cap reaches the target power.
    The command line exits with status 1 for these, not 2.
    """


class ApproximationWarning(UserWarning):
    """A normal approximation was used where it is known to be weak.

    Emitted when the smallest expected count in any cell of the study is
    below the threshold at which the exact test is preferred (10).
    """
