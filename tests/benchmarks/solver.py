"""Benchmark: equilibrium solver throughput against a per-mixture scipy root-finding loop.

Prints mixtures per second for a 1:1 plus 1:2 system (iron(III) thiocyanate constants of
de Berg, Maeder and Clifford, Inorg. Chim. Acta 445 (2016) 155-159) on 1e6 mixtures, and the
ratio to scipy.optimize.root called once per mixture, per second of wall time and of CPU time.
Targets: >= 1e6 mixtures/s, >= 100x; run.py also runs it single-threaded (>= 2e6 mixtures
per CPU second) and beside a second copy (>= 1e6).
Run: python tests/benchmarks/solver.py [--mixtures N] [--loop N]
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
import time

import numpy as np
from scipy.optimize import root

from planner.chem.equilibrium import solve_equilibrium

MATRIX = np.array([[1.0, 1.0], [1.0, 2.0]])
LOG_BETA = np.log10([98.0, 98.0 * 7.0])


def _totals(n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    metal = 10 ** rng.uniform(-4, np.log10(0.5), n)  # iron(III) 1e-4 to 0.5 mol/L
    ligand = 10 ** rng.uniform(-6, -3, n)  # thiocyanate 1e-6 to 1e-3 mol/L
    return np.column_stack([metal, ligand])


def _scipy_one(total: np.ndarray) -> np.ndarray:
    beta = 10.0**LOG_BETA

    def balances(x: np.ndarray) -> np.ndarray:
        c = np.exp(x)
        s = beta * np.exp(MATRIX @ x)
        return (c + MATRIX.T @ s - total) / total

    return np.exp(root(balances, np.log(total), method="hybr", tol=1e-12).x)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--mixtures", type=int, default=1_000_000)
    parser.add_argument("--loop", type=int, default=2_000)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--json", action="store_true", help="print one JSON line")
    args = parser.parse_args()

    totals = _totals(args.mixtures, seed=1)
    solve_equilibrium(totals[:1000], MATRIX, LOG_BETA)  # warm-up
    times, cpu = [], []
    for _ in range(args.repeats):
        start, used = time.perf_counter(), time.process_time()
        result = solve_equilibrium(totals, MATRIX, LOG_BETA)
        times.append(time.perf_counter() - start)
        cpu.append(time.process_time() - used)
    vector_s = statistics.median(times)
    vector_cpu_s = statistics.median(cpu)
    worst = float(np.max(np.abs(result.relative_residual)))

    sample = _totals(args.loop, seed=2)
    start = time.perf_counter()
    loop_free = np.array([_scipy_one(t) for t in sample])
    loop_s = time.perf_counter() - start
    check = solve_equilibrium(sample, MATRIX, LOG_BETA).free_M
    agree = float(np.max(np.abs(loop_free / check - 1)))

    rate = args.mixtures / vector_s
    loop_rate = args.loop / loop_s
    figures = {
        "mixtures": args.mixtures,
        "median_s": vector_s,
        "mixtures_per_s": rate,
        "cpu_median_s": vector_cpu_s,
        # Per second of CPU time (every thread of the process), which a busy machine slows
        # less than wall time.
        "mixtures_per_cpu_s": args.mixtures / vector_cpu_s,
        "scipy_loop_mixtures_per_s": loop_rate,
        "ratio": rate / loop_rate,
        "max_relative_residual": worst,
        "max_relative_difference_vs_scipy": agree,
    }
    if args.json:
        print(json.dumps(figures))
        return 0
    print(f"solver: {args.mixtures:.0e} mixtures (1:1 + 1:2), median of {args.repeats}")
    print(f"  vectorised      {vector_s:8.3f} s   {rate:12.3e} mixtures/s   (target >= 1e6/s)")
    print(
        f"  vectorised, CPU {vector_cpu_s:8.3f} s   {args.mixtures / vector_cpu_s:12.3e} "
        "mixtures/CPU s (single-threaded target >= 2e6/s)"
    )
    print(
        f"  scipy loop      {loop_s:8.3f} s   {loop_rate:12.3e} mixtures/s   ({args.loop} mixtures)"
    )
    print(f"  ratio           {rate / loop_rate:8.0f} x                        (target >= 100x)")
    print(f"  max residual    {worst:.2e}; max |difference| vs scipy {agree:.2e}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
