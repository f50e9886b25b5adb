"""Planning recompute latency: plan_sample on precomputed strata of a 1,000,000-item population.

Run from the project folder: ``python tests/benchmarks/bench_planning.py``.
Stratify once (invented lognormal book values), then time plan_sample as a
user changing the tolerable misstatement would trigger it. Nothing is asserted.
"""

from __future__ import annotations

import os
import sys
import time

import numpy as np
import pandas as pd

sys.path.insert(0, os.path.dirname(__file__))
from _timing import best_of  # noqa: E402

from auditmean.plan import plan_sample  # noqa: E402
from auditmean.strata import stratify  # noqa: E402

N = 1_000_000


def main() -> None:
    rng = np.random.default_rng(5)
    items = pd.DataFrame({"item_id": [f"A{i}" for i in range(N)], "book_value": np.round(rng.lognormal(6, 1.4, N), 2)})
    t = time.perf_counter()
    strata = stratify(items, n_strata=4, top_items=50)
    t_stratify = time.perf_counter() - t
    tolerables = np.linspace(2e6, 2e7, 50)
    t_plan, _ = best_of(lambda: [plan_sample(strata, tolerable=float(tm), risk_incorrect_acceptance=0.05) for tm in tolerables])
    per = t_plan / tolerables.size
    print(f"population of {N:,} items, {len(strata.labels)} strata (stratify once: {t_stratify:.2f} s)")
    print(f"plan_sample on the precomputed strata           {per * 1000:8.3f} ms per recompute ({tolerables.size} tolerables)")


if __name__ == "__main__":
    main()
