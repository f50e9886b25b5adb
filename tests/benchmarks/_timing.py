"""Small helpers shared by the benchmark scripts (not collected by pytest)."""

from __future__ import annotations

import time


def best_of(fn, repeat: int = 3):
    """Best wall time of ``repeat`` calls, and the last result."""
    best = float("inf")
    out = None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def peak_rss_mb() -> float:
    """Peak resident memory of this process since start or the last :func:`reset_peak` (Linux VmHWM)."""
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024.0
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def reset_peak() -> None:
    """Start a new peak-memory measurement (Linux: writing 5 to clear_refs resets VmHWM)."""
    with open("/proc/self/clear_refs", "w") as fh:
        fh.write("5")
