"""Benchmark of the coverage check with every bound (a plain script, not collected by pytest).

Run from the project folder::

    python tests/benchmarks/bench_coverage_bounds.py

Target (issue 13): the coverage check with every bound, 10,000 samples of
a 1,000,000-item population, in under 2 s.

Monetary-unit design: 1,000,000 invented lognormal book values (rounded to
the cent, 1% credits), the sample size for a tolerable misstatement of 2% and
an expected misstatement of 0.2% of the positive book total at 5% risk
(:func:`auditmean.monetary_unit_sample_size`), 5% of items misstated with
taints uniform between 5% and 50% (so that the populations scaled to
tolerable stay within the bounds' assumption and every bound is computed in
all three scenarios, the heaviest case); one misstated population sampled again
and again (``fixed_population=True``, as in bench_coverage.py), 10,000
samples, every bound (Stringer, error count, betting, error count or
betting) and the normal limit, as modelled and at tolerable and expected.

Stratified design: bench_coverage.py's population and design (400 of
1,000,000 items in 6 strata), five estimators with their flags, with and
without the finite-sample bound.

Peers measured in the same run (each timed on a few samples and
extrapolated to 10,000):

* monetary-unit, the straightforward loop over the public functions: per
  sample, :func:`auditmean.select_monetary_units` on the population table
  (SHA-256 draws), the audited values merged in, and
  :func:`auditmean.monetary_unit_bound` for each of the four bounds;
* monetary-unit, the same loop with the draws made by numpy (the
  selection table built by hand), to show what batching the bounds saves;
* stratified, :func:`auditmean.overstatement_bound` called on each sample.

Nothing is asserted: the script prints the times and the ratios. The
machine is shared: the load average is printed first.
"""

from __future__ import annotations

import os
import sys
import time

import numpy as np
import pandas as pd

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)

from _timing import best_of  # noqa: E402
from bench_coverage import make_population  # noqa: E402

from auditmean import (  # noqa: E402
    monetary_unit_bound,
    overstatement_bound,
    select_monetary_units,
    simulate_coverage,
    simulate_monetary_units,
)
from auditmean.coverage import MisstatementModel, UniformTaint  # noqa: E402
from auditmean.monetary_bound import METHODS, monetary_unit_sample_size  # noqa: E402

R = 10_000
POPULATION = 1_000_000
SELECT_LOOP = 2  # samples of the full public loop (select_monetary_units on a million items is slow)
BOUND_LOOP = 40  # samples of the loops that call the bound functions only


def mus_population(seed: int = 20240601) -> np.ndarray:
    rng = np.random.default_rng(seed)
    book = np.round(rng.lognormal(7.0, 1.3, POPULATION), 2)
    credits = rng.random(POPULATION) < 0.01
    book[credits] = -book[credits]
    return book  # invented


def _selection_by_numpy(rng, book: np.ndarray, audited: np.ndarray, n: int) -> tuple[pd.DataFrame, float]:
    """A selection table as select_monetary_units returns it, the draws made by numpy (for the peer loop)."""
    cents = np.rint(book * 100).astype(np.int64)
    pos = np.flatnonzero(cents > 0)
    ends = np.cumsum(cents[pos])
    B = int(ends[-1])
    draws = rng.integers(0, B, size=n)
    item = pos[np.searchsorted(ends, draws, side="right")]
    full = pos[cents[pos] * n >= B]
    rows = np.union1d(item, full)
    units = {i: [] for i in rows}
    for k, i in enumerate(item, start=1):
        units[i].append(k)
    table = pd.DataFrame({
        "item_id": [str(i) for i in rows],
        "book_value": book[rows],
        "hits": [len(units[i]) for i in rows],
        "examined_in_full": np.isin(rows, full),
        "units": [" ".join(map(str, units[i])) for i in rows],
        "audited_value": audited[rows],
    })
    return table, B / 100.0


def bench_monetary() -> None:
    book = mus_population()
    positive = book[np.rint(book * 100) > 0]
    B = float(np.rint(positive * 100).sum() / 100)
    TM, EM = 0.02 * B, 0.002 * B
    n = monetary_unit_sample_size(B, TM, EM, 0.05)
    model = MisstatementModel(0.05, UniformTaint(0.05, 0.5))
    print(f"monetary-unit design: {POPULATION:,} items, {n} draws (tolerable 2%, expected 0.2% of "
          f"{B:,.0f}), 5% of items misstated, taints uniform 5%-50%")

    def run(fixed: bool, reps: int = R, bounds=None):
        return simulate_monetary_units(book, n, model, replications=reps, seed=1, tolerable=TM, expected=EM,
                                       fixed_population=fixed, bounds=bounds)

    t_all, res = best_of(lambda: run(True), repeat=3)
    t_stringer, _ = best_of(lambda: run(True, bounds=("stringer",)), repeat=3)
    t_normal, _ = best_of(lambda: run(True, bounds=()), repeat=3)
    t_fresh, _ = best_of(lambda: run(False, reps=2_000), repeat=1)

    # Peer 1: the straightforward loop over the public functions, SHA-256 selection included.
    items = pd.DataFrame({"item_id": [f"IT{i:07d}" for i in range(POPULATION)], "book_value": book})
    audited = model.audited_values(positive, seed=1)
    audited_all = book.copy()
    audited_all[np.rint(book * 100) > 0] = audited
    by_id = pd.Series(audited_all, index=items["item_id"])
    t0 = time.perf_counter()
    for k in range(SELECT_LOOP):
        sel = select_monetary_units(items, n, f"bench-{k}", nonpositive="apart")
        sel["audited_value"] = by_id.loc[sel["item_id"]].to_numpy()
        book_total = sel.attrs["monetary_units"]["book_total"]
        for m in METHODS:
            monetary_unit_bound(sel, book_total, n, 0.95, m)
    t_loop_select = (time.perf_counter() - t0) / SELECT_LOOP * R

    # Peer 2: the loop with numpy draws, the bounds one sample at a time.
    rng = np.random.default_rng(2)
    tables = [_selection_by_numpy(rng, book, audited_all, n) for _ in range(BOUND_LOOP)]
    t0 = time.perf_counter()
    for table, book_total in tables:
        for m in METHODS:
            monetary_unit_bound(table, book_total, n, 0.95, m)
    t_loop_bounds = (time.perf_counter() - t0) / BOUND_LOOP * R

    print(f"simulate_monetary_units, every bound + normal limit, {R:,} samples   {t_all:8.3f} s   (target: under 2 s)")
    print(f"  the same with Stringer only                                  {t_stringer:8.3f} s")
    print(f"  the same with the normal limit only (draws, lookup, scaling)  {t_normal:8.3f} s")
    print(f"  a new misstated population per sample, 2,000 samples         {t_fresh:8.3f} s")
    print(f"loop: select_monetary_units + monetary_unit_bound x 4, extrapolated   {t_loop_select:10.1f} s"
          f"   (from {SELECT_LOOP} samples)")
    print(f"loop: numpy draws + monetary_unit_bound x 4, extrapolated            {t_loop_bounds:10.1f} s"
          f"   (from {BOUND_LOOP} samples)")
    print(f"ratio, public loop / engine                       {t_loop_select / t_all:10.0f}x")
    print(f"ratio, bound-only loop / engine                   {t_loop_bounds / t_all:10.0f}x")
    print()
    print(res.summary())
    print()


def bench_stratified() -> None:
    book, stratum, sizes = make_population()
    model = MisstatementModel(0.02, UniformTaint(0.05, 1.0))
    TM, EM = 0.03 * float(book.sum()), 0.005 * float(book.sum())
    print(f"stratified design: {POPULATION:,} items, {sum(sizes.values())} examined in {len(sizes)} strata "
          "(bench_coverage.py's), 2% of items misstated, taints uniform 5%-100%")

    def run(bounds=None, reps: int = R, keep: int = 0):
        return simulate_coverage(book, stratum, sizes, model, replications=reps, seed=1, tolerable=TM,
                                 expected=EM, fixed_population=True, bounds=bounds, keep_samples=keep)

    t_with, res = best_of(lambda: run(), repeat=3)
    t_without, _ = best_of(lambda: run(()), repeat=3)

    kept = run(reps=BOUND_LOOP, keep=BOUND_LOOP).kept_samples
    strata = res.strata[["stratum", "count", "book_total"]].copy()
    strata["largest_book_value"] = [float(book[stratum == s].max()) for s in strata["stratum"]]
    samples = [g[["stratum", "book_value", "audited_value"]] for _, g in kept.groupby("replication")]
    t0 = time.perf_counter()
    for s in samples:
        overstatement_bound(s, strata, 0.95)
    t_loop = (time.perf_counter() - t0) / len(samples) * R

    print(f"simulate_coverage, 5 estimators + flags + bound, {R:,} samples   {t_with:8.3f} s")
    print(f"  the same without the bound (bounds=())                      {t_without:8.3f} s"
          f"   (bound adds {t_with / t_without:.2f}x)")
    print(f"loop: overstatement_bound per sample, extrapolated             {t_loop:8.1f} s   (from {len(samples)})")
    print(f"ratio, loop / bound's share of the engine         {t_loop / max(t_with - t_without, 1e-9):10.0f}x")
    print()
    print(res.summary())


def main() -> None:
    load = os.getloadavg() if hasattr(os, "getloadavg") else (float("nan"),) * 3
    print(f"load average at start: {load[0]:.2f} {load[1]:.2f} {load[2]:.2f} ({os.cpu_count()} cores)")
    print()
    bench_monetary()
    bench_stratified()


if __name__ == "__main__":
    main()
