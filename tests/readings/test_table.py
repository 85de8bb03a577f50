"""Reading a class's readings CSV: every bad row an error naming row and column, or a listed
rejection; no row dropped silently; no traceback from the command."""

from __future__ import annotations

import pytest
from typer.testing import CliRunner

from planner.cli import app
from planner.errors import ReadingsFileError
from planner.readings.table import SectionShape, parse_readings

SHAPES = {1: SectionShape(benches=2, replicates=1, mixtures=("B1", "S1", "S2", "T1", "T2"))}
HEADER = "section,bench,replicate,mixture,absorbance\n"
GOOD = "".join(
    f"1,{bench},1,{m},{value}\n"
    for bench in (1, 2)
    for m, value in zip(("B1", "S1", "S2", "T1", "T2"), (0.001, 0.3, 0.6, 0.5, 0.7), strict=True)
)
RUNNER = CliRunner()


def test_a_good_file_is_read_whole():
    table = parse_readings(HEADER + GOOD, SHAPES)
    assert len(table.readings) == 10
    assert table.rejections == ()
    assert table.readings[0].row == 2  # the header is row 1


@pytest.mark.parametrize(
    ("line", "column", "words"),
    [
        ("1,1,1,T9,0.5", "mixture", "no such mixture"),
        ("1,3,1,T1,0.5", "bench", "has 2 benches"),
        ("2,1,1,T1,0.5", "section", "no such section"),
        ("1,1,2,T1,0.5", "replicate", "set(s) of mixtures per bench"),
        ("1,1,1,T1,abc", "absorbance", "not a number"),
        ("1,1,1,T1,nan", "absorbance", "not a finite number"),
        ("1,1,1,T1,inf", "absorbance", "not a finite number"),
        ("1,1,1,T1,4.5", "absorbance", "outside"),
        ("1,1,1,T1,-0.4", "absorbance", "outside"),
        ("x,1,1,T1,0.5", "section", "not a whole number"),
        ("1,1,1,T1", "", "cells where the header has 5"),
    ],
)
def test_a_bad_row_is_a_listed_rejection_naming_row_and_column(line, column, words):
    table = parse_readings(HEADER + GOOD + line + "\n", SHAPES)
    assert len(table.readings) == 10  # the good rows are all kept
    (rejection,) = table.rejections
    assert rejection.row == 12
    assert rejection.column == column
    assert words in rejection.problem


def test_a_repeated_row_is_rejected_and_a_conflicting_one_rejects_both():
    same = parse_readings(HEADER + GOOD + "1,1,1,T1,0.5\n", SHAPES)
    assert len(same.readings) == 10
    assert [r.row for r in same.rejections] == [12]
    assert "repeats row 5" in same.rejections[0].problem
    different = parse_readings(HEADER + GOOD + "1,1,1,T1,0.55\n", SHAPES)
    assert len(different.readings) == 9  # neither reading of T1 on bench 1 is used
    assert [r.row for r in different.rejections] == [5, 12]


def test_an_empty_cell_is_counted_not_dropped():
    table = parse_readings(HEADER + GOOD.replace("1,1,1,T2,0.7", "1,1,1,T2,"), SHAPES)
    assert len(table.readings) == 9
    assert table.empty == ((6, 1, 1, 1, "T2"),)


@pytest.mark.parametrize(
    ("text", "field"),
    [
        ("section,bench,replicate,mixture\n1,1,1,B1\n", "row 1, column absorbance"),
        ("bench,replicate,mixture,absorbance\n1,1,B1,0.1\n", "row 1, column section"),
        ("", "row 1"),
        (HEADER + '1,1,1,"B1,0.1\n', "row 2"),
        (HEADER + "1,1,1,T9,0.5\n", "row 1, column absorbance"),
        ("section,section,bench,replicate,mixture,absorbance\n", "row 1, column section"),
    ],
)
def test_an_unusable_file_is_an_error_naming_row_and_column(text, field):
    with pytest.raises(ReadingsFileError) as caught:
        parse_readings(text, SHAPES)
    assert str(caught.value).startswith(field)


@pytest.fixture(scope="module")
def plan_folder(tmp_path_factory):
    out = tmp_path_factory.mktemp("table") / "plan"
    args = ["plan", "--out", str(out), "--date", "2026-01-01", "-q", "--no-plots"]
    result = RUNNER.invoke(app, args)
    assert result.exit_code == 0, result.output
    return out


@pytest.mark.parametrize(
    ("content", "words"),
    [
        (b"section,bench,replicate,mixture\n1,1,1,B1\n", "row 1, column absorbance"),
        (b"\xff\xfe\x00s\x00e", "not UTF-8"),
        (b"section,bench,replicate,mixture,absorbance\n1,1,1,B1,\n", "no usable reading"),
        (b"a\x00b\n", "NUL"),
    ],
)
def test_cli_exits_2_with_the_place_named_and_no_traceback(plan_folder, tmp_path, content, words):
    readings = tmp_path / "readings.csv"
    readings.write_bytes(content)
    result = RUNNER.invoke(app, ["analyse", str(readings), "--plan", str(plan_folder)])
    assert result.exit_code == 2
    # The message is wrapped to the terminal's width, after a path whose length varies.
    assert words in " ".join(result.stderr.split())
    assert "Traceback" not in result.stderr + result.stdout


def test_cli_lists_rejections_and_flags_the_bench_that_lost_a_row(plan_folder, tmp_path):
    template = (plan_folder / "readings-template.csv").read_text(encoding="utf-8").splitlines()
    import json

    plan = json.loads((plan_folder / "plan.json").read_text(encoding="utf-8"))
    predicted = {m["id"]: m["absorbance"] for m in plan["mixtures"]}
    lines = [template[0]]
    for line in template[1:]:
        section, bench, replicate, mixture, _ = line.split(",")
        lines.append(f"{section},{bench},{replicate},{mixture},{predicted[mixture]!r}")
    lines[3] = lines[3].rsplit(",", 1)[0] + ",oops"  # row 4: S2 of section 1, bench 1
    readings = tmp_path / "readings.csv"
    readings.write_text("\n".join(lines) + "\n", encoding="utf-8")
    result = RUNNER.invoke(
        app, ["analyse", str(readings), "--plan", str(plan_folder), "--format", "json"]
    )
    assert result.exit_code == 1
    document = json.loads(result.stdout)
    assert [(r["row"], r["column"]) for r in document["rejections"]] == [(4, "absorbance")]
    first = document["benches"][0]
    assert first["status"] == "flagged"
    assert first["flags"][0]["rule"] == "missing-mixture"
    assert first["flags"][0]["mixtures"] == ["S2"]
    assert all(b["status"] == "ok" for b in document["benches"][1:])


@pytest.mark.parametrize(
    ("value", "hint"), [("4.5", "slipped decimal point"), ("-0.4", "zero the photometer")]
)
def test_an_absorbance_out_of_range_gets_the_fix_for_its_side(value, hint):
    table = parse_readings(HEADER + GOOD + f"1,1,1,T1,{value}\n", SHAPES)
    (rejection,) = table.rejections
    assert hint in rejection.hint
    assert rejection.bench_set == (1, 1, 1)  # the set is named even though the row is out


@pytest.mark.parametrize(
    ("header", "words"),
    [
        ("section;bench;replicate;mixture;absorbance", "separated by ';', not commas"),
        ("1,1,1,B1,0.001", "the first row holds readings"),
    ],
)
def test_a_header_the_row_itself_explains_gets_that_fix(header, words):
    with pytest.raises(ReadingsFileError) as info:
        parse_readings(header + "\n" + GOOD, SHAPES, source="week3.csv")
    assert words in info.value.hint
    assert "week3.csv" in str(info.value)


def test_a_mixture_in_the_wrong_case_gets_a_did_you_mean():
    table = parse_readings(HEADER + GOOD + "1,1,1,s2,0.5\n", SHAPES)
    (rejection,) = table.rejections
    assert rejection.hint.startswith("did you mean S2?")
