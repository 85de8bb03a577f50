"""Benchmark: what the plots add to `planner plan --out` on the embedded default.

Each figure is the median over fresh processes (every import is part of the cost):
the whole `planner plan --out DIR` process, and the added time of the plots, measured as
the same process body (design, output folder) with and without the plots. Runs alternate so
that a busy machine slows both alike; CPU time (user + system) is given beside wall time, as
it depends less on what else the machine is doing (target for the whole process: <= 1.2 s
CPU). The first round is left out, so the figures are those of compiled bytecode.
Run: python tests/benchmarks/plots.py [--runs N] [--json]
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
import tempfile

from _timing import children_peak_MB, seconds

# The body of `planner plan --out DIR --force` with the plots switched by argv[1].
_BODY = """
import sys
from planner.cli import _load
from planner.pipeline import design_plan
from planner.report.outdir import plan_files, write_output_folder
plan = design_plan(_load(None))
files = plan_files(plan, date="2026-12-02", plots=sys.argv[1] == "plots")
write_output_folder(Path(sys.argv[2]), files, force=True)
"""


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=7)
    parser.add_argument("--json", action="store_true")
    args = parser.parse_args()
    python = sys.executable
    commands = {
        "cli": [python, "-m", "planner", "plan", "--out", "{out}/cli", "--force", "-q"],
        "with": [python, "-c", _BODY, "plots", "{out}/with"],
        "without": [python, "-c", _BODY, "none", "{out}/none"],
    }
    wall: dict[str, list[float]] = {name: [] for name in commands}
    cpu: dict[str, list[float]] = {name: [] for name in commands}
    with tempfile.TemporaryDirectory() as folder:
        for run in range(args.runs + 1):
            for name, command in commands.items():
                elapsed, used = seconds([part.format(out=folder) for part in command])
                if run:  # the first round compiles bytecode and fills the file cache
                    wall[name].append(elapsed)
                    cpu[name].append(used)
    w = {name: statistics.median(values) for name, values in wall.items()}
    c = {name: statistics.median(values) for name, values in cpu.items()}
    figures = {
        "plan_out_median_s": w["cli"],
        "plan_out_cpu_median_s": c["cli"],
        "plots_added_median_s": w["with"] - w["without"],
        "plots_added_cpu_median_s": c["with"] - c["without"],
        "runs": args.runs,
        "peak_memory_MB": children_peak_MB(),
    }
    if args.json:
        print(json.dumps(figures))
        return 0
    print(
        f"planner plan --out (default, whole process): median {w['cli']:.3f} s wall, "
        f"{c['cli']:.3f} s CPU"
    )
    print(
        f"added by the plots: {w['with'] - w['without']:.3f} s wall "
        f"({w['without']:.3f} -> {w['with']:.3f} s), {c['with'] - c['without']:.3f} s CPU "
        f"({c['without']:.3f} -> {c['with']:.3f} s)"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
