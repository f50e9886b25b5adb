r"""Stratum boundary rules for book values (pure numpy).

Convention. A rule returns the interior boundaries ``b_1 < ... < b_{L-1}``
of ``L`` strata; stratum ``h`` (1-based) holds the values ``x`` with
``b_{h-1} <= x < b_h``, the first stratum everything below ``b_1`` and the
last everything from ``b_{L-1}`` up. A value equal to a boundary belongs to
the stratum above it. :func:`assign` applies the convention. The top
(take-all) stratum, the credits and the zeros are decided by the caller
before a rule sees the values; a rule only divides what it is given.

A rule may return fewer boundaries than asked for when the values do not
allow ``L`` non-empty strata (too few distinct values, or one class holding
most of the items); the caller decides what to do about it. The caller has
checked the values (finite, non-empty, positive where a rule needs it).

References
----------
Cochran, W. G. (1977). *Sampling Techniques*, 3rd ed., Wiley.

Dalenius, T. and Hodges, J. L. (1959). Minimum variance stratification.
*Journal of the American Statistical Association* 54, 88-101.

Gunning, P. and Horgan, J. M. (2004). A new algorithm for the construction
of stratum boundaries in skewed populations. *Survey Methodology* 30(2),
159-166.

Lavallee, P. and Hidiroglou, M. A. (1988). On the stratification of skewed
populations. *Survey Methodology* 14(1), 33-43.

Kozak, M. (2004). Optimal stratification using random search method in
agricultural surveys. *Statistics in Transition* 6(5), 797-806 (journal,
volume and pages cited from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from auditmean.core.moments import (
    exact_group_sums,
    group_counts,
    group_means,
    skewness_of_spread,
)
from auditmean.core.sizing import neyman_size

__all__ = [
    "DEFAULT_CLASSES",
    "assign",
    "cumulative_sqrt_frequency",
    "cumulative_sqrt_from_histogram",
    "geometric",
    "equal_value",
    "StratumStatistics",
    "stratum_statistics",
    "OptimalBoundaries",
    "optimal_boundaries",
]

#: Number of equal-width classes of the cumulative square-root-of-frequency rule.
DEFAULT_CLASSES = 100


def assign(values: np.ndarray, boundaries: np.ndarray) -> np.ndarray:
    """0-based stratum of each value under the convention ``b_{h-1} <= x < b_h`` (int64)."""
    return np.searchsorted(np.asarray(boundaries, dtype=float), values, side="right").astype(np.int64)


def cumulative_sqrt_frequency(
    values: np.ndarray, n_strata: int, n_classes: int = DEFAULT_CLASSES
) -> np.ndarray:
    r"""Boundaries by the cumulative square-root-of-frequency rule.

    Parameters
    ----------
    values:
        The values to divide (1-D float array).
    n_strata:
        Number of strata ``L`` wanted.
    n_classes:
        Number of equal-width classes between the smallest and the largest
        value (default 100).

    Returns
    -------
    numpy.ndarray
        Up to ``L - 1`` increasing boundaries, each a class edge.

    Notes
    -----
    Dalenius and Hodges (1959); Cochran (1977, section 5A.7). The range of
    the values is cut into ``n_classes`` classes of equal width, as Cochran
    describes (we do not use a log scale); class ``j`` holds ``f_j`` values
    (upper edge excluded, last class closed, as :func:`numpy.histogram`).
    The running sum ``C_j = sum_{i <= j} sqrt(f_i)`` is cut at the ``L - 1``
    points ``k C / L`` (``C`` the grand sum); each cut is placed at the upper
    edge of the class whose ``C_j`` is nearest to ``k C / L`` (on a tie the
    lower class). Only edges just above a non-empty class are candidates:
    among edges with the same ``C_j`` that one is the first, and every
    candidate leaves values on both sides. Cuts that fall on the same edge
    are merged, so fewer than ``L - 1`` boundaries come back when the
    classes do not allow ``L`` strata.
    """
    x = np.asarray(values, dtype=float)
    if n_strata < 2 or x.size == 0:
        return np.empty(0)
    lo, hi = float(x.min()), float(x.max())
    if lo == hi:
        return np.empty(0)
    freq, edges = np.histogram(x, bins=int(n_classes), range=(lo, hi))
    return cumulative_sqrt_from_histogram(freq, edges, n_strata)


def cumulative_sqrt_from_histogram(freq: np.ndarray, edges: np.ndarray, n_strata: int) -> np.ndarray:
    """The cumulative square-root-of-frequency cuts from the class counts ``freq`` and ``edges``.

    The second half of :func:`cumulative_sqrt_frequency` (same rule, same
    source), for a caller that counted the classes itself, for example in a
    database query over a file too large to hold in memory. ``edges`` has
    one more entry than ``freq``; class ``j`` holds the values ``x`` with
    ``edges[j] <= x < edges[j + 1]`` (the last class closed).
    """
    freq = np.asarray(freq)
    edges = np.asarray(edges, dtype=float)
    if n_strata < 2 or freq.size == 0:
        return np.empty(0)
    cum = np.cumsum(np.sqrt(freq))
    cand = np.flatnonzero(freq[:-1] > 0)  # upper edge of class j is edges[j + 1]
    if cand.size == 0:
        return np.empty(0)
    targets = cum[-1] * np.arange(1, n_strata) / n_strata
    nearest = np.abs(cum[cand][None, :] - targets[:, None]).argmin(axis=1)
    return np.unique(edges[cand[nearest] + 1])


def geometric(values: np.ndarray, n_strata: int) -> np.ndarray:
    r"""Boundaries of geometric stratification.

    Notes
    -----
    Gunning and Horgan (2004): with ``a`` the smallest and ``b`` the
    largest value (both positive) and ``r = (b / a)^{1/L}``, the boundaries
    are ``b_h = a r^h`` for ``h = 1, ..., L - 1``. The values must be
    positive; the caller keeps zeros and credits out of these strata.
    """
    x = np.asarray(values, dtype=float)
    if n_strata < 2 or x.size == 0:
        return np.empty(0)
    a, b = float(x.min()), float(x.max())
    if a == b:
        return np.empty(0)
    r = (b / a) ** (1.0 / n_strata)
    return a * r ** np.arange(1, n_strata, dtype=float)


def equal_value(values: np.ndarray, n_strata: int) -> np.ndarray:
    r"""Boundaries giving each stratum about the same total book value.

    Notes
    -----
    Common practice in audit sampling, no single published source. The
    values are sorted and summed; the ``k``-th cut is placed before or after
    the item at which the running total first reaches ``k T / L``, whichever
    leaves the running total nearer to ``k T / L`` (before on a tie). The
    boundary is the value of the first item above the cut; items equal to
    it go up with it (the boundary convention). Values must not be negative.
    """
    x = np.sort(np.asarray(values, dtype=float))
    n = x.size
    if n_strata < 2 or n < 2:
        return np.empty(0)
    cum = np.cumsum(x)
    total = cum[-1]
    if total <= 0:
        return np.empty(0)
    targets = total * np.arange(1, n_strata) / n_strata
    i = np.minimum(np.searchsorted(cum, targets, side="left"), n - 1)
    before = np.where(i > 0, cum[np.maximum(i - 1, 0)], 0.0)
    after = cum[i]
    cut = np.where(after - targets < targets - before, i + 1, i)
    cut = np.clip(cut, 1, n - 1)
    b = np.unique(x[cut])
    return b[b > x[0]]


@dataclass(frozen=True)
class StratumStatistics:
    """Per-stratum statistics of the book values (arrays indexed by stratum code)."""

    count: np.ndarray
    total: np.ndarray
    mean: np.ndarray
    std_dev: np.ndarray
    skewness: np.ndarray
    minimum: np.ndarray
    maximum: np.ndarray


def stratum_statistics(values: np.ndarray, codes: np.ndarray, n_strata: int) -> StratumStatistics:
    r"""Count, total (correctly rounded), mean, standard deviation, skewness, min and max per stratum.

    Notes
    -----
    The standard deviation uses the divisor ``N_h - 1`` (the ``S^2`` of a
    finite population, Cochran 1977, section 2.4 -- section from memory),
    computed in two passes;
    NaN for a stratum of one item. The skewness is the adjusted
    Fisher-Pearson coefficient ``G1`` (Joanes and Gill 1998, The
    Statistician 47, 183-189; as ``scipy.stats.skew(bias=False)``), NaN
    below three items, 0 when all values are equal. Totals are correctly
    rounded sums (:func:`auditmean.core.moments.exact_group_sums`, the
    numbers :func:`math.fsum` gives), so that a stratum's book total matches
    the sum of its items to the cent.
    """
    x = np.asarray(values, dtype=float)
    codes = np.asarray(codes, dtype=np.int64)
    count = group_counts(codes, n_strata)
    mean = group_means(codes, n_strata, x, count)
    d = x - mean[codes]
    d2 = d * d
    ss = np.bincount(codes, weights=d2, minlength=n_strata)
    with np.errstate(invalid="ignore", divide="ignore"):
        std = np.where(count > 1, np.sqrt(ss / np.maximum(count - 1, 1)), np.nan)
    d2 *= d
    # the G1 of sample_skewness, from the same centred sums
    skew = skewness_of_spread(
        count,
        ss,
        np.bincount(codes, weights=d2, minlength=n_strata),
        np.bincount(codes, weights=x * x, minlength=n_strata),
    )
    total = exact_group_sums(codes, n_strata, x)
    mins = np.full(n_strata, np.inf)
    maxs = np.full(n_strata, -np.inf)
    np.minimum.at(mins, codes, x)
    np.maximum.at(maxs, codes, x)
    empty = count == 0
    mins[empty] = np.nan
    maxs[empty] = np.nan
    return StratumStatistics(count, total, mean, std, skew, mins, maxs)


@dataclass(frozen=True)
class OptimalBoundaries:
    """The outcome of :func:`optimal_boundaries`.

    Attributes
    ----------
    boundaries:
        Interior boundaries of the strata below the top stratum.
    top_cutoff:
        Smallest value of the top (take-all) stratum chosen by the search,
        ``inf`` when it chose none or the top was not searched.
    size:
        Total sample size (not rounded) of the design: items of the top
        stratum plus the Neyman size of the others for the target.
    start_size:
        The same for the starting boundaries.
    route:
        ``"start"`` (nothing did better), ``"iteration"`` or ``"random search"``.
    iterations:
        Steps of the iteration; ``search_steps`` steps tried by the random search.
    converged:
        Whether the iteration reached a fixed point.
    """

    boundaries: np.ndarray
    top_cutoff: float
    size: float
    start_size: float
    route: str
    iterations: int
    search_steps: int
    converged: bool


class _Design:
    """Prefix sums of the sorted values, for stratum statistics by position in O(1)."""

    def __init__(self, xs: np.ndarray, variance: float, other_n: np.ndarray, other_s: np.ndarray, min_count: int):
        self.xs = xs
        self.n = xs.size
        shift = xs[self.n // 2]
        d = xs - shift
        self.shift = shift
        self.p1 = np.concatenate([[0.0], np.cumsum(d)])
        self.p2 = np.concatenate([[0.0], np.cumsum(d * d)])
        self.variance = variance
        self.other_n = other_n
        self.other_s = other_s
        self.min_count = min_count

    def moments(self, cuts: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Counts, means and sums of squared deviations of the strata between positions ``cuts``."""
        counts = np.diff(cuts).astype(float)
        s1 = np.diff(self.p1[cuts])
        s2 = np.diff(self.p2[cuts])
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = s1 / counts
            ss = np.maximum(s2 - s1 * mean, 0.0)
        return counts, mean + self.shift, ss

    def _total(self, counts: np.ndarray, s: np.ndarray, top: int) -> float:
        # A stratum of one item cannot be estimated from a sample: it counts
        # as examined in full, like the top stratum.
        single = counts == 1
        keep = ~single
        return (self.n - top) + float(np.count_nonzero(single)) + neyman_size(
            np.concatenate([counts[keep].astype(float), self.other_n]),
            np.concatenate([s[keep], self.other_s]),
            self.variance,
        )

    def size(self, pos: np.ndarray, top: int, check: bool = True) -> float:
        """Sample size of a design; ``inf`` when ``check`` and a stratum has fewer than ``min_count`` values."""
        cuts = np.concatenate([[0], pos, [top]])
        counts = np.diff(cuts)
        if np.any(counts < (self.min_count if check else 1)):
            return math.inf
        c, _, ss = self.moments(cuts)
        with np.errstate(invalid="ignore", divide="ignore"):
            s = np.sqrt(ss / np.maximum(c - 1.0, 1.0))
        return self._total(counts, s, top)

    def exact_size(self, pos: np.ndarray, top: int, check: bool = True) -> float:
        """As :meth:`size` with two-pass statistics on the stratum slices (no prefix-sum rounding)."""
        cuts = np.concatenate([[0], pos, [top]])
        counts = np.diff(cuts)
        if np.any(counts < (self.min_count if check else 1)):
            return math.inf
        s = np.array(
            [np.std(self.xs[a:b], ddof=1) if b - a > 1 else 0.0 for a, b in zip(cuts[:-1], cuts[1:])]
        )
        return self._total(counts, s, top)


def _neyman_level(counts: np.ndarray, sigma: np.ndarray, variance: float) -> tuple[float, np.ndarray]:
    """``k`` with Neyman fractions ``k sigma_h`` and the strata examined in full (Cochran 1977, section 5.8)."""
    full = np.zeros(counts.shape, dtype=bool)
    while True:
        free = ~full
        t = float(np.sum(counts[free] * sigma[free]))
        q = float(np.sum(counts[free] * sigma[free] ** 2))
        k = t / (variance + q) if t > 0 else math.inf
        over = free & (k * sigma >= 1.0)
        if not over.any():
            return k, full
        full |= over


def _interior_root(mu1, s1, mu2, s2, k):
    """Root in ``[mu1, mu2]`` of ``(1/s1 - k)(y-mu1)^2 - (1/s2 - k)(y-mu2)^2 + s1 - s2``, or NaN."""
    a, b = 1.0 / s1 - k, 1.0 / s2 - k
    c2 = a - b
    c1 = -2.0 * (a * mu1 - b * mu2)
    c0 = a * mu1 * mu1 - b * mu2 * mu2 + s1 - s2
    if abs(c2) <= 1e-15 * (abs(a) + abs(b)):
        roots = np.array([-c0 / c1]) if c1 != 0 else np.array([])
    else:
        disc = c1 * c1 - 4.0 * c2 * c0
        if disc < 0:
            return math.nan
        sq = math.sqrt(disc)
        # numerically stable pair of roots
        q = -0.5 * (c1 + math.copysign(sq, c1))
        roots = np.array([q / c2, c0 / q]) if q != 0 else np.array([-c1 / (2 * c2)])
    inside = roots[(roots >= mu1) & (roots <= mu2)]
    if inside.size == 0:
        return math.nan
    mid = 0.5 * (mu1 + mu2)
    return float(inside[np.argmin(np.abs(inside - mid))])


def _iterate(design: _Design, pos, top, search_top, o_sigma, max_iterations):
    """The Lavallee-Hidiroglou-type iteration from one start (see :func:`optimal_boundaries`).

    Returns ``(best_pos, best_top, best_size, converged, steps, last_pos)``.
    """
    xs, variance = design.xs, design.variance
    other_n = design.other_n
    n_strata = pos.size + 1
    best_pos, best_top, best_size = pos, top, design.size(pos, top)
    converged = False
    steps = 0
    for steps in range(1, max_iterations + 1):  # noqa: B007 - the count is reported
        cuts = np.concatenate([[0], pos, [top]])
        c, mu, ss = design.moments(cuts)
        sigma = np.sqrt(ss / c)
        if np.any(sigma <= 0):
            break
        k, full = _neyman_level(np.concatenate([c, other_n]), np.concatenate([sigma, o_sigma]), variance)
        full = full[: c.size]
        ys = np.empty(n_strata - 1)
        for h in range(n_strata - 1):
            if not full[h] and not full[h + 1]:
                ys[h] = _interior_root(mu[h], sigma[h], mu[h + 1], sigma[h + 1], k)
            elif not full[h]:  # the stratum above is examined in full
                ys[h] = mu[h] + math.sqrt(sigma[h] / k)
            elif not full[h + 1]:  # the stratum below is examined in full
                ys[h] = mu[h + 1] - math.sqrt(sigma[h + 1] / k)
            else:
                ys[h] = xs[pos[h]]
        if np.any(np.isnan(ys)):
            break
        new_pos = np.searchsorted(xs, ys, side="left").astype(np.int64)
        new_top = top
        if search_top and not full[-1]:
            y_top = mu[-1] + math.sqrt(sigma[-1] / k)
            new_top = int(np.searchsorted(xs, y_top, side="left"))
        if np.any(np.diff(np.concatenate([[0], new_pos, [new_top]])) < design.min_count):
            break
        s = design.size(new_pos, new_top)
        if s < best_size:
            best_pos, best_top, best_size = new_pos, new_top, s
        if np.array_equal(new_pos, pos) and new_top == top:
            converged = True
            break
        pos, top = new_pos, new_top
    return best_pos, best_top, best_size, converged, steps, pos


def optimal_boundaries(
    values: np.ndarray,
    variance: float,
    *,
    start: np.ndarray,
    search_top: bool,
    other_counts: np.ndarray | None = None,
    other_std_devs: np.ndarray | None = None,
    min_count: int = 2,
    max_iterations: int = 100,
    search_steps: int = 20000,
    patience: int = 1500,
    grid_size: int = 4000,
    tail: int = 2000,
    seed: int = 0,
    n_classes: int = DEFAULT_CLASSES,
    polish: bool = True,
) -> OptimalBoundaries:
    r"""Boundaries that minimise the total sample size for a target variance of the estimated total.

    Parameters
    ----------
    values:
        The values to stratify (the caller has taken out any fixed top
        stratum, credits and zeros that are kept apart).
    variance:
        Target variance ``V`` of the estimated total.
    start:
        Starting interior boundaries, increasing, each stratum non-empty;
        normally the cumulative square-root rule's.
        ``L = len(start) + 1`` strata are formed from ``values`` (not
        counting a top stratum the search may add). The result is never
        worse than the start.
    search_top:
        Whether the search may also set a top stratum examined in full (its
        items count in full in the size).
    other_counts, other_std_devs:
        Strata outside ``values`` that share the Neyman allocation (credits,
        zeros); they do not move but enter the sums.
    min_count:
        Fewest values a stratum of a design other than the start may hold
        (2, so that its standard deviation is defined).
    max_iterations, search_steps, patience, grid_size, tail, seed:
        Limits of the iteration and of the random search (see Notes).
    n_classes:
        Classes of the cumulative square-root rule for the second start
        (see Notes).
    polish:
        Run the random search after the iteration even when the iteration
        converged and improved on the start (default). The iteration's
        conditions are first-order and large-stratum approximations, and it
        can settle on a local minimum; on small populations checked by
        exhaustive search, the search from the iteration's result found the
        minimum where the iteration alone stopped several per cent above it.
        With ``polish=False`` the search is the fallback only.

    Notes
    -----
    Objective. For given boundaries the total sample size is the number of
    items in the top stratum plus the Neyman size of the other strata for
    the target variance, with strata whose share exceeds their count
    examined in full (:func:`auditmean.core.sizing.neyman_size`; Cochran
    1977, sections 5.8-5.9). This is the criterion of Lavallee and
    Hidiroglou (1988). A stratum of a single value (possible in the start)
    counts as one item examined in full.

    Iteration (in the manner of Lavallee and Hidiroglou 1988). With the
    current strata's counts, means ``mu_h`` and standard deviations
    ``sigma_h`` (divisor ``N_h``), ``T = sum N_h sigma_h``,
    ``Q = sum N_h sigma_h^2`` and ``k = T / (V + Q)`` (so that the Neyman
    sampling fraction of stratum ``h`` is ``k sigma_h``), moving a value
    ``y`` across the boundary between strata ``h`` and ``h + 1`` leaves the
    size unchanged to first order when

    .. math::  (1/\sigma_h - k)(y - \mu_h)^2 - (1/\sigma_{h+1} - k)(y - \mu_{h+1})^2
               + \sigma_h - \sigma_{h+1} = 0,

    and moving it from the top stratum (or from any stratum that Neyman
    allocation examines in full, Cochran 1977, section 5.8) into the sampled
    stratum ``h`` below it when ``y = mu_h + sqrt(sigma_h / k)`` (above it:
    ``mu_h - sqrt(sigma_h / k)``), with ``T``, ``Q`` and ``k`` taken over
    the sampled strata only. (These first-order conditions are
    derived here from ``n = T^2 / (V + Q)`` with the large-stratum
    approximation ``d(N sigma) = (sigma^2 + (y - mu)^2) / (2 sigma)``; they
    are the conditions the Lavallee-Hidiroglou iteration solves, compare
    Rivest 2002, Survey Methodology 28(2), 191-198 -- cited from memory.)
    The iteration runs from ``start`` and, when the search may set a top
    stratum, also from the cumulative square-root rule's boundaries for
    ``L + 1`` strata with the last of them as the top cutoff (or, when the
    rule cannot form ``L + 1`` strata, the start with its last stratum cut
    in two by the rule; from a start
    without a top, a largest stratum that Neyman allocation examines in
    full would otherwise never give way to one). Each step solves the
    conditions for new boundaries (the root between the two means), moves each boundary to the first value at or above it, and
    recomputes the statistics, for at most ``max_iterations`` steps or until
    the boundaries stop moving. A boundary between two strata examined in
    full stays where it is. The iteration stops early (not converged) when
    a stratum has no spread, when a root is missing, or when a stratum
    would hold fewer than ``min_count`` values.

    Random search (Kozak 2004). Used after the iteration (``polish``), and
    in any case when the iteration does not converge or does not improve on
    the start. Starting from the best design so far,
    one boundary chosen at random moves a random number of grid positions
    (geometric, mostly small steps) up or down; the move is kept when it
    lowers the size. The search stops after ``patience`` moves in a row
    without improvement or ``search_steps`` moves in all. The grid is every
    distinct value, or for many distinct values ``grid_size`` of them spread
    evenly by rank plus the ``tail`` largest ones (where the top cutoff
    matters most) and the start and iteration boundaries. ``seed`` fixes the
    random numbers, so a result can be reproduced.

    Whatever the route, the sizes of the best design and of the start are
    recomputed with two-pass statistics, and the start is returned unless
    the best design is smaller by more than a relative ``1e-9``.
    """
    xs = np.sort(np.asarray(values, dtype=float))
    n = xs.size
    other_n = np.asarray([] if other_counts is None else other_counts, dtype=float)
    other_s = np.asarray([] if other_std_devs is None else other_std_devs, dtype=float)
    design = _Design(xs, float(variance), other_n, other_s, int(min_count))
    n_strata = len(start) + 1
    pos0 = np.searchsorted(xs, np.asarray(start, dtype=float), side="left").astype(np.int64)
    top0 = n
    size0 = design.size(pos0, top0, check=False)
    best_pos, best_top, best_size = pos0, top0, size0
    route = "start"

    # --- iteration --------------------------------------------------------
    o_sigma = other_s * np.sqrt(np.maximum(other_n - 1.0, 0.0) / np.maximum(other_n, 1.0))
    starts = [(pos0, top0)]
    if search_top:
        # A second start with a top stratum: the rule's boundaries for one
        # stratum more, the last of them as the top cutoff.
        more = cumulative_sqrt_frequency(xs, n_strata + 1, n_classes)
        if more.size != n_strata:  # the rule cannot give one more: halve the last stratum by it
            last = xs[pos0[-1]:] if pos0.size else xs
            more = np.concatenate([np.asarray(start, dtype=float), cumulative_sqrt_frequency(last, 2, n_classes)])
        if more.size == n_strata:
            p_more = np.searchsorted(xs, more, side="left").astype(np.int64)
            if np.all(np.diff(np.concatenate([[0], p_more, [n]])) >= min_count):
                starts.append((p_more[:-1], int(p_more[-1])))
    converged = False
    iterations = 0
    last_pos = pos0
    for p_start, t_start in starts:
        out = _iterate(design, p_start, t_start, search_top, o_sigma, max_iterations)
        iterations += out[4]
        converged = converged or out[3]
        if out[2] < best_size:
            best_pos, best_top, best_size, route = out[0], out[1], out[2], "iteration"
            last_pos = out[5]

    # --- random search ----------------------------------------------------
    steps_tried = 0
    if polish or not converged or best_size >= size0:
        change = np.flatnonzero(xs[1:] > xs[:-1]) + 1  # positions where a new value starts
        if change.size > grid_size + tail:
            spread = change[np.unique(np.linspace(0, change.size - 1, grid_size).round().astype(np.int64))]
            change = np.unique(np.concatenate([spread, change[-tail:], pos0, best_pos, last_pos]))
            change = change[(change > 0) & (change < n)]
        grid = np.concatenate([change, [n]])  # the last entry means "no top stratum"
        g_idx = np.searchsorted(grid, best_pos)
        g_top = int(np.searchsorted(grid, best_top))
        m = grid.size
        movable = n_strata - 1 + (1 if search_top else 0)
        if movable > 0 and m > 1:
            rng = np.random.default_rng(seed)
            max_step = max(3, m // 50)
            which = rng.integers(0, movable, size=search_steps)
            mags = np.minimum(rng.geometric(min(1.0, 3.0 / max_step), size=search_steps), m)
            signs = rng.choice(np.array([-1, 1]), size=search_steps)
            current = best_size
            still = 0
            for step in range(search_steps):
                steps_tried = step + 1
                gi, gt = g_idx.copy(), g_top
                delta = int(signs[step] * mags[step])
                j = int(which[step])
                if j < n_strata - 1:
                    gi[j] += delta
                    lower = gi[j - 1] if j > 0 else -1
                    upper = gi[j + 1] if j + 1 < gi.size else gt
                    if not (lower < gi[j] < upper) or gi[j] < 0:
                        still += 1
                        if still >= patience:
                            break
                        continue
                else:
                    gt += delta
                    lower = gi[-1] if gi.size else -1
                    if not (lower < gt <= m - 1):
                        still += 1
                        if still >= patience:
                            break
                        continue
                s = design.size(grid[gi], int(grid[gt]))
                if s < current:
                    g_idx, g_top, current, still = gi, gt, s, 0
                else:
                    still += 1
                    if still >= patience:
                        break
            if current < best_size:
                best_pos, best_top, best_size, route = grid[g_idx], int(grid[g_top]), current, "random search"

    # --- keep the best, checked with two-pass statistics --------------------
    exact_start = design.exact_size(pos0, top0, check=False)
    exact_best = design.exact_size(best_pos, best_top)
    if not exact_best < exact_start * (1.0 - 1e-9):
        best_pos, best_top, exact_best, route = pos0, top0, exact_start, "start"
    cutoff = math.inf if best_top >= n else float(xs[best_top])
    # The start comes back exactly as given (same strata as xs[pos0], but the
    # rule's own boundary values, e.g. class edges).
    chosen = np.asarray(start, dtype=float) if route == "start" else xs[best_pos].astype(float)
    return OptimalBoundaries(
        boundaries=chosen,
        top_cutoff=cutoff,
        size=float(exact_best),
        start_size=float(exact_start),
        route=route,
        iterations=int(iterations),
        search_steps=int(steps_tried),
        converged=converged,
    )
