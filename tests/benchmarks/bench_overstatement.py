"""Benchmark of the finite-sample bound for stratified samples (a plain script, not collected by pytest).

Run from the project folder::

    python tests/benchmarks/bench_overstatement.py

The design: 1,000,000 invented lognormal book values in 5 sampled strata
(cut at quantiles) and a top stratum of the 40 largest items examined in
full; 400 items sampled (80 per stratum); 5% of items misstated with taints
uniform between 10% and 60%.

Measured, each the best of three:

* one sample: :func:`auditmean.overstatement_bound` on the sample's frames,
  against :func:`auditmean.estimate_total` (separate ratio) on the same
  frames, the peer;
* 10,000 samples: the batched core
  (:func:`auditmean.core.finite_bounds.stratified_overstatement_bound`), against
  the coverage simulation's batched separate-ratio estimator on the same
  samples (moments and normal limits,
  :func:`auditmean.core.simulation.evaluate_batch`, no flags), the peer;
  and against calling the core once per sample (the first 500, extrapolated).

Nothing is asserted: the script prints the times and the ratios.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from _timing import best_of

import auditmean
from auditmean.core import finite_bounds as fb
from auditmean.core.simulation import (
    Design,
    Settings,
    batch_moments,
    draw_without_replacement,
    evaluate_batch,
)

POPULATION = 1_000_000
R = 10_000
SIZES = (80, 80, 80, 80, 80)
LOOP = 500


def make_population(seed: int = 20240601):
    rng = np.random.default_rng(seed)
    book = np.round(rng.lognormal(7.0, 1.3, POPULATION), 2)
    order = np.argsort(-book, kind="stable")
    rest = order[40:]
    code = np.searchsorted(np.quantile(book[rest], [0.40, 0.70, 0.88, 0.97]), book, side="right")
    code[order[:40]] = 5
    audited = book.copy()
    hit = rng.random(POPULATION) < 0.05
    hit[order[:40]] = False
    audited[hit] = np.round(book[hit] * (1 - rng.uniform(0.1, 0.6, hit.sum())), 2)
    return book, audited, code


def main() -> None:
    book, audited, code = make_population()
    H = 6
    counts = np.bincount(code, minlength=H)
    book_totals = np.bincount(code, weights=book, minlength=H)
    largest = np.array([book[code == h].max() for h in range(H)])
    diff = book - audited
    rng = np.random.default_rng(1)
    blocks, xs = [], []
    for h in range(5):
        items = np.flatnonzero(code == h)
        pos = items[draw_without_replacement(rng, R, items.size, SIZES[h])]
        blocks.append(diff[pos])
        xs.append(book[pos])
    top = np.flatnonzero(code == 5)
    census = np.zeros((R, H))
    census[:, 5] = diff[top].sum()

    # One sample, public functions on frames.
    rows = [pd.DataFrame({"stratum": f"S{h}", "book_value": xs[h][0], "audited_value": xs[h][0] - blocks[h][0]})
            for h in range(5)]
    rows.append(pd.DataFrame({"stratum": "top", "book_value": book[top], "audited_value": audited[top]}))
    sample = pd.concat(rows, ignore_index=True)
    strata = pd.DataFrame({"stratum": [f"S{h}" for h in range(5)] + ["top"], "count": counts,
                           "book_total": book_totals, "largest_book_value": largest})
    t_one, one = best_of(lambda: auditmean.overstatement_bound(sample, strata, confidence=0.95))
    t_est, _ = best_of(lambda: auditmean.estimate_total(sample, strata, "ratio", 0.95, "lower"))
    t_core1, _ = best_of(lambda: fb.stratified_overstatement_bound(
        [b[:1] for b in blocks] + [None], counts, largest, 0.95, census=census[:1]))

    # 10,000 samples, batched core.
    t_batch, res = best_of(lambda: fb.stratified_overstatement_bound(
        blocks + [None], counts, largest, 0.95, census=census))
    design = Design(counts=counts, sizes=np.array(list(SIZES) + [counts[5]]), book_totals=book_totals,
                    book=tuple(book[code == h] for h in range(H)), items=tuple(np.flatnonzero(code == h) for h in range(H)),
                    n_large=np.zeros(H, dtype=np.int64), rounding=0.01)

    def normal():
        moments = [batch_moments(xs[h], blocks[h]) for h in range(5)] + [None]
        return evaluate_batch(design, moments, census, 1.0, Settings(methods=("ratio",)), "ratio", with_flags=False)

    t_normal, _ = best_of(normal)

    def loop():
        for r in range(LOOP):
            fb.stratified_overstatement_bound([b[r:r + 1] for b in blocks] + [None], counts, largest, 0.95,
                                              census=census[r:r + 1])

    t_loop, _ = best_of(loop, repeat=1)
    t_loop_all = t_loop * R / LOOP

    truth = diff.sum()
    print(f"design: {POPULATION:,} items, 5 sampled strata of {SIZES[0]} items + 40 in full; "
          f"true overstatement {truth:,.0f}; mean bound {res.upper.mean():,.0f}, "
          f"coverage {np.mean(res.upper >= truth):.3f}")
    print(f"{'measurement':<62}{'seconds':>10}{'ratio':>10}")
    print(f"{'one sample: overstatement_bound on frames':<62}{t_one:>10.4f}{t_one / t_est:>9.1f}x  (peer: estimate_total, ratio, {t_est:.4f} s)")
    print(f"{'one sample: core only':<62}{t_core1:>10.4f}")
    print(f"{'10,000 samples: batched core':<62}{t_batch:>10.3f}{t_batch / t_normal:>9.1f}x  (peer: batched ratio estimator, {t_normal:.3f} s)")
    print(f"{'10,000 samples: core called once per sample (extrapolated)':<62}{t_loop_all:>10.2f}{t_loop_all / t_batch:>9.0f}x  slower than batched")
    print(f"one-sample bound {one.upper:,.2f}; monetary-unit zero-error comparison {one.monetary_unit_zero_error_upper:,.2f}")


if __name__ == "__main__":
    main()
