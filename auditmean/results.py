"""Audited values of the selected items: entry, intake from files, completeness.

A :class:`Results` record keeps **every** entry made, in order, in its
``log``: the item, the audited value, an optional note, who made the entry,
when (UTC, ISO 8601) and where it came from (typed, or a file and row). The
current audited value of an item is the last value entered for it. Nothing
entered is ever discarded: a different value for an item that already has
one is refused unless the caller asks to replace it (``replace=True``), and
then the earlier value stays in the log.

Entries are checked before anything is recorded: item ids that are not in
the population, items that were not selected, the same item twice in one
file, amounts that cannot be read (:func:`auditmean.amounts.parse_amounts`)
and conflicting values are reported together, naming the file and rows; a
file with any such problem records nothing.

Before evaluation, :func:`sample_frame` joins the selection, the audited
values and the book values. It refuses a partial set of results unless the
caller chooses, by name, what to do with the items not yet audited (see
:data:`MISSING_TREATMENTS`); the choice is recorded in what it returns.
"""

from __future__ import annotations

import getpass
import math
import os
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from datetime import datetime, timezone
from numbers import Real
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from auditmean._frames import require_columns, require_frame
from auditmean._records import RecordMixin, format_number, text_table
from auditmean.amounts import parse_amounts
from auditmean.errors import InputError, ParameterError, spreadsheet_row
from auditmean.tables import read_table

__all__ = [
    "LOG_COLUMNS",
    "MISSING_TREATMENTS",
    "Results",
    "SampleFrame",
    "missing_items",
    "read_results_file",
    "record_results_file",
    "sample_frame",
]

#: Columns of :attr:`Results.log`, in this order.
LOG_COLUMNS = (
    "sequence",
    "item_id",
    "audited_value",
    "note",
    "action",
    "entered_by",
    "entered_at",
    "source",
    "source_row",
)

#: What :func:`sample_frame` may do with selected items that have no audited value.
#:
#: ``"error"`` (default)
#:     refuse: every selected item must be audited before evaluation.
#: ``"at_book_value"``
#:     take the audited value equal to the book value, i.e. treat the item as
#:     correct. This assumes what the audit was meant to find out; use it only
#:     where the auditor has another basis for it, and say so.
#: ``"as_zero"``
#:     take the audited value as 0, i.e. treat the item as misstated by its
#:     whole book value: the conservative choice for a test of overstatement.
#:
#: Dropping the missing items is deliberately not offered: it would change
#: the sample design (fewer items than planned in a stratum, not chosen at
#: random) without saying so. That common-practice reasoning has no single
#: published source.
MISSING_TREATMENTS = ("error", "at_book_value", "as_zero")

_ACTIONS = ("new", "replace", "repeat")


def _now_utc(at: datetime | None = None) -> str:
    if at is None:
        at = datetime.now(timezone.utc)
    elif at.tzinfo is None or at.utcoffset() is None:
        raise ParameterError("entered_at", "must carry a time zone (e.g. datetime.now(timezone.utc))")
    return at.astimezone(timezone.utc).isoformat(timespec="milliseconds")


def _default_user() -> str:
    try:
        return getpass.getuser()
    except (KeyError, OSError, ImportError):  # no login name available (some containers)
        return "unknown"


def _clean_note(note: object) -> str | None:
    if note is None or (isinstance(note, float) and math.isnan(note)) or note is pd.NA:
        return None
    if not isinstance(note, str):
        raise ParameterError("note", f"must be text or None, got {type(note).__name__}")
    return note if note.strip() else None


_TEXT_LOG_COLUMNS = ("item_id", "note", "action", "entered_by", "entered_at", "source")


def _typed_log(log: pd.DataFrame) -> pd.DataFrame:
    """The log with fixed column types: text as Python ``str`` objects (None when absent)."""
    out = pd.DataFrame(index=range(len(log)))
    out["sequence"] = log["sequence"].to_numpy(dtype=np.int64)
    for c in LOG_COLUMNS[1:]:
        if c == "audited_value":
            out[c] = log[c].to_numpy(dtype=np.float64)
        elif c == "source_row":
            out[c] = pd.array([None if pd.isna(v) else int(v) for v in log[c]], dtype="Int64")
        else:
            col = pd.Series(log[c].to_numpy(dtype=object), dtype=object)
            out[c] = col.where(col.notna(), None)
    return out


def _empty_log() -> pd.DataFrame:
    return _typed_log(pd.DataFrame({c: [] for c in LOG_COLUMNS}))


def _check_selection(selection: object, table: str = "selection") -> pd.DataFrame:
    df = require_frame(selection, table)
    require_columns(df, ["item_id", "stratum"], table)
    out = df[["item_id", "stratum"]].reset_index(drop=True).copy()
    out["item_id"] = out["item_id"].astype(object)
    if out["item_id"].isna().any() or not all(isinstance(v, str) for v in out["item_id"]):
        raise InputError("item ids must be text with no blanks", table=table, column="item_id")
    dup = out["item_id"].duplicated(keep=False).to_numpy()
    if dup.any():
        raise InputError(
            "an item is listed more than once",
            table=table,
            column="item_id",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(dup)],
        )
    return out


def _id_list(ids: Iterable[str]) -> str:
    ids = list(ids)
    shown = ", ".join(repr(i) for i in ids[:5])
    return shown + (f" and {len(ids) - 5} more" if len(ids) > 5 else "")


@dataclass(frozen=True)
class Results(RecordMixin):
    """Audited values entered for the selected items, with every entry kept.

    Build one with :meth:`start` (empty) or :meth:`from_log` (from saved
    entries), then add entries with :meth:`record`, :meth:`record_table` or
    :func:`record_results_file`; each returns a new record.

    Attributes
    ----------
    selection:
        The selected items that may receive a result: ``item_id``, ``stratum``.
    log:
        Every entry in the order made (columns :data:`LOG_COLUMNS`).
        ``action`` is ``"new"`` (first value for the item), ``"replace"``
        (a different value, entered with ``replace=True``) or ``"repeat"``
        (the value the item already had, possibly with a new note).
    """

    selection: pd.DataFrame
    log: pd.DataFrame

    record_kind = "results"

    # ------------------------------------------------------------------ building

    @classmethod
    def start(cls, selection: pd.DataFrame) -> Results:
        """No results yet, for the items of ``selection`` (columns ``item_id``, ``stratum``)."""
        return cls(selection=_check_selection(selection), log=_empty_log())

    @classmethod
    def from_log(cls, selection: pd.DataFrame, entries: Iterable[Mapping[str, Any]]) -> Results:
        """Rebuild the record from saved entries (e.g. the lines of a JSONL log).

        Each entry is a mapping with the keys of :data:`LOG_COLUMNS`. The
        entries are checked for consistency (known items, numeric values,
        valid actions, no change of value without ``"replace"``); any
        problem raises :class:`InputError` with ``table="results log"`` and
        the 1-based entry numbers in ``rows``.
        """
        sel = _check_selection(selection)
        rows = list(entries)
        log = _empty_log()
        if not rows:
            return cls(selection=sel, log=log)
        bad: list[int] = []
        records = []
        for pos, e in enumerate(rows, start=1):
            if not isinstance(e, Mapping) or any(k not in e for k in LOG_COLUMNS):
                bad.append(pos)
                continue
            v = e["audited_value"]
            if (
                not isinstance(e["item_id"], str)
                or isinstance(v, bool)
                or not isinstance(v, Real)
                or not math.isfinite(float(v))
                or e["action"] not in _ACTIONS
                or not isinstance(e["entered_at"], str)
                or (e["note"] is not None and not isinstance(e["note"], str))
            ):
                bad.append(pos)
                continue
            records.append({k: e[k] for k in LOG_COLUMNS})
        if bad:
            raise InputError(
                "entries without the expected fields "
                f"({', '.join(LOG_COLUMNS)}) or with values of the wrong type",
                table="results log",
                rows=bad,
            )
        log = _typed_log(pd.DataFrame.from_records(records, columns=list(LOG_COLUMNS)))
        unknown = ~log["item_id"].isin(set(sel["item_id"]))
        if unknown.any():
            raise InputError(
                f"entries for items not in the selection: {_id_list(log.loc[unknown, 'item_id'].unique())}",
                table="results log",
                rows=(np.flatnonzero(unknown.to_numpy()) + 1).tolist(),
            )
        if not log["sequence"].is_monotonic_increasing or log["sequence"].duplicated().any():
            raise InputError("entry numbers (sequence) are not increasing", table="results log")
        _check_log_consistency(log)
        return cls(selection=sel, log=log.reset_index(drop=True))

    # ------------------------------------------------------------------ reading

    @property
    def current(self) -> pd.DataFrame:
        """The current audited value of each item that has one, in selection order.

        Columns ``item_id``, ``stratum``, ``audited_value``, ``note`` (the
        latest note given since the value was last set), ``entered_by``,
        ``entered_at``, ``source``, ``source_row`` (of the entry that set the
        value) and ``entries`` (how many log entries the item has).
        """
        log = self.log
        cols = ["item_id", "stratum", "audited_value", "note", "entered_by", "entered_at", "source", "source_row", "entries"]
        if log.empty:
            out = pd.DataFrame({c: pd.Series(dtype=object) for c in cols})
            out["audited_value"] = out["audited_value"].astype(np.float64)
            out["entries"] = out["entries"].astype(np.int64)
            return out
        sets = (log["action"] != "repeat").astype(np.int64)
        version = sets.groupby(log["item_id"]).cumsum()
        latest = version == version.groupby(log["item_id"]).transform("max")
        kept = log[latest]
        setter = kept[kept["action"] != "repeat"].set_index("item_id")
        notes = kept.groupby("item_id")["note"].last()  # last non-missing note
        counts = log.groupby("item_id").size()
        out = self.selection.merge(
            setter[["audited_value", "entered_by", "entered_at", "source", "source_row"]],
            left_on="item_id",
            right_index=True,
            how="inner",
        )
        out["note"] = out["item_id"].map(notes).astype(object)
        out["note"] = out["note"].where(out["note"].notna(), None)
        out["entries"] = out["item_id"].map(counts).astype(np.int64)
        return out[cols].reset_index(drop=True)

    def value_of(self, item_id: str) -> float | None:
        """The current audited value of one item, or None if it has none yet."""
        cur = self.current
        hit = cur.loc[cur["item_id"] == item_id, "audited_value"]
        return None if hit.empty else float(hit.iloc[0])

    # ------------------------------------------------------------------ entering

    def record(
        self,
        item_id: str,
        audited_value: float | str,
        note: str | None = None,
        *,
        replace: bool = False,
        entered_by: str | None = None,
        entered_at: datetime | None = None,
        population_ids: Iterable[str] | None = None,
        decimal: str = ".",
    ) -> Results:
        """Enter the audited value of one item; returns the new record.

        Parameters
        ----------
        item_id:
            A selected item.
        audited_value:
            A finite number, or text read by
            :func:`~auditmean.amounts.parse_amounts` (``decimal`` as there).
        note:
            Optional text kept with the entry.
        replace:
            Needed to give an item a value different from the one it has; the
            earlier value stays in the log.
        entered_by:
            Who made the entry; default the operating-system login name.
        entered_at:
            When (time-zone aware); default now. Stored in UTC, ISO 8601.
        population_ids:
            All item ids of the population, if available, so that an id
            outside the population is told apart from one not selected.
        """
        if not isinstance(item_id, str):
            raise ParameterError("item_id", f"must be text, got {type(item_id).__name__}")
        if isinstance(audited_value, bool) or not isinstance(audited_value, (Real, str)):
            raise ParameterError(
                "audited_value", f"must be a number or text, got {type(audited_value).__name__}"
            )
        value = parse_amounts([audited_value], decimal=decimal, column="audited_value", table="entry")[0]
        entries = pd.DataFrame(
            {"item_id": [item_id], "audited_value": [value], "note": [_clean_note(note)], "row": [None]}
        )
        return self._add(
            entries,
            replace=replace,
            entered_by=entered_by,
            entered_at=entered_at,
            source="entry",
            file=None,
            population_ids=population_ids,
        )

    def record_table(
        self,
        entries: pd.DataFrame,
        *,
        replace: bool = False,
        entered_by: str | None = None,
        entered_at: datetime | None = None,
        source: str = "table",
        file: str | None = None,
        population_ids: Iterable[str] | None = None,
    ) -> Results:
        """Enter many audited values at once: all of them, or none if any is wrong.

        ``entries`` has columns ``item_id`` (text), ``audited_value`` (finite
        numbers), optionally ``note`` and ``row`` (the spreadsheet row each
        came from, used in messages and kept in the log), as returned by
        :func:`read_results_file`. Other arguments as for :meth:`record`;
        ``file`` names the file in messages and in the log's ``source``.
        """
        df = require_frame(entries, "entries", file)
        require_columns(df, ["item_id", "audited_value"], "entries", file)
        df = df.reset_index(drop=True)
        if "row" in df.columns:
            rows = df["row"]
        else:
            rows = pd.Series([spreadsheet_row(i) for i in range(len(df))], dtype=object)
        values = df["audited_value"].to_numpy(dtype=float, na_value=np.nan)
        if not np.isfinite(values).all():
            raise InputError(
                "audited values must be finite numbers",
                file=file,
                table=None if file else "entries",
                column="audited_value",
                rows=[int(r) for r in rows[~np.isfinite(values)]],
            )
        notes = df["note"].map(_clean_note) if "note" in df.columns else pd.Series([None] * len(df), dtype=object)
        clean = pd.DataFrame(
            {"item_id": df["item_id"].astype(object), "audited_value": values, "note": notes.astype(object), "row": rows.astype(object)}
        )
        return self._add(
            clean,
            replace=replace,
            entered_by=entered_by,
            entered_at=entered_at,
            source=f"file {file}" if file else source,
            file=file,
            population_ids=population_ids,
        )

    def _add(
        self,
        entries: pd.DataFrame,
        *,
        replace: bool,
        entered_by: str | None,
        entered_at: datetime | None,
        source: str,
        file: str | None,
        population_ids: Iterable[str] | None,
    ) -> Results:
        if not isinstance(replace, bool):
            raise ParameterError("replace", f"must be True or False, got {replace!r}")
        if entered_by is not None and (not isinstance(entered_by, str) or not entered_by.strip()):
            raise ParameterError("entered_by", "must be non-empty text or None")
        who = entered_by if entered_by is not None else _default_user()
        when = _now_utc(entered_at)
        where = {"file": file} if file else {"table": "entry" if source == "entry" else "entries"}
        ids = entries["item_id"]
        rows = entries["row"]

        def row_list(mask: np.ndarray) -> list[int]:
            return [int(r) for r in rows[mask] if r is not None and not pd.isna(r)]

        problems: list[str] = []
        bad_rows: list[int] = []

        def problem(mask: np.ndarray, text: str) -> None:
            shown = row_list(mask)
            where_rows = f" (row{'s' if len(shown) != 1 else ''} {', '.join(map(str, shown[:10]))}{' ...' if len(shown) > 10 else ''})" if shown else ""
            problems.append(f"{text}{where_rows}")
            bad_rows.extend(shown)

        not_text = ~ids.map(lambda v: isinstance(v, str) and v.strip() != "").to_numpy(dtype=bool)
        if not_text.any():
            problem(not_text, f"{int(not_text.sum())} blank or non-text item ids")
        ids_ok = ids.where(~not_text, None)
        dup = ids_ok.duplicated(keep=False).to_numpy() & ~not_text
        if dup.any():
            problem(dup, f"the same item more than once: {_id_list(ids_ok[dup].unique())}")
        selected = set(self.selection["item_id"])
        outside = ~ids_ok.isin(selected).to_numpy() & ~not_text
        if outside.any():
            if population_ids is not None:
                population = set(population_ids)
                unknown = outside & ~ids_ok.isin(population).to_numpy()
                not_selected = outside & ~unknown
            else:
                unknown = np.zeros(len(ids), dtype=bool)
                not_selected = outside
            if unknown.any():
                problem(unknown, f"item ids not in the population: {_id_list(ids_ok[unknown])}")
            if not_selected.any():
                problem(
                    not_selected,
                    ("items not in the selection" if population_ids is not None else "item ids not in the selection")
                    + f": {_id_list(ids_ok[not_selected])}",
                )

        current = self.current.set_index("item_id")
        have = ids_ok.isin(set(current.index)).to_numpy() & ~dup & ~not_text
        old_values = ids_ok[have].map(current["audited_value"])
        differs = np.zeros(len(ids), dtype=bool)
        differs[np.flatnonzero(have)] = (old_values.to_numpy(dtype=float) != entries["audited_value"].to_numpy(dtype=float)[have])
        if differs.any() and not replace:
            shown = [
                f"{i!r} has {format_number(current.at[i, 'audited_value'])} "
                f"(entered {current.at[i, 'entered_at']} by {current.at[i, 'entered_by']}), new {format_number(v)}"
                for i, v in zip(ids_ok[differs][:5], entries["audited_value"][differs][:5])
            ]
            more = int(differs.sum()) - len(shown)
            problem(
                differs,
                "items already have a different audited value: "
                + "; ".join(shown)
                + (f"; and {more} more" if more > 0 else "")
                + ". Pass replace=True to replace them (the earlier values stay in the history)",
            )
        if problems:
            raise InputError(
                f"{len(problems)} problem{'s' if len(problems) > 1 else ''}, nothing recorded: " + "; ".join(problems),
                rows=sorted(set(bad_rows)),
                **where,
            )

        action = np.where(have, np.where(differs, "replace", "repeat"), "new").astype(object)
        start = int(self.log["sequence"].max()) + 1 if len(self.log) else 1
        new = pd.DataFrame(
            {
                "sequence": np.arange(start, start + len(entries), dtype=np.int64),
                "item_id": ids_ok.to_numpy(dtype=object),
                "audited_value": entries["audited_value"].to_numpy(dtype=float),
                "note": entries["note"].to_numpy(dtype=object),
                "action": action,
                "entered_by": who,
                "entered_at": when,
                "source": source,
                "source_row": pd.array(
                    [None if r is None or pd.isna(r) else int(r) for r in rows] if source != "entry" else [None] * len(entries),
                    dtype="Int64",
                ),
            }
        )
        log = _typed_log(new if self.log.empty else pd.concat([self.log, _typed_log(new)], ignore_index=True))
        return Results(selection=self.selection, log=log)

    # ------------------------------------------------------------------ people

    def summary(self) -> str:
        cur = self.current
        sel = self.selection
        per = sel.groupby("stratum", sort=True).size().rename("selected").to_frame()
        per["entered"] = cur.groupby("stratum").size().reindex(per.index, fill_value=0)
        per["missing"] = per["selected"] - per["entered"]
        rows = [[s, int(r.selected), int(r.entered), int(r.missing)] for s, r in per.iterrows()]
        replaced = int((self.log["action"] == "replace").sum())
        head = (
            f"Results: {len(cur)} of {len(sel)} selected items have an audited value; "
            f"{len(self.log)} entries in the history, {replaced} of them replacing an earlier value"
        )
        return head + "\n" + text_table(["stratum", "selected", "entered", "missing"], rows)


def _check_log_consistency(log: pd.DataFrame) -> None:
    """Each item's first entry is "new"; values change only with "replace"."""
    first = ~log["item_id"].duplicated(keep="first")
    prev = log.groupby("item_id")["audited_value"].shift(1)
    problems = (first & (log["action"] != "new")) | (~first & (log["action"] == "new"))
    changed = ~first & (log["audited_value"] != prev)
    problems |= changed & (log["action"] != "replace")
    problems |= ~first & ~changed & (log["action"] == "replace")
    if problems.any():
        raise InputError(
            "entries whose action does not fit the item's earlier entries "
            "(a first entry must be 'new', a changed value 'replace', an unchanged one 'repeat')",
            table="results log",
            rows=(np.flatnonzero(problems.to_numpy()) + 1).tolist(),
        )


# ---------------------------------------------------------------------------
# files


def _ids_as_text(raw: pd.Series, file: str, column: str) -> pd.Series:
    """Item ids as text, read as :func:`auditmean.population.load_population` reads them.

    Text cells without surrounding white space (:meth:`str.strip`), whole-number
    cells (an Excel cell holding 1001) as their digits; anything else is refused.
    """

    def one(v: Any) -> Any:
        if isinstance(v, str):
            return v.strip()
        if isinstance(v, (int, np.integer)) and not isinstance(v, (bool, np.bool_)):
            return str(int(v))
        return None if v is None or (isinstance(v, float) and math.isnan(v)) else v

    ids = raw.map(one).astype(object)
    wrong = ~ids.map(lambda v: v is None or isinstance(v, str)).to_numpy(dtype=bool)
    if wrong.any():
        raise InputError(
            "item ids must be text or whole numbers; format the column as text in the workbook",
            file=file,
            column=column,
            rows=[spreadsheet_row(i) for i in np.flatnonzero(wrong)],
        )
    blank = ids.map(lambda v: v is None or v.strip() == "").to_numpy(dtype=bool)
    if blank.any():
        raise InputError(
            "blank item ids; every row needs the id of the item audited",
            file=file,
            column=column,
            rows=[spreadsheet_row(i) for i in np.flatnonzero(blank)],
        )
    return ids


def read_results_file(
    path: str | os.PathLike[str],
    *,
    id_column: str,
    value_column: str,
    note_column: str | None = None,
    decimal: str = ".",
    sheet: str | int | None = None,
) -> pd.DataFrame:
    """Read a results file (CSV, TSV or Excel): item id, audited value, optional note.

    Parameters
    ----------
    path:
        The file; read by :func:`auditmean.tables.read_table` (CSV cells as text).
    id_column, value_column, note_column:
        Names of the columns holding the item id, the audited value and the note.
    decimal:
        Decimal mark of the amounts, ``"."`` or ``","``
        (see :func:`~auditmean.amounts.parse_amounts`).
    sheet:
        Excel sheet name or 0-based position (default the first).

    Returns
    -------
    pandas.DataFrame
        ``item_id`` (surrounding white space removed, whole-number cells as
        digits, as the population intake does), ``audited_value`` (float64),
        ``note`` (text or None) and
        ``row`` (the spreadsheet row of each entry), one row per data row.

    Raises
    ------
    InputError
        Naming the file, and the rows: missing columns, blank ids, amounts
        that cannot be read or are blank (every row must carry a value; leave
        items not yet audited out of the file), or an item listed twice.
    """
    file = str(path)
    for name, col in (("id_column", id_column), ("value_column", value_column)):
        if not isinstance(col, str):
            raise ParameterError(name, f"must be a column name (text), got {col!r}")
    if note_column is not None and not isinstance(note_column, str):
        raise ParameterError("note_column", f"must be a column name (text) or None, got {note_column!r}")
    df = read_table(Path(path), sheet=sheet)
    wanted = [id_column, value_column] + ([note_column] if note_column else [])
    require_columns(df, wanted, "results", file)
    df = df.reset_index(drop=True)
    ids = _ids_as_text(df[id_column], file, id_column)
    values = parse_amounts(df[value_column], decimal=decimal, column=value_column, file=file)
    if note_column:
        notes = pd.Series(
            [
                None if v is None or v is pd.NA or (isinstance(v, float) and math.isnan(v)) else _clean_note(str(v))
                for v in df[note_column].astype(object)
            ],
            dtype=object,
        )
    else:
        notes = pd.Series([None] * len(df), dtype=object)
    dup = ids.duplicated(keep=False).to_numpy()
    if dup.any():
        raise InputError(
            f"the same item more than once: {_id_list(ids[dup].unique())}; give each item one row",
            file=file,
            column=id_column,
            rows=[spreadsheet_row(i) for i in np.flatnonzero(dup)],
        )
    return pd.DataFrame(
        {
            "item_id": ids,
            "audited_value": values,
            "note": notes.astype(object),
            "row": [spreadsheet_row(i) for i in range(len(df))],
        }
    )


def record_results_file(
    results: Results,
    path: str | os.PathLike[str],
    *,
    id_column: str,
    value_column: str,
    note_column: str | None = None,
    decimal: str = ".",
    sheet: str | int | None = None,
    replace: bool = False,
    entered_by: str | None = None,
    entered_at: datetime | None = None,
    population_ids: Iterable[str] | None = None,
) -> Results:
    """Read a results file (:func:`read_results_file`) and enter all of it, or none.

    Problems across the whole file (unknown ids, items not selected, values
    that differ from those already entered without ``replace=True``) are
    reported together in one :class:`InputError` naming the file and rows.
    """
    if not isinstance(results, Results):
        raise ParameterError("results", f"must be a Results record, got {type(results).__name__}")
    entries = read_results_file(
        path, id_column=id_column, value_column=value_column, note_column=note_column, decimal=decimal, sheet=sheet
    )
    return results.record_table(
        entries,
        replace=replace,
        entered_by=entered_by,
        entered_at=entered_at,
        file=str(path),
        population_ids=population_ids,
    )


# ---------------------------------------------------------------------------
# completeness and the frame for estimation


def _current_values(results: object) -> pd.DataFrame:
    if isinstance(results, Results):
        cur = results.current
        return cur[["item_id", "audited_value", "note"]]
    df = require_frame(results, "results")
    require_columns(df, ["item_id", "audited_value"], "results")
    out = df[["item_id", "audited_value"]].copy()
    out["note"] = df["note"] if "note" in df.columns else None
    dup = out["item_id"].duplicated(keep=False).to_numpy()
    if dup.any():
        raise InputError(
            "an item has more than one audited value",
            table="results",
            column="item_id",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(dup)],
        )
    values = out["audited_value"].to_numpy(dtype=float, na_value=np.nan)
    if not np.isfinite(values).all():
        raise InputError(
            "audited values must be finite numbers (leave out items not yet audited)",
            table="results",
            column="audited_value",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(~np.isfinite(values))],
        )
    return out


def missing_items(selection: pd.DataFrame, results: Results | pd.DataFrame) -> pd.DataFrame:
    """The selected items that have no audited value yet, in selection order.

    ``results`` is a :class:`Results` record or a DataFrame with ``item_id``
    and ``audited_value``. Returns the rows of ``selection`` (all its
    columns) for the items without a value.
    """
    sel = require_frame(selection, "selection")
    _check_selection(sel)
    cur = _current_values(results)
    return sel[~sel["item_id"].isin(set(cur["item_id"]))].reset_index(drop=True)


@dataclass(frozen=True)
class SampleFrame(RecordMixin):
    """The sample ready for estimation, and how items without a result were treated.

    Attributes
    ----------
    frame:
        One row per selected item: ``stratum``, ``item_id``, ``book_value``,
        ``audited_value``, ``note`` and ``audited_source`` (``"entered"``, or
        the treatment applied to an item with no audited value).
    missing_treatment:
        The treatment chosen (one of :data:`MISSING_TREATMENTS`).
    missing:
        ``item_id`` and ``stratum`` of the items that had no audited value.
    """

    frame: pd.DataFrame
    missing_treatment: str
    missing: pd.DataFrame

    record_kind = "sample_frame"

    def summary(self) -> str:
        f = self.frame
        per = f.groupby("stratum", sort=True).agg(
            items=("item_id", "size"),
            book=("book_value", "sum"),
            audited=("audited_value", "sum"),
        )
        per["not audited"] = self.missing.groupby("stratum").size().reindex(per.index, fill_value=0)
        rows = [
            [s, int(r["items"]), format_number(r["book"]), format_number(r["audited"]), int(r["not audited"])]
            for s, r in per.iterrows()
        ]
        head = f"Sample of {len(f)} items; items without an audited value: {len(self.missing)}"
        if len(self.missing):
            head += f", treated as {self.missing_treatment!r}"
        return head + "\n" + text_table(["stratum", "items", "book value", "audited value", "not audited"], rows)


def sample_frame(
    selection: pd.DataFrame,
    results: Results | pd.DataFrame,
    population: pd.DataFrame,
    *,
    missing_treatment: str = "error",
) -> SampleFrame:
    """Join selection, audited values and book values into the frame for estimation.

    Parameters
    ----------
    selection:
        ``item_id`` and ``stratum`` of the selected items (as :func:`auditmean.selection.select`).
    results:
        A :class:`Results` record or a DataFrame with ``item_id``,
        ``audited_value`` and optionally ``note``.
    population:
        A DataFrame with ``item_id`` and ``book_value`` for (at least) every
        selected item, e.g. ``Population.items``.
    missing_treatment:
        What to do with selected items that have no audited value: one of
        :data:`MISSING_TREATMENTS`; ``"error"`` (default) refuses a partial set.

    Returns
    -------
    SampleFrame
        ``frame`` with columns ``stratum``, ``item_id``, ``book_value``,
        ``audited_value``, ``note``, ``audited_source``, in selection order;
        the treatment used and the items it was applied to.
    """
    if missing_treatment not in MISSING_TREATMENTS:
        raise ParameterError(
            "missing_treatment", f"must be one of {', '.join(map(repr, MISSING_TREATMENTS))}, got {missing_treatment!r}"
        )
    sel = _check_selection(selection)
    cur = _current_values(results)
    pop = require_frame(population, "population")
    require_columns(pop, ["item_id", "book_value"], "population")

    extra = ~cur["item_id"].isin(set(sel["item_id"]))
    if extra.any():
        raise InputError(
            f"audited values for items not in the selection: {_id_list(cur.loc[extra, 'item_id'])}",
            table="results",
            column="item_id",
        )
    dup = pop["item_id"].duplicated(keep=False).to_numpy()
    if dup.any():
        raise InputError(
            "duplicate item ids",
            table="population",
            column="item_id",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(dup)],
        )
    book = pop[["item_id", "book_value"]]
    frame = sel.merge(book, on="item_id", how="left", validate="one_to_one")
    no_book = frame["book_value"].isna().to_numpy()
    if no_book.any():
        raise InputError(
            f"selected items not in the population (or without a book value): {_id_list(frame.loc[no_book, 'item_id'])}",
            table="selection",
            rows=[spreadsheet_row(i) for i in np.flatnonzero(no_book)],
        )
    frame["book_value"] = frame["book_value"].astype(np.float64)
    frame = frame.merge(cur, on="item_id", how="left")
    absent = frame["audited_value"].isna().to_numpy()
    missing = frame.loc[absent, ["item_id", "stratum"]].reset_index(drop=True)
    if absent.any() and missing_treatment == "error":
        raise InputError(
            f"{int(absent.sum())} of {len(frame)} selected items have no audited value yet: "
            f"{_id_list(missing['item_id'])}. Enter them, or choose how to treat them: "
            "missing_treatment='at_book_value' (treat as correct) or 'as_zero' (treat as fully "
            "misstated); on the command line, --missing at_book_value or --missing as_zero",
            table="results",
        )
    source = np.where(absent, f"missing: {missing_treatment}", "entered").astype(object)
    if missing_treatment == "at_book_value":
        frame.loc[absent, "audited_value"] = frame.loc[absent, "book_value"]
    elif missing_treatment == "as_zero":
        frame.loc[absent, "audited_value"] = 0.0
    frame["audited_value"] = frame["audited_value"].astype(np.float64)
    frame["note"] = frame["note"].astype(object).where(frame["note"].notna(), None)
    frame["audited_source"] = source
    frame = frame[["stratum", "item_id", "book_value", "audited_value", "note", "audited_source"]]
    return SampleFrame(frame=frame.reset_index(drop=True), missing_treatment=missing_treatment, missing=missing)
