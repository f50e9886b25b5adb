"""One folder per engagement: every step saved, resumable, nothing typed ever lost.

Layout of the folder (all text is UTF-8; JSON files carry ``schema_version``)::

    engagement.json      created when, by which version, and the population's
                         fingerprint (file and content SHA-256), source path
                         and column names
    plan.json            the sample plan, as a plain JSON object
    selection.json       the record of the selection: seed (exactly as given),
                         sizes per stratum, the selected items with key and order
    selection.csv        the same items as a table for people (item_id,
                         stratum, key, order)
                         (a monetary-unit selection, kind
                         "monetary_unit_selection", holds instead the
                         sample size in monetary units and the positive book
                         total in cents, and per item book_value, hits,
                         examined_in_full, units, unit_from, unit_to; its
                         copy has those columns and a ``stratum`` column
                         grouping the items "in full" and "by units")
    results_log.jsonl    every results entry ever made, one JSON object a line;
                         the current results are rebuilt from it
    results.csv          the current audited values as a table for people
    evaluations/         each saved evaluation, one timestamped JSON file
    log.jsonl            a time-stamped line for each step taken

The ``.json`` and ``.jsonl`` files are the record. The two ``.csv`` files are
copies for people, rewritten from the record each time it changes; when
read back they must equal what the record gives, so an edited or truncated
copy is reported (:meth:`Engagement.rewrite_copies` rewrites them).

Every file is written through :mod:`auditmean._atomic` (a whole new file
replaces the old one in one step), so an interrupted write leaves the
previous version. A file that cannot be read (corrupt or truncated JSON, a
CSV copy that no longer matches) raises :class:`~auditmean.errors.RecordError`
naming the file; reading never changes a record (only opening with a
population whose file bytes or column names differ, same content, adds a
line to the log saying so). The folder assumes one writer at a time.

At this layer plans and evaluations are plain JSON objects (``to_dict()`` of
the records); the population is any object, or mapping, with the fields
listed in :func:`population_fingerprint`.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
import os
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from auditmean._atomic import is_temporary, json_text, write_bytes_atomic, write_text_atomic
from auditmean._records import SCHEMA_VERSION, RecordMixin, json_safe, text_table
from auditmean._version import __version__
from auditmean.errors import (
    AuditMeanError,
    InputError,
    ParameterError,
    RecordError,
    spreadsheet_row,
)
from auditmean.results import Results, SampleFrame, record_results_file, sample_frame
from auditmean.selection import _check_seed, _sorted_labels, item_keys, verify_selection

__all__ = [
    "Engagement",
    "EngagementStatus",
    "population_fingerprint",
    "FILES",
    "MONETARY_UNIT_GROUPS",
    "MONETARY_UNIT_SELECTION_KIND",
]

#: File names inside an engagement folder.
FILES = {
    "engagement": "engagement.json",
    "plan": "plan.json",
    "selection": "selection.json",
    "selection_copy": "selection.csv",
    "results_log": "results_log.jsonl",
    "results_copy": "results.csv",
    "evaluations": "evaluations",
    "log": "log.jsonl",
}

_SELECTION_COPY_COLUMNS = ("item_id", "stratum", "key", "order")

#: Kind of the selection record of a monetary-unit design (``selection.json``).
MONETARY_UNIT_SELECTION_KIND = "monetary_unit_selection"
#: The ``stratum``-like groups of a monetary-unit selection: items examined in
#: full (book value at or above the sampling interval), and the rest, reached
#: by the monetary units drawn.
MONETARY_UNIT_GROUPS = ("in full", "by units")
#: Per-item fields of a monetary-unit selection record, in this order.
_MONETARY_UNIT_ITEM_FIELDS = ("item_id", "book_value", "hits", "examined_in_full", "units", "unit_from", "unit_to")
_MONETARY_UNIT_COPY_COLUMNS = (
    "item_id",
    "stratum",
    "book_value",
    "hits",
    "examined_in_full",
    "units",
    "unit_from",
    "unit_to",
)
_RESULTS_COPY_COLUMNS = (
    "item_id",
    "stratum",
    "audited_value",
    "note",
    "entered_by",
    "entered_at",
    "source",
    "entries",
)


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="microseconds")


def _user() -> str:
    try:
        import getpass

        return getpass.getuser()
    except (KeyError, OSError, ImportError):
        return "unknown"


def _sha256_file(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _get(obj: Any, *names: str) -> Any:
    for name in names:
        if isinstance(obj, Mapping):
            if name in obj:
                return obj[name]
        elif hasattr(obj, name):
            return getattr(obj, name)
    return None


def population_fingerprint(population: Any) -> dict[str, Any]:
    """What an engagement records about its population.

    ``population`` is the record of :func:`auditmean.population.load_population`
    or any object or mapping with these fields:

    ``content_sha256`` (required), ``file_sha256``
        SHA-256 (64 hex digits) of the content as read and of the file's
        bytes; ``file_sha256`` is None for a population given as a DataFrame.
    ``source`` (or ``path``, ``file``)
        The population file's path.
    ``id_column``, ``value_column``, ``stratum_column``
        The column names used; ``stratum_column`` may be None.
    ``items``
        The items table (``item_id``, ``book_value``, ...); its row count is recorded.
    """
    out: dict[str, Any] = {}
    for name in ("file_sha256", "content_sha256"):
        v = _get(population, name)
        if v is None and name == "file_sha256":  # a population built from a DataFrame has no file
            out[name] = None
            continue
        if not _is_sha256(v):
            raise ParameterError(
                "population", f"needs {name} as 64 hexadecimal digits (a SHA-256), got {v!r}"
            )
        out[name] = v.lower()
    src = _get(population, "source", "path", "file")
    out["source"] = None if src is None else str(src)
    for name in ("id_column", "value_column", "stratum_column"):
        v = _get(population, name)
        out[name] = None if v is None else str(v)
    items = _get(population, "items")
    count = _get(population, "count")  # a population read from a large file holds no items table
    out["n_items"] = (
        int(len(items)) if isinstance(items, pd.DataFrame) else (int(count) if isinstance(count, (int, np.integer)) else None)
    )
    return out


def _is_sha256(v: Any) -> bool:
    return isinstance(v, str) and len(v) == 64 and all(c in "0123456789abcdef" for c in v.lower())


def _label_ok(v: Any) -> bool:
    if isinstance(v, bool):
        return False
    if isinstance(v, str):
        return True
    if isinstance(v, int):
        return True
    return isinstance(v, float) and math.isfinite(v)


def _plain(v: Any) -> Any:
    return v.item() if isinstance(v, np.generic) else v


def _csv_bytes(rows: list[list[Any]], header: tuple[str, ...]) -> bytes:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    for r in rows:
        w.writerow(["" if v is None else (repr(v) if isinstance(v, float) else str(v)) for v in r])
    return buf.getvalue().encode("utf-8")


@dataclass(frozen=True)
class EngagementStatus(RecordMixin):
    """Which steps of an engagement are done and what comes next.

    Attributes
    ----------
    folder:
        The engagement folder.
    steps:
        One row per step (``population``, ``plan``, ``selection``,
        ``results``, ``evaluation``): ``done`` (bool) and ``detail``.
    next_step:
        Plain words for what to do next.
    leftover_files:
        Temporary files left by an interrupted write (ignored; safe to delete).
    """

    folder: str
    steps: pd.DataFrame
    next_step: str
    leftover_files: tuple[str, ...]

    record_kind = "engagement_status"

    def summary(self) -> str:
        rows = [[r.step, "done" if r.done else "-", r.detail] for r in self.steps.itertuples()]
        out = f"Engagement {self.folder}\n" + text_table(["step", "status", "detail"], rows)
        out += f"\nNext: {self.next_step}"
        if self.leftover_files:
            out += f"\n{len(self.leftover_files)} leftover temporary files from an interrupted write (ignored)"
        return out


class Engagement:
    """A handle on one engagement folder; every method reads or writes the folder.

    Create a folder with :meth:`create`, resume it with :meth:`open`. The
    handle caches nothing but the population given to it: each call reads
    the record from disk, so two handles on one folder agree (one writer at
    a time).
    """

    def __init__(self, folder: Path, info: dict[str, Any], population: Any | None) -> None:
        self._folder = folder
        self._info = info
        self._population = population

    # ------------------------------------------------------------------ paths

    @property
    def folder(self) -> Path:
        return self._folder

    @property
    def info(self) -> dict[str, Any]:
        """The content of ``engagement.json`` (a copy)."""
        return json.loads(json.dumps(self._info))

    @property
    def population(self) -> Any | None:
        """The population given to :meth:`create` or :meth:`open` (None if none was)."""
        return self._population

    def _path(self, key: str) -> Path:
        return self._folder / FILES[key]

    # ------------------------------------------------------------------ create / open

    @classmethod
    def create(cls, folder: str | os.PathLike[str], population: Any, *, created_by: str | None = None) -> Engagement:
        """Start an engagement in ``folder`` (new, or empty) for ``population``.

        Writes ``engagement.json`` with the schema version, the time (UTC),
        the auditmean version and :func:`population_fingerprint`.
        """
        path = Path(folder)
        fingerprint = population_fingerprint(population)
        if (path / FILES["engagement"]).exists():
            raise RecordError(
                str(path / FILES["engagement"]), "an engagement already exists here; use Engagement.open"
            )
        if path.exists() and not path.is_dir():
            raise RecordError(str(path), "is a file, not a folder")
        if path.exists() and any(not is_temporary(p) for p in path.iterdir()):
            raise RecordError(str(path), "the folder already holds files; choose a new or empty folder")
        path.mkdir(parents=True, exist_ok=True)
        info = {
            "schema_version": SCHEMA_VERSION,
            "kind": "engagement",
            "created": _now(),
            "created_by": created_by or _user(),
            "tool": "auditmean",
            "tool_version": __version__,
            "population": fingerprint,
        }
        write_text_atomic(path / FILES["engagement"], json_text(info))
        eng = cls(path, info, population)
        eng._log("created", population=fingerprint)
        return eng

    @classmethod
    def open(cls, folder: str | os.PathLike[str], population: Any | None = None) -> Engagement:
        """Resume the engagement in ``folder``.

        If ``population`` is given, its content fingerprint (``content_sha256``)
        must equal the recorded one, else :class:`RecordError`. When only the
        file's bytes (``file_sha256``; e.g. the same table saved again with
        other line endings) or the column names differ, the items are the
        same, so the engagement opens and the difference is written to the log.
        """
        path = Path(folder)
        epath = path / FILES["engagement"]
        if not epath.exists():
            raise RecordError(
                str(epath), "not an engagement folder (no engagement.json); start one with Engagement.create"
            )
        info = _read_json(epath)
        _check_info(epath, info)
        eng = cls(path, info, None)
        if population is not None:
            given = population_fingerprint(population)
            rec = info["population"]
            if given["content_sha256"] != rec["content_sha256"]:
                raise RecordError(
                    str(epath),
                    "the population given is not the one this engagement was built on: its content "
                    f"fingerprint is {given['content_sha256'][:16]}..., the recorded one "
                    f"{rec['content_sha256'][:16]}... (recorded source {rec.get('source')!r}, "
                    f"given {given['source']!r}). Open it with the original population file, or "
                    "start a new engagement for the new population",
                )
            renamed = {
                c: {"recorded": rec.get(c), "given": given[c]}
                for c in ("id_column", "value_column", "stratum_column")
                if given[c] != rec.get(c)
            }
            if renamed:  # same items under other column names (content fingerprint equal)
                eng._log("population read with other column names, same content", columns=renamed)
            if given["file_sha256"] != rec.get("file_sha256"):
                eng._log(
                    "population file differs in bytes, same content",
                    recorded_file_sha256=rec.get("file_sha256"),
                    given_file_sha256=given["file_sha256"],
                    given_source=given["source"],
                )
            eng._population = population
        return eng

    # ------------------------------------------------------------------ log

    def _read_jsonl(self, key: str) -> list[dict[str, Any]]:
        path = self._path(key)
        if not path.exists():
            return []
        try:
            text = path.read_bytes().decode("utf-8")
        except UnicodeDecodeError as exc:
            raise RecordError(str(path), f"is not UTF-8 text (byte {exc.start}); nothing was changed") from None
        out = []
        lines = text.split("\n")
        if lines and lines[-1] == "":
            lines.pop()
        elif lines:
            raise RecordError(str(path), "the last line is incomplete (truncated file); nothing was changed")
        for n, line in enumerate(lines, start=1):
            try:
                obj = json.loads(line)
            except json.JSONDecodeError as exc:
                raise RecordError(
                    str(path), f"line {n} is not valid JSON ({exc.msg}); the file is corrupt; nothing was changed"
                ) from None
            if not isinstance(obj, dict):
                raise RecordError(str(path), f"line {n} is not a JSON object; nothing was changed")
            out.append(obj)
        return out

    def _write_jsonl(self, key: str, entries: list[dict[str, Any]]) -> None:
        text = "".join(json.dumps(e, ensure_ascii=False, allow_nan=False) + "\n" for e in entries)
        write_text_atomic(self._path(key), text)

    def _preflight(self) -> None:
        """Read the step log before a change, so a corrupt log stops the change before it starts."""
        self._read_jsonl("log")

    def _log(self, step: str, **details: Any) -> None:
        entries = self._read_jsonl("log")
        entries.append({"at": _now(), "by": _user(), "step": step, **json_safe(details)})
        self._write_jsonl("log", entries)

    def log(self) -> list[dict[str, Any]]:
        """The step log (``log.jsonl``), oldest first."""
        return self._read_jsonl("log")

    # ------------------------------------------------------------------ plan

    def plan(self) -> dict[str, Any] | None:
        """The saved plan (``plan.json``), or None."""
        path = self._path("plan")
        return _read_json(path) if path.exists() else None

    def save_plan(self, plan: Mapping[str, Any], *, replace: bool = False) -> Path:
        """Save the plan (a JSON object, e.g. ``Plan.to_dict()``) as ``plan.json``.

        A saved plan is replaced only with ``replace=True`` (the earlier one
        stays in the log), and never once a selection has been saved.
        """
        if not isinstance(plan, Mapping):
            raise ParameterError("plan", f"must be a mapping (Plan.to_dict()), got {type(plan).__name__}")
        self._preflight()
        path = self._path("plan")
        if self._path("selection").exists():
            raise RecordError(
                str(path), "a selection has been drawn; the plan can no longer change in this engagement"
            )
        previous = self.plan()
        if previous is not None and not replace:
            raise RecordError(str(path), "a plan is already saved; pass replace=True to replace it")
        data = json_safe(dict(plan))
        write_text_atomic(path, json_text(data))
        self._log("plan saved", replaced=previous)
        return path

    # ------------------------------------------------------------------ selection

    def selection_record(self) -> dict[str, Any] | None:
        """The content of ``selection.json`` (seed, sizes or sample size, items), or None.

        The record is checked against its own rule before it is returned
        (keys and orders from the seed; for a monetary-unit selection, every
        draw recomputed from the seed and found in the item recorded for it).
        """
        path = self._path("selection")
        if not path.exists():
            return None
        rec = _read_json(path)
        if rec.get("kind") == MONETARY_UNIT_SELECTION_KIND:
            _check_monetary_unit_record(path, rec)
        else:
            _check_selection_record(path, rec)
        return rec

    def selection(self) -> pd.DataFrame | None:
        """The saved selection (``item_id``, ``stratum``, ``key``, ``key_int``, ``order``), or None.

        A monetary-unit selection has instead the columns ``item_id``,
        ``stratum`` (one of :data:`MONETARY_UNIT_GROUPS`), ``book_value``,
        ``hits``, ``examined_in_full``, ``units``, ``unit_from``, ``unit_to``.

        ``selection.csv`` is checked against the record; a copy that differs
        raises :class:`RecordError` naming it.
        """
        rec = self.selection_record()
        if rec is None:
            return None
        df = _selection_frame(rec)
        self._check_copy("selection_copy", self._selection_copy_bytes(df))
        return df

    def seed(self) -> str | None:
        """The saved selection's seed, exactly as given, or None."""
        rec = self.selection_record()
        return None if rec is None else rec["seed"]

    def sizes(self) -> dict[Any, int] | None:
        """The saved selection's sample size per stratum, or None (also for a monetary-unit selection)."""
        rec = self.selection_record()
        if rec is None or rec.get("kind") == MONETARY_UNIT_SELECTION_KIND:
            return None
        return {s["stratum"]: int(s["n"]) for s in rec["sizes"]}

    def save_selection(
        self,
        selection: pd.DataFrame,
        seed: str,
        sizes: Mapping[Any, int],
        *,
        frame: pd.DataFrame | None = None,
    ) -> Path:
        """Save a selection made by :func:`auditmean.selection.select` with ``seed`` and ``sizes``.

        Parameters
        ----------
        selection:
            Columns ``item_id``, ``stratum``, ``key``, ``order``.
        seed, sizes:
            As passed to ``select``; saved exactly.
        frame:
            The table selected from (``item_id``, ``stratum`` of every item).
            If given, the selection is re-performed from it
            (:func:`~auditmean.selection.verify_selection`) and must match.
            Without it, each key is recomputed from the seed, the orders must
            follow the keys and the counts must equal ``sizes``.

        A selection can be saved again only as an extension of the saved one
        (same seed; every earlier item kept with its stratum and order), so
        that results already entered stay valid.
        """
        self._preflight()
        path = self._path("selection")
        if path.exists() and _read_json(path).get("kind") == MONETARY_UNIT_SELECTION_KIND:
            raise RecordError(
                str(path), "a monetary-unit selection is saved; a stratified selection cannot replace it"
            )
        seed = _check_seed(seed)  # the same rules as select()
        if not isinstance(sizes, Mapping):
            raise ParameterError("sizes", f"must be a mapping stratum -> sample size, got {type(sizes).__name__}")
        sizes_list = []
        for s, n in sizes.items():
            s = _plain(s)
            if not _label_ok(s):
                raise ParameterError("sizes", f"stratum labels must be text or numbers to be saved, got {s!r}")
            if isinstance(n, bool) or not isinstance(_plain(n), int):
                raise ParameterError("sizes", f"stratum {s!r}: sample size must be a whole number, got {n!r}")
            sizes_list.append({"stratum": s, "n": int(n)})
        texts = [str(e["stratum"]) for e in sizes_list]
        if len(set(texts)) != len(texts):
            raise ParameterError("sizes", "two strata have labels that print the same (e.g. 1 and '1')")
        if not isinstance(selection, pd.DataFrame):
            raise InputError(f"expected a pandas DataFrame, got {type(selection).__name__}", table="selection")
        missing = [c for c in _SELECTION_COPY_COLUMNS if c not in selection.columns]
        if missing:
            raise InputError(f"missing columns {', '.join(map(repr, missing))}", table="selection", column=missing[0])
        sel = selection[list(_SELECTION_COPY_COLUMNS)].reset_index(drop=True).copy()
        sel["stratum"] = sel["stratum"].astype(object).map(_plain)
        order = pd.to_numeric(sel["order"], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        if not (np.isfinite(order) & (order == np.round(order))).all():
            raise InputError("order must hold whole numbers", table="selection", column="order")
        labels = _sorted_labels(list(pd.unique(sel["stratum"])))
        sel = (
            sel.assign(_s=sel["stratum"].map({s: i for i, s in enumerate(labels)}), order=sel["order"].astype(np.int64))
            .sort_values(["_s", "order"], kind="stable")
            .drop(columns="_s")
            .reset_index(drop=True)
        )
        _check_selection_rows(sel, seed, {e["stratum"]: e["n"] for e in sizes_list})
        verified = False
        if frame is not None:
            check = verify_selection(frame, dict(sizes), seed, sel)
            if not check.match:
                raise InputError(
                    "is not what the seed and sizes give from the frame:\n" + check.summary(), table="selection"
                )
            verified = True
        pop = self._population
        if pop is not None:
            items = _get(pop, "items")
            if isinstance(items, pd.DataFrame) and "item_id" in items.columns:
                outside = ~sel["item_id"].isin(set(items["item_id"]))
                if outside.any():
                    raise InputError(
                        f"{int(outside.sum())} selected items are not in the population, e.g. "
                        f"{sel.loc[outside, 'item_id'].iloc[0]!r}",
                        table="selection",
                    )

        previous = self.selection_record()
        history: list[dict[str, Any]] = []
        if previous is not None:
            if previous["seed"] != seed:
                raise RecordError(
                    str(path), "a selection with another seed is saved; only an extension of it can be saved"
                )
            old = _selection_frame(previous)
            merged = old.merge(sel, on="item_id", how="left", suffixes=("_old", "_new"))
            lost = merged["stratum_new"].isna() | (merged["stratum_old"] != merged["stratum_new"]) | (
                merged["order_old"] != merged["order_new"]
            )
            if lost.any():
                raise RecordError(
                    str(path),
                    "the new selection does not keep every saved item with its stratum and order "
                    f"(e.g. {merged.loc[lost, 'item_id'].iloc[0]!r}); only an extension can replace it",
                )
            history = previous.get("history", []) + [
                {"saved_at": previous["saved_at"], "sizes": previous["sizes"], "n_items": len(old)}
            ]

        record = {
            "schema_version": SCHEMA_VERSION,
            "kind": "selection",
            "saved_at": _now(),
            "seed": seed,
            "sizes": sizes_list,
            "rule": 'key = first 16 hex digits of SHA-256(UTF-8(seed + ":" + item_id)); '
            "per stratum the n smallest keys, ties by item_id",
            "verified_against_frame": verified,
            "population_content_sha256": self._info["population"]["content_sha256"],
            "n_items": len(sel),
            "items": [
                {"item_id": r.item_id, "stratum": r.stratum, "key": r.key, "order": int(r.order)}
                for r in sel.itertuples(index=False)
            ],
            "history": history,
        }
        self._write_selection(
            record, extended=previous is not None, seed=seed, sizes=sizes_list, n_items=len(sel),
            verified_against_frame=verified,
        )
        return path

    def _write_selection(self, record: dict[str, Any], *, extended: bool, **details: Any) -> None:
        """Write a selection record, then its people's copy and the results copy that follows it, and log it."""
        write_text_atomic(self._path("selection"), json_text(record))
        df = _selection_frame(record)
        write_bytes_atomic(self._path("selection_copy"), self._selection_copy_bytes(df))
        if self._path("results_log").exists():
            write_bytes_atomic(self._path("results_copy"), self._results_copy_bytes(self._results_from(df)))
        self._log("selection extended" if extended else "selection saved", **details)

    @staticmethod
    def _selection_copy_bytes(df: pd.DataFrame) -> bytes:
        if "hits" in df.columns:  # a monetary-unit selection
            rows = [[_plain(v) for v in r] for r in df[list(_MONETARY_UNIT_COPY_COLUMNS)].itertuples(index=False)]
            return _csv_bytes(rows, _MONETARY_UNIT_COPY_COLUMNS)
        rows = [[r.item_id, r.stratum, r.key, int(r.order)] for r in df.itertuples(index=False)]
        return _csv_bytes(rows, _SELECTION_COPY_COLUMNS)

    def save_monetary_unit_selection(
        self,
        selection: pd.DataFrame,
        seed: str,
        sample_size: int,
        *,
        items: pd.DataFrame | None = None,
    ) -> Path:
        """Save a selection made by :func:`auditmean.select_monetary_units` with ``seed`` and ``sample_size``.

        Parameters
        ----------
        selection:
            As ``select_monetary_units`` (or ``extend_monetary_units``)
            returns it: columns ``item_id``, ``book_value``, ``hits``,
            ``examined_in_full``, ``units``, ``unit_from``, ``unit_to``, and
            ``attrs["monetary_units"]`` with at least ``book_total_cents``.
        seed, sample_size:
            As passed to the selection; saved exactly.
        items:
            The items selected from (``item_id``, ``book_value``). If given,
            the selection is re-performed from them
            (:func:`auditmean.verify_monetary_units`) and must match.
            Either way each recorded draw is recomputed from the seed and
            must fall in the item recorded for it (see
            :func:`_check_monetary_unit_rows`).

        A selection can be saved again only with the same seed and at least
        the same sample size, keeping every earlier item and every earlier
        draw (draws 1..n are the same for any larger size), so that results
        already entered stay valid.
        """
        self._preflight()
        path = self._path("selection")
        seed = _check_seed(seed)
        if isinstance(sample_size, bool) or not isinstance(_plain(sample_size), int) or int(sample_size) < 1:
            raise ParameterError("sample_size", f"must be a whole number of monetary units, at least 1, got {sample_size!r}")
        n = int(sample_size)
        if not isinstance(selection, pd.DataFrame):
            raise InputError(f"expected a pandas DataFrame, got {type(selection).__name__}", table="selection")
        missing = [c for c in _MONETARY_UNIT_ITEM_FIELDS if c not in selection.columns]
        if missing:
            raise InputError(f"missing columns {', '.join(map(repr, missing))}", table="selection", column=missing[0])
        info = dict(selection.attrs.get("monetary_units") or {})
        total_cents = info.get("book_total_cents")
        if isinstance(total_cents, bool) or not isinstance(_plain(total_cents), int):
            raise InputError(
                "has no positive book total in cents (attrs['monetary_units']['book_total_cents']); "
                "save the table select_monetary_units returned",
                table="selection",
            )
        total_cents = int(total_cents)
        rows = []
        for r in selection[list(_MONETARY_UNIT_ITEM_FIELDS)].itertuples(index=False):
            rows.append(
                {
                    "item_id": _plain(r.item_id),
                    "book_value": float(r.book_value),
                    "hits": _plain(r.hits),
                    "examined_in_full": _plain(r.examined_in_full),
                    "units": "" if r.units is None or (isinstance(r.units, float) and math.isnan(r.units)) else r.units,
                    "unit_from": _plain(r.unit_from),
                    "unit_to": _plain(r.unit_to),
                }
            )
        rows.sort(key=lambda e: e["item_id"] if isinstance(e["item_id"], str) else "")
        _check_monetary_unit_rows(rows, seed, n, total_cents)
        verified = False
        if items is not None:
            from auditmean.monetary_selection import verify_monetary_units

            check = verify_monetary_units(items, selection, seed)
            if not check.match:
                raise InputError(
                    "is not what the seed and sample size give from the population:\n" + check.summary(),
                    table="selection",
                )
            verified = True

        previous = self.selection_record()
        history: list[dict[str, Any]] = []
        if previous is not None:
            if previous.get("kind") != MONETARY_UNIT_SELECTION_KIND:
                raise RecordError(str(path), "a stratified selection is saved; a monetary-unit selection cannot replace it")
            if previous["seed"] != seed:
                raise RecordError(
                    str(path), "a selection with another seed is saved; only an extension of it can be saved"
                )
            old_n = int(previous["sample_size"])
            if n < old_n or int(previous["book_total_cents"]) != total_cents:
                raise RecordError(
                    str(path),
                    f"the saved selection has {old_n:,} monetary units of a positive book total of "
                    f"{int(previous['book_total_cents']):,} cents; only a larger sample of the same total "
                    f"can replace it (given {n:,} units, {total_cents:,} cents)",
                )
            new_by_id = {e["item_id"]: e for e in rows}
            for e in previous["items"]:
                now = new_by_id.get(e["item_id"])
                kept = now is not None and [u for u in _unit_numbers(now["units"]) if u <= old_n] == _unit_numbers(e["units"])
                if not kept:
                    raise RecordError(
                        str(path),
                        "the new selection does not keep every saved item with its draws "
                        f"(e.g. {e['item_id']!r}); only an extension can replace it",
                    )
            history = previous.get("history", []) + [
                {"saved_at": previous["saved_at"], "sample_size": old_n, "n_items": len(previous["items"])}
            ]
        credits = info.get("credits") if isinstance(info.get("credits"), Mapping) else {}
        zeros = info.get("zeros") if isinstance(info.get("zeros"), Mapping) else {}
        record = {
            "schema_version": SCHEMA_VERSION,
            "kind": MONETARY_UNIT_SELECTION_KIND,
            "saved_at": _now(),
            "seed": seed,
            "sample_size": n,
            "book_total_cents": total_cents,
            "book_total": total_cents / 100,
            "interval": total_cents / n / 100,
            "rule": info.get("rule") or _MONETARY_UNIT_RULE,
            "verified_against_population": verified,
            "population_content_sha256": self._info["population"]["content_sha256"],
            "n_items": len(rows),
            "examined_in_full": sum(1 for e in rows if e["examined_in_full"]),
            "credits": {"count": _plain(credits.get("count")), "total": _plain(credits.get("total"))},
            "zeros": {"count": _plain(zeros.get("count"))},
            "items": rows,
            "history": history,
        }
        self._write_selection(
            record, extended=previous is not None, seed=seed, design="monetary_unit", sample_size=n,
            n_items=len(rows), verified_against_population=verified,
        )
        return path

    def _check_copy(self, key: str, expected: bytes) -> None:
        path = self._path(key)
        if not path.exists():
            raise RecordError(
                str(path), "is missing; call Engagement.rewrite_copies() to write it again from the record"
            )
        if path.read_bytes() != expected:
            raise RecordError(
                str(path),
                f"does not match the record in {FILES['selection']} (edited, truncated, or an interrupted save); "
                "nothing was changed. The record is intact: call Engagement.rewrite_copies() to "
                "rewrite this copy from it",
            )

    # ------------------------------------------------------------------ results

    def _require_selection(self) -> pd.DataFrame:
        df = self.selection()
        if df is None:
            raise RecordError(str(self._path("selection")), "no selection saved yet; save one before entering results")
        return df

    def _results_from(self, selection: pd.DataFrame) -> Results:
        path = self._path("results_log")
        entries = self._read_jsonl("results_log")
        made = self._results_entries_made()
        if len(entries) < made:
            raise RecordError(
                str(path),
                f"holds {len(entries)} entries, but log.jsonl records that {made} were made: entries are "
                "missing (truncated or edited file); nothing was changed. Restore the file from a backup",
            )
        try:
            return Results.from_log(selection, entries)
        except (AuditMeanError, ValueError, TypeError) as exc:
            raise RecordError(str(path), f"{exc}; nothing was changed") from None

    def _results_entries_made(self) -> int:
        totals = [e.get("results_entries_total") for e in self._read_jsonl("log")]
        return max((t for t in totals if isinstance(t, int) and not isinstance(t, bool)), default=0)

    def _check_results_copy(self, res: Results, *, for_rewrite: bool = False) -> None:
        """Compare results.csv with the record; say which side is at fault when they differ."""
        path = self._path("results_copy")
        if not path.exists():
            if for_rewrite:
                return
            raise RecordError(
                str(path), "is missing; call Engagement.rewrite_copies() to write it again from the record"
            )
        actual = path.read_bytes()
        if actual == self._results_copy_bytes(res):
            return
        shown = _copy_entry_total(actual)
        n = len(res.log)
        if shown is not None and shown > n:
            raise RecordError(
                str(self._path("results_log")),
                f"holds {n} entries but results.csv shows {shown}: entries may be missing from the log "
                "(truncated file); nothing was changed. Restore results_log.jsonl from a backup",
            )
        if for_rewrite:
            return
        if shown is not None and shown < n:
            earlier = Results(selection=res.selection, log=res.log.iloc[:shown].reset_index(drop=True))
            if actual == self._results_copy_bytes(earlier):
                raise RecordError(
                    str(path),
                    "is behind the record in results_log.jsonl (a save was interrupted); every entry is "
                    "safe in the log: call Engagement.rewrite_copies() to bring this copy up to date",
                )
        raise RecordError(
            str(path),
            "does not match the record in results_log.jsonl (edited or damaged); nothing was changed. "
            "Results are entered through the engagement, not by editing this copy; call "
            "Engagement.rewrite_copies() to rewrite it from the record",
        )

    def results(self) -> Results:
        """The results rebuilt from ``results_log.jsonl`` (empty if none yet).

        ``results.csv`` is checked against the record; a missing, edited or
        out-of-date copy raises :class:`RecordError`, as does a log with
        fewer entries than ``log.jsonl`` or ``results.csv`` show were made.
        """
        sel = self._require_selection()
        res = self._results_from(sel)
        if self._path("results_log").exists():
            self._check_results_copy(res)
        return res

    @staticmethod
    def _results_copy_bytes(res: Results) -> bytes:
        cur = res.current
        rows = [[_plain(v) for v in r] for r in cur[list(_RESULTS_COPY_COLUMNS)].itertuples(index=False)]
        return _csv_bytes(rows, _RESULTS_COPY_COLUMNS)

    def _population_ids(self) -> Any:
        items = _get(self._population, "items") if self._population is not None else None
        if isinstance(items, pd.DataFrame) and "item_id" in items.columns:
            return items["item_id"]
        return None

    def _save_results(self, before: Results, after: Results, step: str, **details: Any) -> Results:
        new = after.log.iloc[len(before.log) :]
        entries = self._read_jsonl("results_log")
        entries.extend(json_safe(new.to_dict(orient="records")))
        self._write_jsonl("results_log", entries)
        write_bytes_atomic(self._path("results_copy"), self._results_copy_bytes(after))
        self._log(step, entries=len(new), results_entries_total=len(entries), **details)
        return after

    def record_result(
        self,
        item_id: str,
        audited_value: float | str,
        note: str | None = None,
        replace: bool = False,
        *,
        entered_by: str | None = None,
        decimal: str = ".",
    ) -> Results:
        """Enter one audited value (see :meth:`auditmean.results.Results.record`); returns the results."""
        self._preflight()
        before = self.results()
        after = before.record(
            item_id,
            audited_value,
            note,
            replace=replace,
            entered_by=entered_by,
            population_ids=self._population_ids(),
            decimal=decimal,
        )
        return self._save_results(before, after, "result entered", item_id=item_id, replace=replace)

    def record_results_file(
        self,
        path: str | os.PathLike[str],
        *,
        id_column: str,
        value_column: str,
        note_column: str | None = None,
        decimal: str = ".",
        sheet: str | int | None = None,
        replace: bool = False,
        entered_by: str | None = None,
    ) -> Results:
        """Enter every row of a results file, or none (see :func:`auditmean.results.record_results_file`).

        The file's SHA-256 is written to the log.
        """
        self._preflight()
        before = self.results()
        after = record_results_file(
            before,
            path,
            id_column=id_column,
            value_column=value_column,
            note_column=note_column,
            decimal=decimal,
            sheet=sheet,
            replace=replace,
            entered_by=entered_by,
            population_ids=self._population_ids(),
        )
        return self._save_results(
            before,
            after,
            "results file entered",
            file=str(path),
            file_sha256=_sha256_file(Path(path)),
            replace=replace,
        )

    def sample_frame(self, *, missing_treatment: str = "error") -> SampleFrame:
        """The sample for estimation (:func:`auditmean.results.sample_frame`); needs the population."""
        items = _get(self._population, "items") if self._population is not None else None
        selection = self._require_selection()
        lookup = getattr(self._population, "items_for", None)
        if not isinstance(items, pd.DataFrame) and callable(lookup):  # a large file: only the selected items
            items = lookup(selection["item_id"].tolist())
        if not isinstance(items, pd.DataFrame):
            raise ParameterError(
                "population", "the engagement was opened without its population; open it with the population"
            )
        return sample_frame(selection, self.results(), items, missing_treatment=missing_treatment)

    # ------------------------------------------------------------------ evaluations

    def save_evaluation(self, evaluation: Mapping[str, Any]) -> Path:
        """Save an evaluation (a JSON object, e.g. ``Estimate.to_dict()``) in ``evaluations/``.

        The file is named by the time saved (UTC) and never overwritten; it
        holds ``saved_at``, the population and selection it belongs to, and
        the evaluation itself under ``"evaluation"``.
        """
        if not isinstance(evaluation, Mapping):
            raise ParameterError("evaluation", f"must be a mapping (to_dict()), got {type(evaluation).__name__}")
        self._preflight()
        folder = self._path("evaluations")
        folder.mkdir(exist_ok=True)
        now = datetime.now(timezone.utc)
        stem = "evaluation-" + now.strftime("%Y%m%dT%H%M%S.%fZ")
        target = folder / f"{stem}.json"
        k = 2
        while target.exists():
            target = folder / f"{stem}-{k}.json"
            k += 1
        rec = self.selection_record()
        data = {
            "schema_version": SCHEMA_VERSION,
            "kind": "saved_evaluation",
            "saved_at": now.isoformat(timespec="microseconds"),
            "population_content_sha256": self._info["population"]["content_sha256"],
            "selection_seed": None if rec is None else rec["seed"],
            "selection_saved_at": None if rec is None else rec["saved_at"],
            "evaluation": json_safe(dict(evaluation)),
        }
        write_text_atomic(target, json_text(data))
        self._log("evaluation saved", file=str(target.relative_to(self._folder)))
        return target

    def evaluations(self) -> list[dict[str, Any]]:
        """Every saved evaluation file's content, oldest first (with ``file``: its name)."""
        folder = self._path("evaluations")
        if not folder.exists():
            return []
        out = []
        for p in sorted(folder.glob("evaluation-*.json")):
            if is_temporary(p):
                continue
            data = _read_json(p)
            if "evaluation" not in data:
                raise RecordError(str(p), "has no 'evaluation' entry; not a saved evaluation")
            out.append({"file": p.name, **data})
        return out

    # ------------------------------------------------------------------ upkeep

    def rewrite_copies(self) -> list[Path]:
        """Rewrite ``selection.csv`` and ``results.csv`` from the record; returns the files written."""
        self._preflight()
        written = []
        rec = self.selection_record()
        if rec is not None:
            df = _selection_frame(rec)
            write_bytes_atomic(self._path("selection_copy"), self._selection_copy_bytes(df))
            written.append(self._path("selection_copy"))
            if self._path("results_log").exists():
                res = self._results_from(df)
                self._check_results_copy(res, for_rewrite=True)  # never overwrite a copy that is ahead
                write_bytes_atomic(self._path("results_copy"), self._results_copy_bytes(res))
                written.append(self._path("results_copy"))
        if written:
            self._log("copies rewritten", files=[p.name for p in written])
        return written

    def status(self) -> EngagementStatus:
        """Which steps are done, and what comes next (reads, and checks, every record)."""
        steps = []
        pop = self._info["population"]
        steps.append(("population", True, f"{pop.get('source')} ({pop.get('n_items')} items, content {pop['content_sha256'][:12]}...)"))
        plan = self.plan()
        steps.append(("plan", plan is not None, "plan.json saved" if plan is not None else "no plan saved"))
        sel = self.selection()
        if sel is None:
            steps.append(("selection", False, "no selection saved"))
            steps.append(("results", False, "-"))
        else:
            rec = self.selection_record()
            if rec.get("kind") == MONETARY_UNIT_SELECTION_KIND:
                steps.append((
                    "selection",
                    True,
                    f"{len(sel)} items ({int(rec['sample_size']):,} monetary units, "
                    f"{int(rec['examined_in_full'])} examined in full), seed {rec['seed']!r}",
                ))
            else:
                steps.append(("selection", True, f"{len(sel)} items, seed {rec['seed']!r}"))
            res = self.results()
            n_done = len(res.current)
            steps.append(("results", n_done == len(sel), f"{n_done} of {len(sel)} items have an audited value"))
        evals = self.evaluations()
        steps.append(("evaluation", bool(evals), f"{len(evals)} saved" if evals else "none saved"))
        done = {s: d for s, d, _ in steps}
        if not done["plan"]:
            nxt = "plan the sample sizes and save the plan (save_plan)"
        elif not done["selection"]:
            nxt = "draw the selection and save it with its seed (save_selection)"
        elif not done["results"]:
            nxt = "enter the audited values of the remaining items (record_result / record_results_file)"
        elif not done["evaluation"]:
            nxt = "evaluate the sample and save the evaluation (save_evaluation)"
        else:
            nxt = "all steps done; write the workpaper"
        leftovers = tuple(
            sorted(str(p.relative_to(self._folder)) for p in self._folder.rglob("*") if is_temporary(p))
        )
        table = pd.DataFrame(steps, columns=["step", "done", "detail"])
        return EngagementStatus(folder=str(self._folder), steps=table, next_step=nxt, leftover_files=leftovers)

    def __repr__(self) -> str:
        return f"Engagement({str(self._folder)!r})"


# ---------------------------------------------------------------------------
# reading and checking records


def _read_json(path: Path) -> dict[str, Any]:
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise RecordError(str(path), f"cannot be read ({exc.strerror})") from None
    try:
        data = json.loads(raw.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise RecordError(str(path), f"is not UTF-8 text (byte {exc.start}); nothing was changed") from None
    except json.JSONDecodeError as exc:
        what = "is truncated" if exc.pos >= len(raw.rstrip()) else "is not valid JSON"
        raise RecordError(
            str(path), f"{what} (line {exc.lineno}, column {exc.colno}: {exc.msg}); nothing was changed"
        ) from None
    if not isinstance(data, dict):
        raise RecordError(str(path), "does not hold a JSON object; nothing was changed")
    version = data.get("schema_version")
    if isinstance(version, int) and not isinstance(version, bool) and version > SCHEMA_VERSION:
        raise RecordError(
            str(path),
            f"was written with record schema {version}, newer than this auditmean ({__version__}, "
            f"schema {SCHEMA_VERSION}) reads; update auditmean",
        )
    return data


def _check_info(path: Path, info: dict[str, Any]) -> None:
    problems = []
    if info.get("kind") != "engagement":
        problems.append("'kind' is not 'engagement'")
    if not isinstance(info.get("schema_version"), int):
        problems.append("no schema_version")
    pop = info.get("population")
    if not isinstance(pop, dict):
        problems.append("no population fingerprint")
    else:
        if not _is_sha256(pop.get("content_sha256")):
            problems.append("population.content_sha256 missing or not a SHA-256")
        if pop.get("file_sha256") is not None and not _is_sha256(pop["file_sha256"]):
            problems.append("population.file_sha256 is not a SHA-256")
    if problems:
        raise RecordError(str(path), "not a valid engagement record: " + "; ".join(problems))


def _check_selection_record(path: Path, rec: dict[str, Any]) -> None:
    problems = []
    if not isinstance(rec.get("seed"), str) or not rec["seed"]:
        problems.append("no seed")
    sizes = rec.get("sizes")
    if not isinstance(sizes, list) or not all(
        isinstance(s, dict) and _label_ok(s.get("stratum")) and isinstance(s.get("n"), int) for s in sizes
    ):
        problems.append("sizes are not a list of {stratum, n}")
    items = rec.get("items")
    if not isinstance(items, list) or not all(
        isinstance(i, dict)
        and isinstance(i.get("item_id"), str)
        and _label_ok(i.get("stratum"))
        and isinstance(i.get("key"), str)
        and isinstance(i.get("order"), int)
        for i in items
    ):
        problems.append("items are not a list of {item_id, stratum, key, order}")
    if not isinstance(rec.get("saved_at"), str):
        problems.append("no saved_at")
    if problems:
        raise RecordError(str(path), "not a valid selection record: " + "; ".join(problems) + "; nothing was changed")
    df = pd.DataFrame(items, columns=list(_SELECTION_COPY_COLUMNS))
    try:
        _check_selection_rows(df, rec["seed"], {s["stratum"]: s["n"] for s in sizes})
    except (InputError, ParameterError) as exc:
        raise RecordError(str(path), f"the saved selection does not follow its own seed: {exc.reason}") from None


def _check_selection_rows(sel: pd.DataFrame, seed: str, sizes: dict[Any, int]) -> None:
    """Keys recomputed from the seed, orders 1..n by key, counts equal to sizes."""
    if sel["item_id"].duplicated().any():
        raise InputError("an item is listed more than once", table="selection", column="item_id")
    if not all(isinstance(v, str) for v in sel["item_id"]):
        raise InputError("item ids must be text", table="selection", column="item_id")
    keys, _ = item_keys(seed, sel["item_id"].tolist())
    wrong = np.asarray(sel["key"].map(str).to_numpy(dtype=object) != keys.astype(object), dtype=bool)
    if wrong.any():
        raise InputError(
            f"{int(wrong.sum())} keys differ from those the seed gives, e.g. item "
            f"{sel.loc[wrong, 'item_id'].iloc[0]!r}",
            table="selection",
            column="key",
        )
    counts = sel.groupby("stratum", sort=False).size().to_dict()
    unknown = [s for s in counts if s not in sizes]
    if unknown:
        raise InputError(f"strata not in sizes: {', '.join(map(repr, unknown))}", table="selection")
    off = [f"{s!r} ({counts.get(s, 0)} items, size {n})" for s, n in sizes.items() if counts.get(s, 0) != n]
    if off:
        raise InputError(f"counts differ from the sizes in strata {', '.join(off)}", table="selection")
    for s, g in sel.groupby("stratum", sort=False):
        by_key = g.assign(k=g["key"].map(lambda h: int(h, 16))).sort_values(["k", "item_id"], kind="stable")
        if by_key["order"].astype(int).tolist() != list(range(1, len(g) + 1)):
            raise InputError(
                f"stratum {s!r}: the orders are not 1, 2, ... by increasing key", table="selection", column="order"
            )


def _copy_entry_total(raw: bytes) -> int | None:
    """Sum of the ``entries`` column of a results.csv copy, or None if it cannot be read."""
    try:
        rows = list(csv.DictReader(io.StringIO(raw.decode("utf-8"))))
        return sum(int(r["entries"]) for r in rows)
    except (UnicodeDecodeError, csv.Error, KeyError, TypeError, ValueError):
        return None


def _selection_frame(rec: dict[str, Any]) -> pd.DataFrame:
    if rec.get("kind") == MONETARY_UNIT_SELECTION_KIND:
        return _monetary_unit_frame(rec)
    df = pd.DataFrame(rec["items"], columns=list(_SELECTION_COPY_COLUMNS))
    df["item_id"] = df["item_id"].astype(object)
    df["stratum"] = df["stratum"].astype(object)
    df["key"] = df["key"].astype(object)
    df["key_int"] = np.array([int(k, 16) for k in df["key"]], dtype=np.uint64)
    df["order"] = df["order"].astype(np.int64)
    df = df[["item_id", "stratum", "key", "key_int", "order"]]
    return df.reset_index(drop=True)


# ---------------------------------------------------------------------------
# monetary-unit selections

#: The selection rule, as recorded when the selection itself does not state it.
_MONETARY_UNIT_RULE = (
    "positive items in item-id order, cumulative book value in cents C_i; draw k = 1..n: "
    "u_k = first 13 hex digits of SHA-256(UTF-8(seed + ':unit:' + k)), point "
    "p_k = floor(u_k * B / 2^52), the item with C_(i-1) <= p_k < C_i; items with "
    "cents * n >= B examined in full"
)


def _unit_numbers(text: Any) -> list[int]:
    """The draw numbers of a ``units`` text ("3 17 40" -> [3, 17, 40]); [] for ""; ValueError otherwise."""
    if not isinstance(text, str):
        raise ValueError("units must be text")
    parts = text.split(" ") if text else []
    if any(not p.isdigit() or not p.isascii() or (len(p) > 1 and p[0] == "0") for p in parts):
        raise ValueError(f"units {text!r} are not whole numbers separated by single spaces")
    return [int(p) for p in parts]


def _unit_points(seed: str, n: int, total_cents: int) -> list[int]:
    """The point in cents of each draw 1..n (the rule in :data:`_MONETARY_UNIT_RULE`)."""
    prefix = seed + ":unit:"
    out = []
    for k in range(1, n + 1):
        u = int(hashlib.sha256((prefix + str(k)).encode("utf-8")).hexdigest()[:13], 16)
        out.append((u * total_cents) >> 52)  # floor(u * B / 2**52), exact integer arithmetic
    return out


def _check_monetary_unit_rows(rows: list[dict[str, Any]], seed: str, n: int, total_cents: int) -> None:
    """Re-derive what a monetary-unit selection can be checked against without the population.

    ``rows`` are the items as recorded (sorted by item id). Raises
    :class:`InputError` (``table="selection"``; rows as in ``selection.csv``)
    when: an id is not text or repeated; a field has the wrong type; an
    item's range ``unit_to - unit_from`` is not its book value in cents, or
    ranges overlap or leave ``[0, B)``; ``examined_in_full`` differs from
    ``cents * n >= B``; ``units`` does not list ``hits`` ascending draw
    numbers; the draws do not partition ``1..n`` (so the hits sum to n); or a
    draw recomputed from the seed does not fall in the range of the item that
    lists it.
    """
    if isinstance(n, bool) or not isinstance(n, int) or n < 1:
        raise InputError(f"the sample size must be a whole number of at least 1, got {n!r}", table="selection")
    if isinstance(total_cents, bool) or not isinstance(total_cents, int) or total_cents < n:
        raise InputError(
            f"the positive book total in cents ({total_cents!r}) must be a whole number of at least the "
            f"sample size ({n})",
            table="selection",
        )

    def bad(message: str, column: str, positions: list[int]) -> InputError:
        return InputError(message, table="selection", column=column, rows=[spreadsheet_row(i) for i in positions])

    def typed(col: str, ok) -> None:
        wrong = [i for i, e in enumerate(rows) if not ok(e.get(col))]
        if wrong:
            raise bad(f"{col} has values of the wrong type", col, wrong)

    def whole(v: Any) -> bool:
        return isinstance(v, int) and not isinstance(v, bool)

    typed("item_id", lambda v: isinstance(v, str) and v.strip() != "")
    typed("book_value", lambda v: isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v))
    typed("hits", lambda v: whole(v) and v >= 0)
    typed("examined_in_full", lambda v: isinstance(v, bool))
    typed("units", lambda v: isinstance(v, str))
    typed("unit_from", whole)
    typed("unit_to", whole)
    ids = [e["item_id"] for e in rows]
    seen: dict[str, int] = {}
    dup = []
    for i, v in enumerate(ids):
        if v in seen:
            dup += [seen[v], i]
        seen.setdefault(v, i)
    if dup:
        raise bad("an item is listed more than once", "item_id", sorted(set(dup)))
    cents = [round(e["book_value"] * 100) for e in rows]
    wrong = [i for i, e in enumerate(rows) if cents[i] <= 0 or e["unit_to"] - e["unit_from"] != cents[i]]
    if wrong:
        raise bad("the range unit_from..unit_to is not the item's (positive) book value in cents", "unit_to", wrong)
    prev_to = 0
    for i, e in enumerate(rows):
        if e["unit_from"] < prev_to or e["unit_to"] > total_cents:
            raise bad(
                "the items' ranges overlap, are out of item-id order or pass the positive book total",
                "unit_from",
                [i],
            )
        prev_to = e["unit_to"]
    wrong = [i for i, e in enumerate(rows) if e["examined_in_full"] != (cents[i] * n >= total_cents)]
    if wrong:
        raise bad(
            "examined_in_full does not follow the rule (book value in cents x n >= positive book total in cents)",
            "examined_in_full",
            wrong,
        )
    owner: dict[int, int] = {}
    for i, e in enumerate(rows):
        try:
            units = _unit_numbers(e["units"])
        except ValueError as exc:
            raise bad(str(exc), "units", [i]) from None
        if len(units) != e["hits"] or units != sorted(set(units)):
            raise bad("units must list as many different draw numbers as hits, ascending", "units", [i])
        if not units and not e["examined_in_full"]:
            raise bad("an item neither hit by a draw nor examined in full is not selected", "hits", [i])
        for u in units:
            if u < 1 or u > n or u in owner:
                raise bad(f"draw {u} is outside 1..{n} or listed for two items", "units", sorted({i, owner.get(u, i)}))
            owner[u] = i
    if len(owner) != n:
        absent = [k for k in range(1, n + 1) if k not in owner][:5]
        raise InputError(
            f"the hits add up to {len(owner)}, not the sample size {n}: draws {absent} are not listed",
            table="selection",
            column="hits",
        )
    points = _unit_points(seed, n, total_cents)
    off = sorted({i for k, i in owner.items() if not rows[i]["unit_from"] <= points[k - 1] < rows[i]["unit_to"]})
    if off:
        raise bad(
            "draws recomputed from the seed do not fall in the items that list them "
            "(SHA-256 rule of the selection)",
            "units",
            off,
        )


def _check_monetary_unit_record(path: Path, rec: dict[str, Any]) -> None:
    problems = []
    if not isinstance(rec.get("seed"), str) or not rec["seed"]:
        problems.append("no seed")
    for name in ("sample_size", "book_total_cents"):
        v = rec.get(name)
        if isinstance(v, bool) or not isinstance(v, int):
            problems.append(f"no {name} (a whole number)")
    items = rec.get("items")
    if not isinstance(items, list) or not all(
        isinstance(i, dict) and all(k in i for k in _MONETARY_UNIT_ITEM_FIELDS) for i in items
    ):
        problems.append("items are not a list of {" + ", ".join(_MONETARY_UNIT_ITEM_FIELDS) + "}")
    if not isinstance(rec.get("saved_at"), str):
        problems.append("no saved_at")
    if problems:
        raise RecordError(str(path), "not a valid selection record: " + "; ".join(problems) + "; nothing was changed")
    ids = [i["item_id"] for i in items]
    if any(not isinstance(v, str) for v in ids) or ids != sorted(ids):
        raise RecordError(str(path), "the items are not listed in item-id order; nothing was changed")
    try:
        _check_monetary_unit_rows(items, rec["seed"], rec["sample_size"], rec["book_total_cents"])
    except InputError as exc:
        where = f" (item {items[exc.rows[0] - 2]['item_id']!r})" if exc.rows and exc.rows[0] - 2 < len(items) else ""
        raise RecordError(
            str(path), f"the saved selection does not follow its own seed: {exc.reason}{where}; nothing was changed"
        ) from None


def _monetary_unit_frame(rec: dict[str, Any]) -> pd.DataFrame:
    df = pd.DataFrame(rec["items"], columns=list(_MONETARY_UNIT_ITEM_FIELDS))
    out = pd.DataFrame(
        {
            "item_id": df["item_id"].astype(object),
            "stratum": np.where(df["examined_in_full"].to_numpy(dtype=bool), *MONETARY_UNIT_GROUPS).astype(object),
            "book_value": df["book_value"].to_numpy(dtype=np.float64),
            "hits": df["hits"].to_numpy(dtype=np.int64),
            "examined_in_full": df["examined_in_full"].to_numpy(dtype=bool),
            "units": df["units"].astype(object),
            "unit_from": df["unit_from"].to_numpy(dtype=np.int64),
            "unit_to": df["unit_to"].to_numpy(dtype=np.int64),
        }
    )
    return out.reset_index(drop=True)

