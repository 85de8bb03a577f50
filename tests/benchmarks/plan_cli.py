"""Benchmark: `planner plan` on the embedded default as a whole process (start-up included).

Prints the median wall time over repeated runs (target <= 1.5 s on the project's 2-core
machine) and the median CPU time, user + system (target <= 0.5 s), and the same for
`planner check` (target <= 0.8 s wall). One run before the timed ones is left out, so the
figures are those of an installed package whose bytecode is compiled.

It also times the libraries' floor: a typer command with the same options as `plan` that
imports numpy, validates one pydantic model and prints it as JSON, and nothing of the
planner. No plan can be made faster than that with the command-line, boundary and numerical
libraries the project is built on (typer 0.29 imports pydantic while it parses the
arguments), so the figure shows how much of the `plan` time is the planner's own.
Run: python tests/benchmarks/plan_cli.py [--runs N] [--json]
"""

from __future__ import annotations

import argparse
import json
import sys

from _timing import children_peak_MB, medians, paired

# The libraries' floor: what any `plan` run costs before the planner does anything (see the
# module docstring). Thread pools are held to one thread as the planner's entry point does.
FLOOR_APP = """
import os
for variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(variable, "1")
from pathlib import Path
from typing import Annotated
import typer

app = typer.Typer()


@app.command()
def plan(
    file: Annotated[Path | None, typer.Argument()] = None,
    out: Annotated[Path | None, typer.Option("--out")] = None,
    output_format: Annotated[str, typer.Option("--format")] = "text",
    force: bool = False,
    date: str | None = None,
    pdf: bool = False,
    plots: bool = True,
    quiet: bool = False,
) -> None:
    import numpy
    from pydantic import BaseModel, ConfigDict

    class Reading(BaseModel):
        model_config = ConfigDict(strict=True, extra="forbid", frozen=True)
        absorbance: float

    print(Reading(absorbance=float(numpy.float64(0.5))).model_dump_json())


@app.command()
def check() -> None:
    pass


app()
"""


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=15)
    parser.add_argument("--json", action="store_true")
    args = parser.parse_args()
    python = sys.executable
    plan = [python, "-m", "planner", "plan", "--format", "json"]
    plan_s, _ = medians(plan, args.runs)
    check_s, check_cpu_s = medians(
        [python, "-m", "planner", "check", "--k", "98", "--excess", "0.1", "--limiting", "1.5e-4"],
        args.runs,
    )
    plan_cpu_s, floor_cpu_s, over_floor = paired(
        plan, [python, "-c", FLOOR_APP, "plan", "--format", "json"], args.runs
    )
    figures = {
        "plan_median_s": plan_s,
        "floor_cpu_median_s": floor_cpu_s,
        "plan_over_floor": over_floor,
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
        f"libraries' floor (typer, pydantic, numpy): median {floor_cpu_s:.3f} s CPU; "
        f"plan over floor, paired runs: median ratio {over_floor:.2f}"
    )
    print(
        f"planner check (whole process):         median {check_s:.3f} s wall (target <= 0.8 s), "
        f"{check_cpu_s:.3f} s CPU"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
