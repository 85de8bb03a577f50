"""Tests of planner.verify: the independent re-check of a finished plan, through saved JSON.

The plan under test is the embedded default scenario (``planner/data/default.toml``, invented
for this project), designed by :func:`planner.pipeline.design_plan`, written as the
``planner.plan/1`` document and read back with :func:`planner.resultfile.parse_result`. The
broken plans are copies of that document edited the way a person editing ``plan.json`` by
hand would. Every edited number is derived from the plan's own recipe, and every expected
number says where it comes from; none is computed by the verifier under test.
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Iterator
from importlib.resources import as_file, files
from typing import Any

import pytest

from planner.pipeline import design_plan
from planner.planfile import load_plan, plan_from_mapping, plan_to_mapping
from planner.report.plan_json import plan_json
from planner.result import Check, Plan
from planner.resultfile import parse_result
from planner.verify import CHECK_NAMES, verify_plan

Document = dict[str, Any]

#: The formation constant of FeSCN2+ in the default scenario [L/mol]: default.toml, K = 98
#: (de Berg, Maeder and Clifford, Inorganica Chimica Acta 445 (2016) 155-159).
DEFAULT_K = 98.0


# --------------------------------------------------------------------------------------------
# Helpers
# --------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def default_plan() -> Iterator[Plan]:
    with as_file(files("planner") / "data" / "default.toml") as path:
        yield design_plan(load_plan(path))


@pytest.fixture
def document(default_plan: Plan) -> Document:
    """A fresh copy of the default plan's JSON document, free to edit."""
    parsed: Document = json.loads(plan_json(default_plan))
    return parsed


def verified(document: Document) -> dict[str, Check]:
    """Write the document as text, read it back as ``planner verify`` would, re-check it."""
    saved = parse_result(json.dumps(document, indent=2), source="edited plan.json")
    return {c.name: c for c in verify_plan(saved.inputs, saved.mixtures, saved.totals)}


def failed(checks: dict[str, Check]) -> set[str]:
    return {name for name, c in checks.items() if c.status == "fail"}


def mixture(document: Document, mixture_id: str) -> Document:
    found: list[Document] = [m for m in document["mixtures"] if m["id"] == mixture_id]
    assert len(found) == 1, f"no single mixture {mixture_id} in the plan"
    return found[0]


def addition(mix: Document, stock: str) -> Document:
    found: list[Document] = [a for a in mix["additions"] if a["stock"] == stock]
    assert len(found) == 1, f"{mix['id']} has no single addition of {stock}"
    return found[0]


def role(document: Document, name: str) -> list[Document]:
    return [m for m in document["mixtures"] if m["role"] == name]


def limiting_stock(document: Document) -> str:
    """The one stock that supplies the design's limiting reagent (thiocyanate by default)."""
    limiting = document["inputs"]["design"]["limiting"]
    ids = [st["id"] for st in document["inputs"]["stocks"] if limiting in st["contains_M"]]
    assert len(ids) == 1, f"expected one stock with {limiting}, found {ids}"
    return str(ids[0])


def diluent_stock(document: Document) -> str:
    ids = [st["id"] for st in document["inputs"]["stocks"] if st["diluent"]]
    assert len(ids) == 1
    return str(ids[0])


def min_excess_M(k: float, limiting_M: float, tolerance: float) -> float:
    """Smallest total excess that keeps "all of it is bound" within ``tolerance`` [mol/L].

    DESIGN.md section 3: [M]total = (1 - tol)[L]total + (1 - tol) / (K tol), written out here
    so the verifier's own implementation is not used to check itself.
    """
    return (1 - tolerance) * limiting_M + (1 - tolerance) / (k * tolerance)


# --------------------------------------------------------------------------------------------
# The default plan and its round trip
# --------------------------------------------------------------------------------------------


def test_default_plan_passes_every_check(default_plan: Plan) -> None:
    statuses = {c.name: c.status for c in default_plan.checks}
    # One finding per stable check name, none of them a failure (warnings are advice).
    assert set(CHECK_NAMES) <= set(statuses)
    assert {name for name, status in statuses.items() if status not in ("pass", "warn")} == set()


def test_round_trip_reads_back_the_plan_exactly(default_plan: Plan) -> None:
    saved = parse_result(plan_json(default_plan), source="plan.json")
    # Full float precision in the JSON (DESIGN.md section 5, contract detail 1) means the
    # stage results come back equal, not merely close.
    assert saved.inputs == default_plan.inputs
    assert saved.mixtures == default_plan.mixtures
    assert saved.totals == default_plan.totals
    # The document lists checks worst first; the set is the plan's.
    assert sorted(saved.stated_checks, key=repr) == sorted(default_plan.checks, key=repr)


def test_round_trip_gives_the_same_findings(default_plan: Plan) -> None:
    saved = parse_result(plan_json(default_plan), source="plan.json")
    again = verify_plan(saved.inputs, saved.mixtures, saved.totals)
    original = verify_plan(default_plan.inputs, default_plan.mixtures, default_plan.totals)
    assert [(c.name, c.status) for c in again] == [(c.name, c.status) for c in original]
    assert [c.detail for c in again] == [c.detail for c in original]
    # And the same as the checks the design itself reported.
    design_statuses = {c.name: c.status for c in default_plan.checks}
    assert {c.name: c.status for c in again} == {n: design_statuses[n] for n in CHECK_NAMES}


def test_untouched_document_verifies_as_designed(document: Document) -> None:
    stated = {c["name"]: c["status"] for c in document["checks"]}
    checks = verified(document)
    assert {name: c.status for name, c in checks.items()} == {n: stated[n] for n in checks}


# --------------------------------------------------------------------------------------------
# Hand-broken copies: verify must fail the right check and name the mixture
# --------------------------------------------------------------------------------------------


def test_pipette_that_cannot_deliver_the_volume_fails(document: Document) -> None:
    # The plan's own recipe, hand-edited: a standard's limiting-reagent volume (not 5 mL) is
    # given to the 5 mL transfer pipette, which delivers only its nominal 5 mL.
    stock = limiting_stock(document)
    candidates = [
        m
        for m in role(document, "standard")
        if addition(m, stock)["volume_mL"] != 5.0
        and addition(m, stock)["devices"] != ["transfer-pipette-5mL"]
    ]
    assert candidates, "every standard already uses 5 mL of the limiting stock"
    target = candidates[-1]
    volume = addition(target, stock)["volume_mL"]
    addition(target, stock)["devices"] = ["transfer-pipette-5mL"]

    checks = verified(document)
    assert failed(checks) == {"deliverable-volumes"}
    detail = checks["deliverable-volumes"].detail
    assert f"{target['id']} {stock} {volume:g} mL" in detail
    assert "transfer-pipette-5mL" in detail


def test_device_not_on_the_shelf_fails(document: Document) -> None:
    # The plan's own recipe, hand-edited: a 50 mL buret, which default.toml does not list.
    shelf = document["inputs"]["glassware"]
    assert not any(g["kind"] == "buret" and g["volume_mL"] == 50 for g in shelf)
    stock = limiting_stock(document)
    target = role(document, "standard")[1]
    addition(target, stock)["devices"] = ["buret-50mL"]

    checks = verified(document)
    assert failed(checks) == {"deliverable-volumes"}
    detail = checks["deliverable-volumes"].detail
    assert target["id"] in detail
    assert "buret-50mL not on the shelf" in detail


def test_additions_that_do_not_sum_to_the_total_fail(document: Document) -> None:
    # The plan's own recipe, hand-edited: 0.5 mL more diluent in a test mixture, total unchanged.
    target = role(document, "test")[2]
    diluent = addition(target, diluent_stock(document))
    diluent["volume_mL"] += 0.5
    expected_sum = target["total_volume_mL"] + 0.5

    checks = verified(document)
    assert "volume-totals" in failed(checks)
    detail = checks["volume-totals"].detail
    assert f"{target['id']}: additions sum to {expected_sum:.4f} mL" in detail
    # The recipe is still made of deliverable volumes: only the sum is wrong.
    assert checks["deliverable-volumes"].status == "pass"


def test_standard_moved_out_of_the_window_fails(document: Document) -> None:
    # The plan's own recipe, hand-edited: the weakest standard's limiting volume scaled so it
    # should read about half the window's low end (Beer-Lambert, A proportional to the
    # limiting reagent at a fixed excess), the diluent adjusted so the total still holds, and
    # nothing else updated.
    low = document["inputs"]["instrument"]["absorbance_window"][0]
    stock, diluent_id = limiting_stock(document), diluent_stock(document)
    weakest = min(role(document, "standard"), key=lambda m: m["absorbance"])
    limiting, diluent = addition(weakest, stock), addition(weakest, diluent_id)
    old = limiting["volume_mL"]
    new = round(old * 0.5 * low / weakest["absorbance"], 2)
    # A buret reads to 0.01 mL and delivers at least 0.10 mL (DESIGN.md section 5, detail 5),
    # so the edited recipe is still deliverable.
    assert limiting["devices"] == ["buret-25mL"]
    assert diluent["devices"] == ["buret-25mL"]
    assert new >= 0.10
    limiting["volume_mL"] = new
    diluent["volume_mL"] += old - new

    checks = verified(document)
    assert checks["deliverable-volumes"].status == "pass"
    assert checks["volume-totals"].status == "pass"
    # The reading leaves the window, and the stated state is stale; so are the ionic strength
    # (the thiocyanate stock carries K+ and SCN-) and the stock totals, left unedited.
    assert {"absorbance-window", "concentrations"} <= failed(checks)
    assert failed(checks) <= {
        "absorbance-window",
        "concentrations",
        "ionic-strength",
        "stock-totals",
    }
    window = checks["absorbance-window"].detail
    reading = re.search(rf"{weakest['id']} \(standard\) reads (\d\.\d+), outside", window)
    assert reading is not None, window
    # About half the low end, as aimed: 3 % allows for the bound fraction and the rounding of
    # the new volume to 0.01 mL.
    expected = weakest["absorbance"] * new / old
    assert float(reading.group(1)) == pytest.approx(expected, rel=0.03, abs=0.001)
    assert f"{weakest['id']} initial {document['inputs']['design']['limiting']}" in (
        checks["concentrations"].detail
    )


def test_edited_absorbance_fails(document: Document) -> None:
    # The plan's own recipe, hand-edited: a test mixture's stated reading raised by 0.05.
    target = role(document, "test")[0]
    stated = target["absorbance"]
    target["absorbance"] = stated + 0.05

    checks = verified(document)
    assert failed(checks) == {"absorbance-window"}
    assert (
        f"{target['id']} absorbance: stated {stated + 0.05:.4g}, recomputed {stated:.4g}"
        in checks["absorbance-window"].detail
    )


def test_edited_session_total_fails(document: Document) -> None:
    # The plan's own totals, hand-edited: 10 mL more of the limiting stock for the session.
    stock = limiting_stock(document)
    session = document["totals_mL"]["session"]
    stated = session[stock]
    session[stock] = stated + 10.0

    checks = verified(document)
    assert failed(checks) == {"stock-totals"}
    assert (
        f"session {stock}: stated {stated + 10.0:.4g}, recomputed {stated:.4g} mL"
        in checks["stock-totals"].detail
    )


def test_stock_short_of_what_must_be_prepared_fails(document: Document) -> None:
    # The plan's own inputs, hand-edited: the limiting stock's available volume set 100 mL
    # below the plan's own to_prepare.
    stock = limiting_stock(document)
    need = document["totals_mL"]["to_prepare"][stock]
    available = float(math.floor(need) - 100)
    entry = next(st for st in document["inputs"]["stocks"] if st["id"] == stock)
    entry["available_mL"] = available

    checks = verified(document)
    assert failed(checks) == {"stock-inventory"}
    assert (
        f"{stock}: {need:.0f} mL needed, {available:g} mL available"
        in checks["stock-inventory"].detail
    )


def _assumption_detail_names_the_fix(
    detail: str, document: Document, tolerance: float
) -> tuple[Document, float]:
    """The detail names a standard and the excess DESIGN.md section 3 says it needs."""
    found = re.match(r"standard (\S+) binds only", detail)
    assert found is not None, detail
    worst = mixture(document, found.group(1))
    assert worst["role"] == "standard"
    limiting = document["inputs"]["design"]["limiting"]
    needed = min_excess_M(DEFAULT_K, worst["initial_M"][limiting], tolerance)
    assert f"Fix: an excess of {needed:.3g} mol/L Fe3+" in detail
    return worst, needed


def test_tightened_tolerance_fails_the_assumption_and_says_it_is_out_of_reach(
    document: Document,
) -> None:
    # The plan's own inputs, hand-edited: the assumption tolerance tightened from 5 % to 1 %,
    # which the default standards (about 96 % bound) do not meet.
    document["inputs"]["design"]["assumption_tolerance"] = 0.01

    checks = verified(document)
    assert failed(checks) == {"limiting-reagent-assumption"}
    detail = checks["limiting-reagent-assumption"].detail
    _, needed = _assumption_detail_names_the_fix(detail, document, 0.01)
    # (1 - tol) / (K tol) = 0.99 / 0.98, just above 1 mol/L of free iron(III): DESIGN.md
    # section 3 asks the tool to say plainly that this is out of reach and offer the
    # corrected analysis.
    assert needed > 1.0
    assert "out of practical reach" in detail
    assert "corrected analysis" in detail


@pytest.fixture(scope="module")
def weak_excess_plan(default_plan: Plan) -> Plan:
    # The default scenario with the strong iron(III) stock made 0.10 mol/L instead of 0.40
    # (nitrate 0.8 mol/L keeps it neutral with its 0.5 mol/L H+): an invented weak excess.
    mapping = plan_to_mapping(default_plan.inputs)
    stock = next(st for st in mapping["stocks"] if st["id"] == "iron-strong")
    stock["contains_M"] = {"Fe3+": 0.10, "H+": 0.5, "NO3-": 0.8}
    return design_plan(plan_from_mapping(mapping))


def test_weak_excess_fails_the_assumption_with_the_fix(weak_excess_plan: Plan) -> None:
    document: Document = json.loads(plan_json(weak_excess_plan))
    tolerance = document["inputs"]["design"]["assumption_tolerance"]

    checks = verified(document)
    assert "limiting-reagent-assumption" in failed(checks)
    detail = checks["limiting-reagent-assumption"].detail
    worst, _ = _assumption_detail_names_the_fix(detail, document, tolerance)
    # The verifier's bound fraction agrees with the design's stated one for that standard
    # (two implementations: candidate evaluation in design, a fresh solution in verify).
    assert f"binds only {100 * worst['bound_fraction']:.2f} %" in detail
    assert worst["bound_fraction"] < 1 - tolerance
    assert f"accept a tolerance of {1 - worst['bound_fraction']:.3g}" in detail
    # The design reported the same failure before the round trip.
    stated = {c.name: c for c in weak_excess_plan.checks}
    assert stated["limiting-reagent-assumption"] == checks["limiting-reagent-assumption"]


def test_stated_checks_are_not_trusted(document: Document) -> None:
    # A hand edit that also rewrites the stated checks to "pass" changes nothing: verification
    # re-derives every finding (here the absorbance edit of test_edited_absorbance_fails).
    target = role(document, "test")[0]
    target["absorbance"] += 0.05
    for check in document["checks"]:
        check["status"] = "pass"

    assert failed(verified(document)) == {"absorbance-window"}
