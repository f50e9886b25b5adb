"""Descriptive statistics of a population's book values, on a plain float64 array.

The caller (:func:`auditmean.population.profile`) has already checked that the
values are a non-empty 1-D array of finite floats; nothing here checks again.
Every statistic is a vectorised pass over the array (exact sums by sign, two
centred sums, one partial sort serving both the quantiles and the largest
items), so a million values take a few hundredths of a second.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from auditmean.core.moments import exact_group_sums, exact_sum_of_groups, skewness_of_spread

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

    The same number as :func:`math.fsum` (Shewchuk, J. R. 1997, "Adaptive
    precision floating-point arithmetic and fast robust geometric
    predicates", Discrete & Computational Geometry 18, 305-363), computed
    in vectorised passes by :func:`auditmean.core.moments.exact_group_sums`.
    A population total is what the auditor reconciles to the ledger, so it
    should not depend on the order of the rows. Values must be finite.
    """
    return float(exact_group_sums(None, 1, np.asarray(values, dtype=np.float64))[0])


def quantiles(values: np.ndarray, levels: tuple[float, ...] = QUANTILE_LEVELS) -> dict[float, float]:
    """Sample quantiles by linear interpolation between order statistics.

    With the values sorted, ``x_(1) <= ... <= x_(n)``, the quantile at level
    ``p`` is ``x_(j) + g (x_(j+1) - x_(j))`` where ``h = (n - 1) p + 1``,
    ``j = floor(h)`` and ``g = h - j``: definition 7 of Hyndman, R. J. and
    Fan, Y. (1996), "Sample quantiles in statistical packages", The American
    Statistician 50(4), 361-365, which is ``numpy.quantile``'s default
    (``method="linear"``); the interpolation is written as numpy writes it,
    so the numbers are the same to the last bit. Level 0 is the smallest
    value and level 1 the largest.
    """
    lower, upper, _ = _quantile_positions(values.size, levels)
    part = np.partition(values, sorted(set(lower) | set(upper)))
    return _quantiles_from(part, levels)


def _quantile_positions(n: int, levels: tuple[float, ...]) -> tuple[list[int], list[int], np.ndarray]:
    """0-based order-statistic positions below and above each level, and the interpolation weights."""
    h = (n - 1) * np.asarray(levels, dtype=np.float64)
    lower = np.floor(h)
    gamma = h - lower
    lo = np.clip(lower.astype(np.int64), 0, n - 1)
    hi = np.clip(lo + 1, 0, n - 1)
    return lo.tolist(), hi.tolist(), gamma


def _quantiles_from(part: np.ndarray, levels: tuple[float, ...]) -> dict[float, float]:
    """:func:`quantiles` read from ``part``, partitioned at every position :func:`_quantile_positions` gives."""
    lower, upper, gamma = _quantile_positions(part.size, levels)
    a = part[lower]
    b = part[upper]
    diff = b - a
    # numpy's linear interpolation: from below for weights under one half, from above otherwise
    q = np.where(gamma >= 0.5, b - diff * (1.0 - gamma), a + diff * gamma)
    return {float(p): float(v) for p, v in zip(levels, q)}


def _top_count(m: int, fraction: float) -> int:
    """``k = ceil(fraction * m)``, at least 1 and at most ``m``, with ``fraction`` read as the decimal it prints as."""
    # The fraction as the decimal it was written as (0.01 is exactly 1/100), so
    # that ceil() never sees a product like 3.0000000000000004.
    return min(m, max(1, math.ceil(Fraction(str(fraction)) * m)))


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
    k = _top_count(m, fraction)
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
      ``scipy.stats.skew(x, bias=False)``. The centred sums are formed
      here and turned into G1 by
      :func:`auditmean.core.moments.skewness_of_spread`, the formula every
      skewness of the package goes through: NaN when ``n < 3``, zero when
      the values do not vary.
    * ``quantiles``: :func:`quantiles` at :data:`QUANTILE_LEVELS`.
    * ``top_1pct_share`` and ``top_5pct_share``: :func:`top_share` of the
      positive values at 1 % and 5 %.
    * Credit items have a book value below zero, zero items exactly zero,
      positive items above zero.
    """
    n = int(values.size)
    sign = (values > 0.0).astype(np.intp) + (values >= 0.0)  # 0 credit, 1 zero, 2 positive
    by_sign, total = exact_sum_of_groups(sign, 3, values)
    credit_count, zero_count, positive_count = (int(c) for c in np.bincount(sign, minlength=3))
    mean = total / n
    d = values - mean
    m2 = float(np.dot(d, d))
    std_dev = math.sqrt(m2 / (n - 1)) if n >= 2 else math.nan
    d *= d * d
    m3 = float(d.sum())
    square_sum = float(np.dot(values, values))
    # the G1 of sample_skewness for one stratum, from the same centred sums
    skewness = float(skewness_of_spread(np.array([n]), np.array([m2]), np.array([m3]), np.array([square_sum]))[0])

    # One partial sort gives the quantiles and the largest items: the largest
    # k positive items are the largest k items, since every other item is
    # below them.
    positive_total = float(by_sign[2])
    tops = [_top_count(positive_count, f) for f in TOP_FRACTIONS] if positive_count else []
    lower, upper, _ = _quantile_positions(n, QUANTILE_LEVELS)
    part = np.partition(values, sorted(set(lower) | set(upper) | {n - k for k in tops}))
    shares = [exact_sum(part[n - k :]) / positive_total for k in tops] or [math.nan] * len(TOP_FRACTIONS)
    return BookValueStats(
        count=n,
        total=total,
        mean=mean,
        std_dev=std_dev,
        skewness=skewness,
        quantiles=_quantiles_from(part, QUANTILE_LEVELS),
        top_1pct_share=shares[0],
        top_5pct_share=shares[1],
        credit_count=credit_count,
        credit_total=float(by_sign[0]),
        zero_count=zero_count,
        positive_count=positive_count,
        positive_total=positive_total,
    )
