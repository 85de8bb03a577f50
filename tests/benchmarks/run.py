"""Run every benchmark script and print one table: figure, target, met or not, peak memory.

Each script runs in its own process with --json; its peak resident memory is read from the
operating system (os.wait4) or, for scripts that time other processes, reported by the
script itself. Run: python tests/benchmarks/run.py [--markdown]
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import subprocess
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path

HERE = Path(__file__).resolve().parent
MEMORY_LIMIT_MB = 500.0


@dataclass(frozen=True)
class Row:
    name: str
    figure: str
    target: str
    met: bool
    memory_MB: float


def _run(script: str, *extra: str) -> tuple[dict[str, float], float]:
    # Output goes to files, not pipes, so a chatty script cannot block on a full pipe.
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        process = subprocess.Popen(
            [sys.executable, str(HERE / script), "--json", *extra], stdout=out, stderr=err
        )
        _, status, usage = os.wait4(process.pid, 0)
        code = os.waitstatus_to_exitcode(status)
        out.seek(0)
        err.seek(0)
        text, errors = out.read().decode(), err.read().decode()
    if code != 0:
        sys.stderr.write(errors)
        raise SystemExit(f"{script} failed with exit status {code}")
    figures = json.loads(text.strip().splitlines()[-1])
    memory = max(usage.ru_maxrss / 1024, float(figures.get("peak_memory_MB", 0.0)))
    return figures, memory


def rows() -> list[Row]:
    result = []
    solver, memory = _run("solver.py")
    result.append(
        Row(
            "solver mixtures/s (1:1 + 1:2, 1e6 mixtures)",
            f"{solver['mixtures_per_s']:.3g}",
            ">= 1e6",
            solver["mixtures_per_s"] >= 1e6,
            memory,
        )
    )
    result.append(
        Row(
            "solver speed vs per-mixture scipy loop",
            f"{solver['ratio']:.0f}x",
            ">= 100x",
            solver["ratio"] >= 100,
            memory,
        )
    )
    cli, memory = _run("plan_cli.py")
    result.append(
        Row(
            "planner plan, default, whole process (median)",
            f"{cli['plan_median_s']:.2f} s",
            "<= 1.5 s",
            cli["plan_median_s"] <= 1.5,
            memory,
        )
    )
    result.append(
        Row(
            "planner check, whole process (median)",
            f"{cli['check_median_s']:.2f} s",
            "<= 0.8 s",
            cli["check_median_s"] <= 0.8,
            memory,
        )
    )
    design, memory = _run("design_quality.py")
    result.append(
        Row(
            "design: naive u(K)/K over optimised",
            f"{design['naive_over_optimised']:.2f}x",
            ">= 1.5x",
            design["naive_over_optimised"] >= 1.5,
            memory,
        )
    )
    result.append(
        Row(
            "design optimiser vs exhaustive: objective gap",
            f"{design['objective_gap_percent']:+.3f} %",
            "within 1 %",
            abs(design["objective_gap_percent"]) <= 1.0,
            memory,
        )
    )
    result.append(
        Row(
            "design optimiser vs exhaustive: speed-up",
            f"{design['speedup']:.0f}x",
            ">= 20x",
            design["speedup"] >= 20,
            memory,
        )
    )
    if (HERE / "montecarlo.py").exists():
        mc, memory = _run("montecarlo.py")
        rate = float(mc["all_bound_trials_per_second"])
        result.append(Row("Monte Carlo trials/s", f"{rate:.3g}", ">= 5e4", rate >= 5e4, memory))
    variants, memory = _run("variants.py")
    result.append(
        Row(
            "30 section variants (design + sheets)",
            f"{variants['total_s']:.2f} s",
            "<= 3 s",
            variants["total_s"] <= 3.0
            and variants["sections"] == variants["distinct_sections"] == 30,
            memory,
        )
    )
    return result


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--markdown", action="store_true", help="print a Markdown table")
    args = parser.parse_args()
    table = rows()
    machine = f"{platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}"
    if args.markdown:
        print(f"Machine: {machine}\n")
        print("| benchmark | figure | target | met | peak memory (target <= 500 MB) |")
        print("|---|---:|---|---|---:|")
        for row in table:
            memory_ok = "yes" if row.memory_MB <= MEMORY_LIMIT_MB else "NO"
            print(
                f"| {row.name} | {row.figure} | {row.target} | {'yes' if row.met else 'NO'} "
                f"| {row.memory_MB:.0f} MB ({memory_ok}) |"
            )
    else:
        print(f"machine: {machine}")
        width = max(len(r.name) for r in table)
        print(f"{'benchmark':<{width}}  {'figure':>10}  {'target':<10}  met  peak MB")
        for row in table:
            print(
                f"{row.name:<{width}}  {row.figure:>10}  {row.target:<10}  "
                f"{'yes' if row.met else 'NO ':<3}  {row.memory_MB:7.0f}"
                f"{'' if row.memory_MB <= MEMORY_LIMIT_MB else '  (over 500 MB)'}"
            )
    met = all(r.met and r.memory_MB <= MEMORY_LIMIT_MB for r in table)
    return 0 if met else 1


if __name__ == "__main__":
    sys.exit(main())
