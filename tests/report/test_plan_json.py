"""Tests of planner.report.plan_json: the plan result document (DESIGN.md section 5)."""

from __future__ import annotations

import dataclasses
import json

from planner.planfile import plan_from_mapping, plan_to_mapping
from planner.report.plan_json import SCHEMA, plan_document, plan_json
from planner.result import Check
from tests.plans import plan_of
from tests.report.conftest import PRECISE_VOLUME_mL

TOP_KEYS = {
    "schema",
    "title",
    "inputs",
    "mixtures",
    "totals_mL",
    "checks",
    "prediction",
    "analysis",
    "global_fit_prediction",
    "preparation",
    "notes",
}
MIXTURE_KEYS = {
    "id",
    "role",
    "total_volume_mL",
    "additions",
    "initial_M",
    "equilibrium_M",
    "absorbance",
    "u_absorbance",
    "bound_fraction",
    "ionic_strength_M",
}
ADDITION_KEYS = {"stock", "volume_mL", "devices", "order", "deliveries"}
TOTALS_KEYS = {"per_bench", "per_section", "session", "to_prepare", "dead_volume_mL", "for_stocks"}
PREDICTION_KEYS = {
    "epsilon",
    "u_epsilon",
    "K",
    "u_K",
    "K_bias_from_assumption",
    "K_true",
    "epsilon_true",
    "K_per_test",
    "K_bias_causes",
}


def test_document_has_every_contract_key(plan):
    document = json.loads(plan_json(plan))
    assert set(document) == TOP_KEYS
    assert document["schema"] == SCHEMA == "planner.plan/2"
    assert document["title"] == plan.inputs.title
    assert [m["id"] for m in document["mixtures"]] == ["B1", "S1", "S2", "T1", "T2"]
    for mixture in document["mixtures"]:
        assert set(mixture) == MIXTURE_KEYS
        for addition in mixture["additions"]:
            assert set(addition) == ADDITION_KEYS
            assert isinstance(addition["devices"], list)
    assert set(document["totals_mL"]) == TOTALS_KEYS
    assert document["totals_mL"]["dead_volume_mL"] == 5.0
    assert all(set(c) == {"name", "status", "detail"} for c in document["checks"])
    assert set(document["prediction"]) == PREDICTION_KEYS
    assert document["prediction"]["K_per_test"] == [110.1, 114.6]
    assert document["preparation"][0]["solid_formula"] == "Fe(NO3)3(H2O)9"
    assert document["notes"] == ["Invented example for the report tests."]


def test_full_precision_survives(plan):
    text = plan_json(plan)
    assert "4.123456789012" in text
    document = json.loads(text)
    s1 = document["mixtures"][1]
    thiocyanate = next(a for a in s1["additions"] if a["stock"] == "thiocyanate")
    assert thiocyanate["volume_mL"] == PRECISE_VOLUME_mL
    assert document["prediction"]["epsilon"] == 4181.818181818182
    assert document["totals_mL"]["per_bench"]["thiocyanate"] == 14.123456789012


def test_keys_are_sorted_and_text_ends_in_newline(plan):
    text = plan_json(plan)
    assert text.endswith("}\n")
    top_level = [line.strip().split('"')[1] for line in text.splitlines() if line.startswith('  "')]
    assert top_level == sorted(TOP_KEYS)


def test_additions_keep_order_and_devices(plan):
    s2 = plan_document(plan)["mixtures"][2]
    assert [a["stock"] for a in s2["additions"]] == ["diluent", "iron", "thiocyanate"]
    assert [a["order"] for a in s2["additions"]] == [1, 2, 3]
    assert s2["additions"][2]["devices"] == ["transfer-pipette-2mL", "transfer-pipette-2mL"]


def test_checks_failed_first_then_warn_then_pass_stable(plan):
    checks = (
        Check("a", "pass", ""),
        Check("b", "fail", ""),
        Check("c", "warn", ""),
        Check("d", "pass", ""),
        Check("e", "fail", ""),
    )
    document = plan_document(dataclasses.replace(plan, checks=checks))
    assert [c["name"] for c in document["checks"]] == ["b", "e", "c", "a", "d"]


def test_fixture_checks_order(plan):
    statuses = [c["status"] for c in plan_document(plan)["checks"]]
    assert statuses == ["fail", "warn", "pass"]


def test_no_prediction_is_null(plan):
    text = plan_json(dataclasses.replace(plan, prediction=None))
    assert json.loads(text)["prediction"] is None


def test_inputs_block_is_the_plan_file_mapping_and_reloads(plan):
    inputs = json.loads(plan_json(plan))["inputs"]
    assert inputs == json.loads(json.dumps(plan_to_mapping(plan.inputs)))
    # The fixture is built by hand, without the defaults the plan-file reader fills in, so
    # the reloaded inputs are compared on what the fixture sets, not as a whole.
    reloaded = plan_from_mapping(inputs)
    assert reloaded.title == plan.inputs.title
    assert [s.id for s in reloaded.stocks] == ["iron", "thiocyanate", "diluent"]
    assert reloaded.session == plan.inputs.session


def test_bias_causes_are_written_multiply_to_the_bias_and_read_back() -> None:
    # A recipe whose mixtures differ in ionic strength, so every share is a number; the
    # shares of the first three causes multiply to the whole bias (planner.predict.bias),
    # and the ionic medium's share is said apart, not in it.
    from pathlib import Path

    from planner.resultfile.reader import parse_result

    recipe = Path(__file__).parents[2] / "recipes" / "iron-thiocyanate-flasks.toml"
    plan = plan_of(recipe)
    text = plan_json(plan)
    block = json.loads(text)["prediction"]
    causes = block["K_bias_causes"]
    assert set(causes) == {
        "all_bound_assumption",
        "absorbing_reagents",
        "stray_light",
        "ionic_medium",
        "temperature",
    }
    together = (1 + causes["all_bound_assumption"]) * (1 + causes["absorbing_reagents"]) * (
        1 + causes["stray_light"]
    ) - 1
    assert abs(together - block["K_bias_from_assumption"]) < 1e-9
    assert causes["ionic_medium"] != 0  # this recipe's mixtures differ in ionic strength
    saved = parse_result(text, source="plan.json")
    assert saved.prediction is not None
    assert plan.prediction is not None
    assert saved.prediction.K_bias_causes == plan.prediction.K_bias_causes
