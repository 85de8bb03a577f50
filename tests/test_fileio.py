"""Tests of planner.fileio: the one text reader and the one error translator both file readers use.

Each rule is checked through both readers (planner.planfile for TOML plan files,
planner.resultfile for saved plan.json results): the same kind of problem gives the same
message shape, "key.path: problem in SOURCE (got value). Fix: hint" (docs/plan-file.md,
"Error messages"), in each format's own words.
"""

from __future__ import annotations

import json
import re
from importlib.resources import files
from typing import Any

import pytest

from planner.errors import PlanFileError, ResultFileError
from planner.fileio.text import MAX_PLAN_FILE_BYTES, PLAN_FILE, PLAN_RESULT, read_text
from planner.pipeline import design_plan
from planner.planfile import load_plan, parse_plan, plan_from_mapping, plan_to_mapping
from planner.report.plan_json import plan_json
from planner.result import Check, Mixture, Prediction, Totals
from planner.resultfile import load_result, parse_result
from planner.resultfile.schema import CheckEntry, MixtureEntry, PlanDocument, PredictionEntry

DEFAULT_TOML = files("planner").joinpath("data/default.toml").read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def plan():
    return design_plan(parse_plan(DEFAULT_TOML))


@pytest.fixture
def result_document(plan) -> dict[str, Any]:
    return json.loads(plan_json(plan))


def plan_error(mapping_edit) -> PlanFileError:
    """The PlanFileError of the default plan, written out as a mapping, after ``mapping_edit``."""
    data = plan_to_mapping(parse_plan(DEFAULT_TOML))
    mapping_edit(data)
    with pytest.raises(PlanFileError) as caught:
        plan_from_mapping(data, source="plan.toml")
    return caught.value


def result_error(document: dict[str, Any]) -> ResultFileError:
    with pytest.raises(ResultFileError) as caught:
        parse_result(json.dumps(document), source="plan.json")
    return caught.value


# --------------------------------------------------------------------------------------------
# read_text: regular files only, a size limit per kind, UTF-8
# --------------------------------------------------------------------------------------------


def test_each_kind_of_file_has_its_own_size_limit(tmp_path):
    # A saved result may be larger than a plan file: 8 MiB against 1 MiB.
    path = tmp_path / "plan.json"
    path.write_text(" " * (2 * MAX_PLAN_FILE_BYTES), encoding="utf-8")
    assert len(read_text(str(path), PLAN_RESULT)) == 2 * MAX_PLAN_FILE_BYTES
    with pytest.raises(PlanFileError, match="larger than 1 MiB"):
        read_text(str(path), PLAN_FILE)
    path.write_text(" " * (PLAN_RESULT.limit + 1), encoding="utf-8")
    with pytest.raises(ResultFileError, match="larger than 8 MiB"):
        read_text(str(path), PLAN_RESULT)


def test_both_readers_refuse_a_directory_in_the_same_words(tmp_path):
    with pytest.raises(PlanFileError) as plan_caught:
        load_plan(tmp_path)
    with pytest.raises(ResultFileError) as result_caught:
        load_result(tmp_path)
    for caught, what in ((plan_caught, "plan file"), (result_caught, "plan result")):
        assert str(caught.value).startswith(
            f"cannot read the {what} {tmp_path}: it is a directory, not a regular file. "
            f"Fix: give the path of the {what} itself"
        )


def test_both_readers_refuse_text_that_is_not_utf8_in_the_same_words(tmp_path):
    # 0xff never occurs in UTF-8 (RFC 3629, section 1).
    for name, load, what in (
        ("plan.toml", load_plan, "plan file"),
        ("plan.json", load_result, "plan result"),
    ):
        path = tmp_path / name
        path.write_bytes(b'title = "\xff"')
        with pytest.raises((PlanFileError, ResultFileError)) as caught:
            load(path)
        assert str(caught.value) == (
            f"the {what} {path} is not UTF-8 text (bad byte at offset 9). "
            "Fix: save the file as UTF-8"
        )


# --------------------------------------------------------------------------------------------
# explain: pydantic's errors in the file's words, one shape for both readers
# --------------------------------------------------------------------------------------------

# key.path: problem in SOURCE (got value). Fix: hint
SHAPE = re.compile(r"^(?P<field>\S+): (?P<problem>.+?) in (?P<source>\S+)(?: \(got .+\))?\. Fix: ")


def test_a_number_out_of_range_reads_alike_in_both(result_document):
    def negative_concentration(data):
        data["stocks"][1]["contains_M"]["SCN-"] = -0.5

    plan = plan_error(negative_concentration)
    result_document["mixtures"][0]["additions"][0]["volume_mL"] = -1.0
    result = result_error(result_document)
    assert str(plan).startswith(
        "stocks[1].contains_M.SCN-: must be greater than 0 in plan.toml (got -0.5). "
        "Fix: contains_M is a table of ion concentrations"
    )
    assert str(result).startswith(
        "mixtures[0].additions[0].volume_mL: must be at least 0 in plan.json (got -1.0). "
        "Fix: volume_mL is the volume delivered [mL]"
    )
    for error in (plan, result):
        assert SHAPE.match(str(error))


def test_an_unknown_key_shows_its_value_and_the_closest_key_in_both(result_document):
    def misspelt(data):
        data["design"]["standrds"] = data["design"].pop("standards")

    plan = plan_error(misspelt)
    # mixtures[4] of the default plan is a standard (blank, then five standards).
    result_document["mixtures"][4]["rol"] = result_document["mixtures"][4].pop("role")
    result = result_error(result_document)
    assert str(plan).startswith(
        "design.standrds: unknown key in plan.toml (got 5). Fix: did you mean 'standards'? "
        "allowed keys in [design]: "
    )
    # The value is shown, as for a plan file (the key itself was shown before).
    assert str(result).startswith(
        "mixtures[4].rol: unknown key in plan.json (got 'standard'). Fix: did you mean 'role'? "
        "allowed keys here: "
    )


def test_a_wrong_type_is_named_in_each_formats_words(result_document):
    def number_as_title(data):
        data["title"] = 3

    plan = plan_error(number_as_title)
    result_document["mixtures"][0]["id"] = 3
    result = result_error(result_document)
    assert str(plan).startswith("title: wrong type, expected text in quotes in plan.toml (got 3)")
    assert str(result).startswith(
        "mixtures[0].id: wrong type, expected a string in double quotes in plan.json (got 3)"
    )


def test_a_value_outside_a_closed_list_names_the_allowed_ones_in_both(result_document):
    def class_c(data):
        data["glassware"][0]["class"] = "C"

    plan = plan_error(class_c)
    result_document["checks"][0]["status"] = "ok"
    result = result_error(result_document)
    assert str(plan).startswith("glassware[0].class: must be 'A' or 'B' in plan.toml (got 'C')")
    # "not a valid value" before the two readers shared one translator.
    assert str(result).startswith(
        "checks[0].status: must be 'fail', 'warn' or 'pass' in plan.json (got 'ok')"
    )


def test_a_missing_key_says_what_to_add_in_both(result_document):
    def no_limiting(data):
        del data["design"]["limiting"]

    plan = plan_error(no_limiting)
    del result_document["mixtures"][1]["absorbance"]
    result = result_error(result_document)
    assert str(plan).startswith(
        "design.limiting: missing required key in plan.toml. Fix: add it; limiting is the "
        "limiting reagent"
    )
    assert str(result).startswith(
        "mixtures[1].absorbance: missing required key in plan.json. Fix: add it; absorbance is "
        "the predicted reading"
    )


def test_a_syntax_error_shows_the_offending_line_in_both():
    with pytest.raises(PlanFileError) as plan_caught:
        parse_plan('title = "x"\nwavelength = = 3\n', source="plan.toml")
    with pytest.raises(ResultFileError) as result_caught:
        parse_result('{\n  "schema": = 3\n}\n', source="plan.json")
    assert "TOML syntax error in plan.toml at line 2" in str(plan_caught.value)
    assert "(got 'wavelength = = 3')" in str(plan_caught.value)
    assert "JSON syntax error at line 2" in str(result_caught.value)
    assert "(got '\"schema\": = 3')" in str(result_caught.value)


# --------------------------------------------------------------------------------------------
# plan.json: one model, written by the report and read by verify
# --------------------------------------------------------------------------------------------


def test_the_written_document_is_the_model_the_reader_validates(plan):
    # What plan_json writes validates against the reader's model with no key to spare.
    document = PlanDocument.model_validate(json.loads(plan_json(plan)))
    assert document.model_extra == {}
    assert len(document.mixtures) == len(plan.mixtures)


def test_entries_mirror_the_stage_results_both_ways(plan):
    for mixture in plan.mixtures:
        assert MixtureEntry.of(mixture).to_record(Mixture) == mixture
    for check in plan.checks:
        assert CheckEntry.of(check).to_record(Check) == check
    # The prediction's per-test uncertainties and intercept are not written.
    entry = PredictionEntry.of(plan.prediction)
    assert set(entry.model_dump()) == {
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
    assert entry.to_record(Prediction).K_per_test == plan.prediction.K_per_test
    assert entry.to_record(Prediction).K_bias_causes == plan.prediction.K_bias_causes
    saved = parse_result(plan_json(plan))
    assert saved.totals == plan.totals
    assert isinstance(saved.totals, Totals)
