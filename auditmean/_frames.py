"""Checks of user tables at the public boundary, with errors that say where.

These helpers turn a pandas column into a clean numpy array or raise an
:class:`~auditmean.errors.InputError` that names the table (or file), the
column and the spreadsheet rows at fault. They are used once, where a public
function receives a table; the numeric core trusts what they return.
"""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np
import pandas as pd

from auditmean._repeats import labels_may_repeat
from auditmean.errors import InputError, spreadsheet_row

__all__ = ["require_frame", "require_columns", "numeric_column", "integer_column", "label_column", "duplicated_rows"]


def _where(table: str, file: str | None) -> dict[str, str]:
    return {"file": file} if file is not None else {"table": table}


def require_frame(obj: object, table: str, file: str | None = None) -> pd.DataFrame:
    if not isinstance(obj, pd.DataFrame):
        raise InputError(
            f"expected a pandas DataFrame, got {type(obj).__name__}", **_where(table, file)
        )
    return obj


def require_columns(df: pd.DataFrame, columns: Iterable[str], table: str, file: str | None = None, why: str = "") -> None:
    missing = [c for c in columns if c not in df.columns]
    if missing:
        have = ", ".join(repr(str(c)) for c in df.columns) or "none"
        reason = f" ({why})" if why else ""
        raise InputError(
            f"missing column{'s' if len(missing) > 1 else ''} "
            f"{', '.join(repr(c) for c in missing)}{reason}; the table has {have}",
            column=missing[0],
            **_where(table, file),
        )


def _bad_rows(mask: np.ndarray) -> list[int]:
    return [spreadsheet_row(i) for i in np.flatnonzero(mask)]


def numeric_column(df: pd.DataFrame, column: str, table: str, file: str | None = None) -> np.ndarray:
    """The column as finite float64 values, or an error listing the rows that are not."""
    raw = df[column]
    values = pd.to_numeric(raw, errors="coerce")
    arr = values.to_numpy(dtype=float, na_value=np.nan)
    bad = ~np.isfinite(arr)
    if bad.any():
        missing = raw.isna().to_numpy() | (raw.astype(str).str.strip() == "").to_numpy()
        examples = [repr(v) for v in raw[bad & ~missing].head(3).tolist()]
        kind = "missing or non-numeric values" if examples else "missing values"
        detail = f" (for example {', '.join(examples)})" if examples else ""
        raise InputError(f"{kind}{detail}", rows=_bad_rows(bad), column=column, **_where(table, file))
    return arr


def integer_column(df: pd.DataFrame, column: str, table: str, file: str | None = None, minimum: int = 0) -> np.ndarray:
    """Whole numbers not below ``minimum``, as int64."""
    arr = numeric_column(df, column, table, file)
    not_whole = arr != np.round(arr)
    if not_whole.any():
        raise InputError("values must be whole numbers", rows=_bad_rows(not_whole), column=column, **_where(table, file))
    below = arr < minimum
    if below.any():
        raise InputError(
            f"values must not be below {minimum}", rows=_bad_rows(below), column=column, **_where(table, file)
        )
    return arr.astype(np.int64)


def label_column(df: pd.DataFrame, column: str, table: str, file: str | None = None) -> pd.Series:
    """Labels (stratum names, item ids) with no missing entries."""
    s = df[column]
    blank = s.isna().to_numpy() | (s.astype(str).str.strip() == "").to_numpy()
    if blank.any():
        raise InputError("blank labels", rows=_bad_rows(blank), column=column, **_where(table, file))
    return s.reset_index(drop=True)


def duplicated_rows(labels: pd.Series) -> list[int]:
    """Spreadsheet rows of every label that occurs more than once."""
    if not labels_may_repeat(labels):  # hashes first: certainly none repeats
        return []
    dup = labels.duplicated(keep=False).to_numpy()
    return _bad_rows(dup)
