r"""Models of misstatement: which items are misstated, and by how much (pure numpy).

A misstated item's *taint* is its misstatement as a share of its book value,
so that

.. math::  \text{audited} = \text{book} \cdot (1 - \tau) = \text{book} - \text{book} \cdot \tau .

A positive taint is an overstatement (``tau = 1``: the item is wholly
fictitious), a negative one an understatement. Items that are not misstated
have ``tau = 0`` and an audited value exactly equal to their book value.
auditmean computes the audited value as ``book - book * tau``, which leaves
it bit for bit equal to the book value when ``tau = 0``.

The model, in the trade's terms:

* **Error rate** ``p_h``: each item of stratum ``h`` is misstated
  independently with probability ``p_h`` (one rate for the whole population
  is ``p_h = p``).
* **Taint distribution** of a misstated item (:data:`TAINT_KINDS`), as the
  size ``|tau|``:

  - ``"fixed"``: always ``value``;
  - ``"uniform"``: uniform between ``low`` and ``high``;
  - ``"beta"``: a beta distribution with mean ``mu`` and concentration
    ``kappa``, that is shape parameters ``a = mu kappa`` and
    ``b = (1 - mu) kappa`` (the mean-precision form of Ferrari and
    Cribari-Neto 2004, Journal of Applied Statistics 31, 799-815, section 2,
    where the variance is ``mu (1 - mu) / (1 + kappa)``); ``kappa = 2``
    with ``mu = 0.5`` is the uniform distribution on (0, 1), larger values
    gather the taints around the mean;
  - ``"observed"``: drawn with replacement from a list of taints seen
    before (for example at the prior year's audit), with their signs.

* **Understatements**: each misstated item drawn from the first three kinds
  is an understatement (its taint negated) with probability
  ``understatement_share``. Observed taints keep the signs of the list.
* **A few large errors**: the ``k`` items with the largest book values (in
  absolute value; equal values in the order of the population) follow their
  own rule instead of the one above: each is misstated with probability
  ``q`` and then carries the taint ``t``. This is our own simple device for
  "a few large misstatements concentrated in the top items", the situation
  in which Neter and Loebbecke (1975) found the normal intervals of
  difference and ratio estimation to cover the truth far less often than
  stated; it has no published source.

The model's expected misstatement (:func:`expected_misstatement`) is
``sum_i book_i p_h(i) E[tau]`` over the ordinary items plus
``q t sum_j book_j`` over the large ones, with ``E[tau]`` from
:func:`mean_taint`.

References
----------
Ferrari, S. and Cribari-Neto, F. (2004). Beta regression for modelling rates
and proportions. *Journal of Applied Statistics* 31(7), 799-815.

Neter, J. and Loebbecke, J. K. (1975). *Behavior of Major Statistical
Estimators in Sampling Accounting Populations: An Empirical Study*. AICPA,
New York.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "TAINT_KINDS",
    "beta_shapes",
    "mean_taint",
    "draw_taints",
    "largest_items",
    "draw_population_taints",
    "expected_misstatement",
    "error_positions",
]

TAINT_KINDS = ("fixed", "uniform", "beta", "observed")


def beta_shapes(mean: float, concentration: float) -> tuple[float, float]:
    """Shape parameters ``(a, b) = (mu kappa, (1 - mu) kappa)`` of a beta with mean ``mu``.

    The mean-precision form of Ferrari and Cribari-Neto (2004, section 2):
    mean ``a / (a + b) = mu`` and variance ``mu (1 - mu) / (1 + kappa)``.
    """
    return mean * concentration, (1.0 - mean) * concentration


def mean_taint(kind: str, params: np.ndarray, understatement_share: float) -> float:
    """Expected taint of a misstated item, signs included.

    ``(1 - 2 u) E|tau|`` with ``E|tau|`` the fixed value, ``(low + high) / 2``
    or the beta mean; the mean of the list for observed taints (whose signs
    are their own; ``u`` is not used). Arithmetic on the definitions above.
    """
    p = np.asarray(params, dtype=float)
    if kind == "observed":
        return float(p.mean())
    if kind == "fixed":
        size = p[0]
    elif kind == "uniform":
        size = 0.5 * (p[0] + p[1])
    elif kind == "beta":
        size = p[0]
    else:
        raise ValueError(f"unknown taint kind {kind!r}")
    return float((1.0 - 2.0 * understatement_share) * size)


def draw_taints(
    rng: np.random.Generator,
    kind: str,
    params: np.ndarray,
    understatement_share: float,
    size: int,
) -> np.ndarray:
    """Signed taints of ``size`` misstated items.

    Parameters
    ----------
    rng:
        The generator to draw from.
    kind:
        One of :data:`TAINT_KINDS`.
    params:
        ``(value,)`` for ``"fixed"``, ``(low, high)`` for ``"uniform"``,
        ``(mean, concentration)`` for ``"beta"`` and the list of taints for
        ``"observed"``.
    understatement_share:
        Probability that a taint of the first three kinds is negated.
    size:
        Number of taints.
    """
    p = np.asarray(params, dtype=float)
    if size == 0:
        return np.zeros(0)
    if kind == "observed":
        return p[rng.integers(0, p.shape[0], size=size)]
    if kind == "fixed":
        tau = np.full(size, p[0])
    elif kind == "uniform":
        tau = p[0] + (p[1] - p[0]) * rng.random(size)
    elif kind == "beta":
        a, b = beta_shapes(p[0], p[1])
        tau = rng.beta(a, b, size=size)
    else:
        raise ValueError(f"unknown taint kind {kind!r}")
    if understatement_share > 0:
        tau = np.where(rng.random(size) < understatement_share, -tau, tau)
    return tau


def largest_items(book: np.ndarray, k: int) -> np.ndarray:
    """Positions of the ``k`` largest book values in absolute value, largest first.

    Equal values keep the order of the population (a stable sort).
    """
    if k <= 0:
        return np.zeros(0, dtype=np.intp)
    order = np.argsort(-np.abs(book), kind="stable")
    return order[:k].astype(np.intp)


def draw_population_taints(
    rng: np.random.Generator,
    item_rates: np.ndarray,
    kind: str,
    params: np.ndarray,
    understatement_share: float,
    large: np.ndarray,
    large_taint: float,
    large_probability: float,
) -> np.ndarray:
    """One population's taints: one signed taint per item, zero where not misstated.

    Parameters
    ----------
    rng:
        The generator.
    item_rates:
        Error rate of each item (its stratum's rate), length ``N``.
    kind, params, understatement_share:
        The taint distribution (see :func:`draw_taints`).
    large:
        Positions of the items that follow the large-error rule (see
        :func:`largest_items`); they are not subject to the ordinary rate.
    large_taint, large_probability:
        Taint ``t`` of a misstated large item and its probability ``q``.

    Notes
    -----
    The draws, in order: one uniform number per item (misstated when below
    its rate), the taints of the misstated ordinary items in population
    order, then one uniform number per large item.
    """
    n = item_rates.shape[0]
    misstated = rng.random(n) < item_rates
    if large.size:
        misstated[large] = False
    tau = np.zeros(n)
    where = np.flatnonzero(misstated)
    tau[where] = draw_taints(rng, kind, params, understatement_share, where.size)
    if large.size:
        hit = rng.random(large.size) < large_probability
        tau[large[hit]] = large_taint
    return tau


def expected_misstatement(
    book: np.ndarray,
    item_rates: np.ndarray,
    taint_mean: float,
    large: np.ndarray,
    large_taint: float,
    large_probability: float,
) -> float:
    """The model's expected misstatement, ``E[sum_i book_i tau_i]``.

    ``sum over ordinary items of book_i p_i E[tau] + q t sum over large items
    of book_j``, by linearity of expectation.
    """
    total = (float(np.dot(book, item_rates)) - float(np.dot(book[large], item_rates[large]))) * taint_mean
    if large.size:
        total += large_probability * large_taint * float(np.sum(book[large]))
    return total


def error_positions(
    rng: np.random.Generator, count: int, rate: float, batch: int, width: int | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Misstated positions among ``count`` items, for ``batch`` independent populations at once.

    Each of the ``count`` items of each population is misstated independently
    with probability ``rate``. Instead of one uniform number per item, the
    gaps between successive misstated positions are drawn: they are
    independent geometric variables with parameter ``rate`` (the waiting
    time between successes of independent Bernoulli trials; Feller 1968,
    *An Introduction to Probability Theory and Its Applications*, vol. 1,
    3rd ed., section VI.8), so the work is proportional to the number of
    misstated items, not to ``count``.

    ``width`` gaps are drawn per population at first (default: the expected
    number of misstated items plus eight standard deviations and 16); a
    population that needs more gets more, so a smaller ``width`` costs time
    but changes nothing in the law of the result.

    Returns
    -------
    rows, positions:
        For every misstated item, the population it belongs to
        (``0 .. batch - 1``) and its position (``0 .. count - 1``), sorted by
        population and then by position.
    """
    if count == 0 or rate <= 0 or batch == 0:
        return np.zeros(0, dtype=np.intp), np.zeros(0, dtype=np.int64)
    if rate >= 1:
        rows = np.repeat(np.arange(batch, dtype=np.intp), count)
        return rows, np.tile(np.arange(count, dtype=np.int64), batch)
    if width is None:
        mean = count * rate
        width = int(math.ceil(mean + 8.0 * math.sqrt(mean * (1.0 - rate)) + 16.0))
    width = max(1, min(int(width), count + 1))
    ends = np.cumsum(rng.geometric(rate, size=(batch, width)), axis=1, dtype=np.int64)
    # A population whose gaps have not yet passed the last item needs more
    # of them; eight standard deviations above the mean, this is very rare.
    short = np.flatnonzero(ends[:, -1] <= count)
    extra: dict[int, np.ndarray] = {}
    for r in short:
        tail = [ends[r]]
        last = int(ends[r, -1])
        while last <= count:
            more = last + np.cumsum(rng.geometric(rate, size=width), dtype=np.int64)
            tail.append(more)
            last = int(more[-1])
        extra[int(r)] = np.concatenate(tail)
    keep = ends <= count  # the first success at trial g is position g - 1
    pos = ends[keep] - 1  # row by row, positions ascending
    rows = np.repeat(np.arange(batch, dtype=np.intp), keep.sum(axis=1))
    if extra:
        # Rebuild the rows that needed more gaps, keeping the overall order.
        parts_r, parts_p = [], []
        fixed = ~np.isin(rows, list(extra))
        parts_r.append(rows[fixed])
        parts_p.append(pos[fixed])
        for r, e in extra.items():
            p = e[e <= count] - 1
            parts_r.append(np.full(p.size, r, dtype=rows.dtype))
            parts_p.append(p)
        rows = np.concatenate(parts_r)
        pos = np.concatenate(parts_p)
        order = np.lexsort((pos, rows))
        rows, pos = rows[order], pos[order]
    return rows.astype(np.intp, copy=False), pos.astype(np.int64, copy=False)
