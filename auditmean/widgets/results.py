"""Step 6, the audited values: type them item by item, or load a file; every entry is saved at once.

Each edit calls :meth:`auditmean.engagement.Engagement.record_result`,
which appends the entry to the engagement's results log on disk (an atomic
write) before the panel shows it as saved. A closed browser tab or a killed
kernel therefore loses nothing that was shown as saved: reopen the folder
and every entry is there. Nothing is ever overwritten: a corrected value
is a new entry, and the earlier one stays in the history.
"""

from __future__ import annotations

import html
import math
import os
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import ipywidgets as widgets
import pandas as pd

from auditmean._records import format_number, html_table
from auditmean.errors import InputError
from auditmean.widgets._base import Panel, box
from auditmean.widgets._demo import is_demo_population, write_demo_results
from auditmean.widgets.population import file_columns, save_upload
from auditmean.widgets.state import MONETARY_UNIT, EngagementState, StateChange

__all__ = ["ResultsPanel"]

_ALL_STRATA = "(all)"
_VIEWS = (("all items", "all"), ("still to do", "todo"), ("entered", "done"))
UPLOADS = "uploads"
_HISTORY_ROWS = 40


def _pick(columns: list[str], hints: tuple[str, ...]) -> str | None:
    for hint in hints:
        for c in columns:
            if hint in c.lower():
                return c
    return None


class _Row:
    """The widgets of one line of the entry grid."""

    def __init__(self, panel: ResultsPanel, index: int) -> None:
        self.item = widgets.HTML("", layout=widgets.Layout(width="11em"))
        self.stratum = widgets.HTML("", layout=widgets.Layout(width="6em"))
        self.book = widgets.HTML("", layout=widgets.Layout(width="9em"))
        self.value = widgets.Text("", placeholder="audited value", continuous_update=False,
                                  layout=widgets.Layout(width="10em"))
        self.value.add_class("am-audited-value")
        self.note = widgets.Text("", placeholder="note (optional)", continuous_update=False,
                                 layout=widgets.Layout(width="18em"))
        self.status = widgets.HTML("", layout=widgets.Layout(width="22em"))
        self.box = widgets.HBox([self.item, self.stratum, self.book, self.value, self.note, self.status],
                                layout=widgets.Layout(align_items="center"))
        self.value.observe(panel._handler(lambda ch: panel._on_value(index, ch)), names="value")
        self.note.observe(panel._handler(lambda ch: panel._on_note(index, ch)), names="value")


class ResultsPanel(Panel):
    """The selected items, a page at a time, with a field for each audited value and note.

    Parameters
    ----------
    state:
        The shared state; needs a recorded selection (``state.engagement``,
        ``state.selection``).
    page_size:
        Items per page.
    entered_by:
        Who makes the entries (default: the operating-system login name).

    Typing a value and pressing Enter (or leaving the field) records it at
    once with :meth:`Engagement.record_result`; a value typed for an item
    that has one already replaces it, and the earlier value stays in the
    history. A note is saved with the item's value. A results file
    (uploaded, or given to :meth:`record_file`) is written into the
    engagement folder and recorded with :meth:`Engagement.record_results_file`:
    all of its rows, or none when any row has a problem.
    """

    title = "Audited values"
    lead = (
        "Enter what you found for each selected item. Every value is saved in the engagement folder the "
        "moment it is entered; a corrected value is added as a new entry and the earlier one is kept."
    )

    def __init__(self, state: EngagementState | None = None, *, page_size: int = 15,
                 entered_by: str | None = None) -> None:
        super().__init__(state)
        self.page_size = int(page_size)
        self.entered_by = entered_by
        self.counts_html = widgets.HTML("")
        self.bar = widgets.IntProgress(value=0, min=0, max=1, layout=widgets.Layout(width="24em"))
        self.view = widgets.ToggleButtons(options=_VIEWS, value="all", style={"button_width": "8em"})
        self.stratum_filter = widgets.Dropdown(options=[_ALL_STRATA], value=_ALL_STRATA, description="Stratum",
                                               layout=widgets.Layout(width="16em"))
        self.search = widgets.Text("", placeholder="find an item id", continuous_update=False,
                                   layout=widgets.Layout(width="14em"))
        self.decimal = widgets.ToggleButtons(options=[("1,234.56", "."), ("1.234,56", ",")], value=".",
                                             description="Amounts", style={"button_width": "7em"})
        self.previous_button = widgets.Button(description="Previous", icon="chevron-left",
                                              layout=widgets.Layout(width="8em"))
        self.next_button = widgets.Button(description="Next", icon="chevron-right", layout=widgets.Layout(width="8em"))
        self.page_label = widgets.HTML("")
        self.page = 0
        self.rows = [_Row(self, i) for i in range(self.page_size)]
        labels = [widgets.HTML(f"<b>{t}</b>", layout=widgets.Layout(width=w)) for t, w in (
            ("item", "11em"), ("stratum", "6em"), ("book value", "9em"), ("audited value", "10em"),
            ("note", "18em"), ("", "22em"))]
        self._group_label = labels[1]  # "stratum", or "group" for a monetary-unit selection
        header = widgets.HBox(labels)
        self.grid = widgets.VBox([header] + [r.box for r in self.rows])
        self.grid.add_class("am-entry-grid")

        self.upload = widgets.FileUpload(accept=".csv,.tsv,.txt,.xlsx,.xlsm", multiple=False,
                                         description="Upload results")
        self.file_path = widgets.HTML("")
        self.file_id = widgets.Dropdown(description="Item id", options=[], layout=widgets.Layout(width="20em"))
        self.file_value = widgets.Dropdown(description="Audited value", options=[], layout=widgets.Layout(width="20em"))
        self.file_note = widgets.Dropdown(description="Note", options=["(none)"], value="(none)",
                                          layout=widgets.Layout(width="20em"))
        self.file_replace = widgets.Checkbox(value=False, indent=False,
                                             description="replace values already entered (the earlier ones are kept)")
        self.file_button = widgets.Button(description="Record the file", icon="upload", button_style="primary",
                                          layout=widgets.Layout(width="14em"), disabled=True)
        self._file: Path | None = None
        self.demo_button = widgets.Button(
            description="Demo only: fill in the invented demo's audited values", button_style="warning",
            icon="flask", layout=widgets.Layout(width="34em"))
        self.demo_button.add_class("am-demo-fill")
        self._demo_box = widgets.VBox([
            widgets.HTML(box(
                "<b>Demo only.</b> In a real engagement the audited values come from examining each item. "
                "This button looks up the invented answers in the demo's file <code>invoices_audited.csv</code> "
                "for every item still without a value, and records them as one results file.", "warning")),
            self.demo_button,
        ], layout=widgets.Layout(display="none"))
        self._demo_box.add_class("am-demo")
        self.history = widgets.Checkbox(value=False, indent=False, description="show the history of entries")
        self.history_html = widgets.HTML("")
        self.history_html.add_class("am-table")

        self._items = pd.DataFrame(columns=["item_id", "stratum", "book_value"])
        self._current: dict[str, tuple[float, str | None, str, str]] = {}
        self._page_items: list[str | None] = [None] * self.page_size
        self._pending_notes: dict[str, str] = {}

        for w in (self.view, self.stratum_filter, self.search):
            w.observe(self._handler(self._on_filter), names="value")
        self.previous_button.on_click(self._handler(lambda _b: self._turn(-1)))
        self.next_button.on_click(self._handler(lambda _b: self._turn(1)))
        self.upload.observe(self._handler(self._on_upload), names="value")
        self.file_button.on_click(self._handler(lambda _b: self._record_uploaded()))
        self.demo_button.on_click(self._handler(lambda _b: self.fill_from_demo()))
        self.history.observe(self._handler(lambda _c: self._show_history()), names="value")
        self._observe_state(self._on_state, ("selection", "results", "engagement"))
        self.children = [
            self._head,
            widgets.HBox([self.bar, self.counts_html], layout=widgets.Layout(align_items="center")),
            self._demo_box,
            widgets.HBox([self.view, self.stratum_filter, self.search]),
            self.decimal,
            self.message,
            self.grid,
            widgets.HBox([self.previous_button, self.page_label, self.next_button],
                         layout=widgets.Layout(align_items="center")),
            widgets.HTML("<b>Or record a results file</b> <span class='am-small'>(CSV or Excel: one row per "
                         "item with its id and audited value; it is kept in the engagement folder)</span>"),
            widgets.HBox([self.upload, self.file_path]),
            widgets.HBox([self.file_id, self.file_value, self.file_note]),
            widgets.HBox([self.file_replace, self.file_button]),
            self.history,
            self.history_html,
        ]
        self._rebuild_items(self.state)
        self._show(self.state)

    # ------------------------------------------------------------------ data

    def _rebuild_items(self, state: EngagementState) -> None:
        sel = state.selection
        if sel is None:
            self._items = pd.DataFrame(columns=["item_id", "stratum", "book_value"])
            self.stratum_filter.options = [_ALL_STRATA]
            return
        frame = sel[["item_id", "stratum"]].copy()
        if state.population is not None:
            items = state.population.items
            wanted = items[items["item_id"].isin(set(frame["item_id"]))]
            frame["book_value"] = frame["item_id"].map(dict(zip(wanted["item_id"], wanted["book_value"])))
        else:
            frame["book_value"] = math.nan
        self._items = frame.reset_index(drop=True)
        labels = [str(s) for s in pd.unique(frame["stratum"])]
        self._quiet = True
        try:
            self.stratum_filter.options = [_ALL_STRATA] + labels
            self.stratum_filter.value = _ALL_STRATA
        finally:
            self._quiet = False

    def _rebuild_current(self, state: EngagementState) -> None:
        res = state.results
        if res is None:
            self._current = {}
            return
        cur = res.current
        self._current = {
            r.item_id: (float(r.audited_value), r.note, str(r.entered_at), str(r.entered_by))
            for r in cur.itertuples(index=False)
        }

    def _filtered(self) -> pd.DataFrame:
        df = self._items
        if df.empty:
            return df
        if self.stratum_filter.value != _ALL_STRATA:
            df = df[df["stratum"].astype(str) == self.stratum_filter.value]
        if self.view.value == "todo":
            df = df[~df["item_id"].isin(set(self._current))]
        elif self.view.value == "done":
            df = df[df["item_id"].isin(set(self._current))]
        needle = self.search.value.strip()
        if needle:
            df = df[df["item_id"].str.contains(needle, regex=False)]
        return df

    # ------------------------------------------------------------------ entering

    def _engagement(self) -> Any:
        eng = self.state.engagement
        if eng is None or self.state.selection is None:
            raise InputError("draw and record the selection first (step Selection)", table="results")
        return eng

    def record(self, item_id: str, audited_value: float | str, note: str | None = None) -> None:
        """Record one audited value (as typing it in the grid does); replaces a value already there."""
        eng = self._engagement()
        replace = item_id in self._current
        results = eng.record_result(item_id, audited_value, note, replace=replace,
                                    entered_by=self.entered_by, decimal=self.decimal.value)
        self.state.update(results=results)

    def _on_value(self, index: int, change: dict[str, Any]) -> None:
        if self._quiet:
            return
        item = self._page_items[index]
        if item is None:
            return
        row = self.rows[index]
        text = change["new"].strip()
        had = self._current.get(item)
        if not text:
            if had is not None:
                self._set_quietly(row.value, format_number(had[0]))
                row.status.value = ("<span class='am-row-error'>an entered value stays: type the corrected "
                                    "value to replace it (the earlier one is kept)</span>")
            return
        note = row.note.value.strip() or None
        try:
            self.record(item, text, note)
            self._pending_notes.pop(item, None)
        except Exception as exc:
            row.status.value = f"<span class='am-row-error'>not saved: {html.escape(getattr(exc, 'reason', str(exc)))}</span>"
            raise
        self.clear_message()

    def _on_note(self, index: int, change: dict[str, Any]) -> None:
        if self._quiet:
            return
        item = self._page_items[index]
        if item is None:
            return
        row = self.rows[index]
        note = change["new"].strip()
        had = self._current.get(item)
        if had is None:
            self._pending_notes[item] = note
            row.status.value = "<span class='am-small'>the note is saved with the audited value</span>"
            return
        if note == (had[1] or ""):
            return
        if not note:
            self._set_quietly(row.note, had[1] or "")
            row.status.value = "<span class='am-row-error'>a note stays in the history; type a new one to add it</span>"
            return
        eng = self._engagement()
        results = eng.record_result(item, had[0], note, replace=False, entered_by=self.entered_by)
        self.state.update(results=results)

    def record_file(self, path: str | os.PathLike[str], *, id_column: str, value_column: str,
                    note_column: str | None = None, replace: bool = False, entered_by: str | None = None) -> None:
        """Record every row of a results file, or none (:meth:`Engagement.record_results_file`)."""
        eng = self._engagement()
        results = eng.record_results_file(
            path, id_column=id_column, value_column=value_column, note_column=note_column,
            decimal=self.decimal.value, replace=replace, entered_by=entered_by or self.entered_by,
        )
        before = len(self._current)
        self.state.update(results=results)
        self.show_note(f"Recorded {path}: {len(self._current) - before:,} more items have an audited value now.")

    def _on_upload(self, change: dict[str, Any]) -> None:
        files = change["new"]
        if not files:
            return
        eng = self._engagement()
        path = save_upload(files[0], Path(eng.folder) / UPLOADS)
        cols = file_columns(path)
        self._file = path
        self.file_path.value = f"<span class='am-small'>kept as {html.escape(str(path))}</span>"
        self.file_id.options = cols
        self.file_value.options = cols
        self.file_note.options = ["(none)"] + cols
        self.file_id.value = _pick(cols, ("item", "id", "invoice", "line")) or cols[0]
        self.file_value.value = _pick(cols, ("audited", "value", "amount", "counted")) or cols[min(1, len(cols) - 1)]
        self.file_note.value = _pick(cols, ("note", "finding", "comment")) or "(none)"
        self.file_button.disabled = False

    def _record_uploaded(self) -> None:
        if self._file is None:
            raise InputError("upload a results file first", table="results")
        note = None if self.file_note.value == "(none)" else self.file_note.value
        self.record_file(self._file, id_column=self.file_id.value, value_column=self.file_value.value,
                         note_column=note, replace=self.file_replace.value)

    def fill_from_demo(self) -> None:
        """Demo only: record the invented demo's true audited values of the items still without one."""
        state = self.state
        eng = self._engagement()
        if not is_demo_population(state.population, state.demo_data):
            raise InputError("this is not the demo's population; its answers cannot be used here", table="results")
        todo = [i for i in self._items["item_id"] if i not in self._current]
        if not todo:
            self.show_note("Every selected item has an audited value already.")
            return
        stamp = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%S")
        path = write_demo_results(todo, state.demo_data, Path(eng.folder) / UPLOADS / f"demo-answers-{stamp}.csv")
        self.record_file(path, id_column="item_id", value_column="audited_value", note_column="note",
                         entered_by="auditmean demo")

    # ------------------------------------------------------------------ display

    def _set_quietly(self, widget: widgets.Widget, value: Any) -> None:
        self._quiet = True
        try:
            widget.value = value
        finally:
            self._quiet = False

    def _on_filter(self, change: dict[str, Any]) -> None:
        if self._quiet:
            return
        self.page = 0
        self._show_page()

    def _turn(self, step: int) -> None:
        self.page += step
        self._show_page()

    def _on_state(self, change: StateChange) -> None:
        if "selection" in change.names or "engagement" in change.names:
            self._rebuild_items(change.state)
            self.page = 0
        self._show(change.state)

    def _show(self, state: EngagementState) -> None:
        monetary = state.chosen_design == MONETARY_UNIT
        self._group_label.value = "<b>group</b>" if monetary else "<b>stratum</b>"
        self.stratum_filter.description = "Group" if monetary else "Stratum"
        self._rebuild_current(state)
        n_sel, n_done = len(self._items), len(self._current)
        self.bar.max = max(n_sel, 1)
        self.bar.value = n_done
        self.bar.bar_style = "success" if n_sel and n_done == n_sel else "info"
        if state.selection is None:
            self.counts_html.value = box("Draw and record the selection first (step Selection).", "warning")
        else:
            self.counts_html.value = (
                f'<span class="am-entered-count"><b>{n_done:,}</b> of {n_sel:,} selected items have an audited '
                "value</span>"
            )
        demo = is_demo_population(state.population, state.demo_data) and state.selection is not None
        self._demo_box.layout.display = "" if demo else "none"
        self.upload.disabled = state.selection is None
        self._show_page()
        self._show_history()

    def _show_page(self) -> None:
        df = self._filtered()
        pages = max(1, math.ceil(len(df) / self.page_size))
        self.page = min(max(self.page, 0), pages - 1)
        part = df.iloc[self.page * self.page_size:(self.page + 1) * self.page_size]
        self.page_label.value = f"&nbsp;page {self.page + 1} of {pages} ({len(df):,} items)&nbsp;"
        self.previous_button.disabled = self.page == 0
        self.next_button.disabled = self.page >= pages - 1
        self._quiet = True
        try:
            records = list(part.itertuples(index=False))
            for i, row in enumerate(self.rows):
                if i >= len(records):
                    self._page_items[i] = None
                    row.box.layout.display = "none"
                    continue
                r = records[i]
                self._page_items[i] = r.item_id
                row.box.layout.display = "flex"
                row.item.value = html.escape(str(r.item_id))
                row.stratum.value = html.escape(str(r.stratum))
                row.book.value = format_number(r.book_value)
                had = self._current.get(r.item_id)
                disabled = self.state.engagement is None
                row.value.disabled = row.note.disabled = disabled
                if had is None:
                    row.value.value = ""
                    pending = self._pending_notes.get(r.item_id, "")
                    row.note.value = pending
                    row.status.value = (
                        "<span class='am-small'>the note is saved with the audited value</span>" if pending else ""
                    )
                else:
                    row.value.value = format_number(had[0])
                    row.note.value = had[1] or ""
                    when = had[2][11:19] if len(had[2]) >= 19 else had[2]
                    row.status.value = (f"<span class='am-row-saved'>saved {html.escape(when)} UTC by "
                                        f"{html.escape(had[3])}</span>")
        finally:
            self._quiet = False

    def _show_history(self) -> None:
        res = self.state.results
        if not self.history.value or res is None:
            self.history_html.value = ""
            return
        log = res.log.tail(_HISTORY_ROWS).iloc[::-1]
        rows = [
            [int(r.sequence), r.item_id, format_number(r.audited_value), r.action, r.note or "", r.entered_by,
             str(r.entered_at)[:19].replace("T", " "), r.source]
            for r in log.itertuples(index=False)
        ]
        self.history_html.value = html_table(
            ["entry", "item", "audited value", "kind", "note", "by", "at (UTC)", "from"], rows,
            caption=f"The latest {len(rows)} of {len(res.log):,} entries, newest first",
        )
