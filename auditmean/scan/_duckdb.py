""":class:`DuckDBScan`: the scan interface answered by SQL on a CSV or Parquet file.

DuckDB (an embedded analytical database: a library, no server) reads the
file where it lies, one column chunk at a time, on every core, and keeps
its working memory under a limit (200 MB by default), writing to a
temporary folder beyond it. Nothing but the answers comes back to Python,
except for the content fingerprint, whose rule needs every item in id
order: DuckDB sorts them (out of core if need be) and hands them to Python
in batches, which feed one SHA-256 in constant memory.

What the large-file path reads
------------------------------
* Item ids: text columns (surrounding white space removed exactly as
  Python's :meth:`str.strip` does) or whole-number columns (written as
  their digits), as :func:`~auditmean.population.load_population`.
* Book values: numeric columns directly; text columns only when every
  value is a *plain* number (``1234.56``, ``-12``, ``1.5e3``; with
  ``decimal=","`` the comma is the decimal mark: ``1234,56``). Amounts
  written with thousands separators, currency marks, parentheses or a
  trailing minus are **not** translated to SQL: the error lists the rows
  and says to convert the column to plain numbers (or to read the file in
  memory, where :func:`auditmean.amounts.parse_amounts` reads them).
* Rows are numbered as in a spreadsheet (header row 1). In a Parquet file
  the number comes from the file's row position; in a CSV file from the
  order in which the rows are read, which skips empty lines (the in-memory
  path reports an empty line between rows instead).
"""

from __future__ import annotations

import csv
import functools
import io
import math
import os
import queue
import re
import sys
import tempfile
import threading
from fractions import Fraction
from typing import Any

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from auditmean.amounts import _PLAIN, _explain, parse_amounts
from auditmean.core.boundaries import StratumStatistics
from auditmean.core.moments import skewness_of_spread
from auditmean.core.profile import QUANTILE_LEVELS, TOP_FRACTIONS
from auditmean.engagement import _sha256_file
from auditmean.errors import AuditMeanError, InputError, ParameterError, spreadsheet_row
from auditmean.population import (
    _ROW_ONE_EMPTY,
    CSV_EXTENSIONS,
    PARQUET_EXTENSIONS,
    Profile,
    _column_position,
    _header_text,
    _notes,
    _string_bytes,
    strip_text,
    update_fingerprint,
)
from auditmean.scan._rule import REST, StratumRule, sql_double
from auditmean.selection import _check_seed, item_keys

__all__ = ["DuckDBScan", "DEFAULT_MEMORY_LIMIT"]

#: DuckDB's working-memory limit unless told otherwise.
DEFAULT_MEMORY_LIMIT = "200MB"

#: Rows handed from DuckDB to Python at a time (fingerprint, error rows).
BATCH_ROWS = 1_000_000


@functools.cache
def _white_space() -> str:
    """Every character Python's str.strip() removes (str.isspace()).

    Found by testing every code point, once, when first needed (not at
    import: it takes about a tenth of a second, which every command's
    start would pay).
    """
    return "".join(chr(c) for c in range(sys.maxunicode + 1) if chr(c).isspace())


_CONTROL = r"'[\x00-\x1f\x7f]'"  # RE2 escapes inside a SQL text literal
_ASCII_SPACE = r"[\t\n\x0b\x0c\r\x1c-\x1f ]"  # the ASCII characters str.strip() removes, for RE2
_EXAMPLES = 5
_MAX_ROWS_LISTED = 1000
_TOP_K_LIMIT = 100_000  # samples this large in one stratum are cut from a sort, not a top-k aggregate


def _literal(text: str) -> str:
    return "'" + text.replace("'", "''") + "'"


def _ident(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _ranks_of_fraction(fraction: float, m: int) -> int:
    """``k = ceil(fraction * m)``, at least 1 and at most ``m``, as :func:`auditmean.core.profile.top_share`."""
    return min(m, max(1, math.ceil(Fraction(str(fraction)) * m)))


def _lerp(a: float, b: float, t: float) -> float:
    """numpy's linear interpolation between two order statistics (as :func:`numpy.quantile`)."""
    d = b - a
    return b - d * (1.0 - t) if t >= 0.5 else a + d * t


_NUMERIC = re.compile(r"^(TINYINT|SMALLINT|INTEGER|BIGINT|HUGEINT|UTINYINT|USMALLINT|UINTEGER|UBIGINT|UHUGEINT|FLOAT|DOUBLE|DECIMAL.*)$")
_WHOLE = re.compile(r"^(TINYINT|SMALLINT|INTEGER|BIGINT|HUGEINT|UTINYINT|USMALLINT|UINTEGER|UBIGINT|UHUGEINT)$")


class _Prefetch:
    """Iterate a record-batch reader in a second thread, one batch ahead, so DuckDB sorts while Python hashes."""

    def __init__(self, reader: Any) -> None:
        self._reader = reader
        self._queue: queue.Queue = queue.Queue(maxsize=1)
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)
        self._thread.start()

    def _run(self) -> None:
        try:
            for batch in self._reader:
                if self._stop.is_set():
                    break
                self._queue.put(("batch", batch))
            self._queue.put(("end", None))
        except BaseException as exc:  # handed to the consumer, which raises it
            self._queue.put(("error", exc))

    def __iter__(self):
        while True:
            kind, item = self._queue.get()
            if kind == "end":
                return
            if kind == "error":
                raise item
            yield item

    def __enter__(self) -> _Prefetch:
        return self

    def __exit__(self, *exc: object) -> None:
        self._stop.set()
        while self._thread.is_alive():  # let the producer finish its batch and see the stop
            try:
                self._queue.get(timeout=0.1)
            except queue.Empty:
                pass
        self._reader.close()


class DuckDBScan:
    """The scan of a CSV or Parquet file by DuckDB, without loading it.

    Parameters
    ----------
    source:
        Path of a ``.csv``/``.tsv``/``.txt`` or ``.parquet``/``.pq`` file.
    id_column, value_column, stratum_column, decimal, sep, encoding:
        As :func:`~auditmean.population.load_population` (``encoding``:
        UTF-8, UTF-16 or Latin-1 on this path).
    memory_limit:
        DuckDB's working-memory limit (``"200MB"``); beyond it DuckDB
        writes to ``temp_directory`` (a new temporary folder by default).
    threads:
        Threads DuckDB may use (default: every core).

    Raises
    ------
    InputError
        A missing or unreadable file, a missing column (with the columns
        there are), blank, repeated or control-character ids, book values
        that are blank, not finite or not plain numbers: naming the file,
        column and rows.
    """

    engine = "duckdb"

    def __init__(
        self,
        source: str | os.PathLike[str],
        *,
        id_column: str,
        value_column: str,
        stratum_column: str | None = None,
        decimal: str = ".",
        sep: str | None = None,
        encoding: str = "utf-8",
        memory_limit: str = DEFAULT_MEMORY_LIMIT,
        threads: int | None = None,
        temp_directory: str | None = None,
    ) -> None:
        import duckdb

        self.source = os.fspath(source)
        self._where = {"file": self.source}
        if decimal not in (".", ","):
            raise ParameterError("decimal", f"must be '.' or ',', got {decimal!r}")
        self._decimal = decimal
        self.id_column, self.value_column, self.stratum_column = id_column, value_column, stratum_column
        self.has_preassigned = stratum_column is not None
        ext = os.path.splitext(self.source)[1].lower()
        if ext not in CSV_EXTENSIONS + PARQUET_EXTENSIONS:
            raise InputError(
                f"the large-file path reads CSV ({', '.join(CSV_EXTENSIONS)}) and Parquet "
                f"({', '.join(PARQUET_EXTENSIONS)}) files, not {ext or '(no extension)'!r}; save the "
                "table in one of these forms",
                **self._where,
            )
        try:
            size = os.stat(self.source).st_size
        except FileNotFoundError:
            raise InputError("no such file", **self._where) from None
        except OSError as exc:
            raise InputError(f"cannot be opened: {exc.strerror or exc}", **self._where) from None
        if os.path.isdir(self.source):
            raise InputError("is a folder, not a file", **self._where)
        if size == 0:
            raise InputError("the file is empty (0 bytes)", **self._where)
        if temp_directory is None:
            # removed with the scan (DuckDB writes here only beyond its memory limit)
            self._temp_holder = tempfile.TemporaryDirectory(prefix="auditmean-duckdb-")
            temp_directory = self._temp_holder.name
        self._temp = temp_directory
        config = {
            "memory_limit": memory_limit,
            "threads": int(threads or os.cpu_count() or 1),
            "preserve_insertion_order": False,
            "temp_directory": self._temp,
        }
        self._con = duckdb.connect(":memory:", config=config)
        self._duckdb_error = duckdb.Error
        self._parquet = ext in PARQUET_EXTENSIONS
        if self._parquet:
            header, types = self._parquet_header()
        else:
            header, types = self._csv_header(sep or ("\t" if ext == ".tsv" else ","), encoding)
        named = [("id_column", id_column), ("value_column", value_column)]
        if stratum_column is not None:
            named.append(("stratum_column", stratum_column))
        positions = {role: _column_position(header, name, role, self._where, sep) for role, name in named}
        self._build_expressions(header, types, positions)
        self._validate()
        self.count = self._n
        self.fingerprint()  # checks the ids as it goes

    # ------------------------------------------------------------------ reading

    def _parquet_header(self) -> tuple[list[str], list[str]]:
        import pyarrow.parquet as pq  # here: only Parquet files need it

        try:
            pq.read_schema(self.source)
        except Exception as exc:  # pyarrow raises several types for a bad file
            raise InputError(f"cannot be read as a Parquet file: {exc}", **self._where) from None
        self._relation = f"read_parquet({_literal(self.source)}, file_row_number=true)"
        described = self._query(f"DESCRIBE SELECT * FROM {self._relation}")
        cols = [(str(r[0]), str(r[1])) for r in described if r[0] != "file_row_number"]
        return [c for c, _ in cols], [t for _, t in cols]

    def _csv_header(self, sep: str, encoding: str) -> tuple[list[str], list[str]]:
        if not isinstance(sep, str) or len(sep) != 1:
            raise ParameterError("sep", f"must be a single character, got {sep!r}")
        codec = encoding.replace("_", "-").lower()
        names = {"utf-8": "utf-8", "utf8": "utf-8", "utf-8-sig": "utf-8", "utf-16": "utf-16",
                 "latin-1": "latin-1", "latin1": "latin-1", "iso-8859-1": "latin-1"}
        if codec not in names:
            raise ParameterError(
                "encoding", f"the large-file path reads UTF-8, UTF-16 or Latin-1 text, not {encoding!r}; convert the file"
            )
        with open(self.source, "rb") as fh:
            head = fh.read(1 << 16)
        text = head.decode("utf-16" if names[codec] == "utf-16" else ("latin-1" if names[codec] == "latin-1" else "utf-8"), errors="ignore")
        try:
            first = next(csv.reader(io.StringIO(text.lstrip("\ufeff")), delimiter=sep))
        except (StopIteration, csv.Error):
            first = []
        header = [_header_text(v) for v in first]
        if not header or all(h == "" for h in header):
            raise InputError(_ROW_ONE_EMPTY, **self._where)
        columns = "{" + ", ".join(f"{_literal(f'c{j}')}: 'VARCHAR'" for j in range(len(header))) + "}"
        self._relation = (
            f"read_csv({_literal(self.source)}, header=true, delim={_literal(sep)}, quote='\"', escape='\"', "
            f"auto_detect=false, strict_mode=true, allow_quoted_nulls=false, encoding={_literal(names[codec])}, "
            f"columns={columns})"
        )
        self._csv_names = [f"c{j}" for j in range(len(header))]
        return header, ["VARCHAR"] * len(header)

    def _column(self, header: list[str], j: int) -> str:
        return _ident(self._csv_names[j]) if not self._parquet else _ident(header[j])

    def _build_expressions(self, header: list[str], types: list[str], positions: dict[str, int]) -> None:
        self._raw: dict[str, str] = {}
        j = positions["id_column"]
        col, kind = self._column(header, j), types[j].upper()
        if kind == "VARCHAR":
            self._raw["id"] = col
        elif _WHOLE.match(kind):
            self._raw["id"] = f"CAST({col} AS VARCHAR)"
        else:
            raise InputError(
                f"item ids are stored as {kind} values, neither text nor whole numbers; the way they were "
                "written is not known, so store the column as text",
                column=self.id_column,
                **self._where,
            )
        j = positions["value_column"]
        col, kind = self._column(header, j), types[j].upper()
        self._value_is_text = kind == "VARCHAR"
        if self._value_is_text:
            self._raw["value_text"] = col
        elif _NUMERIC.match(kind):
            self._raw["value"] = f"CAST({col} AS DOUBLE)"
        else:
            raise InputError(
                f"book values are stored as {kind} values, not amounts; store them as numbers",
                column=self.value_column,
                **self._where,
            )
        if "stratum_column" in positions:
            j = positions["stratum_column"]
            col, kind = self._column(header, j), types[j].upper()
            if kind == "VARCHAR":
                self._raw["label"] = col
            elif _WHOLE.match(kind):
                self._raw["label"] = f"CAST({col} AS VARCHAR)"
            else:
                raise InputError(
                    f"strata are stored as {kind} values, neither text nor whole numbers; store the column as text",
                    column=self.stratum_column,
                    **self._where,
                )

    def _query(self, sql: str, params: list[object] | None = None) -> list[tuple[Any, ...]]:
        try:
            # a cursor of its own: a check may run while the fingerprint pass streams on the connection
            return self._con.cursor().execute(sql, params or []).fetchall()
        except self._duckdb_error as exc:
            raise self._read_error(exc) from None

    def _read_error(self, exc: Exception) -> AuditMeanError:
        text = str(exc)
        line = re.search(r"on Line: (\d+)", text)
        first = text.split("\n")[0]
        detail = re.search(r"Original Line: (.*)", text)
        reason = first + (f" (the line reads {detail.group(1)!r})" if detail else "")
        rows = [int(line.group(1))] if line else None
        return InputError(f"cannot be read: {reason}", rows=rows, **self._where)

    # ------------------------------------------------------------------ checks

    def _validate(self) -> None:
        """One pass over the book values (and the count and total); the ids are checked as they are fingerprinted."""
        if self._value_is_text:
            plain = _PLAIN[self._decimal].strip("^$")
            number = f"regexp_extract({self._raw['value_text']}, {_literal(f'^{_ASCII_SPACE}*({plain}){_ASCII_SPACE}*$')}, 1)"
            if self._decimal == ",":
                number = f"replace({number}, ',', '.')"
            self._raw["value"] = f"TRY_CAST({number} AS DOUBLE)"
        v = self._raw["value"]
        # isfinite, not isnan: DuckDB 2.0's Parquet filter pushdown misses NaN under isnan() in a WHERE
        self._value_bad = f"({v} IS NULL OR NOT isfinite({v}))"
        row = self._query(
            f"SELECT count(*), count(*) FILTER (WHERE {self._value_bad}), fsum({v}) FILTER (WHERE NOT {self._value_bad}) "
            f"FROM {self._relation}"
        )[0]
        self._n = int(row[0])
        if self._n == 0:
            raise InputError("there are no data rows below the header", **self._where)
        if int(row[1]):
            self._fail_values(self._value_bad, int(row[1]))
        #: Sum of the book values (DuckDB's compensated ``fsum``).
        self.total = float(row[2] or 0.0) + 0.0
        self._trim = {"id": False, "label": False}
        self._set_base()

    def _set_base(self) -> None:
        ws = _literal(_white_space())
        self._ids = f"trim({self._raw['id']}, {ws})" if self._trim["id"] else self._raw["id"]
        label = ""
        if "label" in self._raw:
            lab = self._raw["label"]
            self._label = f"trim({lab}, {ws})" if self._trim["label"] else lab
            label = f", {self._label} AS label"
        self._base = f"(SELECT {self._ids} AS item_id, {self._raw['value']} + 0.0 AS book_value{label} FROM {self._relation})"

    def _check_texts(self, texts: pa.Array, role: str) -> bool:
        """Refuse blank or control-character ids (labels); True when some need white space removed."""
        raw = self._raw[role]
        column = self.id_column if role == "id" else self.stratum_column
        what = "item id" if role == "id" else "stratum"
        data = np.frombuffer(_string_bytes(texts), dtype=np.uint8)
        if np.any((data < 0x20) | (data == 0x7F)):
            control = f"regexp_matches({raw}, {_CONTROL})"
            count = int(self._query(f"SELECT count(*) FROM {self._relation} WHERE {control}")[0][0])
            if count:
                self._fail_rows(
                    control,
                    count,
                    f"{count:,} {what} value{'s contain' if count > 1 else ' contains'} a tab, line break or other "
                    "control character; remove them",
                    column,
                )
        stripped = strip_text(texts)
        if texts.null_count or pc.any(pc.equal(stripped, "")).as_py():
            blank = f"{raw} IS NULL OR trim({raw}, {_literal(_white_space())}) = ''"
            count = int(self._query(f"SELECT count(*) FROM {self._relation} WHERE {blank}")[0][0])
            noun = "rows" if count > 1 else "row"
            article = "an" if what[0] in "aeiou" else "a"
            self._fail_rows(blank, count, f"{count:,} {noun} without {article} {what}; every item needs one", column)
        return not stripped.equals(texts)

    def _bad_rows(self, condition: str, limit: int = _MAX_ROWS_LISTED) -> list[int]:
        """Spreadsheet rows (header = 1) where ``condition`` holds, the first ``limit`` of them."""
        if self._parquet:
            got = self._query(
                f"SELECT file_row_number FROM {self._relation} WHERE {condition} ORDER BY file_row_number LIMIT {limit}"
            )
            return [spreadsheet_row(int(r[0])) for r in got]
        # CSV: the rows' positions, in the order read (empty lines are not rows to DuckDB)
        con = self._con.cursor()
        con.execute("SET preserve_insertion_order = true")
        try:
            reader = con.sql(f"SELECT coalesce({condition}, true) AS bad FROM {self._relation}").to_arrow_reader(BATCH_ROWS)
            rows: list[int] = []
            start = 0
            for batch in reader:
                flags = batch.column(0).to_numpy(zero_copy_only=False).astype(bool)
                rows += [spreadsheet_row(start + int(i)) for i in np.flatnonzero(flags)[: limit - len(rows)]]
                start += len(flags)
                if len(rows) >= limit:
                    break
            return rows
        finally:
            con.execute("SET preserve_insertion_order = false")

    def _fail_rows(self, condition: str, count: int, message: str, column: str | None) -> None:
        rows = self._bad_rows(condition)
        listed = "" if count <= len(rows) else f" (the first {len(rows):,} rows are listed)"
        raise InputError(message + listed, column=column, rows=rows, **self._where)

    def _fail_values(self, value_bad: str, count: int) -> None:
        if self._value_is_text:
            raw = self._raw["value_text"]
            samples = self._query(
                f"SELECT DISTINCT {raw} FROM {self._relation} WHERE {value_bad} LIMIT {_EXAMPLES}"
            )
            reasons = []
            convertible = False
            for (text,) in samples:
                if text is None or str(text).strip() == "":
                    reasons.append("blank or missing")
                    continue
                try:
                    parse_amounts([text], decimal=self._decimal)
                    convertible = True
                    reasons.append(f"{text!r}: written with separators, a currency mark or a sign form "
                                   "that only the in-memory path reads")
                except InputError:
                    reasons.append(f"{text!r}: {_explain(str(text), self._decimal)}")
            advice = (
                "; the large-file path reads plain numbers only (1234.56, -12, 1.5e3): convert the column to "
                "plain numbers, or read the file in memory with engine='pandas'"
                if convertible
                else "; every item needs a finite amount written as a plain number (1234.56, -12, 1.5e3)"
            )
        else:
            reasons = ["blank, missing or not a finite number"]
            advice = "; every item needs a finite book value"
        rows = self._bad_rows(value_bad)
        listed = "" if count <= len(rows) else f"; the first {len(rows):,} rows are listed"
        raise InputError(
            f"{count:,} of {self._n:,} amounts could not be read and nothing was guessed ("
            + "; ".join(reasons) + ")" + advice + listed,
            column=self.value_column,
            rows=rows,
            **self._where,
        )

    # ------------------------------------------------------------------ the interface

    def fingerprint(self) -> tuple[str | None, str]:
        """File SHA-256 and content SHA-256, computed when the scan opens.

        The items are sorted by id by DuckDB (out of core beyond the memory
        limit) and streamed to Python in batches, which are checked (blank,
        control-character and repeated ids; blank labels) and fed to one
        SHA-256 by :func:`auditmean.population.update_fingerprint`. Ids or
        labels with surrounding white space are trimmed and the pass is
        made again.
        """
        if getattr(self, "_fingerprint", None) is None:
            self._fingerprint = self._fingerprint_pass()
        return self._fingerprint

    def _fingerprint_pass(self) -> tuple[str | None, str]:
        import hashlib

        file_sha = _sha256_file(self.source)
        while True:
            h = hashlib.sha256()
            label = ", label" if self.has_preassigned else ""
            sql = f"SELECT item_id, book_value{label} FROM {self._base} ORDER BY item_id"
            previous: str | None = None
            retrim = False
            with _Prefetch(self._con.sql(sql).to_arrow_reader(BATCH_ROWS)) as batches:
                for batch in batches:
                    ids = batch.column(0).cast(pa.string())
                    if len(ids) == 0:
                        continue
                    strata = batch.column(2).cast(pa.string()) if self.has_preassigned else None
                    if not self._trim["id"] and self._check_texts(ids, "id"):
                        self._trim["id"] = retrim = True
                    if strata is not None and not self._trim["label"] and self._check_texts(strata, "label"):
                        self._trim["label"] = retrim = True
                    if retrim:
                        break
                    if (previous is not None and ids[0].as_py() == previous) or (
                        len(ids) > 1 and pc.any(pc.equal(ids[1:], ids[:-1])).as_py()
                    ):
                        self._fail_repeated()
                    previous = ids[-1].as_py()
                    update_fingerprint(h, ids, batch.column(1).to_numpy(zero_copy_only=False), strata)
            if not retrim:
                return file_sha, h.hexdigest()
            self._set_base()

    def _fail_repeated(self) -> None:
        groups = self._query(
            f"SELECT item_id FROM {self._base} GROUP BY item_id HAVING count(*) > 1 ORDER BY item_id LIMIT {_EXAMPLES}"
        )
        total = int(self._query(f"SELECT count(*) FROM (SELECT item_id FROM {self._base} GROUP BY item_id HAVING count(*) > 1)")[0][0])
        examples = [g[0] for g in groups]
        shown = []
        for item in examples:
            rows = self._bad_rows(f"{self._ids} = {_literal(item)}", limit=10)
            shown.append(f"{item!r} on rows {', '.join(str(r) for r in rows)}")
        more = total - len(examples)
        rows = self._bad_rows(f"{self._ids} IN ({', '.join(_literal(i) for i in examples)})")
        raise InputError(
            f"{total:,} item id{'s' if total > 1 else ''} appear more than once ({'; '.join(shown)}"
            + (f"; and {more:,} more ids" if more > 0 else "")
            + "); each item must appear once",
            column=self.id_column,
            rows=rows,
            **self._where,
        )

    def _bucket(self, x: str = "book_value") -> str:
        # Order-preserving buckets, 32 per doubling of the magnitude, credits below zero below positives.
        return (
            f"(CASE WHEN {x} = 0 THEN 0 WHEN {x} > 0 THEN 100000 + floor(log2({x}) * 32)::BIGINT "
            f"ELSE -100000 - floor(log2(-{x}) * 32)::BIGINT END)"
        )

    def _buckets(self, mean: float | None = None) -> pd.DataFrame:
        extra = ""
        if mean is not None:
            d = f"(book_value - {sql_double(mean)})"
            extra = f", sum({d} * {d}) AS m2, sum({d} * {d} * {d}) AS m3, sum(book_value * book_value) AS sq"
        rows = self._con.sql(
            f"SELECT {self._bucket()} AS b, count(*) AS n, min(book_value) AS lo, max(book_value) AS hi{extra} "
            f"FROM {self._base} GROUP BY b ORDER BY b"
        ).fetchnumpy()
        frame = pd.DataFrame({k: np.asarray(v) for k, v in rows.items()})
        # Buckets must not overlap in value; merge any that do (it would take a log2 that is not monotone).
        keep = [0]
        for i in range(1, len(frame)):
            if frame["lo"].iloc[i] <= frame["hi"].iloc[keep[-1]]:
                j = keep[-1]
                frame.loc[j, "n"] += frame["n"].iloc[i]
                frame.loc[j, "hi"] = max(frame["hi"].iloc[j], frame["hi"].iloc[i])
            else:
                keep.append(i)
        return frame.iloc[keep].reset_index(drop=True) if len(keep) != len(frame) else frame

    def _order_statistics(self, ranks: list[int], buckets: pd.DataFrame) -> dict[int, float]:
        """The values at 0-based ascending ``ranks``, exactly: buckets first, then the values in the few needed."""
        counts = buckets["n"].to_numpy(dtype=np.int64)
        before = np.concatenate([[0], np.cumsum(counts)])
        out: dict[int, float] = {}
        needed: dict[int, list[int]] = {}
        for r in ranks:
            i = int(np.searchsorted(before, r, side="right") - 1)
            if buckets["lo"].iloc[i] == buckets["hi"].iloc[i]:
                out[r] = float(buckets["lo"].iloc[i])
            else:
                needed.setdefault(i, []).append(r)
        if needed:
            where = " OR ".join(
                f"(book_value BETWEEN {sql_double(buckets['lo'].iloc[i])} AND {sql_double(buckets['hi'].iloc[i])})"
                for i in needed
            )
            got = self._con.sql(
                f"SELECT book_value AS x, count(*) AS n FROM {self._base} WHERE {where} GROUP BY x ORDER BY x"
            ).fetchnumpy()
            xs, ns = np.asarray(got["x"], dtype=float), np.asarray(got["n"], dtype=np.int64)
            for i, rs in needed.items():
                inside = (xs >= buckets["lo"].iloc[i]) & (xs <= buckets["hi"].iloc[i])
                cum = np.cumsum(ns[inside])
                for r in rs:
                    out[r] = float(xs[inside][int(np.searchsorted(cum, r - before[i], side="right"))])
        return out

    def _quantiles_from(self, levels: tuple[float, ...], buckets: pd.DataFrame) -> dict[float, float]:
        n = self._n
        spots = []
        for p in levels:
            v = (n - 1) * float(p)
            j = int(math.floor(v))
            spots.append((p, j, min(j + 1, n - 1), v - j))
        stats = self._order_statistics(sorted({s for _, a, b, _ in spots for s in (a, b)}), buckets)
        return {float(p): float(_lerp(stats[a], stats[b], g)) for p, a, b, g in spots}

    def quantiles(self, levels: tuple[float, ...]) -> dict[float, float]:
        return self._quantiles_from(levels, self._buckets())

    def profile(self) -> Profile:
        """The profile of :func:`auditmean.population.profile`, by three passes and a small fetch.

        Totals are DuckDB's ``fsum`` (compensated summation), which agrees
        with the correctly rounded sum to rounding, not always to the last bit.
        """
        b = self._base
        (n, total, credit_n, credit_total, zero_n, pos_n, pos_total) = self._query(
            "SELECT count(*), fsum(book_value), count(*) FILTER (WHERE book_value < 0), "
            "coalesce(fsum(book_value) FILTER (WHERE book_value < 0), 0), count(*) FILTER (WHERE book_value = 0), "
            f"count(*) FILTER (WHERE book_value > 0), coalesce(fsum(book_value) FILTER (WHERE book_value > 0), 0) FROM {b}"
        )[0]
        n = int(n)
        mean = float(total) / n
        buckets = self._buckets(mean)
        m2 = math.fsum(buckets["m2"].tolist())
        m3 = math.fsum(buckets["m3"].tolist())
        sq = math.fsum(buckets["sq"].tolist())
        std = math.sqrt(m2 / (n - 1)) if n >= 2 else math.nan
        skew = float(skewness_of_spread(np.array([n]), np.array([m2]), np.array([m3]), np.array([sq]))[0])
        merged = buckets[["n", "lo", "hi"]]
        quant = self._quantiles_from(QUANTILE_LEVELS, merged)
        shares = []
        m = int(pos_n)
        ks = [_ranks_of_fraction(f, m) for f in TOP_FRACTIONS] if m else []
        cuts = self._order_statistics([n - k for k in ks], merged) if m else {}
        if m:
            sums = self._query(
                "SELECT " + ", ".join(
                    f"coalesce(fsum(book_value) FILTER (WHERE book_value > {sql_double(cuts[n - k])}), 0), "
                    f"count(*) FILTER (WHERE book_value > {sql_double(cuts[n - k])})"
                    for k in ks
                ) + f" FROM {b}"
            )[0]
            for i, k in enumerate(ks):
                above, c = float(sums[2 * i]), int(sums[2 * i + 1])
                shares.append((above + (k - c) * cuts[n - k]) / float(pos_total))
        else:
            shares = [math.nan, math.nan]
        return Profile(
            count=n,
            total=float(total),
            mean=mean,
            std_dev=std,
            skewness=skew,
            quantiles=quant,
            top_1pct_share=shares[0],
            top_5pct_share=shares[1],
            credit_count=int(credit_n),
            credit_total=float(credit_total),
            zero_count=int(zero_n),
            positive_count=m,
            positive_total=float(pos_total),
            notes=_notes(int(credit_n), float(credit_total), int(zero_n)),
        )

    def extent(self, rule: StratumRule) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        expr, params = rule.sql()
        got = self._query(
            f"SELECT g, count(*), min(book_value), max(book_value) FROM (SELECT {expr} AS g, book_value FROM {self._base}) GROUP BY g",
            params,
        )
        count = np.zeros(rule.n_groups, dtype=np.int64)
        lo = np.full(rule.n_groups, np.nan)
        hi = np.full(rule.n_groups, np.nan)
        for g, c, a, z in got:
            count[int(g)], lo[int(g)], hi[int(g)] = int(c), float(a), float(z)
        return count, lo, hi

    def count_and_moments(self, rule: StratumRule, centres: np.ndarray | None = None) -> StratumStatistics:
        """Per-group statistics: one pass about given centres, or two passes about each group's mean.

        With ``centres`` (a value inside each group's range, e.g. the middle
        of its boundaries) one pass sums the powers of ``d = x - c_g`` and
        the central moments follow from them,
        ``M2 = S2 - S1^2/n`` and ``M3 = S3 - 3 S1 S2/n + 2 S1^3/n^2``
        (the shifted-data formulas of Chan, Golub and LeVeque 1983, The
        American Statistician 37(3), 242-247 -- cited from memory); their
        rounding error grows with ``(mean - c)^2 / variance``, so a group
        where that exceeds 1e4 is summed again about its own mean. Without
        centres, the first pass finds the means and the second sums about
        them, as :func:`auditmean.core.boundaries.stratum_statistics` does.
        """
        expr, params = rule.sql()
        H = rule.n_groups
        c = np.zeros(H) if centres is None else np.nan_to_num(np.asarray(centres, dtype=float))
        cs = "[" + ", ".join(sql_double(v) for v in c) + "]"
        d = f"(book_value - {cs}[g + 1])"
        first = self._query(
            f"SELECT g, count(*), fsum(book_value), min(book_value), max(book_value), sum({d}), sum({d} * {d}), "
            f"sum({d} * {d} * {d}), sum(book_value * book_value) "
            f"FROM (SELECT {expr} AS g, book_value FROM {self._base}) GROUP BY g",
            params,
        )
        count = np.zeros(H, dtype=np.int64)
        total, s1, s2, s3, sq = (np.zeros(H) for _ in range(5))
        lo = np.full(H, np.nan)
        hi = np.full(H, np.nan)
        for g, k, t, a, z, p1, p2, p3, q in first:
            g = int(g)
            count[g], total[g], lo[g], hi[g] = int(k), float(t), float(a), float(z)
            s1[g], s2[g], s3[g], sq[g] = float(p1), float(p2), float(p3), float(q)
        n = np.maximum(count, 1).astype(float)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(count > 0, total / n, np.nan)
            m2 = np.maximum(s2 - s1 * s1 / n, 0.0)
            m3 = s3 - 3.0 * s1 * s2 / n + 2.0 * s1**3 / (n * n)
            shift = np.where(count > 0, (s1 / n) ** 2, 0.0)
            poor = (centres is None) | (shift > 1e4 * np.where(m2 > 0, m2 / n, 0.0)) & (count > 1)
        poor = np.asarray(poor, dtype=bool) & (count > 0)
        if poor.any():
            means = "[" + ", ".join(sql_double(0.0 if math.isnan(m) else m) for m in mean) + "]"
            e = f"(book_value - {means}[g + 1])"
            chosen = ", ".join(str(int(g)) for g in np.flatnonzero(poor))
            second = self._query(
                f"SELECT g, sum({e} * {e}), sum({e} * {e} * {e}) FROM (SELECT {expr} AS g, book_value FROM {self._base}) "
                f"WHERE g IN ({chosen}) GROUP BY g",
                params,
            )
            for g, a, b3 in second:
                m2[int(g)], m3[int(g)] = float(a), float(b3)
        with np.errstate(invalid="ignore", divide="ignore"):
            std = np.where(count > 1, np.sqrt(m2 / np.maximum(count - 1, 1)), np.nan)
        skew = skewness_of_spread(count, m2, m3, sq)
        return StratumStatistics(count, total, mean, std, skew, lo, hi)

    def histogram(self, rule: StratumRule, edges: np.ndarray) -> np.ndarray:
        """Class counts by the edges themselves: a first class from the arithmetic, corrected by one either way."""
        edges = np.asarray(edges, dtype=float)
        k = edges.size - 1
        lo, hi = float(edges[0]), float(edges[-1])
        expr, params = rule.sql()
        e = "[" + ", ".join(sql_double(v) for v in edges) + "]"
        scale = sql_double(k / (hi - lo))
        guess = f"least(greatest(floor((book_value - {sql_double(lo)}) * {scale}), 0), {k - 1})::BIGINT"
        got = self._query(
            f"SELECT j, count(*), min(book_value), max(book_value) FROM ("
            f"SELECT CASE WHEN book_value < {e}[i + 1] THEN i - 1 "
            f"WHEN i < {k - 1} AND book_value >= {e}[i + 2] THEN i + 1 ELSE i END AS j, book_value FROM ("
            f"SELECT {guess} AS i, book_value FROM (SELECT {expr} AS g, book_value FROM {self._base}) "
            f"WHERE g >= {REST} AND g < {rule.top} AND book_value >= {sql_double(lo)} AND book_value <= {sql_double(hi)})) GROUP BY j",
            params,
        )
        freq = np.zeros(k, dtype=np.int64)
        for j, c, a, z in got:
            j = int(j)
            upper_ok = z < edges[j + 1] or (j == k - 1 and z <= edges[-1])
            if not (0 <= j < k and a >= edges[j] and upper_ok):
                raise AuditMeanError(f"the histogram of {self.source!r} put values outside their class {j}; please report this")
            freq[j] = int(c)
        return freq

    def largest(self, k: int) -> float:
        return float(self._query(f"SELECT book_value FROM {self._base} ORDER BY book_value DESC LIMIT 1 OFFSET {int(k) - 1}")[0][0])

    def labels(self, rule: StratumRule, group: str) -> list[str]:
        expr, params = rule.sql()
        cond = f"g = {rule.top}" if group == "top" else f"g >= {REST} AND g < {rule.top}"
        got = self._query(f"SELECT DISTINCT label FROM (SELECT {expr} AS g, label FROM {self._base}) WHERE {cond}", params)
        return [str(r[0]) for r in got]

    def smallest_keys(self, seed: str, rule: StratumRule, sizes: np.ndarray) -> pd.DataFrame:
        """The smallest keys per group by a top-k aggregate (DuckDB's ``min_by`` with a count): one pass.

        Candidates are ranked by the whole SHA-256 digest, whose order agrees
        with that of the key (its first 16 hexadecimal digits) except among
        items whose keys are equal; one candidate more than needed is kept,
        and if it ties with the last one taken, every item with that key is
        fetched, so that ties are broken by item id as the rule says.
        """
        seed = _check_seed(seed)
        prefix = seed + ":"
        wanted = [g for g in range(rule.n_groups) if sizes[g] > 0]
        columns = {"item_id": [], "group": [], "key": [], "key_int": [], "order": []}
        if wanted:
            expr, params = rule.sql()
            keyed = f"(SELECT g, item_id, sha256(? || item_id) AS k FROM (SELECT {expr} AS g, item_id FROM {self._base})"
            few = [g for g in wanted if sizes[g] < _TOP_K_LIMIT]
            got = []
            if few:
                cap = int(max(sizes[g] for g in few)) + 1
                got = self._query(
                    f"SELECT g, min_by(item_id, k, {cap}) FROM {keyed} WHERE g IN ({', '.join(map(str, few))})) GROUP BY g",
                    [prefix, *params],  # the key's placeholder comes first in the text
                )
            for g in wanted:  # very large samples: a sort of the group's keys, cut after n + 1
                if sizes[g] >= _TOP_K_LIMIT:
                    rows = self._query(
                        f"SELECT item_id FROM {keyed} WHERE g = {int(g)}) ORDER BY k LIMIT {int(sizes[g]) + 1}",
                        [prefix, *params],
                    )
                    got.append((g, [r[0] for r in rows]))
            for g, ids in sorted(got, key=lambda r: int(r[0])):
                g, n = int(g), int(sizes[int(g)])
                hexes, ints = item_keys(seed, ids)
                ranked = sorted(zip(ints.tolist(), ids, hexes.tolist()), key=lambda t: (t[0], t[1]))
                if len(ranked) > n and ranked[n][0] == ranked[n - 1][0]:
                    tied = self._query(
                        f"SELECT item_id FROM (SELECT {expr} AS g, item_id FROM {self._base}) "
                        f"WHERE g = {g} AND substr(sha256(? || item_id), 1, 16) = ?",
                        params + [prefix, ranked[n - 1][2]],
                    )
                    keep = [t for t in ranked if t[0] != ranked[n - 1][0]]
                    tied_ids = [r[0] for r in tied]
                    th, ti = item_keys(seed, tied_ids)
                    ranked = sorted(keep + list(zip(ti.tolist(), tied_ids, th.tolist())), key=lambda t: (t[0], t[1]))
                for order, (ki, item, kh) in enumerate(ranked[:n], start=1):
                    columns["item_id"].append(item)
                    columns["group"].append(g)
                    columns["key"].append(kh)
                    columns["key_int"].append(ki)
                    columns["order"].append(order)
        return pd.DataFrame(
            {
                "item_id": pd.Series(columns["item_id"], dtype=object),
                "group": np.asarray(columns["group"], dtype=np.int64),
                "key": pd.Series(columns["key"], dtype=str),
                "key_int": np.asarray(columns["key_int"], dtype=np.uint64),
                "order": np.asarray(columns["order"], dtype=np.int64),
            }
        )

    def book_values_of(self, item_ids: list[str]) -> pd.DataFrame:
        wanted = pa.table({"wanted_id": pa.array([str(i) for i in item_ids], type=pa.string())})
        self._con.register("auditmean_wanted", wanted)
        try:
            got = self._con.sql(
                f"SELECT item_id, book_value FROM {self._base} WHERE item_id IN (SELECT wanted_id FROM auditmean_wanted)"
            ).fetchnumpy()
        finally:
            self._con.unregister("auditmean_wanted")
        return pd.DataFrame({"item_id": pd.Series(np.asarray(got["item_id"], dtype=object), dtype=object),
                             "book_value": np.asarray(got["book_value"], dtype=float)})

    def close(self) -> None:
        """Close the DuckDB connection and remove its temporary folder."""
        self._con.close()
        holder = getattr(self, "_temp_holder", None)
        if holder is not None:
            holder.cleanup()
