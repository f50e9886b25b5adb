"""The estimator core against samplics on the same 1,000,000-row stratified sample.

Run from the project folder: ``python tests/benchmarks/bench_estimators.py``.
The sample is invented: 5 strata, 1,000,000 sampled items out of 4,000,000,
audited values a few per cent off the book values. Timed: the core
(``auditmean.core.estimators.estimate_strata``, arrays in) and the public
``estimate_total`` (frames in: validation, limits, flags), against
samplics' ``TaylorEstimator`` for the stratified total (mean-per-unit) and
the combined ratio. The numbers are printed side by side: they must agree.
Goal: core at least 20x faster than samplics. Nothing is asserted.
"""

from __future__ import annotations

import os
import sys
import warnings

import numpy as np
import pandas as pd

sys.path.insert(0, os.path.dirname(__file__))
from _timing import best_of  # noqa: E402

from auditmean.core.estimators import estimate_strata  # noqa: E402
from auditmean.evaluation.estimate import estimate_total  # noqa: E402

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    from samplics.estimation import TaylorEstimator
    from samplics.utils.types import PopParam

SAMPLE = 1_000_000


def make_sample(seed: int = 11):
    rng = np.random.default_rng(seed)
    H = 5
    counts = np.array([1_500_000, 1_000_000, 800_000, 500_000, 200_000])
    n = np.array([300_000, 250_000, 200_000, 150_000, 100_000])
    codes = np.repeat(np.arange(H), n)
    book = np.round(rng.lognormal(4.0 + codes * 0.8, 0.7), 2)
    audited = np.round(book * (1.0 - rng.binomial(1, 0.05, book.size) * rng.uniform(0, 0.5, book.size)), 2)
    # the population book totals differ a little from what the sample means suggest, as they would
    book_totals = np.array([book[codes == h].mean() * counts[h] * (1.0 + 0.002 * h) for h in range(H)])
    labels = np.array([f"S{h + 1}" for h in range(H)], dtype=object)
    sample = pd.DataFrame({"stratum": labels[codes], "item_id": [f"I{i}" for i in range(book.size)],
                           "book_value": book, "audited_value": audited})
    strata = pd.DataFrame({"stratum": labels, "count": counts, "book_total": book_totals})
    return codes, counts, book, audited, book_totals, sample, strata, n


def samplics_total(param, sample, n, counts, x=None):
    y = sample["audited_value"]
    weight = sample["stratum"].map(dict(zip([f"S{h + 1}" for h in range(5)], counts / n))).astype(float)
    fpc = {f"S{h + 1}": 1 - n[h] / counts[h] for h in range(5)}
    est = TaylorEstimator(param)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        est.estimate(y=y, x=x, samp_weight=weight, stratum=sample["stratum"], fpc=fpc)
    return est


def main() -> None:
    codes, counts, book, audited, book_totals, sample, strata, n = make_sample()
    t_core, core = best_of(lambda: estimate_strata("mpu", codes, counts, audited))
    t_core_r, core_r = best_of(lambda: estimate_strata("combined_ratio", codes, counts, audited, book, book_totals))
    t_public, public = best_of(lambda: estimate_total(sample, strata, method="mpu"), repeat=2)
    t_public_r, public_r = best_of(lambda: estimate_total(sample, strata, method="combined_ratio"), repeat=2)
    t_s, ref = best_of(lambda: samplics_total(PopParam.total, sample, n, counts), repeat=1)
    t_s_r, ref_r = best_of(lambda: samplics_total(PopParam.ratio, sample, n, counts, x=sample["book_value"]), repeat=1)
    ratio_total = float(ref_r.point_est) * float(book_totals.sum())
    ratio_se = float(ref_r.stderror) * float(book_totals.sum())
    print(f"stratified sample of {codes.size:,} items in 5 strata (population {counts.sum():,})")
    print(f"{'':38s}{'time':>9s}  {'total':>20s}  {'std error':>16s}")
    print(f"{'mpu: estimate_strata (core)':38s}{t_core:8.3f}s  {core.total:20,.2f}  {core.std_error:16,.4f}")
    print(f"{'mpu: estimate_total (public)':38s}{t_public:8.3f}s  {public.total:20,.2f}  {public.std_error:16,.4f}")
    print(f"{'mpu: samplics TaylorEstimator':38s}{t_s:8.3f}s  {float(ref.point_est):20,.2f}  {float(ref.stderror):16,.4f}")
    print(f"{'combined ratio: estimate_strata':38s}{t_core_r:8.3f}s  {core_r.total:20,.2f}  {core_r.std_error:16,.4f}")
    print(f"{'combined ratio: estimate_total':38s}{t_public_r:8.3f}s  {public_r.total:20,.2f}  {public_r.std_error:16,.4f}")
    print(f"{'combined ratio: samplics (ratio x X)':38s}{t_s_r:8.3f}s  {ratio_total:20,.2f}  {ratio_se:16,.4f}")
    print(f"samplics / core, mpu                  {t_s / t_core:8.1f}x   (goal: at least 20x)")
    print(f"samplics / core, combined ratio       {t_s_r / t_core_r:8.1f}x")
    print(f"samplics / estimate_total, mpu        {t_s / t_public:8.1f}x")
    print(f"relative difference of the totals     {abs(core.total / float(ref.point_est) - 1):.1e} (mpu), "
          f"{abs(core_r.total / ratio_total - 1):.1e} (ratio)")
    print(f"relative difference of the std errors {abs(core.std_error / float(ref.stderror) - 1):.1e} (mpu), "
          f"{abs(core_r.std_error / ratio_se - 1):.1e} (ratio)")


if __name__ == "__main__":
    main()
