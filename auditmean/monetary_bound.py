"""Evaluation of a monetary-unit sample: projected misstatement and upper bounds that hold.

:func:`monetary_unit_bound` takes the selection drawn by
:func:`auditmean.select_monetary_units` with an ``audited_value`` column
added, checks that it is that selection, and returns a
:class:`MonetaryUnitBound`: the exact misstatement of the items examined in
full plus the remainder's book value times a bound on its mean
overstatement taint per monetary unit (:mod:`auditmean.core.monetary`).

:func:`monetary_unit_sample_size` plans the number of monetary units from
the tolerable and expected misstatement and the risk of incorrect
acceptance.

The bounds (``method=``):

``"stringer"``
    Stringer (1963), ranked taints and incremental Poisson factors (or
    binomial ones, ``basis="binomial"``). No general proof of its
    confidence; conservative in published simulations and in auditmean's
    own coverage tests.
``"count"``
    Every draw with an overstatement counted as a 100% taint, with the
    Clopper-Pearson upper limit. Holds in finite samples under the stated
    assumptions.
``"betting"``
    Waudby-Smith and Ramdas (2024), a betting confidence bound for the mean
    of independent values in ``[0, 1]``, in draw order. Holds in finite
    samples under the stated assumptions.
``"count_or_betting"``
    The smaller of the error count at a share of the risk and betting at
    the rest (union bound). Holds in finite samples under the stated
    assumptions.

Each method also gives a separate bound on understatement, the same
method applied to the understatement taints, under the assumption that no
item is understated by more than its book value.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field
from numbers import Integral, Real
from typing import ClassVar

import numpy as np
import pandas as pd

from auditmean._frames import (
    duplicated_rows,
    numeric_column,
    require_columns,
    require_frame,
)
from auditmean._records import RecordMixin, format_number, html_table, property_text, text_table
from auditmean.core import monetary as core
from auditmean.errors import InputError, ParameterError, spreadsheet_row

__all__ = [
    "METHODS",
    "METHOD_NAMES",
    "MonetaryUnitBound",
    "monetary_unit_bound",
    "monetary_unit_sample_size",
]

#: The bounds :func:`monetary_unit_bound` offers (``method=``).
METHODS = core.METHODS
#: Plain names of the bounds.
METHOD_NAMES = {
    "stringer": "Stringer",
    "count": "error count",
    "betting": "betting",
    "count_or_betting": "error count or betting",
}

_FINITE = "finite-sample, under the stated assumptions"
_NO_PROOF = "no general proof; conservative in published simulations and in auditmean's own coverage tests"

_REQUIRED = ("item_id", "book_value", "hits", "examined_in_full", "units", "audited_value")
_NOT_OURS = "the sample does not belong to the selection"


# ---------------------------------------------------------------------------
# the record


@dataclass(frozen=True)
class MonetaryUnitBound(RecordMixin):
    """Projected misstatement and upper bounds of a monetary-unit sample, by one method.

    Amounts are in the book values' currency. "Overstatement" is book value
    minus audited value; "understatement" audited minus book.

    Attributes
    ----------
    method, confidence:
        The bound (one of :data:`METHODS`) and its one-sided confidence.
    upper:
        Upper confidence limit of the overstatement of the positive book
        total: ``exact_in_full + remainder_total * upper_mean_taint``.
    projected:
        Projected misstatement (net): ``exact_in_full + remainder_total *
        mean_taint``, ``mean_taint`` the mean of the signed taints.
    understatement_upper:
        Upper confidence limit of the understatement (the separate bound, the
        same method on the understatement taints): ``-exact_in_full +
        remainder_total * understatement_upper_mean_taint``. NaN when a draw's
        understatement taint exceeds 100% (outside the assumption it needs).
    projected_understatement:
        The understatements found, projected: the understatements of items
        examined in full plus ``remainder_total`` times the mean
        understatement taint.
    exact_in_full:
        Net misstatement (book minus audited) of the items examined in full.
    book_total, remainder_total:
        Positive book total ``B`` and the book value ``B_r`` of the items not
        examined in full.
    sample_size, draws:
        Monetary units drawn ``n``, and those that fell in the remainder
        ``n_r`` (the others fell in items examined in full).
    errors, understatement_errors:
        Draws in the remainder with an overstatement (taint above 0), and
        with an understatement.
    mean_taint, upper_mean_taint, understatement_upper_mean_taint:
        Mean signed taint of the ``n_r`` draws and the method's bounds on the
        mean over- and understatement taint per monetary unit.
    items, items_in_full:
        Rows of the sample, and of them the items examined in full.
    basis:
        Factors of the Stringer bound: ``"poisson"`` or ``"binomial"``
        (recorded for every method, used by Stringer only).
    share:
        For ``"count_or_betting"``, the share of the risk given to the error
        count (NaN otherwise).
    assumptions:
        Plain sentences: what the bound assumes.
    guarantee:
        How far the bound can be relied on, in plain words.
    by_item:
        The items with a misstatement: ``item_id``, ``book_value``,
        ``audited_value``, ``misstatement``, ``taint``, ``hits``,
        ``examined_in_full``, ``units``.
    """

    record_kind: ClassVar[str] = "monetary_unit_bound"

    method: str
    confidence: float
    upper: float
    projected: float
    understatement_upper: float
    projected_understatement: float
    exact_in_full: float
    book_total: float
    remainder_total: float
    sample_size: int
    draws: int
    errors: int
    understatement_errors: int
    mean_taint: float
    upper_mean_taint: float
    understatement_upper_mean_taint: float
    items: int
    items_in_full: int
    basis: str
    share: float
    assumptions: tuple[str, ...]
    guarantee: str
    by_item: pd.DataFrame = field(repr=False)

    @property
    def lower_understatement(self) -> float:
        """The same figure as :attr:`understatement_upper` (the other name the shared contract allows)."""
        return self.understatement_upper

    @property
    def name(self) -> str:
        """The method's plain name."""
        return METHOD_NAMES[self.method]

    @property
    def allowance(self) -> float:
        """Allowance for sampling risk: ``upper - projected``."""
        return self.upper - self.projected

    def _title(self) -> str:
        return f"Monetary-unit sample, {self.name} bound at {self.confidence:.4g} confidence"

    def _fields(self) -> list[tuple[str, str]]:
        under = format_number(self.understatement_upper) if math.isfinite(self.understatement_upper) else "not formed"
        basis = f" ({self.basis} factors)" if self.method == "stringer" else ""
        share = (
            f" (error count at {self.share:.4g} of the risk, betting at the rest)"
            if self.method == "count_or_betting" else ""
        )
        return [
            ("positive book total", format_number(self.book_total)),
            ("monetary units drawn", f"{self.sample_size:,} ({self.draws:,} in the remainder)"),
            ("items examined", f"{self.items:,}, of which {self.items_in_full:,} in full"),
            ("misstatement of items in full", format_number(self.exact_in_full)),
            ("remainder book value", format_number(self.remainder_total)),
            ("draws with an overstatement", f"{self.errors:,}"),
            ("draws with an understatement", f"{self.understatement_errors:,}"),
            ("projected misstatement", format_number(self.projected)),
            ("upper bound of overstatement", format_number(self.upper) + basis + share),
            ("allowance for sampling risk", format_number(self.allowance)),
            ("upper bound of understatement", under),
            ("guarantee", self.guarantee),
        ]

    def summary(self) -> str:
        text = property_text(self._title(), self._fields())
        text += "\n\nAssumptions:\n" + "\n".join(f"  - {a}" for a in self.assumptions)
        if len(self.by_item):
            rows = [
                (r.item_id, format_number(r.book_value), format_number(r.audited_value),
                 f"{r.taint:.4f}", int(r.hits), "yes" if r.examined_in_full else "")
                for r in self.by_item.itertuples()
            ]
            text += "\n\n" + text_table(
                ("item", "book value", "audited value", "taint", "draws", "in full"), rows
            )
        return text

    def _html_body(self) -> str:
        esc = html.escape
        out = [f"<p><strong>{esc(self._title())}</strong></p>", html_table(("", ""), self._fields())]
        out.append("<p>Assumptions:</p><ul>" + "".join(f"<li>{esc(a)}</li>" for a in self.assumptions) + "</ul>")
        if len(self.by_item):
            rows = [
                (r.item_id, format_number(r.book_value), format_number(r.audited_value),
                 f"{r.taint:.4f}", int(r.hits), "yes" if r.examined_in_full else "")
                for r in self.by_item.itertuples()
            ]
            out.append(html_table(("item", "book value", "audited value", "taint", "draws", "in full"), rows,
                                  caption="Items with a misstatement"))
        return "".join(out)


# ---------------------------------------------------------------------------
# parameters


def _confidence(confidence: object) -> float:
    if isinstance(confidence, bool) or not isinstance(confidence, Real):
        raise ParameterError("confidence", f"got {confidence!r}; give a probability such as 0.95")
    c = float(confidence)
    if not (0.0 < c < 1.0):
        raise ParameterError("confidence", f"got {confidence!r}; it must lie strictly between 0 and 1 (e.g. 0.95)")
    return c


def _choice(name: str, value: object, allowed: tuple[str, ...]) -> str:
    if value not in allowed:
        raise ParameterError(name, f"must be one of {', '.join(map(repr, allowed))}, got {value!r}")
    return str(value)


def _positive_amount(name: str, value: object) -> float:
    if isinstance(value, bool) or not isinstance(value, Real) or not math.isfinite(float(value)):
        raise ParameterError(name, f"must be a finite number, got {value!r}")
    v = float(value)
    if v <= 0:
        raise ParameterError(name, f"must be above zero, got {value!r}")
    return v


def _count(name: str, value: object) -> int:
    if isinstance(value, bool) or not isinstance(value, Integral):
        raise ParameterError(name, f"must be a whole number of monetary units (int), got {value!r}")
    if int(value) < 1:
        raise ParameterError(name, f"must be at least 1, got {value!r}")
    return int(value)


def _share(share: object) -> float:
    if isinstance(share, bool) or not isinstance(share, Real) or not (0.0 < float(share) < 1.0):
        raise ParameterError("share", f"must lie strictly between 0 and 1, got {share!r}")
    return float(share)


# ---------------------------------------------------------------------------
# the sample


def _rows(mask: np.ndarray) -> list[int]:
    return [spreadsheet_row(i) for i in np.flatnonzero(mask)]


def _flags(raw: pd.Series, table: str, file: str | None) -> np.ndarray:
    """``examined_in_full`` as booleans: True/False, also as text or 1/0 after a round trip through a file."""
    words = {"true": True, "false": False, "1": True, "0": False, "yes": True, "no": False}

    def one(v):
        if isinstance(v, (bool, np.bool_)):
            return bool(v)
        if isinstance(v, (int, np.integer)) and int(v) in (0, 1):
            return bool(v)
        if isinstance(v, (float, np.floating)) and float(v) in (0.0, 1.0):
            return bool(v)
        if isinstance(v, str):
            return words.get(v.strip().lower())
        return None

    values = [one(v) for v in raw.tolist()]
    bad = np.array([v is None for v in values], dtype=bool)
    if bad.any():
        raise InputError(
            "examined_in_full must be True or False for every row (as the selection wrote it)",
            rows=_rows(bad), column="examined_in_full", **({"file": file} if file else {"table": table}),
        )
    return np.array(values, dtype=bool)


def _unit_lists(raw: pd.Series, table: str, file: str | None) -> list[list[int]]:
    """The draw numbers in each row's ``units`` text ("3 17 40"; "" or missing for none)."""
    out, bad = [], []
    for i, v in enumerate(raw.tolist()):
        if v is None or (isinstance(v, float) and math.isnan(v)):
            out.append([])
            continue
        if isinstance(v, (int, np.integer)) and not isinstance(v, bool):
            out.append([int(v)])
            continue
        if isinstance(v, (float, np.floating)) and float(v).is_integer():
            out.append([int(v)])
            continue
        parts = str(v).split()
        if not all(p.isdigit() for p in parts):
            bad.append(i)
            out.append([])
            continue
        out.append([int(p) for p in parts])
    if bad:
        raise InputError(
            "units must list the draw numbers that fell in the item, separated by spaces (e.g. '3 17'), "
            "or be empty",
            rows=[spreadsheet_row(i) for i in bad], column="units",
            **({"file": file} if file else {"table": table}),
        )
    return out


def _not_ours(check: str, mask_or_rows, table: str, file: str | None, column: str | None = None) -> InputError:
    rows = _rows(mask_or_rows) if isinstance(mask_or_rows, np.ndarray) else list(mask_or_rows)
    return InputError(
        f"{_NOT_OURS}: {check}. Evaluate the selection exactly as it was drawn, with audited_value added "
        "(same rows, hits, examined_in_full and units), with the book total and sample size it was drawn for",
        rows=rows, column=column, **({"file": file} if file else {"table": table}),
    )


@dataclass(frozen=True)
class _Checked:
    ids: np.ndarray
    book: np.ndarray
    audited: np.ndarray
    hits: np.ndarray
    in_full: np.ndarray
    units: list[list[int]]
    frame: pd.DataFrame


def _check_sample(sample: object, book_total: float, n: int, table: str, file: str | None) -> _Checked:
    df = require_frame(sample, table, file).reset_index(drop=True)
    require_columns(df, _REQUIRED, table, file, why="a monetary-unit sample is its selection with audited_value added")
    where = {"file": file} if file else {"table": table}
    if len(df) == 0:
        raise InputError("the sample has no rows; a monetary-unit selection has at least one item", **where)
    dup = duplicated_rows(df["item_id"].astype(str).str.strip())
    if dup:
        raise InputError("duplicate item ids; each selected item appears once", rows=dup, column="item_id", **where)
    book = numeric_column(df, "book_value", table, file)
    audited = numeric_column(df, "audited_value", table, file)
    hits_f = numeric_column(df, "hits", table, file)
    bad = (hits_f != np.round(hits_f)) | (hits_f < 0)
    if bad.any():
        raise InputError("hits must be whole numbers, 0 or more", rows=_rows(bad), column="hits", **where)
    hits = hits_f.astype(np.int64)
    in_full = _flags(df["examined_in_full"], table, file)
    units = _unit_lists(df["units"], table, file)

    cents = np.rint(book * 100.0)
    if np.any(cents <= 0):
        raise InputError(
            "book values must be positive (at least half a cent): credits and zero balances are never "
            "selected by monetary unit", rows=_rows(cents <= 0), column="book_value", **where,
        )
    if np.any(audited < 0):
        raise InputError(
            "audited values below zero: the bounds assume no item is overstated by more than its book value "
            "(audited value at least 0, taint at most 100%); check these items, and evaluate them apart if "
            "the audited value is truly negative",
            rows=_rows(audited < 0), column="audited_value", **where,
        )

    # --- does the sample belong to the selection?
    total_cents = round(book_total * 100.0)
    if int(hits.sum()) != n:
        raise _not_ours(
            f"the hits add up to {int(hits.sum()):,}, but sample_size is {n:,} (every draw falls in exactly "
            "one selected item)", [], table, file, column="hits",
        )
    expected_full = cents * n >= total_cents
    wrong = expected_full != in_full
    if wrong.any():
        raise _not_ours(
            "examined_in_full does not match the rule round(book_value * 100) * sample_size >= "
            f"round(book_total * 100) (interval {format_number(book_total / n)})", wrong, table, file,
            column="examined_in_full",
        )
    counts = np.array([len(u) for u in units], dtype=np.int64)
    wrong = counts != hits
    if wrong.any():
        raise _not_ours("the number of draw numbers in units differs from hits", wrong, table, file, column="units")
    idle = (hits == 0) & ~in_full
    if idle.any():
        raise _not_ours(
            "rows with no draw that are not examined in full (the selection holds only items a draw fell in "
            "and items examined in full)", idle, table, file, column="hits",
        )
    flat = np.fromiter((k for u in units for k in u), dtype=np.int64, count=int(counts.sum()))
    owner = np.repeat(np.arange(len(df)), counts)
    out_of_range = (flat < 1) | (flat > n)
    if out_of_range.any():
        raise _not_ours(
            f"draw numbers outside 1..{n:,} in units", np.isin(np.arange(len(df)), owner[out_of_range]),
            table, file, column="units",
        )
    seen = np.bincount(flat, minlength=n + 1)[1:]
    if np.any(seen != 1):
        twice = np.flatnonzero(seen > 1) + 1
        missing = np.flatnonzero(seen == 0) + 1
        parts = []
        if len(twice):
            parts.append(f"draw numbers listed more than once ({', '.join(map(str, twice[:5]))}"
                         f"{' ...' if len(twice) > 5 else ''})")
        if len(missing):
            parts.append(f"draw numbers missing ({', '.join(map(str, missing[:5]))}{' ...' if len(missing) > 5 else ''})")
        rows_mask = np.isin(np.arange(len(df)), owner[np.isin(flat, twice)])
        raise _not_ours(
            "every draw number 1.." + f"{n:,} must appear exactly once across the rows: " + "; ".join(parts),
            rows_mask, table, file, column="units",
        )
    full_cents = float(cents[in_full].sum())
    if full_cents > total_cents or (full_cents == total_cents and np.any(hits[~in_full] > 0)):
        raise _not_ours(
            "the items examined in full hold more book value than the book total given", in_full, table, file,
            column="book_value",
        )
    return _Checked(
        ids=df["item_id"].astype(str).to_numpy(), book=book, audited=audited, hits=hits, in_full=in_full,
        units=units, frame=df,
    )


# ---------------------------------------------------------------------------
# assumptions


def _assumptions(method: str, basis: str, over_one: int) -> tuple[str, ...]:
    out = [
        "No item is overstated by more than its book value: audited values are not below zero, so no taint "
        "exceeds 100%.",
        "The draws that fall outside the items examined in full are independent, and each falls on any "
        "monetary unit of those items with equal probability (the selection rule guarantees it).",
        "Items examined in full add their misstatement exactly (over- and understatements netted).",
        "An understatement never lowers the bound on overstatement: understatement taints count as zero "
        "there (the conservative rule).",
        "The separate bound on understatement assumes no item is understated by more than its book value "
        "(audited value at most twice the book value).",
    ]
    out.append("The sample size was fixed before any audited value was seen (a sample extended because of "
               "the results found is outside the guarantee).")
    if method == "stringer":
        factors = ("Poisson factors (gamma quantiles)" if basis == "poisson"
                   else "binomial factors (Clopper-Pearson limits)")
        out.append(f"Stringer's rule with {factors}; its confidence has no general proof and rests on "
                   "published simulations and auditmean's coverage tests.")
    if method in ("betting", "count_or_betting"):
        out.append("The betting bound takes the draws in the order they were drawn (the draw numbers in "
                   "units).")
    if over_one:
        out.append(f"{over_one:,} draw{'s have' if over_one > 1 else ' has'} an understatement taint above "
                   "100% (audited value more than twice the book value): outside the assumption of the "
                   "understatement bound, which is therefore not formed.")
    return tuple(out)


# ---------------------------------------------------------------------------
# public


def monetary_unit_bound(
    sample: pd.DataFrame,
    book_total: float,
    sample_size: int,
    confidence: float = 0.95,
    method: str = "stringer",
    *,
    basis: str = "poisson",
    share: float | None = None,
    sample_file: str | None = None,
) -> MonetaryUnitBound:
    """Projected misstatement and upper bounds of a monetary-unit sample.

    Parameters
    ----------
    sample:
        The selection from :func:`auditmean.select_monetary_units` with an
        ``audited_value`` column added: at least ``item_id``, ``book_value``,
        ``hits``, ``examined_in_full``, ``units`` and ``audited_value``.
    book_total:
        The positive book total ``B`` the selection was drawn from
        (``attrs["monetary_units"]["book_total"]``).
    sample_size:
        ``n``, the number of monetary units drawn.
    confidence:
        One-sided confidence of the bounds, strictly between 0 and 1
        (``1 -`` the risk of incorrect acceptance).
    method:
        ``"stringer"`` (default), ``"count"``, ``"betting"`` or
        ``"count_or_betting"``; see the module docstring and
        :mod:`auditmean.core.monetary`.
    basis:
        Factors of the Stringer bound: ``"poisson"`` (default) or
        ``"binomial"``.
    share:
        For ``"count_or_betting"``: the share of the risk given to the error
        count (default :data:`auditmean.core.monetary.DEFAULT_SHARE`).
    sample_file:
        The file the sample came from, named in error messages.

    Returns
    -------
    MonetaryUnitBound

    Raises
    ------
    ParameterError
        ``confidence`` outside (0, 1), an unknown ``method`` or ``basis``, a
        non-positive ``book_total``, ``sample_size`` not a whole number of at
        least 1.
    InputError
        Missing columns or values; audited values below zero (rows named);
        book values not positive; a sample that does not belong to the
        selection (which check failed, and the rows).

    Notes
    -----
    Each draw's taint is ``t = (book - audited) / book`` of the item it fell
    in. Items examined in full add their exact net misstatement
    ``exact_in_full``. The ``n_r`` draws in the other items (book value
    ``B_r = B -`` those in full) give

    * ``projected = exact_in_full + B_r * mean(t)``;
    * ``upper = exact_in_full + B_r * U``, ``U`` the method's upper bound on
      the mean of ``max(t, 0)`` per monetary unit;
    * ``understatement_upper = -exact_in_full + B_r * U'``, ``U'`` the same
      method's bound on the mean of ``max(-t, 0)``.

    The draws are taken in the order of their draw numbers.

    Examples
    --------
    >>> import pandas as pd
    >>> s = pd.DataFrame({"item_id": ["A", "B"], "book_value": [300.0, 200.0], "hits": [1, 1],
    ...                   "examined_in_full": [False, False], "units": ["1", "2"],
    ...                   "audited_value": [300.0, 200.0]})
    >>> r = monetary_unit_bound(s, 10_000.0, 2)
    >>> round(r.upper, 2)  # 10,000 x min(1, F(0) / 2), F(0) = 3.00: two draws can exclude nothing
    10000.0
    >>> round(monetary_unit_bound(s, 10_000.0, 2, method="count").upper, 2)  # 10,000 x (1 - 0.05 ** 0.5)
    7763.93
    """
    conf = _confidence(confidence)
    method = _choice("method", method, METHODS)
    basis = _choice("basis", basis, core.BASES)
    w = core.DEFAULT_SHARE if share is None else _share(share)
    B = _positive_amount("book_total", book_total)
    n = _count("sample_size", sample_size)
    if n > round(B * 100):
        raise ParameterError("sample_size", f"{n:,} draws exceed the {round(B * 100):,} cents of the book total")
    s = _check_sample(sample, B, n, "sample", sample_file)

    misstatement = s.book - s.audited
    taint = misstatement / s.book
    exact_in_full = float(math.fsum(misstatement[s.in_full]))
    under_in_full = float(math.fsum(np.maximum(-misstatement[s.in_full], 0.0)))
    remainder_total = (round(B * 100) - float(np.rint(s.book[s.in_full] * 100).sum())) / 100.0

    # Taints of the draws in the remainder, in draw order.
    by_draw = np.full(n, np.nan)
    rest = np.flatnonzero(~s.in_full)
    counts = s.hits[rest]
    if counts.sum():
        numbers = np.fromiter((k for i in rest for k in s.units[i]), dtype=np.int64, count=int(counts.sum()))
        by_draw[numbers - 1] = np.repeat(taint[rest], counts)
    drawn = by_draw[~np.isnan(by_draw)]
    n_r = int(drawn.size)
    over = core.overstatement_values(drawn)
    under = core.understatement_values(drawn)
    options = {"basis": basis, "share": w}
    u_over = float(core.mean_taint_upper(over, conf, method, **options)) if remainder_total > 0 else 0.0
    over_one = int(np.sum(under > 1.0))
    if remainder_total <= 0:
        u_under = 0.0
    elif over_one:
        u_under = math.nan
    else:
        u_under = float(core.mean_taint_upper(under, conf, method, **options))
    mean_taint = float(drawn.mean()) if n_r else 0.0
    mean_under = float(under.mean()) if n_r else 0.0

    found = misstatement != 0
    by_item = pd.DataFrame(
        {
            "item_id": s.ids[found],
            "book_value": s.book[found],
            "audited_value": s.audited[found],
            "misstatement": misstatement[found],
            "taint": taint[found],
            "hits": s.hits[found],
            "examined_in_full": s.in_full[found],
            "units": [" ".join(map(str, s.units[i])) for i in np.flatnonzero(found)],
        }
    )
    return MonetaryUnitBound(
        method=method,
        confidence=conf,
        upper=exact_in_full + remainder_total * u_over,
        projected=exact_in_full + remainder_total * mean_taint,
        understatement_upper=-exact_in_full + remainder_total * u_under,
        projected_understatement=under_in_full + remainder_total * mean_under,
        exact_in_full=exact_in_full,
        book_total=B,
        remainder_total=remainder_total,
        sample_size=n,
        draws=n_r,
        errors=int(np.sum(drawn > 0)),
        understatement_errors=int(np.sum(drawn < 0)),
        mean_taint=mean_taint,
        upper_mean_taint=u_over,
        understatement_upper_mean_taint=u_under,
        items=len(s.book),
        items_in_full=int(s.in_full.sum()),
        basis=basis,
        share=w if method == "count_or_betting" else math.nan,
        assumptions=_assumptions(method, basis, over_one),
        guarantee=_NO_PROOF if method == "stringer" else _FINITE,
        by_item=by_item,
    )


def monetary_unit_sample_size(
    book_total: float,
    tolerable: float,
    expected: float = 0.0,
    risk_incorrect_acceptance: float = 0.05,
    basis: str = "poisson",
) -> int:
    """Number of monetary units to draw for a tolerable and an expected misstatement.

    The smallest ``n`` with ``book_total * F(n * expected / book_total) / n
    <= tolerable``, ``F`` the Poisson confidence factor at ``1 -
    risk_incorrect_acceptance`` interpolated by the gamma quantile (the
    expansion for expected misstatement; Leslie, Teitlebaum and Anderson
    1979); ``basis="binomial"`` uses the Clopper-Pearson (beta) analogue.
    See :func:`auditmean.core.monetary.sample_size`.

    Parameters
    ----------
    book_total:
        The positive book total the monetary units are drawn from.
    tolerable, expected:
        Tolerable misstatement (above 0) and expected misstatement
        (0 or more, below tolerable).
    risk_incorrect_acceptance:
        Strictly between 0 and 1 (e.g. 0.05).
    basis:
        ``"poisson"`` (default) or ``"binomial"``.

    Examples
    --------
    >>> monetary_unit_sample_size(500_000, 25_000)   # 500,000 x 3.00 / 25,000 = 59.9
    60
    """
    B = _positive_amount("book_total", book_total)
    tm = _positive_amount("tolerable", tolerable)
    if isinstance(expected, bool) or not isinstance(expected, Real) or not math.isfinite(float(expected)):
        raise ParameterError("expected", f"must be a finite number, got {expected!r}")
    em = float(expected)
    if em < 0:
        raise ParameterError("expected", f"must not be below zero, got {expected!r}")
    if em >= tm:
        raise ParameterError(
            "expected", f"the expected misstatement ({format_number(em)}) must be below the tolerable "
            f"misstatement ({format_number(tm)}); no sample size can then support the conclusion",
        )
    if isinstance(risk_incorrect_acceptance, bool) or not isinstance(risk_incorrect_acceptance, Real) or not (
        0.0 < float(risk_incorrect_acceptance) < 1.0
    ):
        raise ParameterError(
            "risk_incorrect_acceptance",
            f"got {risk_incorrect_acceptance!r}; it must lie strictly between 0 and 1 (e.g. 0.05)",
        )
    basis = _choice("basis", basis, core.BASES)
    return core.sample_size(B, tm, em, 1.0 - float(risk_incorrect_acceptance), basis)
