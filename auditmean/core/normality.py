"""Rules for judging whether a stratum's sample is large enough for the normal approximation.

Pure numpy: every function takes arrays of sample sizes ``n`` and skewness
coefficients ``g1`` (one entry per stratum) and answers per stratum. Planning
applies them to the skewness of the known book values; evaluation can apply
the same functions to the skewness of what was sampled.

A stratum examined in full has no sampling error, so it never fails a rule
(pass ``census``). A skewness that is not defined (NaN, fewer than three
values) cannot be checked by the skewness rules; those strata do not fail
them, and the rule of thumb on the number of items still applies.

References
----------
Cochran, W. G. (1977). *Sampling Techniques*, 3rd ed., Wiley, section 2.15.

Sugden, R. A., Smith, T. M. F. and Jones, R. P. (2000). Cochran's rule for
simple random sampling. *Journal of the Royal Statistical Society B* 62(4),
787-793.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "RULE_OF_THUMB_ITEMS",
    "OVERALL_SKEWNESS_LIMIT",
    "FEW_DIFFERENCES",
    "cochran_minimum",
    "sugden_minimum",
    "smallest_size_above",
    "fails_rule_of_thumb",
    "fails_cochran",
    "fails_sugden",
]

#: Fewest items a stratum's sample should hold: a rule of thumb, common
#: practice, no published source.
RULE_OF_THUMB_ITEMS = 30

#: Skewness of a whole estimator above which its normal interval is
#: doubtful: Cochran's n > 25 G1^2 rewritten as G1 / sqrt(n) < 0.2 (Cochran
#: 1977, section 2.15), applied to the stratified estimator.
OVERALL_SKEWNESS_LIMIT = 0.2

#: Fewest non-zero differences for difference and ratio intervals: common
#: audit practice, quoted from memory, no single published source.
FEW_DIFFERENCES = 20


def cochran_minimum(g1: np.ndarray | float) -> np.ndarray:
    """Cochran's bound ``25 G1**2``: the sample size must exceed it.

    Parameters
    ----------
    g1:
        Fisher's skewness coefficient of the stratum's values (array or scalar).

    Returns
    -------
    numpy.ndarray
        ``25 * g1**2`` (NaN where ``g1`` is NaN).

    Notes
    -----
    Cochran (1977, section 2.15) gives ``n > 25 G1**2`` as a crude rule for
    the sample mean of a positively skewed population to be close enough to
    normal; as we recall his wording (from memory), it aims at a nominal
    95% confidence statement being wrong not much more than 6% of the time.
    """
    g = np.asarray(g1, dtype=float)
    return 25.0 * g * g


def sugden_minimum(g1: np.ndarray | float) -> np.ndarray:
    """The refined bound ``28 + 25 G1**2`` for the studentized mean.

    Notes
    -----
    Sugden, Smith and Jones (2000) revisit Cochran's rule for the
    studentized mean (the mean divided by its estimated standard error, the
    quantity a confidence interval uses) and arrive at a bound of the form
    ``n > 28 + 25 G1**2``. The constant 28 is quoted from memory of that
    paper.
    """
    return 28.0 + cochran_minimum(g1)


def smallest_size_above(bound: np.ndarray | float) -> np.ndarray:
    """The smallest whole sample size strictly above ``bound`` (``floor(bound) + 1``), as int64.

    NaN bounds give 0 (nothing can be required from an undefined skewness).
    """
    b = np.asarray(bound, dtype=float)
    out = np.where(np.isfinite(b), np.floor(b) + 1.0, 0.0)
    return out.astype(np.int64)


def size_passing_checks(g1: np.ndarray | float) -> np.ndarray:
    """The smallest sample size per stratum that passes every per-stratum check here.

    ``max(30, floor(28 + 25 G1**2) + 1)``: the rule of thumb of 30 items
    (common practice, no published source) and the bound of Sugden, Smith
    and Jones (2000), which is above Cochran's ``25 G1**2`` for every
    ``G1``. A stratum whose skewness is undefined (NaN, e.g. every book
    value equal) needs the 30 of the rule of thumb. Planning caps the result
    at the stratum's count (a stratum that cannot reach it is examined in
    full).
    """
    need = smallest_size_above(sugden_minimum(g1))
    return np.maximum(need, RULE_OF_THUMB_ITEMS).astype(np.int64)


def _sampled(n: np.ndarray, census: np.ndarray | None) -> np.ndarray:
    if census is None:
        return np.ones(n.shape, dtype=bool)
    return ~np.asarray(census, dtype=bool)


def fails_rule_of_thumb(
    n: np.ndarray, census: np.ndarray | None = None, threshold: int = RULE_OF_THUMB_ITEMS
) -> np.ndarray:
    """Strata sampled with fewer than ``threshold`` items (default 30).

    A rule of thumb, common practice with no published source.
    """
    n = np.asarray(n)
    return _sampled(n, census) & (n < threshold)


def fails_cochran(n: np.ndarray, g1: np.ndarray, census: np.ndarray | None = None) -> np.ndarray:
    """Strata whose sample size does not exceed ``25 G1**2`` (Cochran 1977, section 2.15)."""
    n = np.asarray(n, dtype=float)
    bound = cochran_minimum(g1)
    return _sampled(n, census) & np.isfinite(bound) & (n <= bound)


def fails_sugden(n: np.ndarray, g1: np.ndarray, census: np.ndarray | None = None) -> np.ndarray:
    """Strata whose sample size does not exceed ``28 + 25 G1**2`` (Sugden, Smith and Jones 2000)."""
    n = np.asarray(n, dtype=float)
    bound = sugden_minimum(g1)
    return _sampled(n, census) & np.isfinite(bound) & (n <= bound)
