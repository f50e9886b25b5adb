"""Run every benchmark, one after the other, each as its own process (run on demand, not by pytest).

From the project folder::

    python tests/benchmarks/run_all.py            # all of them
    python tests/benchmarks/run_all.py intake     # those whose name contains 'intake'

Prints the machine first (cores, processor, memory, versions), then each
benchmark's own table. Nothing is asserted.
"""

from __future__ import annotations

import os
import platform
import subprocess
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
# Every bench_*.py beside this file (the coverage simulation's and the widgets' too), the long one last.
BENCHMARKS = sorted(
    (f for f in os.listdir(HERE) if f.startswith("bench_") and f.endswith(".py")), key=lambda f: (f == "bench_large.py", f)
)


def machine() -> str:
    import duckdb
    import numpy
    import pandas
    import pyarrow

    cpu = "unknown"
    try:
        with open("/proc/cpuinfo") as fh:
            cpu = next(line.split(":", 1)[1].strip() for line in fh if line.startswith("model name"))
    except (OSError, StopIteration):
        pass
    memory = "unknown"
    try:
        with open("/proc/meminfo") as fh:
            kb = int(next(line.split()[1] for line in fh if line.startswith("MemTotal")))
        memory = f"{kb / 2**20:.0f} GiB"
    except (OSError, StopIteration):
        pass
    return (
        f"machine: {os.cpu_count()} cores ({cpu}), {memory}; Python {platform.python_version()}, "
        f"numpy {numpy.__version__}, pandas {pandas.__version__}, pyarrow {pyarrow.__version__}, duckdb {duckdb.__version__}"
    )


def main() -> int:
    wanted = sys.argv[1:]
    print(machine(), flush=True)
    failed = 0
    for name in BENCHMARKS:
        if wanted and not any(w in name for w in wanted):
            continue
        print(f"\n=== {name}", flush=True)
        failed += subprocess.run([sys.executable, os.path.join(HERE, name)]).returncode != 0
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
