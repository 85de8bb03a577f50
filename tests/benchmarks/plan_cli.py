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
import sys

from _timing import children_peak_MB, medians


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=7)
    parser.add_argument("--json", action="store_true")
    args = parser.parse_args()
    python = sys.executable
    plan_s, plan_cpu_s = medians([python, "-m", "planner", "plan", "--format", "json"], args.runs)
    check_s, check_cpu_s = medians(
        [python, "-m", "planner", "check", "--k", "98", "--excess", "0.1", "--limiting", "1.5e-4"],
        args.runs,
    )
    figures = {
        "plan_median_s": plan_s,
        "check_median_s": check_s,
        "plan_cpu_median_s": plan_cpu_s,
        "check_cpu_median_s": check_cpu_s,
        "runs": args.runs,
        "peak_memory_MB": children_peak_MB(),
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
