"""Confidence limits from the normal or Student's t distribution.

The limits are for the estimated audited total. ``sides`` says which limits
are wanted:

* ``"two-sided"``: ``estimate -/+ c * se`` with ``c`` the ``1 - (1 - confidence)/2``
  quantile;
* ``"lower"``: a lower confidence bound ``estimate - c * se`` with ``c`` the
  ``confidence`` quantile, the upper limit being ``+inf`` (a lower bound on
  the audited total is an upper bound on overstatement);
* ``"upper"``: an upper confidence bound ``estimate + c * se``, the lower limit
  being ``-inf``.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import ndtri, stdtrit

__all__ = ["SIDES", "DISTRIBUTIONS", "critical_value", "confidence_limits", "satterthwaite_df"]

SIDES = ("two-sided", "lower", "upper")
DISTRIBUTIONS = ("normal", "t")


def critical_value(confidence: float, sides: str, distribution: str = "normal", df: float = math.inf) -> float:
    """The multiplier of the standard error for the requested limits.

    Normal quantiles from :func:`scipy.special.ndtri`, Student's t quantiles
    from :func:`scipy.special.stdtrit` with ``df`` degrees of freedom (the
    functions behind ``scipy.stats.norm.ppf`` and ``scipy.stats.t.ppf``, the
    same values without importing ``scipy.stats``; a t with
    infinite or undefined degrees of freedom falls back to the normal).
    """
    p = 1.0 - (1.0 - confidence) / 2.0 if sides == "two-sided" else confidence
    if distribution == "t" and math.isfinite(df) and df > 0:
        return float(stdtrit(df, p))
    return float(ndtri(p))


def confidence_limits(
    estimate: float,
    std_error: float,
    confidence: float,
    sides: str,
    distribution: str = "normal",
    df: float = math.inf,
) -> tuple[float, float]:
    """Lower and upper confidence limits (see the module docstring for ``sides``)."""
    c = critical_value(confidence, sides, distribution, df)
    half = c * std_error
    if sides == "two-sided":
        return estimate - half, estimate + half
    if sides == "lower":
        return estimate - half, math.inf
    return -math.inf, estimate + half


def satterthwaite_df(variance_terms: np.ndarray, term_df: np.ndarray) -> float:
    """Satterthwaite's effective degrees of freedom of a sum of independent variance terms.

    ``df = (sum v_h)**2 / sum(v_h**2 / df_h)`` over the terms with ``v_h > 0``
    (Satterthwaite 1946, Biometrics Bulletin 2, 110-114; for a stratified
    mean, Cochran 1977, Sampling Techniques, 3rd ed., eq. 5.16, where
    ``v_h = N_h (N_h - n_h) s_h**2 / n_h`` and ``df_h = n_h - 1``).
    NaN when the total variance is zero.
    """
    v = np.asarray(variance_terms, dtype=float)
    d = np.asarray(term_df, dtype=float)
    use = (v > 0) & np.isfinite(v)
    total = v[use].sum()
    if not use.any() or total <= 0:
        return math.nan
    return float(total**2 / np.sum(v[use] ** 2 / d[use]))
