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

__all__ = ["MICRO_FLASKS", "designed", "plan_of"]


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


# An invented micro-scale bench: nickel and an invented chelator, piston pipettes into 10 mL
# flasks, every stock weighed from its solid and made up to the mark in 0.1 mol/L NaCl (so the
# ligand, its sodium salt in that medium, holds Na+ 0.12 and Cl- 0.1).
MICRO_FLASKS = """
title = "Nickel with an invented chelator, piston pipettes into 10 mL flasks"
[reaction]
temperature_C = 25
ionic_strength_M = 0.1
components = ["Ni2+", "Az-"]
[[reaction.species]]
name = "NiAz+"
formula = { "Ni2+" = 1, "Az-" = 1 }
K = 3.0e4
epsilon = 15000
[instrument]
wavelength_nm = 520
path_length_cm = 0.5
absorbance_window = [0.05, 1.2]
absorbance_sd = 0.002
stray_light = 0.0005
cuvette_fill_mL = 1.5
[[stocks]]
id = "nickel"
contains_M = { "Ni2+" = 1.0e-3, "NO3-" = 2.0e-3, "Na+" = 0.1, "Cl-" = 0.1 }
relative_uncertainty = 0.002
solid = { formula = "Ni(NO3)2(H2O)6", purity = 0.99 }
[[stocks]]
id = "ligand"
contains_M = { "Az-" = 0.02, "Na+" = 0.12, "Cl-" = 0.1 }
relative_uncertainty = 0.003
solid = { formula = "NaC10H8NO2", purity = 0.97, provides = "Az-" }
[[stocks]]
id = "buffer"
contains_M = { "Na+" = 0.1, "Cl-" = 0.1 }
diluent = true
[[glassware]]
kind = "piston-pipette"
range_uL = [100, 1000]
step_uL = 1
count = 2
[[glassware]]
kind = "piston-pipette"
range_uL = [1000, 5000]
step_uL = 10
[design]
standards = 5
tests = 6
limiting = "Ni2+"
vessel = "flask-10"
"""
