"""Benchmark: `planner plan --out` on the embedded default, and what its figures cost.

The whole `planner plan --out DIR` process is the median over fresh processes (CPU time, user
+ system, beside wall time; target for the whole process: <= 1.2 s CPU). The figures are
timed inside one fresh process that has designed the plan: the CPU time of the first
drawing of every plan figure (modules imported on first use included, as a run pays it),
then the median of repeated drawings. The first round of processes is left out, so the
figures are those of compiled bytecode.
Run: python tests/benchmarks/plots.py [--runs N] [--json]
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile

from _timing import children_peak_MB, seconds

# Design the default once, then time the plan figures: the first drawing and 20 more.
_FIGURES = """
import json, statistics, time
from planner.cli import _load
from planner.pipeline import design_plan
plan = design_plan(_load(None))
start = time.process_time()
from planner.report.plots import plan_plots
files = plan_plots(plan)
first = time.process_time() - start
again = []
for _ in range(20):
    start = time.process_time()
    plan_plots(plan)
    again.append(time.process_time() - start)
print(json.dumps({"first": first, "median": statistics.median(again), "files": len(files)}))
"""


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=7)
    parser.add_argument("--json", action="store_true")
    args = parser.parse_args()
    python = sys.executable
    command = [python, "-m", "planner", "plan", "--out", "{out}/cli", "--force", "-q"]
    wall: list[float] = []
    cpu: list[float] = []
    with tempfile.TemporaryDirectory() as folder:
        for run in range(args.runs + 1):
            elapsed, used = seconds([part.format(out=folder) for part in command])
            if run:  # the first run compiles bytecode and fills the file cache
                wall.append(elapsed)
                cpu.append(used)
    drawn = json.loads(
        subprocess.run(
            [python, "-c", _FIGURES], capture_output=True, text=True, check=True
        ).stdout.splitlines()[-1]
    )
    figures = {
        "plan_out_median_s": statistics.median(wall),
        "plan_out_cpu_median_s": statistics.median(cpu),
        "plots_first_cpu_s": drawn["first"],
        "plots_again_cpu_median_s": drawn["median"],
        "plot_files": drawn["files"],
        "runs": args.runs,
        "peak_memory_MB": children_peak_MB(),
    }
    if args.json:
        print(json.dumps(figures))
        return 0
    print(
        f"planner plan --out (default, whole process): median {figures['plan_out_median_s']:.3f} "
        f"s wall, {figures['plan_out_cpu_median_s']:.3f} s CPU (target <= 1.2 s)"
    )
    print(
        f"the {drawn['files']} plan figures: {drawn['first']:.3f} s CPU the first time "
        f"(imports included), {drawn['median']:.4f} s again (median of 20)"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
