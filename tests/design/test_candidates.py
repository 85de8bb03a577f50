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


def _shelf_at_the_limits():
    """The default plan with MAX_STOCKS stocks and MAX_GLASSWARE [[glassware]] entries: every
    catalogue device (ISO tables, ISO 8655-2 piston pipettes) smallest first, graduated
    devices and piston pipettes read finely (about 10 000 readings each, within the limit)."""
    from planner.lab.tolerances import ISO_8655_2_ERRORS_uL, ISO_TOLERANCES_mL
    from planner.planfile.schema import MAX_GLASSWARE, MAX_STOCKS

    data = tomllib.loads((ROOT / "planner" / "data" / "default.toml").read_text("utf-8"))
    reagents = [s for s in data["stocks"] if not s.get("diluent")]
    factor = 1
    while len(data["stocks"]) < MAX_STOCKS:
        factor += 1
        for stock in reagents[: MAX_STOCKS - len(data["stocks"])]:
            # The reagent at 1/factor of its strength, the medium (H+, NO3-) as it is.
            contains = {
                k: v if k in ("H+", "NO3-") else v / factor for k, v in stock["contains_M"].items()
            }
            data["stocks"].append(dict(stock, id=f"{stock['id']}-{factor}", contains_M=contains))
    shelf = [
        {"kind": kind, "volume_mL": size, "count": MAX_STOCKS}
        for kind, classes in ISO_TOLERANCES_mL.items()
        for size in classes["A"]
    ]
    for entry in shelf:
        if entry["kind"] in ("buret", "graduated-pipette", "graduated-cylinder"):
            entry["division_mL"] = entry["volume_mL"] / 10_000
    shelf += [
        {
            "kind": "piston-pipette",
            "range_uL": [top / 10, top],
            "step_uL": max(0.001, top / 10_000),
            "count": MAX_STOCKS,
        }
        for top in ISO_8655_2_ERRORS_uL
    ]
    shelf.sort(key=lambda e: e.get("volume_mL", e.get("range_uL", [0, 0])[1] / 1000))
    data["glassware"] = [*shelf[: MAX_GLASSWARE - 1], {"kind": "tube", "volume_mL": 10}]
    return plan_from_mapping(data)


def test_a_shelf_at_the_plan_file_limits_plans():
    # The reader accepts 12 stocks and 40 finely read devices (planner.planfile.schema); the
    # design must then plan them, not refuse them (its volume table once did, with exit 2)
    # nor thin each stock to about 3 volumes (11 reagent stocks in 150 000 candidates), which
    # failed the feasibility check.
    from planner.planfile.schema import MAX_GLASSWARE, MAX_STOCKS

    inputs = _shelf_at_the_limits()
    assert (len(inputs.stocks), len(inputs.glassware)) == (MAX_STOCKS, MAX_GLASSWARE)
    candidates = candidate_set(inputs)
    assert candidates.size <= 150_000
    reagent_columns = [j for j, sid in enumerate(candidates.stock_ids) if sid != "acid"]
    # The default has two reaction components, so a candidate takes at most two reagent
    # stocks (Caratheodory), and each of the 11 reagent stocks keeps many more volumes:
    # 1 + 11 n + 55 n^2 <= 150 000 gives n = 52 when the lists are cut evenly.
    used = (candidates.volumes_mL[:, reagent_columns] > 0).sum(axis=1)
    assert used.max() == 2
    assert min(len(candidates.options[j]) - 1 for j in reagent_columns) >= 20
    plan = design_plan(inputs, candidates=candidates)
    failed = [c.name for c in plan.checks if c.status == "fail"]
    assert failed == []
