"""Benchmark: `planner plan` on the embedded default as a whole process (start-up included).

Prints the median wall time over repeated runs (target <= 1.5 s on the project's 2-core
machine) and the median CPU time, user + system (target <= 0.5 s), and the same for
`planner check` (target <= 0.8 s wall). One run before the timed ones is left out, so the
figures are those of an installed package whose bytecode is compiled.
Run: python tests/benchmarks/plan_cli.py [--runs N] [--json]
"""

from __future__ import annotations

import argparse
import json
import resource
import statistics
import subprocess
import sys
import time


def _cpu_s() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def _median_s(arguments: list[str], runs: int) -> tuple[float, float]:
    """Median wall time and median CPU time (user + system) of a command [s]."""
    times, cpu = [], []
    for run in range(runs + 1):
        start, used = time.perf_counter(), _cpu_s()
        done = subprocess.run(arguments, capture_output=True, check=False)
        if run:  # the first run compiles bytecode and fills the file cache
            times.append(time.perf_counter() - start)
            cpu.append(_cpu_s() - used)
        if done.returncode not in (0, 1):
            sys.stderr.write(done.stderr.decode())
            raise SystemExit(f"{' '.join(arguments)} exited {done.returncode}")
    return statistics.median(times), statistics.median(cpu)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=7)
    parser.add_argument("--json", action="store_true")
    args = parser.parse_args()
    python = sys.executable
    plan_s, plan_cpu_s = _median_s([python, "-m", "planner", "plan", "--format", "json"], args.runs)
    check_s, check_cpu_s = _median_s(
        [python, "-m", "planner", "check", "--k", "98", "--excess", "0.1", "--limiting", "1.5e-4"],
        args.runs,
    )
    figures = {
        "plan_median_s": plan_s,
        "check_median_s": check_s,
        "plan_cpu_median_s": plan_cpu_s,
        "check_cpu_median_s": check_cpu_s,
        "runs": args.runs,
        # Largest resident set of any planner process run above (kB on Linux).
        "peak_memory_MB": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024,
    }
    if args.json:
        print(json.dumps(figures))
        return 0
    print(
        f"planner plan (default, whole process): median {plan_s:.3f} s wall (target <= 1.5 s), "
        f"{plan_cpu_s:.3f} s CPU (target <= 0.5 s)"
    )
    print(
        f"planner check (whole process):         median {check_s:.3f} s wall (target <= 0.8 s), "
        f"{check_cpu_s:.3f} s CPU"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
