"""Flags about the structure of a sample: strata that could not be treated normally.

These flags concern how each stratum was handled (a variance that could not
be estimated, a stratum not sampled, a regression slope fixed, a sample with
no differences at all), as opposed to the skewness rules about whether the
normal approximation holds. Each names its stratum, the rule, its source and
the advice that would fix it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from auditmean.core import estimators as est
from auditmean.core.flags import Flag

__all__ = ["structural_flags"]

_VARIANCE_SOURCE = (
    "Cochran 1977, Sampling Techniques, 3rd ed., eqs. 5.6 and 7.27 "
    "(the divisors n_h - 1 and, for regression, n_h - 2)"
)
_FEW_ERRORS_SOURCE = (
    "Neter and Loebbecke 1975, Behavior of Major Statistical Estimators in Sampling "
    "Accounting Populations (AICPA research study); Kaplan 1973, The Accounting Review 48"
)


def structural_flags(
    method: str,
    labels: list[str],
    by_stratum: pd.DataFrame,
    core: est.CoreEstimate,
    single_item: str,
    unsampled: str,
) -> tuple[Flag, ...]:
    """Flags for strata treated in a special way and for a zero-width interval."""
    flags: list[Flag] = []
    status = core.status
    n = by_stratum["sampled"].to_numpy()
    N = by_stratum["count"].to_numpy()
    need = est.minimum_items_for_variance(method)
    treatment_words = {
        "average": "its variance term was set to the average of the other strata's terms",
        "zero": "it was given no variance term, which understates the standard error",
    }
    for h in np.flatnonzero(status == est.STATUS_THIN):
        code = "single-item" if n[h] == 1 else "variance-not-estimable"
        flags.append(
            Flag(
                code=code,
                message=(
                    f"Stratum {labels[h]!r}: {n[h]} item{'s' if n[h] != 1 else ''} sampled of {N[h]:,}, "
                    f"too few to estimate its variance for {est.METHOD_NAMES[method]}; {treatment_words[single_item]}."
                ),
                stratum=labels[h],
                rule=f"a stratum's variance needs at least {need} sampled items for this method",
                source=_VARIANCE_SOURCE,
                advice="Extend the selection in this stratum, or merge it with a neighbouring stratum.",
            )
        )
    if unsampled == "book_value":
        for h in np.flatnonzero(status == est.STATUS_UNSAMPLED):
            flags.append(
                Flag(
                    code="unsampled-stratum",
                    message=(
                        f"Stratum {labels[h]!r}: none of its {N[h]:,} items was sampled; its book total "
                        f"was taken as audited, with no allowance for sampling risk."
                    ),
                    stratum=labels[h],
                    rule="every stratum with items is sampled, or tested by another procedure",
                    source="stratified estimation needs a sample from every stratum (Cochran 1977, section 5.2)",
                    advice="Sample the stratum, or document the other procedure that covers it.",
                )
            )
    if method == "regression":
        for h in np.flatnonzero(core.slope_fallback & (status == est.STATUS_SAMPLED)):
            flags.append(
                Flag(
                    code="slope-undefined",
                    message=(
                        f"Stratum {labels[h]!r}: all sampled book values are equal, so no regression "
                        f"slope can be fitted; a slope of 1 was used (difference estimation)."
                    ),
                    stratum=labels[h],
                    rule="the regression slope needs spread in the sampled book values",
                    source="Cochran 1977, eq. 7.17 (b = s_xy / s_x^2)",
                    advice="Use difference estimation for this stratum, or stratify so book values vary.",
                )
            )
    if method in est.BOOK_VALUE_METHODS and "nonzero_differences" in by_stratum:
        nz = by_stratum["nonzero_differences"].to_numpy()
        sampled = (status == est.STATUS_SAMPLED) | (status == est.STATUS_THIN)
        for h in np.flatnonzero(sampled & (nz == 0)):
            flags.append(
                Flag(
                    code="no-differences",
                    message=(
                        f"Stratum {labels[h]!r}: every sampled audited value equals its book value, so "
                        f"{est.METHOD_NAMES[method]} estimates no sampling error there; that is not precision, it means "
                        f"the sample saw no misstatement to measure variability from."
                    ),
                    stratum=labels[h],
                    rule="difference, ratio and regression intervals need non-zero differences in the sample",
                    source=_FEW_ERRORS_SOURCE,
                    advice=(
                        "Do not read the zero width as precision; use the mean-per-unit interval or the "
                        "second-opinion interval, or an approach designed for rare misstatement under "
                        "the firm's methodology."
                    ),
                )
            )
    sampled_any = np.any((status == est.STATUS_SAMPLED) | (status == est.STATUS_THIN))
    if sampled_any and not (core.variance > 0):
        flags.append(
            Flag(
                code="interval-unusable",
                message=(
                    "The interval has zero width although part of the population was only sampled: "
                    "it must not be used as a measure of precision."
                ),
                stratum=None,
                rule="a sampled population has a positive standard error",
                source=_FEW_ERRORS_SOURCE,
                advice="Use mean-per-unit or the second-opinion interval, or examine more items.",
            )
        )
    return tuple(flags)
