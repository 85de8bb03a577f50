"""Designed plans shared by the prediction tests (designed once per session: ~1 s each)."""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.plans import plan_of

ROOT = Path(__file__).resolve().parents[2]
DEFAULT = ROOT / "planner" / "data" / "default.toml"
FLASKS = ROOT / "recipes" / "iron-thiocyanate-flasks.toml"
PISTON = ROOT / "recipes" / "micro-piston.toml"
#: The default's stocks and glassware without its constant medium, designed for the all-bound
#: analysis: the plan the all-bound predictions are tested on.
TUBES = ROOT / "recipes" / "iron-thiocyanate-tubes.toml"


@pytest.fixture(scope="session")
def default_plan():
    """The embedded default scenario (tubes, burets and transfer pipettes), designed."""
    return plan_of(DEFAULT)


@pytest.fixture(scope="session")
def tubes_plan():
    """The default's shelf in tubes for the all-bound analysis, no constant medium, designed."""
    return plan_of(TUBES)


@pytest.fixture(scope="session")
def flask_plan():
    """A recipe made up in 25 mL volumetric flasks, with combined pipette deliveries."""
    return plan_of(FLASKS)


@pytest.fixture(scope="session")
def piston_plan():
    """A recipe delivered with piston pipettes (ISO 8655-2 systematic and random errors)."""
    return plan_of(PISTON)
