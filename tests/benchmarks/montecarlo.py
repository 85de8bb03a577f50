"""Benchmark: virtual-class throughput on the embedded default plan.

Prints trials per second of :func:`planner.predict.montecarlo.simulate` for the taught
analysis alone and for both analyses (taught plus the vectorised exact fits), at 1e5 trials by
default, each the median of a few repeats after a warm-up. Target (issue 4): 1e5 trials of the
taught analysis in at most 2 s.
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


def _time(plan_inputs, mixtures, trials: int, repeats: int, exact: bool) -> float:
    times = []
    for repeat in range(repeats):
        start = time.perf_counter()
        simulate(
            plan_inputs, mixtures, trials=trials, rng=np.random.default_rng(repeat), exact=exact
        )
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", type=int, default=100_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--json", action="store_true", help="print one JSON line")
    args = parser.parse_args()

    text = files("planner").joinpath("data/default.toml").read_text(encoding="utf-8")
    plan = design_plan(parse_plan(text, source="the embedded default plan"))
    simulate(plan.inputs, plan.mixtures, trials=2000, rng=np.random.default_rng(0))  # warm-up
    taught_s = _time(plan.inputs, plan.mixtures, args.trials, args.repeats, exact=False)
    both_s = _time(plan.inputs, plan.mixtures, args.trials, args.repeats, exact=True)
    result = {
        "trials": args.trials,
        "mixtures_per_trial": len(plan.mixtures),
        "taught_seconds": taught_s,
        "taught_trials_per_second": args.trials / taught_s,
        "both_seconds": both_s,
        "both_trials_per_second": args.trials / both_s,
        "target_seconds_taught": TARGET_S * args.trials / 100_000,
    }
    if args.json:
        print(json.dumps(result, sort_keys=True))
    else:
        print(
            f"{args.trials} trials x {len(plan.mixtures)} mixtures (median of {args.repeats})\n"
            f"  taught analysis:         {taught_s:.3f} s, {args.trials / taught_s:,.0f} trials/s\n"
            f"  taught + exact analyses: {both_s:.3f} s, {args.trials / both_s:,.0f} trials/s\n"
            f"  target: 1e5 taught trials in <= {TARGET_S:g} s -> "
            f"{'met' if taught_s <= result['target_seconds_taught'] else 'NOT met'}"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
