r"""The coverage simulation of a monetary-unit sample: repeat the draws many times, bound every sample.

Pure numpy. :func:`auditmean.simulate_monetary_units` validates the inputs
and calls :func:`run_monetary_simulation`; the bounds are those of
:mod:`auditmean.core.monetary`, called on whole batches of samples at once
(one row per sample, its draws in draw order, ``NaN`` for draws absorbed by
items examined in full).

The design
----------
The items with a positive book value in whole cents, ``c_i = round(100
book_i) > 0``, with ``B = sum c_i`` and ``n`` draws. Items with
``c_i n >= B`` are examined in full; the others form the remainder, of
``B_r`` cents. Each draw is a monetary unit taken with equal probability
from the ``B`` cents, independently of the others (the selection rule of
:func:`auditmean.select_monetary_units`, whose hash draws are replaced here
by ``numpy`` draws: the simulation needs their law, not their record). A
draw that falls in an item examined in full is absorbed; the others are
independent uniform draws of a monetary unit of the remainder, given their
number ``n_r``.

Which unit a draw hits only matters through the item it falls in, and the
law of a uniform draw is the same under any relabelling of the units fixed
beforehand. So the units are laid out, for each population, as the items
examined in full, then the misstated items of the remainder, then the
other items; a draw ``p`` uniform on ``0 .. B - 1`` is absorbed when it
falls in the first part, takes the taint of the item it falls in within
the second (a search among the few misstated items, not all items), and
is a draw with taint 0 otherwise. The kept samples
(``keep``) map every draw to its item.

Taints and bounds
-----------------
A misstated item with taint ``tau`` has the audited value ``a = book - book
tau`` (:mod:`auditmean.core.misstatement`); a draw in it has the taint
``t = (book - a) / book``, computed from the audited value as
:func:`auditmean.monetary_bound` computes it, so that each replication's
bounds are exactly those the evaluation gives for its sample
(``tests/test_monetary_coverage.py`` checks it). The upper bound on
overstatement is ``exact + B_r U``, ``exact`` the net misstatement of the
items examined in full (correctly rounded, as ``math.fsum``) and ``U`` the
method's bound on the mean of ``max(t, 0)``
(:func:`auditmean.core.monetary.mean_taint_upper`); ``U = 0`` when nothing
is left in the remainder.

A sample in which no draw has a positive taint has ``U`` depending on
``n_r`` only; it is computed once for each ``n_r`` that occurs (a row of a
batch gives exactly what the same sample alone gives, see
:mod:`auditmean.core.monetary`).

The normal limit (for information)
----------------------------------
``exact + B_r (tbar + z s / sqrt(n_r))`` with ``tbar`` and ``s`` the mean and
standard deviation (divisor ``n_r - 1``) of the signed taints of the
``n_r`` draws and ``z`` the normal quantile at the confidence: the normal
approximation for the mean of independent draws, i.e. for the
probability-proportional-to-size estimator with replacement of Hansen and
Hurwitz (1943, Annals of Mathematical Statistics 14, 333-362). Undefined
(NaN) with fewer than two draws in the remainder. With no misstatement in
the sample it has zero width.

Scenarios
---------
As in :mod:`auditmean.core.simulation`: as modelled; at tolerable, every
taint of a population multiplied by ``c = TM / M`` (``M`` the population's
misstatement, book minus audited, of the items with a positive book value),
so that ``M`` becomes ``TM``; at expected, ``c = EM / M`` (``c = 0`` when
``EM = 0``). A population with ``M <= 0`` cannot be scaled and is left out
of that risk. A population whose scaled taints in the remainder exceed 1
is outside the bounds' assumption (recorded per population, so that the
caller leaves it out of the bounds' risks; the bounds are computed there
with such a taint taken as 1, as they are defined on ``[0, 1]``).

Sampling streams
----------------
Replications come in chunks of :data:`auditmean.core.simulation.CHUNK`;
chunk ``k`` draws from ``default_rng(SeedSequence(seed, spawn_key=(k,)))``:
the chunk's fresh populations first (as
:func:`auditmean.core.simulation.draw_batch` draws a stratum's), then its
draws, ``integers(0, B, size=(CHUNK, n))``, of which a shorter last chunk
keeps the first rows. The batch size never changes the results.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from functools import cached_property

import numpy as np
from scipy.special import ndtri

from auditmean.core import monetary as core_mus
from auditmean.core.moments import exact_group_sums
from auditmean.core.simulation import (
    CHUNK,
    ErrorProcess,
    _fresh_stratum,
    _row_max,
    _scale_to,
    _whole_chunks,
    chunk_generator,
)

__all__ = ["LIMITS", "MonetaryDesign", "MonetaryOutput", "run_monetary_simulation"]

#: What is computed for every sample: the bounds of :data:`auditmean.core.monetary.METHODS`, then
#: the normal limit of the mean taint.
LIMITS = (*core_mus.METHODS, "normal")

# Threads that share the bounds' rows (at most two: the machine this is written for has two cores), and
# the fewest rows worth a thread of their own.
_THREADS = max(1, min(2, os.cpu_count() or 1))
_ROWS_PER_THREAD = 1024


@dataclass(frozen=True)
class MonetaryDesign:
    """The positive items and the planned draws (trusted: validated by the caller).

    Attributes
    ----------
    book, cents:
        Book value and whole cents of every item with a positive book value,
        in the design's order (with fresh populations: the ordinary items,
        then the ``n_large`` items under the large-error rule, largest first).
    items:
        Position of each in the user's population.
    n_large:
        Items under the large-error rule (at the end of ``book``).
    sample_size:
        ``n``.
    rounding:
        Amount below which two totals are taken as equal.
    """

    book: np.ndarray
    cents: np.ndarray
    items: np.ndarray
    n_large: int
    sample_size: int
    rounding: float

    @cached_property
    def total_cents(self) -> int:
        return int(self.cents.sum())

    @cached_property
    def in_full(self) -> np.ndarray:
        full = self.cents * self.sample_size >= self.total_cents
        full.setflags(write=False)
        return full

    @cached_property
    def remainder_total(self) -> float:
        """``B_r`` in money, as :func:`auditmean.monetary_bound` forms it (whole cents, then / 100)."""
        return (self.total_cents - int(self.cents[self.in_full].sum())) / 100.0


@dataclass(frozen=True)
class MonetaryOutput:
    """What :func:`run_monetary_simulation` records (cut to the completed replications).

    ``upper``, ``covers``, ``accepts``, ``accepts_at_tolerable`` and
    ``accepts_at_expected`` have one column per entry of ``limits``.
    ``within_at_tolerable`` and ``within_at_expected`` say whether the scaled
    population keeps every taint of the remainder at or below 1, the
    bounds' assumption. ``kept`` holds, for the first ``keep`` replications, the selected items
    of each: ``(replication, design index, hits, in_full, units, audited)``
    with ``units`` a list of draw-number arrays.
    """

    limits: tuple[str, ...]
    requested: int
    completed: int
    stopped_early: bool
    batch_size: int
    misstatement: np.ndarray
    exact_in_full: np.ndarray
    draws_in_remainder: np.ndarray
    errors: np.ndarray
    upper: np.ndarray
    covers: np.ndarray
    accepts: np.ndarray | None
    accepts_at_tolerable: np.ndarray | None
    accepts_at_expected: np.ndarray | None
    usable_at_tolerable: np.ndarray | None
    usable_at_expected: np.ndarray | None
    scale_at_tolerable: np.ndarray | None
    scale_at_expected: np.ndarray | None
    within_at_tolerable: np.ndarray | None
    within_at_expected: np.ndarray | None
    kept: tuple | None


@dataclass(frozen=True)
class _Population:
    """The misstated items of the populations of one chunk (or of the one fixed population).

    ``row`` (population), ``index`` (design index) and ``tau`` of every
    misstated item, sorted by population; ``total`` the misstatement of
    each population.
    """

    row: np.ndarray
    index: np.ndarray
    tau: np.ndarray
    total: np.ndarray


def _fresh(rng, design: MonetaryDesign, process: ErrorProcess) -> _Population:
    ordinary = design.book.shape[0] - design.n_large
    rows, pos, tau, tau_large, total = _fresh_stratum(
        rng, design.book, design.n_large, float(process.rates[0]), process, CHUNK
    )
    # Every taint drawn for a misstated item is non-zero (the model refuses zero taints); large items
    # that were not misstated have a zero in tau_large and are left out here.
    if design.n_large:
        r, c = np.nonzero(tau_large)
        rows = np.concatenate([rows, r])
        pos = np.concatenate([pos, ordinary + c])
        tau = np.concatenate([tau, tau_large[r, c]])
        order = np.argsort(rows, kind="stable")
        rows, pos, tau = rows[order], pos[order], tau[order]
    return _Population(rows.astype(np.int64, copy=False), pos.astype(np.int64, copy=False), tau, total)


def _draw_values(p, design: MonetaryDesign, pop: _Population, fixed: bool, B_full: int):
    """Signed taints of the draws ``p`` ((rows, n)), NaN where absorbed by an item examined in full.

    Returns the values, the design index of the misstated item each draw
    fell in (``-1`` otherwise), and each population's largest taint
    ``tau`` in the remainder (0 when none is positive).
    """
    rows = p.shape[0]
    keep = None
    if design.in_full.any():
        keep = ~design.in_full[pop.index]
    if not fixed and pop.row.size and pop.row[-1] >= rows:  # a shorter last chunk: its rows only
        keep = (pop.row < rows) if keep is None else keep & (pop.row < rows)
    if keep is None:
        e_row, e_idx, e_tau = pop.row, pop.index, pop.tau
    else:
        e_row, e_idx, e_tau = pop.row[keep], pop.index[keep], pop.tau[keep]
    values = np.zeros(p.shape)
    hit_index = np.full(p.shape, -1, dtype=np.int64)
    if fixed:
        largest = np.full(rows, max(float(e_tau.max(initial=0.0)), 0.0))
    else:
        largest = _row_max(e_row, e_tau, rows)
    values[p < B_full] = np.nan
    if e_idx.size:
        # Misstated items of the remainder occupy cents B_full .. B_full + S_r - 1 of population r;
        # their running total over all populations is increasing, so a draw at q cents into that
        # stretch of population r is found at key (running total before r's first item) + q.
        end = np.cumsum(design.cents[e_idx])
        if fixed:
            before = np.zeros(rows, dtype=np.int64)
            S = np.full(rows, int(end[-1]), dtype=np.int64)
        else:
            first = np.searchsorted(e_row, np.arange(rows + 1), side="left")
            total = np.concatenate([[0], end])
            before = total[first[:-1]]
            S = total[first[1:]] - before
        q = p - B_full
        r, k = np.nonzero((q >= 0) & (q < S[:, None]))
        if r.size:
            j = np.searchsorted(end, before[r] + q[r, k], side="right")
            # The taint as the evaluation computes it, from the audited value.
            b = design.book[e_idx[j]]
            audited = b - b * e_tau[j]
            values[r, k] = (b - audited) / b
            hit_index[r, k] = e_idx[j]
    return values, hit_index, largest


def _exact_in_full(design: MonetaryDesign, pop: _Population, rows: int) -> np.ndarray:
    """Net misstatement ``book - audited`` of the items examined in full, per population, correctly rounded."""
    full = design.in_full[pop.index]
    if not full.any():
        return np.zeros(rows)
    b = design.book[pop.index[full]]
    d = b - (b - b * pop.tau[full])
    return exact_group_sums(pop.row[full], rows, d)


def _left_justified(values: np.ndarray, draws: np.ndarray) -> np.ndarray:
    """Each row's draws first, in draw order, cut to the widest row (padding changes no bound's bits)."""
    width = int(draws.max()) if draws.size else 0
    gap = np.isnan(values)
    if gap.any():
        order = np.argsort(gap, axis=1, kind="stable")
        values = np.take_along_axis(values, order, axis=1)
    return values[:, :width]


def _by_rows(fn, jobs: Sequence, n_rows: int) -> list:
    """``[fn(job, part) ...]`` for every job and share of the rows, the shares run on threads.

    Each row's bound depends on that row alone, to the bit, so the rows can
    be shared among threads (numpy releases the interpreter lock in its
    array loops) without changing a number. Returns ``(job, part, result)``.
    """
    parts = np.array_split(np.arange(n_rows), max(1, min(_THREADS, n_rows // _ROWS_PER_THREAD)))
    work = [(job, part) for job in jobs for part in parts]
    if len(parts) > 1:
        with ThreadPoolExecutor(max_workers=_THREADS) as pool:
            results = list(pool.map(lambda w: fn(*w), work))
    else:
        results = [fn(*w) for w in work]
    return [(job, part, res) for (job, part), res in zip(work, results)]


def _clean_bounds(draws: np.ndarray, methods: Sequence[str], confidence: float, zero_cache: dict) -> np.ndarray:
    """``U`` of samples without a positive taint: a function of the number of draws only (cached)."""
    for n_r in np.unique(draws):
        key = int(n_r)
        if key not in zero_cache:
            zero_cache[key] = [float(core_mus.mean_taint_upper(np.zeros(key), confidence, m)) for m in methods]
    return np.array([zero_cache[int(n_r)] for n_r in draws]).reshape(draws.size, len(methods))


def _bounds(values: np.ndarray, draws: np.ndarray, methods: Sequence[str], confidence: float,
            zero_cache: dict) -> np.ndarray:
    """``U`` of every row and method; rows without a positive value from the cache by number of draws."""
    out = np.empty((values.shape[0], len(methods)))
    some = (np.nan_to_num(values, nan=0.0) > 0).any(axis=1)
    none = np.flatnonzero(~some)
    if none.size:
        out[none] = _clean_bounds(draws[none], methods, confidence, zero_cache)
    rows = np.flatnonzero(some)
    if rows.size:
        sub = _left_justified(values[rows], draws[rows])
        jobs = list(enumerate(methods))
        for (j, _), part, u in _by_rows(lambda job, part: core_mus.mean_taint_upper(sub[part], confidence, job[1]),
                                        jobs, rows.size):
            out[rows[part], j] = u
    return out


def _betting_rejects(x: np.ndarray, draws: np.ndarray, confidence: float, m: np.ndarray) -> np.ndarray:
    """Whether the betting test at ``confidence`` rejects the mean ``m`` (per row), i.e. ``U <= m`` exactly.

    The capital of :func:`auditmean.core.monetary.betting_log_capital` with
    the bets of :func:`~auditmean.core.monetary.betting_bets`, the
    functions the bound's search evaluates: the bound is the smallest
    rejected mean, and the rejected means form an interval up to 1.
    """
    alpha = 1.0 - confidence
    out = m >= 1.0  # U never exceeds 1
    inside = np.flatnonzero((m > 0.0) & (m < 1.0))
    if inside.size:
        xs = x[inside]
        bets = core_mus.betting_bets(xs, alpha, draws[inside])
        log_k = core_mus.betting_log_capital(xs, bets, m[inside], core_mus.DEFAULT_CAP)
        out[inside] = np.maximum(log_k.max(axis=1), 0.0) - math.log(1.0 / alpha) >= 0.0
    return out


def _conclusions(values: np.ndarray, draws: np.ndarray, u_star: np.ndarray, methods: Sequence[str],
                 confidence: float, zero_cache: dict) -> np.ndarray:
    """Whether each method's ``U`` is at most ``u_star`` (per row): all a scaled scenario needs.

    Stringer and the error count are computed as they are. For the betting
    bounds the capital at ``u_star`` decides, which is the conclusion of the
    exact bound (the smallest rejected mean); the searched bound
    :func:`~auditmean.core.monetary.betting_upper` lies above it by at most
    its relative precision, so the two conclusions differ only for a bound
    within that precision (1e-5 of itself) of ``u_star``. One evaluation of
    the capital instead of a search makes the scaled scenarios cheap.
    """
    out = np.empty((values.shape[0], len(methods)), dtype=bool)
    some = (np.nan_to_num(values, nan=0.0) > 0).any(axis=1)
    none = np.flatnonzero(~some)
    if none.size:
        out[none] = _clean_bounds(draws[none], methods, confidence, zero_cache) <= u_star[none, None]
    rows = np.flatnonzero(some)
    if rows.size:
        sub = _left_justified(values[rows], draws[rows])
        d = draws[rows]
        u = u_star[rows]
        alpha = 1.0 - confidence
        share = core_mus.DEFAULT_SHARE

        def one(job, part):
            m = job[1]
            if m == "betting":
                return _betting_rejects(sub[part], d[part], confidence, u[part])
            if m == "count_or_betting":
                count = np.atleast_1d(core_mus.count_upper(sub[part], 1.0 - share * alpha)) <= u[part]
                return count | _betting_rejects(sub[part], d[part], 1.0 - (1.0 - share) * alpha, u[part])
            return np.atleast_1d(core_mus.mean_taint_upper(sub[part], confidence, m)) <= u[part]

        for (j, _), part, res in _by_rows(one, list(enumerate(methods)), rows.size):
            out[rows[part], j] = res
    return out


def _normal(signed: np.ndarray, draws: np.ndarray, z: float) -> np.ndarray:
    """``tbar + z s / sqrt(n_r)`` of each row's signed taints (NaN with fewer than two draws)."""
    n = draws.astype(float)
    valid = ~np.isnan(signed)
    total = np.where(valid, signed, 0.0).sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = total / n
        dev = np.where(valid, signed - mean[:, None], 0.0)
        s = np.sqrt((dev * dev).sum(axis=1) / (n - 1.0))
        out = mean + z * s / np.sqrt(n)
    return np.where(draws >= 2, out, np.nan)


def _kept(design, p, hit_index, pop, fixed, B_full, rows, start) -> list[tuple]:
    """The selected items of the first ``rows`` replications of a chunk (see :class:`MonetaryOutput`)."""
    in_full = design.in_full
    full_idx = np.flatnonzero(in_full)
    full_end = np.cumsum(design.cents[full_idx])
    n = p.shape[1]
    out = []
    for r in range(rows):
        mine = pop.row == r
        tau = np.zeros(design.book.shape[0])
        tau[pop.index[mine]] = pop.tau[mine]
        misstated_rem = np.zeros(design.book.shape[0], dtype=bool)
        misstated_rem[pop.index[mine]] = True
        misstated_rem &= ~in_full
        clean_idx = np.flatnonzero(~in_full & ~misstated_rem)
        clean_end = np.cumsum(design.cents[clean_idx])
        S = int(design.cents[misstated_rem].sum())
        item = np.empty(n, dtype=np.int64)
        pr = p[r]
        absorbed = pr < B_full
        item[absorbed] = full_idx[np.searchsorted(full_end, pr[absorbed], side="right")]
        misstated = hit_index[r] >= 0
        item[misstated] = hit_index[r][misstated]
        clean = ~absorbed & ~misstated
        item[clean] = clean_idx[np.searchsorted(clean_end, pr[clean] - B_full - S, side="right")]
        chosen = np.union1d(np.unique(item), full_idx)
        hits = [np.flatnonzero(item == i) + 1 for i in chosen]
        b = design.book[chosen]
        out.append((start + r, chosen, np.array([h.size for h in hits], dtype=np.int64), in_full[chosen],
                    hits, b - b * tau[chosen]))
    return out


def run_monetary_simulation(
    design: MonetaryDesign,
    replications: int,
    seed: int,
    confidence: float,
    tolerable: float | None,
    expected: float | None,
    methods: Sequence[str] = core_mus.METHODS,
    fixed_tau: np.ndarray | None = None,
    process: ErrorProcess | None = None,
    progress: Callable[[int, int], bool | None] | None = None,
    keep: int = 0,
) -> MonetaryOutput:
    """Simulate ``replications`` monetary-unit samples and bound each; see the module docstring.

    Exactly one of ``fixed_tau`` (the taint of every item of the design, one
    population sampled again and again) and ``process`` (fresh misstatement
    in every replication, rate ``process.rates[0]``) is given. ``methods``
    are the bounds computed (a subset of
    :data:`auditmean.core.monetary.METHODS`); the normal limit is always
    added, last. ``progress(done, total)`` is called after each batch; when
    it returns ``False`` the run stops.
    """
    R = int(replications)
    n = int(design.sample_size)
    B = design.total_cents
    in_full = design.in_full
    B_full = int(design.cents[in_full].sum())
    B_r = design.remainder_total
    tol = design.rounding
    TM, EM = tolerable, expected
    limits = (*methods, "normal")
    L = len(limits)
    z = float(ndtri(confidence))
    fixed = fixed_tau is not None
    batch = _whole_chunks(n)  # the (batch, draws) blocks within core.simulation's element budget

    fixed_pop = None
    if fixed:
        idx = np.flatnonzero(fixed_tau != 0)
        fixed_pop = _Population(np.zeros(idx.size, dtype=np.int64), idx, fixed_tau[idx],
                                np.array([float(np.sum(design.book * fixed_tau))]))
        fixed_exact = float(math.fsum(
            (design.book[in_full] - (design.book[in_full] - design.book[in_full] * fixed_tau[in_full])).tolist()
        ))

    mis = np.empty(R)
    exact = np.empty(R)
    draws_rem = np.empty(R, dtype=np.int64)
    errors = np.empty(R, dtype=np.int64)
    upper = np.empty((R, L))
    covers = np.empty((R, L), dtype=bool)
    accepts = np.empty((R, L), dtype=bool) if TM is not None else None
    acc_tm = np.empty((R, L), dtype=bool) if TM is not None else None
    acc_em = np.empty((R, L), dtype=bool) if EM is not None else None
    use_tm = np.empty(R, dtype=bool) if TM is not None else None
    use_em = np.empty(R, dtype=bool) if EM is not None else None
    c_tm = np.empty(R) if TM is not None else None
    c_em = np.empty(R) if EM is not None else None
    in_tm = np.empty(R, dtype=bool) if TM is not None else None
    in_em = np.empty(R, dtype=bool) if EM is not None else None
    kept: list[tuple] = []
    zero_cache: dict[int, list[float]] = {}

    def limits_of(signed, draws, exact_here):
        """Every limit of every row, as modelled."""
        u = np.zeros((signed.shape[0], L))
        if B_r > 0:
            u[:, : L - 1] = _bounds(core_mus.overstatement_values(signed), draws, methods, confidence, zero_cache)
            u[:, L - 1] = _normal(signed, draws, z)
        return exact_here[:, None] + B_r * u

    def accepted(signed, draws, scale, exact_here, rows):
        """Whether each limit is within tolerable in a scaled scenario; the bounds only on ``rows``.

        Elsewhere (populations outside the bounds' assumption, or not
        scaled) the bounds count as not accepting; their risks leave those
        populations out anyway.
        """
        s_signed = signed * scale[:, None]
        ex = exact_here * scale
        out = np.zeros((signed.shape[0], L), dtype=bool)
        if B_r > 0:
            normal = ex + B_r * _normal(s_signed, draws, z)
            out[:, L - 1] = normal <= TM + tol
            if rows.size and L > 1:
                over = np.minimum(core_mus.overstatement_values(s_signed[rows]), 1.0)
                u_star = (TM + tol - ex[rows]) / B_r
                out[rows, : L - 1] = _conclusions(over, draws[rows], u_star, methods, confidence, zero_cache)
        else:
            out[:] = (ex <= TM + tol)[:, None]
        return out

    done = 0
    k = 0
    stopped = False
    while done < R:
        b = min(batch, R - done)
        values_parts, mis_parts, exact_parts, largest_parts = [], [], [], []
        for start in range(0, b, CHUNK):
            rows = min(CHUNK, b - start)
            rng = chunk_generator(seed, k)
            k += 1
            if fixed:
                pop = fixed_pop
                total = np.full(rows, float(fixed_pop.total[0]))
                ex = np.full(rows, fixed_exact)
            else:
                pop = _fresh(rng, design, process)
                total = pop.total[:rows]
                ex = _exact_in_full(design, pop, CHUNK)[:rows]
            p = rng.integers(0, B, size=(CHUNK, n))[:rows]
            vals, hit_index, largest = _draw_values(p, design, pop, fixed, B_full)
            keep_here = max(0, min(keep - (done + start), rows))
            if keep_here:
                kept += _kept(design, p, hit_index, pop if not fixed else _fixed_rows(pop, keep_here), fixed,
                              B_full, keep_here, done + start)
            values_parts.append(vals)
            mis_parts.append(total)
            exact_parts.append(ex)
            largest_parts.append(largest)
        signed = np.concatenate(values_parts)
        m_pop = np.concatenate(mis_parts)
        ex = np.concatenate(exact_parts)
        top = np.concatenate(largest_parts)
        draws = np.sum(~np.isnan(signed), axis=1)
        sl = slice(done, done + b)
        mis[sl] = m_pop
        exact[sl] = ex
        draws_rem[sl] = draws
        errors[sl] = np.sum(np.nan_to_num(signed, nan=0.0) > 0, axis=1)
        up = limits_of(signed, draws, ex)
        upper[sl] = up
        covers[sl] = up + tol >= m_pop[:, None]
        if TM is not None:
            accepts[sl] = up <= TM + tol
            ctm, oktm = _scale_to(TM, m_pop)
            c_tm[sl], use_tm[sl] = ctm, oktm
            in_tm[sl] = np.nan_to_num(ctm) * top <= 1.0 + 1e-12
            # The bounds only where the scaled population stays within their assumption (the others
            # are left out of the bounds' risks, so computing them there would be wasted).
            rows_tm = np.flatnonzero(oktm & in_tm[sl])
            acc_tm[sl] = accepted(signed, draws, np.nan_to_num(ctm), ex, rows_tm) & oktm[:, None]
        if EM is not None:
            cem, okem = _scale_to(EM, m_pop)
            c_em[sl], use_em[sl] = cem, okem
            in_em[sl] = np.nan_to_num(cem) * top <= 1.0 + 1e-12
            rows_em = np.flatnonzero(okem & in_em[sl])
            acc_em[sl] = accepted(signed, draws, np.nan_to_num(cem), ex, rows_em) & okem[:, None]
        done += b
        if progress is not None and progress(done, R) is False and done < R:
            stopped = True
            break

    def cut(a):
        return None if a is None else a[:done]

    return MonetaryOutput(
        limits=limits, requested=R, completed=done, stopped_early=stopped, batch_size=batch,
        misstatement=mis[:done], exact_in_full=exact[:done], draws_in_remainder=draws_rem[:done],
        errors=errors[:done], upper=upper[:done], covers=covers[:done], accepts=cut(accepts),
        accepts_at_tolerable=cut(acc_tm), accepts_at_expected=cut(acc_em), usable_at_tolerable=cut(use_tm),
        usable_at_expected=cut(use_em), scale_at_tolerable=cut(c_tm), scale_at_expected=cut(c_em),
        within_at_tolerable=cut(in_tm), within_at_expected=cut(in_em),
        kept=tuple(kept) if keep else None,
    )


def _fixed_rows(pop: _Population, rows: int) -> _Population:
    """The fixed population repeated for ``rows`` replications (for listing kept samples)."""
    m = pop.index.size
    return _Population(np.repeat(np.arange(rows, dtype=np.int64), m), np.tile(pop.index, rows),
                       np.tile(pop.tau, rows), np.repeat(pop.total, rows))
