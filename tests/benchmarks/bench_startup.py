"""Start-up of the command line: ``auditmean --help`` and a subcommand's import to first work.

Run from the project folder: ``python tests/benchmarks/bench_startup.py``
(``--repeat N`` for more rounds). Goals (issue 14): ``auditmean --help``
within 0.3 s and a subcommand's start-up within 1 s on the project's machine
(2 cores). Absolute times swing with the machine's load, so every command
is timed in the same rounds as its peers, interleaved, and the script prints
ratios against them:

* ``python -c pass``: the interpreter alone, the floor of any command;
* ``python -c "import numpy"`` and ``python -c "import pandas"``: what the
  scientific stack costs before any work.

Each command is a fresh process, timed from start to exit on a tiny input
(wall time, best and median of the rounds; CPU time of the child, best).
The children keep compiled bytecode in a temporary cache
(``PYTHONPYCACHEPREFIX``), as an installed package has it from ``pip
install``; one more row shows ``auditmean status`` compiling every module
again, as under ``PYTHONDONTWRITEBYTECODE=1``.
A subcommand's start-up (import to first work) is that time less its work,
where the work is the same command run again inside this process once its
modules are imported. Last, ``python -X importtime`` says where the import
time of ``auditmean --help`` and of ``auditmean plan`` goes, by package.
Nothing is asserted.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import os
import re
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path

PROJECT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(PROJECT))

PY = sys.executable


def _inputs(folder: Path) -> dict[str, list[str]]:
    """Tiny invented inputs, and each command to time (argument lists after ``python``)."""
    lines = ["id,amount"] + [f"A{i:03d},{(i * 37) % 900 + 10 + i * i / 7:.2f}" for i in range(60)]
    (folder / "tiny.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    (folder / "sample.csv").write_text(
        "stratum,item_id,book_value,audited_value\n"
        + "".join(f"{'AB'[i % 2]},S{i},{100 + i},{100 + i - (i % 5 == 0) * 3}\n" for i in range(20)),
        encoding="utf-8",
    )
    (folder / "strata.csv").write_text("stratum,count,book_total\nA,400,48000\nB,500,61000\n", encoding="utf-8")
    am = [PY, "-m", "auditmean"]
    plan = ["plan", str(folder / "tiny.csv"), "--id-column", "id", "--value-column", "amount", "--tolerable", "5000"]
    estimate = ["estimate", str(folder / "sample.csv"), str(folder / "strata.csv"), "--item-column", "item_id"]
    return {
        "python -c pass": [PY, "-c", "pass"],
        'python -c "import numpy"': [PY, "-c", "import numpy"],
        'python -c "import pandas"': [PY, "-c", "import pandas"],
        "auditmean --help": am + ["--help"],
        "auditmean plan (60 items)": am + plan,
        "auditmean estimate (20 items)": am + estimate,
        "auditmean status": am + ["status", "--engagement", str(folder / "eng")],
        "_plan_args": plan,
        "_estimate_args": estimate,
        "_status_args": ["status", "--engagement", str(folder / "eng")],
    }


def _child_cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def _time_once(cmd: list[str], cwd: Path, env: dict[str, str] | None = None) -> tuple[float, float]:
    cpu0 = _child_cpu()
    t0 = time.perf_counter()
    done = subprocess.run(cmd, cwd=cwd, capture_output=True, text=True, env=env)
    wall = time.perf_counter() - t0
    if done.returncode != 0:
        raise RuntimeError(f"{' '.join(cmd)} failed:\n{done.stderr}")
    return wall, _child_cpu() - cpu0


def _work_in_process(args: list[str], repeat: int) -> float:
    """Best time of the command run inside this process after a first run (imports done): its work."""
    from auditmean.cli import main

    best = float("inf")
    for _ in range(repeat + 1):
        with contextlib.redirect_stdout(io.StringIO()):
            t0 = time.perf_counter()
            main(args)
            best = min(best, time.perf_counter() - t0)
    return best


def _import_breakdown(cmd: list[str], cwd: Path, env: dict[str, str]) -> Counter:
    """Self import time (seconds) by top-level package, from ``python -X importtime``."""
    done = subprocess.run([cmd[0], "-X", "importtime", *cmd[1:]], cwd=cwd, capture_output=True, text=True, env=env)
    by_package: Counter = Counter()
    for line in done.stderr.splitlines():
        m = re.match(r"import time:\s+(\d+) \|\s+\d+ \|\s*(\S+)", line)
        if m:
            by_package[m.group(2).split(".")[0]] += int(m.group(1)) / 1e6
    return by_package


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--repeat", type=int, default=7, help="rounds of every command (default 7)")
    repeat = parser.parse_args().repeat
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        commands = _inputs(folder)
        cached = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
        cached["PYTHONPYCACHEPREFIX"] = str(folder / "pycache")
        uncached = {**cached, "PYTHONDONTWRITEBYTECODE": "1"}
        uncached.pop("PYTHONPYCACHEPREFIX")
        setup = [PY, "-m", "auditmean", *commands["_plan_args"], "--engagement", str(folder / "eng")]
        _time_once(setup, folder, cached)  # the engagement that status reads (not timed)
        timed = {k: v for k, v in commands.items() if not k.startswith("_")}
        timed["auditmean status, no bytecode cache"] = commands["auditmean status"]
        walls: dict[str, list[float]] = {k: [] for k in timed}
        cpus: dict[str, list[float]] = {k: [] for k in timed}
        for cmd in timed.values():  # fills the bytecode cache
            _time_once(cmd, folder, cached)
        load_before = os.getloadavg()
        for _ in range(repeat):  # interleaved, so that every command meets the same load
            for name, cmd in timed.items():
                wall, cpu = _time_once(cmd, folder, uncached if "no bytecode" in name else cached)
                walls[name].append(wall)
                cpus[name].append(cpu)
        load_after = os.getloadavg()
        work = {
            "auditmean plan (60 items)": _work_in_process(commands["_plan_args"], 3),
            "auditmean estimate (20 items)": _work_in_process(commands["_estimate_args"], 3),
            "auditmean status": _work_in_process(commands["_status_args"], 3),
        }
        help_imports = _import_breakdown(timed["auditmean --help"], folder, cached)
        plan_imports = _import_breakdown(timed["auditmean plan (60 items)"], folder, cached)

    best = {k: min(v) for k, v in walls.items()}
    print(f"{repeat} rounds, each command a fresh process; load average {load_before[0]:.2f} before, "
          f"{load_after[0]:.2f} after ({os.cpu_count()} cores)")
    print(f"{'command':<32}{'best s':>9}{'median s':>10}{'CPU s':>8}{'work s':>8}{'start-up s':>12}")
    for name in timed:
        w = work.get(name)
        start = f"{best[name] - w:12.3f}" if w is not None else f"{'':12}"
        print(f"{name:<32}{best[name]:9.3f}{statistics.median(walls[name]):10.3f}{min(cpus[name]):8.3f}"
              + (f"{w:8.3f}" if w is not None else f"{'':8}") + start)
    floor, numpy_t, pandas_t = best["python -c pass"], best['python -c "import numpy"'], best['python -c "import pandas"']
    help_t = best["auditmean --help"]
    print()
    print(f"auditmean --help / python -c pass          {help_t / floor:6.2f}x   (the interpreter alone is the floor)")
    print(f"auditmean --help / import numpy            {help_t / numpy_t:6.2f}x   (below 1: --help loads no numpy)")
    print(f"auditmean --help less the interpreter      {help_t - floor:6.3f} s")
    for name, w in work.items():
        print(f"{name + ' start-up / import pandas':<43}{(best[name] - w) / pandas_t:6.2f}x")
    print("goals: --help within 0.3 s, a subcommand's start-up within 1 s, on a quiet machine; on a busy one,"
          " compare the ratios")
    for title, counts in (("auditmean --help", help_imports), ("auditmean plan", plan_imports)):
        total = sum(counts.values())
        top = ", ".join(f"{pkg} {t:.3f}" for pkg, t in counts.most_common(6))
        print(f"\nimport time of {title} (python -X importtime, self time by package): {total:.3f} s\n  {top}")


if __name__ == "__main__":
    main()
