"""The DuckDB path on a 50,000,000-line Parquet file: wall time and peak memory.

Run from the project folder: ``python tests/benchmarks/bench_large.py``
(``--rows N`` for another size). The file is invented
(tests/benchmarks/_populations.py), written once to /tmp in chunks with
pyarrow, and never committed. Each measurement runs in a child process,
so that its peak resident memory (Linux VmHWM, reset between the two
steps) is its own:

1. open: the checks of ids and amounts, the count and total, and the
   content fingerprint (DuckDB sorts the items by id out of core; Python
   hashes them in batches);
2. profile, stratify (cumulative square-root rule, top stratum) and select
   (the planned sample, by the permanent random numbers).

Goal for step 2: under 30 s and 500 MB on the 2-core machine. A peer in
the same run: one hand-written DuckDB query that hashes every id and keeps
the 100 smallest keys per stratum with a top-k aggregate. Nothing is asserted.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(__file__))
from _populations import write_parquet  # noqa: E402

PATH = "/tmp/auditmean-bench-{rows}.parquet"


def child(path: str, step: str) -> None:
    from _timing import peak_rss_mb, reset_peak

    from auditmean.plan import plan_sample
    from auditmean.scan import DuckDBScan, select_scan, stratify_scan

    out: dict[str, float] = {}
    if step == "peer":
        import duckdb

        con = duckdb.connect(config={"memory_limit": "200MB", "preserve_insertion_order": False})
        src = f"read_parquet('{path}')"
        reset_peak()
        t = time.perf_counter()
        con.sql(
            f"SELECT g, min_by(item_id, k, 100) FROM (SELECT item_id, sha256('seed:' || item_id) AS k, "
            f"CASE WHEN book_value < 0 THEN 0 WHEN book_value = 0 THEN 1 WHEN book_value < 500 THEN 2 "
            f"WHEN book_value < 3500 THEN 3 WHEN book_value < 50000 THEN 4 ELSE 5 END AS g FROM {src}) GROUP BY g"
        ).fetchall()
        out["peer_s"], out["peer_mb"] = time.perf_counter() - t, peak_rss_mb()
        print(json.dumps(out))
        return
    out["baseline_mb"] = peak_rss_mb()
    t = time.perf_counter()
    scan = DuckDBScan(path, id_column="item_id", value_column="book_value")
    out["open_s"], out["open_mb"] = time.perf_counter() - t, peak_rss_mb()
    reset_peak()
    t = time.perf_counter()
    prof = scan.profile()
    out["profile_s"] = time.perf_counter() - t
    t2 = time.perf_counter()
    strata = stratify_scan(scan, n_strata=3, top_cutoff=50_000.0)
    out["stratify_s"] = time.perf_counter() - t2
    plan = plan_sample(strata, tolerable=0.01 * prof.total, risk_incorrect_acceptance=0.05)
    t3 = time.perf_counter()
    selection = select_scan(strata, plan.sizes, "bench-seed")
    out["select_s"] = time.perf_counter() - t3
    out["steps_s"], out["steps_mb"] = time.perf_counter() - t, peak_rss_mb()
    out["items"], out["selected"] = scan.count, len(selection)
    print(json.dumps(out))


def main() -> None:
    rows = int(sys.argv[sys.argv.index("--rows") + 1]) if "--rows" in sys.argv else 50_000_000
    path = PATH.format(rows=rows)
    t = time.perf_counter()
    write_parquet(path, rows)
    print(f"file: {path}, {rows:,} rows, {os.path.getsize(path) / 2**20:,.0f} MiB (written in {time.perf_counter() - t:.0f} s)")
    here = os.path.abspath(__file__)
    runs = {}
    for step in ("path", "peer"):
        done = subprocess.run([sys.executable, here, "--child", path, step], capture_output=True, text=True, check=True)
        runs[step] = json.loads(done.stdout.strip().splitlines()[-1])
    r, p = runs["path"], runs["peer"]
    print(f"{'':52s}{'wall':>8s} {'peak RSS':>10s}")
    print(f"{'Python + imports (baseline)':52s}{'':8s} {r['baseline_mb']:8.0f} MB")
    print(f"{'open: checks, count, total, content fingerprint':52s}{r['open_s']:7.1f}s {r['open_mb']:8.0f} MB")
    print(f"{'profile':52s}{r['profile_s']:7.1f}s")
    print(f"{'stratify (cumulative sqrt, 3 strata + top)':52s}{r['stratify_s']:7.1f}s")
    print(f"{'select (' + format(int(r['selected']), ',') + ' items)':52s}{r['select_s']:7.1f}s")
    print(f"{'profile + stratify + select':52s}{r['steps_s']:7.1f}s {r['steps_mb']:8.0f} MB   (goal: 30 s, 500 MB)")
    print(f"{'peer: one top-k hashing query (DuckDB alone)':52s}{p['peer_s']:7.1f}s {p['peer_mb']:8.0f} MB")


if __name__ == "__main__":
    if "--child" in sys.argv:
        i = sys.argv.index("--child")
        child(sys.argv[i + 1], sys.argv[i + 2])
    else:
        main()
