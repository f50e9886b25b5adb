"""Step 1, the population: read the file, check it, and see how its book values spread."""

from __future__ import annotations

import html
import os
from pathlib import Path
from typing import Any

import ipywidgets as widgets
import pandas as pd

from auditmean._atomic import write_bytes_atomic
from auditmean.errors import InputError
from auditmean.population import CSV_EXTENSIONS, EXCEL_EXTENSIONS, PARQUET_EXTENSIONS, profile
from auditmean.widgets import figures
from auditmean.widgets._base import FigureView, Panel, box
from auditmean.widgets.state import EngagementState, StateChange
from auditmean.workflow import PopulationReading

__all__ = ["PopulationPanel", "file_columns", "save_upload"]

_NONE = "(none)"
UPLOAD_FOLDER = "auditmean-uploads"


def file_columns(path: str | os.PathLike[str], *, sep: str | None = None, sheet: str | int | None = None) -> list[str]:
    """The column names in the first row of a CSV, TSV, Excel or Parquet file (reads no more)."""
    p = Path(path)
    where = {"file": str(p)}
    if not p.exists():
        raise InputError("no such file", **where)
    if p.is_dir():
        raise InputError("is a folder, not a file", **where)
    ext = p.suffix.lower()
    try:
        if ext in CSV_EXTENSIONS:
            head = pd.read_csv(p, nrows=0, dtype=str, sep=sep or ("\t" if ext == ".tsv" else ","), encoding="utf-8-sig")
            return [str(c).strip() for c in head.columns]
        if ext in PARQUET_EXTENSIONS:
            import pyarrow.parquet as pq

            return [str(c) for c in pq.read_schema(p).names]
        if ext in EXCEL_EXTENSIONS:
            import openpyxl

            wb = openpyxl.load_workbook(p, read_only=True, data_only=True)
            try:
                ws = wb[sheet] if isinstance(sheet, str) else wb.worksheets[sheet or 0]
                first = next(ws.iter_rows(min_row=1, max_row=1, values_only=True), ())
            finally:
                wb.close()
            return [str(c).strip() for c in first if c is not None]
    except (ValueError, OSError, KeyError, IndexError, UnicodeDecodeError) as exc:
        raise InputError(f"its first row cannot be read: {exc}", **where) from None
    accepted = ", ".join(CSV_EXTENSIONS + EXCEL_EXTENSIONS + PARQUET_EXTENSIONS)
    raise InputError(f"the file type {ext or '(no extension)'!r} is not one auditmean reads; use {accepted}", **where)


def save_upload(upload: dict[str, Any], folder: str | os.PathLike[str]) -> Path:
    """Write one uploaded file (an entry of ``FileUpload.value``) into ``folder``, atomically.

    The file keeps its name; when a different file of that name is already
    there, ``-2``, ``-3``... is added before the extension. The same bytes
    uploaded again reuse the file already written.
    """
    name = Path(str(upload.get("name") or "upload")).name  # never a path from the browser
    data = bytes(upload["content"])
    target_folder = Path(folder)
    target_folder.mkdir(parents=True, exist_ok=True)
    stem, suffix = Path(name).stem, Path(name).suffix
    target = target_folder / name
    k = 2
    while target.exists() and target.read_bytes() != data:
        target = target_folder / f"{stem}-{k}{suffix}"
        k += 1
    if not target.exists():
        write_bytes_atomic(target, data)
    return target


def _pick(columns: list[str], hints: tuple[str, ...], fallback: int | None) -> str | None:
    for hint in hints:
        for c in columns:
            if hint in c.lower():
                return c
    if fallback is not None and len(columns) > fallback:
        return columns[fallback]
    return None


class PopulationPanel(Panel):
    """Read a population file (or resume an engagement folder) and profile its book values.

    Parameters
    ----------
    state:
        The shared state (a new one when None).
    source, id_column, value_column, stratum_column, decimal:
        Prefill the inputs (the arguments of :func:`auditmean.population.load_population`).
    upload_folder:
        Where uploaded population files are written (default
        ``auditmean-uploads`` in the current folder).

    The button "Read the population" calls
    :func:`~auditmean.population.load_population` and
    :func:`~auditmean.population.profile` and puts the population, how it
    was read and its profile into the state. "Resume" opens an engagement
    folder (:meth:`EngagementState.resume`).
    """

    title = "Population"
    lead = (
        "The items to be sampled: one row per item with its id and book value. auditmean reads CSV, Excel "
        "and Parquet files, checks every row, and says exactly where a row cannot be read."
    )

    def __init__(
        self,
        state: EngagementState | None = None,
        *,
        source: str | os.PathLike[str] | None = None,
        id_column: str | None = None,
        value_column: str | None = None,
        stratum_column: str | None = None,
        decimal: str = ".",
        upload_folder: str | os.PathLike[str] | None = None,
    ) -> None:
        super().__init__(state)
        self.upload_folder = Path(upload_folder) if upload_folder is not None else Path.cwd() / UPLOAD_FOLDER
        wide = widgets.Layout(width="40em")
        self.source = widgets.Text(
            value="" if source is None else str(source),
            description="File",
            placeholder="path to the population file (.csv, .xlsx, .parquet)",
            continuous_update=False,
            layout=wide,
        )
        self.upload = widgets.FileUpload(accept=",".join(CSV_EXTENSIONS + EXCEL_EXTENSIONS + PARQUET_EXTENSIONS),
                                         multiple=False, description="Upload a file")
        self.id_column = widgets.Dropdown(description="Item id", options=[], layout=widgets.Layout(width="22em"))
        self.value_column = widgets.Dropdown(description="Book value", options=[], layout=widgets.Layout(width="22em"))
        self.stratum_column = widgets.Dropdown(description="Stratum", options=[_NONE], value=_NONE,
                                               layout=widgets.Layout(width="22em"),
                                               tooltip="a column holding strata you have already assigned (optional)")
        self.decimal = widgets.ToggleButtons(options=[("1,234.56", "."), ("1.234,56", ",")], value=decimal,
                                             description="Amounts", style={"button_width": "7em"})
        self.read_button = widgets.Button(description="Read the population", button_style="primary", icon="table",
                                          layout=widgets.Layout(width="16em"))
        self.read_button.add_class("am-read-population")
        self.resume_folder = widgets.Text(description="Folder", placeholder="an engagement folder",
                                          continuous_update=False, layout=wide)
        self.resume_button = widgets.Button(description="Resume", icon="folder-open", layout=widgets.Layout(width="9em"))
        self.profile_html = widgets.HTML("")
        self.profile_html.add_class("am-table")
        self.figure = FigureView()
        self._figure_box = widgets.Box([self.figure], layout=widgets.Layout(display="none"))
        self._bins: figures.BookValueBins | None = None

        self.source.observe(self._handler(self._on_source), names="value")
        self.upload.observe(self._handler(self._on_upload), names="value")
        self.read_button.on_click(self._handler(lambda _b: self.read()))
        self.resume_button.on_click(self._handler(lambda _b: self.resume()))
        self._observe_state(self._on_state, ("population", "profile"))

        self.children = [
            self._head,
            widgets.HTML("<b>Start from a population file</b>"),
            widgets.HBox([self.source, self.upload]),
            widgets.HBox([self.id_column, self.value_column, self.stratum_column]),
            self.decimal,
            self.read_button,
            widgets.HTML("<b>Or resume an engagement</b> <span class='am-small'>(every step taken so far is in its folder)</span>"),
            widgets.HBox([self.resume_folder, self.resume_button]),
            self.message,
            self.profile_html,
            self._figure_box,
        ]
        if source is not None:
            self._guard(self._fill_columns, preferred=(id_column, value_column, stratum_column))
        self._show(self.state)

    # ------------------------------------------------------------------ inputs

    def _on_source(self, change: dict[str, Any]) -> None:
        if self._quiet:
            return
        self.clear_message()
        if change["new"].strip():
            self._fill_columns()

    def _on_upload(self, change: dict[str, Any]) -> None:
        files = change["new"]
        if not files:
            return
        path = save_upload(files[0], self.upload_folder)
        self.source.value = str(path)
        self.show_note(f"The uploaded file was saved as {path}; the engagement will refer to it there.")

    def _fill_columns(self, preferred: tuple[str | None, ...] = (None, None, None)) -> None:
        cols = file_columns(self.source.value.strip())
        if not cols:
            raise InputError("row 1 holds no column names", file=self.source.value.strip())
        id_pref, value_pref, stratum_pref = preferred
        self.id_column.options = cols
        self.value_column.options = cols
        self.stratum_column.options = [_NONE] + cols
        self.id_column.value = id_pref if id_pref in cols else _pick(cols, ("id", "no", "number", "ref"), 0)
        self.value_column.value = (
            value_pref if value_pref in cols else _pick(cols, ("book", "value", "amount", "balance"), min(1, len(cols) - 1))
        )
        self.stratum_column.value = stratum_pref if stratum_pref in cols else _NONE

    def reading(self) -> PopulationReading:
        """How the file will be read, from the inputs."""
        source = self.source.value.strip()
        if not source:
            raise InputError("give the population file first (its path, or upload it)", table="population")
        if self.id_column.value is None or self.value_column.value is None:
            self._fill_columns()
        return PopulationReading(
            source=source,
            id_column=self.id_column.value,
            value_column=self.value_column.value,
            stratum_column=None if self.stratum_column.value == _NONE else self.stratum_column.value,
            decimal=self.decimal.value,
        )

    # ------------------------------------------------------------------ actions

    def read(self) -> None:
        """Read and check the population and put it, with its profile, into the state."""
        self.clear_message()
        reading = self.reading()
        self.read_button.disabled = True
        try:
            population = reading.load()
            prof = profile(population)
        finally:
            self.read_button.disabled = False
        self.state.update(population=population, reading=reading, profile=prof)

    def resume(self) -> None:
        """Open the engagement folder typed in and load every step recorded there."""
        self.clear_message()
        folder = self.resume_folder.value.strip()
        if not folder:
            raise InputError("give the engagement folder to resume", table="engagement")
        self.state.resume(folder)
        status = self.state.engagement.status()
        self.show_note(f"Resumed {folder}. Next: {status.next_step}.")

    # ------------------------------------------------------------------ display

    def _on_state(self, change: StateChange) -> None:
        self._show(change.state)

    def _show(self, state: EngagementState) -> None:
        population, prof = state.population, state.profile
        if population is None:
            self.profile_html.value = ""
            self._figure_box.layout.display = "none"
            self._bins = None
            return
        reading = state.reading
        if reading is not None and reading.source != self.source.value:
            self._quiet = True
            try:
                self.source.value = reading.source
            finally:
                self._quiet = False
        parts = [population._html_body()]
        if prof is not None:
            parts.append(prof._repr_html_())
            parts += [box(html.escape(n), "warning") for n in getattr(prof, "notes", ())]
        self.profile_html.value = '<div class="am-profile">' + "".join(parts) + "</div>"
        self._bins = figures.book_value_bins(population.book_values)
        self.figure.show(figures.book_value_distribution(self._bins))
        self._figure_box.layout.display = "flex"
