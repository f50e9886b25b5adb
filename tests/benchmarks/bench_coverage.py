"""Benchmark of the coverage simulation (a plain script, not collected by pytest).

Run from the project folder::

    python tests/benchmarks/bench_coverage.py

The design: 1,000,000 invented lognormal book values in 6 strata, 400 items
examined (five sampled strata and a top stratum of 40 items examined in
full), 5% of items misstated with taints uniform between 10% and 60%; one
misstated population sampled again and again (``fixed_population=True``),
10,000 replications, all five estimators and the flags.

Peers measured in the same run:

* a bare vectorised draw-and-average of the same design (the samples drawn
  with the engine's own without-replacement draw, then one mean-per-unit
  total per replication, no standard error, no other estimator, no flags);
  the goal is to stay within 5 times its time;
* ways of drawing samples without replacement: the engine's (draw with
  replacement, redraw repeats), Floyd's algorithm vectorised, random keys
  with ``argpartition``, and ``Generator.choice`` in a loop;
* the straightforward loop a user would write: per replication, a pandas
  group-by sample of each stratum and samplics' ``TaylorEstimator`` for the
  mean-per-unit total, the total of the differences and the combined ratio
  (samplics has no separate regression estimator, so the loop does less
  than the engine); timed on a few replications and extrapolated to
  10,000. The goal is to be at least 100 times faster.

Nothing is asserted: the script prints the times and the ratios.
"""

from __future__ import annotations

import time
import warnings

import numpy as np
import pandas as pd

from auditmean.core import simulation as core_sim
from auditmean.coverage import MisstatementModel, UniformTaint, simulate_coverage

R = 10_000
POPULATION = 1_000_000
LOOP_REPLICATIONS = 5


def make_population(seed: int = 20240601):
    rng = np.random.default_rng(seed)
    book = np.round(rng.lognormal(7.0, 1.3, POPULATION), 2)
    order = np.argsort(-book, kind="stable")
    stratum = np.empty(POPULATION, dtype=object)
    # The 40 largest items are examined in full; the rest is cut at quantiles.
    top = order[:40]
    rest = np.ones(POPULATION, dtype=bool)
    rest[top] = False
    cuts = np.quantile(book[rest], [0.40, 0.70, 0.88, 0.97])
    codes = np.searchsorted(cuts, book, side="right")
    labels = np.array(["S1", "S2", "S3", "S4", "S5"], dtype=object)
    stratum[:] = labels[codes]
    stratum[top] = "S6 (top)"
    sizes = {"S1": 40, "S2": 50, "S3": 70, "S4": 90, "S5": 110, "S6 (top)": 40}
    return book, stratum, sizes


def best_of(fn, repeat=3):
    best = np.inf
    out = None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def prepared(book, stratum, sizes, model):
    """The arrays the engine needs, built once (what simulate_coverage validates and prepares)."""
    labels = list(sizes)
    codes = pd.Series(stratum).map({lab: h for h, lab in enumerate(labels)}).to_numpy(dtype=np.intp)
    H = len(labels)
    counts = np.bincount(codes, minlength=H).astype(np.int64)
    items = [np.flatnonzero(codes == h) for h in range(H)]
    books = [book[i] for i in items]
    audited = model.audited_values(book, seed=11)
    mis = [(book - audited)[i] for i in items]
    design = core_sim.Design(
        counts=counts,
        sizes=np.array([sizes[lab] for lab in labels], dtype=np.int64),
        book_totals=np.array([b.sum() for b in books]),
        book=tuple(books),
        items=tuple(items),
        n_large=np.zeros(H, dtype=np.int64),
        rounding=1e-12 * float(np.abs(book).sum()),
    )
    return design, mis, [audited[i] for i in items]


def bare_draw_and_average(design, audited_h, seed=5):
    """The peer: the same samples, one mean-per-unit total per replication, nothing else."""
    B = core_sim.batch_size(design, None)
    totals = np.empty(R)
    done = 0
    rng = np.random.default_rng(seed)
    while done < R:
        b = min(B, R - done)
        t = np.zeros(b)
        for h in range(design.counts.shape[0]):
            N, n = int(design.counts[h]), int(design.sizes[h])
            if n >= N:
                t += audited_h[h].sum()
                continue
            pos = core_sim.draw_without_replacement(rng, b, N, n)
            t += N * audited_h[h][pos].mean(axis=1)
        totals[done: done + b] = t
        done += b
    return totals


def bare_with_replacement(design, audited_h, seed=5):
    """The crudest draw: positions with replacement (not the planned design), then the mean."""
    rng = np.random.default_rng(seed)
    t = np.zeros(R)
    for h in range(design.counts.shape[0]):
        N, n = int(design.counts[h]), int(design.sizes[h])
        if n >= N:
            t += audited_h[h].sum()
            continue
        for start in range(0, R, 2000):
            b = min(2000, R - start)
            pos = rng.integers(0, N, size=(b, n))
            t[start: start + b] += N * audited_h[h][pos].mean(axis=1)
    return t


def floyd(rng, B, N, n):
    """Floyd's algorithm, vectorised over samples (Bentley and Floyd 1987, CACM 30, 754-757)."""
    out = np.empty((B, n), dtype=np.int64)
    for k, j in enumerate(range(N - n, N)):
        t = rng.integers(0, j + 1, size=B)
        seen = (out[:, :k] == t[:, None]).any(axis=1)
        out[:, k] = np.where(seen, j, t)
    return out


def random_keys(rng, B, N, n):
    """Random keys for every item, the n smallest by argpartition."""
    return np.argpartition(rng.random((B, N)), n - 1, axis=1)[:, :n]


def sampling_methods():
    """Times of 10,000 samples without replacement, for two strata of the design."""
    rows = []
    for N, n in ((89_990, 90), (29_960, 110)):
        rng = np.random.default_rng(1)
        t_engine, _ = best_of(lambda rng=rng, N=N, n=n: core_sim.draw_without_replacement(rng, R, N, n))
        t_floyd, _ = best_of(lambda rng=rng, N=N, n=n: floyd(rng, R, N, n))
        t0 = time.perf_counter()
        random_keys(rng, 100, N, n)
        t_keys = (time.perf_counter() - t0) / 100 * R
        t0 = time.perf_counter()
        for _ in range(500):
            rng.choice(N, n, replace=False)
        t_choice = (time.perf_counter() - t0) / 500 * R
        rows.append((N, n, t_engine, t_floyd, t_keys, t_choice))
    return rows


def straightforward_loop(book, stratum, audited, sizes, replications):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        from samplics.estimation import TaylorEstimator
        from samplics.utils.types import PopParam
    frame = pd.DataFrame({"stratum": stratum, "book": book, "audited": audited})
    counts = frame.groupby("stratum").size()
    rng = np.random.default_rng(3)
    out = []
    for _ in range(replications):
        sample = frame.groupby("stratum", group_keys=False)[["stratum", "book", "audited"]].apply(
            lambda g: g.sample(n=sizes[g.name], random_state=rng)
        )
        n = sample.groupby("stratum").size()
        weight = sample["stratum"].map(counts / n).astype(float)
        fpc = {h: 1 - n[h] / counts[h] for h in n.index}
        res = []
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for param, y, x in (
                (PopParam.total, sample["audited"], None),
                (PopParam.total, sample["audited"] - sample["book"], None),
                (PopParam.ratio, sample["audited"], sample["book"]),
            ):
                est = TaylorEstimator(param)
                est.estimate(y=y, x=x, samp_weight=weight, stratum=sample["stratum"], fpc=fpc)
                res.append((est.point_est, est.stderror))
        out.append(res)
    return out


def main() -> None:
    book, stratum, sizes = make_population()
    model = MisstatementModel(error_rate=0.05, taint=UniformTaint(0.1, 0.6))
    design, mis, audited_h = prepared(book, stratum, sizes, model)
    settings = core_sim.Settings()
    tm = 0.02 * float(book.sum())
    settings_risks = core_sim.Settings(tolerable=tm, expected=0.25 * tm)
    print(f"design: {POPULATION:,} items, {len(sizes)} strata, {sum(sizes.values())} items examined, "
          f"batch of {core_sim.batch_size(design, None)} replications; {R:,} replications\n")

    t_engine, _ = best_of(lambda: core_sim.run_simulation(design, settings, R, 7, misstatement=mis))
    t_risks, _ = best_of(lambda: core_sim.run_simulation(design, settings_risks, R, 7, misstatement=mis))
    t_bare, _ = best_of(lambda: bare_draw_and_average(design, audited_h))
    t_bare_wr, _ = best_of(lambda: bare_with_replacement(design, audited_h))
    t_public, res = best_of(
        lambda: simulate_coverage(book, stratum, sizes, model, replications=R, seed=7, fixed_population=True),
        repeat=1,
    )
    t0 = time.perf_counter()
    audited_all = model.audited_values(book, seed=11)
    straightforward_loop(book, stratum, audited_all, sizes, LOOP_REPLICATIONS)
    t_loop = (time.perf_counter() - t0) / LOOP_REPLICATIONS * R

    R_fresh = core_sim.CHUNK
    fresh_settings = core_sim.Settings()
    rates = np.full(len(sizes), 0.05)
    process = model._process(rates)
    t0 = time.perf_counter()
    core_sim.run_simulation(design, fresh_settings, R_fresh, 7, process=process)
    t_fresh = time.perf_counter() - t0

    print(f"engine, 5 estimators + flags                 {t_engine:8.3f} s")
    print(f"engine, + risks at tolerable and expected    {t_risks:8.3f} s")
    print(f"simulate_coverage end to end (validation,    {t_public:8.3f} s")
    print("  population draw, summary tables)")
    print(f"bare draw-and-average (same draw, mpu only)  {t_bare:8.3f} s")
    print(f"bare draw with replacement, mpu only         {t_bare_wr:8.3f} s")
    print(f"straightforward loop (pandas + samplics,     {t_loop:8.1f} s  (from {LOOP_REPLICATIONS} replications)")
    print("  3 estimators), extrapolated")
    print(f"fresh population every replication:          {t_fresh:8.3f} s for {R_fresh} replications "
          f"({t_fresh / R_fresh * R:.1f} s per {R:,})")
    print()
    print(f"sampling without replacement, {R:,} samples:   redraw repeats   Floyd   random keys*   rng.choice loop*")
    for N, n, a, b, c, d in sampling_methods():
        print(f"  {n} of {N:,}{'':19}{a:10.3f} s {b:7.3f} s {c:10.2f} s {d:12.2f} s")
    print("  (* measured on a few samples and extrapolated)")
    print()
    print(f"engine / bare draw-and-average               {t_engine / t_bare:8.2f}x   (goal: at most 5x)")
    print(f"engine with risks / bare                     {t_risks / t_bare:8.2f}x")
    print(f"loop / engine                                {t_loop / t_engine:8.0f}x   (goal: at least 100x)")
    print(f"engine absolute                              {t_engine:8.3f} s   (goal: at most 0.5 s)")
    print()
    print(res.summary())


if __name__ == "__main__":
    main()
