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
    "exact_group_sums",
    "exact_sum_of_groups",
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


# Exact sums. Every finite float64 is m * 2**(e - 53) with m a whole number,
# |m| < 2**53 (numpy.frexp). Split m = hi * 2**27 + lo with |hi| <= 2**26 and
# 0 <= lo < 2**27; sums of fewer than 2**26 such parts stay below 2**53, so
# float64 adds them without rounding. One bincount per part, per (group,
# exponent) bin, is therefore exact, and the bins are combined in Python
# integers.
# The values are taken in blocks of this many, so that the temporary arrays
# stay small (and are reused rather than fresh memory each time) and every
# block's partial sums stay far below 2**53.
_SPLIT = 2.0**27
_EXACT_BLOCK = 1 << 16


def _exact_scaled_sums(codes: np.ndarray | None, n_strata: int, values: np.ndarray) -> tuple[list[int], int]:
    """Per stratum, the exact sum of ``values`` as a whole number ``S_h`` with sum = ``S_h * 2**shift``."""
    parts: list[tuple[list[int], int]] = []
    for start in range(0, values.size, _EXACT_BLOCK):
        block = values[start : start + _EXACT_BLOCK]
        m, index = np.frexp(block)
        e_min = int(index.min())
        bins = int(index.max()) - e_min + 1
        m *= 2.0**53  # exact: a whole number below 2**53
        hi = m * (1.0 / _SPLIT)  # exact: scaling by a power of two
        np.floor(hi, out=hi)  # |hi| <= 2**26
        lo = hi * -_SPLIT
        lo += m  # exact: 0 <= lo < 2**27
        index = index.astype(np.intp)
        index -= e_min
        if codes is not None:
            index += np.asarray(codes[start : start + _EXACT_BLOCK], dtype=np.intp) * bins
        h_sum = np.bincount(index, weights=hi, minlength=n_strata * bins).reshape(n_strata, bins)
        l_sum = np.bincount(index, weights=lo, minlength=n_strata * bins).reshape(n_strata, bins)
        totals = [0] * n_strata
        for g, b in zip(*np.nonzero((h_sum != 0) | (l_sum != 0))):
            totals[g] += ((int(h_sum[g, b]) << 27) + int(l_sum[g, b])) << int(b)
        parts.append((totals, e_min - 53))
    if not parts:
        return [0] * n_strata, 0
    shift = min(p[1] for p in parts)
    out = [0] * n_strata
    for totals, own in parts:
        for g in range(n_strata):
            out[g] += totals[g] << (own - shift)
    return out, shift


def _to_float(scaled: int, shift: int) -> float:
    """``scaled * 2**shift`` correctly rounded to float64 (Python's int and true division round correctly)."""
    if shift >= 0:
        return float(scaled << shift)
    return scaled / (1 << -shift)


def exact_group_sums(codes: np.ndarray | None, n_strata: int, values: np.ndarray) -> np.ndarray:
    """Sum of ``values`` per stratum code, each correctly rounded to the nearest float64.

    The same numbers as :func:`math.fsum` over each stratum's values
    (Shewchuk, J. R. 1997, "Adaptive precision floating-point arithmetic
    and fast robust geometric predicates", Discrete & Computational
    Geometry 18, 305-363, is the algorithm behind ``fsum``; the result of
    a correctly rounded sum does not depend on the algorithm), computed
    in vectorised passes: each value is split exactly into two whole-number
    parts per binary exponent (``numpy.frexp``), the parts are added per
    stratum and exponent by ``np.bincount`` (exact, since every partial sum
    stays below 2**53), and the few sums per stratum are combined in
    Python's unbounded integers. About ten times faster than ``fsum`` on a
    million values. ``codes`` None means one stratum. Values must be finite.
    """
    values = np.asarray(values, dtype=np.float64)
    totals, shift = _exact_scaled_sums(codes, n_strata, values)
    return np.array([_to_float(t, shift) for t in totals], dtype=np.float64)


def exact_sum_of_groups(codes: np.ndarray, n_strata: int, values: np.ndarray) -> tuple[np.ndarray, float]:
    """:func:`exact_group_sums` and the correctly rounded sum over all strata, from one pass."""
    values = np.asarray(values, dtype=np.float64)
    totals, shift = _exact_scaled_sums(codes, n_strata, values)
    return np.array([_to_float(t, shift) for t in totals], dtype=np.float64), _to_float(sum(totals), shift)


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
