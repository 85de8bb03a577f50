"""Section variants: distinct, verified, equal difficulty, reproducible from the seed."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from planner.cli import app
from planner.design.variants import recipe_key
from planner.pipeline import design_variants
from planner.planfile import load_plan
from planner.verify import verify_plan

ROOT = Path(__file__).resolve().parents[2]
RECIPE = ROOT / "recipes" / "iron-thiocyanate-flasks.toml"


@pytest.fixture(scope="module")
def six():
    return design_variants(load_plan(RECIPE), 6, np.random.default_rng(1))


def test_six_distinct_verified_sections(six):
    assert six.complete
    keys = [recipe_key(p) for p in six.plans]
    assert len(set(keys)) == 6  # pairwise distinct test sets
    for plan in six.plans:
        # re-verified independently of the design's own checks
        checks = verify_plan(plan.inputs, plan.mixtures, plan.totals)
        assert not [c for c in checks if c.status == "fail"]


def test_equal_difficulty_within_20_percent(six):
    objectives = np.array(six.objectives)
    assert objectives.max() <= 1.2 * objectives.min() + 1e-15


def test_same_seed_same_sets_other_seed_differs():
    inputs = load_plan(RECIPE)
    again = design_variants(inputs, 4, np.random.default_rng(1))
    first = design_variants(inputs, 4, np.random.default_rng(1))
    other = design_variants(inputs, 4, np.random.default_rng(99))
    assert [recipe_key(p) for p in again.plans] == [recipe_key(p) for p in first.plans]
    assert [recipe_key(p) for p in other.plans] != [recipe_key(p) for p in first.plans]


def test_too_few_sets_exits_1_saying_how_many(tmp_path, monkeypatch):
    # With no slack in difficulty only the single best design qualifies, so asking for three
    # sections must report that just one set exists and what would allow more.
    monkeypatch.setattr("planner.design.variants._DIFFICULTY_BAND", 1.0)
    result = CliRunner().invoke(
        app,
        ["variants", str(RECIPE), "--sections", "3", "--seed", "1", "--out", str(tmp_path / "v")],
    )
    assert result.exit_code == 1
    assert "only 1 of 3" in " ".join(result.stderr.split())
    assert "would allow more" in " ".join(result.stderr.split())


def test_cli_variants_twice_byte_identical(tmp_path):
    runner = CliRunner()
    for name in ("a", "b"):
        result = runner.invoke(
            app,
            [
                "variants",
                str(RECIPE),
                "--sections",
                "3",
                "--seed",
                "1",
                "--out",
                str(tmp_path / name),
                "--date",
                "2026-12-02",
            ],
        )
        assert result.exit_code == 0, result.stderr
    files_a = sorted(
        p.relative_to(tmp_path / "a") for p in (tmp_path / "a").rglob("*") if p.is_file()
    )
    files_b = sorted(
        p.relative_to(tmp_path / "b") for p in (tmp_path / "b").rglob("*") if p.is_file()
    )
    assert files_a == files_b
    assert Path("section-03/plan.json") in files_a
    assert Path("index.html") in files_a
    for name in files_a:
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes()
    sheet = (tmp_path / "a" / "section-03" / "benches").glob("*.md")
    assert any("Section 3 of 3" in p.read_text() for p in sheet)


# Issue 9: --sections had no upper bound (a million sections ran for days).


def test_the_command_line_bound_is_the_core_bound():
    from planner import cli
    from planner.design.variants import MAX_SECTIONS

    assert cli._MAX_SECTIONS == MAX_SECTIONS == 100


@pytest.mark.parametrize("sections", [0, -1, 101, 1_000_000])
def test_sections_outside_the_bounds_are_refused(sections):
    from planner.design.variants import MAX_SECTIONS
    from planner.errors import InvalidInputError

    with pytest.raises(InvalidInputError, match=r"^sections: ") as info:
        design_variants(load_plan(RECIPE), sections, np.random.default_rng(1))
    assert f"at most {MAX_SECTIONS}" in str(info.value)


@pytest.mark.parametrize(
    ("args", "option"),
    [
        (["--sections", "1000000", "--seed", "1"], "--sections"),
        (["--sections", "0", "--seed", "1"], "--sections"),
        (["--sections", "2", "--seed", "-1"], "--seed"),  # numpy refused it: exit 3 before
        (["--sections", "2", "--seed", str(2**32)], "--seed"),
    ],
)
def test_cli_bounds_exit_2_naming_the_option(tmp_path, args, option):
    result = CliRunner().invoke(app, ["variants", str(RECIPE), *args, "--out", str(tmp_path / "v")])
    assert result.exit_code == 2
    assert option in result.stderr
    assert "Traceback" not in result.stderr
    assert not (tmp_path / "v").exists()


def test_a_session_short_of_stock_fails_though_each_section_fits(tmp_path):
    # Issue 11: variants exited 0 while its combined prep sheet was short by 3280 mL. Each
    # section's plan checks its own stock need; the session needs the sum.
    from typer.testing import CliRunner

    from planner.cli import app
    from planner.pipeline import design_plan
    from planner.planfile import plan_from_mapping, plan_to_mapping

    mapping = plan_to_mapping(load_plan(RECIPE))
    mapping["session"]["sections"] = 1  # variants plan each section as a session of one
    need = design_plan(plan_from_mapping(mapping)).totals.to_prepare["thiocyanate"]
    stock = next(st for st in mapping["stocks"] if st["id"] == "thiocyanate")
    # Room for one section and a half: every section passes, three together do not.
    stock["available_mL"] = round(1.5 * need)
    from tests.strategies import toml_text

    path = tmp_path / "short.toml"
    path.write_text(toml_text(mapping), encoding="utf-8")
    assert design_plan(plan_from_mapping(mapping)).failed is False
    result = CliRunner().invoke(
        app,
        ["variants", str(path), "--sections", "3", "--seed", "1", "--out", str(tmp_path / "v")],
        catch_exceptions=False,
    )
    assert result.exit_code == 1, result.stderr
    assert "stock-inventory" in result.stderr
    assert "all sections together" in result.stderr
    index = (tmp_path / "v" / "index.md").read_text(encoding="utf-8")
    assert "FAIL stock\\-inventory" in index or "FAIL stock-inventory" in index
    assert "thiocyanate" in index


# Issue 11: the test recipe of T1 was identical in 9 of 12 sections of the default plan.


def _default_inputs():
    from importlib.resources import files

    from planner.planfile import parse_plan

    return parse_plan(files("planner").joinpath("data/default.toml").read_text("utf-8"))


@pytest.fixture(scope="module")
def twelve():
    return design_variants(_default_inputs(), 12, np.random.default_rng(1))


def _test_recipes(plan):
    """Each test's recipe, written out from its additions (stock, volume in mL)."""
    return {
        m.id: frozenset((a.stock, round(a.volume_mL, 9)) for a in m.additions)
        for m in plan.mixtures
        if m.role == "test"
    }


def test_no_test_recipe_is_shared_between_the_default_plans_twelve_sections(twelve):
    assert twelve.complete
    seen: dict[frozenset[tuple[str, float]], tuple[int, str]] = {}
    for number, plan in enumerate(twelve.plans, start=1):
        recipes = _test_recipes(plan)
        assert len(recipes) == plan.inputs.design.tests
        for test_id, recipe in recipes.items():
            assert recipe not in seen, (number, test_id, seen.get(recipe))
            seen[recipe] = (number, test_id)
