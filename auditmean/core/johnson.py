r"""Johnson's skewness-adjusted t interval for a mean.

N. J. Johnson (1978), Modified t tests and confidence intervals for
asymmetrical populations, JASA 73, 536-544, corrects Student's t for the
skewness of the population by the statistic

.. math:: t_1 = \frac{(\bar e - \mu) + \hat\mu_3 / (6 s^2 n)
                 + \hat\mu_3 (\bar e - \mu)^2 / (3 s^4)}{s / \sqrt{n}}

and obtains limits for ``mu`` by solving ``t_1 = +/- t_{n-1}``. With
``delta = ebar - mu`` the equation is a quadratic,
``a delta^2 + delta + c -/+ k = 0`` with ``a = mu3 / (3 s^4)``,
``c = mu3 / (6 s^2 n)`` and ``k = t_{n-1} * se``; the root taken is the one
on the branch where ``t_1`` increases with ``delta`` (``1 + 2 a delta > 0``),
which tends to Student's limit ``delta = k - c`` as the skewness vanishes.
Where that root does not exist (a very skewed small sample), the linear
form ``delta = k - c`` is used and the result says so.

Finite populations: auditmean puts the finite-population correction into
the standard error ``se = s sqrt((1 - f) / n)`` and keeps Johnson's
skewness terms as published (derived for sampling with replacement); with
the sampling fractions of audit strata (a few per cent) the difference is
negligible, and the correction terms then err on the wide side.

The third moment is estimated by the unbiased k-statistic
``k3 = n / ((n - 1)(n - 2)) * sum((e - ebar)^3)`` (Kendall and Stuart).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy.special import stdtrit  # Student's t quantile (as scipy.stats.t.ppf)

__all__ = ["JohnsonLimits", "johnson_limits"]


@dataclass(frozen=True)
class JohnsonLimits:
    lower: float
    upper: float
    linearised: bool  # True where the quadratic had no root on the increasing branch


def _delta(a: float, c: float, k: float) -> tuple[float, bool]:
    """Root of a d^2 + d + (c - k) = 0 on the increasing branch, or the linear root."""
    linear = k - c
    if a == 0.0:
        return linear, False
    disc = 1.0 - 4.0 * a * (c - k)
    if disc < 0:
        return linear, True
    d = (-1.0 + math.sqrt(disc)) / (2.0 * a)
    if 1.0 + 2.0 * a * d <= 0:
        return linear, True
    return d, False


def johnson_limits(
    mean: float,
    se: float,
    s2: float,
    mu3: float,
    n: int,
    confidence: float,
    sides: str = "two-sided",
) -> JohnsonLimits:
    """Johnson's limits for a population mean.

    Parameters
    ----------
    mean:
        The estimate of the mean (``ebar``, or a total divided by ``N``).
    se:
        Its standard error (with the finite-population correction).
    s2, mu3:
        Sample variance (divisor ``n - 1``) and third central moment
        (k-statistic ``k3``) of the values averaged.
    n:
        Sample size; the t quantile has ``n - 1`` degrees of freedom.
    confidence, sides:
        As in :func:`auditmean.core.intervals.confidence_limits`.
    """
    p = 1.0 - (1.0 - confidence) / 2.0 if sides == "two-sided" else confidence
    q = float(stdtrit(max(n - 1, 1), p))
    k = q * se
    if not (s2 > 0) or not math.isfinite(mu3):
        lo, hi = mean - k, mean + k
        return JohnsonLimits(lo if sides != "upper" else -math.inf, hi if sides != "lower" else math.inf, False)
    a = mu3 / (3.0 * s2 * s2)
    c = mu3 / (6.0 * s2 * n)
    # Lower limit for mu: t1 = +q, i.e. delta solves a d^2 + d + c = +k.
    d_lo, lin_lo = _delta(a, c, k)
    # Upper limit for mu: t1 = -q, i.e. a d^2 + d + c = -k.
    d_hi, lin_hi = _delta(a, c, -k)
    lower = mean - d_lo
    upper = mean - d_hi
    if sides == "lower":
        return JohnsonLimits(lower, math.inf, lin_lo)
    if sides == "upper":
        return JohnsonLimits(-math.inf, upper, lin_hi)
    return JohnsonLimits(lower, upper, lin_lo or lin_hi)
