"""Run every benchmark script and print one table: figure, target, met or not, peak memory.

Each script runs in its own process with --json; its peak resident memory is read from the
operating system (os.wait4) or, for scripts that time other processes, reported by the
script itself. Whole-process rows are CPU time (user + system) where the target says CPU,
medians over several runs. The solver runs once with every BLAS and OpenMP pool held to one
thread, and once more beside a second copy of itself (the machine loaded).
Scripts run with bytecode writing allowed, as an installed package has its bytecode compiled.
Run: python tests/benchmarks/run.py [--markdown]
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
from typing import Any

HERE = Path(__file__).resolve().parent
MEMORY_LIMIT_MB = 500.0


@dataclass(frozen=True)
class Row:
    name: str
    figure: str
    target: str
    met: bool
    memory_MB: float


# Thread pools of the BLAS and OpenMP libraries numpy may load, held to one thread.
SINGLE_THREAD = {"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}


def _environment(extra: dict[str, str] | None = None) -> dict[str, str]:
    environment = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    return environment | (extra or {})


def _start(
    script: str, extra: tuple[str, ...], environment: dict[str, str], out: Any, err: Any
) -> Any:
    # Output goes to files, not pipes, so a chatty script cannot block on a full pipe.
    process = subprocess.Popen(
        [sys.executable, str(HERE / script), "--json", *extra],
        stdout=out,
        stderr=err,
        env=environment,
    )
    return process, out, err


def _finish(script: str, started: Any) -> tuple[dict[str, float], float]:
    process, out, err = started
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


def _run(
    script: str, *extra: str, environment: dict[str, str] | None = None
) -> tuple[dict[str, float], float]:
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        return _finish(script, _start(script, extra, _environment(environment), out, err))


def _run_loaded(script: str, *extra: str) -> tuple[dict[str, float], float]:
    """Two single-threaded copies of a script at once; the slower copy's figures."""
    environment = _environment(SINGLE_THREAD)
    with (
        tempfile.TemporaryFile() as out_1,
        tempfile.TemporaryFile() as err_1,
        tempfile.TemporaryFile() as out_2,
        tempfile.TemporaryFile() as err_2,
    ):
        first = _start(script, extra, environment, out_1, err_1)
        second = _start(script, extra, environment, out_2, err_2)
        results = [_finish(script, first), _finish(script, second)]
    figures = min(results, key=lambda r: r[0]["mixtures_per_cpu_s"])[0]
    return figures, max(memory for _, memory in results)


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
    single, memory = _run("solver.py", "--loop", "200", environment=SINGLE_THREAD)
    rate = single["mixtures_per_cpu_s"]
    result.append(
        Row(
            "solver mixtures per CPU second, single-threaded",
            f"{rate:.3g}",
            ">= 2e6",
            rate >= 2e6,
            memory,
        )
    )
    loaded, memory = _run_loaded("solver.py", "--loop", "200")
    rate = loaded["mixtures_per_cpu_s"]
    result.append(
        Row(
            "solver mixtures per CPU second, beside a second solver run",
            f"{rate:.3g}",
            ">= 1e6",
            rate >= 1e6,
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
            "planner plan, default, whole process, CPU (median)",
            f"{cli['plan_cpu_median_s']:.2f} s",
            "<= 0.5 s",
            cli["plan_cpu_median_s"] <= 0.5,
            memory,
        )
    )
    result.append(
        Row(
            "  the libraries' floor: a typer command importing numpy and pydantic, CPU",
            f"{cli['floor_cpu_median_s']:.2f} s",
            "(no target)",
            True,
            memory,
        )
    )
    result.append(
        Row(
            "  plan over the floor, the two run in turn (median of the pairs' ratios)",
            f"{cli['plan_over_floor']:.2f}x",
            "(no target)",
            True,
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
    plots, memory = _run("plots.py", "--runs", "5")
    result.append(
        Row(
            "planner plan --out DIR, default, whole process, CPU (median)",
            f"{plots['plan_out_cpu_median_s']:.2f} s",
            "<= 1.2 s",
            plots["plan_out_cpu_median_s"] <= 1.2,
            memory,
        )
    )
    result.append(
        Row(
            "  of which the plan figures, CPU (first drawing, imports included)",
            f"{plots['plots_first_cpu_s']:.3f} s",
            "(no target)",
            True,
            memory,
        )
    )
    try:
        shelf, memory = _run("big_shelf.py")
    except SystemExit as failed:
        # A shelf the limits accept that the planner cannot plan is a miss, not the end of
        # the table: the row says so and the other rows are still measured.
        result.append(
            Row(
                "planner plan, largest shelf the limits accept",
                f"failed: {failed}",
                "<= 5 s",
                False,
                0.0,
            )
        )
    else:
        worst = max(shelf["cpu_median_s"], shelf["default_stocks_cpu_median_s"])
        result.append(
            Row(
                f"planner plan, largest shelf the limits accept ({int(shelf['stocks'])} stocks "
                f"or the default's, {int(shelf['glassware'])} glassware), CPU (slower median)",
                f"{worst:.2f} s",
                "<= 5 s",
                worst <= 5.0,
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
            "30 section variants (design + sheets), CPU",
            f"{variants['total_cpu_s']:.2f} s",
            "<= 3 s",
            variants["total_cpu_s"] <= 3.0 and variants["sections"] == 30,
            memory,
        )
    )
    # Told apart from the time: how many of them have test recipes of their own inside the
    # difficulty band (the section-distinctness check warns for the rest, naming them).
    result.append(
        Row(
            "  of which with test recipes of their own",
            f"{variants['distinct_sections']} of {variants['sections']}",
            "(no target)",
            True,
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
