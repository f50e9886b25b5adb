"""How an item is given its stratum, written once for numpy and once for SQL.

:class:`StratumRule` holds what :func:`auditmean.strata.stratify` decides
about every item: the top cutoff, whether credits and zeros are kept apart,
and the interior boundaries of the rule's strata (or the preassigned labels
in their order). It assigns each item a *group*, a fixed position that does
not depend on which strata turn out empty::

    0  credits            (book value below 0, when kept apart)
    1  zeros              (book value exactly 0, when kept apart)
    2 .. 2 + R - 1        the rule's strata "1" .. "R", or the preassigned labels
    2 + R  top            (book value at or above the top cutoff)

The convention is that of :mod:`auditmean.core.boundaries`: stratum ``h``
holds ``b_{h-1} <= x < b_h``, a value equal to a boundary goes up, and the
top stratum takes every item at or above the cutoff before anything else.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from auditmean.core import boundaries as bnd
from auditmean.strata import CREDITS_LABEL, TOP_LABEL, ZEROS_LABEL

__all__ = ["CREDITS", "ZEROS", "REST", "StratumRule", "sql_double"]

CREDITS = 0
ZEROS = 1
REST = 2


def sql_double(value: float) -> str:
    """A SQL literal that DuckDB reads back as exactly ``value`` (17 significant digits, exponent form)."""
    return f"CAST('{float(value):.17e}' AS DOUBLE)"


@dataclass(frozen=True)
class StratumRule:
    """The assignment of items to strata (see the module notes for the group numbers).

    Attributes
    ----------
    top_cutoff:
        Items at or above it form the top stratum; None for no top stratum.
    credits_apart, zeros_apart:
        Whether negative and zero book values form strata of their own.
    boundaries:
        Interior boundaries of the rule's strata (ignored with ``preassigned``).
    preassigned:
        The preassigned labels of the rule's strata, in table order; None
        when the strata come from ``boundaries``.
    """

    top_cutoff: float | None = None
    credits_apart: bool = True
    zeros_apart: bool = True
    boundaries: tuple[float, ...] = ()
    preassigned: tuple[str, ...] | None = None

    @property
    def n_rest(self) -> int:
        """Number of the rule's (or preassigned) strata."""
        return len(self.preassigned) if self.preassigned is not None else len(self.boundaries) + 1

    @property
    def top(self) -> int:
        """Group number of the top stratum."""
        return REST + self.n_rest

    @property
    def n_groups(self) -> int:
        return self.top + 1

    def labels(self) -> list[str]:
        """Stratum label of each group."""
        rest = list(self.preassigned) if self.preassigned is not None else [str(h + 1) for h in range(self.n_rest)]
        return [CREDITS_LABEL, ZEROS_LABEL, *rest, TOP_LABEL]

    def groups(self, values: np.ndarray, preassigned: np.ndarray | None = None) -> np.ndarray:
        """Group of each item (int64), from its book value (and preassigned label)."""
        x = np.asarray(values, dtype=float)
        if self.preassigned is not None:
            if preassigned is None:
                raise ValueError("this rule needs the preassigned labels")
            index = pd.Index(list(self.preassigned), dtype=object).get_indexer(np.asarray(preassigned, dtype=object))
            g = REST + index.astype(np.int64)
        else:
            g = REST + bnd.assign(x, np.asarray(self.boundaries, dtype=float))
        if self.zeros_apart:
            g[x == 0] = ZEROS
        if self.credits_apart:
            g[x < 0] = CREDITS
        if self.top_cutoff is not None:
            g[x >= self.top_cutoff] = self.top
        return g

    def sql(self, value: str = "book_value", label: str = "label") -> tuple[str, list[object]]:
        """The group as a SQL expression on the columns ``value`` (and ``label``), with its parameters."""
        parts = []
        params: list[object] = []
        if self.top_cutoff is not None:
            parts.append(f"WHEN {value} >= {sql_double(self.top_cutoff)} THEN {self.top}")
        if self.credits_apart:
            parts.append(f"WHEN {value} < 0 THEN {CREDITS}")
        if self.zeros_apart:
            parts.append(f"WHEN {value} = 0 THEN {ZEROS}")
        if self.preassigned is not None:
            rest = f"{REST - 1} + list_position(?::VARCHAR[], {label})"
            params.append(list(self.preassigned))
        elif self.boundaries:
            rest = f"{REST} + " + " + ".join(f"({value} >= {sql_double(b)})::INTEGER" for b in self.boundaries)
        else:
            rest = str(REST)
        if not parts:
            return f"({rest})", params
        return f"(CASE {' '.join(parts)} ELSE {rest} END)", params
