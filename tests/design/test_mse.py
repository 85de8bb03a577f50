"""The MSE criterion: the designed tests' predicted mean squared error of K beats variance-only."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest

from planner.pipeline import design_plan
from planner.planfile import load_plan
from planner.predict.uncertainty import propagate

ROOT = Path(__file__).resolve().parents[2]
PLANS = [ROOT / "planner" / "data" / "default.toml", *sorted((ROOT / "recipes").glob("*.toml"))]


def _predicted_mse(plan) -> float:
    """Relative MSE of the K the plan's analysis reports, from the first-order prediction:
    (bias / K)^2 + (u / K)^2 (bias of the all-bound analysis on noise-free readings; the
    global fit returns the plan's K on them)."""
    result = propagate(plan.inputs, plan.mixtures)
    k_true = result.K_true
    if plan.analysis == "all-bound":
        bias = result.K.value / k_true - 1.0
        return bias**2 + (result.K.standard_uncertainty / k_true) ** 2
    assert result.global_fit_K is not None
    return (result.global_fit_K.standard_uncertainty / k_true) ** 2


@pytest.mark.parametrize("path", PLANS, ids=[p.stem for p in PLANS])
def test_mse_design_beats_the_variance_only_design(path) -> None:
    # MSE = bias^2 + variance (Casella and Berger, Statistical Inference, 2nd ed., 2002,
    # section 7.3.1, from memory): the design that minimises it, judged by the prediction
    # stage's own budget, is no worse than the one that minimises the variance alone.
    inputs = load_plan(path)
    assert inputs.design.criterion == "mse"
    variance_only = dataclasses.replace(
        inputs, design=dataclasses.replace(inputs.design, criterion="variance")
    )
    mse_plan = design_plan(inputs)
    variance_plan = design_plan(variance_only)
    assert _predicted_mse(mse_plan) <= _predicted_mse(variance_plan) * (1 + 1e-9)
