"""Helpers shared by the subcommands: JSON output and column renaming."""

from __future__ import annotations

import json
import sys
from typing import Any

import pandas as pd

from auditmean._records import json_safe
from auditmean.errors import InputError

__all__ = ["print_json", "rename_columns", "add_json_flag"]


def add_json_flag(parser) -> None:
    parser.add_argument("--json", action="store_true", help="print the result as JSON, for programs")


def print_json(obj: Any) -> None:
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
