"""The workpaper as sheets of blocks: one content, rendered by two writers.

A :class:`Sheet` is a titled list of blocks: :class:`Heading`,
:class:`Paragraph`, :class:`Fields` (label and value pairs), :class:`Table`
and :class:`Figure` (a picture, shown by the HTML report only). Values stay
Python values (numbers as numbers) with a display format; the workbook
writer turns the format into a number format, the HTML writer into text
with :func:`display`.

Formats: ``"text"``, ``"code"`` (text in a fixed-width font: fingerprints,
keys, commands), ``"money"`` (thousands separators, 2 decimals), ``"int"``,
``"pct"`` (a share shown as a percentage, 1 decimal), ``"num2"``,
``"num3"``, ``"num4"`` (decimals), ``"yesno"``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any

import numpy as np

__all__ = [
    "FORMATS",
    "Column",
    "Heading",
    "Paragraph",
    "Fields",
    "Table",
    "Figure",
    "Sheet",
    "display",
    "is_number",
    "visible",
]

_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")


def visible(text: str) -> str:
    """``text`` with control characters other than tab, line feed and carriage return made visible.

    Each becomes its Unicode control picture (U+2400 + code, U+2421 for
    DEL): a workbook cell cannot store them, and in a page they would be
    invisible. The engagement record keeps the text as entered.
    """
    return _CONTROL.sub(lambda m: "\u2421" if m.group() == "\x7f" else chr(0x2400 + ord(m.group())), text)

FORMATS = ("text", "code", "money", "int", "pct", "num2", "num3", "num4", "yesno")


@dataclass(frozen=True)
class Column:
    """A table column: its header, its display format, and whether its text is long (wraps)."""

    name: str
    fmt: str = "text"
    wide: bool = False


@dataclass(frozen=True)
class Heading:
    text: str


@dataclass(frozen=True)
class Paragraph:
    """A sentence or more; ``kind`` is ``"text"``, ``"caution"``, ``"note"`` (read first) or ``"code"``."""

    text: str
    kind: str = "text"


@dataclass(frozen=True)
class Fields:
    """Label, value and format, one row each."""

    rows: tuple[tuple[str, Any, str], ...]


@dataclass(frozen=True)
class Table:
    """A table with a header row. ``main`` marks the table whose header row is frozen and printed on every page."""

    columns: tuple[Column, ...]
    rows: tuple[tuple[Any, ...], ...]
    caption: str | None = None
    main: bool = False


@dataclass(frozen=True)
class Figure:
    """A picture of the HTML report, named by ``key``."""

    key: str
    caption: str


@dataclass(frozen=True)
class Sheet:
    """One sheet of the workbook, one section of the report."""

    name: str
    anchor: str
    title: str
    blocks: tuple[Any, ...]
    landscape: bool = False


def is_number(v: Any) -> bool:
    """A real number that is not a bool (numpy scalars included)."""
    return isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, (bool, np.bool_))


def display(value: Any, fmt: str) -> str:
    """The text shown for ``value`` in format ``fmt`` (blank for None and NaN)."""
    if value is None:
        return ""
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else ("" if fmt == "yesno" else "no")
    if not is_number(value):
        return str(value)
    v = float(value)
    if math.isnan(v):
        return ""
    if math.isinf(v):
        return "+inf" if v > 0 else "-inf"
    if fmt == "money" or fmt == "num2":
        return f"{v:,.2f}"
    if fmt == "int":
        return f"{int(value):,}" if float(value).is_integer() else f"{v:,}"
    if fmt == "pct":
        return f"{100 * v:.1f}%"
    if fmt == "num3":
        return f"{v:,.3f}"
    if fmt == "num4":
        return f"{v:,.4f}"
    return str(value)
