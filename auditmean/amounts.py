"""Reading money amounts written the way people and accounting systems export them.

:func:`parse_amounts` turns a column of amounts (numbers, or text such as
``"$1,234.56"``, ``"1.234,56 €"`` or ``"(12.00)"``) into float64 values. It
reads only forms whose meaning is certain under the documented rules and
raises an :class:`~auditmean.errors.InputError` that lists every row it
could not read; it never guesses.
"""

from __future__ import annotations

import decimal as _decimal
import numbers
import re
import unicodedata

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from auditmean.errors import InputError, ParameterError, spreadsheet_row

__all__ = ["parse_amounts"]

# ---------------------------------------------------------------------------
# The accepted grammar, in RE2 syntax (run by pyarrow on the distinct texts).

# Spaces that may stand between the parts of an amount: ordinary white space,
# no-break space, thin space and narrow no-break space.
_SPACE_CLASS = r"\s\x{00A0}\x{2009}\x{202F}"
_WS = f"[{_SPACE_CLASS}]*"
# A currency mark: a currency symbol (Unicode category Sc: $ € £ ¥ ¤ ₹ ...),
# optionally preceded by one or two capital letters (US$, HK$, R$), or a
# three-letter code in capitals (USD, EUR, CHF ...).
_CUR = r"(?:[A-Z]{1,2}\p{Sc}|\p{Sc}|[A-Z]{3})"
_SIGN = r"[-+\x{2212}]"
_MINUS = r"[-\x{2212}]"
# The loose shape of the number itself; :data:`_NUMBER` checks it strictly.
_NUM = r"[0-9.,](?:[0-9.,'\x{2019}" + _SPACE_CLASS + r"]*[0-9.,])?"
# The shape of a written amount. Signs may be matched in more places than
# are allowed together, so that a text with two of them ("-(12)", "(12)-",
# "--12") is recognised and refused for that reason; the signs, parentheses
# and currency marks are then counted.
_SHAPE = (
    f"^(?:{_CUR})?{_WS}(?:{_SIGN})?{_WS}\\(?{_WS}(?:{_SIGN})?{_WS}(?:{_CUR})?{_WS}(?:{_SIGN})?{_WS}"
    f"{_NUM}{_WS}(?:{_MINUS})?{_WS}(?:{_CUR})?{_WS}(?:{_MINUS})?{_WS}\\)?{_WS}(?:{_MINUS})?{_WS}"
    f"(?:{_CUR})?$"
)
_EXPONENT = r"(?:[eE][-+]?[0-9]+)?"
# Plain numbers (what programs write): read directly, exponent allowed.
_PLAIN = {
    ".": f"^[-+]?(?:[0-9]+(?:\\.[0-9]*)?|\\.[0-9]+){_EXPONENT}$",
    ",": f"^[-+]?(?:[0-9]+(?:,[0-9]*)?|,[0-9]+){_EXPONENT}$",
}

# Characters that may separate groups of three digits besides the comma or
# point: space, no-break space, thin space, narrow no-break space, apostrophe
# and right single quotation mark (used in Swiss formatting).
_SPACE_GROUP_SEPARATORS = (r"\x{0020}", r"\x{00A0}", r"\x{2009}", r"\x{202F}", "'", r"\x{2019}")


def _number_pattern(decimal: str) -> str:
    d = r"\." if decimal == "." else ","
    point_or_comma = "," if decimal == "." else r"\."
    plain = f"[0-9]+(?:{d}[0-9]*)?|{d}[0-9]+"
    grouped = [
        f"[1-9][0-9]{{0,2}}(?:{sep}[0-9]{{3}})+(?:{d}[0-9]*)?"
        for sep in (point_or_comma, *_SPACE_GROUP_SEPARATORS)
    ]
    return "^(?:" + "|".join([plain, *grouped]) + ")$"


_NUMBER = {d: _number_pattern(d) for d in (".", ",")}
_STRIP = {
    ".": "[," + "".join(_SPACE_GROUP_SEPARATORS) + "]",
    ",": r"[\." + "".join(_SPACE_GROUP_SEPARATORS) + "]",
}
_NOT_NUMBER = r"[-+\x{2212}()]"

# Status of each value.
_OK, _BLANK, _UNREADABLE, _TWO_CURRENCIES, _TWO_SIGNS, _PARENTHESES, _NOT_FINITE, _NOT_TEXT = range(8)
_FIXED_REASONS = {
    _TWO_CURRENCIES: "more than one currency mark",
    _TWO_SIGNS: "more than one sign (minus, plus, trailing minus or parentheses)",
    _PARENTHESES: "unbalanced parentheses",
    _NOT_FINITE: "not a finite amount (infinite, or too large for a float64)",
}
_EXAMPLES = 5


def parse_amounts(
    values: object,
    *,
    decimal: str = ".",
    column: str = "book_value",
    file: str | None = None,
    table: str | None = None,
) -> np.ndarray:
    """Read a column of money amounts as float64, or say which rows cannot be read.

    Parameters
    ----------
    values:
        A 1-D sequence: a pandas Series, numpy array, list or tuple. Its
        elements may be numbers (passed through unchanged) or text, mixed.
    decimal:
        ``"."`` (default) or ``","``: the decimal mark used by the text values.
    column, file, table:
        Where the values come from; used only in error messages.

    Returns
    -------
    numpy.ndarray
        float64 values, one per input element, in the same order; every value
        is finite, and a negative zero is returned as ``0.0``.

    Raises
    ------
    InputError
        When any element is blank or missing (``None``, NaN, empty or white
        space only), cannot be read under the rules below, or when the amounts
        carry more than one currency mark. The error lists the spreadsheet
        rows (the element at position ``i`` is row ``i + 2``, see
        :func:`~auditmean.errors.spreadsheet_row`) and a few of the texts with
        the reason each was refused.
    ParameterError
        When ``decimal`` is neither ``"."`` nor ``","`` or ``values`` is not
        a 1-D sequence.

    Notes
    -----
    The rules (our own, written for this package):

    * **Numbers** (int, float, numpy numbers, :class:`decimal.Decimal`) pass
      through as float64. Booleans, dates and other objects are refused.
    * **Text** is trimmed of surrounding white space. A *plain number* (what
      programs write: ``1234.5``, ``-0.5``, ``+12``, ``1234.``, ``.5``,
      ``1.5E+06``) is read directly. Any other text must read as::

          [cur] [sign] [(] [sign] [cur] [sign] NUMBER [-] [cur] [-] [)] [-] [cur]

      with white space allowed between the parts, at most **one** currency
      mark, at most **one** sign indicator (so ``-(12)`` and ``--12`` are
      refused) and parentheses only in pairs.
    * A **currency mark** is a currency symbol (any character of Unicode
      category Sc: ``$ € £ ¥ ¤ ₹`` ...), the symbol preceded by one or two
      capital letters (``US$``, ``HK$``, ``R$``), or three capital letters
      (``USD``, ``EUR``, ``CHF``), before or after the number. The code is not
      checked against the ISO 4217 list. Marks are compared as written: if
      the column carries more than one distinct mark (``$`` and ``EUR``, or
      even ``$`` and ``USD``) nothing is read, because adding amounts in
      different currencies would give a meaningless total. Values without a
      mark are taken to be in the column's one currency.
    * A **sign indicator** is a leading ``-``, ``+`` or ``−`` (U+2212), a
      trailing ``-`` or ``−`` (``12.00-``), or enclosing parentheses
      (``(12.00)``); each but ``+`` makes the amount negative.
    * ``CR``/``DR`` markers (``12.00 CR``) are **refused**: whether a credit
      is below zero depends on the account (on a customer account a credit
      reduces the balance; on a supplier account it is the normal balance),
      so reading it would be a guess. Write the sign instead.
    * A lone dash (``-``, ``$ -``), which accounting formats show for zero but
      which also stands for "no amount", is refused; write ``0``.
    * **NUMBER** with ``decimal="."`` is either digits with an optional
      decimal point and fraction (``1234``, ``1234.5``, ``.5``), or digits in
      groups of exactly three separated all by commas (``1,234,567.89``) or
      all by the same one of space, no-break space, thin space, narrow
      no-break space, apostrophe or ``’`` (``1 234 567.89``, ``1'234.50``),
      the first group starting with a digit 1-9. An exponent is accepted in
      plain numbers only. So ``"1,234"`` is 1234, while ``"1,23"``, ``"0,123"``
      and ``"1.234,56"`` are refused with a message to pass ``decimal=","``
      if the comma is the decimal mark.
    * With ``decimal=","`` the roles of comma and point are swapped:
      ``"1.234,56"`` is 1234.56, ``"1.234"`` is 1234 and ``"1,234"`` is
      1.234; ``"1.23"`` is refused with a message to pass ``decimal="."``.
    * The digits are converted to the nearest float64 (correct rounding), so
      ``"0.1"`` gives exactly ``float("0.1")``. A value too large for float64
      is refused.

    Each distinct text is parsed once, with vectorised regular expressions,
    so a million rows take a fraction of a second.

    Examples
    --------
    >>> parse_amounts(["1,234.56", "(12.00)", "12.00-", "$ 5", "1e3"]).tolist()
    [1234.56, -12.0, -12.0, 5.0, 1000.0]
    >>> parse_amounts(["1.234,56 €", "-0,5 €"], decimal=",").tolist()
    [1234.56, -0.5]
    """
    if decimal not in (".", ","):
        raise ParameterError("decimal", f"must be '.' or ',', got {decimal!r}")
    series = _as_series(values)
    if decimal == "." and isinstance(series.dtype, pd.StringDtype):
        quick = _all_plain_numbers(series)
        if quick is not None:
            return quick
    n = len(series)
    out = np.full(n, np.nan)
    status = np.zeros(n, dtype=np.int8)
    texts = _split_numbers_and_texts(series, out, status)

    marks_per_row: np.ndarray | None = None
    mark_labels: list[str] = []
    text_positions = np.flatnonzero(texts.notna().to_numpy())
    if text_positions.size:
        codes, uniques = pd.factorize(texts.iloc[text_positions], use_na_sentinel=True)
        u_values, u_status, u_marks = _parse_distinct(uniques, decimal)
        out[text_positions] = u_values[codes]
        status[text_positions] = u_status[codes]
        mark_labels = sorted({m for m, s in zip(u_marks, u_status) if m and s == _OK})
        if len(mark_labels) > 1:
            mark_index = {m: j for j, m in enumerate(mark_labels)}
            u_mark_codes = np.array([mark_index.get(m, -1) for m in u_marks], dtype=np.int64)
            marks_per_row = np.full(n, -1, dtype=np.int64)
            marks_per_row[text_positions] = u_mark_codes[codes]

    bad = status != _OK
    if bad.any():
        raise InputError(
            _describe_failures(series, status, decimal),
            file=file,
            table=table,
            column=column,
            rows=[spreadsheet_row(i) for i in np.flatnonzero(bad)],
        )
    if marks_per_row is not None:
        _raise_mixed_currencies(marks_per_row, mark_labels, file=file, table=table, column=column)
    return out + 0.0  # turns -0.0 into 0.0


# ---------------------------------------------------------------------------
# Input shapes


def _as_series(values: object) -> pd.Series:
    if isinstance(values, pd.Series):
        return values.reset_index(drop=True)
    if isinstance(values, (str, bytes)) or not hasattr(values, "__len__"):
        raise ParameterError(
            "values", f"must be a 1-D sequence of amounts (Series, array or list), got {type(values).__name__}"
        )
    if isinstance(values, np.ndarray):
        if values.ndim != 1:
            raise ParameterError("values", f"must be 1-D, got an array of shape {values.shape}")
        return pd.Series(values, copy=False)
    if isinstance(values, (pd.Index, pd.api.extensions.ExtensionArray)):
        return pd.Series(values).reset_index(drop=True)
    # A list or tuple: keep every element as it is (numpy would turn a mix of
    # numbers and text into text).
    return pd.Series(list(values), dtype=object)


def _all_plain_numbers(series: pd.Series) -> np.ndarray | None:
    """The values when every element is a plain number with a decimal point (what programs write), else None.

    One conversion of the whole column, for the common case of a large file
    of plain numbers. pyarrow's text-to-float conversion accepts exactly the
    plain numbers of :data:`_PLAIN` (it is the same conversion the general
    path applies to them) and, beyond them, only ``inf``/``nan`` spellings,
    which are caught here as not finite. Anything else (a blank, a space, a
    currency mark) makes the conversion fail, and the general path then
    reads the column value by value and reports what it refuses.
    """
    texts = pa.array(series, type=pa.string())
    if texts.null_count:
        return None
    try:
        values = pc.cast(texts, pa.float64()).to_numpy(zero_copy_only=False)
    except pa.ArrowException:  # not all plain numbers (or a cast pyarrow lacks): the slow path says why
        return None
    if not np.all(np.isfinite(values)):
        return None
    return values + 0.0  # turns -0.0 into 0.0


def _split_numbers_and_texts(series: pd.Series, out: np.ndarray, status: np.ndarray) -> pd.Series:
    """Fill ``out``/``status`` for numbers, missing values and wrong types; return the texts.

    The returned Series holds the text elements and NA everywhere else.
    """
    n = len(series)
    dtype = series.dtype
    no_texts = pd.Series([None] * n, dtype=object)
    if isinstance(dtype, pd.CategoricalDtype):
        series = series.astype(object)
        dtype = series.dtype
    if pd.api.types.is_bool_dtype(dtype) or pd.api.types.is_datetime64_any_dtype(dtype) or (
        pd.api.types.is_timedelta64_dtype(dtype) or pd.api.types.is_complex_dtype(dtype)
    ):
        status[:] = _NOT_TEXT
        status[series.isna().to_numpy()] = _BLANK
        return no_texts
    if pd.api.types.is_numeric_dtype(dtype):
        _take_numbers(series.to_numpy(dtype=np.float64, na_value=np.nan), np.arange(n), out, status)
        return no_texts
    if isinstance(dtype, pd.StringDtype):
        status[series.isna().to_numpy()] = _BLANK
        return series

    # object (or another extension type): look at the elements
    kind = pd.api.types.infer_dtype(series, skipna=True)
    if kind == "string":
        status[series.isna().to_numpy()] = _BLANK
        return series
    obj = series.to_numpy(dtype=object)
    is_text = np.zeros(n, dtype=bool)
    number_pos: list[int] = []
    number_val: list[float] = []
    for i, v in enumerate(obj):
        if isinstance(v, str):
            is_text[i] = True
        elif v is None or v is pd.NA or v is pd.NaT:
            status[i] = _BLANK
        elif isinstance(v, (bool, np.bool_)):
            status[i] = _NOT_TEXT
        elif isinstance(v, (numbers.Real, _decimal.Decimal)):
            number_pos.append(i)
            number_val.append(float(v))
        else:
            status[i] = _NOT_TEXT
    if number_pos:
        _take_numbers(np.array(number_val, dtype=np.float64), np.array(number_pos), out, status)
    texts = pd.Series(np.where(is_text, obj, None), dtype=object)
    return texts


def _take_numbers(vals: np.ndarray, positions: np.ndarray, out: np.ndarray, status: np.ndarray) -> None:
    out[positions] = vals
    status[positions[np.isnan(vals)]] = _BLANK
    status[positions[np.isinf(vals)]] = _NOT_FINITE


# ---------------------------------------------------------------------------
# The vectorised parser


def _parse_distinct(uniques: pd.Index, decimal: str) -> tuple[np.ndarray, np.ndarray, list[str | None]]:
    """Values, statuses and currency marks of distinct texts (vectorised with pyarrow).

    Plain numbers (``-1234.5``, ``1e3``) are converted directly; the other
    texts are checked against :data:`_SHAPE`, their signs, parentheses and
    currency marks counted, and what remains of the number checked against
    :data:`_NUMBER` before conversion.
    """
    texts = pc.utf8_trim_whitespace(pa.array(np.asarray(uniques, dtype=object), type=pa.string()))
    size = len(texts)
    values = np.full(size, np.nan)
    status = np.full(size, _UNREADABLE, dtype=np.int8)
    marks: list[str | None] = [None] * size
    status[_np_bool(pc.equal(texts, ""))] = _BLANK

    plain = _np_bool(pc.match_substring_regex(texts, _PLAIN[decimal]))
    if plain.any():
        digits = pc.filter(texts, pa.array(plain))
        if decimal == ",":
            digits = pc.replace_substring(digits, pattern=",", replacement=".")
        values[plain] = pc.cast(digits, pa.float64()).to_numpy(zero_copy_only=False)
        status[plain] = _OK

    rest = np.flatnonzero(~plain & (status != _BLANK))
    if rest.size:
        sub = pc.take(texts, pa.array(rest))
        shaped = _np_bool(pc.match_substring_regex(sub, _SHAPE))
        n_marks = _np_int(pc.count_substring_regex(sub, _CUR))
        n_minus = _np_int(pc.count_substring(sub, "-")) + _np_int(pc.count_substring(sub, "\u2212"))
        n_plus = _np_int(pc.count_substring(sub, "+"))
        n_lp = _np_int(pc.count_substring(sub, "("))
        n_rp = _np_int(pc.count_substring(sub, ")"))
        n_signs = n_minus + n_plus + ((n_lp + n_rp) > 0)
        number = pc.utf8_trim_whitespace(
            pc.replace_substring_regex(pc.replace_substring_regex(sub, _CUR, ""), _NOT_NUMBER, "")
        )
        number_ok = _np_bool(pc.match_substring_regex(number, _NUMBER[decimal]))

        sub_status = np.full(rest.size, _UNREADABLE, dtype=np.int8)
        sub_status[shaped & number_ok] = _OK
        sub_status[shaped & (n_marks > 1)] = _TWO_CURRENCIES
        sub_status[shaped & (n_signs > 1)] = _TWO_SIGNS
        sub_status[shaped & (n_lp != n_rp)] = _PARENTHESES
        ok = sub_status == _OK

        if ok.any():
            chosen = pa.array(ok)
            digits = pc.replace_substring_regex(pc.filter(number, chosen), pattern=_STRIP[decimal], replacement="")
            if decimal == ",":
                digits = pc.replace_substring(digits, pattern=",", replacement=".")
            magnitude = pc.cast(digits, pa.float64()).to_numpy(zero_copy_only=False)
            negative = (n_minus[ok] + n_lp[ok]) > 0
            values[rest[ok]] = np.where(negative, -magnitude, magnitude)
            found = pc.struct_field(pc.extract_regex(pc.filter(sub, chosen), f"(?P<mark>{_CUR})"), "mark")
            for i, m in zip(rest[ok], found.to_pylist()):
                marks[i] = m
        status[rest] = sub_status

    status[(status == _OK) & ~np.isfinite(values)] = _NOT_FINITE
    values[status != _OK] = np.nan
    return values, status, marks


def _np_bool(a: pa.Array) -> np.ndarray:
    return pc.fill_null(a, False).to_numpy(zero_copy_only=False).astype(bool)


def _np_int(a: pa.Array) -> np.ndarray:
    return pc.fill_null(a, 0).to_numpy(zero_copy_only=False).astype(np.int64)


# ---------------------------------------------------------------------------
# Messages


def _readable(text: str, decimal: str) -> bool:
    values, status, _ = _parse_distinct(pd.Index([text], dtype=object), decimal)
    return bool(status[0] == _OK)


_CR_DR = re.compile(r"(?:^(?:CR|DR)\b)|(?:(?:\b|(?<=\d))(?:CR|DR)\.?$)", re.IGNORECASE)


def _explain(text: str, decimal: str) -> str:
    """Why ``text`` (known not to read) was refused, in plain words."""
    t = text.strip()
    if _CR_DR.search(t):
        return (
            "a CR/DR marker: whether a credit is below zero depends on the account, "
            "so write the amount with a minus sign or in parentheses instead"
        )
    bare = "".join(c for c in t if unicodedata.category(c) != "Sc" and not c.isspace())
    bare = re.sub(r"^[A-Z]{1,3}|[A-Z]{1,3}$", "", bare)
    if bare in {"-", "\u2212", "\u2013", "\u2014"}:
        return (
            "a lone dash, which accounting formats show for zero but which also stands "
            "for no amount; write 0 if zero is meant"
        )
    other = "," if decimal == "." else "."
    if _readable(t, other):
        group = "comma" if decimal == "." else "point"
        return (
            f"with decimal={decimal!r} (where a {group} may only separate groups of three "
            f"digits) this is not a number, but it reads with decimal={other!r}: "
            f"if {other!r} is the decimal mark, pass decimal={other!r}"
        )
    digits_and_marks = bare.strip("-+\u2212()")
    if re.fullmatch(r"[\d.,'\u2019\u00a0\u2009\u202f]*\d[\d.,'\u2019\u00a0\u2009\u202f]*", digits_and_marks):
        return "the digits are not in groups of three, or group and decimal marks are mixed"
    return "not an amount in any accepted form"


def _describe_failures(series: pd.Series, status: np.ndarray, decimal: str) -> str:
    n_bad = int(np.count_nonzero(status != _OK))
    blank = np.flatnonzero(status == _BLANK)
    other = np.flatnonzero((status != _OK) & (status != _BLANK))
    parts = []
    if other.size:
        examples = []
        seen: set[str] = set()
        elements = series.to_numpy(dtype=object)
        for i in other[:100_000]:  # enough to find a few distinct examples
            v = elements[i]
            if isinstance(v, np.generic):
                v = v.item()
            key = repr(v)
            if key in seen:
                continue
            seen.add(key)
            code = status[i]
            if code == _NOT_TEXT:
                reason = f"a {type(v).__name__} value, not an amount"
            elif code == _UNREADABLE:
                reason = _explain(str(v), decimal)
            else:
                reason = _FIXED_REASONS[int(code)]
            examples.append(f"row {spreadsheet_row(i)} {key}: {reason}")
            if len(examples) == _EXAMPLES:
                break
        more = other.size - len(examples)
        parts.append(
            f"{other.size:,} cannot be read ("
            + "; ".join(examples)
            + (f"; and {more:,} more" if more > 0 else "")
            + ")"
        )
    if blank.size:
        shown = ", ".join(str(spreadsheet_row(i)) for i in blank[:_EXAMPLES])
        more = f" and {blank.size - _EXAMPLES:,} more" if blank.size > _EXAMPLES else ""
        noun = "row" if blank.size == 1 else "rows"
        parts.append(f"{blank.size:,} blank or missing ({noun} {shown}{more})")
    return (
        f"{n_bad:,} of {len(series):,} amounts could not be read and nothing was guessed: "
        + "; ".join(parts)
        + ". Accepted forms include 1234.56, 1,234.56, $1,234.56, 1 234.56 EUR, -12, (12.00) "
        "and 12.00- (see auditmean.amounts.parse_amounts)"
    )


def _raise_mixed_currencies(
    marks_per_row: np.ndarray,
    labels: list[str],
    *,
    file: str | None,
    table: str | None,
    column: str,
) -> None:
    counts = np.bincount(marks_per_row[marks_per_row >= 0], minlength=len(labels))
    order = np.argsort(-counts, kind="stable")
    pieces = []
    for j in order:
        rows = np.flatnonzero(marks_per_row == j)
        shown = ", ".join(str(spreadsheet_row(i)) for i in rows[:_EXAMPLES])
        more = f" and {rows.size - _EXAMPLES} more" if rows.size > _EXAMPLES else ""
        noun = "row" if rows.size == 1 else "rows"
        pieces.append(f"{labels[j]!r} on {rows.size} {noun} ({noun} {shown}{more})")
    # The rows listed are those of every mark but the most frequent one.
    minority = np.isin(marks_per_row, order[1:])
    raise InputError(
        "the amounts carry more than one currency mark: "
        + "; ".join(pieces)
        + ". Amounts in different currencies cannot be added; convert them to one currency "
        "(or write them all with the same mark) first",
        file=file,
        table=table,
        column=column,
        rows=[spreadsheet_row(i) for i in np.flatnonzero(minority)],
    )

