"""``stratify``: divide a population's items into strata by book value.

The public entry validates the items once, separates the top stratum
(examined in full), the credits and the zeros, divides the remaining items
by one of the boundary rules of :mod:`auditmean.core.boundaries` (or by the
strata the population file assigns), and returns a :class:`Strata` record
holding every stratum's statistics. Planning (:func:`auditmean.plan.plan_sample`)
reads only those statistics, never the items, so changing a planning
parameter is fast whatever the population's size.

Boundary convention: stratum ``h`` holds the book values ``x`` with
``b_{h-1} <= x < b_h``; a value equal to a boundary goes to the stratum
above; the top stratum holds every item at or above the top cutoff.

Items are never dropped: credits (negative book values) and zeros go to
strata of their own unless asked otherwise, and every stratum's count is in
the record.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field
from numbers import Integral, Real
from typing import Any, ClassVar

import numpy as np
import pandas as pd

from auditmean._frames import duplicated_rows, label_column, numeric_column, require_columns
from auditmean._records import (
    RecordMixin,
    format_number,
    html_table,
    text_table,
)
from auditmean.core import boundaries as bnd
from auditmean.core import sizing as sz
from auditmean.errors import InputError, ParameterError, spreadsheet_row
from auditmean.population import Population

__all__ = [
    "METHODS",
    "TOP_LABEL",
    "CREDITS_LABEL",
    "ZEROS_LABEL",
    "Strata",
    "stratify",
]

#: Boundary rules :func:`stratify` offers.
METHODS = ("cumulative_sqrt", "geometric", "equal_value", "boundaries", "optimal")

#: Labels of the strata kept apart from the rule's strata "1", "2", ...
TOP_LABEL = "top"
CREDITS_LABEL = "credits"
ZEROS_LABEL = "zeros"
_RESERVED = (TOP_LABEL, CREDITS_LABEL, ZEROS_LABEL)

#: Kinds of strata in the ``kind`` column of :attr:`Strata.table`.
KIND_TOP = "top"
KIND_CREDITS = "credits"
KIND_ZEROS = "zeros"
KIND_RANGE = "range"
KIND_PREASSIGNED = "preassigned"

_POLICIES = ("separate", "include")
_DEFAULT_STRATA = 5

TABLE_COLUMNS = (
    "stratum",
    "kind",
    "count",
    "book_total",
    "mean",
    "std_dev",
    "skewness",
    "min_book",
    "max_book",
)


@dataclass(frozen=True, eq=False)
class Strata(RecordMixin):
    """A population divided into strata, with every stratum's book-value statistics.

    Attributes
    ----------
    method:
        The rule used: one of :data:`METHODS`, or ``"preassigned"``.
    n_strata:
        Number of strata formed by the rule (or preassigned), not counting
        the top, credits and zeros strata.
    boundaries:
        Interior boundaries between the rule's strata ``"1"``, ``"2"``, ...
        (``b_{h-1} <= x < b_h``); empty for preassigned strata.
    top_cutoff:
        Smallest book value of the top stratum (every item at or above it is
        examined in full), or ``None`` when there is no top stratum.
    top_rule:
        How the cutoff was set, in words.
    credits, zeros:
        ``"separate"`` (own stratum) or ``"include"`` (divided with the rest).
    table:
        One row per stratum, in the order credits, zeros, the rule's strata
        by book value (or preassigned strata by label), top. Columns
        ``stratum`` (label, text), ``kind`` (``"credits"``, ``"zeros"``,
        ``"range"``, ``"preassigned"``, ``"top"``), ``count``,
        ``book_total`` (correctly rounded sum), ``mean``, ``std_dev``
        (divisor ``N_h - 1``; NaN for one item), ``skewness`` (``G1``; NaN
        below three items), ``min_book``, ``max_book``.
    labels:
        Stratum labels in table order.
    codes:
        For each item, in the order of the input rows, the position of its
        stratum in ``labels`` (int64).
    item_ids, book_values:
        The items as given, aligned with ``codes``: the ids as an array of
        text (for a Population, its own arrow-backed column, not copied),
        the book values as float64.
    parameters:
        The arguments of :func:`stratify` that shaped the strata.
    details:
        What the optimal method found (empty for the other rules).
    notes:
        Plain sentences about choices the data forced (ties at the top
        cutoff, preassigned labels overridden by the top stratum, ...).

    Notes
    -----
    ``to_dict()`` keeps everything but the item-level arrays (``codes``,
    ``item_ids``, ``book_values``); :meth:`assignment_frame` gives those as
    a table to save beside it.
    """

    record_kind: ClassVar[str] = "strata"

    method: str
    n_strata: int
    boundaries: tuple[float, ...]
    top_cutoff: float | None
    top_rule: str
    credits: str
    zeros: str
    table: pd.DataFrame
    labels: tuple[str, ...]
    codes: np.ndarray = field(repr=False)
    item_ids: Any = field(repr=False)
    book_values: np.ndarray = field(repr=False)
    parameters: dict[str, Any] = field(default_factory=dict)
    details: dict[str, Any] = field(default_factory=dict)
    notes: tuple[str, ...] = ()

    # --- convenience ------------------------------------------------------
    @property
    def item_count(self) -> int:
        """Number of items in the population."""
        return int(self.codes.size)

    @property
    def book_total(self) -> float:
        """Book total of the population (sum of the strata's correctly rounded totals)."""
        return math.fsum(self.table["book_total"].to_numpy(dtype=float))

    def count_of(self, kind: str) -> int:
        """Items in strata of one kind (``"top"``, ``"credits"``, ``"zeros"``, ``"range"``, ``"preassigned"``)."""
        t = self.table
        return int(t.loc[t["kind"] == kind, "count"].sum())

    @property
    def assignment(self) -> pd.Series:
        """Each item's stratum label, in the order of the input rows (categorical Series named ``stratum``)."""
        cat = pd.Categorical.from_codes(self.codes, categories=list(self.labels))
        return pd.Series(cat, name="stratum")

    def assignment_frame(self) -> pd.DataFrame:
        """Items with their stratum: columns ``item_id``, ``book_value``, ``stratum`` (text), input row order."""
        return pd.DataFrame(
            {
                "item_id": self.item_ids,
                "book_value": self.book_values,
                "stratum": np.asarray(self.labels, dtype=object)[self.codes],
            }
        )

    # --- records ------------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        out = self._dict_of(
            ("method", "n_strata", "boundaries", "top_cutoff", "top_rule", "credits", "zeros")
            + ("table", "labels", "parameters", "details", "notes")
        )
        out["item_count"] = self.item_count
        return out

    def _rows(self) -> list[list[str]]:
        rows = []
        for r in self.table.itertuples(index=False):
            rows.append(
                [
                    r.stratum,
                    r.kind,
                    format_number(int(r.count)),
                    format_number(r.book_total),
                    format_number(r.mean),
                    format_number(r.std_dev),
                    format_number(r.skewness, 2),
                    format_number(r.min_book),
                    format_number(r.max_book),
                ]
            )
        return rows

    _HEADER: ClassVar[tuple[str, ...]] = (
        "stratum",
        "kind",
        "items",
        "book total",
        "mean",
        "std dev",
        "skewness",
        "smallest",
        "largest",
    )

    def _lines(self) -> list[str]:
        lines = [
            f"Strata by {self.method.replace('_', ' ')}: {self.item_count:,} items, "
            f"book total {format_number(self.book_total)}",
        ]
        if self.boundaries:
            lines.append("Boundaries (b_{h-1} <= x < b_h): " + ", ".join(format_number(b) for b in self.boundaries))
        if self.top_cutoff is not None:
            lines.append(
                f"Top stratum: {self.count_of(KIND_TOP):,} items at or above "
                f"{format_number(self.top_cutoff)} ({self.top_rule}), examined in full"
            )
        else:
            lines.append("No top stratum")
        lines.append(
            f"Credits: {self.count_of(KIND_CREDITS):,} items kept apart"
            if self.credits == "separate"
            else "Credits: divided with the other items"
        )
        lines.append(
            f"Zeros: {self.count_of(KIND_ZEROS):,} items kept apart"
            if self.zeros == "separate"
            else "Zeros: divided with the other items"
        )
        return lines

    def summary(self) -> str:
        parts = self._lines() + ["", text_table(self._HEADER, self._rows())]
        if self.notes:
            parts += [""] + [f"Note: {n}" for n in self.notes]
        return "\n".join(parts)

    def _html_body(self) -> str:
        esc = html.escape
        head = "".join(f"<p>{esc(line)}</p>" for line in self._lines())
        notes = "".join(f"<p>Note: {esc(n)}</p>" for n in self.notes)
        return head + html_table(self._HEADER, self._rows(), caption="Strata") + notes


# ---------------------------------------------------------------------------
# validation at the boundary
# ---------------------------------------------------------------------------


def _items(population: object) -> tuple[pd.DataFrame, str]:
    """The items table of a Population (duck-typed on ``.items``), a DataFrame, or book values."""
    items = getattr(population, "items", None)
    if isinstance(items, pd.DataFrame):
        return items, "population"
    if isinstance(population, pd.DataFrame):
        return population, "population"
    if isinstance(population, (np.ndarray, pd.Series, list, tuple)):
        values = np.asarray(population)
        if values.ndim != 1:
            raise InputError(f"book values must be one-dimensional, got shape {values.shape}", table="book values")
        ids = [str(i + 1) for i in range(values.size)]
        return pd.DataFrame({"item_id": ids, "book_value": values}), "book values"
    raise InputError(
        "expected a Population, a DataFrame with columns 'item_id' and 'book_value', "
        f"or an array of book values; got {type(population).__name__}",
        table="population",
    )


def _item_ids(df: pd.DataFrame, table: str) -> np.ndarray:
    ids = label_column(df, "item_id", table)
    if pd.api.types.is_integer_dtype(ids.dtype):
        ids = ids.astype(str)  # whole numbers write back exactly
    elif not (isinstance(ids.dtype, pd.StringDtype) or ids.dtype == object):
        raise InputError(
            f"item ids must be text as written in the population file (or whole numbers), got {ids.dtype} values",
            table=table,
            column="item_id",
        )
    elif ids.dtype == object:  # a string dtype holds only text; an object column may hold anything
        not_text = ~ids.map(lambda v: isinstance(v, str)).to_numpy(dtype=bool)
        if not_text.any():
            raise InputError(
                "item ids must be text as written in the population file (or whole numbers)",
                table=table,
                column="item_id",
                rows=[spreadsheet_row(i) for i in np.flatnonzero(not_text)],
            )
    dup = duplicated_rows(ids)
    if dup:
        raise InputError("duplicate item ids; each item must appear once", table=table, column="item_id", rows=dup)
    return ids.to_numpy(dtype=object)


def _preassigned(df: pd.DataFrame, table: str) -> np.ndarray:
    require_columns(df, ["preassigned_stratum"], table, why="use_preassigned=True")
    s = label_column(df, "preassigned_stratum", table)
    if pd.api.types.is_float_dtype(s.dtype):
        v = s.to_numpy(dtype=float)
        if np.all(v == np.round(v)):  # 1.0 read from a file is stratum "1"
            s = pd.Series(v.astype(np.int64))
    labels = s.astype(str).str.strip().to_numpy(dtype=object)
    reserved = np.isin(labels, _RESERVED)
    if reserved.any():
        raise InputError(
            f"the labels {', '.join(repr(r) for r in _RESERVED)} are kept for strata auditmean forms; "
            "rename these preassigned strata",
            table=table,
            column="preassigned_stratum",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(reserved)],
        )
    return labels


def _choice(name: str, value: object, allowed: tuple[str, ...]) -> str:
    if value not in allowed:
        raise ParameterError(name, f"must be one of {', '.join(repr(a) for a in allowed)}, got {value!r}")
    return str(value)


def _whole(name: str, value: object, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, Integral) or int(value) < minimum:
        raise ParameterError(name, f"must be a whole number of at least {minimum}, got {value!r}")
    return int(value)


def _amount(name: str, value: object, *, positive: bool = True) -> float:
    if isinstance(value, bool) or not isinstance(value, Real) or not math.isfinite(float(value)):
        raise ParameterError(name, f"must be a finite number, got {value!r}")
    v = float(value)
    if positive and v <= 0:
        raise ParameterError(name, f"must be above 0, got {value!r}")
    return v


def _risk(name: str, value: object) -> float:
    if isinstance(value, bool) or not isinstance(value, Real) or not (0.0 < float(value) < 1.0):
        raise ParameterError(name, f"must be a probability strictly between 0 and 1, got {value!r}")
    return float(value)


def _natural_order(labels: list[str]) -> list[str]:
    """Numbers by value first (``"2"`` before ``"10"``), then text in code-point order."""

    def key(s: str) -> tuple[int, float, str]:
        try:
            v = float(s)
        except ValueError:
            return (1, 0.0, s)
        return (0, v, s) if math.isfinite(v) else (1, 0.0, s)

    return sorted(labels, key=key)


# ---------------------------------------------------------------------------
# stratify
# ---------------------------------------------------------------------------


def stratify(
    population: object,
    *,
    method: str | None = None,
    n_strata: int | None = None,
    top_cutoff: float | None = None,
    top_items: int | None = None,
    boundaries: list[float] | tuple[float, ...] | np.ndarray | None = None,
    credits: str = "separate",
    zeros: str = "separate",
    use_preassigned: bool = False,
    n_classes: int = bnd.DEFAULT_CLASSES,
    tolerable: float | None = None,
    expected: float = 0.0,
    risk_incorrect_acceptance: float = 0.10,
    risk_incorrect_rejection: float | None = None,
    seed: int = 0,
) -> Strata:
    """Divide the items into strata by book value.

    Parameters
    ----------
    population:
        A Population (anything with an ``items`` DataFrame), a DataFrame
        with columns ``item_id`` and ``book_value`` (and
        ``preassigned_stratum`` when ``use_preassigned``), or a 1-D array of
        book values (item ids are then ``"1"``, ``"2"``, ... by position).
    method:
        The rule for the items outside the top, credits and zeros strata:

        ``"cumulative_sqrt"`` (default)
            Dalenius and Hodges' cumulative square-root-of-frequency rule on
            ``n_classes`` equal-width classes
            (:func:`auditmean.core.boundaries.cumulative_sqrt_frequency`).
        ``"geometric"``
            Gunning and Horgan's geometric boundaries (positive values only).
        ``"equal_value"``
            about the same book total in each stratum (values not negative).
        ``"boundaries"``
            the ``boundaries`` given (inferred when only ``boundaries`` is given).
        ``"optimal"``
            boundaries minimising the total sample size for the precision
            that ``tolerable``, ``expected`` and the risks ask for
            (:func:`auditmean.core.boundaries.optimal_boundaries`); never
            more items than the cumulative square-root rule on the same
            items and target. With no ``top_cutoff`` or ``top_items`` it
            chooses the top cutoff too.
    n_strata:
        Number of strata the rule forms (default 5), not counting the top,
        credits and zeros strata. An error when the rule cannot form that
        many non-empty strata on these values.
    top_cutoff:
        Book value from which items are examined in full (for example the
        tolerable misstatement); must be above 0.
    top_items:
        Alternatively, the number ``k`` of largest items to examine in full;
        items equal to the ``k``-th largest value join them (noted).
    boundaries:
        Interior boundaries for ``method="boundaries"``: increasing, each
        above the smallest and at most the largest value divided.
    credits, zeros:
        ``"separate"`` (default): negative book values, and zero book
        values, each form a stratum of their own. ``"include"``: they are
        divided with the other items (not possible with ``"geometric"``,
        nor credits with ``"equal_value"``).
    use_preassigned:
        Take the strata from the column ``preassigned_stratum`` instead of a
        rule (every item needs one; the top, credits and zeros strata still
        come first). ``method`` must then be left out.
    n_classes:
        Classes of the cumulative square-root rule (default 100).
    tolerable, expected, risk_incorrect_acceptance, risk_incorrect_rejection:
        The precision target of ``method="optimal"`` (see
        :func:`auditmean.plan.sample_size`); book values stand in for the
        audited values.
    seed:
        Seed of the random search of ``method="optimal"``.

    Returns
    -------
    Strata

    Raises
    ------
    InputError
        Missing columns, non-numeric or non-finite book values, blank or
        duplicate item ids, missing or reserved preassigned labels (rows in
        spreadsheet numbering).
    ParameterError
        Any parameter outside what is accepted, or a rule that cannot form
        ``n_strata`` non-empty strata.
    """
    df, table = _items(population)
    if isinstance(population, Population):
        # checked once, when it was loaded: its values and unique ids as loaded
        x = population.book_values
        ids = population.items["item_id"].array
    else:
        require_columns(df, ["item_id", "book_value"], table, why="needed to stratify")
        x = numeric_column(df, "book_value", table)
        ids = _item_ids(df, table)
    credits = _choice("credits", credits, _POLICIES)
    zeros = _choice("zeros", zeros, _POLICIES)
    n_classes = _whole("n_classes", n_classes, 2)
    if not isinstance(use_preassigned, bool):
        raise ParameterError("use_preassigned", f"must be True or False, got {use_preassigned!r}")

    if use_preassigned:
        if method is not None or boundaries is not None or n_strata is not None:
            raise ParameterError(
                "method" if method is not None else ("boundaries" if boundaries is not None else "n_strata"),
                "leave it out with use_preassigned=True: the strata come from 'preassigned_stratum'",
            )
        method = "preassigned"
        pre = _preassigned(df, table)
    else:
        if method is None:
            method = "boundaries" if boundaries is not None else "cumulative_sqrt"
        method = _choice("method", method, METHODS)
        if (boundaries is not None) != (method == "boundaries"):
            raise ParameterError(
                "boundaries",
                "give boundaries exactly when method='boundaries'"
                if boundaries is None
                else f"boundaries are only used with method='boundaries', not {method!r}",
            )
        pre = None

    if method != "optimal" and tolerable is not None:
        raise ParameterError("tolerable", f"is only used by method='optimal', not {method!r}")

    # --- top stratum --------------------------------------------------------
    notes: list[str] = []
    if top_cutoff is not None and top_items is not None:
        raise ParameterError("top_items", "give top_cutoff or top_items, not both")
    top_mask = np.zeros(x.size, dtype=bool)
    cutoff: float | None = None
    top_rule = "none"
    if top_cutoff is not None:
        cutoff = _amount("top_cutoff", top_cutoff)
        top_mask = x >= cutoff
        top_rule = "items at or above the amount given"
    elif top_items is not None:
        k = _whole("top_items", top_items, 1)
        n_pos = int(np.count_nonzero(x > 0))
        if k > n_pos:
            raise ParameterError("top_items", f"asks for the {k:,} largest items but only {n_pos:,} are positive")
        cutoff = float(np.partition(x, x.size - k)[x.size - k])
        top_mask = x >= cutoff
        top_rule = f"the {k:,} largest items"
        extra = int(top_mask.sum()) - k
        if extra > 0:
            notes.append(
                f"{extra:,} more item{'s' if extra > 1 else ''} equal to the {k:,}-th largest book value "
                f"({format_number(cutoff)}) joined the top stratum"
            )

    credit_mask = (x < 0) & ~top_mask if credits == "separate" else np.zeros(x.size, dtype=bool)
    zero_mask = (x == 0) & ~top_mask if zeros == "separate" else np.zeros(x.size, dtype=bool)

    # --- the rule's strata ----------------------------------------------------
    rest = ~(top_mask | credit_mask | zero_mask)
    details: dict[str, Any] = {}
    cuts: np.ndarray = np.empty(0)
    parameters: dict[str, Any] = {
        # recorded so that stratify(population, **parameters) makes the same strata again
        "method": None if use_preassigned else method,
        "n_strata": n_strata,
        "top_cutoff": top_cutoff,
        "top_items": top_items,
        "credits": credits,
        "zeros": zeros,
        "use_preassigned": use_preassigned,
    }
    if pre is not None:
        if np.any(top_mask):
            moved = np.unique(pre[top_mask])
            notes.append(
                f"{int(top_mask.sum()):,} items with a preassigned stratum are at or above the top cutoff "
                f"and were put in the top stratum (their preassigned strata: {', '.join(moved[:5])}"
                f"{' ...' if moved.size > 5 else ''})"
            )
        rest_labels = _natural_order(list(pd.unique(pre[rest]))) if rest.any() else []
        index = {lab: i for i, lab in enumerate(rest_labels)}
        rest_codes = np.fromiter((index[v] for v in pre[rest]), dtype=np.int64, count=int(rest.sum()))
        rule_labels = rest_labels
        rule_kind = KIND_PREASSIGNED
        n_formed = len(rest_labels)
    else:
        n_req = _DEFAULT_STRATA if n_strata is None else _whole("n_strata", n_strata, 1)
        xr = x[rest]
        if method == "boundaries":
            cuts = _check_boundaries(boundaries, xr)
            if n_strata is not None and n_req != cuts.size + 1:
                raise ParameterError(
                    "n_strata", f"is {n_req} but {cuts.size} boundaries make {cuts.size + 1} strata; leave it out"
                )
            n_req = cuts.size + 1
            parameters["boundaries"] = [float(c) for c in cuts]
        parameters["n_strata"] = n_req
        if xr.size == 0:
            notes.append("no items are left for the rule once the top, credits and zeros strata are formed")
            n_req = 0
        elif method == "cumulative_sqrt":
            parameters["n_classes"] = n_classes
            cuts = bnd.cumulative_sqrt_frequency(xr, n_req, n_classes)
        elif method == "geometric":
            if np.any(xr <= 0):
                which = "zeros" if np.all(xr >= 0) else "credits"
                raise ParameterError(
                    which,
                    "geometric boundaries need positive book values; keep credits and zeros apart "
                    "(credits='separate', zeros='separate')",
                )
            cuts = bnd.geometric(xr, n_req)
        elif method == "equal_value":
            if np.any(xr < 0):
                raise ParameterError(
                    "credits", "equal book-value strata need book values that are not negative; use credits='separate'"
                )
            cuts = bnd.equal_value(xr, n_req)
        elif method == "optimal":
            parameters.update(
                n_classes=n_classes,
                tolerable=tolerable,
                expected=expected,
                risk_incorrect_acceptance=risk_incorrect_acceptance,
                risk_incorrect_rejection=risk_incorrect_rejection,
                seed=seed,
            )
            cuts, found_cutoff, details = _optimal(
                x,
                rest,
                credit_mask,
                zero_mask,
                n_req,
                n_classes,
                top_cutoff=cutoff,
                tolerable=tolerable,
                expected=expected,
                ria=risk_incorrect_acceptance,
                rir=risk_incorrect_rejection,
                seed=seed,
            )
            if found_cutoff is not None:
                cutoff = found_cutoff
                top_rule = "chosen by the optimal method"
                top_mask = rest & (x >= cutoff)
                rest = rest & ~top_mask
                xr = x[rest]
        rest_codes = bnd.assign(xr, cuts) if xr.size else np.empty(0, dtype=np.int64)
        counts = np.bincount(rest_codes, minlength=cuts.size + 1) if xr.size else np.zeros(0)
        n_formed = int(np.count_nonzero(counts))
        if xr.size and (n_formed < n_req or cuts.size + 1 != n_req):
            raise ParameterError(
                "n_strata",
                f"the {method.replace('_', ' ')} rule can form only {n_formed} non-empty strata from these "
                f"{xr.size:,} book values, not {n_req}; ask for fewer strata"
                + (", use more classes (n_classes)" if method in ("cumulative_sqrt", "optimal") else "")
                + (", or give other boundaries" if method == "boundaries" else "")
                + " or a different top stratum",
            )
        rule_labels = [str(h + 1) for h in range(n_req)]
        rule_kind = KIND_RANGE

    # --- labels and codes -------------------------------------------------------
    labels: list[str] = []
    kinds: list[str] = []
    codes = np.empty(x.size, dtype=np.int64)
    if credit_mask.any():
        codes[credit_mask] = len(labels)
        labels.append(CREDITS_LABEL)
        kinds.append(KIND_CREDITS)
    if zero_mask.any():
        codes[zero_mask] = len(labels)
        labels.append(ZEROS_LABEL)
        kinds.append(KIND_ZEROS)
    if rest.any():
        codes[rest] = len(labels) + rest_codes
        labels += rule_labels
        kinds += [rule_kind] * len(rule_labels)
    if top_mask.any():
        codes[top_mask] = len(labels)
        labels.append(TOP_LABEL)
        kinds.append(KIND_TOP)
    elif cutoff is not None:
        notes.append(f"no item is at or above the top cutoff {format_number(cutoff)}; there is no top stratum")
        cutoff = None
        top_rule = "none"

    stats = bnd.stratum_statistics(x, codes, len(labels))
    table_df = pd.DataFrame(
        {
            "stratum": pd.Series(labels, dtype=object),
            "kind": pd.Series(kinds, dtype=object),
            "count": stats.count.astype(np.int64),
            "book_total": stats.total,
            "mean": stats.mean,
            "std_dev": stats.std_dev,
            "skewness": stats.skewness,
            "min_book": stats.minimum,
            "max_book": stats.maximum,
        }
    )
    return Strata(
        method=method,
        n_strata=int(n_formed),
        boundaries=tuple(float(b) for b in cuts),
        top_cutoff=cutoff,
        top_rule=top_rule,
        credits=credits,
        zeros=zeros,
        table=table_df,
        labels=tuple(labels),
        codes=codes,
        item_ids=ids,
        book_values=x,
        parameters=parameters,
        details=details,
        notes=tuple(notes),
    )


def _check_boundaries(boundaries: object, values: np.ndarray) -> np.ndarray:
    try:
        b = np.asarray(boundaries, dtype=float).ravel()
    except (TypeError, ValueError):
        raise ParameterError("boundaries", f"must be a list of numbers, got {boundaries!r}") from None
    if not np.all(np.isfinite(b)):
        raise ParameterError("boundaries", "must be finite numbers")
    if b.size and not np.all(np.diff(b) > 0):
        raise ParameterError("boundaries", f"must increase strictly, got {b.tolist()}")
    if b.size and values.size:
        lo, hi = float(values.min()), float(values.max())
        outside = b[(b <= lo) | (b > hi)]
        if outside.size:
            raise ParameterError(
                "boundaries",
                f"{', '.join(format_number(v) for v in outside)} outside the book values divided "
                f"(each boundary must be above {format_number(lo)} and at most {format_number(hi)}, "
                "or a stratum would be empty)",
            )
    return b


def _optimal(
    x, rest, credit_mask, zero_mask, n_req, n_classes, *, top_cutoff, tolerable, expected, ria, rir, seed
) -> tuple[np.ndarray, float | None, dict[str, Any]]:
    """Validate the precision target and run :func:`auditmean.core.boundaries.optimal_boundaries`.

    ``details`` reports ``start_size`` and ``size``: the total sample size
    (not rounded, Neyman allocation, no minimum) of the cumulative
    square-root rule's design and of the design returned, both counting the
    top stratum in full.
    """
    search_top = top_cutoff is None
    if tolerable is None:
        raise ParameterError("tolerable", "method='optimal' needs the tolerable misstatement (an amount)")
    tm = _amount("tolerable", tolerable)
    em = _amount("expected", expected, positive=False)
    if em < 0:
        raise ParameterError("expected", f"must not be negative, got {expected!r}")
    if not tm > em:
        raise ParameterError("tolerable", f"must exceed the expected misstatement ({format_number(em)})")
    ria = _risk("risk_incorrect_acceptance", ria)
    z_r = sz.z_rejection(None if rir is None else _risk("risk_incorrect_rejection", rir))
    if isinstance(seed, bool) or not isinstance(seed, Integral):
        raise ParameterError("seed", f"must be a whole number, got {seed!r}")
    se = sz.target_std_error(tm, em, sz.z_acceptance(ria), z_r)
    xr = x[rest]
    start = bnd.cumulative_sqrt_frequency(xr, n_req, n_classes)
    start_codes = bnd.assign(xr, start)
    start_counts = np.bincount(start_codes, minlength=start.size + 1)
    if start.size + 1 != n_req or np.any(start_counts < 1):
        raise ParameterError(
            "n_strata",
            f"the optimal method starts from the cumulative square-root rule, which can form only "
            f"{int(np.count_nonzero(start_counts))} non-empty strata from these {xr.size:,} book values, "
            f"not {n_req}; ask for fewer strata, use more classes (n_classes) or a different top stratum",
        )
    others_n, others_s = [], []
    for mask in (credit_mask, zero_mask):
        if mask.any():
            v = x[mask]
            others_n.append(float(v.size))
            others_s.append(float(np.std(v, ddof=1)) if v.size > 1 else 0.0)
    res = bnd.optimal_boundaries(
        xr,
        se * se,
        start=start,
        search_top=search_top,
        other_counts=np.asarray(others_n),
        other_std_devs=np.asarray(others_s),
        seed=int(seed),
        n_classes=n_classes,
    )
    fixed_top = float(np.count_nonzero(x >= top_cutoff)) if top_cutoff is not None else 0.0
    details = {
        "target_std_error": se,
        "start_boundaries": [float(b) for b in start],
        "start_size": res.start_size + fixed_top,
        "size": res.size + fixed_top,
        "route": res.route,
        "iterations": res.iterations,
        "converged": res.converged,
        "search_steps": res.search_steps,
    }
    found = None if (not search_top or not math.isfinite(res.top_cutoff)) else float(res.top_cutoff)
    return np.asarray(res.boundaries, dtype=float), found, details
