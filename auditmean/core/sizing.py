r"""Sample sizes for a precision target and their allocation to strata (pure numpy/scipy).

The caller has validated every argument; nothing here checks again.

Notation: stratum ``h`` holds ``N_h`` items whose values have standard
deviation ``S_h`` (divisor ``N_h - 1``); ``n_h`` items are examined. The
variance of the estimated total under stratified simple random sampling
without replacement is (Cochran 1977, section 5.3, Theorem 5.3 -- theorem
number from memory -- applied to the total ``N ybar_st``)

.. math::  V(\hat Y) = \sum_h N_h (N_h - n_h) S_h^2 / n_h
           = \sum_h N_h^2 S_h^2 / n_h - \sum_h N_h S_h^2 .

Precision target. The audit sample-size formula asks for a standard error
of the estimated total of ``(TM - EM) / (z_A + z_R)`` (see
:func:`sample_size`); the target variance is its square, ``V = (D / z)^2``
in Cochran's notation (1977, section 5.9).

Allocation. Every rule here gives stratum ``h`` the share ``lambda w_h``
of a common level ``lambda``, clipped to ``[m_h, N_h]`` where ``m_h`` is
the minimum per stratum (never above ``N_h``):

* Neyman: ``w_h = N_h S_h`` (Neyman 1934; Cochran 1977, section 5.5),
* proportional: ``w_h = N_h`` (Cochran 1977, section 5.3),
* equal: ``w_h = 1``.

Clipping at ``N_h`` is Cochran's treatment of a stratum whose Neyman share
exceeds its count (1977, section 5.8: examine it in full and share the
rest among the others, repeatedly); clipping at ``m_h`` treats the minimum
the same way. For Neyman weights the clipped form is the optimal allocation
under such box constraints (Gabler, Ganninger and Munnich 2012, Metrika
75, 151-161; cited from memory).

References
----------
Cochran, W. G. (1977). *Sampling Techniques*, 3rd ed., Wiley.

Neyman, J. (1934). On the two different aspects of the representative
method. *Journal of the Royal Statistical Society* 97(4), 558-625.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import ndtri  # the normal quantile (as scipy.stats.norm.ppf)

__all__ = [
    "ALLOCATION_RULES",
    "SampleSizeResult",
    "PrecisionSizes",
    "z_acceptance",
    "z_rejection",
    "ceil_size",
    "target_std_error",
    "planned_allowance",
    "sample_size",
    "allocation_weights",
    "variance_of_total",
    "neyman_size",
    "stratified_size",
    "continuous_allocation",
    "allocate",
    "sizes_for_precision",
]

ALLOCATION_RULES = ("neyman", "proportional", "equal")

# Sizes that come out as 100.0000000001 through rounding are 100, not 101.
_CEIL_RTOL = 1e-9


def z_acceptance(risk_incorrect_acceptance: float) -> float:
    """One-sided normal quantile for the risk of incorrect acceptance: ``z_A = Phi^-1(1 - RIA)``."""
    return float(ndtri(1.0 - risk_incorrect_acceptance))


def z_rejection(risk_incorrect_rejection: float | None) -> float:
    """Two-sided normal quantile for the risk of incorrect rejection: ``z_R = Phi^-1(1 - RIR / 2)``.

    ``0.0`` when the risk is not given.
    """
    if risk_incorrect_rejection is None:
        return 0.0
    return float(ndtri(1.0 - risk_incorrect_rejection / 2.0))


def ceil_size(x: float) -> int:
    """Round a sample size up, ignoring float noise of relative size ``1e-9``."""
    if x <= 0:
        return 0
    return int(math.ceil(x - _CEIL_RTOL * max(1.0, abs(x))))


def target_std_error(tolerable: float, expected: float, z_a: float, z_r: float = 0.0) -> float:
    """Standard error of the estimated total that the sample must reach: ``(TM - EM) / (z_A + z_R)``.

    See :func:`sample_size` for the source.
    """
    return (tolerable - expected) / (z_a + z_r)


def planned_allowance(tolerable: float, expected: float, z_a: float, z_r: float = 0.0) -> float:
    """Planned allowance for sampling risk.

    With both risks: ``A = z_R * SE = (TM - EM) z_R / (z_A + z_R)``, the
    classical split of ``TM - EM`` between the two risks. With the risk of
    incorrect acceptance alone the whole of ``TM - EM`` is the allowance:
    ``A = z_A * SE = TM - EM``. See :func:`sample_size` for the source.
    """
    if z_r > 0:
        return (tolerable - expected) * z_r / (z_a + z_r)
    return tolerable - expected


@dataclass(frozen=True)
class SampleSizeResult:
    """What :func:`sample_size` works out.

    Attributes
    ----------
    size:
        Items to examine, after the finite-population correction, rounded up.
    size_before_correction:
        ``n0``, the size for sampling with replacement (not rounded).
    z_acceptance, z_rejection:
        The quantiles used (``z_rejection`` is 0 when no risk of incorrect
        rejection was given).
    target_std_error:
        Standard error of the estimated total the sample is planned to reach.
    planned_allowance:
        Planned allowance for sampling risk.
    """

    size: int
    size_before_correction: float
    z_acceptance: float
    z_rejection: float
    target_std_error: float
    planned_allowance: float


def sample_size(
    std_dev: float,
    count: int,
    tolerable: float,
    expected: float = 0.0,
    risk_incorrect_acceptance: float = 0.10,
    risk_incorrect_rejection: float | None = None,
) -> SampleSizeResult:
    r"""Sample size for mean-per-unit (or difference, ratio) estimation of a total, unstratified.

    Parameters
    ----------
    std_dev:
        Expected standard deviation ``S`` of the values averaged (audited
        values for mean-per-unit, differences or residuals otherwise).
    count:
        Number of items ``N`` in the population.
    tolerable, expected:
        Tolerable misstatement ``TM`` and expected misstatement ``EM``.
    risk_incorrect_acceptance:
        ``RIA``; ``z_A`` is its one-sided normal quantile.
    risk_incorrect_rejection:
        ``RIR`` or ``None``; ``z_R`` is its two-sided normal quantile.

    Returns
    -------
    SampleSizeResult

    Notes
    -----
    The classical variables-sampling size formula,

    .. math::  n_0 = \left( \frac{(z_A + z_R)\, S\, N}{TM - EM} \right)^2,
               \qquad n = \frac{n_0}{1 + n_0 / N},

    with ``z_R = 0`` when no risk of incorrect rejection is given, ``n``
    rounded up and never above ``N``. The planned allowance for sampling
    risk is ``A = (TM - EM) z_R / (z_A + z_R)`` (both risks) or
    ``TM - EM`` (risk of incorrect acceptance only). The formula and the
    split of ``TM - EM`` are those of the classical-variables chapters of
    Roberts (1978) and of the AICPA audit sampling guide; we quote them from
    memory, without chapter or page. The finite-population correction
    ``n = n0 / (1 + n0 / N)`` is Cochran's (1977, section 4.4, eq. 4.2,
    equation number from memory).

    Equivalently the sample is planned for a standard error of the
    estimated total of ``(TM - EM) / (z_A + z_R)``: then the upper limit
    ``EM + z_A SE`` stays below ``TM`` when the misstatement is as expected,
    and the interval ``+- z_R SE`` around a correct book value excludes it
    no more often than the risk of incorrect rejection.

    References
    ----------
    Roberts, D. M. (1978). *Statistical Auditing*. AICPA, New York.

    AICPA. *Audit Guide: Audit Sampling*. American Institute of Certified
    Public Accountants (edition not checked).

    Cochran, W. G. (1977). *Sampling Techniques*, 3rd ed., Wiley.
    """
    z_a = z_acceptance(risk_incorrect_acceptance)
    z_r = z_rejection(risk_incorrect_rejection)
    se = target_std_error(tolerable, expected, z_a, z_r)
    n0 = (std_dev * count / se) ** 2
    n = n0 / (1.0 + n0 / count) if count > 0 else 0.0
    size = min(ceil_size(n), int(count))
    return SampleSizeResult(
        size=size,
        size_before_correction=float(n0),
        z_acceptance=z_a,
        z_rejection=z_r,
        target_std_error=float(se),
        planned_allowance=float(planned_allowance(tolerable, expected, z_a, z_r)),
    )


def allocation_weights(rule: str, counts: np.ndarray, std_devs: np.ndarray) -> np.ndarray:
    """The weights ``w_h`` of an allocation rule: Neyman ``N_h S_h``, proportional ``N_h``, equal ``1``.

    Only ratios of weights matter, so they are scaled to a largest weight of
    1; a weight below ``1e-200`` of the largest counts as 0 (it would
    overflow the levels ``N_h / w_h``). Empty strata get weight 0 under
    every rule.
    """
    counts = np.asarray(counts, dtype=float)
    if rule == "neyman":
        w = counts * np.asarray(std_devs, dtype=float)
    elif rule == "proportional":
        w = counts.copy()
    elif rule == "equal":
        w = np.ones_like(counts)
    else:
        raise ValueError(f"unknown allocation rule {rule!r}")
    w = np.where(counts > 0, w, 0.0)
    top = float(w.max()) if w.size else 0.0
    if top <= 0 or not math.isfinite(top):
        return np.zeros_like(w) if top <= 0 else np.where(np.isinf(w), 1.0, 0.0)
    w = w / top
    return np.where(w < 1e-200, 0.0, w)


def variance_of_total(counts: np.ndarray, std_devs: np.ndarray, sizes: np.ndarray) -> float:
    """``V(Y_hat) = sum N_h (N_h - n_h) S_h^2 / n_h`` (Cochran 1977, section 5.3).

    A stratum with ``S_h = 0`` or examined in full adds nothing; a stratum
    with ``S_h > 0`` and no item examined makes the variance infinite.
    """
    N = np.asarray(counts, dtype=float)
    S2 = np.square(np.asarray(std_devs, dtype=float))
    n = np.asarray(sizes, dtype=float)
    active = (S2 > 0) & (N > n)
    if np.any(active & (n <= 0)):
        return math.inf
    Na, na = N[active], n[active]
    return float(np.sum(Na * (Na - na) * S2[active] / na))


def neyman_size(counts: np.ndarray, std_devs: np.ndarray, variance: float) -> float:
    r"""Total sample size (not rounded) for a target variance of the total under Neyman allocation.

    .. math::  n = \frac{(\sum_h N_h S_h)^2}{V + \sum_h N_h S_h^2}

    (Cochran 1977, section 5.9, eq. 5.25; the equation number is quoted
    from memory, not checked against the book). A stratum whose Neyman share
    ``n N_h S_h / sum N S`` exceeds ``N_h`` is examined in full, left out of
    both sums, and the formula is applied again to the rest with the same
    ``V`` (a stratum examined in full adds no variance); repeated until no
    share exceeds its count (Cochran 1977, section 5.8). Strata examined in
    full count with ``N_h`` items.
    """
    N = np.asarray(counts, dtype=float)
    S = np.asarray(std_devs, dtype=float)
    full = np.zeros(N.shape, dtype=bool)
    while True:
        free = ~full
        a = N[free] * S[free]
        t = float(a.sum())
        if t <= 0.0:
            return float(N[full].sum())
        q = float(np.sum(a * S[free]))
        n = t * t / (variance + q)
        over = n * a / t > N[free]
        if not over.any():
            return float(N[full].sum()) + n
        full[np.flatnonzero(free)[over]] = True


def stratified_size(
    counts: np.ndarray, std_devs: np.ndarray, variance: float, weights: np.ndarray
) -> float:
    r"""Total sample size (not rounded) for a target variance when ``n_h = n w_h / sum w``.

    .. math::  n = \frac{\sum_h N_h^2 S_h^2 / w'_h}{V + \sum_h N_h S_h^2},
               \qquad w'_h = w_h / \sum_k w_k

    (Cochran 1977, section 5.9, the general form before Neyman weights are
    put in; quoted from memory, equation number not checked). No clipping: strata whose share
    exceeds their count are not treated here (see :func:`sizes_for_precision`).
    """
    N = np.asarray(counts, dtype=float)
    S2 = np.square(np.asarray(std_devs, dtype=float))
    w = np.asarray(weights, dtype=float)
    share = w / w.sum()
    active = S2 > 0
    num = float(np.sum(N[active] ** 2 * S2[active] / share[active]))
    return num / (variance + float(np.sum(N * S2)))


def _clipped(level: float, w: np.ndarray, lo: np.ndarray, up: np.ndarray) -> np.ndarray:
    return np.clip(level * w, lo, up)


def _level_for_sum(total: float, w: np.ndarray, lo: np.ndarray, up: np.ndarray) -> float:
    """The level ``lambda`` with ``sum clip(lambda w, lo, up) = total`` (exact, piecewise linear)."""
    pos = w > 0
    bps = np.unique(np.concatenate([lo[pos] / w[pos], up[pos] / w[pos]]))
    sums = np.clip(bps[:, None] * w[None, :], lo[None, :], up[None, :]).sum(axis=1)
    k = int(np.searchsorted(sums, total, side="left"))
    if k >= len(bps):
        return float(bps[-1])
    if k == 0 or sums[k] == sums[k - 1]:
        return float(bps[k])
    frac = (total - sums[k - 1]) / (sums[k] - sums[k - 1])
    return float(bps[k - 1] + frac * (bps[k] - bps[k - 1]))


def continuous_allocation(
    total: float, weights: np.ndarray, lower: np.ndarray, upper: np.ndarray, counts: np.ndarray
) -> np.ndarray:
    """Share ``total`` as ``n_h = clip(lambda w_h, lower_h, upper_h)`` with ``sum n_h = total`` (not rounded).

    Strata with weight 0 (under Neyman: ``S_h = 0``) keep their lower bound
    while any stratum with weight has room. Only once every such stratum is
    examined in full do the remaining items go to the zero-weight strata, in
    proportion to their counts (our own rule: the allocation rule says
    nothing about them, and the count is the neutral share).
    """
    w = np.asarray(weights, dtype=float)
    lo = np.asarray(lower, dtype=float)
    up = np.asarray(upper, dtype=float)
    pos = (w > 0) & (up > 0)
    out = lo.copy()
    room = float(up[pos].sum() + lo[~pos].sum())
    if total <= room:
        if pos.any():
            level = _level_for_sum(total - lo[~pos].sum(), w[pos], lo[pos], up[pos])
            out[pos] = _clipped(level, w[pos], lo[pos], up[pos])
        return out
    out[pos] = up[pos]
    rest = ~pos & (up > 0)
    cw = np.asarray(counts, dtype=float)[rest]
    level = _level_for_sum(total - up[pos].sum() - lo[~rest & ~pos].sum(), cw, lo[rest], up[rest])
    out[rest] = _clipped(level, cw, lo[rest], up[rest])
    return out


def _round_to_total(x: np.ndarray, total: int, lo: np.ndarray, up: np.ndarray) -> np.ndarray:
    """Whole sizes adding up to ``total`` by largest remainders (Hamilton's method), within bounds.

    Ties in the remainders go to the stratum listed first.
    """
    fl = np.floor(x)
    frac = x - fl
    near = frac > 1.0 - 1e-9  # 2.9999999999 is 3
    fl = np.where(near, fl + 1.0, fl)
    frac = np.where(near, 0.0, frac)
    n = np.clip(fl, lo, up).astype(np.int64)
    short = int(total - n.sum())
    if short > 0:
        key = np.where(n < up, frac, -1.0)
        order = np.argsort(-key, kind="stable")
        order = order[n[order] < up[order]]
        n[order[:short]] += 1
    elif short < 0:  # float noise only
        key = np.where(n > lo, frac, 2.0)
        order = np.argsort(key, kind="stable")
        order = order[n[order] > lo[order]]
        n[order[:-short]] -= 1
    return n


def allocate(
    total: int, counts: np.ndarray, std_devs: np.ndarray, rule: str, minimum: int
) -> np.ndarray:
    """Whole per-stratum sizes adding up exactly to ``total``.

    ``n_h = clip(lambda w_h, m_h, N_h)`` with ``m_h = min(minimum, N_h)`` and
    ``w_h`` from :func:`allocation_weights`, then largest-remainder rounding.
    The caller guarantees ``sum m_h <= total <= sum N_h``.
    """
    N = np.asarray(counts, dtype=np.int64)
    lo = np.minimum(int(minimum), N)
    return _allocate_within(int(total), N, allocation_weights(rule, N, std_devs), lo)


def _allocate_within(total: int, N: np.ndarray, w: np.ndarray, lo: np.ndarray) -> np.ndarray:
    x = continuous_allocation(float(total), w, lo.astype(float), N.astype(float), N)
    return _round_to_total(x, total, lo.astype(np.int64), N)


@dataclass(frozen=True)
class PrecisionSizes:
    """Per-stratum sizes that reach a target variance of the estimated total.

    Attributes
    ----------
    sizes:
        Whole sizes (int64), take-all strata at their count.
    continuous:
        The sizes before rounding (the clipped allocation that meets the
        target exactly).
    variance:
        ``V(Y_hat)`` with the whole sizes; never above the target.
    """

    sizes: np.ndarray
    continuous: np.ndarray
    variance: float


def _level_for_variance(
    variance: float, N: np.ndarray, S2: np.ndarray, w: np.ndarray, lo: np.ndarray, up: np.ndarray
) -> float:
    """The level ``lambda`` at which ``V(clip(lambda w, lo, up))`` equals ``variance``.

    ``V`` falls as ``lambda`` grows; between consecutive breakpoints
    ``lo/w``, ``up/w`` the set of strata strictly inside their bounds is
    fixed and ``V = A / lambda + B``, solved exactly.
    """
    pos = w > 0
    bps = np.unique(np.concatenate([lo[pos] / w[pos], up[pos] / w[pos]]))
    bps = bps[bps > 0]
    vs = np.array([variance_of_total(N, np.sqrt(S2), _clipped(b, w, lo, up)) for b in bps])
    k = int(np.argmax(vs <= variance))  # first breakpoint that reaches the target
    left = bps[k - 1] if k > 0 else 0.0
    mid = 0.5 * (left + bps[k]) if k > 0 else 0.5 * bps[k]
    n_mid = _clipped(mid, w, lo, up)
    free = (n_mid > lo) & (n_mid < up)
    fixed = ~free
    a = float(np.sum(N[free] ** 2 * S2[free] / w[free]))
    # B = sum over fixed strata of N (N - n) S^2 / n, minus sum over free strata of N S^2
    # (written so, not as sum N^2 S^2 / n - sum N S^2, to avoid cancellation).
    fx = fixed & (S2 > 0) & (n_mid > 0)
    b = float(np.sum(N[fx] * (N[fx] - n_mid[fx]) * S2[fx] / n_mid[fx])) - float(np.sum(N[free] * S2[free]))
    if a <= 0 or variance <= b:
        return float(bps[k])
    return float(min(max(a / (variance - b), left), bps[k]))


def sizes_for_precision(
    counts: np.ndarray,
    std_devs: np.ndarray,
    variance: float,
    rule: str,
    minimum: int | np.ndarray,
    take_all: np.ndarray,
) -> PrecisionSizes:
    """Smallest whole sizes under an allocation rule whose variance of the total is at most ``variance``.

    Strata in ``take_all`` are examined in full. The others get
    ``clip(lambda w_h, m_h, N_h)`` (see the module notes; here a stratum
    with ``S_h > 0`` has ``m_h >= 1`` even when the minimum is 0, since
    with no item its variance term is infinite) at the level
    ``lambda`` that meets the target exactly; their sum is rounded up to a
    whole total ``t`` and shared as :func:`allocate` does. If rounding leaves the
    variance a hair above the target, ``t`` grows one item at a time until
    it does not. With one stratum, Neyman weights and no minimum this is
    ``ceil(n0 / (1 + n0 / N))`` of :func:`sample_size` with
    ``n0 = N^2 S^2 / V``.
    """
    N = np.asarray(counts, dtype=np.int64)
    S = np.asarray(std_devs, dtype=float)
    S2 = S * S
    take_all = np.asarray(take_all, dtype=bool)
    sizes = np.where(take_all, N, 0).astype(np.int64)
    cont = sizes.astype(float)
    rest = ~take_all & (N > 0)
    if not rest.any():
        return PrecisionSizes(sizes, cont, variance_of_total(N, S, sizes))
    Nr, Sr, S2r = N[rest], S[rest], S2[rest]
    # A stratum with spread needs at least one item, whatever the minimum,
    # or the variance of the total is infinite.
    # ``minimum`` is one number for every stratum or one per stratum (same order as ``counts``).
    m_all = np.broadcast_to(np.asarray(minimum, dtype=np.int64), N.shape)
    m_r = m_all[rest]
    lo_int = np.minimum(np.where(S2r > 0, np.maximum(m_r, 1), m_r), Nr).astype(np.int64)
    lo = lo_int.astype(float)
    up = Nr.astype(float)
    w = allocation_weights(rule, Nr, Sr)
    if variance_of_total(Nr, Sr, lo) <= variance or not (w > 0).any():
        x = lo.copy()
    else:
        level = _level_for_variance(variance, Nr.astype(float), S2r, w, lo, up)
        x = _clipped(level, w, lo, up)
    cont[rest] = x
    t = min(max(ceil_size(float(x.sum())), int(lo.sum())), int(Nr.sum()))
    while True:
        n_rest = _allocate_within(t, Nr, w, lo_int)
        v = variance_of_total(Nr, Sr, n_rest)
        if v <= variance * (1.0 + 1e-12) or t >= int(Nr.sum()):
            break
        t += 1
    sizes[rest] = n_rest
    return PrecisionSizes(sizes, cont, variance_of_total(N, S, sizes))
