""":class:`PandasScan`: the scan interface over a population held in memory.

Every answer comes from the functions the in-memory path already uses
(:func:`~auditmean.population.profile`,
:func:`~auditmean.core.boundaries.stratum_statistics`, :func:`numpy.histogram`,
:func:`~auditmean.selection.select`); nothing is computed a second way.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from auditmean.core import boundaries as bnd
from auditmean.core.profile import quantiles as _quantiles
from auditmean.population import Population, Profile, profile
from auditmean.scan._rule import REST, StratumRule
from auditmean.selection import select

__all__ = ["PandasScan"]


class PandasScan:
    """The scan of a :class:`~auditmean.population.Population` (items in memory).

    Parameters
    ----------
    population:
        As :func:`~auditmean.population.load_population` returns it.
    """

    engine = "pandas"

    def __init__(self, population: Population) -> None:
        self.population = population
        self.source = population.source
        self.count = population.count
        self.has_preassigned = population.stratum_column is not None
        self._values = population.book_values
        self._pre = population.preassigned_strata

    def _groups(self, rule: StratumRule) -> np.ndarray:
        return rule.groups(self._values, self._pre)

    def fingerprint(self) -> tuple[str | None, str]:
        return self.population.file_sha256, self.population.content_sha256

    def profile(self) -> Profile:
        return profile(self.population)

    def extent(self, rule: StratumRule) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        stats = self.count_and_moments(rule)
        return stats.count, stats.minimum, stats.maximum

    def count_and_moments(self, rule: StratumRule, centres: np.ndarray | None = None) -> bnd.StratumStatistics:
        # two passes over the values in memory; the centres (a hint for one-pass engines) are not needed
        return bnd.stratum_statistics(self._values, self._groups(rule), rule.n_groups)

    def histogram(self, rule: StratumRule, edges: np.ndarray) -> np.ndarray:
        g = self._groups(rule)
        rest = (g >= REST) & (g < rule.top)
        return np.histogram(self._values[rest], bins=np.asarray(edges, dtype=float))[0]

    def largest(self, k: int) -> float:
        x = self._values
        return float(np.partition(x, x.size - k)[x.size - k])

    def quantiles(self, levels: tuple[float, ...]) -> dict[float, float]:
        return _quantiles(self._values, levels)

    def labels(self, rule: StratumRule, group: str) -> list[str]:
        g = self._groups(rule)
        where = g == rule.top if group == "top" else (g >= REST) & (g < rule.top)
        return [str(v) for v in pd.unique(self._pre[where])]

    def smallest_keys(self, seed: str, rule: StratumRule, sizes: np.ndarray) -> pd.DataFrame:
        g = self._groups(rule)
        frame = pd.DataFrame({"item_id": self.population.item_ids, "stratum": g})
        present = np.unique(g)
        chosen = select(frame, {int(h): int(sizes[h]) for h in present}, seed)
        return chosen.rename(columns={"stratum": "group"})

    def book_values_of(self, item_ids: list[str]) -> pd.DataFrame:
        items = self.population.items
        return items.loc[items["item_id"].isin(set(item_ids)), ["item_id", "book_value"]].reset_index(drop=True)
