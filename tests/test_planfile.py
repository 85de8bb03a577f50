"""Tests of planner.planfile: plan-file TOML to validated PlanInputs, and back.

Every plan here is invented for these tests (our own stocks, glassware and constants); the
numbers are plausible but are not data from any source. Expected values are written out by
hand, not computed by the code under test.
"""

from __future__ import annotations

import json
import math
import os
import re
import tomllib
from pathlib import Path
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from planner.errors import PlanFileError
from planner.inputs import (
    DesignSettings,
    Device,
    Instrument,
    PlanInputs,
    ProductSpecies,
    Reaction,
    SessionSettings,
    Solid,
    Stock,
)
from planner.lab.bench import PRESETS
from planner.planfile import (
    MAX_PLAN_FILE_BYTES,
    load_plan,
    parse_plan,
    plan_from_mapping,
    plan_to_mapping,
)

# An invented iron(III)/thiocyanate-like plan for tubes, with every section written out.
IRON_PLAN = """\
title = "Invented test plan: iron(III) and thiocyanate in tubes"

[reaction]
temperature_C = 22
ionic_strength_M = 0.4
components = ["Fe3+", "SCN-"]

[[reaction.species]]
name = "FeSCN2+"
formula = { "Fe3+" = 1, "SCN-" = 1 }
K = 120
epsilon = 4500

[[reaction.species]]
name = "Fe(SCN)2+"
formula = { "Fe3+" = 1, "SCN-" = 2 }
log_beta = 2.9

[instrument]
wavelength_nm = 447
path_length_cm = 1.0
absorbance_window = [0.12, 0.95]
absorbance_sd = 0.004
stray_light = 0.002
cuvette_fill_mL = 2.5

[[stocks]]
id = "iron"
contains_M = { "Fe3+" = 0.2, "H+" = 0.4 }
relative_uncertainty = 0.003
available_mL = 2000
solid = { formula = "Fe(NO3)3(H2O)9", purity = 0.98 }

[[stocks]]
id = "thiocyanate"
contains_M = { "SCN-" = 0.0016, "H+" = 0.4 }
relative_uncertainty = 0.004
solid = { formula = "KSCN", purity = 0.995, provides = "SCN-" }

[[stocks]]
id = "acid"
contains_M = { "H+" = 0.4, "NO3-" = 0.4 }
diluent = true

[[glassware]]
kind = "transfer-pipette"
volume_mL = 2
class = "A"
count = 3

[[glassware]]
kind = "graduated-pipette"
volume_mL = 10
class = "B"
division_mL = 0.1
min_delivery_mL = 1.0

[[glassware]]
kind = "piston-pipette"
range_uL = [100, 1000]
step_uL = 5
tolerance_mL = 0.008

[[glassware]]
kind = "tube"
volume_mL = 15
count = 20

[design]
standards = 4
tests = 6
limiting = "SCN-"
assumption_tolerance = 0.03
vessel = "tube"
total_volume_mL = 12
bound_fraction_span = 0.3
bound_fraction_range = [0.2, 0.8]
ionic_strength_spread = 0.25
blanks = 2

[session]
sections = 3
benches_per_section = 10
replicates = 2
margin = 0.2
dead_volume_mL = 4
"""

# An invented copper(II) plan: a coloured 1:1 and 1:2 complex with the ligand in excess,
# mixtures made up to the mark in 25 mL volumetric flasks.
COPPER_PLAN = """\
title = "Invented test plan: copper(II) with ligand L- in flasks"

[reaction]
ionic_strength_M = 0.1
components = ["Cu2+", "L-"]
component_epsilon = { "Cu2+" = 11 }

[[reaction.species]]
name = "CuL+"
formula = { "Cu2+" = 1, "L-" = 1 }
log_beta = 3.4
epsilon = 180

[[reaction.species]]
name = "CuL2"
formula = { "Cu2+" = 1, "L-" = 2 }
log_beta = 6.1
epsilon = 95

[instrument]
wavelength_nm = 640

[[stocks]]
id = "copper"
contains_M = { "Cu2+" = 0.02, "SO4^2-" = 0.02 }
relative_uncertainty = 0.002
solid = { formula = "CuSO4(H2O)5", purity = 0.99 }

[[stocks]]
id = "ligand"
contains_M = { "L-" = 0.5, "Na+" = 0.5 }

[[stocks]]
id = "salt"
contains_M = { "Na+" = 0.1, "NO3-" = 0.1 }
diluent = true

[[glassware]]
kind = "transfer-pipette"
volume_mL = 5

[[glassware]]
kind = "buret"
volume_mL = 25
count = 2

[[glassware]]
kind = "volumetric-flask"
volume_mL = 25
count = 12

[design]
limiting = "Cu2+"
measured_species = "CuL+"
vessel = "flask-25"
"""


def _data(text: str = IRON_PLAN) -> dict[str, Any]:
    return tomllib.loads(text)


def _error(data: dict[str, Any]) -> PlanFileError:
    with pytest.raises(PlanFileError) as info:
        plan_from_mapping(data)
    return info.value


def _assert_names(error: PlanFileError, field: str) -> None:
    """The error is about ``field``, and its message says so at the start."""
    assert error.field == field
    assert str(error).startswith(f"{field}: ")


# --- valid plans -------------------------------------------------------------------------------


def test_full_iron_plan_parses_to_expected_dataclasses():
    expected = PlanInputs(
        title="Invented test plan: iron(III) and thiocyanate in tubes",
        reaction=Reaction(
            temperature_C=22.0,
            ionic_strength_M=0.4,
            components=("Fe3+", "SCN-"),
            species=(
                ProductSpecies(
                    name="FeSCN2+",
                    formula={"Fe3+": 1, "SCN-": 1},
                    # log10(120) = 2.079181246047625 (K given, converted to log_beta)
                    log_beta=pytest.approx(2.079181246047625, rel=1e-15),  # type: ignore[arg-type]
                    epsilon=4500.0,
                ),
                ProductSpecies(
                    name="Fe(SCN)2+", formula={"Fe3+": 1, "SCN-": 2}, log_beta=2.9, epsilon=0.0
                ),
            ),
            component_epsilon={},
        ),
        instrument=Instrument(
            wavelength_nm=447.0,
            path_length_cm=1.0,
            absorbance_window=(0.12, 0.95),
            absorbance_sd=0.004,
            stray_light=0.002,
            cuvette_fill_mL=2.5,
        ),
        stocks=(
            Stock(
                id="iron",
                contains_M={"Fe3+": 0.2, "H+": 0.4},
                relative_uncertainty=0.003,
                available_mL=2000.0,
                solid=Solid(formula="Fe(NO3)3(H2O)9", purity=0.98, provides="Fe3+"),
            ),
            Stock(
                id="thiocyanate",
                contains_M={"SCN-": 0.0016, "H+": 0.4},
                relative_uncertainty=0.004,
                available_mL=None,
                solid=Solid(formula="KSCN", purity=0.995, provides="SCN-"),
            ),
            Stock(id="acid", contains_M={"H+": 0.4, "NO3-": 0.4}, diluent=True),
        ),
        glassware=(
            Device(kind="transfer-pipette", volume_mL=2.0, device_class="A", count=3),
            Device(
                kind="graduated-pipette",
                volume_mL=10.0,
                device_class="B",
                division_mL=0.1,
                min_delivery_mL=1.0,
            ),
            Device(
                kind="piston-pipette",
                volume_mL=1.0,
                device_class="",
                range_uL=(100.0, 1000.0),
                step_uL=5.0,
                tolerance_mL=0.008,
            ),
            Device(kind="tube", volume_mL=15.0, device_class="", count=20),
        ),
        design=DesignSettings(
            standards=4,
            tests=6,
            limiting="SCN-",
            assumption_tolerance=0.03,
            vessel="tube",
            total_volume_mL=12.0,
            bound_fraction_span=0.3,
            bound_fraction_range=(0.2, 0.8),
            ionic_strength_spread=0.25,
            blanks=2,
        ),
        session=SessionSettings(
            sections=3, benches_per_section=10, replicates=2, margin=0.2, dead_volume_mL=4.0
        ),
    )
    plan = parse_plan(IRON_PLAN)
    assert plan == expected
    assert plan.glassware[2].id == "piston-pipette-100-1000uL"


def test_values_are_plain_python_not_pydantic():
    plan = parse_plan(IRON_PLAN)
    assert type(plan.reaction.species[0].formula) is dict
    assert type(plan.stocks[0].contains_M) is dict
    assert type(plan.instrument.absorbance_window) is tuple
    assert type(plan.reaction.temperature_C) is float  # written as the integer 22
    assert type(plan.glassware[0].volume_mL) is float
    assert type(plan.glassware[0].count) is int


def test_copper_flask_plan_fills_flask_defaults():
    plan = parse_plan(COPPER_PLAN)
    assert plan.design.vessel == "flask-25"
    assert plan.design.flask_volume_mL == 25.0
    assert plan.design.total_volume_mL == 25.0  # defaults to the flask volume
    assert plan.design.limiting == "Cu2+"
    assert plan.reaction.component_epsilon == {"Cu2+": 11.0}
    assert plan.reaction.species[1] == ProductSpecies(
        name="CuL2", formula={"Cu2+": 1, "L-": 2}, log_beta=6.1, epsilon=95.0
    )
    assert plan.diluent is not None
    assert plan.diluent.id == "salt"
    # the solid supplies the first reaction component its stock lists
    assert plan.stock("copper").solid == Solid(formula="CuSO4(H2O)5", purity=0.99, provides="Cu2+")
    assert [device.id for device in plan.glassware] == [
        "transfer-pipette-5mL",
        "buret-25mL",
        "volumetric-flask-25mL",
    ]


def test_flask_size_is_normalised():
    data = _data(COPPER_PLAN)
    data["design"]["vessel"] = "flask-25.0"
    data["design"]["total_volume_mL"] = 25
    assert plan_from_mapping(data).design.vessel == "flask-25"


def test_defaults_of_optional_keys():
    plan = parse_plan(COPPER_PLAN)
    assert plan.title == "Invented test plan: copper(II) with ligand L- in flasks"
    assert plan.reaction.temperature_C == 25.0
    assert plan.instrument == Instrument(
        wavelength_nm=640.0,
        path_length_cm=1.0,
        absorbance_window=(0.1, 1.0),
        absorbance_sd=0.003,
        stray_light=0.0,
        cuvette_fill_mL=3.0,
    )
    ligand = plan.stock("ligand")
    assert ligand.relative_uncertainty == 0.0
    assert ligand.available_mL is None
    assert ligand.solid is None
    assert ligand.diluent is False
    pipette = plan.glassware[0]
    assert pipette.device_class == "A"
    assert pipette.count == 1
    assert (pipette.division_mL, pipette.min_delivery_mL, pipette.tolerance_mL) == (
        None,
        None,
        None,
    )
    design = plan.design
    assert (design.standards, design.tests, design.blanks) == (5, 5, 1)
    assert design.assumption_tolerance == 0.02
    assert design.bound_fraction_span == 0.25
    assert design.bound_fraction_range == (0.15, 0.85)
    assert design.ionic_strength_spread == 0.5
    assert plan.session == SessionSettings(
        sections=1, benches_per_section=1, replicates=1, margin=0.15, dead_volume_mL=5.0
    )


def test_title_defaults_to_empty():
    data = _data(COPPER_PLAN)
    del data["title"]
    assert plan_from_mapping(data).title == ""


def test_class_is_ignored_for_piston_pipettes_and_tubes():
    data = _data()
    data["glassware"][2]["class"] = "B"
    data["glassware"][3]["class"] = "B"
    plan = plan_from_mapping(data)
    assert plan.glassware[2].device_class == ""
    assert plan.glassware[3].device_class == ""


@pytest.mark.parametrize(
    ("K", "log_beta"),
    [(1.0, 0.0), (100.0, 2.0), (1e-3, -3.0), (2.5e6, 6.397940008672037)],
)
def test_K_converts_to_log10(K, log_beta):
    data = _data()
    data["reaction"]["species"][0]["K"] = K
    converted = plan_from_mapping(data).reaction.species[0].log_beta
    assert converted == pytest.approx(log_beta, abs=1e-14)


def test_log_beta_is_taken_as_written():
    data = _data()
    del data["reaction"]["species"][0]["K"]
    data["reaction"]["species"][0]["log_beta"] = 2.05
    assert plan_from_mapping(data).reaction.species[0].log_beta == 2.05


def test_piston_pipette_volume_given_consistently_is_accepted():
    data = _data()
    data["glassware"][2]["volume_mL"] = 1.0
    assert plan_from_mapping(data).glassware[2].volume_mL == 1.0


def test_negative_coefficient_for_a_proton_released():
    data = _data()
    data["reaction"]["components"].append("H+")
    data["reaction"]["species"].append(
        {"name": "FeOH2+", "formula": {"Fe3+": 1, "H+": -1}, "log_beta": -2.8}
    )
    plan = plan_from_mapping(data)
    assert plan.reaction.species[2].formula == {"Fe3+": 1, "H+": -1}


# --- round trip ---------------------------------------------------------------------------------


@pytest.mark.parametrize("text", [IRON_PLAN, COPPER_PLAN])
def test_round_trip_through_mapping_and_json(text):
    plan = parse_plan(text)
    mapping = plan_to_mapping(plan)
    assert plan_from_mapping(mapping) == plan
    again = json.loads(json.dumps(mapping, allow_nan=False))
    assert plan_from_mapping(again) == plan


def test_mapping_fills_defaults_and_converts_K():
    mapping = plan_to_mapping(parse_plan(IRON_PLAN))
    species = mapping["reaction"]["species"][0]
    assert "K" not in species
    assert species["log_beta"] == pytest.approx(2.079181246047625, rel=1e-15)
    piston = mapping["glassware"][2]
    assert piston["volume_mL"] == 1.0
    assert piston["range_uL"] == [100.0, 1000.0]
    assert "class" not in piston
    assert mapping["glassware"][0]["class"] == "A"
    assert "range_uL" not in mapping["glassware"][0]
    assert mapping["stocks"][0]["solid"]["provides"] == "Fe3+"
    assert mapping["stocks"][2]["available_mL"] is None
    copper = plan_to_mapping(parse_plan(COPPER_PLAN))
    assert copper["design"]["total_volume_mL"] == 25.0
    assert copper["session"] == {
        "sections": 1,
        "benches_per_section": 1,
        "replicates": 1,
        "margin": 0.15,
        "dead_volume_mL": 5.0,
    }
    assert copper["instrument"]["absorbance_window"] == [0.1, 1.0]


_valid_numbers = st.fixed_dictionaries(
    {
        "K": st.floats(1e-3, 1e9),
        "epsilon": st.floats(0, 1e5),
        "conc": st.floats(1e-7, 20),
        "window_low": st.floats(0, 1.5),
        "window_width": st.floats(0.01, 2.0),
        "stray": st.floats(0, 0.099),
        "total": st.floats(3.0, 15.0),
        "range_low": st.floats(10, 500),
        "count": st.integers(1, 50),
        "u": st.floats(0, 0.49),
    }
)


@settings(max_examples=60, deadline=None, database=None)
@given(values=_valid_numbers)
def test_round_trip_property(values):
    data = _data()
    data["reaction"]["species"][0]["K"] = values["K"]
    data["reaction"]["species"][0]["epsilon"] = values["epsilon"]
    data["stocks"][1]["contains_M"]["SCN-"] = values["conc"]
    data["stocks"][1]["relative_uncertainty"] = values["u"]
    low = values["window_low"]
    data["instrument"]["absorbance_window"] = [low, low + values["window_width"]]
    data["instrument"]["stray_light"] = values["stray"]
    data["design"]["total_volume_mL"] = values["total"]
    data["glassware"][2]["range_uL"] = [values["range_low"], values["range_low"] * 10]
    data["glassware"][2]["step_uL"] = values["range_low"] / 100
    data["glassware"][0]["count"] = values["count"]
    plan = plan_from_mapping(data)
    mapping = plan_to_mapping(plan)
    assert plan_from_mapping(mapping) == plan
    assert plan_from_mapping(json.loads(json.dumps(mapping, allow_nan=False))) == plan
    assert plan_to_mapping(plan_from_mapping(mapping)) == mapping


def test_examples_in_the_plan_file_reference_parse():
    reference = Path(__file__).resolve().parents[1] / "docs" / "plan-file.md"
    blocks = re.findall(r"```toml\n(.*?)```", reference.read_text(encoding="utf-8"), re.DOTALL)
    assert len(blocks) == 2
    plans = [parse_plan(block, source="docs/plan-file.md") for block in blocks]
    assert plans[0].design.limiting == "SCN-"
    assert plans[1].design.vessel == "flask-25"


# --- files --------------------------------------------------------------------------------------


def test_load_plan_reads_a_file(tmp_path):
    path = tmp_path / "copper.toml"
    path.write_text(COPPER_PLAN, encoding="utf-8")
    assert load_plan(path) == parse_plan(COPPER_PLAN)
    assert load_plan(str(path)) == parse_plan(COPPER_PLAN)


def test_load_plan_accepts_a_byte_order_mark(tmp_path):
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + COPPER_PLAN.encode("utf-8"))
    assert load_plan(path) == parse_plan(COPPER_PLAN)


def test_load_plan_missing_file_names_the_path(tmp_path):
    path = tmp_path / "absent.toml"
    with pytest.raises(PlanFileError, match="cannot read the plan file") as info:
        load_plan(path)
    assert str(path) in str(info.value)


def test_load_plan_directory_names_the_path(tmp_path):
    with pytest.raises(PlanFileError) as info:
        load_plan(tmp_path)
    assert str(tmp_path) in str(info.value)


def test_load_plan_not_utf8_names_the_path(tmp_path):
    path = tmp_path / "latin1.toml"
    path.write_bytes(COPPER_PLAN.replace("Invented", "Inventé").encode("latin-1"))
    with pytest.raises(PlanFileError, match="not UTF-8") as info:
        load_plan(path)
    assert str(path) in str(info.value)


def test_load_plan_key_errors_name_the_file(tmp_path):
    path = tmp_path / "typo.toml"
    path.write_text(COPPER_PLAN.replace("limiting =", "limting ="), encoding="utf-8")
    with pytest.raises(PlanFileError) as info:
        load_plan(path)
    assert info.value.field == "design.limting"
    assert str(path) in str(info.value)


# --- TOML syntax --------------------------------------------------------------------------------


def test_syntax_error_gives_line_and_column():
    lines = IRON_PLAN.splitlines()
    assert lines[5].startswith("components")
    lines[5] = 'components = ["Fe3+" "SCN-"]'  # missing comma on line 6
    with pytest.raises(PlanFileError) as info:
        parse_plan("\n".join(lines), source="bad.toml")
    message = str(info.value)
    assert "line 6, column" in message
    assert "bad.toml" in message
    assert info.value.field == ""


def test_syntax_error_quotes_the_offending_line():
    text = 'title = "x"\n[reaction]\ntemperature_C = = 25\n'
    with pytest.raises(PlanFileError) as info:
        parse_plan(text)
    message = str(info.value)
    assert "line 3, column" in message
    assert "temperature_C = = 25" in message


def test_syntax_error_at_end_of_document():
    with pytest.raises(PlanFileError, match="end of the file"):
        parse_plan('title = "never closed')


def test_duplicate_key_is_a_syntax_error_with_line():
    text = IRON_PLAN.replace("temperature_C = 22\n", "temperature_C = 22\ntemperature_C = 23\n")
    with pytest.raises(PlanFileError, match="line 5"):
        parse_plan(text)


# --- unknown keys, types, missing keys ------------------------------------------------------------


def test_unknown_key_suggests_the_closest():
    data = _data()
    data["design"]["limting"] = data["design"].pop("limiting")
    error = _error(data)
    _assert_names(error, "design.limting")
    message = str(error)
    assert "unknown key" in message
    assert "did you mean 'limiting'" in message
    assert "allowed keys in [design]" in message
    assert "assumption_tolerance" in message  # the allowed keys are listed


def test_unknown_key_in_a_list_entry():
    data = _data()
    data["stocks"][1]["contains_m"] = data["stocks"][1].pop("contains_M")
    error = _error(data)
    _assert_names(error, "stocks[1].contains_m")
    assert "did you mean 'contains_M'" in str(error)
    assert "[[stocks]] entries" in str(error)


def test_unknown_key_in_an_inline_table():
    data = _data()
    data["stocks"][0]["solid"]["purty"] = 0.9
    error = _error(data)
    _assert_names(error, "stocks[0].solid.purty")
    assert "did you mean 'purity'" in str(error)


def test_unknown_top_level_key_from_toml_text():
    with pytest.raises(PlanFileError) as info:
        parse_plan("titel = 'x'\n" + IRON_PLAN)
    _assert_names(info.value, "titel")
    assert "did you mean 'title'" in str(info.value)
    assert "the top level" in str(info.value)


def test_unknown_key_without_a_close_match_lists_allowed_keys():
    data = _data()
    data["session"]["colour"] = "red"
    error = _error(data)
    _assert_names(error, "session.colour")
    assert "did you mean" not in str(error)
    assert "benches_per_section" in str(error)


@pytest.mark.parametrize(
    ("path", "value", "field", "expected"),
    [
        (("glassware", 0, "count"), "2", "glassware[0].count", "whole number"),
        (("design", "standards"), 2.5, "design.standards", "whole number"),
        (("reaction", "temperature_C"), "25", "reaction.temperature_C", "a number"),
        (("glassware", 0, "volume_mL"), True, "glassware[0].volume_mL", "a number"),
        (("stocks", 2, "diluent"), "yes", "stocks[2].diluent", "true or false"),
        (("reaction", "components"), "Fe3+", "reaction.components", "a list"),
        (
            ("reaction", "species", 0, "formula", "SCN-"),
            1.0,
            "reaction.species[0].formula.SCN-",
            "whole number",
        ),
        (("stocks", 1, "contains_M"), 0.0016, "stocks[1].contains_M", "a table"),
        (("instrument",), 447, "instrument", "a table"),
        (("title",), 7, "title", "text"),
    ],
)
def test_wrong_type(path, value, field, expected):
    data = _data()
    target = data
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = value
    error = _error(data)
    _assert_names(error, field)
    assert "wrong type" in str(error)
    assert expected in str(error)
    assert repr(value) in str(error)


def test_single_table_instead_of_array_of_tables():
    data = _data()
    data["stocks"] = data["stocks"][0]  # what "[stocks]" instead of "[[stocks]]" gives
    error = _error(data)
    _assert_names(error, "stocks")
    assert "[[stocks]]" in str(error)
    assert "...)" in str(error)  # the long value is shortened
    assert len(str(error)) < 250


def test_messages_carry_no_library_noise():
    data = _data()
    data["glassware"][0]["count"] = "2"
    message = str(_error(data))
    assert "pydantic" not in message
    assert "http" not in message


@pytest.mark.parametrize(
    ("section", "key", "field"),
    [
        ("design", "limiting", "design.limiting"),
        ("instrument", "wavelength_nm", "instrument.wavelength_nm"),
        ("reaction", "ionic_strength_M", "reaction.ionic_strength_M"),
        ("reaction", "components", "reaction.components"),
    ],
)
def test_missing_required_key(section, key, field):
    data = _data()
    del data[section][key]
    error = _error(data)
    _assert_names(error, field)
    assert "missing required key" in str(error)


def test_missing_required_key_in_inline_table():
    data = _data()
    del data["stocks"][0]["solid"]["formula"]
    _assert_names(_error(data), "stocks[0].solid.formula")


@pytest.mark.parametrize(
    ("section", "header"),
    [
        ("reaction", "[reaction]"),
        ("instrument", "[instrument]"),
        ("design", "[design]"),
        ("stocks", "[[stocks]]"),
        ("glassware", "[[glassware]]"),
    ],
)
def test_missing_required_section(section, header):
    data = _data()
    del data[section]
    error = _error(data)
    _assert_names(error, section)
    assert "missing required section" in str(error)
    assert header in str(error)


def test_missing_species_section():
    data = _data()
    del data["reaction"]["species"]
    error = _error(data)
    _assert_names(error, "reaction.species")
    assert "[[reaction.species]]" in str(error)


def test_tube_vessel_needs_total_volume():
    data = _data()
    del data["design"]["total_volume_mL"]
    _assert_names(_error(data), "design.total_volume_mL")


def test_plan_must_be_a_table():
    with pytest.raises(PlanFileError, match="table"):
        plan_from_mapping([1, 2])  # type: ignore[arg-type]


# --- values out of range ----------------------------------------------------------------------


@pytest.mark.parametrize(
    ("path", "value", "field"),
    [
        (("stocks", 1, "contains_M", "SCN-"), 0, "stocks[1].contains_M.SCN-"),
        (("stocks", 0, "contains_M", "Fe3+"), -0.2, "stocks[0].contains_M.Fe3+"),
        (("glassware", 0, "volume_mL"), 0, "glassware[0].volume_mL"),
        (("glassware", 1, "volume_mL"), -10, "glassware[1].volume_mL"),
        (("instrument", "path_length_cm"), 0, "instrument.path_length_cm"),
        (("instrument", "path_length_cm"), -1.0, "instrument.path_length_cm"),
        (("design", "total_volume_mL"), -12, "design.total_volume_mL"),
        (("instrument", "cuvette_fill_mL"), 0, "instrument.cuvette_fill_mL"),
        (("stocks", 0, "available_mL"), 0, "stocks[0].available_mL"),
        (("reaction", "species", 0, "K"), 0, "reaction.species[0].K"),
        (("reaction", "species", 0, "epsilon"), -1, "reaction.species[0].epsilon"),
        (("stocks", 0, "relative_uncertainty"), 0.5, "stocks[0].relative_uncertainty"),
        (("stocks", 0, "solid", "purity"), 1.2, "stocks[0].solid.purity"),
        (("instrument", "stray_light"), 0.1, "instrument.stray_light"),
        (("instrument", "absorbance_sd"), 0, "instrument.absorbance_sd"),
        (("design", "assumption_tolerance"), 1, "design.assumption_tolerance"),
        (("design", "standards"), 0, "design.standards"),
        (("design", "blanks"), 0, "design.blanks"),
        (("glassware", 0, "count"), 0, "glassware[0].count"),
        (("session", "margin"), -0.1, "session.margin"),
        (("session", "dead_volume_mL"), -1, "session.dead_volume_mL"),
        (("design", "bound_fraction_range"), [0.0, 0.8], "design.bound_fraction_range[0]"),
        (("instrument", "absorbance_window"), [-0.1, 0.8], "instrument.absorbance_window[0]"),
    ],
)
def test_value_out_of_range(path, value, field):
    data = _data()
    target = data
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = value
    error = _error(data)
    _assert_names(error, field)
    shown = value[0] if isinstance(value, list) else value  # a list entry is named alone
    assert f"(got {shown!r})" in str(error)
    assert "must be" in str(error)


def test_nan_is_rejected():
    data = _data()
    data["stocks"][0]["contains_M"]["Fe3+"] = math.nan
    error = _error(data)
    _assert_names(error, "stocks[0].contains_M.Fe3+")
    assert "finite" in str(error)


def test_nan_from_toml_text_is_rejected():
    with pytest.raises(PlanFileError) as info:
        parse_plan(IRON_PLAN.replace("path_length_cm = 1.0", "path_length_cm = nan"))
    _assert_names(info.value, "instrument.path_length_cm")


@pytest.mark.parametrize("window", [[0.9, 0.1], [0.5, 0.5]])
def test_window_low_not_below_high(window):
    data = _data()
    data["instrument"]["absorbance_window"] = window
    error = _error(data)
    _assert_names(error, "instrument.absorbance_window")
    assert "low end must be below the high end" in str(error)


def test_window_needs_two_numbers():
    data = _data()
    data["instrument"]["absorbance_window"] = [0.1, 0.5, 0.9]
    error = _error(data)
    _assert_names(error, "instrument.absorbance_window")
    assert "exactly 2" in str(error)


def test_bound_fraction_range_and_span():
    data = _data()
    data["design"]["bound_fraction_range"] = [0.7, 0.3]
    _assert_names(_error(data), "design.bound_fraction_range")
    data = _data()
    data["design"]["bound_fraction_span"] = 0.7  # the range [0.2, 0.8] is 0.6 wide
    _assert_names(_error(data), "design.bound_fraction_span")


# --- reaction ---------------------------------------------------------------------------------


def test_formula_names_undeclared_component():
    data = _data()
    data["reaction"]["species"][0]["formula"] = {"Cu2+": 1, "SCN-": 1}
    error = _error(data)
    _assert_names(error, "reaction.species[0].formula.Cu2+")
    assert "'Cu2+'" in str(error)
    assert "'Fe3+'" in str(error)  # the declared components are offered


def test_formula_coefficient_zero():
    data = _data()
    data["reaction"]["species"][1]["formula"]["SCN-"] = 0
    _assert_names(_error(data), "reaction.species[1].formula.SCN-")


def test_formula_of_a_bare_component():
    data = _data()
    data["reaction"]["species"][1]["formula"] = {"Fe3+": 1}
    _assert_names(_error(data), "reaction.species[1].formula")


def test_formula_repeated():
    data = _data()
    data["reaction"]["species"][1]["formula"] = {"Fe3+": 1, "SCN-": 1}
    error = _error(data)
    _assert_names(error, "reaction.species[1].formula")
    assert "reaction.species[0]" in str(error)


def test_species_needs_exactly_one_constant():
    data = _data()
    data["reaction"]["species"][0]["log_beta"] = 2.0
    error = _error(data)
    _assert_names(error, "reaction.species[0]")
    assert "both" in str(error)
    del data["reaction"]["species"][0]["log_beta"]
    del data["reaction"]["species"][0]["K"]
    error = _error(data)
    _assert_names(error, "reaction.species[0]")
    assert "log_beta or K" in str(error)


def test_species_named_like_a_component():
    data = _data()
    data["reaction"]["species"][0]["name"] = "SCN-"
    _assert_names(_error(data), "reaction.species[0].name")


def test_species_listed_twice():
    data = _data()
    data["reaction"]["species"][1]["name"] = "FeSCN2+"
    _assert_names(_error(data), "reaction.species[1].name")


def test_component_listed_twice():
    data = _data()
    data["reaction"]["components"] = ["Fe3+", "SCN-", "Fe3+"]
    _assert_names(_error(data), "reaction.components[2]")


def test_component_charge_unreadable():
    data = _data()
    data["reaction"]["components"] = ["Fe+3", "SCN-"]
    _assert_names(_error(data), "reaction.components[0]")


def test_component_epsilon_names_undeclared_component():
    data = _data(COPPER_PLAN)
    data["reaction"]["component_epsilon"] = {"Cu+": 11}
    error = _error(data)
    _assert_names(error, "reaction.component_epsilon.Cu+")
    assert "did you mean 'Cu2+'" in str(error)


def test_component_in_no_stock():
    data = _data()
    data["reaction"]["components"].append("Cl-")
    error = _error(data)
    _assert_names(error, "reaction.components[2]")
    assert "no stock" in str(error)


# --- stocks -----------------------------------------------------------------------------------


def test_stock_ion_charge_unreadable():
    data = _data()
    data["stocks"][0]["contains_M"] = {"Fe+3": 0.2, "H+": 0.4}
    data["reaction"]["components"] = ["Fe3+", "SCN-"]
    error = _error(data)
    _assert_names(error, "stocks[0].contains_M.Fe+3")
    assert "charge" in str(error)
    assert "'Fe+3'" in str(error)


def test_stock_ion_name_with_stray_space():
    data = _data()
    data["stocks"][2]["contains_M"] = {" H+": 0.4}
    _assert_names(_error(data), "stocks[2].contains_M. H+")


def test_duplicate_stock_ids():
    data = _data()
    data["stocks"][2]["id"] = "iron"
    error = _error(data)
    _assert_names(error, "stocks[2].id")
    assert "stocks[0]" in str(error)


def test_more_than_one_diluent():
    data = _data()
    data["stocks"][1]["diluent"] = True
    error = _error(data)
    _assert_names(error, "stocks[2].diluent")
    assert "stocks[1]" in str(error)


def test_empty_stock_that_is_not_the_diluent():
    data = _data()
    data["stocks"][2]["contains_M"] = {}
    data["stocks"][2]["diluent"] = False
    _assert_names(_error(data), "stocks[2].contains_M")


def test_water_diluent_may_contain_nothing():
    data = _data()
    data["stocks"][2]["contains_M"] = {}
    assert plan_from_mapping(data).stocks[2].contains_M == {}


def test_solid_provides_an_ion_the_stock_lacks():
    data = _data()
    data["stocks"][0]["solid"]["provides"] = "SCN-"
    _assert_names(_error(data), "stocks[0].solid.provides")


def test_solid_with_no_component_to_provide():
    data = _data()
    data["stocks"][2]["solid"] = {"formula": "NaNO3"}
    data["stocks"][2]["contains_M"] = {"Na+": 0.4, "NO3-": 0.4}
    _assert_names(_error(data), "stocks[2].solid.provides")


def test_no_stocks():
    data = _data()
    data["stocks"] = []
    error = _error(data)
    _assert_names(error, "stocks")
    assert "must not be empty" in str(error)


# --- glassware ----------------------------------------------------------------------------------


def test_empty_glassware_list():
    before, rest = IRON_PLAN.split("[[glassware]]", 1)
    after = "[design]" + rest.split("[design]", 1)[1]
    text = "glassware = []\n" + before + after  # a top-level key goes before the tables
    with pytest.raises(PlanFileError) as info:
        parse_plan(text)
    _assert_names(info.value, "glassware")
    assert "must not be empty" in str(info.value)
    assert "(got [])" in str(info.value)


def test_unknown_glassware_kind():
    data = _data()
    data["glassware"][0]["kind"] = "transfer-pipet"
    error = _error(data)
    _assert_names(error, "glassware[0].kind")
    assert "did you mean 'transfer-pipette'" in str(error)
    assert "graduated-cylinder" in str(error)


def test_glassware_class_must_be_A_or_B():
    data = _data()
    data["glassware"][0]["class"] = "AS"
    error = _error(data)
    _assert_names(error, "glassware[0].class")
    assert "'A' or 'B'" in str(error)


@pytest.mark.parametrize("key", ["range_uL", "step_uL"])
def test_piston_pipette_needs_range_and_step(key):
    data = _data()
    del data["glassware"][2][key]
    error = _error(data)
    _assert_names(error, f"glassware[2].{key}")
    assert "piston pipette" in str(error)


def test_piston_pipette_range_order_and_step():
    data = _data()
    data["glassware"][2]["range_uL"] = [1000, 100]
    _assert_names(_error(data), "glassware[2].range_uL")
    data = _data()
    data["glassware"][2]["step_uL"] = 200
    _assert_names(_error(data), "glassware[2].step_uL")


def test_piston_pipette_volume_must_match_range():
    data = _data()
    data["glassware"][2]["volume_mL"] = 2.0
    _assert_names(_error(data), "glassware[2].volume_mL")


@pytest.mark.parametrize("key", ["range_uL", "step_uL"])
def test_range_and_step_rejected_for_other_kinds(key):
    data = _data()
    data["glassware"][0][key] = [10, 100] if key == "range_uL" else 1
    error = _error(data)
    _assert_names(error, f"glassware[0].{key}")
    assert "only piston pipettes" in str(error)


def test_volume_required_for_other_kinds():
    data = _data()
    del data["glassware"][0]["volume_mL"]
    error = _error(data)
    _assert_names(error, "glassware[0].volume_mL")
    assert "missing required key" in str(error)


def test_division_only_for_graduated_devices_and_below_capacity():
    data = _data()
    data["glassware"][0]["division_mL"] = 0.1
    _assert_names(_error(data), "glassware[0].division_mL")
    data = _data()
    data["glassware"][1]["division_mL"] = 10
    _assert_names(_error(data), "glassware[1].division_mL")


def test_min_delivery_and_tolerance_against_capacity():
    data = _data()
    data["glassware"][1]["min_delivery_mL"] = 11
    _assert_names(_error(data), "glassware[1].min_delivery_mL")
    data = _data()
    data["glassware"][3]["min_delivery_mL"] = 1
    _assert_names(_error(data), "glassware[3].min_delivery_mL")
    data = _data()
    data["glassware"][0]["tolerance_mL"] = 2
    _assert_names(_error(data), "glassware[0].tolerance_mL")


def test_same_device_listed_twice():
    data = _data()
    data["glassware"].append({"kind": "transfer-pipette", "volume_mL": 2.0, "class": "B"})
    error = _error(data)
    _assert_names(error, "glassware[4]")
    assert "glassware[0]" in str(error)


def test_shelf_with_nothing_that_delivers():
    data = _data()
    data["glassware"] = [{"kind": "tube", "volume_mL": 15}]
    _assert_names(_error(data), "glassware")


# --- design -------------------------------------------------------------------------------------


def test_limiting_not_a_component():
    data = _data()
    data["design"]["limiting"] = "SCN"
    error = _error(data)
    _assert_names(error, "design.limiting")
    assert "did you mean 'SCN-'" in str(error)


def test_limiting_in_no_stock():
    data = _data()
    data["reaction"]["components"].append("Cl-")
    data["design"]["limiting"] = "Cl-"
    error = _error(data)
    _assert_names(error, "design.limiting")
    assert "no stock" in str(error)


def test_unknown_vessel():
    data = _data()
    data["design"]["vessel"] = "beaker"
    error = _error(data)
    _assert_names(error, "design.vessel")
    assert "flask-25" in str(error)


@pytest.mark.parametrize("vessel", ["flask-", "flask-0", "flask-25mL", "Flask-25"])
def test_malformed_flask_vessel(vessel):
    data = _data(COPPER_PLAN)
    data["design"]["vessel"] = vessel
    _assert_names(_error(data), "design.vessel")


def test_total_volume_larger_than_flask():
    data = _data(COPPER_PLAN)
    data["design"]["total_volume_mL"] = 50
    error = _error(data)
    _assert_names(error, "design.total_volume_mL")
    assert "larger than the flask volume" in str(error)


def test_total_volume_different_from_flask():
    data = _data(COPPER_PLAN)
    data["design"]["total_volume_mL"] = 20
    _assert_names(_error(data), "design.total_volume_mL")


def test_total_volume_larger_than_listed_tube():
    data = _data()
    data["design"]["total_volume_mL"] = 16  # the listed tube holds 15 mL
    error = _error(data)
    _assert_names(error, "design.total_volume_mL")
    assert "tube" in str(error)


def test_total_volume_unchecked_without_a_listed_tube():
    data = _data()
    del data["glassware"][3]
    data["design"]["total_volume_mL"] = 40
    assert plan_from_mapping(data).design.total_volume_mL == 40.0


def test_flask_vessel_without_diluent():
    data = _data(COPPER_PLAN)
    data["stocks"][2]["diluent"] = False
    error = _error(data)
    _assert_names(error, "design.vessel")
    assert "diluent" in str(error)


def test_cuvette_fill_larger_than_total_volume():
    data = _data()
    data["instrument"]["cuvette_fill_mL"] = 13  # total_volume_mL is 12
    error = _error(data)
    _assert_names(error, "instrument.cuvette_fill_mL")
    assert "total_volume_mL" in str(error)


# --- limits and cross-checks found by fuzzing (tests/test_fuzz.py) ---------------------------
# Each of these inputs used to end in an internal error (exit 3), a hang, a memory error, or a
# message naming a core argument instead of the plan key; the expected key paths are written
# out by hand from IRON_PLAN.


def _set(path: tuple[Any, ...], value: Any):
    def edit(data: dict[str, Any]) -> None:
        target = data
        for part in path[:-1]:
            target = target[part]
        target[path[-1]] = value

    return edit


def _add_stocks(data: dict[str, Any]) -> None:
    data["stocks"] += [{"id": f"extra-{i}", "contains_M": {"Fe3+": 0.01}} for i in range(10)]


def _add_devices(data: dict[str, Any]) -> None:
    data["glassware"] += [{"kind": "tube", "volume_mL": 20 + i} for i in range(37)]


def _fine_shelf(data: dict[str, Any]) -> None:
    # Twenty pipettes and eight finely read pipettes: some 2e7 ways to deliver up to 12 mL.
    data["glassware"] = [
        {"kind": "transfer-pipette", "volume_mL": 0.103 + 0.1 * i, "tolerance_mL": 0.001}
        for i in range(20)
    ] + [
        {
            "kind": "graduated-pipette",
            "volume_mL": 5 + 0.25 * i,
            "tolerance_mL": 0.02,
            "division_mL": 0.0005,
        }
        for i in range(8)
    ]


def _untabled_piston(data: dict[str, Any]) -> None:
    # A 700 µL piston pipette without its own tolerance: ISO 8655-2 has no such row.
    data["glassware"][2]["range_uL"] = [100, 700]
    del data["glassware"][2]["tolerance_mL"]


def _limiting_in_no_species(data: dict[str, Any]) -> None:
    data["reaction"]["components"].append("H+")
    data["design"]["limiting"] = "H+"


@pytest.mark.parametrize(
    ("edit", "field", "words"),
    [
        (
            _set(("reaction", "species", 1, "log_beta"), 1e308),
            "reaction.species[1].log_beta",
            "at most 60",
        ),
        (_set(("reaction", "species", 0, "K"), 1e-300), "reaction.species[0].K", "at least"),
        (
            _set(("reaction", "species", 1, "formula", "SCN-"), 400),
            "reaction.species[1].formula.SCN-",
            "at most 20",
        ),
        (
            _set(("reaction", "species", 1, "formula", "SCN-"), -1),
            "reaction.species[1].formula.SCN-",
            "every stock",
        ),
        (_limiting_in_no_species, "design.limiting", "no product species"),
        (_set(("glassware", 0, "volume_mL"), 7), "glassware[0].volume_mL", "ISO 648"),
        (_set(("glassware", 1, "division_mL"), 1e-9), "glassware[1].division_mL", "readings"),
        (_set(("glassware", 2, "step_uL"), 0.01), "glassware[2].step_uL", "readings"),
        (_set(("glassware", 2, "range_uL"), [100, 1e308]), "glassware[2].range_uL[1]", "at most"),
        (_untabled_piston, "glassware[2].range_uL", "ISO 8655"),
        (_set(("glassware", 3, "volume_mL"), 1e-300), "glassware[3].volume_mL", "at least"),
        (_set(("session", "dead_volume_mL"), 1e308), "session.dead_volume_mL", "at most"),
        (
            _set(("reaction", "species", 0, "epsilon"), 1e308),
            "reaction.species[0].epsilon",
            "at most",
        ),
        (
            _set(("reaction", "component_epsilon"), {"Fe3+": 1e308}),
            "reaction.component_epsilon.Fe3+",
            "at most",
        ),
        (
            _set(("stocks", 0, "solid", "formula"), "Xx9"),
            "stocks[0].solid.formula",
            "unknown element",
        ),
        (_add_stocks, "stocks", "at most 12"),
        (_add_devices, "glassware", "at most 40"),
    ],
)
def test_limits_found_by_fuzzing_name_the_key(edit, field, words):
    data = _data()
    edit(data)
    error = _error(data)
    _assert_names(error, field)
    assert words in str(error)


def test_a_finely_read_shelf_within_the_reading_limit_is_accepted():
    # The design's volume table bounds its work whatever the shelf (planner.lab.deliveries,
    # volume_table), so a shelf of many finely read devices, each within MAX_READINGS, is no
    # longer refused for its number of delivery combinations (some 2e7 up to 12 mL).
    data = _data()
    _fine_shelf(data)
    inputs = plan_from_mapping(data)
    assert len(inputs.glassware) == 28
    assert {d.division_mL for d in inputs.glassware if d.kind == "graduated-pipette"} == {0.0005}


@pytest.mark.parametrize(
    ("vessel", "words"),
    [
        ("flask-7", "no ISO 1042"),
        ("flask-99999", "largest flask"),
        ("flask-" + "9" * 400, "largest"),
    ],
)
def test_flask_vessel_needs_a_tolerance_and_a_sane_size(vessel, words):
    data = _data(COPPER_PLAN)
    data["design"]["vessel"] = vessel
    data["design"].pop("total_volume_mL", None)
    error = _error(data)
    _assert_names(error, "design.vessel")
    assert words in str(error)


def test_flask_vessel_of_an_odd_size_listed_with_its_tolerance_is_accepted():
    data = _data(COPPER_PLAN)
    data["design"]["vessel"] = "flask-30"
    data["design"].pop("total_volume_mL", None)
    data["glassware"].append({"kind": "volumetric-flask", "volume_mL": 30, "tolerance_mL": 0.05})
    assert plan_from_mapping(data).design.total_volume_mL == 30.0


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ("deep = " + "[" * 100_000 + "]" * 100_000, "nested too deeply"),
        ("deep = " + "{a = " * 50_000 + "1" + "}" * 50_000, "nested too deeply"),
        ("title = " + "7" * 5000, "too many digits"),
    ],
)
def test_toml_the_reader_cannot_hold_is_a_plan_file_error(text, words):
    with pytest.raises(PlanFileError, match=words):
        parse_plan(text)


def test_a_huge_unknown_key_is_shortened_in_the_message():
    data = _data()
    data["design"]["k" * 5000] = 1
    error = _error(data)
    assert error.field == "design." + "k" * 60 + "...(5000 characters)"
    assert len(str(error)) < 2000


def test_a_huge_line_with_a_syntax_error_is_shortened_in_the_message():
    with pytest.raises(PlanFileError) as info:
        parse_plan('title = "x"\n' + "= " + "x" * 100_000)
    assert "line 2" in str(info.value)
    assert len(str(info.value)) < 1000


@pytest.mark.parametrize("name", ["X-", "X+"])
def test_counter_ion_names_are_reserved_for_counter_ions(name):
    # X- and X+ name the unnamed counter-ion that neutralises a stock; a component of that
    # name silently took every stock's counter-ion as reagent (found by fuzzing).
    data = _data()
    data["reaction"]["components"][1] = name
    error = _error(data)
    _assert_names(error, "reaction.components[1]")
    assert "reserved" in str(error)


# --- issue 9: every input answered, nothing hangs ----------------------------------------------


def test_the_diluent_as_the_only_stock_is_refused():
    # Issue 9: the diluent holding both reagents, and no other stock, crashed the design
    # ("cannot reshape array", exit 3).
    data = _data()
    diluent = data["stocks"][2]
    diluent["contains_M"] = {"Fe3+": 0.2, "SCN-": 0.0016, "H+": 0.4}
    data["stocks"] = [diluent]
    error = _error(data)
    _assert_names(error, "stocks")
    assert "diluent is the only stock" in str(error)


@pytest.mark.parametrize("purity", [5e-324, 1e-300, 0.1, 0.4999])
def test_implausible_purity_is_refused(purity):
    # Issue 9: a purity of 5e-324 made an infinite mass and a crash while writing the sheets.
    data = _data()
    data["stocks"][0]["solid"]["purity"] = purity
    error = _error(data)
    _assert_names(error, "stocks[0].solid.purity")
    assert "at least 0.5" in str(error)


def test_purity_of_one_half_is_accepted():
    data = _data()
    data["stocks"][0]["solid"]["purity"] = 0.5
    assert plan_from_mapping(data).stock("iron").solid.purity == 0.5


@pytest.mark.parametrize(
    "formula",
    [
        "(H2O)99999999999999999999",  # the finding
        "KSCN·1001H2O",  # a hydrate count above 1000
        "Fe(NO3)3(H2O)" + "9" * 5000,  # more digits than int() converts
        "((H1000)1000)",  # 1e6 atoms
        "Pb1000",  # 207 000 g/mol
    ],
)
def test_implausible_solid_formula_is_refused(formula):
    data = _data()
    data["stocks"][1]["solid"]["formula"] = formula
    error = _error(data)
    _assert_names(error, "stocks[1].solid.formula")
    assert len(str(error)) < 600


@pytest.mark.parametrize(
    ("path", "field"),
    [
        (("title",), "title"),
        (("stocks", 1, "id"), "stocks[1].id"),
        (("reaction", "species", 0, "name"), "reaction.species[0].name"),
        (("reaction", "components", 1), "reaction.components[1]"),
        (("stocks", 0, "solid", "formula"), "stocks[0].solid.formula"),
        (("design", "vessel"), "design.vessel"),
    ],
)
def test_nul_characters_in_text_are_refused(path, field):
    # Issue 9: a NUL character went through to the sheets (where it ends C strings).
    data = _data()
    target = data
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = "a\x00" + str(target[path[-1]])
    error = _error(data)
    _assert_names(error, field)
    assert "NUL" in str(error)


def test_nul_characters_in_keys_are_refused():
    data = _data()
    data["stocks"][0]["contains_M"]["Fe\x003+"] = 0.1
    error = _error(data)
    _assert_names(error, "stocks[0].contains_M.Fe\x003+")
    assert "NUL" in str(error)


def test_nul_written_as_a_toml_escape_is_refused():
    text = IRON_PLAN.replace('title = "Invented', 'title = "\\u0000Invented')
    with pytest.raises(PlanFileError, match="NUL") as info:
        parse_plan(text)
    assert info.value.field == "title"


def test_nul_check_copes_with_deep_nesting():
    # Walked without recursion: a mapping nested deeper than the recursion limit.
    deep: Any = "x\x00"
    for _ in range(5000):
        deep = [deep]
    data = _data()
    data["title"] = deep
    error = _error(data)
    assert error.field == "title" + "[0]" * 5000
    assert "NUL" in str(error)


@pytest.mark.parametrize(
    "where",
    [
        ("reaction", "components", 1),  # quoted in a hint of another key ("use one of ...")
        ("design", "limiting"),
        ("stocks", 0, "solid", "formula"),
        ("glassware", 0, "kind"),
        ("design", "vessel"),
    ],
)
def test_every_message_shortens_a_thirty_kilobyte_value(where):
    # Issue 9: messages echoed values of 30 kB though docs/plan-file.md says they are
    # shortened (values to 80 characters, keys to 100).
    data = _data()
    target = data
    for key in where[:-1]:
        target = target[key]
    target[where[-1]] = "Q" * 30_000
    error = _error(data)
    assert len(str(error)) < 1500, str(error)[:300]
    assert "Q" * 101 not in str(error)


# The reader of plan files and saved results refuses what it cannot read in bounded time.


def test_a_fifo_is_refused_without_blocking(tmp_path):
    fifo = tmp_path / "plan.toml"
    os.mkfifo(fifo)  # nobody writes: opening it for reading would wait forever
    with pytest.raises(PlanFileError, match="FIFO") as info:
        load_plan(fifo)
    assert str(fifo) in str(info.value)


@pytest.mark.parametrize(("path", "kind"), [("/dev/null", "device"), ("/dev/zero", "device")])
def test_devices_are_refused(path, kind):
    # /dev/zero was read until memory ran out.
    with pytest.raises(PlanFileError, match=kind) as info:
        load_plan(path)
    assert path in str(info.value)


def test_a_directory_is_refused_as_such(tmp_path):
    with pytest.raises(PlanFileError, match="it is a directory"):
        load_plan(tmp_path)


def test_a_file_above_one_mebibyte_is_refused(tmp_path):
    path = tmp_path / "huge.toml"
    path.write_text(IRON_PLAN + "# " + "x" * MAX_PLAN_FILE_BYTES + "\n", encoding="utf-8")
    with pytest.raises(PlanFileError, match="larger than 1 MiB") as info:
        load_plan(path)
    assert str(path) in str(info.value)


def test_a_file_of_exactly_the_limit_is_read(tmp_path):
    path = tmp_path / "full.toml"
    text = IRON_PLAN + "#"
    text += "x" * (MAX_PLAN_FILE_BYTES - len(text.encode("utf-8")) - 1) + "\n"
    path.write_text(text, encoding="utf-8")
    assert path.stat().st_size == MAX_PLAN_FILE_BYTES == 2**20
    assert load_plan(path) == parse_plan(IRON_PLAN)


def test_bench_preset_fills_every_term_and_overrides_win():
    data = _data()
    data["bench"] = {"technique": "novice", "cuvette_rsd": 0.005}
    bench = plan_from_mapping(data).bench
    novice = PRESETS["novice"]
    assert bench.technique == "novice"
    assert bench.cuvette_rsd == 0.005
    assert bench.pipette_rsd == novice.pipette_rsd
    assert bench.buret_reading_sd_mL == novice.buret_reading_sd_mL
    assert bench.blank_offset_sd == novice.blank_offset_sd
    assert bench.temperature_sd_C == novice.temperature_sd_C


def test_no_bench_table_is_an_ideal_bench_and_round_trips():
    plan = parse_plan(IRON_PLAN)
    assert plan.bench.technique == "none"
    assert plan.bench.pipette_rsd == 0.0
    data = _data()
    data["bench"] = {"technique": "practised", "piston_rsd": 0.01}
    data["instrument"]["absorbance_rsd"] = 0.004
    data["instrument"]["transmittance_sd"] = 0.002
    plan = plan_from_mapping(data)
    again = plan_from_mapping(json.loads(json.dumps(plan_to_mapping(plan))))
    assert again == plan
    assert again.instrument.transmittance_sd == 0.002


@pytest.mark.parametrize(
    ("key", "value", "field"),
    [
        ("technique", "expert", "bench.technique"),
        ("pipette_rsd", -0.01, "bench.pipette_rsd"),
        ("buret_reading_sd_mL", 2.0, "bench.buret_reading_sd_mL"),
    ],
)
def test_bad_bench_values_name_the_key(key, value, field):
    data = _data()
    data["bench"] = {key: value}
    _assert_names(_error(data), field)


@pytest.mark.parametrize(
    ("name", "ok"),
    [
        ("FeSCN2+", True),  # Fe3+ + SCN-: +3 - 1 = +2, by hand
        ("FeSCN^2+", True),
        ("FeSCN²⁺", True),
        ("FeSCN", True),  # no charge written: a label
        ("Fe-SCN complex", True),  # a sign inside the name is not a charge
        ("FeSCN+", False),  # reads +1
        ("FeSCN3+", False),  # reads +3
    ],
)
def test_a_product_name_ending_in_a_charge_must_give_the_formula_s(name, ok):
    # The charge every calculation uses comes from the formula; a name that reads another one
    # labelled every sheet wrongly without a word (an invented "NiQ+" for Ni2+ + Q, +2).
    data = _data()
    data["reaction"]["species"][0]["name"] = name
    if ok:
        assert plan_from_mapping(data).reaction.species[0].name == name
        return
    error = _error(data)
    _assert_names(error, "reaction.species[0].name")
    assert "but the formula gives +2" in str(error)
    assert "(2+)" in str(error)
