"""Load and profile of a 1,000,000-line CSV against pyarrow's raw read of the same file.

Run from the project folder: ``python tests/benchmarks/bench_intake.py``. The
file is invented (tests/benchmarks/_populations.py) and written to /tmp.
Goal: load_population + profile at most 2x ``pyarrow.csv.read_csv``.
Nothing is asserted; the script prints the times and the ratio.
"""

from __future__ import annotations

import cProfile
import os
import pstats
import sys

import pyarrow.csv as pacsv

sys.path.insert(0, os.path.dirname(__file__))
from _populations import write_csv  # noqa: E402
from _timing import best_of  # noqa: E402

from auditmean.population import load_population, profile  # noqa: E402

ROWS = 1_000_000
PATH = "/tmp/auditmean-bench-1m.csv"


def main() -> None:
    write_csv(PATH, ROWS)
    t_arrow, table = best_of(lambda: pacsv.read_csv(PATH))
    t_load, pop = best_of(lambda: load_population(PATH, id_column="item_id", value_column="book_value"))
    t_profile, _ = best_of(lambda: profile(pop))
    print(f"intake of {table.num_rows:,} rows ({os.path.getsize(PATH) / 2**20:.1f} MiB CSV)")
    print(f"pyarrow.csv.read_csv (raw read, types inferred)   {t_arrow:8.3f} s")
    print(f"load_population                                    {t_load:8.3f} s")
    print(f"profile                                            {t_profile:8.3f} s")
    print(f"load + profile / pyarrow raw read                  {(t_load + t_profile) / t_arrow:8.1f}x   (goal: at most 2x)")
    if "--profile" in sys.argv:
        cProfile.run("profile(load_population(PATH, id_column='item_id', value_column='book_value'))", "/tmp/am-intake.prof")
        pstats.Stats("/tmp/am-intake.prof").sort_stats("tottime").print_stats(12)


if __name__ == "__main__":
    main()
