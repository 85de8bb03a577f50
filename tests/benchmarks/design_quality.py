"""Benchmark: quality and speed of the test-mixture design.

1. On the default scenario, the predicted relative SD of the mean K, u(K)/K, of the optimised
   test set against an evenly spaced naive series from the same shelf (one fixed volume of
   the limiting stock, the excess stepped evenly; target: optimised >= 1.5x smaller).
2. On a small instance (a random subset of the eligible candidates), the optimiser's
   objective against an exhaustive search over every admissible set (target: within 1 %),
   with both run times (target: the optimiser >= 20x faster).
Run: python tests/benchmarks/design_quality.py [--subset N] [--json]
"""

from __future__ import annotations

import argparse
import itertools
import json
import sys
import time
from importlib.resources import files

import numpy as np

from planner.design.candidates import candidate_set
from planner.design.mixtures import _x_sensitivity, choose_tests, mean_K_objective
from planner.design.plan import _epsilon_relative_u
from planner.design.standards import choose_standards
from planner.planfile import parse_plan


def _naive(inputs, cands, exclude, objective):
    """The usual hand design: one limiting volume, excess stepped evenly, in the window."""
    ev = cands.evaluation
    low, high = inputs.instrument.absorbance_window
    limiting = inputs.reaction.components.index(inputs.design.limiting)
    has = ev.total_M[:, limiting] > 0
    f_low, f_high = inputs.design.bound_fraction_range
    ok = has & (ev.absorbance >= low) & (ev.absorbance <= high)
    ok &= (ev.bound_fraction >= f_low) & (ev.bound_fraction <= f_high)
    ok[list(exclude)] = False
    limiting_cols = [
        j
        for j, s in enumerate(cands.stock_ids)
        if inputs.design.limiting in inputs.stock(s).contains_M
    ]
    best = None
    for volume in np.unique(cands.volumes_mL[ok][:, limiting_cols[0]]):
        members = np.flatnonzero(ok & (cands.volumes_mL[:, limiting_cols[0]] == volume))
        # one excess stock only, the one with most members: step its volume evenly
        if members.size < inputs.design.tests:
            continue
        order = members[np.argsort(ev.bound_fraction[members])]
        picks = order[np.linspace(0, order.size - 1, inputs.design.tests).round().astype(int)]
        if len(set(picks.tolist())) < inputs.design.tests:
            continue
        value = objective(inputs, cands, picks)
        spread = np.ptp(ev.bound_fraction[picks])
        key = (-spread, value)
        if best is None or key < best[0]:
            best = (key, picks, value)
    return best


def _exhaustive(inputs, cands, pool, count, span, gap, eps_u):
    fraction = cands.evaluation.bound_fraction
    best = (np.inf, None)
    combos = np.array(list(itertools.combinations(pool.tolist(), count)))
    f = fraction[combos]
    f_sorted = np.sort(f, axis=1)
    admissible = (np.ptp(f, axis=1) >= span) & (np.min(np.diff(f_sorted, axis=1), axis=1) >= gap)
    from planner.design.mixtures import per_mixture_relative_u_K

    own = per_mixture_relative_u_K(inputs, cands, pool)
    position = {c: i for i, c in enumerate(pool.tolist())}
    index = np.vectorize(position.get)(combos)
    own_part = np.sqrt(np.sum(own[index] ** 2, axis=1)) / count
    shared = eps_u * np.mean(_x_sensitivity(inputs, cands, pool)[index], axis=1)
    values = np.hypot(own_part, shared)
    values[~admissible] = np.inf
    i = int(np.argmin(values))
    if np.isfinite(values[i]):
        best = (float(values[i]), combos[i])
    return best, len(combos)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--subset", type=int, default=34)
    parser.add_argument("--seed", type=int, default=3)
    parser.add_argument("--json", action="store_true")
    args = parser.parse_args()

    text = files("planner").joinpath("data/default.toml").read_text(encoding="utf-8")
    inputs = parse_plan(text)
    cands = candidate_set(inputs)
    standards = choose_standards(inputs, cands)
    exclude = (standards.blank, *standards.standards)
    eps_u = _epsilon_relative_u(inputs, cands, standards.standards)
    objective = mean_K_objective(eps_u)
    optimised = choose_tests(inputs, cands, exclude=exclude, objective=objective)
    naive = _naive(inputs, cands, exclude, objective)
    assert naive is not None
    ratio = naive[2] / optimised.objective

    # Small instance: a random subset of the eligible candidates.
    ev = cands.evaluation
    low, high = inputs.instrument.absorbance_window
    f_low, f_high = inputs.design.bound_fraction_range
    margin = 2 * inputs.instrument.absorbance_sd
    eligible = np.flatnonzero(
        (ev.absorbance >= low + margin)
        & (ev.absorbance <= high - margin)
        & (ev.bound_fraction >= f_low)
        & (ev.bound_fraction <= f_high)
    )
    rng = np.random.default_rng(args.seed)
    pool = np.sort(rng.choice(eligible, size=min(args.subset, eligible.size), replace=False))
    mask = np.zeros(cands.size, dtype=bool)
    mask[pool] = True
    count = inputs.design.tests
    span = inputs.design.bound_fraction_span
    gap = 0.5 * span / max(count - 1, 1)
    start = time.perf_counter()
    small = choose_tests(inputs, cands, exclude=exclude, allowed=mask, objective=objective)
    optimiser_s = time.perf_counter() - start
    start = time.perf_counter()
    (exact_value, _), n_sets = _exhaustive(inputs, cands, pool, count, span, gap, eps_u)
    exhaustive_s = time.perf_counter() - start
    gap_pct = 100 * (small.objective / exact_value - 1)

    figures = {
        "optimised_u_K_rel": optimised.objective,
        "naive_u_K_rel": naive[2],
        "naive_over_optimised": ratio,
        "small_instance_candidates": int(pool.size),
        "small_instance_sets": n_sets,
        "optimiser_objective": small.objective,
        "exhaustive_objective": exact_value,
        "objective_gap_percent": gap_pct,
        "optimiser_s": optimiser_s,
        "exhaustive_s": exhaustive_s,
        "speedup": exhaustive_s / optimiser_s,
    }
    if args.json:
        print(json.dumps(figures))
        return 0
    print("design quality on the default scenario")
    print(f"  optimised tests u(K)/K  {100 * optimised.objective:7.3f} %")
    print(f"  naive series u(K)/K     {100 * naive[2]:7.3f} %")
    print(f"  ratio naive/optimised   {ratio:7.2f} x   (target >= 1.5x)")
    print(f"small instance: {pool.size} candidates, {n_sets} sets of {count}")
    print(f"  optimiser   objective {100 * small.objective:.4f} %  in {optimiser_s * 1e3:8.1f} ms")
    print(f"  exhaustive  objective {100 * exact_value:.4f} %  in {exhaustive_s * 1e3:8.1f} ms")
    print(
        f"  gap {gap_pct:+.3f} % (target within 1 %), "
        f"speed-up {exhaustive_s / optimiser_s:.0f} x (target >= 20x)"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
