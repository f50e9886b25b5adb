r"""The rescaling bootstrap for stratified sampling without replacement.

Rao and Wu (1988, JASA 83, 231-241) resample ``m_h`` items with replacement
from the ``n_h`` sampled in stratum ``h`` and rescale the resampled values so
that, for a linear statistic, the bootstrap variance equals the usual
unbiased variance estimator with the finite-population correction. In the
weight form of Rao, Wu and Yue (1992, Survey Methodology 18, 209-217) each
sampled item gets, in each bootstrap replicate, the factor

.. math:: g_{hi}^* = 1 - \lambda_h + \lambda_h \frac{n_h}{m_h} r_{hi}^*,
          \qquad \lambda_h = \sqrt{\frac{m_h (1 - f_h)}{n_h - 1}}

where ``r*`` counts how often item ``i`` was drawn. auditmean uses
``m_h = n_h - 1``, so ``lambda_h = sqrt(1 - f_h)`` and every factor is
non-negative. The factors average to one within each stratum, so the
replicate of a stratum mean is ``sum(g* y) / n_h``. Each estimator is then
recomputed from the replicate's weighted means and moments exactly as
:mod:`auditmean.core.estimators` computes it from the sample, and the
percentile limits are read off the replicates (Efron's percentile method).

A stratum examined in full has ``f_h = 1``, hence ``lambda_h = 0``: it is
the same in every replicate. A stratum whose variance cannot be estimated
(one sampled item, or too few for regression) cannot be resampled either
(``n_h - 1 < 1``); it keeps its point estimate in every replicate, adding no
bootstrap spread, and its warning stands.

Replicates are drawn from ``numpy.random.default_rng(seed)``, so the same
seed gives the same limits on the same numpy version.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass

import numpy as np

from auditmean.core import estimators as est

__all__ = ["BootstrapResult", "seed_to_int", "rescaling_bootstrap", "percentile_limits"]


def seed_to_int(seed: int | str) -> int:
    """An integer seed; a text seed becomes the first 16 hex digits of its SHA-256."""
    if isinstance(seed, (int, np.integer)) and not isinstance(seed, bool):
        if seed < 0:
            raise ValueError("seed must not be negative")
        return int(seed)
    return int(hashlib.sha256(str(seed).encode("utf-8")).hexdigest()[:16], 16)


@dataclass(frozen=True)
class BootstrapResult:
    """Replicates of the estimated audited total."""

    replicates: np.ndarray
    seed: int

    @property
    def std_error(self) -> float:
        return float(np.std(self.replicates, ddof=1))


def percentile_limits(replicates: np.ndarray, confidence: float, sides: str) -> tuple[float, float]:
    """Efron's percentile limits (Efron and Tibshirani 1993, *An Introduction to the Bootstrap*, ch. 13)."""
    alpha = 1.0 - confidence
    if sides == "two-sided":
        lo, hi = np.quantile(replicates, [alpha / 2.0, 1.0 - alpha / 2.0])
        return float(lo), float(hi)
    if sides == "lower":
        return float(np.quantile(replicates, alpha)), float("inf")
    return float("-inf"), float(np.quantile(replicates, 1.0 - alpha))


def rescaling_bootstrap(
    method: str,
    codes: np.ndarray,
    counts: np.ndarray,
    audited: np.ndarray,
    book: np.ndarray | None,
    book_totals: np.ndarray | None,
    *,
    replicates: int = 2000,
    seed: int | str = 0,
    unsampled: str = "error",
) -> BootstrapResult:
    """Bootstrap replicates of one estimator's audited total.

    Inputs are those of :func:`auditmean.core.estimators.estimate_strata`
    (validated by the caller). Returns ``replicates`` totals.
    """
    seed_int = seed_to_int(seed)
    rng = np.random.default_rng(seed_int)
    counts = np.asarray(counts, dtype=np.int64)
    H = counts.shape[0]
    codes = np.asarray(codes, dtype=np.intp)
    y = np.asarray(audited, dtype=float)
    x = None if book is None else np.asarray(book, dtype=float)
    X = None if book_totals is None else np.asarray(book_totals, dtype=float)
    N = counts.astype(float)
    n = np.bincount(codes, minlength=H)
    status = est.stratum_status(method, n, counts)
    point = est.estimate_strata(method, codes, counts, y, x, X, unsampled=unsampled)

    B = int(replicates)
    resampled = status == est.STATUS_SAMPLED
    # Per stratum: replicate weighted means (B,) of y and x, and for
    # regression the replicate slope.
    mean_y = np.zeros((B, H))
    mean_x = np.zeros((B, H))
    slope = np.zeros((B, H))
    order = np.argsort(codes, kind="stable")
    starts = np.concatenate([[0], np.cumsum(n)])
    for h in range(H):
        if n[h] == 0:
            continue
        idx = order[starts[h] : starts[h + 1]]
        yh = y[idx]
        xh = x[idx] if x is not None else None
        nh = int(n[h])
        if resampled[h]:
            m = nh - 1
            lam = np.sqrt(max(0.0, 1.0 - nh / N[h]))
            r = rng.multinomial(m, np.full(nh, 1.0 / nh), size=B)
            g = (1.0 - lam) + lam * (nh / m) * r
        else:
            g = np.ones((B, nh))
        mean_y[:, h] = g @ yh / nh
        if xh is not None:
            mean_x[:, h] = g @ xh / nh
            if method == "regression":
                dx = xh[None, :] - mean_x[:, h : h + 1]
                dy = yh[None, :] - mean_y[:, h : h + 1]
                sxx = np.sum(g * dx * dx, axis=1)
                sxy = np.sum(g * dx * dy, axis=1)
                fixed = point.fallback[h]
                with np.errstate(invalid="ignore", divide="ignore"):
                    b = np.where(sxx > 0, sxy / np.where(sxx > 0, sxx, 1.0), 1.0)
                slope[:, h] = 1.0 if fixed else b

    with np.errstate(invalid="ignore", divide="ignore"):
        if method == "mpu":
            t = N * mean_y
        elif method == "difference":
            t = X + N * (mean_y - mean_x)
        elif method == "ratio":
            t = np.where(point.fallback, X + N * (mean_y - mean_x), mean_y / mean_x * X)
        elif method == "combined_ratio":
            sampled = (status == est.STATUS_SAMPLED) | (status == est.STATUS_THIN)
            with_ratio = sampled & ~point.fallback
            y_hat = np.sum(np.where(with_ratio, N * mean_y, 0.0), axis=1)
            x_hat = np.sum(np.where(with_ratio, N * mean_x, 0.0), axis=1)
            t = np.where(point.fallback, X + N * (mean_y - mean_x), (y_hat / x_hat)[:, None] * X)
        elif method == "regression":
            t = N * (mean_y + slope * (X / N - mean_x))
        else:
            raise ValueError(f"unknown method {method!r}")
    # Strata that are not resampled keep their point contribution exactly.
    fixed_h = ~resampled
    if method == "combined_ratio":
        fixed_h = fixed_h & ~(status == est.STATUS_THIN)
    t = np.where(fixed_h[None, :], point.stratum_total[None, :], t)
    return BootstrapResult(replicates=t.sum(axis=1), seed=seed_int)
