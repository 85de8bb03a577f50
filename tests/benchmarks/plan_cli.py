"""Benchmark: `planner plan` on the embedded default as a whole process (start-up included).

Prints the median wall time over repeated runs (target <= 1.5 s on the project's 2-core
machine) and the same for `planner check` (target <= 0.8 s).
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


def _median_s(arguments: list[str], runs: int) -> float:
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        done = subprocess.run(arguments, capture_output=True, check=False)
        times.append(time.perf_counter() - start)
        if done.returncode not in (0, 1):
            sys.stderr.write(done.stderr.decode())
            raise SystemExit(f"{' '.join(arguments)} exited {done.returncode}")
    return statistics.median(times)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=7)
    parser.add_argument("--json", action="store_true")
    args = parser.parse_args()
    python = sys.executable
    plan_s = _median_s([python, "-m", "planner", "plan", "--format", "json"], args.runs)
    check_s = _median_s(
        [python, "-m", "planner", "check", "--k", "98", "--excess", "0.1", "--limiting", "1.5e-4"],
        args.runs,
    )
    figures = {
        "plan_median_s": plan_s,
        "check_median_s": check_s,
        "runs": args.runs,
        # Largest resident set of any planner process run above (kB on Linux).
        "peak_memory_MB": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024,
    }
    if args.json:
        print(json.dumps(figures))
        return 0
    print(f"planner plan (default, whole process): median {plan_s:.3f} s  (target <= 1.5 s)")
    print(f"planner check (whole process):         median {check_s:.3f} s  (target <= 0.8 s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
