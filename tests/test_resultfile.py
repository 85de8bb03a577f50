"""Tests of planner.resultfile: a saved plan result (JSON) back to the stage results.

The documents are the embedded default scenario's plan (``planner/data/default.toml``,
invented for this project), written by :func:`planner.report.plan_json.plan_json` and then
broken by hand. The errors must name the dotted key path, the value and a fix; the tests
match the path in the message, not only the type.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from importlib.resources import as_file, files
from pathlib import Path
from typing import Any

import pytest

from planner.errors import ResultFileError
from planner.pipeline import design_plan
from planner.planfile import load_plan
from planner.report.plan_json import plan_json
from planner.result import Plan
from planner.resultfile import LARGEST_NUMBER, SCHEMA, SavedPlan, load_result, parse_result

Document = dict[str, Any]


@pytest.fixture(scope="module")
def default_plan() -> Iterator[Plan]:
    with as_file(files("planner") / "data" / "default.toml") as path:
        yield design_plan(load_plan(path))


@pytest.fixture
def text(default_plan: Plan) -> str:
    return plan_json(default_plan)


@pytest.fixture
def document(text: str) -> Document:
    parsed: Document = json.loads(text)
    return parsed


def error_of(document_or_text: Document | str, source: str = "plan.json") -> ResultFileError:
    text = (
        document_or_text
        if isinstance(document_or_text, str)
        else json.dumps(document_or_text, indent=2)
    )
    with pytest.raises(ResultFileError) as caught:
        parse_result(text, source=source)
    return caught.value


# --------------------------------------------------------------------------------------------
# What reads
# --------------------------------------------------------------------------------------------


def test_schema_is_the_contract_name() -> None:
    # DESIGN.md section 5.
    assert SCHEMA == "planner.plan/2"


def test_written_plan_reads_back(default_plan: Plan, text: str) -> None:
    saved = parse_result(text, source="plan.json")
    assert isinstance(saved, SavedPlan)
    assert saved.inputs == default_plan.inputs
    assert saved.mixtures == default_plan.mixtures
    assert saved.totals == default_plan.totals


def test_unknown_top_level_blocks_and_unread_blocks_are_allowed(
    default_plan: Plan, document: Document
) -> None:
    # Consumers may add blocks; title, prediction, preparation and notes are not needed.
    document["lab_notebook"] = {"bench": 4, "initials": "invented"}
    for key in ("title", "prediction", "preparation", "notes", "checks"):
        del document[key]
    del document["totals_mL"]["dead_volume_mL"]
    saved = parse_result(json.dumps(document))
    assert saved.mixtures == default_plan.mixtures
    assert saved.stated_checks == ()
    # default.toml gives no dead volume, so the plan file's default of 5 mL applies
    # (planner/planfile/schema.py, session.dead_volume_mL).
    assert saved.totals.dead_volume_mL == 5.0


def test_whole_numbers_are_read_as_volumes(document: Document) -> None:
    # A person may write 3 for 3.0 mL.
    document["mixtures"][1]["additions"][0]["volume_mL"] = 3
    saved = parse_result(json.dumps(document))
    volume = saved.mixtures[1].additions[0].volume_mL
    assert volume == 3.0
    assert isinstance(volume, float)


def test_load_result_reads_a_file_with_a_byte_order_mark(
    default_plan: Plan, text: str, tmp_path: Path
) -> None:
    path = tmp_path / "plan.json"
    path.write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    assert load_result(path).mixtures == default_plan.mixtures


# --------------------------------------------------------------------------------------------
# What does not, and how it says so
# --------------------------------------------------------------------------------------------


def test_not_json_gives_line_and_column(text: str) -> None:
    # A doubled comma after the first "order" key, as a slip of the keyboard would leave it.
    broken = text.replace('"order": 1,', '"order": 1,,', 1)
    lines = broken.splitlines()
    line = next(n for n, row in enumerate(lines, start=1) if ",," in row)
    column = lines[line - 1].index(",,") + 2  # 1-based column of the second comma
    error = error_of(broken)
    assert f"line {line}, column {column}" in str(error)
    assert "plan.json" in str(error)
    assert '"order": 1,,' in str(error)


def test_truncated_file_is_a_syntax_error(text: str) -> None:
    error = error_of(text[: len(text) // 2])
    assert "JSON syntax error at line" in str(error)


def test_top_level_must_be_an_object() -> None:
    error = error_of("[1, 2, 3]")
    assert "must be a JSON object" in str(error)


@pytest.mark.parametrize("schema", ["planner.plan/1", "planner.plan/3", "planner.plan", 1])
def test_wrong_schema(document: Document, schema: object) -> None:
    document["schema"] = schema
    error = error_of(document)
    assert error.field == "schema"
    assert str(error).startswith("schema: not a schema this version reads")
    assert repr(schema) in str(error)
    assert SCHEMA in str(error)


def test_missing_schema(document: Document) -> None:
    del document["schema"]
    assert str(error_of(document)).startswith("schema: missing required key")


def test_missing_key_names_its_path(document: Document) -> None:
    del document["mixtures"][3]["additions"][1]["volume_mL"]
    error = error_of(document)
    assert error.field == "mixtures[3].additions[1].volume_mL"
    assert str(error).startswith("mixtures[3].additions[1].volume_mL: missing required key")


def test_missing_block(document: Document) -> None:
    del document["totals_mL"]
    assert str(error_of(document)).startswith("totals_mL: missing required key")


@pytest.mark.parametrize(
    ("value", "expected"),
    [("2.6", "a number"), (True, "a number"), (None, "a number"), ([2.6], "a number")],
)
def test_wrong_type_names_its_path_and_value(
    document: Document, value: object, expected: str
) -> None:
    document["mixtures"][3]["additions"][1]["volume_mL"] = value
    error = error_of(document)
    assert error.field == "mixtures[3].additions[1].volume_mL"
    assert f"wrong type, expected {expected}" in str(error)
    assert f"(got {value!r})" in str(error)


@pytest.mark.parametrize(
    ("path", "edit", "expected"),
    [
        ("mixtures[0].additions[0].order", ("additions", 0, "order", 2.0), "a whole number"),
        ("mixtures[0].additions[0].devices", ("additions", 0, "devices", "buret-25mL"), "a list"),
        ("mixtures[0].initial_M.H+", ("initial_M", "H+", "0.5"), "a number"),
        ("mixtures[0].id", ("id", 1), "a string"),
    ],
)
def test_wrong_type_in_nested_places(
    document: Document, path: str, edit: tuple[Any, ...], expected: str
) -> None:
    target: Any = document["mixtures"][0]
    *keys, last, value = edit
    for key in keys:
        target = target[key]
    target[last] = value
    error = error_of(document)
    assert error.field == path
    assert f"wrong type, expected {expected}" in str(error)


@pytest.mark.parametrize("token", ["NaN", "Infinity", "-Infinity"])
def test_nan_and_infinity_are_refused(text: str, token: str) -> None:
    # Python's json module reads these tokens; strict JSON has none, and the planner never
    # writes them. The edit replaces the first absorbance of the document (the blank's).
    head, tail = text.split('"absorbance": ', 1)
    number_end = tail.index(",")
    broken = f'{head}"absorbance": {token}{tail[number_end:]}'
    error = error_of(broken)
    assert error.field == "mixtures[0].absorbance"
    assert "finite number" in str(error)


def test_nan_is_refused_in_blocks_not_read(document: Document) -> None:
    document["prediction"]["u_K"] = float("nan")
    assert error_of(document).field == "prediction.u_K"


def test_unknown_key_in_an_addition_suggests_the_right_one(document: Document) -> None:
    entry = document["mixtures"][2]["additions"][0]
    entry["volume_ml"] = entry.pop("volume_mL")
    error = error_of(document)
    assert error.field == "mixtures[2].additions[0].volume_ml"
    assert "unknown key" in str(error)
    assert "did you mean 'volume_mL'?" in str(error)


def test_unknown_key_in_a_mixture(document: Document) -> None:
    document["mixtures"][4]["colour"] = "red"
    error = error_of(document)
    assert error.field == "mixtures[4].colour"
    assert "total_volume_mL" in error.hint  # the allowed keys are listed


def test_unknown_key_in_totals(document: Document) -> None:
    document["totals_mL"]["sesion"] = document["totals_mL"].pop("session")
    error = error_of(document)
    assert error.field == "totals_mL.sesion"
    assert "did you mean 'session'?" in str(error)


def test_unknown_check_status(document: Document) -> None:
    document["checks"][0]["status"] = "ok"
    error = error_of(document)
    assert error.field == "checks[0].status"
    assert "'ok'" in str(error)


def test_repeated_key_names_its_path(text: str) -> None:
    broken = text.replace('"order": 1,', '"order": 1, "order": 2,', 1)
    error = error_of(broken)
    assert error.field == "mixtures[0].additions[0].order"
    assert "more than once" in str(error)


def test_negative_volume_is_refused(document: Document) -> None:
    document["mixtures"][2]["additions"][1]["volume_mL"] = -1.1
    error = error_of(document)
    assert error.field == "mixtures[2].additions[1].volume_mL"
    assert "must be at least 0" in str(error)
    assert "(got -1.1)" in str(error)


def test_zero_total_volume_is_refused(document: Document) -> None:
    document["mixtures"][2]["total_volume_mL"] = 0
    assert error_of(document).field == "mixtures[2].total_volume_mL"


def test_invalid_inputs_are_prefixed_with_inputs(document: Document) -> None:
    document["inputs"]["stocks"][2]["contains_M"]["SCN-"] = -6.0e-4
    error = error_of(document, source="bench4/plan.json")
    assert error.field == "inputs.stocks[2].contains_M.SCN-"
    message = str(error)
    assert message.startswith("inputs.stocks[2].contains_M.SCN-: must be greater than 0")
    assert message.count("bench4/plan.json") == 1


def test_unknown_key_in_inputs_is_an_error(document: Document) -> None:
    # inputs is a plan file: unknown keys there are errors as in the TOML.
    document["inputs"]["design"]["standard"] = 5
    error = error_of(document)
    assert error.field == "inputs.design.standard"
    assert "did you mean 'standards'?" in str(error)


def test_missing_inputs(document: Document) -> None:
    del document["inputs"]
    assert error_of(document).field == "inputs"


def test_load_result_names_a_missing_file(tmp_path: Path) -> None:
    path = tmp_path / "nowhere" / "plan.json"
    with pytest.raises(ResultFileError, match="cannot read the plan result") as caught:
        load_result(path)
    assert str(path) in str(caught.value)


def test_load_result_refuses_non_utf8(tmp_path: Path) -> None:
    path = tmp_path / "plan.json"
    path.write_bytes(b'{"schema": "planner.plan/2", "title": "\xff"}')
    with pytest.raises(ResultFileError, match="not UTF-8 text"):
        load_result(path)


def test_load_result_names_the_file_in_field_errors(document: Document, tmp_path: Path) -> None:
    del document["mixtures"][0]["role"]
    path = tmp_path / "plan.json"
    path.write_text(json.dumps(document), encoding="utf-8")
    with pytest.raises(ResultFileError) as caught:
        load_result(path)
    assert caught.value.field == "mixtures[0].role"
    assert str(path) in str(caught.value)


def test_result_file_error_is_a_value_error(document: Document) -> None:
    # errors.py: invalid input is also a ValueError.
    document["schema"] = "other"
    assert isinstance(error_of(document), ValueError)


# --------------------------------------------------------------------------------------------
# The preparation and prediction blocks, and numbers too large for a plan
# --------------------------------------------------------------------------------------------


def test_preparation_and_prediction_read_back(default_plan: Plan, text: str) -> None:
    saved = parse_result(text)
    # The document holds every stock's preparation and the prediction at full precision
    # (DESIGN.md section 5, contract detail 1), so they come back equal.
    assert saved.preparations == default_plan.preparations
    assert default_plan.prediction is not None
    assert saved.prediction is not None
    for key in ("epsilon", "u_epsilon", "K", "u_K", "K_bias_from_assumption", "K_true"):
        assert getattr(saved.prediction, key) == getattr(default_plan.prediction, key)
    assert saved.prediction.K_per_test == default_plan.prediction.K_per_test


def test_missing_or_null_blocks_read_as_none(document: Document) -> None:
    document["prediction"] = None
    del document["preparation"]
    saved = parse_result(json.dumps(document))
    assert saved.prediction is None
    assert saved.preparations is None


def test_unknown_key_in_a_preparation(document: Document) -> None:
    entry = document["preparation"][1]
    entry["mass_mg"] = entry.pop("mass_g")
    error = error_of(document)
    assert error.field == "preparation[1].mass_mg"
    assert "did you mean 'mass_g'?" in str(error)


def test_missing_key_in_the_prediction(document: Document) -> None:
    del document["prediction"]["u_K"]
    error = error_of(document)
    assert error.field == "prediction.u_K"
    assert "missing required key" in str(error)


def test_fractional_flask_count_is_refused(document: Document) -> None:
    document["preparation"][0]["flasks"] = 1.5
    error = error_of(document)
    assert error.field == "preparation[0].flasks"
    assert "a whole number" in str(error)


@pytest.mark.parametrize(
    ("path", "value"),
    [
        (("mixtures", 2, "additions", 1, "volume_mL"), 1e308),
        (("mixtures", 2, "absorbance"), -1e200),
        (("totals_mL", "to_prepare", "acid"), 1e101),
        (("preparation", 0, "mass_g"), 1.7976931348623157e308),
        (("prediction", "K_per_test", 0), 10**400),
    ],
)
def test_numbers_too_large_for_a_plan_are_refused(document: Document, path, value) -> None:
    # LARGEST_NUMBER = 1e100: 1e308 mL in picolitres (x 1e9) is beyond the largest double,
    # about 1.8e308 (IEEE 754 binary64).
    target: Any = document
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = value
    error = error_of(document)
    dotted = ".".join(f"[{p}]" if isinstance(p, int) else p for p in path).replace(".[", "[")
    assert error.field == dotted
    assert str(error).startswith(f"{dotted}: number too large for a plan result")
    assert LARGEST_NUMBER == 1e100


def test_large_numbers_in_inputs_are_left_to_the_plan_file_rules(document: Document) -> None:
    # available_mL has no upper bound in a plan file (planner/planfile/schema.py).
    document["inputs"]["stocks"][0]["available_mL"] = 1e150
    assert parse_result(json.dumps(document)).inputs.stocks[0].available_mL == 1e150


def test_unknown_mixture_role_is_refused_with_its_field(document: Document) -> None:
    # A mixture's role is one of the three words of planner.result.Role (docs/nomenclature.md),
    # read as strictly as a check's status: a misspelt role names its field, not a check.
    document["mixtures"][1]["role"] = "standards"
    with pytest.raises(ResultFileError) as caught:
        parse_result(json.dumps(document))
    assert caught.value.field == "mixtures[1].role"
    assert "blank" in str(caught.value)
