"""Shared wording, and user text made safe to print literally.

Numbers are formatted in :mod:`decide.report.numbers`; ``fmt`` remains here
for tables whose numbers are neither money nor probabilities.
"""

from __future__ import annotations

import re
import unicodedata
from typing import Any

from . import numbers

CAUTION = (
    "Decision support, not a decision: the value judgments (prior, costs, acceptable risks) "
    "belong to the responsible body. Defer to applicable regulations, the competent authority "
    "and licensed professional judgment."
)

#: What the two posterior probabilities of a comparison mean, said once.
POSTERIOR_NOTE = (
    "P(harm | positive) is the share of flags that would be true (the rest are false alarms); "
    "P(harm | negative) the chance the exposure is harmful after a negative result."
)
#: Why an exact test's implied cost ratio is a range, said once beneath the table.
RANGE_NOTE = (
    "An exact test's cut-off moves in whole counts, so its rule stays the loss-optimal one over a "
    "range of cost ratios, not at a single ratio; the range is shown."
)

#: Characters that reorder text on screen (bidirectional embeddings, overrides, isolates).
_BIDI = frozenset("\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069\u200e\u200f")


def _escape(char: str) -> str:
    code = ord(char)
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def literal(text: Any) -> str:
    """User text (titles, summaries, currency, units) safe to put before a reader.

    Control characters other than newline and tab (ESC, which starts terminal
    colour and hyperlink sequences; BEL; C1 controls such as the OSC
    introducer U+009D) and bidirectional overrides are written as visible
    escapes (``\\x1b``), so a file's text can neither drive the terminal nor
    reorder what is shown.  Everything else, including ``[``, ``]`` and
    ``:``, is kept as written: renderers put the result in plain text objects,
    never through a markup parser.

    Examples
    --------
    >>> literal("a\\x1b]8;;x\\x07b")
    'a\\\\x1b]8;;x\\\\x07b'
    >>> literal("[red]x[/red] :warning:")
    '[red]x[/red] :warning:'
    """
    out = []
    for char in str(text):
        if char in "\n\t":
            out.append(char)
        elif unicodedata.category(char) == "Cc" or char in _BIDI:
            out.append(_escape(char))
        else:
            out.append(char)
    return "".join(out)


def one_line(text: Any) -> str:
    """User text on one line: :func:`literal`, with runs of white space made one space."""
    return " ".join(literal(text).split())


#: Characters with a meaning inside a Markdown line (emphasis, links, code, HTML, table cells).
_MD_SPECIAL = re.compile(r"([\\`*_\[\]<>|~])")


def markdown_literal(text: Any) -> str:
    """User text for Markdown: on one line, with Markdown's special characters escaped.

    Examples
    --------
    >>> markdown_literal("a | b [x](y) *z* (1 + 2)")
    'a \\\\| b \\\\[x\\\\](y) \\\\*z\\\\* (1 + 2)'
    """
    return _MD_SPECIAL.sub(r"\\\1", one_line(text))


def fmt(value: Any, digits: int = 4) -> str:
    """Older callers' number format: counts as :func:`numbers.count`, others as :func:`numbers.number`.

    New code should say what the number is (``money``, ``probability``,
    ``count``, ``number`` in :mod:`decide.report.numbers`).

    Examples
    --------
    >>> fmt(41429), fmt(1.516e7), fmt(0.06824123), fmt(None)
    ('41,429', '15,160,000', '0.06824', '-')
    """
    if isinstance(value, bool):
        return "yes" if value else "no"
    if hasattr(value, "__index__"):
        return numbers.count(int(value))
    if hasattr(value, "__float__") and not isinstance(value, str):
        return numbers.number(float(value), digits)
    return numbers.MISSING if value is None else str(value)


#: The stated cost ratio when a false alarm costs nothing, in words.
NO_FINITE_RATIO = "none: a false alarm costs nothing"
