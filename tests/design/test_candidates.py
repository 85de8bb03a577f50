"""Candidate mixtures when the shelf cannot make any: an empty set and failed checks.

Found by fuzzing (tests/test_fuzz.py): a valid plan whose only pipette is larger than the
mixture (one 25 mL pipette for 10 mL tubes) used to stop the design with an input error
instead of a plan whose failed checks say what binds. The plans are the embedded default
scenario with an invented one-device shelf.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from planner.design.candidates import candidate_set
from planner.pipeline import design_plan
from planner.planfile import plan_from_mapping

ROOT = Path(__file__).resolve().parents[2]


def _plan(vessel: str, shelf: list[dict]):
    data = tomllib.loads((ROOT / "planner" / "data" / "default.toml").read_text("utf-8"))
    data["glassware"] = shelf
    data["design"]["vessel"] = vessel
    if vessel != "tube":
        del data["design"]["total_volume_mL"]
    return plan_from_mapping(data)


PIPETTE_25 = {"kind": "transfer-pipette", "volume_mL": 25}


def test_a_shelf_that_delivers_nothing_gives_no_candidates_in_tubes():
    # 10 mL tubes, one 25 mL pipette: no reagent volume and no diluent volume fits.
    candidates = candidate_set(_plan("tube", [PIPETTE_25]))
    assert candidates.size == 0


def test_a_flask_holds_only_the_diluent_when_nothing_can_be_delivered():
    # 10 mL flask, one 25 mL pipette: only the diluent to the mark, no reagent at all.
    candidates = candidate_set(_plan("flask-10", [PIPETTE_25]))
    assert candidates.size == 1
    assert float(candidates.volumes_mL[0, :-1].sum()) == 0.0


@pytest.mark.parametrize("vessel", ["tube", "flask-10"])
def test_the_design_reports_what_binds(vessel):
    plan = design_plan(_plan(vessel, [PIPETTE_25]))
    failed = {check.name for check in plan.checks if check.status == "fail"}
    assert "design-feasibility" in failed
    assert plan.failed
