"""Per-stratum sums and moments in vectorised passes.

Items carry an integer stratum code ``0 .. n_strata - 1``; every statistic is
one ``np.bincount`` over those codes, so the cost is linear in the number of
items whatever the number of strata. Central moments are computed in two
passes (means first, then sums of centred powers): the one-pass form
``sum(y**2) - n * mean**2`` loses every significant digit when audited values
are close to book values, which is the normal case in audit.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "group_counts",
    "group_sums",
    "group_means",
    "centred_cross_sums",
    "sample_skewness",
    "skewness_from_sums",
    "skewness_of_spread",
]


def group_counts(codes: np.ndarray, n_strata: int) -> np.ndarray:
    """Number of items per stratum code (int64, length ``n_strata``)."""
    return np.bincount(codes, minlength=n_strata).astype(np.int64)


def group_sums(codes: np.ndarray, n_strata: int, values: np.ndarray) -> np.ndarray:
    """Sum of ``values`` per stratum code (float64, length ``n_strata``)."""
    return np.bincount(codes, weights=values, minlength=n_strata)


def group_means(codes: np.ndarray, n_strata: int, values: np.ndarray, counts: np.ndarray) -> np.ndarray:
    """Mean of ``values`` per stratum; NaN where the stratum has no item."""
    sums = group_sums(codes, n_strata, values)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(counts > 0, sums / np.maximum(counts, 1), np.nan)


def centred_cross_sums(
    codes: np.ndarray,
    n_strata: int,
    a: np.ndarray,
    mean_a: np.ndarray,
    b: np.ndarray | None = None,
    mean_b: np.ndarray | None = None,
) -> np.ndarray:
    """``sum((a - mean_a[h]) * (b - mean_b[h]))`` per stratum (``b`` defaults to ``a``)."""
    da = a - mean_a[codes]
    if b is None:
        return np.bincount(codes, weights=da * da, minlength=n_strata)
    db = b - mean_b[codes]
    return np.bincount(codes, weights=da * db, minlength=n_strata)


def skewness_from_sums(n: np.ndarray, m2_sum: np.ndarray, m3_sum: np.ndarray) -> np.ndarray:
    """Adjusted Fisher-Pearson sample skewness G1 from centred sums of squares and cubes.

    ``g1 = m3 / m2**1.5`` with ``m_k = sum((y - mean)**k) / n`` and
    ``G1 = g1 * sqrt(n (n - 1)) / (n - 2)`` (Joanes and Gill 1998, The
    Statistician 47, 183-189, statistic G1; the same as
    ``scipy.stats.skew(bias=False)``). NaN where ``n < 3``; zero where the
    values do not vary (a constant has no skewness).
    """
    n = np.asarray(n, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        m2 = m2_sum / n
        m3 = m3_sum / n
        g1 = np.where(m2 > 0, m3 / np.where(m2 > 0, m2, 1.0) ** 1.5, 0.0)
        adj = np.sqrt(n * (n - 1.0)) / (n - 2.0)
        out = g1 * adj
    # Relative rounding of m2 near zero can leave a meaningless ratio; a
    # stratum whose values are equal to within rounding has no skewness.
    return np.where(n >= 3, out, np.nan)


def sample_skewness(codes: np.ndarray, n_strata: int, values: np.ndarray) -> np.ndarray:
    """G1 per stratum of ``values`` (see :func:`skewness_from_sums`)."""
    n = group_counts(codes, n_strata)
    mean = group_means(codes, n_strata, values, n)
    d = values - mean[codes]
    m2 = np.bincount(codes, weights=d * d, minlength=n_strata)
    m3 = np.bincount(codes, weights=d * d * d, minlength=n_strata)
    scale = np.bincount(codes, weights=values * values, minlength=n_strata)
    return skewness_of_spread(n, m2, m3, scale)


def skewness_of_spread(n: np.ndarray, m2_sum: np.ndarray, m3_sum: np.ndarray, square_sum: np.ndarray) -> np.ndarray:
    """G1 from centred sums of squares and cubes, zero where the spread is only rounding.

    ``square_sum`` is the sum of the squared values themselves. Values
    equal to within floating rounding of their own size (``m2_sum <= 1e-24
    square_sum``, our own threshold) have no skewness worth reporting;
    without this, noise of 1e-16 gives a G1 of order 1. Otherwise as
    :func:`skewness_from_sums`.
    """
    tiny = m2_sum <= (1e-24 * square_sum)
    return skewness_from_sums(n, np.where(tiny, 0.0, m2_sum), np.where(tiny, 0.0, m3_sum))
