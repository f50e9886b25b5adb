"""Shared machinery of the frozen result records.

Every record auditmean returns is a frozen dataclass that

* keeps numbers as attributes for programs,
* prints a short table with ``summary()`` and renders it in Jupyter with
  ``_repr_html_`` (always HTML-escaped: item ids and stratum names come from
  the user's files),
* turns into plain JSON with ``to_dict()`` (``inf`` and ``nan`` become
  ``None``; tables become lists of row objects), carrying ``SCHEMA_VERSION``
  so that an engagement folder outlives the version that wrote it.
"""

from __future__ import annotations

import dataclasses
import html
import math
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

SCHEMA_VERSION = 1


def json_safe(value: Any) -> Any:
    """Convert ``value`` into something :func:`json.dumps` accepts, losslessly where possible.

    Non-finite floats become ``None`` (JSON has no ``inf``/``nan``); numpy
    scalars become Python scalars; DataFrames become a list of row mappings.
    """
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return v if math.isfinite(v) else None
    if isinstance(value, pd.DataFrame):
        return [
            {str(k): json_safe(v) for k, v in row.items()}
            for row in value.to_dict(orient="records")
        ]
    if isinstance(value, pd.Series):
        return {str(k): json_safe(v) for k, v in value.items()}
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        if hasattr(value, "to_dict"):
            return value.to_dict()
        return {f.name: json_safe(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, Mapping):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, np.ndarray):
        return [json_safe(v) for v in value.tolist()]
    if isinstance(value, Sequence):
        return [json_safe(v) for v in value]
    if value is pd.NA or value is pd.NaT:
        return None
    return str(value)


def format_number(value: Any, decimals: int = 2) -> str:
    """Money-style formatting with thousands separators; blanks for missing values."""
    if value is None:
        return ""
    if isinstance(value, (int, np.integer)) and not isinstance(value, bool):
        return f"{int(value):,}"
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if math.isnan(v):
        return ""
    if math.isinf(v):
        return "+inf" if v > 0 else "-inf"
    return f"{v:,.{decimals}f}"


def property_text(title: str, rows: Sequence[tuple[str, str]]) -> str:
    """A title, then one indented ``name  value`` line per row, the names padded to one width."""
    width = max(len(k) for k, _ in rows)
    return title + "\n" + "\n".join(f"  {k.ljust(width)}  {v}" for k, v in rows)


def text_table(header: Sequence[str], rows: Sequence[Sequence[Any]]) -> str:
    """A plain fixed-width table: first column left-aligned, the others right-aligned."""
    cells = [[str(h) for h in header]] + [[str(c) for c in r] for r in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(header))]

    def line(r: Sequence[str]) -> str:
        parts = [r[0].ljust(widths[0])] + [c.rjust(w) for c, w in zip(r[1:], widths[1:])]
        return "  ".join(parts).rstrip()

    out = [line(cells[0]), "  ".join("-" * w for w in widths)]
    out += [line(r) for r in cells[1:]]
    return "\n".join(out)


def html_table(header: Sequence[str], rows: Sequence[Sequence[Any]], caption: str | None = None) -> str:
    """An escaped HTML table (every cell goes through :func:`html.escape`)."""
    esc = html.escape
    parts = ['<table class="auditmean-table">']
    if caption:
        parts.append(f"<caption>{esc(caption)}</caption>")
    parts.append("<thead><tr>" + "".join(f"<th>{esc(str(h))}</th>" for h in header) + "</tr></thead>")
    parts.append("<tbody>")
    for r in rows:
        parts.append("<tr>" + "".join(f"<td>{esc(str(c))}</td>" for c in r) + "</tr>")
    parts.append("</tbody></table>")
    return "".join(parts)


class RecordMixin:
    """``to_dict``/``_repr_html_`` for frozen dataclasses that define ``summary()``.

    Subclasses may override ``_html_body`` for a richer rendering; the default
    wraps the text summary in ``<pre>`` after escaping it.
    """

    record_kind: str = "record"

    def to_dict(self) -> dict[str, Any]:
        return self._dict_of(f.name for f in dataclasses.fields(self))  # type: ignore[arg-type]

    def _dict_of(self, names: Iterable[str]) -> dict[str, Any]:
        """The record's kind and schema version, then the named attributes, each made JSON-safe."""
        out: dict[str, Any] = {"schema_version": SCHEMA_VERSION, "kind": self.record_kind}
        for name in names:
            out[name] = json_safe(getattr(self, name))
        return out

    def summary(self) -> str:  # pragma: no cover - every record overrides it
        raise TypeError(f"{type(self).__name__} must define summary()")

    def _html_body(self) -> str:
        return f"<pre>{html.escape(self.summary())}</pre>"

    def _repr_html_(self) -> str:
        return f'<div class="auditmean-record">{self._html_body()}</div>'

    def __str__(self) -> str:
        return self.summary()
