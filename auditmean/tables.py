"""Reading the user's tables (CSV, Excel, Parquet) exactly as they are.

Cells are read as text wherever the format allows (CSV with every column as
a string, blanks kept as empty strings), so that nothing is coerced behind
the user's back: converting amounts is the job of the function that knows
which column holds money, and it reports rows it cannot read.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from auditmean.errors import InputError

__all__ = ["read_table", "TABLE_SUFFIXES"]

TABLE_SUFFIXES = {".csv": "csv", ".txt": "csv", ".tsv": "tsv", ".xlsx": "excel", ".xlsm": "excel", ".parquet": "parquet", ".pq": "parquet"}


def read_table(path: str | Path, *, sheet: str | int | None = None, encoding: str = "utf-8") -> pd.DataFrame:
    """Read a CSV, TSV, Excel (.xlsx) or Parquet file into a DataFrame.

    CSV and TSV cells stay text (``dtype=str``, empty cells as ``""``);
    Excel cells keep the type the workbook stored; Parquet keeps its schema.
    Raises :class:`~auditmean.errors.InputError` naming the file when it is
    missing, of an unknown kind, unreadable, or holds no data rows.
    """
    p = Path(path)
    if not p.exists():
        raise InputError("no such file", file=str(p))
    if p.is_dir():
        raise InputError("is a folder, not a table file", file=str(p))
    kind = TABLE_SUFFIXES.get(p.suffix.lower())
    if kind is None:
        raise InputError(
            f"unknown file type {p.suffix!r}; use .csv, .tsv, .xlsx or .parquet", file=str(p)
        )
    try:
        if kind in ("csv", "tsv"):
            df = pd.read_csv(
                p,
                dtype=str,
                keep_default_na=False,
                sep="\t" if kind == "tsv" else ",",
                encoding=encoding,
                skipinitialspace=False,
            )
        elif kind == "excel":
            df = pd.read_excel(p, sheet_name=0 if sheet is None else sheet, dtype=object, engine="openpyxl")
        else:
            df = pd.read_parquet(p)
    except pd.errors.EmptyDataError:
        raise InputError("the file is empty", file=str(p)) from None
    except UnicodeDecodeError as exc:
        raise InputError(f"not readable as {encoding} text ({exc.reason} at byte {exc.start})", file=str(p)) from None
    except (ValueError, OSError, KeyError) as exc:
        raise InputError(f"cannot be read as a {kind} table: {exc}", file=str(p)) from None
    if df.empty:
        raise InputError("the file has column names but no data rows", file=str(p))
    df.columns = [str(c).strip() for c in df.columns]
    return df
