"""Benchmark: how fast the sample-size panel answers a changed input, on 1,000,000 items.

A plain script, not collected by pytest. Run from the project folder::

    python tests/benchmarks/bench_widgets.py

The population is invented here (lognormal book values from a fixed seed,
1 % credits, 1 % zeros), stratified once. The whole app is built on it
(every panel observes the shared state, as in the browser), then a planning
input is changed again and again as if typed: each change re-plans
(``plan_sample`` on the strata's statistics), redraws the allocation
picture in place (one ``batch_update`` of the FigureWidget), rewrites the
plan's table and lets every other panel react. The time from setting the
input's value to the moment all of that is done is the latency.

Peer measured in the same run: the bare ``plan_sample`` call with the same
inputs. The script prints both and their ratio. Nothing is asserted; the
goal is a latency well under 100 ms.
"""

from __future__ import annotations

import os
import statistics
import time

os.environ.setdefault("PLOTLY_RENDERER", "plotly_mimetype")

import numpy as np
import pandas as pd

from auditmean.plan import MisstatementPattern, plan_sample
from auditmean.population import load_population, profile
from auditmean.strata import stratify
from auditmean.widgets import App, EngagementState

ITEMS = 1_000_000
REPEATS = 60
STRATIFY = {"method": "cumulative_sqrt", "n_strata": 5, "top_items": 500, "n_classes": 2000}
PLAN = {
    "tolerable": 4_000_000.0,
    "expected": 500_000.0,
    "risk_incorrect_acceptance": 0.05,
    "risk_incorrect_rejection": 0.20,
    "method": "ratio",
    "std_dev_source": MisstatementPattern(0.04, 0.2),
    "minimum": 30,
}


def make_population():
    rng = np.random.default_rng(20240614)
    book = np.round(rng.lognormal(6.5, 1.4, ITEMS), 2)
    u = rng.random(ITEMS)
    book[u < 0.01] = 0.0
    credits = u > 0.99
    book[credits] = -np.round(rng.lognormal(3.0, 1.0, int(credits.sum())), 2)
    ids = pd.array([f"BX-{i:07d}" for i in range(ITEMS)], dtype="str")
    return load_population(pd.DataFrame({"item_id": ids, "book_value": book}), id_column="item_id",
                           value_column="book_value")


def timed(fn, repeats: int) -> list[float]:
    out = []
    for i in range(repeats):
        t = time.perf_counter()
        fn(i)
        out.append(time.perf_counter() - t)
    return out


def describe(label: str, times: list[float]) -> str:
    ms = sorted(1000 * t for t in times)
    p95 = ms[min(len(ms) - 1, int(0.95 * len(ms)))]
    return f"{label:<52} median {statistics.median(ms):7.2f} ms   95th percentile {p95:7.2f} ms   max {ms[-1]:7.2f} ms"


def main() -> None:
    t = time.perf_counter()
    population = make_population()
    strata = stratify(population, **STRATIFY)
    print(f"population of {population.count:,} items read and stratified in {time.perf_counter() - t:.1f} s "
          f"({len(strata.labels)} strata)")
    state = EngagementState(population=population, profile=profile(population), strata=strata)
    t = time.perf_counter()
    app = App(state)
    print(f"app built (every panel) in {time.perf_counter() - t:.1f} s")
    panel = app.plan
    for name, value in PLAN.items():  # the same inputs as the bare call below
        if name == "std_dev_source":
            panel.source.value = "pattern"
            panel.error_rate.value, panel.typical_taint.value = value.error_rate, value.typical_taint
        elif name == "risk_incorrect_rejection":
            panel.use_rejection.value, panel.risk_rejection.value = True, value
        elif name == "risk_incorrect_acceptance":
            panel.risk_acceptance.value = value
        elif name == "minimum":
            panel.minimum_from_checks.value = value == "checks"
            if value != "checks":
                panel.minimum.value = value
        else:
            getattr(panel, name).value = value
    assert panel.message.value == "", panel.message.value
    print(f"sample size {state.plan.total_size:,} of {state.plan.population_count:,} items")
    fw = panel.figure
    tolerables = [PLAN["tolerable"] * (0.8 + 0.4 * (i % 7) / 6) for i in range(REPEATS + 1)]

    def change_tolerable(i: int) -> None:
        panel.tolerable.value = tolerables[i + 1]

    def change_risk(i: int) -> None:
        panel.risk_acceptance.value = (0.05, 0.10, 0.025)[i % 3]

    def change_allocation(i: int) -> None:
        panel.allocation.value = ("proportional", "neyman")[i % 2]

    def bare(i: int) -> None:
        plan_sample(strata, **{**PLAN, "tolerable": tolerables[i + 1]})

    timed(change_tolerable, 5)  # warm up
    bare_times = timed(bare, REPEATS)
    panel_times = timed(change_tolerable, REPEATS)
    panel.tolerable.value = PLAN["tolerable"]
    risk_times = timed(change_risk, REPEATS // 2)
    panel.risk_acceptance.value = PLAN["risk_incorrect_acceptance"]
    alloc_times = timed(change_allocation, REPEATS // 2)
    assert panel.figure is fw, "the picture must be changed in place, not replaced"
    direct = plan_sample(strata, **{**PLAN, "allocation": panel.allocation.value})
    assert state.plan.sizes == direct.sizes, "the panel must show the engine's plan"

    print()
    print(describe("bare plan_sample (peer)", bare_times))
    print(describe("panel: tolerable misstatement typed, all redrawn", panel_times))
    print(describe("panel: risk of incorrect acceptance changed", risk_times))
    print(describe("panel: allocation changed", alloc_times))
    ratio = statistics.median(panel_times) / statistics.median(bare_times)
    print(f"\nratio of medians, panel / bare plan_sample: {ratio:.1f}")
    print(f"goal: well under 100 ms on {ITEMS:,} items; median {1000 * statistics.median(panel_times):.1f} ms")


if __name__ == "__main__":
    main()
