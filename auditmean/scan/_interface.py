"""The one interface behind every way of reading a population: :class:`PopulationScan`.

Planning and selection need only a few things from the items: per-stratum
counts, sums and sums of powers, a histogram of book values, a few order
statistics, and the items with the smallest selection keys in each stratum.
:class:`PopulationScan` asks for exactly those; :class:`~auditmean.scan.PandasScan`
answers from a :class:`~auditmean.population.Population` held in memory and
:class:`~auditmean.scan.DuckDBScan` from a file, by SQL, without loading it.
:func:`auditmean.scan.stratify_scan` and :func:`auditmean.scan.select_scan`
are written against this interface only, so another engine (Dask, Spark)
plugs in by implementing it; see DEVELOPERS.md.
"""

from __future__ import annotations

from typing import Protocol, runtime_checkable

import numpy as np
import pandas as pd

from auditmean.core.boundaries import StratumStatistics
from auditmean.population import Profile
from auditmean.scan._rule import StratumRule

__all__ = ["PopulationScan"]


@runtime_checkable
class PopulationScan(Protocol):
    """What planning and selection ask of a population, whatever holds its items.

    Every method is one pass (or a few) over the items. Groups are those of
    :class:`~auditmean.scan.StratumRule` (credits 0, zeros 1, the rule's
    strata from 2, top last).
    """

    #: ``"pandas"`` or ``"duckdb"`` (or the name of another engine).
    engine: str
    #: Where the items come from (a file path, or ``"<DataFrame>"``).
    source: str
    #: Number of items.
    count: int
    #: Whether the items carry a preassigned stratum label.
    has_preassigned: bool

    def fingerprint(self) -> tuple[str | None, str]:
        """``(file_sha256, content_sha256)`` by the rule of :func:`auditmean.population.content_fingerprint`."""
        ...

    def profile(self) -> Profile:
        """The profile of the book values (:func:`auditmean.population.profile`)."""
        ...

    def extent(self, rule: StratumRule) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Count, smallest and largest book value of each group (NaN where empty)."""
        ...

    def count_and_moments(self, rule: StratumRule, centres: np.ndarray | None = None) -> StratumStatistics:
        """Per group: count, total, mean, standard deviation, skewness, smallest and largest value.

        As :func:`auditmean.core.boundaries.stratum_statistics` on the group
        numbers. ``centres`` (a value inside each group's range) lets an
        engine sum shifted powers in one pass; it may ignore them.
        """
        ...

    def histogram(self, rule: StratumRule, edges: np.ndarray) -> np.ndarray:
        """Counts of the items in the rule's strata (groups 2 .. top - 1) in the classes ``edges``.

        Class ``j`` holds ``edges[j] <= x < edges[j + 1]``, the last class closed
        (as :func:`numpy.histogram` with these edges).
        """
        ...

    def largest(self, k: int) -> float:
        """The ``k``-th largest book value (``k`` from 1)."""
        ...

    def quantiles(self, levels: tuple[float, ...]) -> dict[float, float]:
        """Quantiles of the book values (Hyndman and Fan 1996, definition 7, as :func:`numpy.quantile`)."""
        ...

    def labels(self, rule: StratumRule, group: str) -> list[str]:
        """Distinct preassigned labels of the items in the rule's strata (``group="rest"``) or the top (``"top"``)."""
        ...

    def smallest_keys(self, seed: str, rule: StratumRule, sizes: np.ndarray) -> pd.DataFrame:
        """In each group ``g``, the ``sizes[g]`` items with the smallest keys for ``seed``.

        Columns ``item_id``, ``group``, ``key``, ``key_int``, ``order``, by
        the rule of :mod:`auditmean.selection` (ties by item id).
        """
        ...

    def book_values_of(self, item_ids: list[str]) -> pd.DataFrame:
        """``item_id`` and ``book_value`` of the given items (those found)."""
        ...
