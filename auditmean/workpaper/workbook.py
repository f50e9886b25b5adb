"""The workpaper as an Excel workbook (openpyxl).

One sheet per part of the work (:data:`~auditmean.workpaper._sheets.SHEET_NAMES`),
numbers as numbers with number formats (money with thousands separators and
two decimals, whole numbers, percentages), the header row of each sheet's
main table frozen and repeated on every printed page, column widths that
fit, and a page setup for printing (landscape where the tables are wide,
fitted to the page width).

Text from the user's files is never a formula
---------------------------------------------
Item ids, notes, stratum labels, file paths and every other text are written
as text cells. openpyxl makes a formula of any string that starts with
``=``, so every string goes through :func:`put_text`: a text that would
start with a character a spreadsheet reads as the start of a formula or a
command (``=``, ``+``, ``-``, ``@``, tab, carriage return, and their
full-width forms) is written with the cell type forced to text
(``data_type = "s"``), the text number format ``@`` and the cell's
quote-prefix mark, the spreadsheet's own flag for "text that looks like a
formula": the cell shows the text exactly as in the file, is never
evaluated, and stays text when edited. This follows OWASP's guidance on
formula (CSV) injection, which asks that such cells be made plain text; we
use the type and the quote-prefix mark rather than adding a visible
apostrophe, so the text reads back exactly as given. Numbers (a negative
amount included) are numbers and are not touched.

Numbers are written with 16 significant digits (openpyxl's ``%.16g``;
a spreadsheet shows at most 15); the HTML report and the engagement record
keep every digit.

Three limits of the file format are kept. A carriage return is written as
a line feed (the file's XML reads every line end as a line feed anyway).
Other control characters cannot be stored in a cell and are shown as the
Unicode control pictures (U+0007 as U+2407; see
:func:`auditmean.workpaper._document.visible`). A cell holds at most 32,767
characters, so a longer text is cut there with a note of its full length.
The engagement record keeps every text exactly as entered.
"""

from __future__ import annotations

import io
import math
import os
from pathlib import Path
from typing import Any

from openpyxl import Workbook
from openpyxl.styles import Alignment, Border, Font, PatternFill, Side
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.worksheet import Worksheet

from auditmean._atomic import write_bytes_atomic
from auditmean.workpaper._content import Workpaper
from auditmean.workpaper._document import (
    Fields,
    Figure,
    Heading,
    Paragraph,
    Sheet,
    Table,
    display,
    is_number,
    visible,
)
from auditmean.workpaper._sheets import build_sheets

__all__ = ["NUMBER_FORMATS", "FORMULA_STARTS", "MAX_CELL_TEXT", "put_text", "workbook_bytes", "save_workbook"]

#: Excel number formats for the display formats of :mod:`auditmean.workpaper._document`.
NUMBER_FORMATS = {
    "money": "#,##0.00",
    "num2": "#,##0.00",
    "int": "#,##0",
    "pct": "0.0%",
    "num3": "0.000",
    "num4": "0.0000",
}

#: First characters that make a spreadsheet read a cell as a formula or command (OWASP), and their full-width forms.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r", "\uff1d", "\uff0b", "\uff0d", "\uff20")

#: Most characters a cell holds (Excel's limit).
MAX_CELL_TEXT = 32_767

_BOLD = Font(bold=True)
_TITLE = Font(bold=True, size=14)
_HEADING = Font(bold=True, size=12, color="1F3B57")
_CAUTION = Font(bold=True, color="7A2E0E")
_NOTE = Font(italic=True, color="7A2E0E")
_CODE = Font(name="Consolas")
_HEAD_FILL = PatternFill("solid", fgColor="DCE6F0")
_CAUTION_FILL = PatternFill("solid", fgColor="FBEDE6")
_THIN = Side(style="thin", color="9DB8D3")
_HEAD_BORDER = Border(bottom=_THIN)
_WRAP = Alignment(wrap_text=True, vertical="top")
_TOP = Alignment(vertical="top")
_PARAGRAPH_COLUMNS = 8  # paragraphs span this many columns (merged), wrapping
_MIN_WIDTH, _MAX_WIDTH, _WIDE_WIDTH = 8, 36, 50


def _clean(text: str) -> str:
    text = visible(text)
    if len(text) > MAX_CELL_TEXT:
        tail = f" [cut here: the text has {len(text):,} characters; the engagement record holds all of it]"
        text = text[: MAX_CELL_TEXT - len(tail)] + tail
    return text


def put_text(cell: Any, text: str) -> None:
    """Write ``text`` into ``cell`` as text, never as a formula (see the module docstring)."""
    original = str(text)
    text = _clean(original.replace("\r\n", "\n").replace("\r", "\n"))
    cell.value = text
    if original.startswith(FORMULA_STARTS) or text.startswith(FORMULA_STARTS):
        cell.data_type = "s"
        cell.number_format = "@"
        cell.quotePrefix = True


def _put(cell: Any, value: Any, fmt: str) -> None:
    if value is None:
        return
    if isinstance(value, bool):
        put_text(cell, display(value, fmt))
        return
    if is_number(value):
        if fmt in ("text", "code"):  # identifiers and seeds: exact digits, as text
            put_text(cell, str(value))
            return
        v = float(value)
        if math.isnan(v):
            return
        if math.isinf(v):
            put_text(cell, display(v, fmt))
            return
        cell.value = int(value) if fmt == "int" and float(value).is_integer() else v
        cell.alignment = _TOP
        if fmt in NUMBER_FORMATS:
            cell.number_format = NUMBER_FORMATS[fmt]
        return
    put_text(cell, str(value))
    if fmt == "code":
        cell.font = _CODE


class _Writer:
    def __init__(self, ws: Worksheet) -> None:
        self.ws = ws
        self.row = 1
        self.widths: dict[int, float] = {}
        self.wide: set[int] = set()
        self.header_row: int | None = None
        self.wrapped: list[tuple[int, int, int, str]] = []  # row, first and last column, text

    def wrap(self, cell: Any, text: str, last_col: int | None = None) -> None:
        """Wrap ``cell`` and remember its text, to give its row a height that shows it."""
        cell.alignment = _WRAP
        self.wrapped.append((cell.row, cell.column, last_col or cell.column, text))

    def fit(self, col: int, text: str, *, wide: bool = False) -> None:
        longest = max((len(line) for line in text.split("\n")), default=0)
        self.widths[col] = max(self.widths.get(col, _MIN_WIDTH), min(longest + 2, _WIDE_WIDTH if wide else _MAX_WIDTH))
        if wide:
            self.wide.add(col)

    def title(self, text: str) -> None:
        c = self.ws.cell(self.row, 1)
        put_text(c, text)
        c.font = _TITLE
        self.row += 2

    def heading(self, text: str) -> None:
        self.row += 1 if self.row > 3 else 0
        c = self.ws.cell(self.row, 1)
        put_text(c, text)
        c.font = _HEADING
        self.row += 1

    def paragraph(self, p: Paragraph) -> None:
        ws = self.ws
        c = ws.cell(self.row, 1)
        put_text(c, p.text)
        self.wrap(c, str(c.value), _PARAGRAPH_COLUMNS)
        if p.kind == "caution":
            c.font, c.fill = _CAUTION, _CAUTION_FILL
        elif p.kind == "note":
            c.font = _NOTE
        elif p.kind == "code":
            c.font = _CODE
        ws.merge_cells(start_row=self.row, start_column=1, end_row=self.row, end_column=_PARAGRAPH_COLUMNS)
        self.row += 1

    def fields(self, f: Fields) -> None:
        for label, value, fmt in f.rows:
            a = self.ws.cell(self.row, 1)
            put_text(a, label)
            a.font = _BOLD
            a.alignment = _TOP
            self.fit(1, label)
            b = self.ws.cell(self.row, 2)
            _put(b, value, fmt)
            self.fit(2, display(value, fmt))
            if isinstance(b.value, str) and len(b.value) > _MAX_WIDTH:
                self.wrap(b, b.value)
            self.row += 1

    def table(self, t: Table) -> None:
        ws = self.ws
        if t.caption:
            c = ws.cell(self.row, 1)
            put_text(c, t.caption)
            c.font = Font(italic=True)
            self.row += 1
        for j, col in enumerate(t.columns, start=1):
            c = ws.cell(self.row, j)
            put_text(c, col.name)
            c.font, c.fill, c.border = _BOLD, _HEAD_FILL, _HEAD_BORDER
            self.wrap(c, col.name)
            self.fit(j, col.name if len(col.name) <= 16 else col.name[:16])
        if t.main and self.header_row is None:
            self.header_row = self.row
        self.row += 1
        for r in t.rows:
            for j, (col, value) in enumerate(zip(t.columns, r), start=1):
                c = ws.cell(self.row, j)
                _put(c, value, col.fmt)
                text = display(value, col.fmt)
                self.fit(j, text, wide=col.wide)
                if col.wide or len(text) > _MAX_WIDTH:
                    self.wrap(c, str(c.value) if isinstance(c.value, str) else text)
                elif isinstance(c.value, str):
                    c.alignment = _TOP
            self.row += 1
        if not t.rows:
            put_text(ws.cell(self.row, 1), "(none)")
            self.row += 1
        self.row += 1

    def figure(self, f: Figure) -> None:
        c = self.ws.cell(self.row, 1)
        put_text(c, f"Picture in the HTML report: {f.caption}.")
        c.font = Font(italic=True, color="555555")
        self.row += 1

    def _row_heights(self) -> None:
        """Heights that show wrapped text (a spreadsheet does not size rows with merged or wrapped cells itself).

        Lines are estimated as characters over the column width (a width unit
        holds about one character of the default font), 15 points a line, at
        most 30 lines: our own rule of thumb.
        """
        heights: dict[int, int] = {}
        for row, first, last, text in self.wrapped:
            width = sum(self.widths.get(c, 9.0) for c in range(first, last + 1))
            per_line = max(1.0, width * 1.1 - 1)
            lines = sum(max(1, math.ceil(len(part) / per_line)) for part in text.split("\n"))
            heights[row] = max(heights.get(row, 1), min(lines, 30))
        for row, lines in heights.items():
            if lines > 1:
                self.ws.row_dimensions[row].height = 15 * lines

    def finish(self, sheet: Sheet) -> None:
        ws = self.ws
        for col, width in self.widths.items():
            ws.column_dimensions[get_column_letter(col)].width = width
        self._row_heights()
        if self.header_row is not None and self.header_row <= 8:
            ws.freeze_panes = ws.cell(self.header_row + 1, 1)
            ws.print_title_rows = f"{self.header_row}:{self.header_row}"
        else:
            ws.freeze_panes = "A2"
            ws.print_title_rows = "1:1"
        ps = ws.page_setup
        ps.orientation = "landscape" if sheet.landscape else "portrait"
        ps.paperSize = ws.PAPERSIZE_A4
        ps.fitToWidth = 1
        ps.fitToHeight = 0
        ws.sheet_properties.pageSetUpPr.fitToPage = True
        ws.print_options.gridLines = False
        ws.page_margins.left = ws.page_margins.right = 0.5
        # header and footer hold only our own fixed words (no user text: '&' starts a field code there)
        ws.oddHeader.left.text = "auditmean sampling workpaper"
        ws.oddHeader.right.text = "&A"
        ws.oddFooter.right.text = "page &P of &N"


def _write_sheet(ws: Worksheet, sheet: Sheet) -> None:
    w = _Writer(ws)
    w.title(sheet.title)
    for block in sheet.blocks:
        if isinstance(block, Heading):
            w.heading(block.text)
        elif isinstance(block, Paragraph):
            w.paragraph(block)
        elif isinstance(block, Fields):
            w.fields(block)
        elif isinstance(block, Table):
            w.table(block)
        elif isinstance(block, Figure):
            w.figure(block)
        else:  # pragma: no cover - every block type is handled above
            raise TypeError(f"unknown block {type(block).__name__}")
    w.finish(sheet)


def build_workbook(wp: Workpaper) -> Workbook:
    """The workbook of a workpaper (not yet saved)."""
    wb = Workbook()
    wb.remove(wb.active)
    for sheet in build_sheets(wp):
        _write_sheet(wb.create_sheet(sheet.name), sheet)
    wb.properties.title = "Sampling workpaper"
    wb.properties.creator = "auditmean"
    return wb


def workbook_bytes(wp: Workpaper) -> bytes:
    """The workbook as the bytes of an .xlsx file."""
    buf = io.BytesIO()
    build_workbook(wp).save(buf)
    return buf.getvalue()


def save_workbook(wp: Workpaper, path: str | os.PathLike[str]) -> Path:
    """Write the workbook to ``path`` atomically (the old file stays whole until the new one is complete)."""
    target = Path(path)
    write_bytes_atomic(target, workbook_bytes(wp))
    return target

