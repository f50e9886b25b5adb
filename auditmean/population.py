"""Population intake and profile: the first step of an engagement.

:func:`load_population` reads the population (every item with its id and
book value, and optionally a stratum the auditor has already assigned) from a
CSV, Excel or Parquet file or from a DataFrame, checks it once and returns a
:class:`Population`. :func:`profile` describes its book values: size, spread,
skewness, concentration, and the credit and zero items that need their own
treatment. The arithmetic lives in :mod:`auditmean.core.profile`.
"""

from __future__ import annotations

import csv
import hashlib
import html
import io
import math
import numbers
import os
import threading
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

from auditmean._records import RecordMixin, format_number, html_table, property_text, text_table
from auditmean._repeats import ids_may_repeat
from auditmean.amounts import parse_amounts
from auditmean.core.profile import BookValueStats, describe, exact_sum
from auditmean.errors import InputError, ParameterError, spreadsheet_row

__all__ = [
    "CSV_EXTENSIONS",
    "EXCEL_EXTENSIONS",
    "PARQUET_EXTENSIONS",
    "Population",
    "Profile",
    "content_fingerprint",
    "load_population",
    "profile",
]

#: File name endings read as delimited text, Excel workbooks and Parquet.
CSV_EXTENSIONS = (".csv", ".tsv", ".txt")
EXCEL_EXTENSIONS = (".xlsx", ".xlsm", ".xls")
PARQUET_EXTENSIONS = (".parquet", ".pq")

_DATAFRAME_SOURCE = "<DataFrame>"
_TABLE_NAME = "population"
_EXAMPLES = 5
_ROW_ONE_EMPTY = "row 1 is empty; the column names must be in row 1, with the items below them"


# ---------------------------------------------------------------------------
# The record


class _ContentFingerprint:
    """The content fingerprint of a loaded population, computed the first time it is asked for.

    Holds the checked ids, values and labels as loaded (Arrow arrays are
    immutable and the values array is read-only), so the digest describes
    the items as loaded whenever it is computed. Safe to ask from several
    threads: the first computes, the others wait for it.
    """

    __slots__ = ("_ids", "_values", "_strata", "_digest", "_lock")

    def __init__(self, ids: pa.Array, values: np.ndarray, strata: pa.Array | None) -> None:
        self._ids: pa.Array | None = ids
        self._values: np.ndarray | None = values
        self._strata = strata
        self._digest: str | None = None
        self._lock = threading.Lock()

    def hexdigest(self) -> str:
        with self._lock:
            ids, values, strata = self._ids, self._values, self._strata
            if self._digest is None and ids is not None and values is not None:
                order = _id_order(ids)
                h = hashlib.sha256()
                update_fingerprint(
                    h, ids.take(pa.array(order)), values[order], None if strata is None else strata.take(pa.array(order))
                )
                self._digest = h.hexdigest()
                self._ids = self._values = self._strata = None  # the items are not needed again
            return str(self._digest)


@dataclass(frozen=True, eq=False)
class Population(RecordMixin):
    """The items of a population, checked, with fingerprints of where they came from.

    Attributes
    ----------
    items:
        DataFrame indexed ``0 .. count - 1`` in the order of the source, with
        columns ``item_id`` (text, dtype ``str``), ``book_value`` (float64)
        and, when a stratum column was named, ``preassigned_stratum`` (text).
        Treat it as read-only: ``book_values``, ``total`` and the fingerprints
        describe the items as loaded, whatever is written into this table later.
    source:
        The file path as given, or ``"<DataFrame>"``.
    id_column, value_column, stratum_column:
        The source's column names used for item id, book value and
        preassigned stratum (``stratum_column`` is None when not used).
    file_sha256:
        SHA-256 (hex) of the file's bytes exactly as read; None for a DataFrame.
    content_sha256:
        SHA-256 (hex) of the canonical text of the items (see
        :func:`content_fingerprint`): the same for the same items whether
        they came from CSV, Excel, Parquet or a DataFrame, and in any row order.
        Computed from the items as loaded the first time it is read (it
        needs the items in id order, the dearest step of intake, and
        profiling or stratifying does not need it), then kept.
    count:
        Number of items.
    total:
        Sum of the book values, correctly rounded
        (:func:`auditmean.core.profile.exact_sum`).

    Two populations are the same items when their ``content_sha256`` agree;
    ``==`` compares identity only (the record holds a DataFrame).
    """

    record_kind = "population"

    items: pd.DataFrame
    source: str
    id_column: str
    value_column: str
    stratum_column: str | None
    file_sha256: str | None
    count: int
    total: float
    _values: np.ndarray = field(repr=False)
    _content: _ContentFingerprint = field(repr=False)

    @property
    def content_sha256(self) -> str:
        """SHA-256 (hex) of the canonical text of the items as loaded (see :func:`content_fingerprint`)."""
        return self._content.hexdigest()

    @property
    def book_values(self) -> np.ndarray:
        """The book values as loaded, a read-only float64 array in item order."""
        return self._values

    def to_dict(self) -> dict[str, Any]:
        return self._dict_of(
            ("items", "source", "id_column", "value_column", "stratum_column")
            + ("file_sha256", "content_sha256", "count", "total")
        )

    @property
    def item_ids(self) -> np.ndarray:
        """The item ids as an object array of Python strings, in item order."""
        return self.items["item_id"].to_numpy(dtype=object)

    @property
    def preassigned_strata(self) -> np.ndarray | None:
        """The preassigned stratum labels (object array of strings), or None."""
        if "preassigned_stratum" not in self.items.columns:
            return None
        return self.items["preassigned_stratum"].to_numpy(dtype=object)

    def _rows(self) -> list[tuple[str, str]]:
        if self.stratum_column is None:
            strata = "none"
        else:
            n = int(self.items["preassigned_stratum"].nunique())
            strata = f"{self.stratum_column} ({n} {'stratum' if n == 1 else 'strata'})"
        return [
            ("source", self.source),
            ("items", format_number(self.count)),
            ("book value total", format_number(self.total)),
            ("item id column", self.id_column),
            ("book value column", self.value_column),
            ("preassigned stratum column", strata),
            ("file SHA-256", self.file_sha256 or "(not a file)"),
            ("content SHA-256", self.content_sha256),
        ]

    def summary(self) -> str:
        return property_text("Population", self._rows())

    def _html_body(self) -> str:
        return html_table(["property", "value"], self._rows(), caption="Population")


# ---------------------------------------------------------------------------
# The content fingerprint


def content_fingerprint(
    item_ids: Any, book_values: Any, preassigned_strata: Any | None = None
) -> str:
    r"""SHA-256 of the canonical text of a population's items.

    The canonical text has one line per item, the items in ascending order
    of item id by Unicode code point (Python's ``sorted`` on ``str``; the
    same as byte order of the UTF-8 encoding). Each line is::

        item_id TAB amount LF                         (no stratum column)
        item_id TAB amount TAB preassigned_stratum LF (with a stratum column)

    where TAB is U+0009, LF is U+000A, and ``amount`` is the book value
    written by Python's ``format(value, ".2f")``: rounded to two decimals
    (correctly, from the exact binary value), no thousands separator, ``-``
    for negatives, and ``"0.00"`` in place of ``"-0.00"``. The whole text is
    encoded as UTF-8 (no byte order mark) and hashed with SHA-256; the result
    is the lowercase hex digest.

    Rounding to the cent makes the fingerprint immune to binary noise (the
    same amount read from a CSV text, an Excel cell or a computed column may
    differ in the last bit) while any change of a cent or more changes it.
    Amounts recorded with more than two decimals are compared to the cent
    only; ``file_sha256`` still tells whether the file itself changed. Ids
    and labels never contain a tab or line break (:func:`load_population`
    refuses control characters), so the text is unambiguous.

    This is our own definition. To recompute it, for example in Python::

        rows = sorted(zip(ids, values))          # by id, code-point order
        text = "".join(f"{i}\t{format(v, '.2f')}\n" for i, v in rows)
        text = text.replace("\t-0.00\n", "\t0.00\n")
        hashlib.sha256(text.encode("utf-8")).hexdigest()

    Parameters
    ----------
    item_ids:
        The ids (text), one per item, in any order; unique.
    book_values:
        The book values, in the same order.
    preassigned_strata:
        The preassigned stratum labels (text), in the same order, or None.

    Returns
    -------
    str
        64 lowercase hexadecimal digits.
    """
    ids = _as_text_array(item_ids, "item_ids")
    values = np.asarray(book_values, dtype=np.float64)
    if values.shape != (len(ids),):
        raise ParameterError("book_values", f"must have one value per item id ({len(ids)}), got shape {values.shape}")
    strata = None
    if preassigned_strata is not None:
        strata = _as_text_array(preassigned_strata, "preassigned_strata")
        if len(strata) != len(ids):
            raise ParameterError(
                "preassigned_strata", f"must have one label per item id ({len(ids)}), got {len(strata)}"
            )
    order = pc.sort_indices(ids)  # UTF-8 byte order, which is code-point order
    h = hashlib.sha256()
    update_fingerprint(
        h,
        ids.take(order),
        values[order.to_numpy()],
        None if strata is None else strata.take(order),
    )
    return h.hexdigest()


def update_fingerprint(
    h: Any, sorted_ids: pa.Array, sorted_values: np.ndarray, sorted_strata: pa.Array | None = None
) -> None:
    """Feed the canonical lines of items already in id order to the hash ``h``.

    The lines are those of :func:`content_fingerprint`; feeding consecutive
    runs of the sorted items, in order, to one ``hashlib.sha256()`` gives
    the same digest as :func:`content_fingerprint` on all of them, so a
    caller that streams a sorted population in batches (the DuckDB scan)
    needs constant memory. The text is built with vectorised string
    kernels and hashed without making a Python string per item.
    """
    sign, whole, fraction = _amount_parts(np.asarray(sorted_values, dtype=np.float64))
    if sorted_strata is None:
        lines = pc.binary_join_element_wise(sorted_ids, sign, whole, ".", fraction, "\n", "")
    else:
        lines = pc.binary_join_element_wise(sorted_ids, sign, whole, ".", fraction, "\t", sorted_strata, "\n", "")
    for chunk in lines.chunks if isinstance(lines, pa.ChunkedArray) else [lines]:
        h.update(_string_bytes(chunk))


def _string_bytes(arr: pa.Array) -> memoryview:
    """The concatenated UTF-8 bytes of a string array's values (no copy)."""
    if len(arr) == 0:
        return memoryview(b"")
    width = np.int64 if pa.types.is_large_string(arr.type) else np.int32
    offsets = np.frombuffer(arr.buffers()[1], dtype=width)
    start, stop = int(offsets[arr.offset]), int(offsets[arr.offset + len(arr)])
    data = arr.buffers()[2]
    return memoryview(data)[start:stop] if data is not None else memoryview(b"")


# Magnitudes below this are scaled to cents with a product whose rounding
# error is far below a cent (2**50 / 100, about 1.1e13).
_CENTS_EXACT_BELOW = 2.0**50 / 100.0
_TWO_DIGITS = pa.array([f"{i:02d}" for i in range(100)], type=pa.string())
_TAB_AND_SIGN = pa.array(["\t", "\t-"], type=pa.string())


def _amount_parts(values: np.ndarray) -> tuple[pa.Array, pa.Array, pa.Array]:
    """``format(v, ".2f")`` of every value in three string arrays: TAB and sign, whole units, cents.

    Joined as ``sign + whole + "." + cents`` they are the amounts of the
    canonical text (``"-0.00"`` written ``"0.00"``), each after a TAB. The
    cents are ``rint(v * 100)``. The product ``p = fl(100 v)`` differs from
    the exact ``100 v`` by at most half a unit in the last place, so
    rounding ``p`` gives the correctly rounded cents (what ``format``
    gives) except where ``p`` lies within a unit in the last place of a
    half cent, or the value is too large for that bound to be small. Those
    values, in practice a handful, are formatted by Python's ``format``.
    """
    with np.errstate(over="ignore", invalid="ignore"):  # huge values overflow here; they are formatted below
        scaled = values * 100.0
        half_gap = np.abs(np.abs(scaled - np.floor(scaled)) - 0.5)
        risky = ~(np.abs(values) < _CENTS_EXACT_BELOW) | ~(half_gap > 2.0 * np.spacing(np.abs(scaled)))
    cents = np.where(risky, 0.0, np.rint(scaled)).astype(np.int64)
    magnitude = np.abs(cents)
    sign = _TAB_AND_SIGN.take(pa.array((cents < 0).astype(np.int8)))
    whole = pc.cast(pa.array(magnitude // 100), pa.string())
    fraction = _TWO_DIGITS.take(pa.array(magnitude % 100))
    where = np.flatnonzero(risky)
    if where.size:
        exact = [format(v, ".2f") for v in values[where].tolist()]
        exact = [a[1:] if a == "-0.00" else a for a in exact]
        mask = pa.array(risky)
        negative = [a.startswith("-") for a in exact]
        digits = [a.lstrip("-") for a in exact]
        sign = pc.replace_with_mask(sign, mask, pa.array(["\t-" if m else "\t" for m in negative], type=pa.string()))
        whole = pc.replace_with_mask(whole, mask, pa.array([d[:-3] for d in digits], type=pa.string()))
        fraction = pc.replace_with_mask(fraction, mask, pa.array([d[-2:] for d in digits], type=pa.string()))
    return sign, whole, fraction


def _amount_texts(values: np.ndarray) -> pa.Array:
    """The amounts of the canonical text alone, as a string array (see :func:`_amount_parts`)."""
    sign, whole, fraction = _amount_parts(values)
    return pc.binary_join_element_wise(pc.utf8_slice_codeunits(sign, 1), whole, ".", fraction, "")


_PADDED_SORT_WIDTH = 32  # bytes; longer ids are sorted by pyarrow's comparison sort


def _id_order(ids: pa.Array) -> np.ndarray:
    """Positions of the ids in ascending UTF-8 byte order (code-point order), as int64.

    ASCII ids of at most :data:`_PADDED_SORT_WIDTH` bytes are padded with NUL bytes
    to a multiple of eight and sorted as big-endian 64-bit words, last word
    first, by stable integer sorts (about twice as fast as a comparison
    sort of the texts). A NUL byte sorts below every other byte, and ids
    never hold one (control characters are refused), so a shorter id sorts
    before every longer id it begins, as in a comparison of the texts.
    """
    n = len(ids)
    if n < 2:
        return np.arange(n, dtype=np.int64)
    longest = pc.max(pc.binary_length(ids)).as_py() or 0
    width = max(8, (longest + 7) // 8 * 8)
    if longest > _PADDED_SORT_WIDTH or not pc.all(pc.string_is_ascii(ids)).as_py():
        return pc.sort_indices(ids).to_numpy().astype(np.int64)
    padded = pc.utf8_rpad(ids, width, "\x00")
    words = np.frombuffer(_string_bytes(padded), dtype=">u8").reshape(n, width // 8)
    order = np.argsort(words[:, -1].astype(np.uint64), kind="stable")
    for j in range(width // 8 - 2, -1, -1):
        order = order[np.argsort(words[order, j].astype(np.uint64), kind="stable")]
    return order.astype(np.int64)


def _as_text_array(labels: Any, name: str) -> pa.Array:
    if isinstance(labels, pa.ChunkedArray):
        labels = labels.combine_chunks()
    if isinstance(labels, pa.Array):
        if not pa.types.is_string(labels.type):
            labels = labels.cast(pa.string())
    else:
        labels = pa.array([str(v) for v in labels], type=pa.string())
    if labels.null_count:
        raise ParameterError(name, "holds missing values; every item needs one")
    return labels


# ---------------------------------------------------------------------------
# Intake


def load_population(
    source: str | os.PathLike[str] | pd.DataFrame,
    *,
    id_column: str,
    value_column: str,
    stratum_column: str | None = None,
    decimal: str = ".",
    sheet: str | int | None = None,
    encoding: str = "utf-8",
    sep: str | None = None,
) -> Population:
    """Read and check a population: one row per item, with its id and book value.

    Parameters
    ----------
    source:
        A file path or a pandas DataFrame. The file type comes from the
        name's ending: ``.csv``, ``.txt`` (comma-separated) or ``.tsv``
        (tab-separated) text; ``.xlsx``, ``.xlsm`` or ``.xls`` workbooks
        (``.xls`` needs the ``xlrd`` package); ``.parquet`` or ``.pq``.
    id_column, value_column:
        Names of the columns holding the item id and the book value.
    stratum_column:
        Name of a column holding a stratum the auditor has already assigned
        to each item, if any.
    decimal:
        ``"."`` or ``","``: the decimal mark of amounts written as text (see
        :func:`auditmean.amounts.parse_amounts` for every accepted form).
    sheet:
        Workbook sheet, by name or 0-based position; default the first.
    encoding:
        Text encoding of a delimited file (default UTF-8; a UTF-8 byte order
        mark is accepted).
    sep:
        Field separator of a delimited file; default ``","``, or tab for ``.tsv``.

    Returns
    -------
    Population

    Raises
    ------
    InputError
        Naming the file (or table ``'population'`` for a DataFrame), the
        column and the spreadsheet rows (header = row 1, first item = row 2;
        for a DataFrame or Parquet file, position ``i`` is row ``i + 2``) when:
        the file is missing, unreadable or empty; it has no data rows; a
        named column is absent (the message lists the columns there are) or
        appears twice in the header; an item id is blank, not text or a
        whole number, contains a control character (tab, line break...) or
        appears more than once (each duplicate with its rows); a book value
        is blank or cannot be read; a preassigned stratum is blank or not text.
    ParameterError
        For a bad ``decimal``, ``sep``, ``encoding`` or ``sheet``, or the same
        column named for two roles.

    Notes
    -----
    Nothing is converted silently. Delimited text is read with every column
    as text (no number or missing-value detection) and the amounts are then
    read by :func:`~auditmean.amounts.parse_amounts`. Item ids and stratum
    labels are kept exactly as written except that surrounding white space
    is removed (Python's :meth:`str.strip`); whole numbers (an Excel cell
    holding 1001, an integer Parquet column) become their decimal digits,
    and any other non-text id (a floating-point number, a date) is refused,
    since its written form is not known. Column names in a file are matched
    exactly after removing surrounding white space from the header cells.
    Empty lines after the last row of data are not rows and are ignored;
    an empty line between rows of data is reported (it has no item id).
    No row is ever dropped.
    """
    for name, value in (("id_column", id_column), ("value_column", value_column)):
        if not isinstance(value, str):
            raise ParameterError(name, f"must be a column name (text), got {value!r}")
    if stratum_column is not None and not isinstance(stratum_column, str):
        raise ParameterError("stratum_column", f"must be a column name (text) or None, got {stratum_column!r}")
    roles = {"id_column": id_column, "value_column": value_column, "stratum_column": stratum_column}
    named = [(k, v) for k, v in roles.items() if v is not None]
    for i, (k1, v1) in enumerate(named):
        for k2, v2 in named[i + 1 :]:
            if v1 == v2:
                raise ParameterError(k2, f"names the same column as {k1} ({v1!r}); each role needs its own column")
    if decimal not in (".", ","):
        raise ParameterError("decimal", f"must be '.' or ',', got {decimal!r}")

    if isinstance(source, pd.DataFrame):
        where: dict[str, str] = {"table": _TABLE_NAME}
        header = list(source.columns)
        body = source.reset_index(drop=True).set_axis(range(source.shape[1]), axis=1)
        file_sha256 = None
        source_name = _DATAFRAME_SOURCE
    elif isinstance(source, (str, os.PathLike)):
        source_name = os.fspath(source)
        where = {"file": source_name}
        header, body, file_sha256 = _read_file(source_name, sheet=sheet, encoding=encoding, sep=sep)
    else:
        raise ParameterError("source", f"must be a file path or a pandas DataFrame, got {type(source).__name__}")

    if len(body) == 0:
        raise InputError("there are no data rows below the header", **where)
    positions = {role: _column_position(header, name, role, where, sep) for role, name in named}

    ids = _labels(body[positions["id_column"]], "item id", id_column, where, body)
    # Repeated ids are looked for in a second thread while the amounts are
    # read (the hashing releases the GIL). An error in the amounts waits
    # until the ids are checked, so repeated ids are still reported first.
    with ThreadPoolExecutor(max_workers=1) as pool:
        looking = pool.submit(ids_may_repeat, ids)
        amount_error: InputError | None = None
        try:
            values = parse_amounts(body[positions["value_column"]], decimal=decimal, column=value_column, **where)
        except InputError as exc:
            amount_error = exc
        may_repeat = looking.result()
    if may_repeat:
        _check_unique(ids, id_column, where)
    if amount_error is not None:
        raise amount_error
    values = np.array(values, dtype=np.float64)  # the record's own copy
    values.flags.writeable = False
    columns: dict[str, Any] = {
        "item_id": pd.array(ids, dtype="str"),
        "book_value": values.copy(),
    }
    if stratum_column is not None:
        strata = _labels(body[positions["stratum_column"]], "stratum", stratum_column, where, body)
        columns["preassigned_stratum"] = pd.array(strata, dtype="str")
    else:
        strata = None
    return Population(
        items=pd.DataFrame(columns),
        source=source_name,
        id_column=id_column,
        value_column=value_column,
        stratum_column=stratum_column,
        file_sha256=file_sha256,
        count=int(values.size),
        total=exact_sum(values),
        _values=values,
        _content=_ContentFingerprint(ids, values, strata),
    )


def _read_file(
    path: str, *, sheet: str | int | None, encoding: str, sep: str | None
) -> tuple[list[Any], pd.DataFrame, str]:
    """Header cells, body (columns numbered 0..k-1) and SHA-256 of the file."""
    where = {"file": path}
    ext = os.path.splitext(path)[1].lower()
    accepted = ", ".join(CSV_EXTENSIONS + EXCEL_EXTENSIONS + PARQUET_EXTENSIONS)
    if ext not in CSV_EXTENSIONS + EXCEL_EXTENSIONS + PARQUET_EXTENSIONS:
        raise InputError(f"the file type {ext or '(no extension)'!r} is not one auditmean reads; use {accepted}", **where)
    try:
        with open(path, "rb") as fh:
            data = fh.read()
    except FileNotFoundError:
        raise InputError("no such file", **where) from None
    except IsADirectoryError:
        raise InputError("is a folder, not a file", **where) from None
    except OSError as exc:
        raise InputError(f"cannot be opened: {exc.strerror or exc}", **where) from None
    if not data:
        raise InputError("the file is empty (0 bytes)", **where)
    # The file's SHA-256 is computed in a second thread while the file is
    # parsed (hashlib releases the GIL on large inputs).
    with ThreadPoolExecutor(max_workers=1) as pool:
        digest = pool.submit(lambda: hashlib.sha256(data).hexdigest())
        header, body = _parse_file(data, path, ext, sheet=sheet, encoding=encoding, sep=sep)
        return header, body, digest.result()


def _parse_file(
    data: bytes, path: str, ext: str, *, sheet: str | int | None, encoding: str, sep: str | None
) -> tuple[list[Any], pd.DataFrame]:
    """Header cells and body (columns numbered 0..k-1) of a file's bytes."""
    where = {"file": path}
    if ext in CSV_EXTENSIONS:
        if sep is None:
            sep = "\t" if ext == ".tsv" else ","
        table = _read_delimited(data, path, encoding=encoding, sep=sep)
    elif ext in EXCEL_EXTENSIONS:
        table = _read_excel(data, path, sheet=sheet)
    else:
        table = _read_parquet(data, path)
        header = [str(c) for c in table.columns]
        return header, table.set_axis(range(table.shape[1]), axis=1)

    if table.shape[0] == 0 or table.shape[1] == 0:
        raise InputError("the file holds no rows", **where)
    header_cells = [_header_text(v) for v in table.iloc[0].tolist()]
    if all(h == "" for h in header_cells):
        raise InputError(_ROW_ONE_EMPTY, **where)
    body = table.iloc[1:].reset_index(drop=True)
    last = len(body)
    while last > 0 and _row_is_empty(body.iloc[last - 1].tolist()):
        last -= 1
    return header_cells, body.iloc[:last]


def _read_delimited(data: bytes, path: str, *, encoding: str, sep: str) -> pd.DataFrame:
    if not isinstance(sep, str) or len(sep) != 1:
        raise ParameterError("sep", f"must be a single character, got {sep!r}")
    try:
        "".encode(encoding)
    except LookupError:
        raise ParameterError("encoding", f"{encoding!r} is not a text encoding Python knows") from None
    if encoding.replace("-", "").replace("_", "").lower() in ("utf8", "utf8sig"):
        fast = _read_delimited_fast(data, sep)
        if fast is not None:
            return fast
    try:
        return pd.read_csv(
            io.BytesIO(data),
            sep=sep,
            header=None,
            dtype=str,
            keep_default_na=False,
            na_filter=False,
            skip_blank_lines=False,
            encoding=encoding,
            engine="c",
        )
    except UnicodeDecodeError as exc:
        raise InputError(
            f"is not valid {encoding} text (byte {exc.start} cannot be decoded); pass the file's "
            "encoding, for example encoding='cp1252' or encoding='latin-1'",
            file=path,
        ) from None
    except (pd.errors.EmptyDataError, pd.errors.ParserError) as exc:
        first_line = data.split(b"\n", 1)[0].strip(b" \t\r\xef\xbb\xbf")
        if first_line == b"":
            raise InputError(_ROW_ONE_EMPTY, file=path) from None
        raise InputError(f"cannot be read as {sep!r}-separated text: {exc}".rstrip(), file=path) from None


def _read_delimited_fast(data: bytes, sep: str) -> pd.DataFrame | None:
    """The same table as the pandas reader gives, read by pyarrow's parser; None when unsure.

    Every column is read as text, nothing as missing, empty lines kept as
    rows of empty cells, quoted line breaks allowed: the reading of
    :func:`_read_delimited`. The number of columns is taken from the first
    line. Whenever pyarrow refuses the file (a row with another number of
    fields, text that is not UTF-8, ...) this returns None and the pandas
    reader reads it, so that its messages stay the ones users see.
    """
    head = data[: 1 << 16].decode("utf-8", errors="ignore").lstrip("\ufeff")
    try:
        first = next(csv.reader(io.StringIO(head), delimiter=sep))
    except (StopIteration, csv.Error):
        return None
    names = [f"c{j}" for j in range(max(len(first), 1))]
    try:
        table = pacsv.read_csv(
            pa.py_buffer(data),
            read_options=pacsv.ReadOptions(column_names=names, encoding="utf8"),
            parse_options=pacsv.ParseOptions(delimiter=sep, newlines_in_values=True, ignore_empty_lines=False),
            convert_options=pacsv.ConvertOptions(
                column_types={n: pa.string() for n in names},
                strings_can_be_null=False,
                quoted_strings_can_be_null=False,
            ),
        )
    except (pa.ArrowException, ValueError):
        return None
    return pd.DataFrame({j: pd.Series(table.column(j), dtype="str") for j in range(len(names))})


def _read_excel(data: bytes, path: str, *, sheet: str | int | None) -> pd.DataFrame:
    try:
        book = pd.ExcelFile(io.BytesIO(data), engine="xlrd" if path.lower().endswith(".xls") else "openpyxl")
    except ImportError as exc:
        raise InputError(
            f"reading this workbook needs a package that is not installed ({exc}); install it "
            "(pip install xlrd for .xls) or save the sheet as .xlsx or .csv",
            file=path,
        ) from None
    except Exception as exc:  # a corrupt or mislabelled file raises many types
        raise InputError(f"cannot be read as an Excel workbook: {exc}", file=path) from None
    names = list(book.sheet_names)
    if sheet is None:
        sheet = 0
    if isinstance(sheet, bool) or not isinstance(sheet, (str, numbers.Integral)):
        raise ParameterError("sheet", f"must be a sheet name or a 0-based position, got {sheet!r}")
    if isinstance(sheet, str) and sheet not in names:
        raise InputError(
            f"has no sheet named {sheet!r}; its sheets are {', '.join(repr(n) for n in names)}", file=path
        )
    if isinstance(sheet, numbers.Integral) and not 0 <= int(sheet) < len(names):
        raise InputError(
            f"has {len(names)} sheet{'s' if len(names) != 1 else ''} ({', '.join(repr(n) for n in names)}); "
            f"there is no sheet at position {int(sheet)} (positions start at 0)",
            file=path,
        )
    return pd.read_excel(book, sheet_name=sheet, header=None, dtype=object)


def _read_parquet(data: bytes, path: str) -> pd.DataFrame:
    try:
        return pd.read_parquet(io.BytesIO(data), engine="pyarrow")
    except Exception as exc:  # pyarrow raises several types for a bad file
        raise InputError(f"cannot be read as a Parquet file: {exc}", file=path) from None


def _header_text(v: Any) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return ""
    return str(v).strip().lstrip("\ufeff").strip()


def _row_is_empty(cells: list[Any]) -> bool:
    for v in cells:
        if v is None or v is pd.NA or (isinstance(v, float) and math.isnan(v)):
            continue
        if isinstance(v, str) and v.strip() == "":
            continue
        return False
    return True


def _column_position(header: list[Any], name: str, role: str, where: dict[str, str], sep: str | None) -> int:
    hits = [j for j, h in enumerate(header) if h == name]
    if len(hits) == 1:
        return hits[0]
    if len(hits) > 1:
        cols = ", ".join(_column_letter(j) for j in hits)
        raise InputError(
            f"the header names {len(hits)} columns {name!r} (columns {cols}); rename all but one",
            column=name,
            **where,
        )
    have = ", ".join(repr(str(h)) for h in header) or "none"
    hint = ""
    close = [str(h) for h in header if str(h).strip().casefold() == name.strip().casefold()]
    if close:
        hint = f"; names are matched exactly: did you mean {close[0]!r}?"
    elif len(header) == 1 and "file" in where:
        for other in (";", "\t", "|"):
            if other in str(header[0]) and other != (sep or ","):
                hint = f"; the header looks {'tab' if other == chr(9) else repr(other)}-separated: pass sep={other!r}"
                break
    role_words = {"id_column": "item ids", "value_column": "book values", "stratum_column": "strata"}[role]
    raise InputError(
        f"no column named {name!r} (asked for as the column of {role_words}){hint}; "
        f"the columns are: {have}",
        column=name,
        **where,
    )


def _column_letter(j: int) -> str:
    """Spreadsheet column letter of the 0-based column ``j`` (0 -> A, 26 -> AA)."""
    letters = ""
    j += 1
    while j:
        j, r = divmod(j - 1, 26)
        letters = chr(65 + r) + letters
    return letters


def _labels(column: pd.Series, what: str, name: str, where: dict[str, str], body: pd.DataFrame) -> pa.Array:
    """Ids or stratum labels as stripped text; InputError on blanks, non-text or control characters."""
    dtype = column.dtype
    n = len(column)
    out: list[str | None] | pa.Array
    not_text: list[int] = []
    if isinstance(dtype, pd.StringDtype):
        out = strip_text(pa.array(column, type=pa.string()))
    elif pd.api.types.is_integer_dtype(dtype) and not pd.api.types.is_bool_dtype(dtype):
        out = [None if v is None else str(int(v)) for v in column.to_numpy(dtype=object, na_value=None)]
    else:
        out = [None] * n
        for i, v in enumerate(column.to_numpy(dtype=object)):
            if isinstance(v, str):
                out[i] = v.strip()
            elif v is None or v is pd.NA or v is pd.NaT or (isinstance(v, float) and math.isnan(v)):
                continue
            elif isinstance(v, (numbers.Integral, np.integer)) and not isinstance(v, (bool, np.bool_)):
                out[i] = str(int(v))
            else:
                not_text.append(i)
                out[i] = ""
    if isinstance(out, pa.Array):
        blank = np.flatnonzero(_np_mask(pc.equal(out, ""), null=True)).tolist()
    else:
        refused = set(not_text)
        blank = [i for i, v in enumerate(out) if (v is None or v == "") and i not in refused]
    if blank:
        empty_rows = [i for i in blank[:200] if _row_is_empty(body.iloc[i].tolist())]
        extra = ""
        if empty_rows:
            shown = ", ".join(str(spreadsheet_row(i)) for i in empty_rows[:_EXAMPLES])
            extra = f" (row{'s' if len(empty_rows) > 1 else ''} {shown} {'are' if len(empty_rows) > 1 else 'is'} entirely empty: remove empty lines between rows of data)"
        plural = "s" if len(blank) > 1 else ""
        raise InputError(
            f"{len(blank)} row{plural} without {'an' if what[0] in 'aeiou' else 'a'} {what}{extra}; every item needs one",
            column=name,
            rows=[spreadsheet_row(i) for i in blank],
            **where,
        )
    if not_text:
        examples = "; ".join(_describe_value(i, column.iloc[i]) for i in not_text[:_EXAMPLES])
        many = len(not_text) > 1
        raise InputError(
            f"{len(not_text)} {what} value{'s are' if many else ' is'} neither text nor a whole number "
            f"({examples}); the way {'they were' if many else 'it was'} written is not known, so store "
            f"the column as text",
            column=name,
            rows=[spreadsheet_row(i) for i in not_text],
            **where,
        )
    labels = out if isinstance(out, pa.Array) else pa.array(out, type=pa.string())
    data = np.frombuffer(_string_bytes(labels), dtype=np.uint8)
    if np.any((data < 0x20) | (data == 0x7F)):  # only then look for the items that hold them
        control = np.flatnonzero(_np_mask(pc.match_substring_regex(labels, r"[\x00-\x1f\x7f]"), null=False))
    else:
        control = np.empty(0, dtype=np.intp)
    if control.size:
        examples = ", ".join(repr(v) for v in labels.take(pa.array(control[:3])).to_pylist())
        raise InputError(
            f"{control.size} {what} value{'s contain' if control.size > 1 else ' contains'} a tab, line break or other "
            f"control character (for example {examples}); remove them",
            column=name,
            rows=[spreadsheet_row(i) for i in control],
            **where,
        )
    return labels


def _np_mask(mask: pa.Array, *, null: bool) -> np.ndarray:
    return pc.fill_null(mask, null).to_numpy(zero_copy_only=False).astype(bool)


# Bytes that may begin or end a character Python's str.strip() removes: the
# ASCII white space (tab to carriage return, the separators 0x1c-0x1f,
# space) and every byte of a multi-byte UTF-8 character (some of which are
# Unicode spaces: no-break space, en quad, ideographic space ...).
_MAY_BE_SPACE = np.zeros(256, dtype=bool)
_MAY_BE_SPACE[[0x09, 0x0A, 0x0B, 0x0C, 0x0D, 0x1C, 0x1D, 0x1E, 0x1F, 0x20]] = True
_MAY_BE_SPACE[0x80:] = True


def strip_text(labels: pa.Array) -> pa.Array:
    """Each text with surrounding white space removed exactly as Python's :meth:`str.strip` does.

    Vectorised: only the texts whose first or last byte may belong to a
    white-space character go through :meth:`str.strip` one by one; missing
    values stay missing.
    """
    if isinstance(labels, pa.ChunkedArray):
        labels = labels.combine_chunks()
    n = len(labels)
    if n == 0:
        return labels
    width = np.int64 if pa.types.is_large_string(labels.type) else np.int32
    offsets = np.frombuffer(labels.buffers()[1], dtype=width)[labels.offset : labels.offset + n + 1].astype(np.int64)
    data = labels.buffers()[2]
    if data is None:
        return labels
    raw = np.frombuffer(data, dtype=np.uint8)
    filled = offsets[1:] > offsets[:-1]
    candidates = np.flatnonzero(filled)
    first = raw[offsets[:-1][candidates]]
    last = raw[offsets[1:][candidates] - 1]
    check = candidates[_MAY_BE_SPACE[first] | _MAY_BE_SPACE[last]]
    if check.size == 0:
        return labels
    texts = labels.take(pa.array(check)).to_pylist()
    stripped = [t.strip() for t in texts]
    changed = np.array([a != b for a, b in zip(texts, stripped)], dtype=bool)
    if not changed.any():
        return labels
    mask = np.zeros(n, dtype=bool)
    mask[check[changed]] = True
    return pc.replace_with_mask(labels, pa.array(mask), pa.array([t for t, c in zip(stripped, changed) if c], type=pa.string()))


def _describe_value(i: int, v: Any) -> str:
    shown = v.item() if isinstance(v, np.generic) else v
    return f"row {spreadsheet_row(i)}: {shown!r}, a {type(shown).__name__}"


def _check_unique(ids: pa.Array, name: str, where: dict[str, str]) -> None:
    counts = pc.value_counts(ids)
    repeated = pc.filter(counts.field("values"), pc.greater(counts.field("counts"), 1))
    if len(repeated) == 0:
        return
    positions = np.flatnonzero(pc.is_in(ids, value_set=repeated).to_numpy(zero_copy_only=False))
    groups: dict[str, list[int]] = {}
    for i, v in zip(positions, ids.take(pa.array(positions)).to_pylist()):
        groups.setdefault(v, []).append(spreadsheet_row(i))
    shown = "; ".join(
        f"{k!r} on rows {', '.join(str(r) for r in rows)}" for k, rows in list(groups.items())[:_EXAMPLES]
    )
    more = len(groups) - _EXAMPLES
    raise InputError(
        f"{len(groups)} item id{'s' if len(groups) > 1 else ''} appear more than once ({shown}"
        + (f"; and {more} more ids" if more > 0 else "")
        + "); each item must appear once",
        column=name,
        rows=[spreadsheet_row(i) for i in positions],
        **where,
    )


# ---------------------------------------------------------------------------
# Profile


@dataclass(frozen=True)
class Profile(BookValueStats, RecordMixin):
    """A description of a population's book values.

    Attributes
    ----------
    count, total, mean:
        Number of items, correctly rounded sum of book values, total / count.
    std_dev:
        Sample standard deviation (divisor n - 1); NaN for a single item.
    skewness:
        Adjusted Fisher-Pearson sample skewness G1 (Joanes and Gill 1998),
        as ``scipy.stats.skew(bias=False)``; NaN below three items, zero when
        all values are equal.
    quantiles:
        ``{level: value}`` at levels 0, 0.01, 0.05, 0.25, 0.5, 0.75, 0.95,
        0.99 and 1 (linear interpolation, Hyndman and Fan 1996 definition 7).
    top_1pct_share, top_5pct_share:
        Share of the total of the positive book values carried by the largest
        1 % (5 %) of the positive items, counting ``ceil(0.01 m)``
        (``ceil(0.05 m)``) items of the ``m`` positive ones; NaN when no item
        is positive. Our own definition (see :func:`auditmean.core.profile.top_share`).
    credit_count, credit_total:
        Items with a book value below zero, and their total.
    zero_count:
        Items with a book value of exactly zero (their total is zero).
    positive_count, positive_total:
        Items with a book value above zero, and their total.
    notes:
        Plain sentences on what the profile means for sampling (credit and
        zero items); empty when there is nothing to say.

    See :func:`auditmean.core.profile.describe` for the formulas and sources.
    """

    record_kind = "profile"

    notes: tuple[str, ...]

    def _statistics(self) -> list[tuple[str, str]]:
        return [
            ("items", format_number(self.count)),
            ("total", format_number(self.total)),
            ("mean", format_number(self.mean)),
            ("standard deviation", format_number(self.std_dev)),
            ("skewness (G1)", format_number(self.skewness, 3)),
            ("share of positive total in largest 1% of positive items", _percent(self.top_1pct_share)),
            ("share of positive total in largest 5% of positive items", _percent(self.top_5pct_share)),
        ]

    def _quantile_rows(self) -> list[tuple[str, str]]:
        names = {0.0: "0% (smallest)", 0.5: "50% (median)", 1.0: "100% (largest)"}
        return [(names.get(p, f"{p * 100:g}%"), format_number(v)) for p, v in self.quantiles.items()]

    def _sign_rows(self) -> list[tuple[str, str, str]]:
        return [
            ("credit (below zero)", format_number(self.credit_count), format_number(self.credit_total)),
            ("zero", format_number(self.zero_count), format_number(0.0)),
            ("positive", format_number(self.positive_count), format_number(self.positive_total)),
        ]

    def summary(self) -> str:
        parts = [
            "Profile of book values",
            text_table(["statistic", "value"], self._statistics()),
            "",
            text_table(["quantile", "book value"], self._quantile_rows()),
            "",
            text_table(["items", "count", "total"], self._sign_rows()),
        ]
        if self.notes:
            parts += ["", "Notes:"] + [f"- {n}" for n in self.notes]
        return "\n".join(parts)

    def _html_body(self) -> str:
        parts = [
            html_table(["statistic", "value"], self._statistics(), caption="Profile of book values"),
            html_table(["quantile", "book value"], self._quantile_rows()),
            html_table(["items", "count", "total"], self._sign_rows()),
        ]
        if self.notes:
            parts.append("<ul>" + "".join(f"<li>{html.escape(n)}</li>" for n in self.notes) + "</ul>")
        return "".join(parts)


def _percent(share: float) -> str:
    return "" if math.isnan(share) else f"{share:.1%}"


def profile(population_or_values: Population | Any) -> Profile:
    """Describe the book values of a population (or of any 1-D sequence of amounts).

    Parameters
    ----------
    population_or_values:
        A :class:`Population`, or a sequence of amounts, which is read by
        :func:`auditmean.amounts.parse_amounts` (numbers pass through; text
        follows its rules; blanks are refused with their rows).

    Returns
    -------
    Profile

    Notes
    -----
    The statistics, their formulas and sources are those of
    :func:`auditmean.core.profile.describe`. The notes say, in plain words,
    why credit items and zero items cannot simply be sampled with the rest.
    """
    if isinstance(population_or_values, Population):
        values = population_or_values.book_values
    else:
        values = parse_amounts(population_or_values, table="values")
    if values.size == 0:
        raise ParameterError("population_or_values", "holds no values; a profile needs at least one item")
    stats = describe(np.ascontiguousarray(values, dtype=np.float64))
    # every statistic of the core's record, as it is, and the notes on top
    return Profile(**vars(stats), notes=_notes(stats.credit_count, stats.credit_total, stats.zero_count))


def _notes(credit_count: int, credit_total: float, zero_count: int) -> tuple[str, ...]:
    notes = []
    if credit_count:
        items = "item has" if credit_count == 1 else "items have"
        notes.append(
            f"{credit_count:,} {items} a credit (negative) book value, {format_number(credit_total)} in all. "
            "Credits reduce the total, and the usual risk with them is that they are understated or "
            "left out rather than overstated, which a sample drawn from the recorded amounts is poor at "
            "finding. Put them in a "
            "stratum of their own or test them by a separate procedure (for understatement, start from "
            "other evidence, such as later payments or correspondence, and trace it to the records); left "
            "among the positive items they widen the spread of book values and so raise the sample size."
        )
    if zero_count:
        items = "item has" if zero_count == 1 else "items have"
        notes.append(
            f"{zero_count:,} {items} a book value of zero. A selection made in proportion to book value "
            "can never pick them, and they carry no book value for a projection to scale up, yet a zero "
            "balance can hide an amount that should have been recorded. Test them separately for "
            "unrecorded amounts, or give them a stratum of their own."
        )
    return tuple(notes)

