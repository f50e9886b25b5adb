"""Descriptive statistics of a population's book values, on a plain float64 array.

The caller (:func:`auditmean.population.profile`) has already checked that the
values are a non-empty 1-D array of finite floats; nothing here checks again.
Every statistic is a vectorised pass over the array (sums, one partial sort for
the quantiles and one for the largest items), so a million values take about a
quarter of a second.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from auditmean.core.moments import sample_skewness

__all__ = [
    "QUANTILE_LEVELS",
    "TOP_FRACTIONS",
    "BookValueStats",
    "describe",
    "exact_sum",
    "quantiles",
    "top_share",
]

#: Probability levels of the quantiles a profile reports.
QUANTILE_LEVELS: tuple[float, ...] = (0.0, 0.01, 0.05, 0.25, 0.5, 0.75, 0.95, 0.99, 1.0)

#: Fractions of the positive items whose share of the positive total a profile reports.
TOP_FRACTIONS: tuple[float, ...] = (0.01, 0.05)


@dataclass(frozen=True)
class BookValueStats:
    """The numbers of a profile; :class:`auditmean.population.Profile` adds the notes."""

    count: int
    total: float
    mean: float
    std_dev: float
    skewness: float
    quantiles: dict[float, float]
    top_1pct_share: float
    top_5pct_share: float
    credit_count: int
    credit_total: float
    zero_count: int
    positive_count: int
    positive_total: float


def exact_sum(values: np.ndarray) -> float:
    """The sum of ``values`` correctly rounded to the nearest float64.

    Uses :func:`math.fsum`, which tracks the exact sum with several partial
    sums (Shewchuk, J. R. 1997, "Adaptive precision floating-point arithmetic
    and fast robust geometric predicates", Discrete & Computational Geometry
    18, 305-363). A population total is what the auditor reconciles to the
    ledger, so it should not depend on the order of the rows.
    """
    return math.fsum(np.asarray(values, dtype=np.float64).tolist())


def quantiles(values: np.ndarray, levels: tuple[float, ...] = QUANTILE_LEVELS) -> dict[float, float]:
    """Sample quantiles by linear interpolation between order statistics.

    With the values sorted, ``x_(1) <= ... <= x_(n)``, the quantile at level
    ``p`` is ``x_(j) + g (x_(j+1) - x_(j))`` where ``h = (n - 1) p + 1``,
    ``j = floor(h)`` and ``g = h - j``: definition 7 of Hyndman, R. J. and
    Fan, Y. (1996), "Sample quantiles in statistical packages", The American
    Statistician 50(4), 361-365, which is ``numpy.quantile``'s default
    (``method="linear"``). Level 0 is the smallest value and level 1 the largest.
    """
    q = np.quantile(values, np.asarray(levels, dtype=np.float64))
    return {float(p): float(v) for p, v in zip(levels, q)}


def top_share(
    positive_values: np.ndarray, fraction: float, positive_total: float | None = None
) -> float:
    """Share of the positive total carried by the largest ``fraction`` of the positive items.

    With ``m`` positive values, the largest ``k = ceil(fraction * m)`` of them
    are taken (so at least one item: a small population still shows its
    largest item) and their sum is divided by the sum of all ``m``; the
    product is computed exactly, with ``fraction`` read as the decimal it
    prints as (0.01 is 1/100). NaN when there is no positive value.

    This is our own descriptive definition of concentration, from no
    published source. Ties at the cut make no difference, since tied values
    add the same amount whichever of them is taken.

    ``positive_values`` must all be greater than zero; ``positive_total``,
    their :func:`exact_sum`, may be passed when already known.
    """
    m = positive_values.size
    if m == 0:
        return math.nan
    # The fraction as the decimal it was written as (0.01 is exactly 1/100), so
    # that ceil() never sees a product like 3.0000000000000004.
    k = min(m, max(1, math.ceil(Fraction(str(fraction)) * m)))
    largest = np.partition(positive_values, m - k)[m - k :]
    if positive_total is None:
        positive_total = exact_sum(positive_values)
    return exact_sum(largest) / positive_total


def describe(values: np.ndarray) -> BookValueStats:
    """Count, total, mean, spread, skewness, quantiles and sign breakdown of ``values``.

    Parameters
    ----------
    values:
        1-D float64 array, at least one value, all finite (checked by the caller).

    Returns
    -------
    BookValueStats

    Notes
    -----
    * ``total``, ``credit_total`` and ``positive_total`` are correctly rounded
      sums (:func:`exact_sum`); ``mean = total / count``.
    * ``std_dev`` is the sample standard deviation with divisor ``n - 1``,
      ``s = sqrt(sum((x - mean)**2) / (n - 1))``, computed from centred values
      (two passes) so that no digits are lost when the values are large and
      close together; NaN when ``n < 2``.
    * ``skewness`` is the adjusted Fisher-Pearson sample skewness ``G1`` of
      Joanes, D. N. and Gill, C. A. (1998), "Comparing measures of sample
      skewness and kurtosis", The Statistician 47(1), 183-189:
      ``G1 = sqrt(n (n - 1)) / (n - 2) * m3 / m2**1.5`` with
      ``m_k = sum((x - mean)**k) / n``, the same as
      ``scipy.stats.skew(x, bias=False)``. It is computed by
      :func:`auditmean.core.moments.sample_skewness`, the one place the
      package computes G1: NaN when ``n < 3``, zero when the values do not
      vary.
    * ``quantiles``: :func:`quantiles` at :data:`QUANTILE_LEVELS`.
    * ``top_1pct_share`` and ``top_5pct_share``: :func:`top_share` of the
      positive values at 1 % and 5 %.
    * Credit items have a book value below zero, zero items exactly zero,
      positive items above zero.
    """
    n = int(values.size)
    total = exact_sum(values)
    mean = total / n
    if n >= 2:
        d = values - mean
        std_dev = math.sqrt(float(np.dot(d, d)) / (n - 1))
    else:
        std_dev = math.nan
    skewness = float(sample_skewness(np.zeros(n, dtype=np.intp), 1, values)[0])

    credit_values = values[values < 0.0]
    positive_values = values[values > 0.0]
    positive_total = exact_sum(positive_values)
    return BookValueStats(
        count=n,
        total=total,
        mean=mean,
        std_dev=std_dev,
        skewness=skewness,
        quantiles=quantiles(values),
        top_1pct_share=top_share(positive_values, TOP_FRACTIONS[0], positive_total),
        top_5pct_share=top_share(positive_values, TOP_FRACTIONS[1], positive_total),
        credit_count=int(credit_values.size),
        credit_total=exact_sum(credit_values),
        zero_count=n - int(credit_values.size) - int(positive_values.size),
        positive_count=int(positive_values.size),
        positive_total=positive_total,
    )
