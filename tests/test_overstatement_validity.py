"""Validity of the finite-sample bound for stratified samples, by simulation with the truth known.

Invented populations (lognormal book values; 3 and 5 strata, the largest
items in a top stratum examined in full), each misstated once by a
low-error pattern and then sampled 2,000 times by stratified simple random
sampling without replacement (every sample's items in a random order, as a
selection draws them). The bound at 95% must cover the population's true
overstatement in at least 95% of samples, less three Monte Carlo standard
errors (the house rule for coverage checks). Beside it the test prints the
coverage of the normal upper limit of auditmean's own estimators (separate
ratio and difference estimation, :func:`auditmean.core.simulation.evaluate_batch`)
on the same samples; those are shown, not asserted.

Run with ``-s`` to see the table.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from auditmean.core import finite_bounds as fb
from auditmean.core.simulation import (
    Design,
    Settings,
    batch_moments,
    draw_without_replacement,
    evaluate_batch,
)

SAMPLES = 2_000
CONFIDENCE = 0.95
# nominal - 3 Monte Carlo standard errors of a proportion at the nominal level
FLOOR = CONFIDENCE - 3 * math.sqrt(CONFIDENCE * (1 - CONFIDENCE) / SAMPLES)

# (population count, quantile cuts of the items below the top, top items examined in full, sizes)
POPULATIONS = {
    "3 strata": (1_500, (0.7,), 12, (50, 40)),
    "5 strata": (4_000, (0.5, 0.8, 0.95), 20, (60, 50, 40, 30)),
}
PATTERNS = ("a few 100% taints", "many small taints", "one huge error in a large item", "understatements")


def _population(count, cuts, top, seed):
    """Invented book values and stratum codes; the top stratum (last code) holds the largest items."""
    rng = np.random.default_rng(seed)
    book = np.round(rng.lognormal(8.0, 1.3, count), 2)
    order = np.argsort(-book, kind="stable")
    rest = order[top:]
    code = np.searchsorted(np.quantile(book[rest], cuts), book, side="right")
    code[order[:top]] = len(cuts) + 1
    return book, code


def _misstate(book, code, pattern, seed):
    """Audited values under one invented low-error pattern (no audited value below zero)."""
    rng = np.random.default_rng(seed)
    audited = book.copy()
    sampled = np.flatnonzero(code < code.max())  # items outside the top stratum
    if pattern == "a few 100% taints":
        audited[rng.choice(sampled, 6, replace=False)] = 0.0
    elif pattern == "many small taints":
        hit = sampled[rng.random(sampled.size) < 0.3]
        audited[hit] = np.round(book[hit] * (1 - rng.uniform(0.0, 0.1, hit.size)), 2)
    elif pattern == "one huge error in a large item":
        audited[sampled[np.argmax(book[sampled])]] = 0.0
    elif pattern == "understatements":
        under = sampled[rng.random(sampled.size) < 0.05]
        audited[under] = np.round(book[under] * (1 + rng.uniform(0.2, 0.5, under.size)), 2)
        over = sampled[rng.random(sampled.size) < 0.02]
        audited[over] = np.round(book[over] * (1 - rng.uniform(0.3, 1.0, over.size)), 2)
        top = np.flatnonzero(code == code.max())
        audited[top[:2]] = book[top[:2]] * 1.1  # understated items examined in full, too
    return audited


def _normal_coverage(design, xs, ms, census, truth, method):
    """Share of samples whose one-sided normal upper limit of misstatement is at or above the truth."""
    moments = [None if x is None else batch_moments(x, m) for x, m in zip(xs, ms)]
    ev = evaluate_batch(design, moments, census, 1.0, Settings(methods=(method,), confidence=CONFIDENCE),
                        method, with_flags=False)
    z = stats.norm.ppf(CONFIDENCE)
    upper = design.book_totals.sum() - (ev.total - z * np.sqrt(np.maximum(ev.variance, 0.0)))
    return float(np.mean(upper >= truth - 0.005))


@pytest.mark.parametrize("population", list(POPULATIONS))
@pytest.mark.parametrize("pattern", PATTERNS)
def test_bound_covers_the_true_overstatement(population, pattern):
    count, cuts, top, sizes = POPULATIONS[population]
    book, code = _population(count, cuts, top, seed=20240917)
    audited = _misstate(book, code, pattern, seed=PATTERNS.index(pattern) + 1)
    H = code.max() + 1
    rng = np.random.default_rng(7)

    counts = np.bincount(code, minlength=H)
    book_totals = np.bincount(code, weights=book, minlength=H)
    largest = np.array([book[code == h].max() for h in range(H)])
    diff = book - audited
    census = np.zeros((SAMPLES, H))
    blocks, xs, ms = [], [], []
    for h in range(H):
        items = np.flatnonzero(code == h)
        if h == H - 1:  # the top stratum: every item examined
            census[:, h] = diff[items].sum()
            blocks.append(None)
            xs.append(None)
            ms.append(None)
            continue
        positions = draw_without_replacement(rng, SAMPLES, items.size, sizes[h])
        positions = rng.permuted(positions, axis=1)  # the order drawn: random, not sorted
        chosen = items[positions]
        blocks.append(diff[chosen])
        xs.append(book[chosen])
        ms.append(diff[chosen])

    truth = diff.sum()  # book total minus audited total
    gross = np.maximum(diff[code < H - 1], 0.0).sum() + diff[code == H - 1].sum()  # what the bound bounds
    bound = fb.stratified_overstatement_bound(blocks, counts, largest, CONFIDENCE, census=census)
    covered = float(np.mean(bound.upper >= truth))
    covered_gross = float(np.mean(bound.upper >= gross))

    design = Design(counts=counts, sizes=np.array(list(sizes) + [counts[-1]]), book_totals=book_totals,
                    book=tuple(book[code == h] for h in range(H)), items=tuple(np.flatnonzero(code == h) for h in range(H)),
                    n_large=np.zeros(H, dtype=np.int64), rounding=0.01)
    ratio = _normal_coverage(design, xs, ms, census, truth, "ratio")
    difference = _normal_coverage(design, xs, ms, census, truth, "difference")
    print(
        f"\n{population}, {pattern}: true overstatement {truth:,.0f} (overstatements only {gross:,.0f}); "
        f"{SAMPLES:,} samples of {sum(sizes)} items + {top} in full\n"
        f"  coverage at {CONFIDENCE:.0%}: finite-sample bound {covered:.3f} (mean bound {bound.upper.mean():,.0f}); "
        f"normal limit, separate ratio {ratio:.3f}, difference {difference:.3f}; floor {FLOOR:.3f}"
    )
    assert covered_gross >= FLOOR
    assert covered >= FLOOR
    assert np.all(bound.upper >= bound.observed.sum(axis=1) - 1e-6)  # never below what was found
