"""Tests of auditmean.amounts.parse_amounts.

Expected values are written beside each case; they are what the text says
under the documented rules, and Python's float() of the plain digits is the
outside reference for the conversion itself.
"""

from __future__ import annotations

import datetime
import decimal

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from auditmean.amounts import parse_amounts
from auditmean.errors import InputError, ParameterError

# (text, expected value) with decimal="." (the default)
POINT_CASES = [
    ("1234.56", 1234.56),
    ("-1234.56", -1234.56),
    ("+12", 12.0),
    ("\u221212", -12.0),  # U+2212 minus sign
    ("0", 0.0),
    ("007", 7.0),
    ("12.", 12.0),
    (".5", 0.5),
    ("-.5", -0.5),
    ("1e3", 1000.0),
    ("1.5E+06", 1500000.0),
    ("2.5e-2", 0.025),
    ("  42  ", 42.0),  # surrounding white space is trimmed
    ("\u00a042\u202f", 42.0),  # no-break and narrow no-break space trimmed too
    ("1,234", 1234.0),  # comma groups of three
    ("1,234.56", 1234.56),
    ("12,345,678.9", 12345678.9),
    ("1,234.", 1234.0),
    ("1 234.56", 1234.56),  # space as group separator
    ("1\u00a0234.56", 1234.56),  # no-break space
    ("1\u202f234\u202f567.5", 1234567.5),  # narrow no-break space
    ("1\u2009234", 1234.0),  # thin space
    ("1'234.50", 1234.5),  # apostrophe
    ("1\u2019234.50", 1234.5),  # right single quotation mark
    ("(12.00)", -12.0),  # parentheses: negative
    ("( 12.00 )", -12.0),
    ("12.00-", -12.0),  # trailing minus: negative
    ("12.00 -", -12.0),
    ("$1,234.56", 1234.56),
    ("$ 1,234.56", 1234.56),
    ("1,234.56$", 1234.56),
    ("-$12", -12.0),
    ("$-12", -12.0),
    ("$ (12.00)", -12.0),  # currency outside the parentheses
    ("$(12.00)", -12.0),
    ("(12.00)$", -12.0),
    ("($12.00)", -12.0),  # currency inside the parentheses
    ("$12.00-", -12.0),
    ("\u20ac 5", 5.0),  # euro sign
    ("\u00a35", 5.0),  # pound sign
    ("\u00a51,000", 1000.0),  # yen sign
    ("\u00a41,349.20", 1349.2),  # generic currency sign
    ("US$3", 3.0),
    ("HK$ 1,000", 1000.0),
    ("USD 1,234.56", 1234.56),
    ("1,234.56 USD", 1234.56),
    ("USD -1,234.56", -1234.56),
    ("-1,234.56 USD", -1234.56),
    ("12 EUR-", -12.0),
    ("(EUR 12)", -12.0),
    ("CHF 1'000.50", 1000.5),
    ("1'000.50 CHF", 1000.5),
    ("CHF-5", -5.0),
]

# (text, expected value) with decimal=","
COMMA_CASES = [
    ("1234,56", 1234.56),
    ("-0,5", -0.5),
    (",5", 0.5),
    ("1.234,56", 1234.56),  # point groups of three
    ("1.234", 1234.0),
    ("1,234", 1.234),  # the comma is the decimal mark
    ("12.345.678,9", 12345678.9),
    ("1 234,56", 1234.56),
    ("1\u202f234,56", 1234.56),
    ("1'234,50", 1234.5),
    ("1.234,56 \u20ac", 1234.56),
    ("-1.234,56 \u20ac", -1234.56),
    ("(1.234,56)", -1234.56),
    ("1.234,56-", -1234.56),
    ("EUR 1.234,56", 1234.56),
    ("1,5e3", 1500.0),
]


@pytest.mark.parametrize(("text", "expected"), POINT_CASES)
def test_point_decimal(text: str, expected: float) -> None:
    # expected: the value written beside the case (arithmetic of the text)
    assert parse_amounts([text]).tolist() == [expected]


@pytest.mark.parametrize(("text", "expected"), COMMA_CASES)
def test_comma_decimal(text: str, expected: float) -> None:
    # expected: the value written beside the case (arithmetic of the text)
    assert parse_amounts([text], decimal=",").tolist() == [expected]


def test_all_cases_in_one_column_with_one_currency() -> None:
    texts = ["1,234.56", "(12.00)", "12.00-", "$5", "$ (7.25)", "1e3"]
    # 1234.56, -12, -12, 5, -7.25, 1000 as written
    assert parse_amounts(texts).tolist() == [1234.56, -12.0, -12.0, 5.0, -7.25, 1000.0]


def test_negative_zero_is_returned_as_zero() -> None:
    out = parse_amounts(["-0", "(0.00)", "0.00-", -0.0])
    assert out.tolist() == [0.0, 0.0, 0.0, 0.0]
    assert not np.signbit(out).any()  # IEEE 754: -0.0 has its sign bit set


def test_numbers_pass_through() -> None:
    values = np.array([1.5, -2.25, 0.0, 1e12])
    assert parse_amounts(values).tolist() == [1.5, -2.25, 0.0, 1e12]
    assert parse_amounts(np.array([1, 2, 3], dtype=np.int64)).tolist() == [1.0, 2.0, 3.0]
    assert parse_amounts(pd.Series([1, 2], dtype="Int64")).tolist() == [1.0, 2.0]
    # Decimal("10.10") -> float 10.1; np.float32(1.5) is exactly 1.5
    assert parse_amounts([decimal.Decimal("10.10"), np.float32(1.5), 3]).tolist() == [10.1, 1.5, 3.0]


def test_mixed_numbers_and_text_keep_their_order() -> None:
    # as read from a workbook: number cells and text cells in one column
    assert parse_amounts([1, "2.50", 3.25, "(4)"]).tolist() == [1.0, 2.5, 3.25, -4.0]


def test_series_index_is_ignored_and_order_kept() -> None:
    s = pd.Series(["3", "1", "2"], index=[10, 5, 7])
    assert parse_amounts(s).tolist() == [3.0, 1.0, 2.0]


def test_repeated_texts_parse_to_the_same_value() -> None:
    texts = ["$1,000.10", "$5", "$1,000.10", "$5", "$1,000.10"]
    assert parse_amounts(texts).tolist() == [1000.1, 5.0, 1000.1, 5.0, 1000.1]


@settings(max_examples=200, deadline=None)
@given(st.integers(min_value=-(10**13), max_value=10**13))
def test_grouped_cents_round_trip(cents: int) -> None:
    # Outside reference: Python's format() writes the grouping, float() reads the plain digits.
    sign = "-" if cents < 0 else ""
    units, frac = divmod(abs(cents), 100)
    plain = f"{sign}{units}.{frac:02d}"
    expected = float(plain)
    us = f"{sign}{units:,}.{frac:02d}"
    european = f"{sign}{units:,}".replace(",", ".") + f",{frac:02d}"
    accounting = f"({units:,}.{frac:02d})" if cents < 0 else f"{units:,}.{frac:02d}"
    assert parse_amounts([plain, us, accounting]).tolist() == [expected] * 3
    assert parse_amounts([european], decimal=",").tolist() == [expected]


@settings(max_examples=200, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_repr_of_any_float_reads_back_exactly(x: float) -> None:
    # Outside reference: repr() of a float is the shortest text that float() reads back to it.
    assert parse_amounts([repr(x)])[0] == x + 0.0


def _error(values, **kw) -> InputError:
    with pytest.raises(InputError) as info:
        parse_amounts(values, **kw)
    return info.value


def test_unreadable_and_blank_rows_are_listed() -> None:
    # positions 1..5 are bad; spreadsheet rows are position + 2 (header is row 1)
    err = _error(["1", "abc", "", None, float("nan"), "1,23", "7"], column="amount", file="ledger.csv")
    assert err.rows == (3, 4, 5, 6, 7)
    assert err.column == "amount"
    assert err.file == "ledger.csv"
    msg = str(err)
    assert "ledger.csv" in msg and "'amount'" in msg
    assert "'abc'" in msg
    assert "'1,23'" in msg and "decimal=','" in msg
    assert "3 blank or missing (rows 4, 5, 6)" in msg


def test_comma_with_two_digits_asks_for_decimal_comma() -> None:
    for text in ["1,23", "0,5", "0,123", "1.234,56", "1 234,5"]:
        err = _error([text])
        assert "pass decimal=','" in str(err), text
        assert err.rows == (2,)


def test_point_with_decimal_comma_asks_for_decimal_point() -> None:
    for text in ["1.23", "0.123", "1,234.5"]:
        err = _error([text], decimal=",")
        assert "pass decimal='.'" in str(err), text


@pytest.mark.parametrize(
    ("text", "phrase"),
    [
        ("12.00 CR", "CR/DR"),
        ("12.00CR", "CR/DR"),
        ("CR 12.00", "CR/DR"),
        ("12.00 Dr", "CR/DR"),
        ("-", "lone dash"),
        ("$ -", "lone dash"),
        ("--12", "more than one sign"),
        ("-(12)", "more than one sign"),
        ("(-12)", "more than one sign"),
        ("(12)-", "more than one sign"),
        ("+12-", "more than one sign"),
        ("(12", "unbalanced parentheses"),
        ("12)", "unbalanced parentheses"),
        ("$$12", "more than one currency mark"),
        ("$12 EUR", "more than one currency mark"),
        ("12,34,567", "not in groups of three"),
        ("1,234.567.8", "not in groups of three"),
        ("1e999", "not a finite amount"),
        ("12-3", "not an amount"),
        ("N/A", "not an amount"),
        ("$1e5", "not an amount"),  # exponent only in plain numbers
        ("USD", "not an amount"),
    ],
)
def test_refused_forms_say_why(text: str, phrase: str) -> None:
    err = _error(["5", text])
    assert err.rows == (3,)
    assert phrase in str(err)


def test_more_than_one_currency_in_a_column_is_refused() -> None:
    err = _error(["$1", "$2", "EUR 3", "$4", "5"])
    # '$' is the most frequent mark; the row of the other mark (position 2) is listed
    assert err.rows == (4,)
    assert "'$' on 3 rows" in str(err) and "'EUR' on 1 row" in str(err)


def test_symbol_and_code_of_the_same_currency_still_count_as_two_marks() -> None:
    err = _error(["$1", "USD 2"])
    assert "more than one currency mark" in str(err)


def test_non_finite_and_wrong_types() -> None:
    assert _error(np.array([1.0, np.inf])).rows == (3,)
    assert _error(np.array([np.nan, 1.0])).rows == (2,)
    assert _error(pd.Series([1, None], dtype="Int64")).rows == (3,)
    err = _error([datetime.date(2024, 1, 2), 3.0])
    assert err.rows == (2,) and "date" in str(err)
    err = _error(np.array([True, False]))
    assert err.rows == (2, 3) and "bool" in str(err)


def test_error_lists_every_row_but_shows_a_few_examples() -> None:
    texts = ["x"] * 30
    err = _error(texts, table="sample")
    assert err.rows == tuple(range(2, 32))
    assert "and 20 more" in str(err)  # InputError prints ten rows then counts the rest
    assert "table 'sample'" in str(err)


def test_bad_parameters() -> None:
    with pytest.raises(ParameterError, match="decimal"):
        parse_amounts(["1"], decimal=";")
    with pytest.raises(ParameterError, match="values"):
        parse_amounts("123")
    with pytest.raises(ParameterError, match="1-D"):
        parse_amounts(np.zeros((2, 2)))


def test_empty_input_gives_empty_array() -> None:
    out = parse_amounts([])
    assert out.dtype == np.float64 and out.shape == (0,)
