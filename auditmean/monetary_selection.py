"""Selection by monetary unit (probability proportional to book value), re-performable by hand.

The rule, in full (a reviewer needs nothing else; see also the README,
"Re-performing a monetary-unit selection"):

1. Every item's book value is taken in whole cents, ``c = round(book_value * 100)``
   (halves to even, as Python's :func:`round`). Items with ``c <= 0``
   (credits and zero balances) hold no monetary unit and are never
   selected; they are refused, or kept apart and counted
   (``nonpositive="apart"``).
2. The positive items are laid out in item-id order (Unicode code-point
   order, as Python compares text; the same as the byte order of UTF-8),
   each covering the cents ``C_(i-1) <= p < C_i`` with ``C_0 = 0`` and
   ``C_i = C_(i-1) + c_i``. ``B = C_last`` is the positive book total in cents.
3. Draw ``k = 1 .. n``: ``u_k`` is the first 13 hexadecimal digits of
   SHA-256 of the UTF-8 text ``f"{seed}:unit:{k}"``, read as an unsigned
   integer (``0 <= u_k < 2**52``); the drawn cent is
   ``p_k = floor(u_k * B / 2**52)``, computed exactly in integers; the draw
   falls in the item whose range holds ``p_k``.
4. Items with ``c * n >= B`` (book value at or above the sampling interval
   ``J = B / n``) are *examined in full*, whether or not a draw fell in them.
   A draw that falls in such an item is absorbed: the item is examined
   anyway and its misstatement is added exactly.

Because each draw depends only on the seed, its number and the book total,
and the layout only on the ids and book values, the selection does not
depend on the order of the rows, on the computer or on the library version.
Draws are independent and with replacement, so a larger selection with the
same seed keeps the first ``n`` draws (:func:`extend_monetary_units`).

Given how many draws fall outside the items examined in full, those draws
are independent and each is uniform over the cents of the remaining items
(the *remainder*): this is what the monetary-unit bounds
(:func:`auditmean.monetary_unit_bound`) assume.
"""

from __future__ import annotations

from dataclasses import dataclass
from numbers import Integral
from typing import Any

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from auditmean._frames import (
    duplicated_rows,
    integer_column,
    numeric_column,
    require_columns,
    require_frame,
)
from auditmean._repeats import ids_may_repeat
from auditmean.errors import InputError, ParameterError, spreadsheet_row
from auditmean.population import Population, _id_order, strip_text
from auditmean.selection import (
    VerificationResult,
    _check_seed,
    _digests,
    _refuse_blank_ids,
    _refuse_non_text_ids,
    _verification_result,
)

__all__ = [
    "MONETARY_COLUMNS",
    "MAX_TOTAL_CENTS",
    "select_monetary_units",
    "extend_monetary_units",
    "verify_monetary_units",
    "unit_draws",
]

#: Columns a monetary-unit selection adds before the population's other columns, in this order.
MONETARY_COLUMNS = (
    "item_id",
    "book_value",
    "hits",
    "examined_in_full",
    "units",
    "first_unit",
    "unit_from",
    "unit_to",
)
#: Column :func:`extend_monetary_units` adds after ``unit_to``.
ADDED_COLUMN = "added"

#: Largest positive book total, in cents, that the exact integer arithmetic accepts
#: (about 46 million billion in currency units).
MAX_TOTAL_CENTS = 2**62

_HEX_DIGITS = 13  # u_k < 2**52: a spreadsheet holds it exactly
_SHIFT = 64 - 4 * _HEX_DIGITS  # the first 8 bytes of a digest, less the last 3 hex digits
_LOW26 = np.uint64((1 << 26) - 1)
_NONPOSITIVE = ("error", "apart")
_EXAMPLES = 5

RULE_TEXT = (
    "positive items (book value in whole cents, c = round(book_value * 100) > 0) laid out in "
    "item-id order (Unicode code-point order); draw k = 1..n: u = first 13 hex digits of "
    "SHA-256(UTF-8 'seed:unit:k'), drawn cent p = floor(u * B / 2^52) with B the positive book "
    "total in cents; the draw falls in the item with C(i-1) <= p < C(i); items with c * n >= B "
    "(at or above the sampling interval B / n) are examined in full and absorb their draws"
)


# ---------------------------------------------------------------------------
# the draws (plain arrays)
# ---------------------------------------------------------------------------


def unit_draws(seed: str, n: int, start: int = 1) -> np.ndarray:
    """The numbers ``u_k`` of draws ``k = start .. start + n - 1``, as ``uint64`` below ``2**52``.

    ``u_k`` is the first 13 hexadecimal digits of SHA-256 (NIST 2015, FIPS
    PUB 180-4) of the UTF-8 text ``f"{seed}:unit:{k}"``, read as an
    unsigned integer: the first 8 bytes of the digest as a big-endian
    64-bit integer, shifted right by 12 bits (3 hexadecimal digits).

    Examples
    --------
    >>> int(unit_draws("demo-seed", 1)[0]) == int("b65ac4b9eb5cf", 16)
    True
    """
    seed = _check_seed(seed)
    if n <= 0:
        return np.empty(0, dtype=np.uint64)
    raw = _digests(f"{seed}:unit:".encode(), [str(k) for k in range(start, start + n)], "draws")
    return np.frombuffer(raw, dtype=">u8").astype(np.uint64) >> np.uint64(_SHIFT)


def _points(u: np.ndarray, total: int) -> np.ndarray:
    """``floor(u * total / 2**52)`` exactly, for ``u < 2**52`` and ``total <= 2**62``, as int64.

    The product needs up to 114 bits, so both factors are split into 26-bit
    pieces, ``u = uh 2^26 + ul`` and ``total = bh 2^26 + bl``, and
    ``u total = uh bh 2^52 + M 2^26 + ul bl`` with ``M = uh bl + ul bh``.
    Dividing by ``2^52`` and writing ``M = (M >> 26) 2^26 + (M mod 2^26)``:
    ``floor(u total / 2^52) = uh bh + (M >> 26) + floor(((M mod 2^26) 2^26 + ul bl) / 2^52)``.
    Every intermediate stays below ``2^63`` (``uh, ul, bl < 2^26``,
    ``bh <= 2^36``), so unsigned 64-bit arithmetic is exact; the tests
    compare it with Python's unbounded integers.
    """
    if not 0 <= total <= MAX_TOTAL_CENTS:
        raise ValueError("total out of range")  # guarded at the boundary; never reached
    u = np.asarray(u, dtype=np.uint64)
    s26 = np.uint64(26)
    uh, ul = u >> s26, u & _LOW26
    bh, bl = np.uint64(total >> 26), np.uint64(total & ((1 << 26) - 1))
    m = uh * bl + ul * bh
    rest = (((m & _LOW26) << s26) + ul * bl) >> np.uint64(52)
    return (uh * bh + (m >> s26) + rest).astype(np.int64)


def _exact_total(cents: np.ndarray) -> int:
    """Sum of non-negative int64 cents (each at most 2**62) as a Python int, without overflow."""
    if cents.size == 0:
        return 0
    hi = cents >> 31  # each below 2**31 + 1: a billion items add up well inside int64
    lo = cents & ((1 << 31) - 1)
    return (int(hi.sum(dtype=np.int64)) << 31) + int(lo.sum(dtype=np.int64))


# ---------------------------------------------------------------------------
# validation at the boundary
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class _Items:
    ids: pa.Array  # item ids, text, stripped, unique
    values: np.ndarray  # book values, float64
    other: pd.DataFrame  # the other columns, index 0..count-1
    table: str


def _check_items(items: object, table: str = "items") -> _Items:
    if isinstance(items, Population):
        # checked once when it was loaded: text ids, stripped, unique; finite book values
        df = items.items.reset_index(drop=True)
        ids = pa.array(df["item_id"], type=pa.string(), from_pandas=True)
        if isinstance(ids, pa.ChunkedArray):
            ids = ids.combine_chunks()
        values = np.asarray(items.book_values, dtype=float)
        table = "population"
    else:
        df = require_frame(items, table).reset_index(drop=True)
        require_columns(df, ["item_id", "book_value"], table, why="needed to select monetary units")
        ids = _checked_ids(df["item_id"], table)
        values = numeric_column(df, "book_value", table)
    other = df.drop(columns=["item_id", "book_value"])
    clash = [c for c in (*MONETARY_COLUMNS[2:], ADDED_COLUMN) if c in other.columns]
    if clash:
        raise InputError(
            f"the column{'s' if len(clash) > 1 else ''} {', '.join(repr(c) for c in clash)} "
            "would be overwritten by the selection's own columns; rename "
            f"{'them' if len(clash) > 1 else 'it'} in the population (nothing is dropped silently)",
            table=table,
            column=clash[0],
        )
    return _Items(ids=ids, values=values, other=other, table=table)


def _checked_ids(raw: pd.Series, table: str) -> pa.Array:
    """Item ids as stripped text, refused when not text, blank or repeated (rows named)."""
    missing = raw.isna().to_numpy()
    _refuse_non_text_ids(raw, missing, table)
    if raw.dtype == object:
        arr = pa.array(raw.to_numpy(dtype=object), type=pa.string(), from_pandas=True)
    else:
        arr = pa.array(raw, type=pa.string(), from_pandas=True)
    if isinstance(arr, pa.ChunkedArray):
        arr = arr.combine_chunks()
    stripped = strip_text(arr)
    _refuse_blank_ids(
        missing | pc.fill_null(pc.equal(pc.binary_length(stripped), 0), True).to_numpy(zero_copy_only=False), table
    )
    if not ids_may_repeat(stripped):  # hashes first: certainly none repeats
        return stripped
    as_series = pd.Series(stripped.to_pylist(), dtype=object)
    dup = duplicated_rows(as_series)
    if dup:
        examples = ", ".join(repr(v) for v in as_series[as_series.duplicated()].unique()[:3])
        raise InputError(
            f"duplicate item ids (for example {examples}, after removing surrounding spaces); "
            "each item must appear once",
            table=table,
            column="item_id",
            rows=dup,
        )
    return stripped


def _check_choice(nonpositive: object) -> str:
    if nonpositive not in _NONPOSITIVE:
        raise ParameterError(
            "nonpositive",
            f"must be 'error' (refuse credits and zero balances) or 'apart' (leave them out and "
            f"count them), got {nonpositive!r}",
        )
    return str(nonpositive)


def _check_count(name: str, n: object) -> int:
    if isinstance(n, bool) or not isinstance(n, Integral):
        raise ParameterError(name, f"must be a whole number of monetary units (int), got {n!r}")
    n = int(n)
    if n < 1:
        raise ParameterError(name, f"must be at least 1, got {n}")
    return n


@dataclass(frozen=True)
class _Layout:
    """The positive items in id order and their cumulative cents."""

    rows: np.ndarray  # positions (in the items table) of the positive items, in id order
    cents: np.ndarray  # their book values in cents, int64
    ends: np.ndarray  # C_1 .. C_m, int64
    total: int  # B, cents
    credit_rows: np.ndarray
    zero_rows: np.ndarray
    credit_total: float


def _some_rows(positions: np.ndarray) -> str:
    if positions.size == 0:
        return ""
    shown = ", ".join(str(spreadsheet_row(i)) for i in positions[:_EXAMPLES])
    more = f" and {positions.size - _EXAMPLES} more" if positions.size > _EXAMPLES else ""
    return f": row{'s' if positions.size > 1 else ''} {shown}{more}"


def _layout(checked: _Items, nonpositive: str) -> _Layout:
    x = checked.values
    scaled = x * 100.0
    huge = np.abs(scaled) >= MAX_TOTAL_CENTS
    if huge.any():
        raise InputError(
            f"book values of {MAX_TOTAL_CENTS / 100:.4g} or more cannot be counted in exact whole "
            "cents; check these amounts",
            table=checked.table,
            column="book_value",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(huge)],
        )
    cents = np.rint(scaled).astype(np.int64)  # round half to even, as Python's round()
    credit_rows = np.flatnonzero(cents < 0)
    zero_rows = np.flatnonzero(cents == 0)
    if nonpositive == "error" and (credit_rows.size or zero_rows.size):
        bad = np.sort(np.concatenate([credit_rows, zero_rows]))
        raise InputError(
            f"{credit_rows.size} credit{'s' if credit_rows.size != 1 else ''} (book value below "
            f"zero{_some_rows(credit_rows)}) and {zero_rows.size} zero "
            f"balance{'s' if zero_rows.size != 1 else ''} (book value 0.00 to the cent"
            f"{_some_rows(zero_rows)}) hold no monetary unit and cannot be selected by monetary unit; pass "
            "nonpositive='apart' to leave them out of the selection and count them (they then "
            "need their own procedure)",
            table=checked.table,
            column="book_value",
            rows=[spreadsheet_row(i) for i in bad],
        )
    positive = np.flatnonzero(cents > 0)
    ids = checked.ids.take(pa.array(positive))
    if pc.any(pc.match_substring(ids, "\x00")).as_py():
        order = pc.sort_indices(ids).to_numpy().astype(np.int64)  # byte order handles NUL exactly
    else:
        order = _id_order(ids)
    rows = positive[order]
    c = cents[rows]
    total = _exact_total(c)
    if total > MAX_TOTAL_CENTS:
        raise InputError(
            f"the positive book total is {total:,} cents, above the {MAX_TOTAL_CENTS:,} cents "
            "(2^62) that exact whole-cent arithmetic supports; split the population",
            table=checked.table,
            column="book_value",
        )
    return _Layout(
        rows=rows,
        cents=c,
        ends=np.cumsum(c),
        total=total,
        credit_rows=credit_rows,
        zero_rows=zero_rows,
        credit_total=float(x[credit_rows].sum()) if credit_rows.size else 0.0,
    )


# ---------------------------------------------------------------------------
# selection
# ---------------------------------------------------------------------------


def _select(checked: _Items, layout: _Layout, n: int, seed: str, name: str = "sample_size") -> pd.DataFrame:
    total = layout.total
    if total == 0:
        raise ParameterError(
            name, "the population has no item with a positive book value, so there is no monetary unit to draw"
        )
    if n > total:
        raise ParameterError(
            name,
            f"{n:,} draws asked, but the positive book total holds only {total:,} monetary units "
            f"(cents, {total / 100:,.2f}); at most {total:,}",
        )
    u = unit_draws(seed, n)
    hit = np.searchsorted(layout.ends, _points(u, total), side="right")  # C_(i-1) <= p < C_i
    m = layout.rows.size
    hits = np.bincount(hit, minlength=m)
    threshold = -(-total // n)  # c * n >= B exactly when c >= ceil(B / n)
    in_full = layout.cents >= threshold
    chosen = np.flatnonzero((hits > 0) | in_full)

    # the draw numbers of each chosen item, ascending: draws grouped by item, k ascending within
    by_item = np.argsort(hit, kind="stable") + 1
    starts = np.concatenate(([0], np.cumsum(hits)[:-1]))
    k_text = by_item.astype(str)
    units, first = [], np.zeros(chosen.size, dtype=np.int64)
    for j, i in enumerate(chosen):  # one pass over the selected items (at most n + those in full)
        h = int(hits[i])
        if h:
            s = int(starts[i])
            units.append(" ".join(k_text[s : s + h].tolist()))
            first[j] = by_item[s]
        else:
            units.append("")
    rows = layout.rows[chosen]
    ends = layout.ends[chosen]
    out = pd.DataFrame(
        {
            "item_id": pd.Series(checked.ids.take(pa.array(rows)).to_pylist(), dtype=str),
            "book_value": checked.values[rows],
            "hits": hits[chosen].astype(np.int64),
            "examined_in_full": in_full[chosen],
            "units": pd.Series(units, dtype=str),
            "first_unit": first,
            "unit_from": ends - layout.cents[chosen],
            "unit_to": ends,
        }
    )
    if len(checked.other.columns):
        out = pd.concat([out, checked.other.iloc[rows].reset_index(drop=True)], axis=1)
    full_cents = _exact_total(layout.cents[in_full])
    draws_full = int(hits[in_full].sum())
    out.attrs["monetary_units"] = {
        "seed": seed,
        "sample_size": n,
        "book_total": total / 100,
        "book_total_cents": total,
        "interval": total / n / 100,
        "items": int(checked.values.size),
        "positive_items": int(m),
        "selected": int(chosen.size),
        "examined_in_full": int(in_full.sum()),
        "draws_in_full_items": draws_full,
        "draws_in_remainder": n - draws_full,
        "remainder_total": (total - full_cents) / 100,
        "credits": {"count": int(layout.credit_rows.size), "total": layout.credit_total},
        "zeros": {"count": int(layout.zero_rows.size)},
        "rule": RULE_TEXT,
    }
    return out


def select_monetary_units(
    items: pd.DataFrame | Population,
    sample_size: int,
    seed: str,
    *,
    nonpositive: str = "error",
) -> pd.DataFrame:
    """Select items by monetary unit: ``sample_size`` cents drawn with probability proportional to book value.

    Parameters
    ----------
    items:
        A DataFrame with columns ``item_id`` (text, unique after removing
        surrounding spaces, no blanks) and ``book_value`` (finite numbers);
        other columns are carried into the result unchanged. Or a
        :class:`~auditmean.Population` (its checks at loading are trusted).
    sample_size:
        ``n``, the number of monetary units drawn: a whole number from 1 to
        the positive book total in cents.
    seed:
        Non-empty text, used exactly as given (see :mod:`auditmean.selection`);
        :func:`auditmean.propose_seed` makes a fresh one.
    nonpositive:
        What to do with credits and zero balances (book value below half a
        cent), which hold no monetary unit: ``"error"`` (default) refuses
        them, naming their rows; ``"apart"`` leaves them out of the
        selection and counts them in ``attrs`` (they need their own
        procedure: a monetary-unit sample says nothing about them).

    Returns
    -------
    pandas.DataFrame
        One row per selected item (a draw fell in it, or it is examined in
        full), sorted by item id, columns

        ``item_id``, ``book_value``
            the item (id without surrounding spaces);
        ``hits``
            how many of the ``n`` draws fell in the item (0 for an item
            examined in full in which no draw fell); they add up to ``n``;
        ``examined_in_full``
            book value at or above the sampling interval ``B / n``
            (``c * n >= B`` in cents): the item is examined in full and its
            draws are absorbed;
        ``units``
            the draw numbers that fell in the item, ascending, separated by
            single spaces (``""`` when none);
        ``first_unit``
            the smallest of them (0 when none);
        ``unit_from``, ``unit_to``
            the item's cents in the layout, ``C_(i-1)`` and ``C_i``;

        then the population's other columns. ``attrs["monetary_units"]``
        holds ``seed``, ``sample_size``, ``book_total`` (positive book total
        ``B / 100``), ``book_total_cents``, ``interval`` (``B / n / 100``),
        ``items`` (rows given), ``positive_items``, ``selected``,
        ``examined_in_full``, ``draws_in_full_items``,
        ``draws_in_remainder``, ``remainder_total``, ``credits``
        (``{"count", "total"}``), ``zeros`` (``{"count"}``) and ``rule``.

    Raises
    ------
    InputError
        Missing columns, non-text, blank or duplicate ids, non-numeric book
        values, credits or zero balances with ``nonpositive="error"``,
        amounts too large for exact whole cents (rows in spreadsheet
        numbering), or a column that the result's own columns would overwrite.
    ParameterError
        ``sample_size`` not a whole number, below 1 or above the positive
        book total in cents; ``seed`` empty or not text; ``nonpositive``
        not one of the two choices.

    Notes
    -----
    The rule is written out in the module notes. Each draw is a cent chosen
    with equal probability among the ``B`` cents (up to the resolution
    ``B / 2^52`` of the 52-bit number, far below a cent's share for any
    book total under 2^62 cents), independently of the other draws, so an
    item with ``c`` cents is hit ``Binomial(n, c / B)`` times: selection with
    probability proportional to size, with replacement (Arkin, 1984;
    Leslie, Teitlebaum and Anderson, 1979; Guy, Carmichael and Whittington,
    2002, on monetary-unit sampling; cited from memory). Using random points
    rather than a fixed step from a random start avoids any cycle in the
    file order and lets the sample be extended. The SHA-256 digests are
    treated as independent uniform numbers: the usual working assumption
    about a cryptographic hash (NIST, 2015), not a theorem.

    References
    ----------
    Arkin, H. (1984). *Handbook of Sampling for Auditing and Accounting*,
    3rd ed. McGraw-Hill (from memory).

    Leslie, D. A., Teitlebaum, A. D. and Anderson, R. J. (1979). *Dollar-Unit
    Sampling: A Practical Guide for Auditors*. Copp Clark Pitman (from memory).

    Guy, D. M., Carmichael, D. R. and Whittington, R. (2002). *Audit
    Sampling: An Introduction*, 5th ed. Wiley (from memory).

    NIST (2015). FIPS PUB 180-4, *Secure Hash Standard (SHS)*.

    Examples
    --------
    >>> import pandas as pd
    >>> pop = pd.DataFrame({"item_id": ["A", "B", "C"], "book_value": [10.0, 250.0, 40.0]})
    >>> sel = select_monetary_units(pop, 2, "demo-seed")
    >>> int(sel["hits"].sum())
    2
    """
    checked = _check_items(items)
    seed = _check_seed(seed)
    choice = _check_choice(nonpositive)
    n = _check_count("sample_size", sample_size)
    return _select(checked, _layout(checked, choice), n, seed)


# ---------------------------------------------------------------------------
# verification and extension
# ---------------------------------------------------------------------------

_WHOLE = "(whole selection)"


def _text(v: Any) -> str:
    if v is None or v is pd.NA or (isinstance(v, float) and np.isnan(v)):
        return ""
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    return str(v).strip()


def _units_text(v: Any) -> str:
    """Draw numbers as written: one number read back from a file as 7 or 7.0 is "7"; spaces normalised."""
    return " ".join(_text(v).split())


def _flag(v: Any) -> bool | None:
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    t = _text(v).lower()
    if t in ("true", "1", "yes"):
        return True
    if t in ("false", "0", "no"):
        return False
    return None


def _recorded_size(rec: pd.DataFrame, hits: np.ndarray) -> int:
    """The sample size a recorded selection was drawn with: from its attrs, its largest draw, or its hits."""
    meta = rec.attrs.get("monetary_units") if isinstance(rec.attrs, dict) else None
    if isinstance(meta, dict) and isinstance(meta.get("sample_size"), Integral):
        return int(meta["sample_size"])
    if "units" in rec.columns:
        numbers = [int(t) for v in rec["units"] for t in _units_text(v).split() if t.isdigit()]
        if numbers:
            return max(numbers)
    return int(hits.sum())


def _compare(expected: pd.DataFrame, rec: pd.DataFrame, seed: str, n: int) -> VerificationResult:
    diffs: list[tuple[str, str, str, str]] = []
    rec_hits = integer_column(rec, "hits", "selection", minimum=0)
    recorded_draws = int(rec_hits.sum())
    if recorded_draws != n:
        diffs.append((_WHOLE, "hits do not add up to the sample size", str(n), str(recorded_draws)))

    ids = rec["item_id"].map(_text)
    dup = ids.duplicated(keep="first").to_numpy()
    for item in ids[dup].unique():
        diffs.append((item, "listed more than once", "", f"{int((ids == item).sum())} times"))
    compared = [c for c in MONETARY_COLUMNS[1:] if c in rec.columns and c != "hits"]
    first = rec.loc[~dup, compared].add_suffix("_r").assign(key_id=ids[~dup].to_numpy(), hits_r=rec_hits[~dup])
    exp = expected[list(MONETARY_COLUMNS)].add_suffix("_e").assign(key_id=expected["item_id"])
    merged = exp.merge(first, on="key_id", how="outer", indicator=True)

    for r in merged[merged["_merge"] == "left_only"].itertuples():
        what = "examined in full" if r.examined_in_full_e is True else f"hits {_text(r.hits_e)}"
        diffs.append((r.key_id, "expected but not recorded", what, ""))
    for r in merged[merged["_merge"] == "right_only"].itertuples():
        diffs.append((r.key_id, "recorded but not expected", "", f"hits {_text(r.hits_r)}"))
    both = merged[merged["_merge"] == "both"]
    for r in both.itertuples():
        if int(r.hits_e) != int(r.hits_r):
            diffs.append((r.key_id, "different hits", _text(r.hits_e), _text(r.hits_r)))
    if "units" in rec.columns:
        for r in both.itertuples():
            if _units_text(r.units_r) != r.units_e:
                diffs.append((r.key_id, "different units", r.units_e, _units_text(r.units_r)))
    if "examined_in_full" in rec.columns:
        for r in both.itertuples():
            if _flag(r.examined_in_full_r) is not bool(r.examined_in_full_e):
                diffs.append(
                    (r.key_id, "different examined_in_full", str(bool(r.examined_in_full_e)), _text(r.examined_in_full_r))
                )
    for col in ("first_unit", "unit_from", "unit_to"):
        if col in rec.columns:
            for r in both.itertuples():
                got, want = _text(getattr(r, f"{col}_r")), _text(getattr(r, f"{col}_e"))
                if got != want:
                    diffs.append((r.key_id, f"different {col}", want, got))
    if "book_value" in rec.columns:
        got = pd.to_numeric(both["book_value_r"], errors="coerce").to_numpy(dtype=float)
        want = both["book_value_e"].to_numpy(dtype=float)
        with np.errstate(invalid="ignore"):
            bad = ~(np.rint(got * 100) == np.rint(want * 100))
        for r, g, w in zip(both[bad].itertuples(), got[bad], want[bad]):
            diffs.append((r.key_id, "different book value", f"{w:.2f}", _text(r.book_value_r) if np.isnan(g) else f"{g:.2f}"))

    return _verification_result(diffs, seed, len(expected), len(rec))


def verify_monetary_units(
    items: pd.DataFrame | Population,
    selection: pd.DataFrame,
    seed: str,
    *,
    sample_size: int | None = None,
) -> VerificationResult:
    """Re-perform :func:`select_monetary_units` and list every way ``selection`` differs.

    Parameters
    ----------
    items, seed:
        The population and the seed, as for :func:`select_monetary_units`.
        Credits and zero balances are left out as ``nonpositive="apart"``
        does (they are never selected, whichever choice was made).
    selection:
        The recorded selection: columns ``item_id`` and ``hits``; the
        columns ``units``, ``examined_in_full``, ``first_unit``,
        ``unit_from``, ``unit_to`` and ``book_value`` (to the cent), when
        present, are compared too. Values read back from a file are
        accepted in their written form (``"True"``, ``7.0`` for 7).
    sample_size:
        The number of draws the selection was made with. When not given it
        is taken from ``selection.attrs["monetary_units"]`` if present,
        else the largest draw number in ``units``, else the sum of ``hits``;
        in every case the sum of ``hits`` is checked against it.

    Returns
    -------
    auditmean.selection.VerificationResult
        ``match`` and one row per difference (``item_id``, ``problem``,
        ``expected``, ``recorded``): items expected but not recorded,
        recorded but not expected, listed more than once, or recorded with
        other hits, draws, book value or range; ``"(whole selection)"`` when
        the hits do not add up to the sample size.
    """
    checked = _check_items(items)
    seed = _check_seed(seed)
    rec = require_frame(selection, "selection")
    require_columns(rec, ["item_id", "hits"], "selection", why="needed to verify a monetary-unit selection")
    rec_attrs = dict(rec.attrs)
    rec = rec.reset_index(drop=True)
    rec.attrs = rec_attrs
    hits = integer_column(rec, "hits", "selection", minimum=0)
    if sample_size is None:
        n = _recorded_size(rec, hits)
        if n < 1:
            raise InputError("holds no draw (every hits is 0), so there is nothing to verify", table="selection", column="hits")
    else:
        n = _check_count("sample_size", sample_size)
    layout = _layout(checked, "apart")
    expected = _select(checked, layout, n, seed, name="sample_size (of the recorded selection)")
    return _compare(expected, rec, seed, n)


def extend_monetary_units(
    items: pd.DataFrame | Population,
    selection: pd.DataFrame,
    new_size: int,
    seed: str,
) -> pd.DataFrame:
    """Extend a monetary-unit selection from ``n`` to ``new_size`` draws, keeping every item already selected.

    Parameters
    ----------
    items, seed:
        The population and the seed of ``selection`` (credits and zero
        balances are left out as ``nonpositive="apart"`` does).
    selection:
        The selection being extended, as :func:`select_monetary_units`
        returned it (at least ``item_id`` and ``hits``). It must be exactly
        what the seed gives for its sample size (see
        :func:`verify_monetary_units`); otherwise an :class:`InputError`
        lists the differences.
    new_size:
        ``n'``, the total number of draws after the extension, above ``n``.

    Returns
    -------
    pandas.DataFrame
        The whole selection for ``n'`` draws, as :func:`select_monetary_units`
        returns it, with a column ``added`` after ``unit_to``: True for an
        item that was not in ``selection``. ``attrs["monetary_units"]``
        also holds ``previous_sample_size`` and ``added`` (a count).

    Notes
    -----
    Draws ``1 .. n`` are the same draws (each depends only on the seed, its
    number and the book total), so every item already selected stays
    selected: an item hit before is hit again, and an item examined in
    full at the interval ``B / n`` is also at or above the smaller interval
    ``B / n'``. The extended selection is itself ``n'`` independent draws:
    the same design as a selection made with ``n'`` from the start.

    What it does not keep: the fixed-size guarantee of the bounds. Stringer's
    bound and the error-count bound hold at their stated confidence for a
    sample size fixed *before* any result was seen. Deciding to extend
    because of the misstatements found, and evaluating the extended sample
    as if its size had been fixed, can make those bounds less reliable than
    stated. Extend for reasons that do not depend on the results found (for
    example, a tolerable misstatement lowered by the engagement team), or
    judge the extended evaluation accordingly. Only a bound valid at every
    sample size at once (a confidence sequence whose bets do not depend on
    the final size) allows going on in light of the results; each bound's
    record states the assumptions it makes.
    """
    checked = _check_items(items)
    seed = _check_seed(seed)
    prev = require_frame(selection, "selection")
    require_columns(prev, ["item_id", "hits"], "selection", why="needed to extend a monetary-unit selection")
    prev_attrs = dict(prev.attrs)
    prev = prev.reset_index(drop=True)
    prev.attrs = prev_attrs
    hits = integer_column(prev, "hits", "selection", minimum=0)
    n = _recorded_size(prev, hits)
    if n < 1:
        raise InputError("holds no draw (every hits is 0); nothing to extend", table="selection", column="hits")
    layout = _layout(checked, "apart")
    check = _compare(_select(checked, layout, n, seed, name="selection"), prev, seed, n)
    if not check.match:
        raise InputError(
            f"is not the selection this seed gives for {n} draws; it cannot be extended. "
            "Differences:\n" + check.summary(),
            table="selection",
        )
    new_n = _check_count("new_size", new_size)
    if new_n <= n:
        raise ParameterError(
            "new_size", f"must be above the {n} draws already made (it is the total after the extension), got {new_n}"
        )
    out = _select(checked, layout, new_n, seed, name="new_size")
    before = set(prev["item_id"].map(_text))
    added = ~out["item_id"].isin(before).to_numpy()
    out.insert(MONETARY_COLUMNS.index("unit_to") + 1, ADDED_COLUMN, added)
    out.attrs["monetary_units"].update(previous_sample_size=n, added=int(added.sum()))
    return out
