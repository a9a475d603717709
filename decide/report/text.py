"""Shared wording, and user text made safe to print literally.

Numbers are formatted in :mod:`decide.report.numbers`; ``fmt`` and
``json_safe`` remain here as thin aliases for older callers.
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
    """Deprecated alias: a number for people, as :func:`decide.report.numbers.number`."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return numbers.count(value)
    if isinstance(value, float):
        return numbers.number(value, digits)
    return numbers.MISSING if value is None else str(value)


def json_safe(value: Any) -> Any:
    """Deprecated alias of :func:`decide.report.numbers.for_json`."""
    return numbers.for_json(value)
