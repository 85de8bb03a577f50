"""Planner for spectrophotometric equilibrium-constant experiments.

The public API follows the data flow: plan file -> inputs -> design (verified) -> prediction ->
reports::

    from planner import load_plan, design_plan, verify_plan, simulate, write_reports

    inputs = load_plan("recipes/micro-piston.toml")
    plan = design_plan(inputs)                        # recipes, totals, checks, prediction
    checks = verify_plan(inputs, plan.mixtures, plan.totals)
    virtual_class = simulate(inputs, plan.mixtures, trials=10_000, rng=np.random.default_rng(1))
    write_reports(plan, "sheets", date="2026-12-02")

The names are loaded on first use, so ``import planner`` (and the command line) stays fast.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

__version__ = "0.1.0"

__all__ = ["design_plan", "load_plan", "simulate", "verify_plan", "write_reports"]

_HOMES = {
    "load_plan": "planner.planfile",
    "design_plan": "planner.pipeline",
    "verify_plan": "planner.verify",
    "simulate": "planner.predict.montecarlo",
    "write_reports": "planner.report",
}

if TYPE_CHECKING:
    from planner.pipeline import design_plan
    from planner.planfile import load_plan
    from planner.predict.montecarlo import simulate
    from planner.report import write_reports
    from planner.verify import verify_plan


def __getattr__(name: str) -> Any:
    if name in _HOMES:
        return getattr(importlib.import_module(_HOMES[name]), name)
    raise AttributeError(f"module 'planner' has no attribute {name!r}")
