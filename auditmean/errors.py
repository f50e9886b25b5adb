"""The exceptions auditmean raises on bad input or an impossible request.

Every error says *where* the problem is: the file, row, column, stratum or
parameter, so that the user can fix the input without guessing. Rows are
reported as the user sees them in a spreadsheet: row 1 is the header line,
the first data line is row 2 (see :func:`spreadsheet_row`).
"""

from __future__ import annotations

__all__ = [
    "AuditMeanError",
    "InputError",
    "ParameterError",
    "MethodNotApplicable",
    "RecordError",
    "Stopped",
    "spreadsheet_row",
]


def spreadsheet_row(position: int) -> int:
    """Row number a user sees in a spreadsheet for the 0-based data row ``position``.

    Row 1 holds the column names, so the first data row is row 2.
    """
    return int(position) + 2


class AuditMeanError(Exception):
    """Base class of every error auditmean raises on purpose."""


class InputError(AuditMeanError, ValueError):
    """A table or file the user supplied is malformed.

    Parameters
    ----------
    message:
        What is wrong and what would be accepted.
    file, table:
        The file path, or the name of the in-memory table (``"sample"``,
        ``"strata"``...), so the message can say which input is at fault.
    rows:
        Spreadsheet row numbers (header = row 1) of the offending lines; at
        most the first ten are printed, with a count of the rest.
    column, stratum:
        The offending column or stratum, when there is one.
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        table: str | None = None,
        rows: list[int] | tuple[int, ...] | None = None,
        column: str | None = None,
        stratum: object | None = None,
    ) -> None:
        self.reason = message
        self.file = None if file is None else str(file)
        self.table = table
        self.rows = tuple(int(r) for r in rows) if rows is not None else ()
        self.column = column
        self.stratum = stratum
        super().__init__(self._compose())

    def _compose(self) -> str:
        where = []
        if self.file is not None:
            where.append(f"file {self.file!r}")
        elif self.table is not None:
            where.append(f"table {self.table!r}")
        if self.column is not None:
            where.append(f"column {self.column!r}")
        if self.stratum is not None:
            where.append(f"stratum {self.stratum!r}")
        if self.rows:
            shown = ", ".join(str(r) for r in self.rows[:10])
            more = len(self.rows) - 10
            where.append(
                ("row " if len(self.rows) == 1 else "rows ")
                + shown
                + (f" and {more} more" if more > 0 else "")
            )
        prefix = ", ".join(where)
        return f"{prefix}: {self.reason}" if prefix else self.reason


class ParameterError(AuditMeanError, ValueError):
    """A parameter has a value outside what the function accepts."""

    def __init__(self, parameter: str, message: str) -> None:
        self.parameter = parameter
        self.reason = message
        super().__init__(f"parameter {parameter!r}: {message}")


class MethodNotApplicable(AuditMeanError, ValueError):
    """The estimator cannot be used on this sample (says why and what would work)."""

    def __init__(self, method: str, message: str, *, stratum: object | None = None) -> None:
        self.method = method
        self.stratum = stratum
        self.reason = message
        where = f" (stratum {stratum!r})" if stratum is not None else ""
        super().__init__(f"method {method!r} cannot be used{where}: {message}")


class RecordError(AuditMeanError):
    """An engagement record on disk is missing, corrupt or does not match its population."""

    def __init__(self, path: str, message: str) -> None:
        self.path = str(path)
        self.reason = message
        super().__init__(f"{self.path}: {message}")


class Stopped(AuditMeanError):
    """Long work was stopped by the user before its result was saved; nothing was written."""

    def __init__(self, what: str) -> None:
        self.what = what
        super().__init__(f"{what} stopped by the user; nothing was saved")
