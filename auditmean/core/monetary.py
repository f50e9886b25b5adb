"""Monetary-unit sampling: confidence factors, sample sizes and upper bounds on the mean taint.

Pure numpy and scipy on plain arrays; :mod:`auditmean.monetary_bound`
validates the sample and calls these.

A monetary-unit sample of the *remainder* (the items below the sampling
interval) is ``n_r`` independent draws, each a monetary unit of the
remainder's book value ``B_r`` taken with equal probability. The draw's
*taint* is ``t = (book - audited) / book`` of the item it falls in. The
remainder's overstatement is ``B_r * mu`` with ``mu`` the mean of
``max(t, 0)`` over all its monetary units, so an upper confidence bound
``U`` on ``mu`` gives the upper bound ``B_r * U`` on the remainder's
overstatement. Every function here returns such a ``U``.

Batches
-------
Every bound accepts a 2-D array ``values`` of shape ``(samples, draws)``:
one row per sample, its draws in the order they were drawn, ``NaN`` where a
row has fewer draws than the widest row (the coverage simulation computes
all bounds for thousands of samples in one call). A 1-D array is one
sample and gives a scalar. A row with no draw at all gives ``U = 1`` (the
whole remainder may be overstated).

Values are overstatement taints in ``[0, 1]`` (``NaN`` for no draw); the
assumption that no item is overstated by more than its book value is what
puts them there. :func:`overstatement_values` and
:func:`understatement_values` turn signed taints into such values.

The bounds
----------
``"stringer"``
    Stringer (1963): taints ranked, incremental Poisson (or binomial)
    factors. No general proof of coverage; conservative in published
    simulations (e.g. Leslie, Teitlebaum and Anderson 1979) and in
    auditmean's coverage tests.
``"count"``
    Every draw with a positive taint counted as a 100% taint: the
    Clopper-Pearson (1934) upper limit of the share of draws with an error.
    Holds in finite samples under the assumption (coverage at least ``confidence``).
``"betting"``
    Waudby-Smith and Ramdas (2024): a test supermartingale for each
    candidate mean, rejected where the capital reaches ``1 / alpha``
    (Ville's inequality), the bound the smallest candidate rejected. Holds
    in finite samples for independent draws of values in ``[0, 1]``.
``"count_or_betting"``
    The smaller of ``"count"`` at risk ``share * alpha`` and ``"betting"`` at
    risk ``(1 - share) * alpha`` (union bound; holds in finite samples).

References
----------
Stringer, K. W. (1963). Practical aspects of statistical sampling in
auditing. Proceedings of the Business and Economic Statistics Section,
American Statistical Association, 405-411.

Clopper, C. J. and Pearson, E. S. (1934). The use of confidence or fiducial
limits illustrated in the case of the binomial. Biometrika 26, 404-413.

Waudby-Smith, I. and Ramdas, A. (2024). Estimating means of bounded random
variables by betting. Journal of the Royal Statistical Society, Series B
86(1), 1-27.

Leslie, D. A., Teitlebaum, A. D. and Anderson, R. J. (1979). Dollar-Unit
Sampling: A Practical Guide for Auditors. Copp Clark Pitman (the Poisson
factors and the sample-size expansion for expected misstatement).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import betaincinv, gammaincinv  # scipy.stats' gamma, beta ppf; no scipy.stats

__all__ = [
    "METHODS",
    "BASES",
    "DEFAULT_SHARE",
    "DEFAULT_CAP",
    "poisson_factor",
    "binomial_factor",
    "clopper_pearson_upper",
    "sample_size",
    "overstatement_values",
    "understatement_values",
    "stringer_upper",
    "count_upper",
    "betting_upper",
    "betting_bets",
    "betting_log_capital",
    "count_or_betting_upper",
    "mean_taint_upper",
    "zero_error_bound",
]

#: The bounds offered, by the names :func:`mean_taint_upper` takes.
METHODS = ("stringer", "count", "betting", "count_or_betting")
#: Confidence factors: Poisson (gamma quantiles) or binomial (beta quantiles).
BASES = ("poisson", "binomial")

#: Share of the risk ``count_or_betting`` gives to the error count (the rest to betting),
#: chosen by measurement (tests/benchmarks/bench_monetary.py): with no error or a few 100%
#: taints it keeps the bound within about 1% of Stringer's (0.98 would gain 1% there and lose
#: 6% with many small taints; 0.9 and 0.8 cost 2% and 6% there and still stay wider than
#: Stringer with many small taints, which betting alone serves better).
DEFAULT_SHARE = 0.95
#: Largest bet, as a share of the most the capital can stake without risk of ruin
#: (``cap / (1 - m)``), chosen by measurement (tests/benchmarks/bench_monetary.py): 0.9 is
#: 1-5% wider where errors are rare or small; 0.98 is 1% narrower there but up to 6% wider
#: where 100% taints are common (each one then costs the capital 98% instead of 95%).
DEFAULT_CAP = 0.95

#: Relative precision of the betting bound: at most this share above the smallest rejected
#: mean, always on the rejected (conservative) side.
_RTOL = 1e-5
#: Rows per block in the betting bound (temporaries of block x draws floats).
_BLOCK = 2048


# ---------------------------------------------------------------------------
# confidence factors


def poisson_factor(errors, confidence: float) -> np.ndarray | float:
    """Poisson upper confidence factor ``F(k)``: the upper limit of a Poisson mean after ``k`` events.

    ``F(k) = gamma.ppf(confidence, k + 1)``, the ``confidence`` quantile of a
    gamma distribution with shape ``k + 1``; for whole ``k`` it equals
    ``chi2.ppf(confidence, 2k + 2) / 2`` (the Poisson-gamma relation:
    ``P(Poisson(F) <= k) = 1 - confidence``). Non-whole ``k`` interpolates, as
    the sample-size expansion for expected misstatement needs (Leslie,
    Teitlebaum and Anderson 1979).

    Parameters
    ----------
    errors:
        ``k >= 0``, scalar or array.
    confidence:
        In ``(0, 1)``.

    Examples
    --------
    >>> round(float(poisson_factor(0, 0.95)), 4)   # -ln(0.05)
    2.9957
    """
    out = gammaincinv(np.asarray(errors, dtype=float) + 1.0, confidence)  # = stats.gamma.ppf(confidence, k + 1)
    return float(out) if np.ndim(out) == 0 else out


def clopper_pearson_upper(errors, draws, confidence: float) -> np.ndarray | float:
    """Clopper-Pearson (1934) one-sided upper limit of a binomial share after ``k`` errors in ``n`` draws.

    ``beta.ppf(confidence, k + 1, n - k)``, and 1 when ``k >= n`` (also for
    ``n = 0``). Non-whole ``k`` interpolates (sample-size planning).
    """
    k = np.asarray(errors, dtype=float)
    n = np.asarray(draws, dtype=float)
    k, n = np.broadcast_arrays(k, n)
    out = np.ones(k.shape)
    ok = k < n
    if ok.any():
        out[ok] = betaincinv(k[ok] + 1.0, n[ok] - k[ok], confidence)  # = stats.beta.ppf(confidence, k + 1, n - k)
    return float(out) if out.ndim == 0 else out


def binomial_factor(errors, draws, confidence: float) -> np.ndarray | float:
    """Binomial analogue of :func:`poisson_factor`: ``n`` times the Clopper-Pearson upper limit."""
    out = np.asarray(draws, dtype=float) * clopper_pearson_upper(errors, draws, confidence)
    return float(out) if np.ndim(out) == 0 else out


# ---------------------------------------------------------------------------
# sample size


def sample_size(
    book_total: float, tolerable: float, expected: float, confidence: float, basis: str = "poisson"
) -> int:
    """Smallest number of monetary units ``n`` whose bound, at the expected misstatement, is within tolerable.

    Poisson basis: the smallest ``n`` with
    ``book_total * F(n * expected / book_total) / n <= tolerable``, ``F`` the
    Poisson factor at ``confidence`` interpolated by the gamma quantile
    (:func:`poisson_factor`). This is the expansion for expected
    misstatement of Leslie, Teitlebaum and Anderson (1979): the sample must
    leave room for the errors it expects to find, ``n * expected /
    book_total`` of them in 100%-taint units. With ``expected = 0`` it is
    ``ceil(F(0) * book_total / tolerable)``, the familiar "book value times
    the reliability factor over tolerable misstatement".

    Binomial basis: the smallest ``n`` with
    ``book_total * beta.ppf(confidence, k + 1, n - k) <= tolerable``,
    ``k = n * expected / book_total``; with ``expected = 0``,
    ``n = ceil(ln(1 - confidence) / ln(1 - tolerable / book_total))``.

    The caller has checked ``0 <= expected < tolerable`` and ``book_total > 0``.
    """
    T = tolerable / book_total
    E = expected / book_total

    if basis == "poisson":

        def excess(n: float) -> float:
            return poisson_factor(n * E, confidence) - n * T

    else:

        def excess(n: float) -> float:
            return n * (clopper_pearson_upper(n * E, n, confidence) - T)

    def fits(n: int) -> bool:
        return excess(float(n)) <= 0.0

    if fits(1):
        return 1
    # n*T - F(n*E) starts below zero, may fall, then rises without bound for E < T (F is
    # concave in k with slope tending to 1), so it crosses zero once: bracket and solve.
    lo, hi = 1.0, max(2.0, poisson_factor(0.0, confidence) / T)
    while excess(hi) > 0.0:
        lo, hi = hi, hi * 2.0
        if hi > 1e15:
            raise ValueError("no sample size reaches the tolerable misstatement")
    from scipy import optimize  # here, not at import: every command's start would pay for it

    root = optimize.brentq(excess, lo, hi, xtol=1e-9, rtol=1e-13) if excess(lo) > 0.0 else lo
    n = max(1, math.ceil(root))
    while n > 1 and fits(n - 1):
        n -= 1
    while not fits(n):
        n += 1
    return int(n)


# ---------------------------------------------------------------------------
# values


def _rows(values) -> tuple[np.ndarray, bool]:
    """``values`` as a 2-D float array (copy-free when possible) and whether it came 1-D."""
    x = np.asarray(values, dtype=float)
    if x.ndim == 1:
        return x[None, :], True
    if x.ndim != 2:
        raise ValueError("values must be 1-D (one sample) or 2-D (samples x draws)")
    return x, False


def _out(u: np.ndarray, one: bool):
    return float(u[0]) if one else u


def overstatement_values(taints) -> np.ndarray:
    """``max(t, 0)``: understatements never lower the overstatement bound (NaN stays NaN)."""
    t = np.asarray(taints, dtype=float)
    return np.where(np.isnan(t), np.nan, np.maximum(t, 0.0))


def understatement_values(taints) -> np.ndarray:
    """``max(-t, 0)``: the understatement taints, for the separate understatement bound."""
    t = np.asarray(taints, dtype=float)
    return np.where(np.isnan(t), np.nan, np.maximum(-t, 0.0))


def _left_justified(x: np.ndarray) -> np.ndarray:
    """Each row's draws first, in their order, and its NaN padding last."""
    gap = np.isnan(x)
    if not gap.any():
        return x
    # A row is already justified when no draw follows a gap.
    later_draw = np.cumsum(~gap[:, ::-1], axis=1)[:, ::-1] > 0
    if not np.any(gap & later_draw):
        return x
    order = np.argsort(gap, axis=1, kind="stable")
    return np.take_along_axis(x, order, axis=1)


# ---------------------------------------------------------------------------
# Stringer


def stringer_upper(values, confidence: float, basis: str = "poisson"):
    """Stringer's (1963) upper bound on the mean overstatement taint per monetary unit.

    With ``n`` draws and the positive taints ranked from the largest,
    ``t_(1) >= t_(2) >= ... >= t_(k)``:

    ``U = [F(0) + sum_i t_(i) * (F(i) - F(i-1))] / n``,

    ``F`` the Poisson upper confidence factor (:func:`poisson_factor`), or,
    with ``basis="binomial"``, ``F(i) = n * beta.ppf(confidence, i + 1, n - i)``
    (:func:`binomial_factor`). ``F(0) / n`` is the basic precision, the
    bound with no error found; each error adds its taint times the
    incremental factor of its rank. Capped at 1 (under the assumption, no
    mean taint exceeds 1).

    Values above 1 (understatement taints beyond 100%, outside the
    assumption) enter the formula as they are.
    """
    x, one = _rows(values)
    R, m = x.shape
    draws = np.sum(~np.isnan(x), axis=1)
    ranked = -np.sort(-np.nan_to_num(np.maximum(x, 0.0), nan=0.0), axis=1)  # largest first
    u = np.empty(R)
    if basis == "poisson":
        F = np.asarray(poisson_factor(np.arange(m + 1), confidence), dtype=float)
        # A running sum, not a matrix product: trailing zeros (NaN padding) then change no bit, so a
        # row of a batch gives exactly what the same sample alone gives.
        total = F[0] + (np.cumsum(ranked * np.diff(F), axis=1)[:, -1] if m else 0.0)
        with np.errstate(divide="ignore"):
            u = np.where(draws > 0, total / np.maximum(draws, 1), 1.0)
    elif basis == "binomial":
        for n in np.unique(draws):
            rows = draws == n
            if n == 0:
                u[rows] = 1.0
                continue
            p = np.asarray(clopper_pearson_upper(np.arange(n + 1), n, confidence), dtype=float)
            u[rows] = p[0] + np.cumsum(ranked[rows, :n] * np.diff(p), axis=1)[:, -1]
    else:
        raise ValueError(f"basis must be one of {BASES}, got {basis!r}")
    return _out(np.minimum(u, 1.0), one)


# ---------------------------------------------------------------------------
# error count


def count_upper(values, confidence: float):
    """Upper bound counting every draw with a positive taint as a 100% taint (Clopper and Pearson 1934).

    ``U = beta.ppf(confidence, k + 1, n - k)`` with ``k`` the draws with a
    positive taint among ``n``; 1 when ``k = n``. Since each taint is at most
    1, the mean taint is at most the share of monetary units in error, and
    the Clopper-Pearson limit bounds that share exactly: coverage at least
    ``confidence`` for every ``n`` (the Clopper-Pearson limit is conservative for every n).
    """
    x, one = _rows(values)
    draws = np.sum(~np.isnan(x), axis=1)
    k = np.sum(x > 0, axis=1)
    return _out(np.asarray(clopper_pearson_upper(k, draws, confidence), dtype=float).reshape(-1), one)


# ---------------------------------------------------------------------------
# betting


def betting_bets(x: np.ndarray, alpha: float, draws: np.ndarray) -> np.ndarray:
    """Predictable plug-in bets ``lambda_i`` (before truncation) of Waudby-Smith and Ramdas (2024).

    For the ``i``-th draw, using only the draws before it:

    ``mu_i = (1/2 + sum_{j<=i} x_j) / (i + 1)``,
    ``s2_i = (1/4 + sum_{j<=i} (x_j - mu_j)**2) / (i + 1)``,
    ``lambda_i = sqrt(2 ln(1/alpha) / (n * s2_{i-1}))``,

    the predictable plug-in of their section 3 in its fixed-sample-size form
    (``n`` draws planned, one-sided so ``ln(1/alpha)`` in place of
    ``ln(2/alpha)``). The bets do not depend on the candidate mean, which
    keeps the capital increasing in it (see :func:`betting_log_capital`).

    ``x`` is left-justified (draws first, NaN padding last); entries beyond a
    row's draws are returned but never used.
    """
    valid = ~np.isnan(x)
    x0 = np.where(valid, x, 0.0)
    i = np.arange(1, x.shape[1] + 1, dtype=float)
    mu = (0.5 + np.cumsum(x0, axis=1)) / (i + 1.0)
    dev = np.where(valid, (x0 - mu) ** 2, 0.0)
    s2 = (0.25 + np.cumsum(dev, axis=1)) / (i + 1.0)
    s2_before = np.empty_like(s2)
    s2_before[:, 0] = 0.25
    s2_before[:, 1:] = s2[:, :-1]
    n = np.maximum(draws, 1).astype(float)[:, None]
    return np.sqrt(2.0 * math.log(1.0 / alpha) / (n * s2_before))


def betting_log_capital(x: np.ndarray, bets: np.ndarray, m, cap: float) -> np.ndarray:
    """Running logarithm of the capital ``K_t(m)`` betting that the mean taint is below ``m``.

    ``K_t(m) = prod_{i<=t} (1 + lambda_i(m) * (m - x_i))``, with
    ``lambda_i(m) = min(bets_i, cap / (1 - m))`` (Waudby-Smith and Ramdas
    2024, the capital process against the null mean ``m``, truncated so that
    each factor is at least ``1 - cap > 0``). If the true mean is ``m`` or
    more and the draws are independent, ``K_t(m)`` is a nonnegative
    supermartingale starting at 1, so by Ville's inequality it ever reaches
    ``1 / alpha`` with probability at most ``alpha``.

    Each factor increases with ``m`` (the bets do not depend on ``m``; the
    truncation ``cap / (1 - m)`` rises with ``m`` and, where it binds, the
    factor is ``(1 - cap x - (1 - cap) m) / (1 - m)``, whose derivative
    ``cap (1 - x) / (1 - m)**2`` is nonnegative), so the set of rejected
    means is an interval ``[m*, 1]`` and a bracketing search finds ``m*``.

    ``m`` is a scalar or one value per row; NaN draws contribute a factor 1.
    Returns the array of ``log K_t`` (same shape as ``x``).
    """
    m = np.asarray(m, dtype=float)
    mm = m[:, None] if m.ndim == 1 else m
    lam = np.minimum(bets, cap / (1.0 - mm))
    step = np.log1p(lam * (mm - x))
    step[np.isnan(step)] = 0.0
    return np.cumsum(step, axis=1)


def betting_upper(values, confidence: float, *, cap: float = DEFAULT_CAP, rtol: float = _RTOL):
    """Waudby-Smith and Ramdas (2024) upper confidence bound on the mean taint, by betting.

    The bound is the smallest candidate mean ``m`` in ``[0, 1]`` whose
    capital (:func:`betting_log_capital`, with the plug-in bets of
    :func:`betting_bets` at ``alpha = 1 - confidence``) reaches
    ``1 / alpha`` at some draw ``t <= n``; 1 when none does. Since the
    capital rises with ``m``, the rejected candidates form an interval
    ``[m*, 1]``; ``m*`` is found per row by bracketing (``m = 0`` is never
    rejected, the capital there being at most 1) and the Illinois variant of
    false position, vectorised over rows. The value returned is the upper
    end of the final bracket, a rejected candidate, so the bound is never
    below the exact one and exceeds it by at most ``rtol`` times itself.

    Holds in finite samples (Ville's inequality) when the draws are
    independent, identically distributed and in ``[0, 1]``, in the order
    drawn, and their number was fixed before any was seen. (The capital is
    watched at every draw, but the bets are tuned to the number of draws
    ``n``, and in a monetary-unit sample the items examined in full depend
    on ``n`` too: a sample extended because of its results is outside the
    guarantee, as for the other bounds.)

    Parameters
    ----------
    values:
        Overstatement taints in ``[0, 1]``, 1-D or 2-D with NaN padding.
    confidence:
        In ``(0, 1)``.
    cap:
        Truncation of the bets, ``0 < cap < 1``: every capital factor is at
        least ``1 - cap``.
    rtol:
        Relative precision of the bound (default 1e-5).
    """
    x, one = _rows(values)
    return _out(_betting(x, confidence, cap, rtol, None), one)


def _betting(x: np.ndarray, confidence: float, cap: float, rtol: float, ceiling: np.ndarray | None) -> np.ndarray:
    """Betting bounds of the rows of ``x``, or ``min(bound, ceiling)`` where a ceiling is given.

    With a ceiling, a row whose capital does not reach ``1 / alpha`` at the
    ceiling has its bound above it, and is done after one evaluation (the
    union bound needs only the smaller of two bounds). Rows without a
    positive taint are alike for a given number of draws: each such group
    is computed once.
    """
    alpha = 1.0 - confidence
    threshold = math.log(1.0 / alpha)
    R = x.shape[0]
    top = np.ones(R) if ceiling is None else np.minimum(np.asarray(ceiling, dtype=float), 1.0)
    u = top.copy()
    draws = np.sum(~np.isnan(x), axis=1)
    clean = ~np.any(x > 0, axis=1) & (draws > 0)
    for d in np.unique(draws[clean]):
        rows = clean & (draws == d)
        value = _betting_block(np.zeros((1, int(d))), np.array([d]), alpha, threshold, cap, rtol, np.ones(1))
        u[rows] = np.minimum(value[0], top[rows])
    work = np.flatnonzero(~clean & (draws > 0))
    for start in range(0, len(work), _BLOCK):
        rows = work[start : start + _BLOCK]
        block = _left_justified(x[rows])
        d = draws[rows]
        u[rows] = _betting_block(block[:, : int(d.max())], d, alpha, threshold, cap, rtol, top[rows])
    return u


def _betting_block(x: np.ndarray, draws: np.ndarray, alpha: float, threshold: float, cap: float,
                   rtol: float, ceiling: np.ndarray) -> np.ndarray:
    """``min(betting bound, ceiling)`` of each row of one block (see :func:`betting_upper`)."""
    gap = np.isnan(x)
    bets = betting_bets(x, alpha, draws)
    # Padding: a bet of 0 on a value of 0 is a factor of exactly 1, so no NaN test per evaluation.
    bets[gap] = 0.0
    x = np.where(gap, 0.0, x)

    def excess(m: np.ndarray, rows: np.ndarray) -> np.ndarray:
        # max_t log K_t(m) - log(1/alpha): increasing in m; >= 0 means m is rejected.
        whole = len(rows) == len(x)
        xr = x if whole else x[rows]
        step = np.minimum(bets if whole else bets[rows], (cap / (1.0 - m))[:, None])
        step *= m[:, None] - xr
        np.log1p(step, out=step)
        np.cumsum(step, axis=1, out=step)
        return np.maximum(step.max(axis=1), 0.0) - threshold

    B = len(x)
    lo = np.zeros(B)
    g_lo = np.full(B, -threshold)  # at m = 0 every factor is at most 1: never rejected
    hi = np.ones(B)
    g_hi = np.full(B, np.inf)  # m = 1: the bound when nothing below it is rejected
    capped = np.flatnonzero(ceiling < 1.0 - 1e-9)
    if len(capped):
        # Not rejected at the ceiling: the bound lies above it, and the ceiling is the answer.
        c = np.maximum(ceiling[capped], 1e-12)
        g = excess(c, capped)
        hi[capped] = c
        g_hi[capped] = np.where(g >= 0, g, np.inf)
    # First guesses where the bound usually lies (the sample mean plus 1 to 1.4 times
    # log(1/alpha) / n, by measurement; further out only for rows not yet rejected), pulled
    # into (0, 1): they narrow the bracket before false position starts.
    # Running sum (padding-independent, as in stringer_upper): the same start, so the same bits.
    mean = np.where(draws > 0, np.cumsum(x, axis=1)[:, -1] / np.maximum(draws, 1), 0.0)
    step = threshold / np.maximum(draws, 1)
    finished = np.zeros(B, dtype=bool)
    finished[capped] = ~np.isfinite(g_hi[capped])
    for k in (1.0, 1.4, 2.5, 6.0):
        guess = np.clip(mean + k * step + 1e-6, 1e-12, 1.0 - 1e-9)
        inside = np.flatnonzero((guess > lo) & (guess < hi) & (k < 2 or ~np.isfinite(g_hi)) & ~finished)
        g = excess(guess[inside], inside)
        rej = g >= 0
        hi[inside[rej]], g_hi[inside[rej]] = guess[inside[rej]], g[rej]
        lo[inside[~rej]], g_lo[inside[~rej]] = guess[inside[~rej]], g[~rej]
    # Rows with nothing rejected yet: is anything below 1 rejected?  Try 1 - 1e-9.
    open_rows = np.flatnonzero(~np.isfinite(g_hi) & ~finished)
    if len(open_rows):
        top = np.full(len(open_rows), 1.0 - 1e-9)
        g_top = excess(top, open_rows)
        ok = g_top >= 0
        hi[open_rows[ok]] = top[ok]
        g_hi[open_rows[ok]] = g_top[ok]
    active = np.flatnonzero(np.isfinite(g_hi) & (draws > 0) & ~finished)
    side = np.zeros(B, dtype=np.int8)  # Illinois: which end moved last
    while len(active):
        a, b = lo[active], hi[active]
        ga, gb = g_lo[active], g_hi[active]
        # False position, kept strictly inside the bracket.
        m = b - gb * (b - a) / (gb - ga)
        m = np.where(np.isfinite(m), m, 0.5 * (a + b))
        m = np.clip(m, a + 0.01 * (b - a), b - 0.01 * (b - a))
        g = excess(m, active)
        rej = g >= 0
        s = side[active]
        # Illinois: when the same end stays twice in a row, halve its value (faster convergence).
        new_ga = np.where(rej & (s == 1), ga * 0.5, ga)
        new_gb = np.where(~rej & (s == -1), gb * 0.5, gb)
        hi[active] = np.where(rej, m, b)
        g_hi[active] = np.where(rej, g, new_gb)
        lo[active] = np.where(rej, a, m)
        g_lo[active] = np.where(rej, new_ga, g)
        side[active] = np.where(rej, 1, -1)
        done = (hi[active] - lo[active]) <= rtol * hi[active]
        active = active[~done]
    hi[draws == 0] = 1.0
    return np.minimum(hi, ceiling)


def count_or_betting_upper(
    values, confidence: float, *, share: float = DEFAULT_SHARE, cap: float = DEFAULT_CAP
):
    """The smaller of the error-count bound at risk ``share * alpha`` and betting at ``(1 - share) * alpha``.

    By the union (Bonferroni) bound, the probability that either bound falls
    below the true mean is at most ``alpha``, so the smaller one is an upper
    bound at ``confidence = 1 - alpha``, holding in finite samples under both
    bounds' assumptions. The error count is near the best possible where
    errors are few and large; betting where many draws carry small taints.
    """
    x, one = _rows(values)
    alpha = 1.0 - confidence
    a = np.atleast_1d(count_upper(x, 1.0 - share * alpha))
    return _out(_betting(x, 1.0 - (1.0 - share) * alpha, cap, _RTOL, a), one)


# ---------------------------------------------------------------------------
# dispatch


def mean_taint_upper(values, confidence: float, method: str, *, basis: str = "poisson",
                     share: float = DEFAULT_SHARE, cap: float = DEFAULT_CAP):
    """Upper bound on the mean taint per monetary unit by ``method`` (one of :data:`METHODS`).

    ``values`` are taints in ``[0, 1]`` (already ``max(t, 0)`` or
    ``max(-t, 0)``), 1-D or 2-D with NaN padding; see the module docstring.
    """
    if method == "stringer":
        return stringer_upper(values, confidence, basis)
    if method == "count":
        return count_upper(values, confidence)
    if method == "betting":
        return betting_upper(values, confidence, cap=cap)
    if method == "count_or_betting":
        return count_or_betting_upper(values, confidence, share=share, cap=cap)
    raise ValueError(f"method must be one of {METHODS}, got {method!r}")


def zero_error_bound(book_total: float, n: int, confidence: float, method: str = "stringer", **options) -> float:
    """The upper bound on overstatement a monetary-unit sample of ``n`` draws with no error would give.

    ``book_total * U``, ``U`` the method's bound for ``n`` draws all with
    taint 0, treating every draw as a draw of the whole book total (the
    usual "basic precision": for Stringer ``book_total * F(0) / n``, e.g.
    ``book_total * 3.00 / n`` at 95%). Items examined in full would be
    added at their exact misstatement instead, which with none found is 0.
    """
    if n <= 0:
        return float(book_total)
    return float(book_total) * float(mean_taint_upper(np.zeros(int(n)), confidence, method, **options))
