"""Helpers shared by the subcommands: JSON output and column renaming."""

from __future__ import annotations

import json
import sys
from typing import TYPE_CHECKING, Any

from auditmean.errors import InputError

if TYPE_CHECKING:
    import pandas as pd

# pandas and the readers are imported where they are used: building the
# command line's parser imports this module and must stay light.

__all__ = ["print_json", "rename_columns", "add_json_flag", "add_table_options", "load_sample_and_strata"]


def add_json_flag(parser) -> None:
    parser.add_argument("--json", action="store_true", help="print the result as JSON, for programs")


def print_json(obj: Any) -> None:
    from auditmean._records import json_safe

    json.dump(json_safe(obj), sys.stdout, indent=2, ensure_ascii=False, allow_nan=False)
    sys.stdout.write("\n")


def rename_columns(df: pd.DataFrame, mapping: dict[str, str | None], file: str) -> pd.DataFrame:
    """Rename the user's columns to auditmean's names (``{ours: theirs}``); checks they exist."""
    renames = {}
    for ours, theirs in mapping.items():
        if theirs is None or theirs == ours:
            continue
        if theirs not in df.columns:
            have = ", ".join(repr(c) for c in df.columns)
            raise InputError(f"no column {theirs!r} (given for {ours}); the file has {have}", file=file, column=theirs)
        renames[theirs] = ours
    return df.rename(columns=renames)


def add_table_options(p, optional: bool = False) -> None:
    """The sample and strata files and the options that map their column names."""
    nargs = "?" if optional else None
    p.add_argument("sample", nargs=nargs, help="sample file (CSV, TSV, Excel or Parquet): one row per examined item")
    p.add_argument("strata", nargs=nargs, help="strata file: one row per population stratum")
    cols = p.add_argument_group("column names (when the files use other names)")
    cols.add_argument("--stratum-column", default="stratum", metavar="NAME")
    cols.add_argument("--audited-column", default="audited_value", metavar="NAME")
    cols.add_argument("--book-column", default="book_value", metavar="NAME")
    cols.add_argument("--item-column", default=None, metavar="NAME", help="item id column of the sample (checked for duplicates)")
    cols.add_argument("--count-column", default="count", metavar="NAME")
    cols.add_argument("--book-total-column", default="book_total", metavar="NAME")
    cols.add_argument("--sheet", default=None, help="sheet name for Excel files (default: the first)")


def load_sample_and_strata(args):
    """Read both files and rename their columns to auditmean's names."""
    from auditmean.tables import read_table

    sample = read_table(args.sample, sheet=args.sheet)
    sample = rename_columns(
        sample,
        {
            "stratum": args.stratum_column,
            "audited_value": args.audited_column,
            "book_value": args.book_column if args.book_column in sample.columns or args.book_column != "book_value" else None,
            "item_id": args.item_column,
        },
        args.sample,
    )
    strata = read_table(args.strata, sheet=args.sheet)
    strata = rename_columns(
        strata,
        {
            "stratum": args.stratum_column,
            "count": args.count_column,
            "book_total": args.book_total_column
            if args.book_total_column in strata.columns or args.book_total_column != "book_total"
            else None,
        },
        args.strata,
    )
    return sample, strata


