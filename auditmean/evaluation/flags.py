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
from auditmean.core import normality as _normality
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
        for h in np.flatnonzero(core.fallback & (status == est.STATUS_SAMPLED)):
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
    if method in ("ratio", "combined_ratio"):
        for h in np.flatnonzero(core.fallback):
            flags.append(
                Flag(
                    code="ratio-undefined",
                    message=(
                        f"Stratum {labels[h]!r}: the sampled book values add up to zero, so no ratio can be "
                        f"formed; the stratum was estimated by difference estimation."
                    ),
                    stratum=labels[h],
                    rule="a ratio needs a non-zero sampled book total",
                    source="Cochran 1977, section 6.2 (R = ybar / xbar)",
                    advice="Keep zero balances in their own stratum and test them by a procedure of their own.",
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
                        "Do not read the zero width as precision; rely on the finite-sample bound "
                        "(auditmean rests the verdict on it), or use a design built for rare misstatement, "
                        "selection by monetary unit, as the firm's methodology allows."
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
                advice="Rely on the finite-sample bound (the verdict rests on it), examine more items, or "
                "use selection by monetary unit.",
            )
        )
    return tuple(flags)


# ------------------------------------------------------------------ normal approximation

_RULE_OF_THUMB_SOURCE = "rule of thumb, common practice; no published source"
_COCHRAN_SOURCE = "Cochran 1977, Sampling Techniques, 3rd ed., section 2.15"
_SUGDEN_SOURCE = (
    "Sugden, Smith and Jones 2000, Cochran's rule for simple random sampling, JRSS B 62, 787-793 "
    "(the constant 28 is quoted from memory)"
)
_OVERALL_SOURCE = (
    "derived from Cochran 1977, section 2.15: n > 25 G1^2 is the same as a skewness of the mean "
    "below 0.2; applied here to the stratified estimator, whose skewness comes from the strata's "
    "third moments (third moment of a mean without replacement: mu3 (N - n)(N - 2n) / "
    "(n^2 (N - 1)(N - 2)), Cochran 1977, section 2.15, quoted from memory)"
)
#: Thresholds of the whole-estimate flags, defined once in core.normality
#: (the coverage simulation uses the same ones).
OVERALL_SKEWNESS_LIMIT = _normality.OVERALL_SKEWNESS_LIMIT
FEW_DIFFERENCES = _normality.FEW_DIFFERENCES

_WHAT_IS_AVERAGED = {
    "mpu": "audited values",
    "difference": "differences (audited minus book)",
    "ratio": "ratio residuals",
    "combined_ratio": "ratio residuals",
    "regression": "regression residuals",
}


def averaged_moments(codes: np.ndarray, H: int, values: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per stratum: G1, sample variance (n - 1) and k3 of the values an estimator averages."""
    from auditmean.core.moments import group_counts, group_means, sample_skewness

    n = group_counts(codes, H)
    mean = group_means(codes, H, values, n)
    d = values - mean[codes]
    m2 = np.bincount(codes, weights=d * d, minlength=H)
    m3 = np.bincount(codes, weights=d * d * d, minlength=H)
    nf = n.astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        s2 = np.where(n > 1, m2 / (nf - 1.0), np.nan)
        k3 = np.where(n > 2, nf * m3 / ((nf - 1.0) * (nf - 2.0)), np.nan)
    g1 = sample_skewness(codes, H, values)
    # Values that do not vary have no shape to judge: the skewness rules do
    # not apply (the no-differences flag speaks for that case).
    scale = np.bincount(codes, weights=values * values, minlength=H)
    flat = ~(m2 > 1e-24 * scale)
    return np.where(flat, np.nan, g1), s2, k3


def estimator_skewness(core: est.CoreEstimate, counts: np.ndarray, n: np.ndarray, k3: np.ndarray, adjustment: np.ndarray) -> float:
    """Skewness of the stratified estimator from the strata's third moments (see ``_OVERALL_SOURCE``)."""
    N = counts.astype(float)
    nf = n.astype(float)
    use = core.status == est.STATUS_SAMPLED
    if not use.any() or not (core.variance > 0):
        return float("nan")
    with np.errstate(invalid="ignore", divide="ignore"):
        third = N**3 * k3 * (N - nf) * (N - 2 * nf) / (nf**2 * (N - 1) * (N - 2)) * adjustment**1.5
    third = np.where(use & np.isfinite(third), third, 0.0)
    return float(third.sum() / core.variance**1.5)


def normality_flags(
    method: str,
    labels: list[str],
    by_stratum: pd.DataFrame,
    core: est.CoreEstimate,
    codes: np.ndarray,
) -> tuple[tuple[Flag, ...], np.ndarray, float]:
    """Flags on whether the normal approximation can be trusted, stratum by stratum and overall.

    Returns the flags, the per-stratum skewness G1 of what the estimator
    averages, and the skewness of the whole estimator.
    """
    from auditmean.core import normality

    H = len(labels)
    n = by_stratum["sampled"].to_numpy()
    counts = by_stratum["count"].to_numpy()
    g1, _s2, k3 = averaged_moments(codes, H, core.item_values)
    sampled = core.status == est.STATUS_SAMPLED
    census = ~sampled
    what = _WHAT_IS_AVERAGED[method]
    flags: list[Flag] = []
    few = normality.fails_rule_of_thumb(n, census)
    cochran = normality.fails_cochran(n, g1, census)
    sugden = normality.fails_sugden(n, g1, census)
    for h in range(H):
        name = labels[h]
        if few[h]:
            flags.append(
                Flag(
                    code="few-items",
                    message=f"Stratum {name!r}: {n[h]} items sampled, fewer than {normality.RULE_OF_THUMB_ITEMS}.",
                    stratum=name,
                    rule=f"at least {normality.RULE_OF_THUMB_ITEMS} sampled items per stratum",
                    source=_RULE_OF_THUMB_SOURCE,
                    advice="Extend the selection in this stratum, or merge it with a neighbour.",
                )
            )
        if cochran[h]:
            need = int(normality.smallest_size_above(normality.cochran_minimum(g1[h])))
            flags.append(
                Flag(
                    code="skew-cochran",
                    message=(
                        f"Stratum {name!r}: the {what} have skewness {g1[h]:.2f}; Cochran's rule asks for "
                        f"more than {25 * g1[h] ** 2:.0f} items, the sample has {n[h]}."
                    ),
                    stratum=name,
                    rule="n > 25 G1^2, G1 the skewness of what the estimator averages",
                    source=_COCHRAN_SOURCE,
                    advice=(
                        f"Examine at least {need} items here, split the stratum, or move its largest "
                        f"items into the stratum examined in full; meanwhile rely on the second opinion."
                    ),
                )
            )
        if sugden[h]:
            need = int(normality.smallest_size_above(normality.sugden_minimum(g1[h])))
            flags.append(
                Flag(
                    code="skew-studentized",
                    message=(
                        f"Stratum {name!r}: with skewness {g1[h]:.2f} the studentized mean needs more than "
                        f"{28 + 25 * g1[h] ** 2:.0f} items; the sample has {n[h]}."
                    ),
                    stratum=name,
                    rule="n > 28 + 25 G1^2",
                    source=_SUGDEN_SOURCE,
                    advice=f"Examine at least {need} items here, or restratify; meanwhile rely on the second opinion.",
                )
            )
    adjustment = np.ones(H)
    if method in ("ratio", "combined_ratio"):
        # the same scale factor the sample-book-mean variance uses, if any
        with np.errstate(invalid="ignore", divide="ignore"):
            base = by_stratum["count"].to_numpy(float) ** 2 * (1 - n / np.maximum(counts, 1)) / np.maximum(n, 1)
            adjustment = np.where(
                sampled & (base * core.residual_var > 0), core.stratum_variance / (base * core.residual_var), 1.0
            )
    skew = estimator_skewness(core, counts, n, k3, adjustment)
    if np.isfinite(skew) and abs(skew) >= OVERALL_SKEWNESS_LIMIT:
        flags.append(
            Flag(
                code="skew-overall",
                message=(
                    f"The estimate as a whole has skewness {skew:.2f} (limit {OVERALL_SKEWNESS_LIMIT}): "
                    + (
                        "its long tail is on the low side of the audited total, so the normal-theory upper "
                        "misstatement limit is probably too low."
                        if skew < 0
                        else "its long tail is on the high side of the audited total, so the normal-theory "
                        "lower misstatement limit is probably too high and the upper limit of the audited total too low."
                    )
                ),
                stratum=None,
                rule=f"|skewness of the stratified estimator| < {OVERALL_SKEWNESS_LIMIT}",
                source=_OVERALL_SOURCE,
                advice="Rely on the finite-sample bound (the verdict rests on it); enlarge the samples of the "
                "strata that carry the skewness, or use selection by monetary unit.",
            )
        )
    if method in est.BOOK_VALUE_METHODS and "nonzero_differences" in by_stratum:
        nz = int(by_stratum["nonzero_differences"].to_numpy()[sampled].sum())
        if 0 < nz < FEW_DIFFERENCES:
            flags.append(
                Flag(
                    code="few-differences",
                    message=(
                        f"Only {nz} sampled item{'s' if nz != 1 else ''} outside the strata examined in full "
                        f"{'differ' if nz != 1 else 'differs'} from book value; {est.METHOD_NAMES[method]} "
                        f"limits are unreliable with so few."
                    ),
                    stratum=None,
                    rule=f"at least {FEW_DIFFERENCES} non-zero differences in the sampled strata",
                    source="common audit practice, threshold quoted from memory; " + _FEW_ERRORS_SOURCE,
                    advice="Rely on the finite-sample bound (the verdict rests on it), examine more items, or "
                    "use selection by monetary unit where misstatements are rare.",
                )
            )
    return tuple(flags), g1, skew
