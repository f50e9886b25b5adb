"""The simulation engine's sampling and batched estimators against outside references.

* Simple random sampling without replacement (Cochran 1977, Sampling
  Techniques, 3rd ed., section 2.2: every set of n items equally likely):
  each item is included with probability n/N, and each pair with
  probability C(N-2, n-2) / C(N, n) = n(n-1)/(N(N-1)) (arithmetic);
  frequencies checked with scipy.stats.chisquare and scipy.stats.binomtest.
* auditmean.core.estimators.estimate_strata on the same samples (the
  one-at-a-time engine), to 1e-12 relative.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from auditmean.core import estimators as est
from auditmean.core import simulation as sim

P_FLOOR = 1e-6


@pytest.mark.parametrize(("N", "n"), [(50, 10), (50, 40), (7, 7), (1000, 1)])
def test_samples_are_distinct_sorted_and_uniform(N, n):
    rng = np.random.default_rng(N * 100 + n)
    B = 20_000
    s = sim.draw_without_replacement(rng, B, N, n)
    assert s.shape == (B, n) and s.min() >= 0 and s.max() < N
    assert np.all(np.diff(s, axis=1) > 0)  # sorted and distinct within each sample
    if n == N:
        return
    # Inclusion probability n/N for every item: chi-square on the inclusion counts.
    hits = np.bincount(s.ravel(), minlength=N)
    assert stats.chisquare(hits).pvalue > P_FLOOR
    if n >= 2:
        # Pair (0, 1) together with probability n(n-1) / (N(N-1)).
        both = int(np.sum(np.any(s == 0, axis=1) & np.any(s == 1, axis=1)))
        assert stats.binomtest(both, B, n * (n - 1) / (N * (N - 1))).pvalue > P_FLOOR


def test_batch_sizes_are_whole_chunks():
    design = _design(np.array([5_000, 300]), np.array([50, 300]))
    b = sim.batch_size(design, None)
    assert b % sim.CHUNK == 0 and b >= sim.CHUNK


def _design(N, n, seed=0, large=None):
    rng = np.random.default_rng(seed)
    books = [np.round(rng.lognormal(6, 1, k), 2) + 1 for k in N]
    return sim.Design(
        counts=np.asarray(N, dtype=np.int64),
        sizes=np.asarray(n, dtype=np.int64),
        book_totals=np.array([b.sum() for b in books]),
        book=tuple(books),
        items=tuple(np.arange(k) for k in N),
        n_large=np.zeros(len(N), dtype=np.int64) if large is None else np.asarray(large, dtype=np.int64),
        rounding=1e-12 * sum(b.sum() for b in books),
    )


@pytest.mark.parametrize("method", est.METHODS)
def test_batched_estimators_equal_estimate_strata(method):
    N = np.array([400, 250, 30, 900, 15])
    n = np.array([25, 1, 30, 40, 2])  # a single item, a stratum examined in full, a pair
    design = _design(N, n)
    rng = np.random.default_rng(5)
    taus = [np.where(rng.random(k) < 0.3, rng.uniform(-0.2, 0.9, k), 0.0) for k in N]
    mis = [b * t for b, t in zip(design.book, taus)]
    batch = sim.draw_batch([(sim.chunk_generator(3, 0), 6)], design, misstatement=mis)
    moments = [None if x is None else sim.batch_moments(x, batch.m[h]) for h, x in enumerate(batch.x)]
    for ratio_variance in est.RATIO_VARIANCES:
        settings = sim.Settings(ratio_variance=ratio_variance)
        ev = sim.evaluate_batch(design, moments, batch.stratum_misstatement, 1.0, settings, method)
        for r in range(6):
            codes, book, audited = [], [], []
            for h in range(N.size):
                x = design.book[h] if batch.x[h] is None else batch.x[h][r]
                m = mis[h] if batch.x[h] is None else batch.m[h][r]
                codes.append(np.full(x.size, h))
                book.append(x)
                audited.append(x - m)
            ref = est.estimate_strata(method, np.concatenate(codes), N, np.concatenate(audited),
                                      np.concatenate(book), design.book_totals, ratio_variance=ratio_variance)
            assert ev.total[r] == pytest.approx(ref.total, rel=1e-12)
            assert ev.variance[r] == pytest.approx(ref.variance, rel=1e-12)
            assert ev.df[r] == pytest.approx(ref.df, rel=1e-9)


def test_no_misstatement_gives_exactly_zero_variance_for_book_value_methods():
    # Differences that are all zero make every residual exactly zero (no rounding noise):
    # difference, ratio and regression intervals have zero width and the flags say so.
    design = _design(np.array([2_000, 500]), np.array([40, 30]))
    mis = [np.zeros(2_000), np.zeros(500)]
    batch = sim.draw_batch([(sim.chunk_generator(1, 0), 50)], design, misstatement=mis)
    moments = [sim.batch_moments(x, batch.m[h]) for h, x in enumerate(batch.x)]
    for method in ("difference", "ratio", "combined_ratio", "regression"):
        ev = sim.evaluate_batch(design, moments, batch.stratum_misstatement, 1.0, sim.Settings(), method)
        assert np.all(ev.variance == 0.0), method
        np.testing.assert_allclose(ev.total, design.book_totals.sum(), rtol=1e-13)
        assert ev.flags["interval-unusable"].all() and ev.flags["no-differences"].all()
    ev = sim.evaluate_batch(design, moments, batch.stratum_misstatement, 1.0, sim.Settings(), "mpu")
    assert np.all(ev.variance > 0)


def test_scaling_multiplies_every_misstatement():
    # Scale c applied to the moments equals drawing the population with taints times c.
    design = _design(np.array([600, 80]), np.array([30, 20]))
    rng = np.random.default_rng(9)
    mis = [b * np.where(rng.random(b.size) < 0.4, 0.3, 0.0) for b in design.book]
    batch = sim.draw_batch([(sim.chunk_generator(2, 0), 10)], design, misstatement=mis)
    scaled = sim.draw_batch([(sim.chunk_generator(2, 0), 10)], design, misstatement=[2.5 * m for m in mis])
    mo = [sim.batch_moments(x, batch.m[h]) for h, x in enumerate(batch.x)]
    mo2 = [sim.batch_moments(x, scaled.m[h]) for h, x in enumerate(scaled.x)]
    for method in est.METHODS:
        a = sim.evaluate_batch(design, mo, batch.stratum_misstatement, 2.5, sim.Settings(), method)
        b = sim.evaluate_batch(design, mo2, scaled.stratum_misstatement, 1.0, sim.Settings(), method)
        np.testing.assert_allclose(a.total, b.total, rtol=1e-12)
        np.testing.assert_allclose(a.variance, b.variance, rtol=1e-9)
