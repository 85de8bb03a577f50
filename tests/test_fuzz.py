"""Fuzzing ``planner plan FILE --format json`` with malformed and extreme plan files.

Two promises are tested through the command line (typer's CliRunner on planner.cli.app):

- a plan file the planner cannot use exits 2 with a message on stderr, never a traceback,
  and when the fault sits in one key the message begins with that key's path
  (``error: stocks[1].contains_M.Fe3+: ...``);
- an extreme but valid plan (K from 1e-2 to 1e12 L/mol, stocks from 1e-8 to 5 mol/L, one
  device or thirty) either plans (exit 0) or fails named checks (exit 1), never exits 3
  (internal error), and its JSON holds no NaN or infinity anywhere.

Plans are drawn from valid pieces by :mod:`tests.strategies` and then broken one fault at a
time, so each example knows which key is at fault. Every plan here is invented for the tests.

Section (c) tampers with one number of a saved plan.json and expects ``planner verify`` to
refuse it. Section (d) extends the promise to every command and argument: ``planner check`` over any
numbers, ``simulate`` and ``variants`` over any counts and seeds, and FILE arguments that are
special files (FIFO, directory, devices, oversize, not UTF-8) all exit 0, 1 or 2, never hang,
and an exit 2 names the option or the file.

Example counts follow the hypothesis profile (tests/conftest.py). CI runs the bounded
``ci`` profile, about 2600 examples in all; the long profile runs twenty times as many::

    HYPOTHESIS_PROFILE=long python -m pytest tests/test_fuzz.py
"""

from __future__ import annotations

import contextlib
import copy
import json
import math
import os
import re
import tempfile
import tomllib
from functools import cache
from pathlib import Path
from typing import Any
from unittest import mock

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from planner import cli
from planner.cli import app
from planner.errors import PlanFileError
from planner.planfile import MAX_PLAN_FILE_BYTES, MAX_RESULT_FILE_BYTES, load_plan, parse_plan
from tests.strategies import (
    budget,
    get_at,
    key_paths,
    path_text,
    plan_dicts,
    set_at,
    toml_text,
)

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[1]

# Every key a plan file knows, in any table (DESIGN.md section 4 and docs/plan-file.md); an
# "unknown key" drawn by a test must not be one of them.
KNOWN_KEYS = frozenset(
    " ".join(
        (
            "title reaction instrument stocks glassware design session temperature_C",
            "ionic_strength_M components species component_epsilon name formula log_beta K",
            "epsilon wavelength_nm path_length_cm absorbance_window absorbance_sd stray_light",
            "cuvette_fill_mL id contains_M relative_uncertainty available_mL solid diluent",
            "purity provides kind volume_mL class count range_uL step_uL division_mL",
            "min_delivery_mL tolerance_mL standards tests limiting assumption_tolerance vessel",
            "total_volume_mL bound_fraction_span bound_fraction_range ionic_strength_spread",
            "blanks sections benches_per_section replicates margin dead_volume_mL",
            "absorbance_rsd transmittance_sd bench technique buret_reading_sd_mL pipette_rsd",
            "piston_rsd cuvette_rsd blank_offset_sd temperature_sd_C enthalpy_kJ_mol log_beta_sd",
            "sit_delta_epsilon_kg_mol criterion ionic_medium salt epsilon_ionic_slope",
        )
    ).split()
)
NON_FINITE_WORD = re.compile(r"(?i)\b(nan|inf|infinity)\b")
# Whole CLI runs take tens of milliseconds to a second, and plans are big examples.
FUZZ = {
    "deadline": None,
    "suppress_health_check": [HealthCheck.too_slow, HealthCheck.data_too_large],
}


@pytest.fixture(scope="module")
def plan_path(tmp_path_factory):
    """One file, rewritten by every example (hypothesis forbids function-scoped fixtures)."""
    return tmp_path_factory.mktemp("fuzz") / "plan.toml"


def run_plan(path: Path, content: str | bytes):
    if isinstance(content, str):
        path.write_text(content, encoding="utf-8")
    else:
        path.write_bytes(content)
    # catch_exceptions=False: an exception escaping the CLI fails the test loudly instead of
    # being folded into exit code 1.
    return runner.invoke(app, ["plan", str(path), "--format", "json"], catch_exceptions=False)


def squeeze(text: str) -> str:
    """Text without whitespace: rich wraps long messages at the terminal width."""
    return re.sub(r"\s+", "", text)


def assert_no_traceback(result) -> None:
    # Exit 3 first: its traceback (the bug's location) is then shown in the failure.
    assert result.exit_code != 3, result.stderr[-3000:]
    assert "Traceback" not in result.stdout
    assert "Traceback" not in result.stderr


def assert_input_error(result, *paths: str) -> None:
    """Exit 2, nothing on stdout, and (when paths are given) the message starts with one."""
    assert_no_traceback(result)
    assert result.exit_code == 2, (result.exit_code, result.stderr[-2000:])
    assert result.stdout == ""
    message = squeeze(result.stderr)
    assert message.startswith("error:"), result.stderr
    if paths:
        heads = [squeeze(f"error: {path}:") for path in paths]
        assert any(message.startswith(head) for head in heads), (paths, result.stderr[:2000])


def _reject_constant(name: str) -> Any:
    raise AssertionError(f"the JSON holds the non-finite constant {name}")


def assert_finite_document(document: Any, *, words: bool, where: str = "") -> None:
    """Every number of the document is finite; with ``words``, no text says nan or inf."""
    if isinstance(document, dict):
        for key, value in document.items():
            # The inputs block repeats the plan's own text, which may be anything.
            check_words = words and key != "inputs"
            assert_finite_document(value, words=check_words, where=f"{where}.{key}")
    elif isinstance(document, list):
        for index, value in enumerate(document):
            assert_finite_document(value, words=words, where=f"{where}[{index}]")
    elif isinstance(document, float):
        assert math.isfinite(document), where
    elif isinstance(document, str) and words:
        assert not NON_FINITE_WORD.search(document), (where, document)


def assert_plans_or_fails_named_checks(result, *, words: bool = True) -> dict[str, Any]:
    """Exit 0 or 1, one JSON document, exit 1 exactly when a named check fails."""
    assert_no_traceback(result)
    assert result.exit_code in (0, 1), (result.exit_code, result.stderr[-2000:])
    document = json.loads(result.stdout, parse_constant=_reject_constant)
    assert_finite_document(document, words=words)
    assert document["schema"] == "planner.plan/2"
    checks = document["checks"]
    for check in checks:
        assert isinstance(check["name"], str)
        assert check["name"]
        assert check["status"] in ("pass", "warn", "fail")
    failed = [check["name"] for check in checks if check["status"] == "fail"]
    assert bool(failed) == (result.exit_code == 1), (result.exit_code, failed)
    return document


def doc_paths(*documents: Any) -> list[str]:
    """Every key path of the documents, longest first (so the most specific one matches)."""
    found = {path_text(path) for document in documents for path, _ in key_paths(document)}
    return sorted(found, key=len, reverse=True)


@settings(max_examples=budget(100), **FUZZ)
@given(plan=plan_dicts())
def test_the_toml_writer_round_trips(plan):
    # The fuzz tests read their faults from the dicts, so the text must say exactly that.
    assert tomllib.loads(toml_text(plan)) == plan


# ---------------------------------------------------------------------------------------------
# (a) Malformed plan files
# ---------------------------------------------------------------------------------------------

# Lines that can never be valid TOML, whatever precedes them (key names are not plan keys).
JUNK_LINES = (
    "= 1",
    "[",
    "[[stocks]",
    "[design",
    "junk_key =",
    'junk_key = "unterminated',
    "junk_key = [1, 2",
    "junk_key = {a = 1",
    "junk_key = 1 2",
    "junk_key = tru",
    "junk_key = 01",
    "junk_key = 1__0",
    "junk_key = 1.",
    "junk_key = .5",
    "junk_key = 0x",
    "junk_key = 1979-13-45",
    "junk_key = 'single\nquoted'",
    'junk key = "spaces need quotes"',
    "junk_key = \x00",
    "junk_key = '''",
    "a.b = 1\na = 2",
    '"unterminated',
    "junk_key = { a = 1, a = 2 }",
    "junk_key = [1,,2]",
)


@st.composite
def broken_toml(draw) -> str | bytes:
    """A valid plan's text made unreadable in one place."""
    text = toml_text(draw(plan_dicts(max_devices=6)))
    lines = text.splitlines()
    how = draw(st.sampled_from(("junk", "cut", "duplicate", "bytes")))
    if how == "junk":
        at = draw(st.integers(0, len(lines)))
        lines.insert(at, draw(st.sampled_from(JUNK_LINES)))
        return "\n".join(lines) + "\n"
    if how == "cut":
        # Cut the file right after an opening quote, bracket or brace: it ends inside it.
        openings = [m.end() for m in re.finditer(r'= (\[|\{|")', text)]
        return text[: draw(st.sampled_from(openings))]
    if how == "duplicate":
        # A key given twice in one table is a TOML error (not a plan-file one).
        assignments = [i for i, line in enumerate(lines) if re.match(r"^\S+ = ", line)]
        at = draw(st.sampled_from(assignments))
        lines.insert(at + 1, lines[at])
        return "\n".join(lines) + "\n"
    # Bytes that are not UTF-8 (a Latin-1 file, a stray binary blob).
    data = text.encode("utf-8")
    at = draw(st.integers(0, len(data)))
    return (
        data[:at] + draw(st.sampled_from((b"\xff", b"\xc3\x28", b"\xe9t\xe9", b"\x80"))) + data[at:]
    )


@settings(max_examples=budget(300), **FUZZ)
@given(content=broken_toml())
def test_broken_toml_exits_2_with_a_location(plan_path, content):
    result = run_plan(plan_path, content)
    assert_input_error(result)
    message = squeeze(result.stderr)
    if isinstance(content, bytes):
        assert "isnotUTF-8text" in message, result.stderr
    else:
        assert "TOMLsyntaxerror" in message, result.stderr
        assert "atline" in message or "attheendofthefile" in message, result.stderr


def _required_paths(plan: dict[str, Any]) -> list[tuple[tuple[str | int, ...], str]]:
    """(key path to delete, path the message must name) for every key the plan cannot lack."""
    found: list[tuple[tuple[str | int, ...], str]] = [
        ((key,), key) for key in ("reaction", "instrument", "stocks", "glassware", "design")
    ]
    found += [
        (("reaction", key), f"reaction.{key}")
        for key in ("ionic_strength_M", "components", "species")
    ]
    for index, species in enumerate(plan["reaction"]["species"]):
        base = ("reaction", "species", index)
        found += [((*base, "name"), path_text((*base, "name")))]
        found += [((*base, "formula"), path_text((*base, "formula")))]
        constant = "K" if "K" in species else "log_beta"
        found.append(((*base, constant), path_text(base)))  # "needs log_beta or K"
    found.append((("instrument", "wavelength_nm"), "instrument.wavelength_nm"))
    for index, stock in enumerate(plan["stocks"]):
        found.append((("stocks", index, "id"), f"stocks[{index}].id"))
        if not stock.get("diluent"):
            found.append((("stocks", index, "contains_M"), f"stocks[{index}].contains_M"))
    for index, device in enumerate(plan["glassware"]):
        found.append((("glassware", index, "kind"), f"glassware[{index}].kind"))
        keys = ("range_uL", "step_uL") if device["kind"] == "piston-pipette" else ("volume_mL",)
        found += [(("glassware", index, key), f"glassware[{index}].{key}") for key in keys]
    found.append((("design", "limiting"), "design.limiting"))
    if plan["design"]["vessel"] == "tube":
        found.append((("design", "total_volume_mL"), "design.total_volume_mL"))
    return found


@settings(max_examples=budget(200), **FUZZ)
@given(plan=plan_dicts(max_devices=6), data=st.data())
def test_missing_required_key_names_it(plan_path, plan, data):
    path, named = data.draw(st.sampled_from(_required_paths(plan)))
    del get_at(plan, path[:-1])[path[-1]]
    result = run_plan(plan_path, toml_text(plan))
    assert_input_error(result, named)


# Tables whose keys the plan file defines (contains_M and formula take any ion name).
def _model_tables(plan: dict[str, Any]) -> list[tuple[str | int, ...]]:
    tables: list[tuple[str | int, ...]] = [(), ("reaction",), ("instrument",), ("design",)]
    tables += [("reaction", "species", i) for i in range(len(plan["reaction"]["species"]))]
    tables += [("stocks", i) for i in range(len(plan["stocks"]))]
    tables += [("stocks", i, "solid") for i, s in enumerate(plan["stocks"]) if "solid" in s]
    tables += [("glassware", i) for i in range(len(plan["glassware"]))]
    if "session" in plan:
        tables.append(("session",))
    return tables


NAMES = st.text(
    alphabet=st.characters(exclude_categories=("Cs", "Cc", "Zs", "Zl", "Zp")),
    min_size=1,
    max_size=30,
)
SCALARS = st.one_of(
    st.integers(-5, 5), st.floats(-10, 10), st.booleans(), NAMES, st.lists(st.integers(0, 3))
)


@settings(max_examples=budget(300), **FUZZ)
@given(plan=plan_dicts(max_devices=6), data=st.data())
def test_unknown_key_names_it(plan_path, plan, data):
    table_path = data.draw(st.sampled_from(_model_tables(plan)))
    table = get_at(plan, table_path)
    if data.draw(st.booleans()) and table:
        # A typo of a key the table has: one character inserted.
        existing = data.draw(st.sampled_from(sorted(table)))
        at = data.draw(st.integers(0, len(existing)))
        key = existing[:at] + data.draw(NAMES.map(lambda t: t[0])) + existing[at:]
    else:
        key = data.draw(NAMES)
    if key in KNOWN_KEYS:
        key += "_x"
    table[key] = data.draw(SCALARS)
    result = run_plan(plan_path, toml_text(plan))
    assert_input_error(result, path_text((*table_path, key)))
    assert "unknownkey" in squeeze(result.stderr)


def _kind(value: Any) -> str:
    if isinstance(value, bool):
        return "bool"
    if isinstance(value, (int, float)):
        return "number"
    if isinstance(value, str):
        return "string"
    if isinstance(value, list):
        return "list"
    return "table"


OTHER_TYPES = {
    "bool": (True, False),
    "number": (0, 1.5, -3),
    "string": ("", "x", "1.0", "true"),
    "list": ([], [1, "a"], [[1]]),
    "table": ({}, {"a": 1}),
}


@settings(max_examples=budget(400), **FUZZ)
@given(plan=plan_dicts(max_devices=6), data=st.data())
def test_wrong_type_names_the_key(plan_path, plan, data):
    paths = [path for path, _ in key_paths(plan)]
    path = data.draw(st.sampled_from(paths))
    kind = _kind(get_at(plan, path))
    other = data.draw(st.sampled_from(sorted(k for k in OTHER_TYPES if k != kind)))
    set_at(plan, path, copy.deepcopy(data.draw(st.sampled_from(OTHER_TYPES[other]))))
    result = run_plan(plan_path, toml_text(plan))
    assert_input_error(result, path_text(path))


NON_FINITE = (math.nan, math.inf, -math.inf, "nan", "inf", "NaN", "-Infinity")
ABSURD = (
    -1,
    -1.0,
    0,
    0.0,
    -0.0,
    1e308,
    -1e308,
    5e-324,
    1e-300,
    10**30,
    -(10**30),
    2**63 - 1,
    -(2**63),
    123456789,
)


@settings(max_examples=budget(600), **FUZZ)
@given(plan=plan_dicts(max_devices=6), data=st.data())
def test_absurd_numbers_never_crash(plan_path, plan, data):
    original = copy.deepcopy(plan)
    numbers = [path for path, value in key_paths(plan) if _kind(value) == "number"]
    path = data.draw(st.sampled_from(numbers))
    value = data.draw(st.sampled_from(NON_FINITE + ABSURD))
    set_at(plan, path, value)
    result = run_plan(plan_path, toml_text(plan))
    if value in NON_FINITE or (isinstance(value, float) and math.isnan(value)):
        # No plan key takes nan, infinity or text that spells them.
        assert_input_error(result, path_text(path))
    elif result.exit_code == 2:
        # A key the file lacks may be the place to mend it: an epsilon made positive can
        # leave two absorbing products, and the plan file must then name the measured one.
        assert_input_error(result, *doc_paths(original, plan), "design.measured_species")
    else:
        assert_plans_or_fails_named_checks(result)


# Found by the long profile: a measured product with eps = 5e-324 beside an absorbing second
# product overflowed the product-speciation check's ratio of absorptivities (exit 3).
VANISHING_EPSILON = """
[reaction]
temperature_C = 20
ionic_strength_M = 0.0
components = ["Fe3+", "SCN-"]
[[reaction.species]]
name = "FeSCN2+"
formula = { "Fe3+" = 1, "SCN-" = 1 }
log_beta = -2.0
epsilon = 5e-324
[[reaction.species]]
name = "Fe(SCN)2+"
formula = { "Fe3+" = 1, "SCN-" = 2 }
log_beta = -2.0
epsilon = 100.0
[instrument]
wavelength_nm = 200
path_length_cm = 0.1
absorbance_window = [0.0, 0.6]
absorbance_sd = 0.0001
cuvette_fill_mL = 0.5
[[stocks]]
id = "metal"
contains_M = { "Fe3+" = 1.0, "H+" = 0.1, "NO3-" = 0.1 }
[[stocks]]
id = "ligand"
contains_M = { "SCN-" = 1.0, "H+" = 0.1, "NO3-" = 0.1 }
[[stocks]]
id = "medium"
contains_M = { "H+" = 0.1, "NO3-" = 0.1 }
diluent = true
[[glassware]]
kind = "transfer-pipette"
volume_mL = 0.5
[design]
standards = 1
tests = 1
limiting = "Fe3+"
assumption_tolerance = 0.001
vessel = "flask-5"
total_volume_mL = 5.0
bound_fraction_range = [0.05, 0.7]
bound_fraction_span = 0.065
ionic_strength_spread = 0.0
measured_species = "FeSCN2+"
[session]
margin = 0.0
dead_volume_mL = 0.0
"""


# Found by the long profile: an absorbing 5 mol/L component over a 2 cm path reads so high
# that 10^-A underflows to 0, and verify's reading noise divided 0 transmittance noise by it.
UNDERFLOWING_TRANSMITTANCE = """
[reaction]
temperature_C = 20
ionic_strength_M = 0.0
components = ["Cu2+", "L-"]
component_epsilon = { "Cu2+" = 50.0 }
[[reaction.species]]
name = "CuL+"
formula = { "Cu2+" = 1, "L-" = 1 }
log_beta = -2.0
epsilon = 10.0
[[reaction.species]]
name = "CuL2"
formula = { "Cu2+" = 1, "L-" = 2 }
log_beta = 0.0
epsilon = 0.0
[instrument]
wavelength_nm = 200
path_length_cm = 2.0
absorbance_window = [0.0, 0.6]
absorbance_sd = 0.0001
cuvette_fill_mL = 0.05
[[stocks]]
id = "metal"
contains_M = { "Cu2+" = 5.0, "H+" = 0.1, "NO3-" = 0.1 }
[[stocks]]
id = "ligand"
contains_M = { "L-" = 5.0, "H+" = 0.1, "NO3-" = 0.1 }
[[glassware]]
kind = "piston-pipette"
range_uL = [10.0, 100.0]
step_uL = 1.0
[design]
standards = 1
tests = 1
limiting = "L-"
assumption_tolerance = 0.001
total_volume_mL = 0.5
bound_fraction_range = [0.05, 0.7]
bound_fraction_span = 0.065
ionic_strength_spread = 0.0
[session]
margin = 0.0
dead_volume_mL = 0.0
"""


def test_a_reading_past_the_float_range_of_transmittance_plans_or_fails(plan_path):
    assert_plans_or_fails_named_checks(run_plan(plan_path, UNDERFLOWING_TRANSMITTANCE))


def test_a_vanishing_measured_epsilon_plans_or_fails_a_named_check(plan_path):
    document = assert_plans_or_fails_named_checks(run_plan(plan_path, VANISHING_EPSILON))
    speciation = next(c for c in document["checks"] if c["name"] == "product-speciation")
    assert "means nothing" in speciation["detail"]


UNICODE = st.text(
    alphabet=st.characters(exclude_categories=("Cs",)), min_size=0, max_size=40
) | st.sampled_from(
    ("Fe³⁺", "SCN⁻", "铁", "железо", "حديد", "🧪", "e\u0301", "\u200b", "Ａ", "x" * 20_000)
)


@settings(max_examples=budget(200), **FUZZ)
@given(plan=plan_dicts(max_devices=6), data=st.data())
def test_unicode_and_long_strings_never_crash(plan_path, plan, data):
    original = copy.deepcopy(plan)
    strings = [path for path, value in key_paths(plan) if isinstance(value, str)]
    path = data.draw(st.sampled_from(strings))
    set_at(plan, path, data.draw(UNICODE))
    result = run_plan(plan_path, toml_text(plan))
    if result.exit_code == 2:
        assert_input_error(result, *doc_paths(original, plan))
    else:
        # A unicode id or title is a valid plan; its text may say anything, so only the
        # numbers are checked for NaN and infinity.
        assert_plans_or_fails_named_checks(result, words=False)


def _default_plan_text() -> str:
    return (ROOT / "planner" / "data" / "default.toml").read_text(encoding="utf-8")


def _stock_entry(index: int) -> str:
    return f'[[stocks]]\nid = "s{index}"\ncontains_M = {{ "Fe3+" = 0.01 }}\n'


def _device_entry(index: int) -> str:
    return f'[[glassware]]\nkind = "tube"\nvolume_mL = {10 + index * 0.001:.3f}\n'


HUGE_CASES = {
    # name: (builder of a text of a few MB, the key path the message names or None)
    "thirty thousand stocks": (
        lambda: _default_plan_text() + "".join(_stock_entry(i) for i in range(30_000)),
        "stocks",
    ),
    "a hundred thousand devices": (
        lambda: _default_plan_text() + "".join(_device_entry(i) for i in range(100_000)),
        "glassware",
    ),
    "three megabytes of text in a number": (
        lambda: _default_plan_text().replace(
            "wavelength_nm = 450", f'wavelength_nm = "{"4" * 3_000_000}"'
        ),
        "instrument.wavelength_nm",
    ),
    "a number with a million digits": (
        lambda: _default_plan_text().replace(
            "wavelength_nm = 450", f"wavelength_nm = {'4' * 1_000_000}"
        ),
        None,
    ),
    "lists nested a million deep": (
        lambda: _default_plan_text() + "deep = " + "[" * 1_000_000 + "]" * 1_000_000 + "\n",
        None,
    ),
    "tables nested a quarter million deep": (
        lambda: _default_plan_text() + "deep = " + "{a = " * 250_000 + "1" + "}" * 250_000,
        None,
    ),
    "three megabytes of garbage": (
        lambda: _default_plan_text() + "\n" + "@!$%^&*#" * 400_000,
        None,
    ),
    "a ten-megabyte key": (
        lambda: _default_plan_text().replace("[design]", f"[design]\n{'k' * 10_000_000} = 1"),
        # Keys longer than 100 characters are shortened in the message.
        "design." + "k" * 60 + "...(10000000characters)",
    ),
}


@pytest.mark.parametrize("case", sorted(HUGE_CASES))
def test_huge_malformed_texts_are_plan_file_errors(case):
    # Such files are refused by size before they are parsed (below); the parser itself must
    # still cope with them when given the text (planner.planfile.parse_plan).
    build, named = HUGE_CASES[case]
    text = build()
    assert len(text) > 1_000_000
    with pytest.raises(PlanFileError) as info:
        parse_plan(text)
    if named is not None:
        assert squeeze(info.value.field) == named
    # A value or key too long to quote is shortened: the message stays readable.
    assert len(str(info.value)) < 5_000


HUGE_VALID_EDITS = {
    "three-megabyte comment": lambda text: text + "# " + "comment " * 400_000 + "\n",
    "three-megabyte title": lambda text: text.replace(
        'title = "', 'title = "' + "t" * 3_000_000, 1
    ),
}


@pytest.mark.parametrize("case", sorted(HUGE_VALID_EDITS))
def test_huge_valid_texts_parse(case):
    inputs = parse_plan(HUGE_VALID_EDITS[case](_default_plan_text()))
    assert inputs.design.standards == 5  # the default plan's, read past the bulk


@pytest.mark.parametrize("case", sorted(HUGE_CASES) + sorted(HUGE_VALID_EDITS))
def test_huge_files_exit_2(tmp_path, case):
    # docs/plan-file.md: a plan file is read up to 1 MiB (issue 9: /dev/zero was read until
    # memory ran out); a bigger one is refused before it is parsed, a smaller one is parsed.
    if case in HUGE_CASES:
        text, named = HUGE_CASES[case][0](), HUGE_CASES[case][1]
    else:
        text, named = HUGE_VALID_EDITS[case](_default_plan_text()), None
    result = run_plan(tmp_path / "huge.toml", text)
    if len(text.encode("utf-8")) > MAX_PLAN_FILE_BYTES:
        assert_input_error(result)
        assert "largerthan1MiB" in squeeze(result.stderr)
    elif named is None:
        assert_input_error(result)
    else:
        assert_input_error(result, named)
    assert len(result.stderr) < 5_000


# ---------------------------------------------------------------------------------------------
# (b) Extreme but valid plans
# ---------------------------------------------------------------------------------------------


@settings(max_examples=budget(600), **FUZZ)
@given(plan=plan_dicts())
def test_valid_plans_plan_or_fail_named_checks(plan_path, plan):
    result = run_plan(plan_path, toml_text(plan))
    assert_plans_or_fails_named_checks(result)


@settings(max_examples=budget(100), **FUZZ)
@given(plan=plan_dicts(min_devices=30, max_devices=30))
def test_thirty_devices_plan_or_fail_named_checks(plan_path, plan):
    assert len(plan["glassware"]) >= 30
    result = run_plan(plan_path, toml_text(plan))
    assert_plans_or_fails_named_checks(result)


@settings(max_examples=budget(100), **FUZZ)
@given(plan=plan_dicts(min_devices=1, max_devices=1))
def test_one_device_plans_or_fails_named_checks(plan_path, plan):
    delivering = [d for d in plan["glassware"] if d["kind"] != "tube"]
    assert len(delivering) == 1
    result = run_plan(plan_path, toml_text(plan))
    assert_plans_or_fails_named_checks(result)


@pytest.mark.parametrize("K", [1e-2, 1e12])
@pytest.mark.parametrize("metal_M", [1e-8, 5.0])
@pytest.mark.parametrize("ligand_M", [1e-8, 5.0])
def test_corners_of_the_physical_ranges(tmp_path, K, metal_M, ligand_M):
    # The default's shelf with its 1:1 constant and both reagent stocks at the ends of the
    # ranges of tests/strategies.py (both iron stocks at metal_M), without the default's
    # constant medium of 3 mol/L, which a 5 mol/L stock alone exceeds (refused: exit 2,
    # tests/predict/test_medium.py).
    text = (ROOT / "recipes" / "iron-thiocyanate-tubes.toml").read_text(encoding="utf-8")
    text = text.replace("K = 98", f"K = {K!r}")
    text = re.sub(r'"Fe3\+" = 0\.0?40?', f'"Fe3+" = {metal_M!r}', text)
    text = text.replace('"SCN-" = 6.0e-4', f'"SCN-" = {ligand_M!r}')
    assert f"K = {K!r}" in text
    assert text.count(f'"Fe3+" = {metal_M!r}') == 2
    assert f'"SCN-" = {ligand_M!r}' in text
    result = run_plan(tmp_path / "corner.toml", text)
    assert_plans_or_fails_named_checks(result)


# ---------------------------------------------------------------------------------------------
# (c) Tampered plan results: planner verify never accepts a changed number
# ---------------------------------------------------------------------------------------------
#
# The embedded default plan is designed once and written as plan.json; each example changes
# one number of one block by a factor far from 1 and runs ``planner verify``. A changed number
# must make it exit 1 (a failed check) or 2 (a result file error), never 0 and never 3.

# Blocks of the document, each a predicate on a number's key path: every block gets an equal
# share of the examples, however many numbers it holds.
TAMPER_BLOCKS = {
    "mixtures": lambda p: p[0] == "mixtures" and len(p) == 3,
    "additions": lambda p: p[0] == "mixtures" and p[2] == "additions",
    "initial_M": lambda p: p[0] == "mixtures" and p[2] == "initial_M",
    "equilibrium_M": lambda p: p[0] == "mixtures" and p[2] == "equilibrium_M",
    "totals_mL": lambda p: p[0] == "totals_mL",
    "preparation": lambda p: p[0] == "preparation",
    "prediction": lambda p: p[0] == "prediction",
    "inputs": lambda p: p[0] == "inputs",
}
# Numbers of the inputs block that no stated number derives from: a plan that meets the
# changed value is still right, so verify may pass it (and fails it when the plan no longer
# meets it). Each with the reason.
UNCHECKED_INPUTS = {
    ("reaction", "temperature_C"): "the temperature the constants refer to: a label",
    ("reaction", "ionic_strength_M"): "the medium the constants refer to: quoted, except that "
    "a constant ionic medium moves them from it (then K, every state and reading change)",
    ("instrument", "wavelength_nm"): "the working wavelength: epsilon is given at it",
    ("stocks", "available_mL"): "a limit: stock-inventory fails only when it is exceeded",
    ("design", "assumption_tolerance"): "a limit: the assumption check fails only beyond it",
    ("instrument", "absorbance_window"): "a limit: the window check fails only outside it",
    ("instrument", "cuvette_fill_mL"): "a limit: cuvette-fill fails only below it",
    ("design", "bound_fraction_range"): "advice: bound-fraction-coverage only warns",
    ("design", "bound_fraction_span"): "advice: bound-fraction-coverage only warns",
    ("design", "ionic_strength_spread"): "advice: ionic-strength only warns on the spread",
    ("design", "K_bias_tolerance"): "a limit: the analysis check only weighs the all-bound "
    "K's bias against it, which may lie on the same side of the changed value",
    ("glassware", "count"): "advice: device-count only warns",
}
# The bench's delivery terms and the device kinds each applies to (planner.lab.bench).
BENCH_TERM_KINDS = {
    "buret_reading_sd_mL": ("buret-",),
    "pipette_rsd": ("transfer-pipette-", "graduated-pipette-"),
    "piston_rsd": ("piston-pipette-",),
}
FACTORS = st.one_of(
    st.sampled_from((10.0, 0.1, 2.0, 0.5, -1.0, 1e3, 1e-3)),
    st.floats(1.5, 1e6),
    st.floats(1e-6, 0.67),
    st.floats(-1e6, -1e-6),
)


def _device_id(entry: dict[str, Any]) -> str:
    """The device id of a glassware entry of the default plan (no piston pipettes there)."""
    return f"{entry['kind']}-{entry['volume_mL']:g}mL"


def _unchecked_input(document: dict[str, Any], path: tuple[Any, ...]) -> str | None:
    """Why an inputs number may change without verify failing, or None when it may not."""
    if path[0] != "inputs":
        return None
    table, key = path[1], path[3] if path[1] in ("stocks", "glassware") else path[2]
    if (table, key) in UNCHECKED_INPUTS:
        return UNCHECKED_INPUTS[table, key]
    if path[1:3] == ("reaction", "species") and path[-1] == "log_beta_sd":
        # planner.design.mixtures: it weighs the design's choice of tests over the expected
        # K, a choice verify does not make again; no stated number derives from it.
        return "the prior uncertainty of log_beta: it weighs the choice of tests only"
    used_devices = {
        device
        for mixture in document["mixtures"]
        for step in mixture["additions"]
        for device in step["devices"]
    }
    if table == "glassware" and _device_id(document["inputs"]["glassware"][path[2]]) not in (
        used_devices
    ):
        return "a device no recipe uses"
    kinds = BENCH_TERM_KINDS.get(key) if table == "bench" else None
    if kinds is not None and not any(d.startswith(kinds) for d in used_devices):
        # planner.lab.bench.technique_sd_mL: each term spreads its kinds' deliveries only.
        return "a bench term of devices no recipe uses"
    if table == "stocks" and key == "relative_uncertainty":
        stock = document["inputs"]["stocks"][path[2]]
        limiting = document["inputs"]["design"]["limiting"]
        in_tests = any(
            step["stock"] == stock["id"]
            for mixture in document["mixtures"]
            if mixture["role"] == "test"
            for step in mixture["additions"]
        )
        if limiting not in stock["contains_M"] and not in_tests:
            # u(A) follows the limiting reagent only; the prediction's u(K) the tests' excess.
            return "a stock that feeds neither the limiting reagent nor a test"
    return None


@pytest.fixture(scope="module")
def saved_default_plan() -> str:
    from planner.pipeline import design_plan
    from planner.planfile import load_plan
    from planner.report.plan_json import plan_json

    return plan_json(design_plan(load_plan(ROOT / "planner" / "data" / "default.toml")))


@pytest.fixture(scope="module")
def result_path(tmp_path_factory):
    return tmp_path_factory.mktemp("tampered") / "plan.json"


def test_untampered_default_result_verifies(saved_default_plan, result_path):
    # The baseline of the property below: the plan as written passes.
    result_path.write_text(saved_default_plan, encoding="utf-8")
    result = runner.invoke(app, ["verify", str(result_path)], catch_exceptions=False)
    assert result.exit_code == 0, result.stdout[-3000:]


def test_a_result_with_an_absorptivity_far_past_the_photometer_fails_cleanly(
    saved_default_plan, result_path
):
    # Found by the long profile: eps x 209 puts every reading far past the photometer's
    # range, where K no longer moves them; the global fit's re-derivation divided by the
    # zero norm of that column (exit 3). It now says the fit has nothing to find.
    document = json.loads(saved_default_plan)
    document["inputs"]["reaction"]["species"][0]["epsilon"] *= 209
    result_path.write_text(json.dumps(document), encoding="utf-8")
    result = runner.invoke(app, ["verify", str(result_path)], catch_exceptions=False)
    assert_no_traceback(result)
    assert result.exit_code == 1, result.stdout[-2000:]


@settings(max_examples=budget(300), **FUZZ)
@given(data=st.data())
def test_tampered_result_never_verifies(saved_default_plan, result_path, data):
    document = json.loads(saved_default_plan)
    block = data.draw(st.sampled_from(sorted(TAMPER_BLOCKS)), label="block")
    numbers = [
        (path, value)
        for path, value in key_paths(document)
        if _kind(value) == "number" and value != 0 and TAMPER_BLOCKS[block](path)
    ]
    path, value = data.draw(st.sampled_from(numbers), label="number")
    if isinstance(value, int):
        # A count or an order stays whole (a fraction is a type error, tested elsewhere).
        changed = value * data.draw(st.sampled_from((2, 3, 10, -1)), label="factor")
    else:
        changed = value * data.draw(FACTORS, label="factor")
    set_at(document, path, changed)
    result_path.write_text(json.dumps(document), encoding="utf-8")
    result = runner.invoke(app, ["verify", str(result_path)], catch_exceptions=False)
    assert_no_traceback(result)
    why = _unchecked_input(document, path)
    if why is None:
        assert result.exit_code in (1, 2), (path_text(path), value, changed, result.stdout[-2000:])
    else:
        assert result.exit_code in (0, 1, 2), (path_text(path), why)


# =============================================================================================
# (d) Issue 9: every command answers every argument and every file, nothing hangs
# =============================================================================================
#
# planner check over any floats (0, -0, nan, inf, huge, tiny, negative) and any tolerance;
# planner simulate and planner variants over any --trials, --sections and --seed; and the
# special files a FILE argument may name (FIFO, directory, /dev/null, /dev/zero, an oversize
# file, bytes that are not UTF-8). Every run exits 0, 1 or 2 with no traceback, and an exit
# 2 names the option or the file at fault. The heavy work is kept out: simulate and variants
# reuse one designed plan, and a valid but large count is run as a small one (its bound is
# what is fuzzed; tests/predict/test_montecarlo.py covers the memory budget).

CHECK_OPTIONS = ("--k", "--excess", "--limiting", "--tolerance")
EDGE_FLOATS = (
    0.0,
    -0.0,
    math.nan,
    math.inf,
    -math.inf,
    1e308,
    -1e308,
    5e-324,
    -5e-324,
    1e-300,
    1e-60,
    1e60,
    1e-30,
    1e6,
    1.0,
    1 - 1e-16,
)
ANY_FLOAT = st.floats() | st.sampled_from(EDGE_FLOATS)
# Ordinary values of each option, so that the other three are often valid and the one drawn
# wide is the one at fault (K and concentrations in their physical ranges).
PLAUSIBLE = {
    "--k": st.floats(1e-2, 1e12),
    "--excess": st.floats(0, 20),
    "--limiting": st.floats(1e-8, 5),
    "--tolerance": st.floats(1e-6, 0.5),
}
# Float text as a person might type it, and as repr writes it.
FLOAT_TEXT = {"repr": repr, "g": lambda x: f"{x:g}", "upper": lambda x: repr(x).upper()}


def assert_names_one_of(result, names) -> None:
    """An exit 2 whose message (ours, or the argument parser's) names one of ``names``."""
    assert_no_traceback(result)
    assert result.exit_code == 2, (result.exit_code, result.stderr[-2000:])
    assert result.stdout == ""
    message = squeeze(result.stderr)
    assert any(squeeze(name) in message for name in names), result.stderr[-2000:]


@settings(max_examples=budget(200), **FUZZ)
@given(data=st.data())
def test_check_answers_any_numbers(data):
    args = ["check"]
    for option in CHECK_OPTIONS:
        if option == "--tolerance" and data.draw(st.booleans()):
            continue  # the default tolerance
        wide = data.draw(st.booleans())
        value = data.draw(ANY_FLOAT if wide else PLAUSIBLE[option])
        args += [option, data.draw(st.sampled_from(sorted(FLOAT_TEXT)).map(FLOAT_TEXT.get))(value)]
    json_format = data.draw(st.booleans())
    if json_format:
        args += ["--format", "json"]
    result = runner.invoke(app, args, catch_exceptions=False)
    assert_no_traceback(result)
    assert result.exit_code in (0, 1, 2), result.stderr[-2000:]
    if result.exit_code == 2:
        message = squeeze(result.stderr)
        # Our message starts with the option; the parser's names it in quotes.
        assert any(
            message.startswith(squeeze(f"error: {option}:")) or f"'{option}'" in message
            for option in CHECK_OPTIONS
        ), result.stderr
        return
    if json_format:
        document = json.loads(result.stdout, parse_constant=_reject_constant)
        assert_finite_document(document, words=True)
        assert (document["verdict"] == "ok") == (result.exit_code == 0)
    else:
        assert not NON_FINITE_WORD.search(result.stdout), result.stdout
        assert "-0 " not in result.stdout


INT_EDGES = (0, 1, 2, -1, -(2**31), 2**31, 2**32 - 1, 2**32, 2**63, -(2**63), 10**40)
ANY_INT = st.integers() | st.sampled_from(INT_EDGES)
INT_TEXT = st.sampled_from(("int", "float", "hex", "junk"))


def _int_text(value: int, how: str) -> str:
    if how == "float":
        return f"{value:.3g}" if abs(value) < 1e300 else str(value)  # "1e+09"
    if how == "hex":
        return hex(value)
    if how == "junk":
        return f"{value}x"
    return str(value)


def _argument(value: int, how: str, low: int, high: int, small: int) -> tuple[str, int | None]:
    """The text of an integer option, and the value it means when valid (else None); a valid
    value above ``small`` is replaced by ``small`` to keep the run cheap."""
    text = _int_text(value, how)
    if not re.fullmatch(r"-?[0-9]+", text) or not low <= int(text) <= high:
        return text, None
    value = min(int(text), small)
    return str(value), value


@cache
def _designed_default():
    from planner.pipeline import design_plan

    return design_plan(load_plan(ROOT / "planner" / "data" / "default.toml"))


@cache
def _default_candidates():
    from planner.design.candidates import candidate_set

    return candidate_set(load_plan(ROOT / "planner" / "data" / "default.toml"))


@contextlib.contextmanager
def _one_design():
    """planner.pipeline.design_plan answers at once with the default plan, designed once."""
    designed = _designed_default()
    with mock.patch("planner.pipeline.design_plan", return_value=designed):
        yield


SMALL_TRIALS = 20


@settings(max_examples=budget(80), **FUZZ)
@given(
    trials=ANY_INT | st.integers(2, 50),
    seed=ANY_INT | st.integers(0, 2**32 - 1),
    trials_text=INT_TEXT,
    seed_text=INT_TEXT,
)
def test_simulate_answers_any_trials_and_seed(trials, seed, trials_text, seed_text):
    # The bound is fuzzed, not the Monte Carlo's speed: a valid count runs as at most 20.
    trials_arg, trials_value = _argument(trials, trials_text, 2, cli._MAX_TRIALS, SMALL_TRIALS)
    seed_arg, seed_value = _argument(seed, seed_text, 0, cli._MAX_SEED, cli._MAX_SEED)
    args = ["simulate", "--trials", trials_arg, "--seed", seed_arg, "--format", "json"]
    with _one_design():
        result = runner.invoke(app, args, catch_exceptions=False)
    if trials_value is not None and seed_value is not None:
        assert_no_traceback(result)
        assert result.exit_code in (0, 1), result.stderr[-2000:]
        document = json.loads(result.stdout)
        assert (document["trials"], document["seed"]) == (trials_value, seed_value)
    else:
        named = [n for n, v in (("--trials", trials_value), ("--seed", seed_value)) if v is None]
        assert_names_one_of(result, named)


@settings(max_examples=budget(60), **FUZZ)
@given(
    sections=ANY_INT | st.integers(1, 3),
    seed=ANY_INT | st.integers(0, 2**32 - 1),
    sections_text=INT_TEXT,
    seed_text=INT_TEXT,
)
def test_variants_answers_any_sections_and_seed(sections, seed, sections_text, seed_text):
    # Every section is a design and a folder of sheets: a valid count runs as at most 2.
    sections_arg, sections_value = _argument(sections, sections_text, 1, cli._MAX_SECTIONS, 2)
    seed_arg, seed_value = _argument(seed, seed_text, 0, cli._MAX_SEED, cli._MAX_SEED)
    recipe = str(ROOT / "planner" / "data" / "default.toml")
    with tempfile.TemporaryDirectory() as folder:
        out = Path(folder) / "variants"
        args = ["variants", recipe, "--sections", sections_arg, "--seed", seed_arg]
        args += ["--out", str(out), "-q"]
        # The pipeline hands variants its design_plan; variants imported candidate_set by name
        # (the default's candidates, enumerated once: variants counts the eligible tests).
        with (
            mock.patch("planner.pipeline.design_plan", return_value=_designed_default()),
            mock.patch("planner.design.variants.candidate_set", return_value=_default_candidates()),
        ):
            result = runner.invoke(app, args, catch_exceptions=False)
        if sections_value is not None and seed_value is not None:
            assert_no_traceback(result)
            # One design for every draw gives one distinct set: two sections exit 1.
            assert result.exit_code == (0 if sections_value == 1 else 1), result.stderr[-2000:]
            assert (out / "section-01" / "plan.json").is_file()
        else:
            pairs = (("--sections", sections_value), ("--seed", seed_value))
            named = [name for name, value in pairs if value is None]
            assert_names_one_of(result, named)
            assert not out.exists()


def _special_file(kind: str, folder: Path) -> Path:
    if kind == "fifo":
        path = folder / "fifo.toml"
        os.mkfifo(path)  # no writer: reading would wait forever
        return path
    if kind == "directory":
        return folder
    if kind in ("/dev/null", "/dev/zero"):
        return Path(kind)
    path = folder / "file.toml"
    if kind == "oversize":
        path.write_bytes(b"# " + b"x" * (MAX_RESULT_FILE_BYTES + 1))  # above both limits
    else:  # Latin-1 bytes
        path.write_bytes(_default_plan_text().replace("Harbour", "Hårbour").encode("latin-1"))
    return path


SPECIAL_WORDS = {
    "fifo": "FIFO",
    "directory": "directory",
    "/dev/null": "characterdevice",
    "/dev/zero": "characterdevice",
    "oversize": "largerthan",
    "latin-1": "notUTF-8",
}
FILE_COMMANDS = {
    "plan": ["plan", "{path}"],
    "plan-json": ["plan", "{path}", "--format", "json"],
    "simulate": ["simulate", "{path}", "--trials", "2"],
    "variants": ["variants", "{path}", "--sections", "1", "--seed", "1", "--out", "{out}"],
    "verify": ["verify", "{path}"],
}


@pytest.mark.parametrize("kind", sorted(SPECIAL_WORDS))
@pytest.mark.parametrize("command", sorted(FILE_COMMANDS))
def test_special_files_exit_2_at_once(tmp_path, command, kind):
    path = _special_file(kind, tmp_path)
    args = [a.format(path=path, out=tmp_path / "out") for a in FILE_COMMANDS[command]]
    result = runner.invoke(app, args, catch_exceptions=False)
    assert_names_one_of(result, [str(path)])
    assert SPECIAL_WORDS[kind] in squeeze(result.stderr)
    assert not (tmp_path / "out").exists()


@settings(max_examples=budget(100), **FUZZ)
@given(content=st.binary(max_size=2000), command=st.sampled_from(("plan", "verify")))
def test_any_bytes_as_a_file_exit_2(plan_path, content, command):
    plan_path.write_bytes(content)
    result = runner.invoke(app, [command, str(plan_path)], catch_exceptions=False)
    assert_no_traceback(result)
    assert result.exit_code == 2, result.stderr[-2000:]
    assert result.stdout == ""


@settings(max_examples=budget(60), **FUZZ)
@given(plan=plan_dicts(max_devices=6), data=st.data())
def test_nul_or_thirty_kilobytes_in_any_text_is_answered_briefly(plan_path, plan, data):
    # A NUL anywhere in the text is refused naming the key (issue 9); a 30 kB string anywhere
    # gives a message shortened to the documented limits (docs/plan-file.md).
    strings = [path for path, value in key_paths(plan) if isinstance(value, str)]
    path = data.draw(st.sampled_from(strings))
    nul = data.draw(st.booleans())
    original = get_at(plan, path)
    set_at(plan, path, original[:1] + "\x00" + original[1:] if nul else "Q" * 30_000)
    result = run_plan(plan_path, toml_text(plan))
    if nul:
        assert_input_error(result, path_text(path))
        assert "NUL" in result.stderr
    elif result.exit_code == 2:
        assert_input_error(result)
        assert len(squeeze(result.stderr)) < 2_500, result.stderr[:500]
    else:
        assert_plans_or_fails_named_checks(result, words=False)
