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


# --- work bounded by distinct volumes (issue 10 item 10, issue 11) ----------------------------

# An invented fifteen-entry shelf: seven transfer pipettes, three burets, four graduated
# pipettes and a piston pipette, every graded device finely read.
LARGE_SHELF = [
    *({"kind": "transfer-pipette", "volume_mL": v} for v in (0.5, 1, 2, 5, 10, 20, 25)),
    *(
        {"kind": "buret", "volume_mL": v, "division_mL": d, "count": 3}
        for v, d in ((10, 0.01), (25, 0.01), (50, 0.02))
    ),
    *({"kind": "graduated-pipette", "volume_mL": v, "division_mL": 0.01} for v in (1, 2, 5, 10)),
    {"kind": "piston-pipette", "range_uL": [100, 1000], "step_uL": 1},
]


def test_candidate_work_is_bounded_by_distinct_volumes():
    from planner.lab.deliveries import MAX_DELIVERIES, volume_table

    inputs = _plan("tube", LARGE_SHELF)
    table = volume_table(inputs.glassware, max_volume_mL=10.0)
    # Distinct volumes up to 10 mL on the shelf's common 1 µL step: at most 10 001 slots.
    slots = 10_001
    assert table.quantum_pL == 1_000_000
    # Each of the five rounds passes once over the slots per fixed delivery (15 entries with
    # one volume each at most), then one pass per graded device (8): a bound in slots, not
    # in combinations of deliveries.
    assert table.operations <= (MAX_DELIVERIES * 15 + 8) * slots
    candidates = candidate_set(inputs)
    assert 0 < candidates.size <= 150_000


def test_a_buret_serves_one_stock():
    # Invented: one 25 mL buret (count 1) and a 10 mL graduated pipette; only the first
    # stock in order of addition (the diluent in a tube) may use the buret.
    shelf = [
        {"kind": "buret", "volume_mL": 25},
        {"kind": "graduated-pipette", "volume_mL": 10},
        {"kind": "transfer-pipette", "volume_mL": 1},
    ]
    plan = design_plan(_plan("tube", shelf))
    served = {a.stock for m in plan.mixtures for a in m.additions if "buret-25mL" in a.devices}
    assert len(served) <= 1
    checks = {c.name: c.status for c in plan.checks}
    assert checks["buret-per-stock"] == "pass"
