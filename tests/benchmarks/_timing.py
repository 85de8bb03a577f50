"""Timing of whole planner processes, shared by the benchmark scripts that run them.

Each script runs as ``python tests/benchmarks/NAME.py``, so this module is imported from the
scripts' own folder.
"""

from __future__ import annotations

import resource
import statistics
import subprocess
import sys
import time


def _children_cpu_s() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def seconds(arguments: list[str]) -> tuple[float, float]:
    """Wall time and CPU time (user + system) of one process [s]; exit status 0 or 1."""
    start, cpu = time.perf_counter(), _children_cpu_s()
    done = subprocess.run(arguments, capture_output=True, check=False)
    elapsed, used = time.perf_counter() - start, _children_cpu_s() - cpu
    if done.returncode not in (0, 1):
        sys.stderr.write(done.stderr.decode())
        raise SystemExit(f"{' '.join(arguments)} exited {done.returncode}")
    return elapsed, used


def medians(arguments: list[str], runs: int) -> tuple[float, float]:
    """Median wall time and median CPU time of a command over ``runs`` runs [s], after one
    untimed run (which compiles bytecode and fills the file cache)."""
    seconds(arguments)
    timed = [seconds(arguments) for _ in range(runs)]
    return statistics.median(t[0] for t in timed), statistics.median(t[1] for t in timed)


def paired(first: list[str], second: list[str], runs: int) -> tuple[float, float, float]:
    """Two commands run in turn, ``runs`` pairs after one untimed run of each: the median CPU
    time of each [s] and the median of the pairs' CPU ratios first/second. Pairing keeps the
    ratio meaningful when the machine's speed drifts (a shared machine), where each median
    alone moves with it."""
    seconds(first)
    seconds(second)
    pairs = [(seconds(first)[1], seconds(second)[1]) for _ in range(runs)]
    return (
        statistics.median(a for a, _ in pairs),
        statistics.median(b for _, b in pairs),
        statistics.median(a / b for a, b in pairs),
    )


def children_peak_MB() -> float:
    """Largest resident set of any process run so far [MB] (ru_maxrss is in kB on Linux)."""
    return resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
