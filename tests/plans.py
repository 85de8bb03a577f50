"""Plan files designed once per test session, for the test modules that only read them.

A designed plan is a tree of frozen dataclasses that no test changes, so one object serves
every module that reads the same unchanged plan file; before, each module designed the default
and the recipes again (the default alone 39 times a session), and the repeats cost 28 s of
CPU a session.
Tests that change a plan file, or the inputs, design their own.
"""

from __future__ import annotations

import functools
from pathlib import Path

from planner.inputs import PlanInputs
from planner.pipeline import design_plan
from planner.planfile import load_plan
from planner.result import Plan

__all__ = ["designed", "plan_of"]


@functools.cache
def _designed(path: Path) -> tuple[PlanInputs, Plan]:
    inputs = load_plan(path)
    return inputs, design_plan(inputs)


def designed(path: Path | str) -> tuple[PlanInputs, Plan]:
    """The plan file's validated inputs and its plan, designed on the first call."""
    return _designed(Path(path).resolve())


def plan_of(path: Path | str) -> Plan:
    """The plan file's plan, designed on the first call."""
    return designed(path)[1]
