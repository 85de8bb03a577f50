"""The exception hierarchy: messages stay short whatever value they quote, and keep their form.

The limits are the ones docs/plan-file.md ("Error messages") promises: a value quoted in a
message is at most 80 characters, a key of a field path at most 100, and so on.
"""

from __future__ import annotations

import pytest

from planner.errors import (
    KEY_LIMIT,
    TEXT_LIMIT,
    VALUE_LIMIT,
    InvalidInputError,
    PlanFileError,
    PlannerError,
    ResultFileError,
    shown,
    shown_field,
)


def test_the_documented_limits():
    # docs/plan-file.md, "Error messages": 80 characters for a value, 100 for a key.
    assert (VALUE_LIMIT, KEY_LIMIT) == (80, 100)


@pytest.mark.parametrize("value", ["Fe3+", 0.5, -1, None, ["a", 1], "x" * 78])
def test_short_values_are_quoted_whole(value):
    assert shown(value) == repr(value)


@pytest.mark.parametrize("value", ["Q" * 30_000, ["x" * 50, "y" * 50], b"\x00" * 1000])
def test_long_values_are_cut_to_the_limit(value):
    text = shown(value)
    assert len(text) == 80
    assert text.endswith("...")
    assert text[:77] == repr(value)[:77]


def test_a_long_key_is_cut_and_its_length_given():
    field = "stocks[0].contains_M." + "K" * 30_000
    assert shown_field(field) == "stocks[0].contains_M." + "K" * 60 + "...(30000 characters)"
    assert shown_field("stocks[0].contains_M.Fe3+") == "stocks[0].contains_M.Fe3+"


def test_every_message_part_is_shortened():
    # Found by fuzzing: a 30 kB name went whole into the message ("got", field and hint).
    huge = "Q" * 30_000
    error = PlanFileError("not a declared component", field="a." + huge, value=huge, hint=huge)
    message = str(error)
    assert len(message) < 80 + 200 + TEXT_LIMIT
    assert "(got '" + "Q" * 76 + "...)" in message  # the value is still shown, cut
    assert "(30000 characters)" in message  # the key and the hint give their length
    assert error.value == huge  # the attribute keeps the value whole


def test_message_form_is_field_problem_value_fix():
    error = InvalidInputError("must be > 0", field="--k", value=-1.0, hint="give K in L/mol")
    assert str(error) == "--k: must be > 0 (got -1.0). Fix: give K in L/mol"


@pytest.mark.parametrize("cls", [InvalidInputError, PlanFileError, ResultFileError, PlannerError])
def test_renamed_keeps_class_problem_value_and_hint(cls):
    error = cls("must be >= 0", field="excess", value=-0.5, hint="give mol/L")
    renamed = error.renamed("--excess")
    assert type(renamed) is cls
    assert str(renamed) == "--excess: must be >= 0 (got -0.5). Fix: give mol/L"
    no_value = cls("missing", field="x").renamed("--x")
    assert str(no_value) == "--x: missing"
    assert not no_value.has_value
