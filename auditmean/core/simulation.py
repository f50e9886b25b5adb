r"""The coverage simulation: repeat a stratified sample many times and see how often the limits hold.

Pure numpy. The design is stratified simple random sampling without
replacement: ``n_h`` of the ``N_h`` items of stratum ``h``, strata with
``n_h = N_h`` examined in full. Each *replication* draws one such sample
(optionally from a freshly misstated population), estimates the audited
total with every requested method, and records the estimate, its standard
error, the limits, whether they contain the true audited total, and the
conclusion an auditor would reach. Replications are processed in *batches*:
every array is a block of shape ``(batch, n_h)`` per stratum, so memory
depends on the batch size, not on the number of replications.

Estimators
----------
The formulas and variance forms are those of
:mod:`auditmean.core.estimators` (Cochran 1977, *Sampling Techniques*, 3rd
ed., eqs. 5.3/5.6, 7.2, 6.9/6.38, 6.49, 7.27/7.30), with the same options:
``ratio_variance`` (``"sample_book_mean"`` multiplies the ratio variances by
``(Xbar / xbar)^2``, Cochran 1977 section 6.9), ``single_item``
(``"average"``: a stratum whose variance cannot be estimated gets the mean of
the other strata's variance terms and one degree of freedom, Lumley 2010,
*Complex Surveys*, section 3.1.2; ``"zero"``), the regression slope fixed at
1 when the sampled book values of a stratum do not vary, and strata examined
in full contributing their exact audited total with no variance.

They are computed here from per-stratum *centred moments* of the sampled
book values ``x`` and differences ``d = y - x`` (two passes: means first,
then sums of centred products, as in :mod:`auditmean.core.moments`). What
each estimator averages has the centred form

.. math::  e_i - \bar e = (d_i - \bar d) + a\,(x_i - \bar x)

with ``a = 1`` for mean-per-unit (``e = y``), ``a = 0`` for difference
estimation, ``a = 1 - R_h = -\bar d / \bar x`` for the separate ratio,
``a = 1 - R_c`` for the combined ratio and ``a = 1 - b_h = -s_{dx}/s_{xx}``
for regression (``b_h = s_{xy}/s_{xx}`` with ``y = x + d``). So

.. math::  \sum (e - \bar e)^2 = S_{dd} + 2a S_{dx} + a^2 S_{xx}, \quad
           \sum (e - \bar e)^3 = S_{ddd} + 3a S_{xdd} + 3a^2 S_{xxd} + a^3 S_{xxx},

an exact rearrangement of the residual sums of squares of Cochran (1977,
eqs. 6.9 and 7.27). Written in the differences it loses no digits when
audited values are close to book values, which is the usual case in audit
(the textbook form ``s_y^2 + R^2 s_x^2 - 2 R s_{xy}`` cancels almost
exactly there), and when no sampled item is misstated every term is exactly
zero. It also makes the three scenarios below cost one set of moments: with
every taint multiplied by ``c``, ``d`` becomes ``c d`` and each moment is
multiplied by the matching power of ``c``.

Scenarios
---------
* *as modelled*: the populations the misstatement model gives;
* *at tolerable*: each population with every taint multiplied by one factor
  ``c = TM / M`` so that its misstatement ``M`` (book total minus audited
  total) equals the tolerable misstatement ``TM`` exactly; the share of
  replications accepted is the actual risk of incorrect acceptance. The
  error rate and the shape of the taint distribution are kept, only the
  size of the taints changes. A population without net overstatement
  (``M <= 0``) cannot be scaled this way; such replications are counted and
  left out of that risk;
* *at expected*: the same with ``c = EM / M`` (``c = 0`` when the expected
  misstatement ``EM`` is zero, a population without misstatement); the share
  rejected is the actual risk of incorrect rejection.

The conclusion of a replication: accept when the upper limit of
misstatement, ``book total - lower one-sided bound``, is not above ``TM``.

Flags
-----
Counted per replication and stratum, by the rules :func:`auditmean.estimate_total`
applies (:mod:`auditmean.evaluation.flags`, with the rule functions of
:mod:`auditmean.core.normality`): fewer than 30 sampled items (a rule of
thumb, common practice, no published source); Cochran's ``n > 25 G1^2``
(Cochran 1977, section 2.15) and ``n > 28 + 25 G1^2`` (Sugden, Smith and
Jones 2000, JRSS B 62, 787-793; the constant quoted from memory) on the
skewness ``G1`` of what the estimator averages in the stratum (Joanes and
Gill 1998, statistic G1); the skewness of the whole estimator; no or few
non-zero differences; a regression slope or a ratio that cannot be formed;
strata whose variance cannot be estimated; a zero-width interval (codes of
:data:`auditmean.core.flags.FLAG_CODES`). See :func:`evaluate_batch`.

Sampling
--------
See :func:`draw_without_replacement`. Replications come in *chunks* of
:data:`CHUNK` (256); chunk ``k`` draws from its own generator,
``numpy.random.default_rng(SeedSequence(seed, spawn_key=(k,)))``
(:func:`chunk_generator`), and a fixed misstated population from
``default_rng(seed)``. A batch is a whole number of chunks, so the batch
size (chosen for memory) never changes the results: the same seed gives
the same replications whatever the number requested, and a run stopped
early holds exactly the first replications of the full run.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
from scipy.special import ndtri, stdtrit  # normal and t quantiles (as scipy.stats' ppf)

from auditmean.core.bootstrap import percentile_limits, rescaling_bootstrap
from auditmean.core.estimators import METHODS, minimum_items_for_variance
from auditmean.core.misstatement import draw_taints, error_positions
from auditmean.core.normality import (
    FEW_DIFFERENCES,
    OVERALL_SKEWNESS_LIMIT,
    fails_cochran,
    fails_rule_of_thumb,
    fails_sugden,
)

__all__ = [
    "STRATUM_FLAGS",
    "ESTIMATE_FLAGS",
    "Design",
    "ErrorProcess",
    "Settings",
    "Batch",
    "SimulationOutput",
    "CHUNK",
    "chunk_generator",
    "batch_size",
    "draw_without_replacement",
    "draw_batch",
    "batch_moments",
    "evaluate_batch",
    "run_simulation",
]

#: Flags counted per stratum (codes of auditmean.core.flags.FLAG_CODES).
STRATUM_FLAGS = (
    "few-items",
    "skew-cochran",
    "skew-studentized",
    "no-differences",
    "single-item",
    "variance-not-estimable",
    "slope-undefined",
    "ratio-undefined",
)
#: Flags about the estimate as a whole.
ESTIMATE_FLAGS = ("skew-overall", "few-differences", "interval-unusable")

# OVERALL_SKEWNESS_LIMIT and FEW_DIFFERENCES come from core.normality, the
# one place the evaluation's flags and the simulation take them from.

#: Replications drawn from one generator (see the module docstring).
CHUNK = 256
# Elements of one (batch, items) block that a batch may hold; sets the batch size.
_BLOCK_BUDGET = 1 << 20
_MAX_CHUNKS = 16


@dataclass(frozen=True)
class Design:
    """The population and the planned sample sizes, per stratum.

    Attributes
    ----------
    counts, sizes:
        ``N_h`` and ``n_h`` (int64, length ``H``); ``1 <= n_h <= N_h``.
    book_totals:
        ``X_h``.
    book:
        Book values of each stratum's items, the ordinary items first and
        the ``n_large[h]`` items under the large-error rule last.
    items:
        Position in the user's population of each entry of ``book``.
    n_large:
        Items of each stratum under the large-error rule.
    rounding:
        Amount below which two totals are taken as equal (rounding of sums
        of the book values), used when a limit is compared with the true
        total or the upper limit of misstatement with tolerable.
    largest:
        The largest book value of each stratum (needed only by the
        finite-sample bound, :mod:`auditmean.core.bound_simulation`).
    """

    counts: np.ndarray
    sizes: np.ndarray
    book_totals: np.ndarray
    book: tuple[np.ndarray, ...]
    items: tuple[np.ndarray, ...]
    n_large: np.ndarray
    rounding: float
    largest: np.ndarray | None = None

    @property
    def full(self) -> np.ndarray:
        return self.sizes >= self.counts


@dataclass(frozen=True)
class ErrorProcess:
    """A misstatement model in array form (see :mod:`auditmean.core.misstatement`)."""

    rates: np.ndarray
    kind: str
    params: np.ndarray
    understatement_share: float
    large_taint: float
    large_probability: float


@dataclass(frozen=True)
class Settings:
    """What to compute; trusted (validated at the public boundary).

    ``second_opinion_replicates`` is the number of bootstrap replicates of
    the second-opinion interval per replication (0: no second opinion).
    """

    methods: tuple[str, ...] = METHODS
    confidence: float = 0.95
    distribution: str = "normal"
    ratio_variance: str = "sample_book_mean"
    single_item: str = "average"
    tolerable: float | None = None
    expected: float | None = None
    second_opinion_replicates: int = 0
    bounds: tuple[str, ...] = ()


@dataclass(frozen=True)
class Batch:
    """One batch of samples.

    ``x[h]``, ``m[h]`` and ``positions[h]`` are ``(batch, n_h)`` blocks of
    sampled book values, misstatement amounts ``book * taint`` and positions
    within ``Design.book[h]`` (``None`` for strata examined in full);
    ``stratum_misstatement`` is ``(batch, H)``: each population's
    misstatement per stratum; ``largest_overstatement`` ``(batch, H)`` its
    largest overstatement of one item per stratum (0 when none), which the
    finite-sample bound's scenarios need (:mod:`auditmean.core.bound_simulation`).
    """

    size: int
    x: list[np.ndarray | None]
    m: list[np.ndarray | None]
    positions: list[np.ndarray | None]
    stratum_misstatement: np.ndarray
    full_taints: list[np.ndarray | None] = field(default_factory=list)
    largest_overstatement: np.ndarray | None = None


def chunk_generator(seed: int, k: int) -> np.random.Generator:
    """The generator of chunk ``k``: ``default_rng(SeedSequence(seed, spawn_key=(k,)))``."""
    return np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(k,)))


def _error_width(count: int, rate: float) -> int:
    if rate <= 0 or count == 0:
        return 0
    mean = count * rate
    return int(math.ceil(mean + 8.0 * math.sqrt(mean * max(1.0 - rate, 0.0)) + 16.0))


def batch_size(design: Design, process: ErrorProcess | None) -> int:
    """Replications per batch: as many whole chunks as fit the element budget (at least one).

    With fresh misstatement each population's misstated items take room too
    (their expected number plus eight standard deviations).
    """
    per = int(np.sum(np.where(design.full, 0, design.sizes)))
    if process is not None:
        for h in range(design.counts.shape[0]):
            ordinary = int(design.counts[h] - design.n_large[h])
            per += _error_width(ordinary, float(process.rates[h])) + int(design.n_large[h])
            if design.full[h]:
                per += int(design.counts[h])
    return _whole_chunks(per)


def _whole_chunks(per: int) -> int:
    """Replications per batch when one replication holds ``per`` elements: as many whole chunks as
    fit the element budget, at least one and at most ``_MAX_CHUNKS`` (either design)."""
    chunks = _BLOCK_BUDGET // (max(per, 1) * CHUNK)
    return CHUNK * int(max(1, min(_MAX_CHUNKS, chunks)))


def _distinct_sorted(rng: np.random.Generator, batch: int, N: int, n: int) -> np.ndarray:
    idx = rng.integers(0, N, size=(batch, n))
    idx.sort(axis=1)
    rows = np.flatnonzero((idx[:, 1:] == idx[:, :-1]).any(axis=1))
    while rows.size:
        sub = idx[rows]
        dup = np.zeros(sub.shape, dtype=bool)
        dup[:, 1:] = sub[:, 1:] == sub[:, :-1]
        sub[dup] = rng.integers(0, N, size=int(dup.sum()))
        sub.sort(axis=1)
        idx[rows] = sub
        rows = rows[(sub[:, 1:] == sub[:, :-1]).any(axis=1)]
    return idx


def draw_without_replacement(rng: np.random.Generator, batch: int, N: int, n: int) -> np.ndarray:
    """``batch`` simple random samples of ``n`` of ``N`` positions, without replacement.

    Returns a ``(batch, n)`` int64 array, each row sorted.

    Notes
    -----
    When ``n <= N / 2``: draw ``n`` positions with replacement, then redraw
    every repeat of a position already drawn until no repeats remain. Every
    step treats all positions alike (the draws are uniform and a repeat is
    recognised by equality alone), so the law of the final set is unchanged
    by any relabelling of the positions and is therefore uniform over the
    sets of ``n`` positions: a simple random sample without replacement
    (our own argument; the test checks inclusion frequencies against a
    chi-square distribution). The expected number of redraws is about
    ``n^2 / (2N)``. When ``n > N / 2`` the ``N - n`` positions left out are
    drawn this way and the sample is the rest. Sorted positions also make
    the look-ups that follow faster.
    """
    if n >= N:
        return np.broadcast_to(np.arange(N, dtype=np.int64), (batch, N)).copy()
    if 2 * n <= N:
        return _distinct_sorted(rng, batch, N, n)
    out = _distinct_sorted(rng, batch, N, N - n)
    keep = np.ones((batch, N), dtype=bool)
    keep[np.arange(batch)[:, None], out] = False
    return np.nonzero(keep)[1].reshape(batch, n).astype(np.int64)


# Fresh populations are drawn this many at a time (positions, then taints), which
# bounds the memory the misstated items of a chunk take.
_FRESH_ROWS = 32


def _fresh_stratum(rng, book_h, n_large, rate, process: ErrorProcess, batch):
    """Misstated positions and taints of ``batch`` fresh populations of one stratum."""
    ordinary = book_h.shape[0] - n_large
    parts_r, parts_p, parts_t = [], [], []
    total = np.zeros(batch)
    for start in range(0, batch, _FRESH_ROWS):
        size = min(_FRESH_ROWS, batch - start)
        r, p = error_positions(rng, ordinary, rate, size)
        t = draw_taints(rng, process.kind, process.params, process.understatement_share, r.size)
        if r.size:
            total[start: start + size] = np.bincount(r, weights=book_h[p] * t, minlength=size)
        r += start
        parts_r.append(r)
        parts_p.append(p)
        parts_t.append(t)
    rows, pos, tau = np.concatenate(parts_r), np.concatenate(parts_p), np.concatenate(parts_t)
    if n_large:
        hit = rng.random((batch, n_large)) < process.large_probability
        tau_large = np.where(hit, process.large_taint, 0.0)
        total = total + tau_large @ book_h[ordinary:]
    else:
        tau_large = np.zeros((batch, 0))
    return rows, pos, tau, tau_large, total


def _taints_at(positions, ordinary, rows, pos, tau, tau_large):
    """Taints of the items at ``positions`` ((batch, n) within the stratum)."""
    batch, n = positions.shape
    out = np.zeros((batch, n))
    if rows.size:
        key_e = rows.astype(np.int64) * max(ordinary, 1) + pos
        r = np.arange(batch, dtype=np.int64)[:, None]
        key_s = r * max(ordinary, 1) + positions
        j = np.searchsorted(key_e, key_s)
        j_safe = np.minimum(j, key_e.size - 1)
        hit = (j < key_e.size) & (key_e[j_safe] == key_s) & (positions < ordinary)
        out = np.where(hit, tau[j_safe], 0.0)
    if tau_large.shape[1]:
        large = positions >= ordinary
        if large.any():
            r, c = np.nonzero(large)
            out[r, c] = tau_large[r, positions[r, c] - ordinary]
    return out


def draw_batch(
    chunks: Sequence[tuple[np.random.Generator, int]],
    design: Design,
    misstatement: Sequence[np.ndarray] | None = None,
    process: ErrorProcess | None = None,
    keep_full: bool = False,
) -> Batch:
    """Draw the samples (and, with ``process``, fresh misstated populations) of a batch.

    Parameters
    ----------
    chunks:
        ``(generator, replications)`` of each chunk of the batch, in order;
        each chunk draws :data:`CHUNK` replications and keeps the first
        ``replications``.
    design:
        See :class:`Design`.
    misstatement:
        A fixed population: per stratum, the misstatement amount
        ``book * taint`` of each item (aligned with ``design.book``).
    process:
        Fresh misstatement instead: every population is drawn anew from the
        model (exactly one of ``misstatement`` and ``process`` is given).
    keep_full:
        Also return the taints of every item of the strata examined in full
        (fresh populations only; used to list kept samples).

    Notes
    -----
    Each chunk's generator is used stratum by stratum: the misstated items
    of the fresh populations (:func:`auditmean.core.misstatement.error_positions`,
    then their taints, then the large-error rule), then the sample
    (:func:`draw_without_replacement`). Misstatement and sample are
    independent, as in an audit, so drawing them in this order changes
    nothing.
    """
    H = design.counts.shape[0]
    size = int(sum(b for _, b in chunks))
    xs: list[np.ndarray | None] = []
    ms: list[np.ndarray | None] = []
    ps: list[np.ndarray | None] = []
    full_taints: list[np.ndarray | None] = []
    by_stratum = np.zeros((size, H))
    largest_over = np.zeros((size, H))
    for h in range(H):
        book_h = design.book[h]
        N, n = int(design.counts[h]), int(design.sizes[h])
        k = int(design.n_large[h])
        full = n >= N
        if full:
            x_all = m_all = p_all = None
            f_all = np.empty((size, N)) if process is not None and keep_full else None
        else:
            x_all, m_all, p_all = np.empty((size, n)), np.empty((size, n)), np.empty((size, n), dtype=np.int64)
            f_all = None
        row = 0
        for rng, b in chunks:
            rows_here = slice(row, row + b)
            # Every chunk draws CHUNK replications and keeps the first b, so that a
            # shorter last chunk holds the same replications as a full one.
            if process is not None:
                rows, pos, tau, tau_large, total = _fresh_stratum(
                    rng, book_h, k, float(process.rates[h]), process, CHUNK
                )
                if b < CHUNK:
                    cut = np.searchsorted(rows, b)
                    rows, pos, tau, tau_large, total = rows[:cut], pos[:cut], tau[:cut], tau_large[:b], total[:b]
                by_stratum[rows_here, h] = total
                largest_over[rows_here, h] = _row_max(rows, book_h[pos] * tau, b)
                if k:
                    largest_over[rows_here, h] = np.maximum(
                        largest_over[rows_here, h], (tau_large * book_h[N - k:]).max(axis=1)
                    )
            if full:
                if f_all is not None:
                    everything = np.broadcast_to(np.arange(N, dtype=np.int64), (b, N))
                    f_all[rows_here] = _taints_at(everything, N - k, rows, pos, tau, tau_large)
            else:
                positions = draw_without_replacement(rng, CHUNK, N, n)[:b]
                p_all[rows_here] = positions
                x = x_all[rows_here]
                np.take(book_h, positions, out=x)
                if process is not None:
                    np.multiply(x, _taints_at(positions, N - k, rows, pos, tau, tau_large), out=m_all[rows_here])
                else:
                    np.take(misstatement[h], positions, out=m_all[rows_here])
            row += b
        if process is None:
            by_stratum[:, h] = float(np.sum(misstatement[h]))
            largest_over[:, h] = max(float(np.max(misstatement[h], initial=0.0)), 0.0)
        xs.append(x_all)
        ms.append(m_all)
        ps.append(p_all)
        full_taints.append(f_all)
    return Batch(size, xs, ms, ps, by_stratum, full_taints, largest_over)


def _row_max(rows: np.ndarray, values: np.ndarray, batch: int) -> np.ndarray:
    """The largest of ``values`` per row ``0 .. batch - 1`` (rows sorted ascending), at least 0."""
    out = np.zeros(batch)
    if rows.size:
        starts = np.flatnonzero(np.r_[True, rows[1:] != rows[:-1]])
        out[rows[starts]] = np.maximum(np.maximum.reduceat(values, starts), 0.0)
    return out


@dataclass(frozen=True)
class _Moments:
    """Centred moments of one sampled stratum, each of shape (batch,)."""

    n: int
    xbar: np.ndarray
    mbar: np.ndarray
    sxx: np.ndarray
    sxm: np.ndarray
    smm: np.ndarray
    sxxx: np.ndarray
    sxxm: np.ndarray
    sxmm: np.ndarray
    smmm: np.ndarray
    nonzero: np.ndarray


def batch_moments(x: np.ndarray, m: np.ndarray) -> _Moments:
    """Two-pass centred moments of book values ``x`` and misstatements ``m`` ((batch, n) blocks)."""
    n = x.shape[1]
    xbar = x.sum(axis=1) / n
    mbar = m.sum(axis=1) / n
    xc = x - xbar[:, None]
    mc = m - mbar[:, None]
    xc2 = xc * xc
    mc2 = mc * mc
    dot = np.einsum
    return _Moments(
        n=n,
        xbar=xbar,
        mbar=mbar,
        sxx=xc2.sum(axis=1),
        sxm=dot("ij,ij->i", xc, mc),
        smm=mc2.sum(axis=1),
        sxxx=dot("ij,ij->i", xc2, xc),
        sxxm=dot("ij,ij->i", xc2, mc),
        sxmm=dot("ij,ij->i", xc, mc2),
        smmm=dot("ij,ij->i", mc2, mc),
        nonzero=np.count_nonzero(m, axis=1),
    )


@dataclass(frozen=True)
class _Evaluation:
    total: np.ndarray
    variance: np.ndarray
    df: np.ndarray
    flags: dict[str, np.ndarray]  # code -> (batch, H) bool, or (batch,) for estimate flags


def _skewness(n: int, ss: np.ndarray, s3: np.ndarray, scale: np.ndarray) -> np.ndarray:
    """G1 from centred sums (Joanes and Gill 1998, statistic G1); NaN where it is not judged.

    As the evaluation's flags do (:func:`auditmean.evaluation.flags.averaged_moments`
    with :func:`auditmean.core.moments.sample_skewness`): NaN with fewer than
    three items, and NaN where the values do not vary (a spread not above
    ``1e-24`` of their sum of squares), so that the skewness rules do not
    apply there.
    """
    if n < 3:
        return np.full(ss.shape, np.nan)
    flat = ~(ss > 1e-24 * scale)
    m2 = np.where(flat, 1.0, ss) / n
    m3 = s3 / n
    g1 = m3 / m2**1.5 * (math.sqrt(n * (n - 1.0)) / (n - 2.0))
    return np.where(flat, np.nan, g1)


def evaluate_batch(
    design: Design,
    moments: list[_Moments | None],
    stratum_misstatement: np.ndarray,
    scale: np.ndarray | float,
    settings: Settings,
    method: str,
    with_flags: bool = True,
) -> _Evaluation:
    """Estimate the audited total of every replication of a batch by one method.

    ``scale`` multiplies every misstatement (1 as modelled; see the module
    docstring for the scenarios). Formulas: see the module docstring and
    :mod:`auditmean.core.estimators`, including its treatment of a stratum
    whose sampled book values add up to zero under the ratio estimators
    (difference estimation there).

    The flags follow the rules of :mod:`auditmean.evaluation.flags` as
    :func:`auditmean.estimate_total` applies them: the rule of thumb and the
    skewness rules only in strata whose variance is estimated; the skewness
    of the whole estimator ``sum_h N_h^3 k3_h (N_h - n_h)(N_h - 2 n_h) /
    (n_h^2 (N_h - 1)(N_h - 2)) a_h^1.5 / v^1.5`` against 0.2 (the third
    moment of a mean without replacement, Cochran 1977 section 2.15, quoted
    from memory there; ``k3 = n m3 / ((n - 1)(n - 2))``, ``a_h`` the ratio
    variance's adjustment); fewer than 20 non-zero differences in those
    strata (common practice, threshold from memory there).
    """
    H = design.counts.shape[0]
    batch = stratum_misstatement.shape[0]
    c = np.broadcast_to(np.asarray(scale, dtype=float), (batch,))
    N = design.counts.astype(float)
    X = design.book_totals
    full = design.full
    need = minimum_items_for_variance(method)
    n_h = design.sizes
    sampled = ~full
    estimable = sampled & (n_h >= need)
    thin = sampled & ~estimable

    totals = np.zeros((batch, H))
    terms = np.zeros((batch, H))
    dofs = np.full((batch, H), np.nan)
    flags: dict[str, np.ndarray] = {}
    if with_flags:
        for code in STRATUM_FLAGS:
            flags[code] = np.zeros((batch, H), dtype=bool)
        flags["few-items"][:] = fails_rule_of_thumb(n_h, census=~estimable)
        flags["single-item"][:] = thin & (n_h == 1)
        flags["variance-not-estimable"][:] = thin & (n_h > 1)
        third = np.zeros(batch)
        differences = np.zeros(batch, dtype=np.int64)

    # Scaled d-moments of each sampled stratum (d = -c m).
    dm = {}
    for h in np.flatnonzero(sampled):
        mo = moments[h]
        dm[h] = (
            -c * mo.mbar,  # dbar
            c * c * mo.smm,  # Sdd
            -c * mo.sxm,  # Sdx
            -(c**3) * mo.smmm,  # Sddd
            c * c * mo.sxmm,  # Sxdd
            -c * mo.sxxm,  # Sxxd
        )

    # Ratio estimators: a stratum whose sampled book values add up to zero has no ratio.
    no_ratio = {h: ~(moments[h].xbar != 0) for h in np.flatnonzero(sampled)}
    a_comb = None
    adj_comb = None
    if method == "combined_ratio" and sampled.any():
        idx = np.flatnonzero(sampled)
        x_hat = sum(np.where(no_ratio[h], 0.0, N[h] * moments[h].xbar) for h in idx)
        d_hat = sum(np.where(no_ratio[h], 0.0, N[h] * dm[h][0]) for h in idx)
        x_known = sum(np.where(no_ratio[h], 0.0, X[h]) for h in idx)
        with np.errstate(invalid="ignore", divide="ignore"):
            a_comb = -d_hat / x_hat
            adj_comb = (x_known / x_hat) ** 2

    with np.errstate(invalid="ignore", divide="ignore"):
        for h in range(H):
            if full[h]:
                totals[:, h] = X[h] - c * stratum_misstatement[:, h]
                continue
            mo = moments[h]
            n = mo.n
            dbar, sdd, sdx, sddd, sxdd, sxxd = dm[h]
            xbar = mo.xbar
            ddof = 1.0
            adj = 1.0
            if method == "mpu":
                a = np.ones(batch)
                totals[:, h] = N[h] * (xbar + dbar)
                ebar = xbar + dbar
            elif method == "difference":
                a = np.zeros(batch)
                totals[:, h] = X[h] + N[h] * dbar
                ebar = dbar
            elif method in ("ratio", "combined_ratio"):
                zero = no_ratio[h]
                if method == "ratio":
                    a = np.where(zero, 0.0, -dbar / np.where(zero, 1.0, xbar))
                    ebar = np.where(zero, dbar, 0.0)
                    if settings.ratio_variance == "sample_book_mean":
                        adj = np.where(zero, 1.0, (X[h] / N[h] / np.where(zero, 1.0, xbar)) ** 2)
                else:
                    a = np.where(zero, 0.0, a_comb)
                    ebar = dbar + a * xbar
                    if settings.ratio_variance == "sample_book_mean":
                        adj = np.where(zero, 1.0, adj_comb)
                totals[:, h] = np.where(zero, X[h] + N[h] * dbar, (1.0 - a) * X[h])
                if with_flags:
                    flags["ratio-undefined"][:, h] = zero
            elif method == "regression":
                flat = ~(mo.sxx > 0)
                a = np.where(flat, 0.0, -sdx / np.where(flat, 1.0, mo.sxx))
                slope = 1.0 - a
                totals[:, h] = N[h] * ((xbar + dbar) + slope * (X[h] / N[h] - xbar))
                ebar = np.zeros(batch)
                ddof = np.where(flat, 1.0, 2.0)
                if with_flags:
                    flags["slope-undefined"][:, h] = flat & estimable[h]
            else:
                raise ValueError(f"unknown method {method!r}")
            ss = sdd + 2.0 * a * sdx + a * a * mo.sxx
            ss = np.maximum(ss, 0.0)
            dof = n - ddof
            s2 = np.where(dof > 0, ss / np.where(dof > 0, dof, 1.0), np.nan)
            fpc = 1.0 - n / N[h]
            v = N[h] ** 2 * fpc / n * s2 * adj
            if estimable[h]:
                terms[:, h] = v
                dofs[:, h] = dof
            if with_flags:
                nonzero = np.where(c != 0, mo.nonzero, 0)
                if method != "mpu":
                    flags["no-differences"][:, h] = nonzero == 0
                if estimable[h]:
                    s3 = sddd + 3.0 * a * sxdd + 3.0 * a * a * sxxd + a**3 * mo.sxxx
                    g1 = _skewness(n, ss, s3, ss + n * ebar * ebar)
                    flags["skew-cochran"][:, h] = fails_cochran(n, g1)
                    flags["skew-studentized"][:, h] = fails_sugden(n, g1)
                    differences += nonzero
                    if n > 2:
                        k3 = n * s3 / ((n - 1.0) * (n - 2.0))
                        t = N[h] ** 3 * k3 * (N[h] - n) * (N[h] - 2 * n) / (n * n * (N[h] - 1) * (N[h] - 2))
                        t = t * np.broadcast_to(adj, (batch,)) ** 1.5
                        third += np.where(np.isfinite(t), t, 0.0)

        if thin.any():
            if settings.single_item == "average" and estimable.any():
                avg = terms[:, estimable].mean(axis=1)
                terms[:, thin] = avg[:, None]
                dofs[:, thin] = 1.0
            # "zero": thin strata keep no variance term.

        variance = terms.sum(axis=1)
        use = (terms > 0) & np.isfinite(terms)
        num = np.where(use, terms, 0.0).sum(axis=1) ** 2
        den = np.where(use, terms * terms / np.where(use, dofs, 1.0), 0.0).sum(axis=1)
        df = np.where(use.any(axis=1) & (den > 0), num / np.where(den > 0, den, 1.0), np.nan)

        if with_flags:
            positive = variance > 0
            skew = np.where(positive, third / np.where(positive, variance, 1.0) ** 1.5, np.nan)
            flags["skew-overall"] = estimable.any() & np.isfinite(skew) & (np.abs(skew) >= OVERALL_SKEWNESS_LIMIT)
            flags["interval-unusable"] = sampled.any() & ~positive
            if method != "mpu":
                flags["few-differences"] = (differences > 0) & (differences < FEW_DIFFERENCES)
            else:
                flags["few-differences"] = np.zeros(batch, dtype=bool)
    return _Evaluation(totals.sum(axis=1), variance, df, flags)


def _critical(settings: Settings, df: np.ndarray, two_sided: bool) -> np.ndarray | float:
    p = 1.0 - (1.0 - settings.confidence) / 2.0 if two_sided else settings.confidence
    if settings.distribution == "t":
        ok = np.isfinite(df) & (df > 0)
        out = np.full(df.shape, float(ndtri(p)))
        if ok.any():
            out[ok] = stdtrit(df[ok], p)
        return out
    return float(ndtri(p))


@dataclass(frozen=True)
class SimulationOutput:
    """What :func:`run_simulation` records (arrays cut to the completed replications).

    Per-replication arrays have one row per replication and, where two
    dimensional, one column per method in ``methods``.

    Attributes
    ----------
    true_totals, population_misstatement:
        The audited total and the misstatement of each replication's
        population, as modelled.
    total, std_error, lower, upper, lower_bound:
        Estimates, standard errors, two-sided limits and the one-sided
        lower bound (all at ``confidence``).
    covers, covers_one_sided, accepts:
        The two-sided limits contain the true total; the one-sided bound is
        not above it; the upper limit of misstatement is not above
        tolerable (``None`` without tolerable).
    accepts_at_tolerable, accepts_at_expected:
        The conclusion in the scaled scenarios (``None`` when not asked).
    usable_at_tolerable, usable_at_expected, scale_at_tolerable, scale_at_expected:
        Whether a population could be scaled, and its factor.
    second_opinion:
        With ``Settings.second_opinion_replicates``: a dictionary of the
        same per-replication arrays for the rescaling bootstrap's
        percentile limits (``lower``, ``upper``, ``lower_bound``,
        ``covers``, ``covers_one_sided`` and, with tolerable and expected,
        ``accepts``, ``accepts_at_tolerable``, ``accepts_at_expected``)
        and the bootstrap ``seed`` of each replication; otherwise ``None``.
    flag_counts:
        ``{method: {code: (H,) int64}}``: replications in which the flag
        was raised for each stratum (estimate flags: length-1 arrays).
    flag_any:
        ``{method: {code: int}}``: replications in which it was raised for
        at least one stratum.
    kept:
        For the first ``keep`` replications: ``(replication, item position,
        stratum code, book value, audited value)`` arrays of every item
        examined, strata examined in full included.
    bounds:
        With ``Settings.bounds``: per-replication arrays of the finite-sample
        bounds (:mod:`auditmean.core.bound_simulation`), one column per
        bound: ``upper`` (upper bound on overstatement, as modelled),
        ``covers`` (not below the population's misstatement), and with
        tolerable and expected ``accepts``, ``accepts_at_tolerable``,
        ``accepts_at_expected`` (the bound not above tolerable),
        ``within_at_tolerable`` and ``within_at_expected`` (the scaled
        population keeps every item's overstatement at most its stratum's
        largest book value, the condition of the bound's guarantee).
        Otherwise ``None``.
    """

    methods: tuple[str, ...]
    requested: int
    completed: int
    stopped_early: bool
    batch_size: int
    true_totals: np.ndarray
    population_misstatement: np.ndarray
    total: np.ndarray
    std_error: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    lower_bound: np.ndarray
    covers: np.ndarray
    covers_one_sided: np.ndarray
    accepts: np.ndarray | None
    accepts_at_tolerable: np.ndarray | None
    accepts_at_expected: np.ndarray | None
    usable_at_tolerable: np.ndarray | None
    usable_at_expected: np.ndarray | None
    scale_at_tolerable: np.ndarray | None
    scale_at_expected: np.ndarray | None
    second_opinion: dict[str, np.ndarray] | None
    flag_counts: dict[str, dict[str, np.ndarray]]
    flag_any: dict[str, dict[str, int]]
    kept: tuple[np.ndarray, ...] | None
    bounds: dict[str, np.ndarray] | None = None


def _scale_to(target: float, misstatement: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Factor ``target / M`` per population and whether it could be applied."""
    if target == 0:
        return np.zeros(misstatement.shape), np.ones(misstatement.shape, dtype=bool)
    ok = misstatement > 0
    with np.errstate(invalid="ignore", divide="ignore"):
        c = np.where(ok, target / np.where(ok, misstatement, 1.0), np.nan)
    return c, ok


def _examined(design: Design, batch: Batch, r: int, misstatement, process):
    """Positions, book values and misstatements of every item examined in replication ``r``, per stratum."""
    out = []
    for h in range(design.counts.shape[0]):
        if batch.x[h] is not None:
            out.append((batch.positions[h][r], batch.x[h][r], batch.m[h][r]))
        else:
            x = design.book[h]
            m = x * batch.full_taints[h][r] if process is not None else misstatement[h]
            out.append((np.arange(int(design.counts[h])), x, m))
    return out


def _kept_items(design: Design, batch: Batch, rows: int, start: int, misstatement, process):
    """The examined items of the first ``rows`` replications of a batch, for listing."""
    rep, item, code, book, audited = [], [], [], [], []
    for r in range(rows):
        for h, (pos, x, m) in enumerate(_examined(design, batch, r, misstatement, process)):
            rep.append(np.full(pos.size, start + r))
            item.append(design.items[h][pos])
            code.append(np.full(pos.size, h))
            book.append(x)
            audited.append(x - m)
    return tuple(np.concatenate(a) for a in (rep, item, code, book, audited))


# Replications between two progress reports while the second opinion runs.
_SECOND_OPINION_STEP = 8


def run_simulation(
    design: Design,
    settings: Settings,
    replications: int,
    seed: int,
    misstatement: Sequence[np.ndarray] | None = None,
    process: ErrorProcess | None = None,
    progress: Callable[[int, int], bool | None] | None = None,
    keep: int = 0,
) -> SimulationOutput:
    """Run the simulation in batches; see the module docstring.

    Exactly one of ``misstatement`` (a fixed population, per stratum amounts
    ``book * taint`` aligned with ``design.book``) and ``process`` (fresh
    misstatement in every replication) is given. ``progress(done, total)``
    is called after each batch (and, while the second opinion runs, every
    few replications); when it returns ``False`` the run stops and the
    replications completed are returned with ``stopped_early`` set.

    The second opinion (``settings.second_opinion_replicates > 0``) is the
    rescaling bootstrap of :func:`auditmean.core.bootstrap.rescaling_bootstrap`
    with Efron's percentile limits
    (:func:`auditmean.core.bootstrap.percentile_limits`), run on every
    replication's sample with the seed drawn for that replication from
    ``default_rng(SeedSequence(seed, spawn_key=(k, 1)))`` for chunk ``k``;
    the same seed serves every method and scenario of the replication.
    """
    methods = settings.methods
    M = len(methods)
    R = int(replications)
    H = design.counts.shape[0]
    boot = int(settings.second_opinion_replicates)
    B = CHUNK if boot else batch_size(design, process)
    book_total = float(np.sum(design.book_totals))
    tol = design.rounding
    TM, EM = settings.tolerable, settings.expected

    def matrix(dtype=float):
        return np.empty((R, M), dtype=dtype)

    true_totals = np.empty(R)
    pop_mis = np.empty(R)
    arrays = {k: matrix() for k in ("total", "std_error", "lower", "upper", "lower_bound")}
    covers, covers1 = matrix(bool), matrix(bool)
    accepts = matrix(bool) if TM is not None else None
    acc_tm = matrix(bool) if TM is not None else None
    acc_em = matrix(bool) if EM is not None else None
    use_tm = np.empty(R, dtype=bool) if TM is not None else None
    use_em = np.empty(R, dtype=bool) if EM is not None else None
    c_tm = np.empty(R) if TM is not None else None
    c_em = np.empty(R) if EM is not None else None
    so = None
    if boot:
        so = {k: matrix() for k in ("lower", "upper", "lower_bound")}
        so.update(covers=matrix(bool), covers_one_sided=matrix(bool), seed=np.empty(R, dtype=np.int64))
        if TM is not None:
            so.update(accepts=matrix(bool), accepts_at_tolerable=matrix(bool))
        if EM is not None:
            so["accepts_at_expected"] = matrix(bool)
    flag_counts = {
        m: {
            **{code: np.zeros(H, dtype=np.int64) for code in STRATUM_FLAGS},
            **{code: np.zeros(1, dtype=np.int64) for code in ESTIMATE_FLAGS},
        }
        for m in methods
    }
    flag_any = {m: {code: 0 for code in (*STRATUM_FLAGS, *ESTIMATE_FLAGS)} for m in methods}
    kept_parts = []
    bound_arrays = _bound_arrays(R, settings) if settings.bounds else None
    if bound_arrays is not None:
        from auditmean.core import bound_simulation as core_bound

        zero_bound = core_bound.zero_sample_bound(
            design.counts, design.sizes, design.full, design.largest, settings.confidence
        )

    def conclude(ev: _Evaluation) -> np.ndarray:
        se = np.sqrt(np.maximum(ev.variance, 0.0))
        c1 = _critical(settings, ev.df, two_sided=False)
        return book_total - (ev.total - c1 * se) <= TM + tol

    done = 0
    k = 0
    stopped = False
    while done < R:
        b = min(B, R - done)
        chunks = []
        first_chunk = k
        for start in range(0, b, CHUNK):
            chunks.append((chunk_generator(seed, k), min(CHUNK, b - start)))
            k += 1
        keep_here = max(0, min(keep - done, b))
        batch = draw_batch(chunks, design, misstatement, process, keep_full=keep_here > 0 or boot > 0)
        moments = [None if x is None else batch_moments(x, batch.m[h]) for h, x in enumerate(batch.x)]
        mis = batch.stratum_misstatement.sum(axis=1)
        truth = book_total - mis
        sl = slice(done, done + b)
        true_totals[sl] = truth
        pop_mis[sl] = mis
        scenarios = [("as modelled", np.ones(b), np.ones(b, dtype=bool))]
        if TM is not None:
            ctm, oktm = _scale_to(TM, mis)
            c_tm[sl], use_tm[sl] = ctm, oktm
            scenarios.append(("tolerable", np.nan_to_num(ctm), oktm))
        if EM is not None:
            cem, okem = _scale_to(EM, mis)
            c_em[sl], use_em[sl] = cem, okem
            scenarios.append(("expected", np.nan_to_num(cem), okem))
        batch_flags = {}
        for j, method in enumerate(methods):
            ev = evaluate_batch(design, moments, batch.stratum_misstatement, 1.0, settings, method)
            se = np.sqrt(np.maximum(ev.variance, 0.0))
            c2 = _critical(settings, ev.df, two_sided=True)
            c1 = _critical(settings, ev.df, two_sided=False)
            lo, hi, lb = ev.total - c2 * se, ev.total + c2 * se, ev.total - c1 * se
            arrays["total"][sl, j] = ev.total
            arrays["std_error"][sl, j] = se
            arrays["lower"][sl, j] = lo
            arrays["upper"][sl, j] = hi
            arrays["lower_bound"][sl, j] = lb
            covers[sl, j] = (lo - tol <= truth) & (truth <= hi + tol)
            covers1[sl, j] = lb - tol <= truth
            if TM is not None:
                accepts[sl, j] = book_total - lb <= TM + tol
                ev_tm = evaluate_batch(
                    design, moments, batch.stratum_misstatement, scenarios[1][1], settings, method, with_flags=False
                )
                acc_tm[sl, j] = conclude(ev_tm) & oktm
            if EM is not None:
                ev_em = evaluate_batch(
                    design, moments, batch.stratum_misstatement, scenarios[2][1], settings, method, with_flags=False
                )
                acc_em[sl, j] = conclude(ev_em) & okem
            batch_flags[method] = ev.flags
        if bound_arrays is not None:
            _bounds_of_batch(design, batch, settings, scenarios, mis, zero_bound, bound_arrays, sl)

        finished = b
        if boot:
            finished = _second_opinion(
                design, batch, settings, scenarios, truth, so, done, seed, first_chunk,
                misstatement, process, progress, R,
            )
            stopped = finished < b
        for method, flags in batch_flags.items():
            for code, f in flags.items():
                if f.ndim == 2:
                    f = f[:finished]
                    flag_counts[method][code] += f.sum(axis=0)
                    flag_any[method][code] += int(f.any(axis=1).sum())
                else:
                    n_f = int(np.broadcast_to(f, (b,))[:finished].sum())
                    flag_counts[method][code][0] += n_f
                    flag_any[method][code] += n_f
        keep_here = min(keep_here, finished)
        if keep_here:
            kept_parts.append(_kept_items(design, batch, keep_here, done, misstatement, process))
        done += finished
        if stopped:
            break
        if progress is not None and progress(done, R) is False and done < R:
            stopped = True
            break

    def cut(a):
        return None if a is None else a[:done]

    kept = None
    if kept_parts:
        kept = tuple(np.concatenate([p[i] for p in kept_parts]) for i in range(5))
    return SimulationOutput(
        methods=methods,
        requested=R,
        completed=done,
        stopped_early=stopped,
        batch_size=B,
        true_totals=true_totals[:done],
        population_misstatement=pop_mis[:done],
        total=arrays["total"][:done],
        std_error=arrays["std_error"][:done],
        lower=arrays["lower"][:done],
        upper=arrays["upper"][:done],
        lower_bound=arrays["lower_bound"][:done],
        covers=covers[:done],
        covers_one_sided=covers1[:done],
        accepts=cut(accepts),
        accepts_at_tolerable=cut(acc_tm),
        accepts_at_expected=cut(acc_em),
        usable_at_tolerable=cut(use_tm),
        usable_at_expected=cut(use_em),
        scale_at_tolerable=cut(c_tm),
        scale_at_expected=cut(c_em),
        second_opinion=None if so is None else {key: a[:done] for key, a in so.items()},
        flag_counts=flag_counts,
        flag_any=flag_any,
        kept=kept,
        bounds=_cut_bounds(bound_arrays, done),
    )


def _second_opinion(design, batch, settings, scenarios, truth, so, done, seed, first_chunk,
                    misstatement, process, progress, R) -> int:
    """Bootstrap percentile limits for every replication of a batch; returns the replications finished."""
    b = batch.size
    conf = settings.confidence
    tol = design.rounding
    book_total = float(np.sum(design.book_totals))
    TM = settings.tolerable
    seeds = np.concatenate([
        np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(first_chunk + i, 1))).integers(
            0, 2**63 - 1, size=min(CHUNK, b - i * CHUNK)
        )
        for i in range(-(-b // CHUNK))
    ])
    codes = np.concatenate([
        np.full(int(design.counts[h] if batch.x[h] is None else design.sizes[h]), h, dtype=np.intp)
        for h in range(design.counts.shape[0])
    ])
    so["seed"][done: done + b] = seeds
    for r in range(b):
        parts = _examined(design, batch, r, misstatement, process)
        x = np.concatenate([p[1] for p in parts])
        m = np.concatenate([p[2] for p in parts])
        for j, method in enumerate(settings.methods):
            for name, scale, usable in scenarios:
                if name != "as modelled" and not usable[r]:
                    so["accepts_at_" + name][done + r, j] = False
                    continue
                y = x - scale[r] * m
                reps = rescaling_bootstrap(
                    method, codes, design.counts, y, x, design.book_totals,
                    replicates=settings.second_opinion_replicates, seed=int(seeds[r]),
                ).replicates
                lb, _ = percentile_limits(reps, conf, "lower")
                accept = book_total - lb <= TM + tol if TM is not None else None
                if name == "as modelled":
                    lo, hi = percentile_limits(reps, conf, "two-sided")
                    so["lower"][done + r, j] = lo
                    so["upper"][done + r, j] = hi
                    so["lower_bound"][done + r, j] = lb
                    so["covers"][done + r, j] = (lo - tol <= truth[r]) & (truth[r] <= hi + tol)
                    so["covers_one_sided"][done + r, j] = lb - tol <= truth[r]
                    if TM is not None:
                        so["accepts"][done + r, j] = accept
                else:
                    so["accepts_at_" + name][done + r, j] = accept
        finished = r + 1
        if progress is not None and finished < b and finished % _SECOND_OPINION_STEP == 0:
            if progress(done + finished, R) is False:
                return finished
    return b


def _bound_arrays(R: int, settings: Settings) -> dict:
    """Per-replication arrays of the finite-sample bounds, to be filled batch by batch."""
    K = len(settings.bounds)
    out: dict = {"upper": np.empty((R, K)), "covers": np.empty((R, K), dtype=bool)}
    if settings.tolerable is not None:
        out["accepts"] = np.empty((R, K), dtype=bool)
        out["accepts_at_tolerable"] = np.empty((R, K), dtype=bool)
        out["within_at_tolerable"] = np.empty(R, dtype=bool)
    if settings.expected is not None:
        out["accepts_at_expected"] = np.empty((R, K), dtype=bool)
        out["within_at_expected"] = np.empty(R, dtype=bool)
    return out


def _bounds_of_batch(design, batch, settings, scenarios, mis, zero, arrays, sl) -> None:
    """The finite-sample bound in every scenario of one batch (see :mod:`auditmean.core.bound_simulation`)."""
    from auditmean.core.bound_simulation import bound_batch

    tol = design.rounding
    TM = settings.tolerable
    uppers = bound_batch(
        batch.x, batch.m, batch.stratum_misstatement, [sc[1] for sc in scenarios],
        design.counts, design.largest, settings.confidence, zero,
    )
    sampled = ~design.full
    for name, scale, _ in scenarios[1:]:
        # Within the bound's condition: every item's overstatement at most its stratum's largest book value.
        over = scale[:, None] * batch.largest_overstatement[:, sampled]
        arrays["within_at_" + name][sl] = np.all(over <= design.largest[sampled] * (1.0 + 1e-12), axis=1)
    for j in range(len(settings.bounds)):  # one bound offered so far: the stratified betting bound
        up = uppers[0]
        arrays["upper"][sl, j] = up
        arrays["covers"][sl, j] = up + tol >= mis
        for (name, _, usable), u in zip(scenarios, uppers):
            if name == "as modelled":
                if TM is not None:
                    arrays["accepts"][sl, j] = u <= TM + tol
            else:
                arrays["accepts_at_" + name][sl, j] = (u <= TM + tol) & usable


def _cut_bounds(arrays: dict | None, done: int) -> dict[str, np.ndarray] | None:
    if arrays is None:
        return None
    return {k: v[:done] for k, v in arrays.items()}
