"""The number formats every renderer shares, against strings written out by hand.

Each expected string below was typed from the rule in
``decide/report/numbers.py`` (thousand = k, million = M, billion = bn; three
significant digits; separators for whole amounts), not produced by the code.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from decide.report import numbers as nb
from decide.report.text import literal, markdown_literal, one_line

MONEY_COMPACT = [
    # the values ten times too small before: 454,778 read "45.5k", 921,035 read "92.1k"
    (454_778.0, "455k"),
    (921_035.0, "921k"),
    (10_000.0, "10k"),
    (99_949.0, "99.9k"),
    (999_950.0, "1M"),  # rounds up into the next suffix, never "1000k"
    (1_000.0, "1k"),
    (1_499.0, "1.5k"),
    (14_838_123.0, "14.8M"),
    (15_160_000.0, "15.2M"),
    (80_000_000.0, "80M"),
    (187_400_000.0, "187M"),
    (1_234_000_000.0, "1.23bn"),
    (2_000_000_000_000.0, "2,000bn"),
    (999.0, "999"),
    (233.4, "233"),
    (12.5, "12.5"),
    (0.0, "0"),
    (-2_050_000.0, "-2.05M"),
    (-6_380.0, "-6.38k"),
]


@pytest.mark.parametrize(("value", "text"), MONEY_COMPACT)
def test_money_compact(value: float, text: str) -> None:
    assert nb.money(value, compact=True) == text


MONEY_FULL = [
    (14_838_123.4, "EUR", "14,838,123 EUR"),
    (8_000_000.0, "EUR", "8,000,000 EUR"),
    (1_175_000.0, "", "1,175,000"),
    (454_778.49, "GBP", "454,778 GBP"),
    (150.0, "EUR", "150 EUR"),
    (12.5, "EUR", "12.5 EUR"),
    (0.75, "", "0.75"),
    (0.0, "EUR", "0 EUR"),
    (-0.001, "", "0"),
    (-16_040_000.0, "EUR", "-16,040,000 EUR"),
    (None, "EUR", "-"),
    (math.nan, "EUR", "-"),
    (math.inf, "EUR", "infinity EUR"),
]


@pytest.mark.parametrize(("value", "currency", "text"), MONEY_FULL)
def test_money_in_full(value: float | None, currency: str, text: str) -> None:
    assert nb.money(value, currency) == text


def test_money_compact_carries_its_currency() -> None:
    assert nb.money(454_778.0, "EUR", compact=True) == "455k EUR"


PROBABILITIES = [
    (0.05, "0.0500"),
    (0.8, "0.800"),
    (0.4318, "0.432"),
    (0.06824123, "0.0682"),
    (0.099996, "0.100"),  # rounds into the next decade: still three digits
    (0.0001422, "0.000142"),
    (3e-6, "0.00000300"),
    (4e-9, "< 0.000001"),
    (0.99996, "> 0.999"),  # not 1: a board must not read certainty
    (0.9994, "0.999"),
    (0.0, "0"),
    (1.0, "1"),
    (None, "-"),
    (math.nan, "-"),
]


@pytest.mark.parametrize(("value", "text"), PROBABILITIES)
def test_probability(value: float | None, text: str) -> None:
    assert nb.probability(value) == text


NUMBERS = [
    (5.796, "5.8"),
    (3.0, "3"),
    (2.5, "2.5"),
    (22.59, "22.6"),
    (9.035, "9.04"),
    (3e-5, "0.00003"),
    (0.0008, "0.0008"),
    (5e-5, "0.00005"),
    (99.96, "100"),
    (12_605.4, "12,605"),
    (1.5e8, "150,000,000"),
    (-1.25, "-1.25"),
    (math.inf, "infinity"),
    (-math.inf, "-infinity"),
    (None, "-"),
    (2e-9, "< 0.000001"),
]


@pytest.mark.parametrize(("value", "text"), NUMBERS)
def test_number(value: float | None, text: str) -> None:
    assert nb.number(value) == text


@pytest.mark.parametrize(
    ("value", "text"), [(41_429, "41,429"), (7, "7"), (1_000_000, "1,000,000"), (2150.0, "2,150"), (None, "-")]
)
def test_count(value: float | None, text: str) -> None:
    assert nb.count(value) == text


@pytest.mark.parametrize(
    ("value", "text"),
    [
        (0.95, "95%"),
        (0.975, "97.5%"),  # not "98%": a stated level keeps its digits
        (0.8, "80%"),
        (0.9995, "99.95%"),
        (0.99999, "> 99.99%"),  # never "100%" for a level below 1
        (0.001, "0.1%"),
        (1e-9, "< 0.000001%"),
        (None, "-"),
    ],
)
def test_percent(value: float | None, text: str) -> None:
    assert nb.percent(value) == text


def test_range() -> None:
    assert nb.number_range(3.868, 8.686) == "3.87 to 8.69"
    assert nb.number_range(6.43, math.inf) == "6.43 to infinity"


@pytest.mark.parametrize("value", [1.516e7, 8e6, 3.2e6, 1.5e8, 1e-5, 123456789.0, 4e-9, 0.000142, 2.6e6, 1e12])
def test_no_human_format_uses_e_notation(value: float) -> None:
    for text in (nb.number(value), nb.money(value), nb.money(value, compact=True), nb.probability(min(value, 1))):
        assert "e+" not in text and "e-" not in text, text


def test_json_keys_snake_case_and_non_finite_as_null() -> None:
    data = {
        "expected_cases": {"exposed cases": 25.9, "Unexposed-cases": 10.4},
        "range": (6.43, math.inf),
        "detectable": {"0.8": 3.1},
        "nan": float("nan"),
        "np": np.float64(2.5),
    }
    assert nb.for_json(data) == {
        "expected_cases": {"exposed_cases": 25.9, "unexposed_cases": 10.4},
        "range": [6.43, None],
        "detectable": {"0.8": 3.1},
        "nan": None,
        "np": 2.5,
    }


ESCAPES = [
    ("plain title", "plain title"),
    ("[red]x[/red]", "[red]x[/red]"),
    ("a [/] b", "a [/] b"),
    (":warning: :smile:", ":warning: :smile:"),
    ("\x1b[31mred\x1b[0m", "\\x1b[31mred\\x1b[0m"),
    (
        "\x1b]8;;http://example.invalid\x1b\\link\x1b]8;;\x1b\\",
        "\\x1b]8;;http://example.invalid\\x1b\\link\\x1b]8;;\\x1b\\",
    ),
    ("osc \x9d0;title\x9c", "osc \\x9d0;title\\x9c"),
    ("bell\x07", "bell\\x07"),
    ("right-to-left \u202eevil", "right-to-left \\u202eevil"),
    ("two\nlines\tand tab", "two\nlines\tand tab"),
]


@pytest.mark.parametrize(("raw", "shown"), ESCAPES)
def test_literal_escapes_control_characters_only(raw: str, shown: str) -> None:
    assert literal(raw) == shown


def test_one_line_and_markdown() -> None:
    assert one_line("  a\n  b\x1b ") == "a b\\x1b"
    assert markdown_literal("A | B *x*") == "A \\| B \\*x\\*"


def test_ratio_range_reads_as_words() -> None:
    # an unbounded implied cost ratio once read "6.43 to infinity"
    assert nb.ratio_range(9.0, (6.43, float("inf"))) == "6.43 or more"
    assert nb.ratio_range(5.796, (3.8675, 8.6855)) == "3.87 to 8.69"
    assert nb.ratio_range(2.83, (2.8301, 2.8302)) == "2.83"  # ends equal once rounded: one value
    assert nb.ratio_range(0.5, (0.0, 0.7)) == "0.7 or less"
    assert nb.ratio_range(5.0) == "5" and nb.ratio_range(None) == "-"
    assert nb.is_range((6.43, float("inf"))) and not nb.is_range((2.8301, 2.8302)) and not nb.is_range(None)
