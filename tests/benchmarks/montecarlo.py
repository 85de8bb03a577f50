"""Benchmark: virtual-class throughput on the embedded default plan.

Prints trials per second of :func:`planner.predict.montecarlo.simulate` for the all_bound
analysis alone and for both analyses (all_bound plus the vectorised global fits), at 1e5 trials by
default, each the median of a few repeats after a warm-up. Target (issue 4): 1e5 trials of the
all-bound analysis in at most 2 s.
Run: python tests/benchmarks/montecarlo.py [--trials N] [--repeats N] [--json]
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
import time
from importlib.resources import files

import numpy as np

from planner.pipeline import design_plan
from planner.planfile import parse_plan
from planner.predict.montecarlo import simulate

TARGET_S = 2.0


def _time(
    plan_inputs, mixtures, trials: int, repeats: int, global_fit: bool
) -> tuple[float, float]:
    """Median wall time and median CPU time (user + system, this process) of a run [s]."""
    times, cpu = [], []
    for repeat in range(repeats):
        start, used = time.perf_counter(), time.process_time()
        simulate(
            plan_inputs,
            mixtures,
            trials=trials,
            rng=np.random.default_rng(repeat),
            global_fit=global_fit,
        )
        times.append(time.perf_counter() - start)
        cpu.append(time.process_time() - used)
    return statistics.median(times), statistics.median(cpu)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", type=int, default=100_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--json", action="store_true", help="print one JSON line")
    args = parser.parse_args()

    text = files("planner").joinpath("data/default.toml").read_text(encoding="utf-8")
    plan = design_plan(parse_plan(text, source="the embedded default plan"))
    simulate(plan.inputs, plan.mixtures, trials=2000, rng=np.random.default_rng(0))  # warm-up
    all_bound_s, all_bound_cpu_s = _time(
        plan.inputs, plan.mixtures, args.trials, args.repeats, global_fit=False
    )
    both_s, _ = _time(plan.inputs, plan.mixtures, args.trials, args.repeats, global_fit=True)
    result = {
        "trials": args.trials,
        "mixtures_per_trial": len(plan.mixtures),
        "all_bound_seconds": all_bound_s,
        "all_bound_trials_per_second": args.trials / all_bound_s,
        # Per second of CPU time, which a busy machine slows less than wall time.
        "all_bound_cpu_seconds": all_bound_cpu_s,
        "all_bound_trials_per_cpu_second": args.trials / all_bound_cpu_s,
        "both_seconds": both_s,
        "both_trials_per_second": args.trials / both_s,
        "target_seconds_all_bound": TARGET_S * args.trials / 100_000,
    }
    if args.json:
        print(json.dumps(result, sort_keys=True))
    else:
        print(
            f"{args.trials} trials x {len(plan.mixtures)} mixtures (median of {args.repeats})\n"
            f"  all-bound analysis:     {all_bound_s:.3f} s, "
            f"{args.trials / all_bound_s:,.0f} trials/s "
            f"({args.trials / all_bound_cpu_s:,.0f} per CPU second)\n"
            f"  both analyses:          {both_s:.3f} s, {args.trials / both_s:,.0f} trials/s\n"
            f"  target: 1e5 all-bound trials in <= {TARGET_S:g} s -> "
            f"{'met' if all_bound_s <= result['target_seconds_all_bound'] else 'NOT met'}"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
