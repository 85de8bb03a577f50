"""Benchmark: 30 section variants of the default scenario (design and sheets), target <= 3 s.

Prints wall and CPU time (user + system, this process) of the design and of design + sheets.
``--plan FILE`` measures another plan file instead (e.g. recipes/iron-thiocyanate-tubes.toml,
the same shelf analysed by the all-bound analysis).

Run: python tests/benchmarks/variants.py [--sections N] [--plan FILE] [--json]
"""

from __future__ import annotations

import argparse
import json
import resource
import sys
import time
from importlib.resources import files
from pathlib import Path

import numpy as np

from planner.pipeline import design_variants
from planner.planfile import parse_plan
from planner.report.variants_index import variants_files


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sections", type=int, default=30)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--json", action="store_true")
    parser.add_argument("--plan", type=Path, default=None, help="plan file (default: embedded)")
    args = parser.parse_args()
    text = (
        args.plan.read_text("utf-8")
        if args.plan is not None
        else files("planner").joinpath("data/default.toml").read_text("utf-8")
    )
    inputs = parse_plan(text)
    start, start_cpu = time.perf_counter(), time.process_time()
    found = design_variants(inputs, args.sections, np.random.default_rng(args.seed))
    designed_s = time.perf_counter() - start
    designed_cpu_s = time.process_time() - start_cpu
    contents = variants_files(
        found.plans, combined=found.combined, date="2026-12-02", seed=args.seed
    )
    total_s = time.perf_counter() - start
    total_cpu_s = time.process_time() - start_cpu
    objectives = np.array(found.objectives)
    figures = {
        "sections": len(found.plans),
        "design_s": designed_s,
        "total_s": total_s,
        "design_cpu_s": designed_cpu_s,
        "total_cpu_s": total_cpu_s,
        "files": len(contents),
        "difficulty_spread": float(objectives.max() / objectives.min() - 1),
        "distinct_sections": found.distinct_sections,
        "allowed_sets": found.allowed_sets,
        "peak_memory_MB": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
    }
    if args.json:
        print(json.dumps(figures))
        return 0
    print(f"variants: {len(found.plans)} sections of {args.plan or 'the default scenario'}")
    print(f"  design   {designed_s:6.2f} s wall, {designed_cpu_s:6.2f} s CPU")
    print(
        f"  + sheets {total_s:6.2f} s wall, {total_cpu_s:6.2f} s CPU ({len(contents)} files)"
        "   (target <= 3 s)"
    )
    print(f"  difficulty spread {100 * figures['difficulty_spread']:.1f} % (rule: within 20 %)")
    print(
        f"  {found.distinct_sections} sections with test recipes of their own "
        f"(the shelf allows at most {found.allowed_sets})"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
