"""Load, profile and stratify a 1,000,000-line CSV against pyarrow's raw read of the same file.

Run from the project folder: ``python tests/benchmarks/bench_intake.py``. The
file is invented (tests/benchmarks/_populations.py) and written to /tmp.
Goals: load_population + profile at most 2x ``pyarrow.csv.read_csv``
(issue 9), and load + profile + stratify at most 2x (issue 3). Nothing is
asserted; the script prints the times and the ratios, then the steps that
the intake rules require, each timed alone, to show where the time goes.
``--profile`` adds a cProfile listing of one load + profile + stratify.
"""

from __future__ import annotations

import cProfile
import hashlib
import os
import pstats
import sys

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

sys.path.insert(0, os.path.dirname(__file__))
from _populations import write_csv  # noqa: E402
from _timing import best_of  # noqa: E402

from auditmean._repeats import ids_may_repeat  # noqa: E402
from auditmean.core.profile import exact_sum  # noqa: E402
from auditmean.population import load_population, profile, strip_text  # noqa: E402
from auditmean.strata import stratify  # noqa: E402

ROWS = 1_000_000
PATH = "/tmp/auditmean-bench-1m.csv"
STRATIFY = {"n_strata": 4, "top_items": 50}  # cumulative square-root rule, the 50 largest items in full


def _load():
    return load_population(PATH, id_column="item_id", value_column="book_value")


def main() -> None:
    write_csv(PATH, ROWS)
    t_arrow, table = best_of(lambda: pacsv.read_csv(PATH))
    t_load, pop = best_of(_load)
    t_profile, _ = best_of(lambda: profile(pop))
    t_strata, _ = best_of(lambda: stratify(pop, **STRATIFY))
    t_fp, _ = best_of(lambda: _load().content_sha256)
    print(f"intake of {table.num_rows:,} rows ({os.path.getsize(PATH) / 2**20:.1f} MiB CSV)")
    print(f"pyarrow.csv.read_csv (raw read, types inferred)   {t_arrow:8.3f} s")
    print(f"load_population                                    {t_load:8.3f} s")
    print(f"profile                                            {t_profile:8.3f} s")
    print(f"stratify (cumulative sqrt, 4 strata + top 50)      {t_strata:8.3f} s")
    print(f"load + profile / pyarrow raw read                  {(t_load + t_profile) / t_arrow:8.1f}x   (goal: at most 2x)")
    print(
        f"load + profile + stratify / pyarrow raw read       {(t_load + t_profile + t_strata) / t_arrow:8.1f}x"
        "   (goal: at most 2x)"
    )
    print(f"content fingerprint, computed when first read      {t_fp - t_load:8.3f} s   (at the start of an engagement)")

    # The steps the intake rules require, each alone (what load_population does, piece by piece).
    data = open(PATH, "rb").read()
    names = ["c0", "c1"]
    options = {
        "read_options": pacsv.ReadOptions(column_names=names),
        "parse_options": pacsv.ParseOptions(newlines_in_values=True, ignore_empty_lines=False),
        "convert_options": pacsv.ConvertOptions(
            column_types={n: pa.string() for n in names}, strings_can_be_null=False, quoted_strings_can_be_null=False
        ),
    }
    t_text, texts = best_of(lambda: pacsv.read_csv(pa.py_buffer(data), **options))
    ids = texts.column(0).combine_chunks()[1:]
    amounts = texts.column(1).combine_chunks()[1:]
    steps = [
        ("read every cell as text (pyarrow)", t_text),
        ("SHA-256 of the file", best_of(lambda: hashlib.sha256(data).hexdigest())[0]),
        ("strip the ids (as str.strip)", best_of(lambda: strip_text(ids))[0]),
        ("look for repeated ids (64-bit hashes)", best_of(lambda: ids_may_repeat(ids))[0]),
        ("amounts to float64 (one cast)", best_of(lambda: pc.cast(amounts, pa.float64()))[0]),
    ]
    values = pc.cast(amounts, pa.float64()).to_numpy()
    steps.append(("correctly rounded total", best_of(lambda: exact_sum(np.asarray(values)))[0]))
    print("\nsteps of load_population, each timed alone:")
    for label, t in steps:
        print(f"  {label:48s} {t:8.3f} s")
    total = sum(t for _, t in steps)
    print(f"  {'sum of the steps':48s} {total:8.3f} s   = {total / t_arrow:.1f}x the raw read")

    if "--profile" in sys.argv:
        cProfile.run("stratify(profile(_load()) and _load(), **STRATIFY)", "/tmp/am-intake.prof")
        pstats.Stats("/tmp/am-intake.prof").sort_stats("tottime").print_stats(15)


if __name__ == "__main__":
    main()
