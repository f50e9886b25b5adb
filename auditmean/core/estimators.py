r"""Estimators of a population's audited total from a stratified sample.

The design is stratified simple random sampling without replacement. In
stratum ``h`` there are ``N_h`` items with known book total ``X_h``; ``n_h``
of them were examined, with audited values ``y_hi`` and book values
``x_hi``; ``f_h = n_h / N_h`` is the sampling fraction. Every estimator is
a sum over strata of a stratum total ``T_h`` and has a variance estimator of
the form

.. math::  v(\hat Y) = \sum_h N_h^2 \frac{1 - f_h}{n_h}\, s_{e,h}^2 \cdot a_h

where ``e`` is what the estimator averages in the stratum and ``a_h`` an
optional adjustment (ratio estimators only). References are to
W. G. Cochran (1977), *Sampling Techniques*, 3rd ed., Wiley.

========================  =========================================  ===================================================  ==========
method                    stratum total ``T_h``                      ``e`` averaged, ``s_e^2`` divisor                    source
========================  =========================================  ===================================================  ==========
``mpu``                   ``N_h ybar_h``                             ``y``, ``n_h - 1``                                   5.3, 5.6
``difference``            ``X_h + N_h dbar_h``, ``d = y - x``        ``d``, ``n_h - 1``                                   7.2 (b=1)
``ratio`` (separate)      ``R_h X_h``, ``R_h = ybar_h / xbar_h``     ``y - R_h x``, ``n_h - 1``                           6.9, 6.38
``combined_ratio``        ``R_c X_h``, ``R_c = sum N ybar / sum N xbar`` ``y - R_c x``, ``n_h - 1``                       6.49
``regression`` (separate) ``N_h (ybar_h + b_h (Xbar_h - xbar_h))``   ``(y - ybar) - b_h (x - xbar)``, ``n_h - 2``         7.27, 7.30
========================  =========================================  ===================================================  ==========

Ratio variances. Cochran (1977, section 6.9) gives two estimators of the
variance of a ratio estimate: with the population book mean ``Xbar`` in the
denominator (``v1``, the form above with ``a_h = 1``), and with the sample
book mean ``xbar`` (``v2 = v1 * (Xbar / xbar)^2``). auditmean uses ``v2``
by default (``ratio_variance="sample_book_mean"``). It follows the sample:
when the items drawn happen to be smaller than average, their residuals are
small too, and ``v2`` scales them back up, so it tracks the variance
conditional on the sample's book mean better than ``v1`` (Royall and
Cumberland 1981, JASA 76, 66-77; Wu and Deng 1983, Journal of the Royal
Statistical Society C; Sarndal, Swensson and Wretman 1992, *Model Assisted
Survey Sampling*, section 7.3, the g-weighted variance). In audit this errs
toward the cautious side exactly when a sample under-represents the large
items. It is also the standard error that general survey software reports
for a ratio estimate of a total (R's survey package, samplics), which lets
the tests check it against them. ``ratio_variance="population_book_mean"``
gives ``v1``.

Combined ratio. The ratio is taken over the sampled strata only; strata
examined in full contribute their exact audited totals and are not scaled
by it.

Zero balances. A sampled stratum whose book values add up to zero has no
ratio; under either ratio estimator it is estimated by difference
estimation (``X_h + N_h dbar_h``, which is ``N_h ybar_h`` for a stratum of
zeros) and the result is flagged.

Strata whose variance cannot be estimated (one sampled item out of more, or
two for regression, which spends a degree of freedom on the slope) get the
treatment named by ``single_item``:

* ``"average"`` (default): the stratum's variance term is the mean of the
  variance terms of the strata whose variance could be estimated. This is
  the rule R's survey package offers as ``survey.lonely.psu = "average"``
  (Lumley 2010, *Complex Surveys*, section 3.1.2), applied to strata of
  items. The stratum then counts with one degree of freedom in
  Satterthwaite's sum, which is cautious.
* ``"zero"``: the stratum adds no variance (as if it had been examined in
  full). Choose this only with a reason; it understates the error.
* ``"error"``: refuse (checked at the public boundary).

Strata with items but no sampled item (``unsampled``): ``"error"`` (refused
at the boundary), or ``"book_value"``: the stratum's audited total is taken
to be its book total, with no variance; a documented audit choice for
strata the auditor decided not to test by sampling, never a default.

A stratum examined in full (``n_h = N_h``) contributes the exact sum of its
audited values with zero variance, whatever the method.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from auditmean.core.choices import BOOK_VALUE_METHODS, METHODS  # light, for the command line
from auditmean.core.intervals import satterthwaite_df
from auditmean.core.moments import centred_cross_sums, group_counts, group_means, group_sums

__all__ = [
    "METHODS",
    "METHOD_NAMES",
    "BOOK_VALUE_METHODS",
    "RATIO_VARIANCES",
    "SINGLE_ITEM_TREATMENTS",
    "UNSAMPLED_TREATMENTS",
    "STATUS_SAMPLED",
    "STATUS_FULL",
    "STATUS_THIN",
    "STATUS_UNSAMPLED",
    "STATUS_EMPTY",
    "CoreEstimate",
    "minimum_items_for_variance",
    "stratum_status",
    "estimate_strata",
]

#: Plain names of the methods, for people.
METHOD_NAMES = {
    "mpu": "mean-per-unit",
    "difference": "difference estimation",
    "ratio": "ratio estimation (separate)",
    "combined_ratio": "ratio estimation (combined)",
    "regression": "regression estimation (separate)",
}
RATIO_VARIANCES = ("sample_book_mean", "population_book_mean")
SINGLE_ITEM_TREATMENTS = ("average", "zero", "error")
UNSAMPLED_TREATMENTS = ("error", "book_value")

STATUS_SAMPLED = "sampled"
STATUS_FULL = "examined in full"
STATUS_THIN = "variance not estimable"
STATUS_UNSAMPLED = "not sampled"
STATUS_EMPTY = "empty"


@dataclass(frozen=True)
class CoreEstimate:
    """Arrays of one estimator's result; per-stratum arrays have length ``H``.

    Attributes
    ----------
    total, variance, df:
        Estimated audited total, its estimated variance, and Satterthwaite's
        effective degrees of freedom (NaN when the variance is zero).
    stratum_total, stratum_variance:
        Each stratum's contribution ``T_h`` and variance term ``v_h`` (after
        the treatment of strata whose variance cannot be estimated).
    stratum_df:
        Degrees of freedom of each stratum's variance term (``n_h - 1``,
        ``n_h - 2`` for regression, 1 for a stratum given the average term,
        NaN where there is no variance term).
    residual_var:
        ``s_e^2`` per stratum (NaN where it cannot be estimated).
    coefficient:
        Ratio ``R_h`` (separate ratio), ``R_c`` (combined ratio, the same in
        every sampled stratum) or slope ``b_h`` (regression); NaN otherwise.
    status:
        One of the ``STATUS_*`` strings per stratum.
    fallback:
        Strata estimated by difference estimation because the method's
        coefficient is undefined there: for regression, sampled book values
        all equal (slope fixed at 1); for the ratio estimators, sampled book
        values adding up to zero (a stratum of zero balances).
    item_values:
        What the estimator averages, per sampled item, aligned with the
        input: ``y`` for mean-per-unit, ``y - x`` for difference, residuals
        for ratio and regression. The flags use its skewness.
    """

    method: str
    total: float
    variance: float
    df: float
    stratum_total: np.ndarray
    stratum_variance: np.ndarray
    stratum_df: np.ndarray
    residual_var: np.ndarray
    coefficient: np.ndarray
    status: np.ndarray
    fallback: np.ndarray
    item_values: np.ndarray

    @property
    def std_error(self) -> float:
        return math.sqrt(self.variance) if self.variance > 0 else 0.0


def minimum_items_for_variance(method: str) -> int:
    """Sampled items a stratum needs for its variance term to be estimable.

    Two for every method; three for regression, whose residual variance has
    ``n_h - 2`` degrees of freedom (Cochran 1977, eq. 7.27).
    """
    return 3 if method == "regression" else 2


def stratum_status(method: str, n: np.ndarray, N: np.ndarray) -> np.ndarray:
    """Classify strata: empty, examined in full, not sampled, too thin, or sampled."""
    n = np.asarray(n)
    N = np.asarray(N)
    status = np.full(n.shape, STATUS_SAMPLED, dtype=object)
    status[(n < minimum_items_for_variance(method)) & (n < N)] = STATUS_THIN
    status[(n == 0) & (N > 0)] = STATUS_UNSAMPLED
    status[(n >= N) & (N > 0)] = STATUS_FULL
    status[N == 0] = STATUS_EMPTY
    return status


def estimate_strata(
    method: str,
    codes: np.ndarray,
    counts: np.ndarray,
    audited: np.ndarray,
    book: np.ndarray | None = None,
    book_totals: np.ndarray | None = None,
    *,
    ratio_variance: str = "sample_book_mean",
    single_item: str = "average",
    unsampled: str = "error",
) -> CoreEstimate:
    """Estimate the audited total and its variance for one method.

    Parameters
    ----------
    method:
        One of :data:`METHODS`.
    codes:
        Stratum code (``0 .. H-1``) of each sampled item.
    counts:
        ``N_h``, items in each population stratum (length ``H``).
    audited, book:
        Audited and book value of each sampled item (``book`` is not used by
        ``"mpu"``).
    book_totals:
        ``X_h``, the book total of each population stratum (every method but
        ``"mpu"``; for ``"mpu"`` only the ``"book_value"`` treatment of
        unsampled strata uses it).
    ratio_variance, single_item, unsampled:
        See the module docstring.

    Notes
    -----
    Inputs are trusted: the public functions validate them (counts at least
    the sample sizes, book totals of strata examined in full equal to the
    sum of their sampled book values, no ratio with a zero sampled book
    total, treatments allowed).
    """
    counts = np.asarray(counts, dtype=np.int64)
    H = counts.shape[0]
    y = np.asarray(audited, dtype=float)
    codes = np.asarray(codes, dtype=np.intp)
    x = None if book is None else np.asarray(book, dtype=float)
    X = None if book_totals is None else np.asarray(book_totals, dtype=float)
    N = counts.astype(float)

    n = group_counts(codes, H)
    status = stratum_status(method, n, counts)
    full = status == STATUS_FULL
    sampled = (status == STATUS_SAMPLED) | (status == STATUS_THIN)  # n_h >= 1 and n_h < N_h
    estimable = status == STATUS_SAMPLED
    nf = n.astype(float)
    n_safe = np.maximum(nf, 1.0)

    sum_y = group_sums(codes, H, y)
    mean_y = group_means(codes, H, y, n)
    coefficient = np.full(H, np.nan)
    fallback = np.zeros(H, dtype=bool)
    adjustment = np.ones(H)

    with np.errstate(invalid="ignore", divide="ignore"):
        if method == "mpu":
            e = y
            total_h = N * mean_y
            ddof = 1
        else:
            assert x is not None and X is not None
            mean_x = group_means(codes, H, x, n)
            if method == "difference":
                e = y - x
                total_h = X + N * (mean_y - mean_x)
                ddof = 1
            elif method in ("ratio", "combined_ratio"):
                # A stratum whose sampled book values add up to zero (a stratum
                # of zero balances) has no ratio; it is estimated by difference
                # estimation, which there is X_h + N_h ybar_h, and flagged.
                sum_x = group_sums(codes, H, x)
                fallback = sampled & (sum_x == 0)
                with_ratio = sampled & ~fallback
                if method == "ratio":
                    ratio = np.where(with_ratio, group_sums(codes, H, y) / np.where(sum_x != 0, sum_x, 1.0), np.nan)
                    if ratio_variance == "sample_book_mean":
                        adjustment = np.where(with_ratio, (X / N / mean_x) ** 2, 1.0)
                else:
                    y_hat = np.sum(np.where(with_ratio, N * mean_y, 0.0))
                    x_hat = np.sum(np.where(with_ratio, N * mean_x, 0.0))
                    rc = y_hat / x_hat if x_hat != 0 else np.nan
                    ratio = np.where(with_ratio, rc, np.nan)
                    if ratio_variance == "sample_book_mean":
                        x_known = np.sum(np.where(with_ratio, X, 0.0))
                        adj = (x_known / x_hat) ** 2 if x_hat != 0 else np.nan
                        adjustment = np.where(with_ratio, adj, 1.0)
                coefficient = ratio
                e = np.where(fallback[codes], y - x, y - np.where(fallback, 0.0, ratio)[codes] * x)
                total_h = np.where(fallback, X + N * (mean_y - mean_x), ratio * X)
                ddof = 1
            elif method == "regression":
                sxx = centred_cross_sums(codes, H, x, mean_x)
                sxy = centred_cross_sums(codes, H, x, mean_x, y, mean_y)
                # A slope needs spread in the sampled book values (Cochran 1977,
                # eq. 7.17); without it the slope is fixed at 1, which is the
                # difference estimator (book and audited values share a scale).
                flat = sampled & ~(sxx > 0)
                slope = np.where(flat, 1.0, sxy / np.where(sxx > 0, sxx, 1.0))
                fallback = flat
                coefficient = np.where(sampled, slope, np.nan)
                e = (y - mean_y[codes]) - slope[codes] * (x - mean_x[codes])
                total_h = N * (mean_y + slope * (X / N - mean_x))
                ddof = np.where(flat, 1, 2)
            else:
                raise ValueError(f"unknown method {method!r}")

        # Residuals are centred within each stratum. For the separate ratio
        # and regression their stratum mean is zero in exact arithmetic, so
        # this only removes rounding; for the combined ratio it is Cochran's
        # eq. 6.49 (s_y^2 + R^2 s_x^2 - 2 R s_xy uses moments about each
        # stratum's own means).
        mean_e = group_means(codes, H, e, n)
        ss = centred_cross_sums(codes, H, e, mean_e)
        dof = nf - ddof
        residual_var = np.where(dof > 0, ss / np.where(dof > 0, dof, 1.0), np.nan)
        fpc = 1.0 - nf / np.where(N > 0, N, 1.0)
        v = N**2 * fpc / n_safe * residual_var * adjustment

    term_df = np.where(estimable, dof, np.nan).astype(float)
    variance_h = np.where(estimable, v, 0.0)

    thin = status == STATUS_THIN
    if thin.any() and single_item == "average":
        if estimable.any():
            variance_h = np.where(thin, variance_h[estimable].mean(), variance_h)
            term_df = np.where(thin, 1.0, term_df)
        else:
            # Nothing to average: no stratum has an estimable variance. The
            # public boundary refuses this case; keep the arrays defined.
            variance_h = np.where(thin, np.nan, variance_h)
    residual_var = np.where(estimable, residual_var, np.nan)

    # Exact totals where everything was examined; book value where the user
    # chose it for unsampled strata; nothing for empty strata.
    total_h = np.where(full, sum_y, total_h)
    unsampled_mask = status == STATUS_UNSAMPLED
    if unsampled == "book_value" and X is not None:
        total_h = np.where(unsampled_mask, X, total_h)
    else:
        total_h = np.where(unsampled_mask, np.nan, total_h)
    total_h = np.where(status == STATUS_EMPTY, 0.0, total_h)
    coefficient = np.where(full, np.nan, coefficient)

    total = float(np.sum(total_h))
    variance = float(np.sum(variance_h))
    df = satterthwaite_df(variance_h, term_df)
    return CoreEstimate(
        method=method,
        total=total,
        variance=variance,
        df=df,
        stratum_total=total_h,
        stratum_variance=variance_h,
        stratum_df=term_df,
        residual_var=residual_var,
        coefficient=coefficient,
        status=status,
        fallback=fallback,
        item_values=np.asarray(e, dtype=float),
    )
