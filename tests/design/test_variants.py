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
    # The index prints each section's u(K)/K of its analysis (this recipe: the all-bound
    # analysis) and states that any two are within 20 %: that holds too, not only for the
    # objective (bias included), which once let u(K)/K double across 30 sections.
    assert {p.analysis for p in six.plans} == {"all-bound"}
    relative = np.array([p.prediction.u_K / p.prediction.K for p in six.plans])
    assert relative.max() <= 1.2 * relative.min() + 1e-15


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


def test_every_section_of_the_default_plan_within_the_difficulty_band(twelve):
    # The band the index states: any two sections' predicted u(K)/K within 20 % of each
    # other, all for the same analysis (so the objectives are one yardstick).
    objectives = np.array(twelve.objectives)
    assert objectives.max() <= 1.2 * objectives.min()
    assert {p.analysis for p in twelve.plans} == {twelve.plans[0].analysis}
    relative = np.array([p.global_fit.u_K / p.global_fit.K for p in twelve.plans])
    assert relative.max() <= 1.2 * relative.min()
    assert [p.design_objective for p in twelve.plans] == list(twelve.objectives)


def test_the_default_plans_check_passes_and_states_the_bound(twelve):
    check = twelve.combined.checks[-1]
    assert check.name == "section-distinctness"
    assert check.status == "pass"
    assert twelve.distinct_sections == 12
    assert "all 12 section(s) have test recipes of their own" in check.detail
    assert f"the shelf allows {twelve.eligible_recipes // 5} distinct set(s) of 5" in check.detail


def test_every_chosen_test_is_counted_eligible(twelve):
    # The bound counts the candidates eligible_tests admits; a test the design chose outside
    # them would make the bound wrong (the rule must stay that of choose_tests).
    from planner.design.candidates import candidate_set
    from planner.design.variants import eligible_tests

    one = twelve.plans[0].inputs
    candidates = candidate_set(one)
    eligible = eligible_tests(one, candidates)
    rows = candidates.volumes_mL[eligible]
    column = {stock: j for j, stock in enumerate(candidates.stock_ids)}
    for plan in twelve.plans:
        for mixture in plan.by_role("test"):
            row = np.zeros(len(column))
            for addition in mixture.additions:
                row[column[addition.stock]] += addition.volume_mL
            assert np.any(np.all(np.abs(rows - row) < 1e-9, axis=1)), mixture


def test_same_seed_same_sections_and_check_other_seed_other_tests():
    inputs = _default_inputs()
    first = design_variants(inputs, 4, np.random.default_rng(7))
    again = design_variants(inputs, 4, np.random.default_rng(7))
    other = design_variants(inputs, 4, np.random.default_rng(8))
    assert [recipe_key(p) for p in first.plans] == [recipe_key(p) for p in again.plans]
    assert first.combined.checks == again.combined.checks
    # Section 1 is the plan itself for every seed; the seed varies the others.
    assert recipe_key(other.plans[0]) == recipe_key(first.plans[0])
    assert [recipe_key(p) for p in other.plans[1:]] != [recipe_key(p) for p in first.plans[1:]]


# A shelf of our own with two transfer pipettes (1 and 2 mL), so every volume is a whole
# number of millilitres and the eligible test mixtures can be listed by hand below.
TINY_SHELF = """\
title = "Tiny shelf (invented)"

[reaction]
temperature_C = 25
ionic_strength_M = 0.5
components = ["Fe3+", "SCN-"]

[[reaction.species]]
name = "FeSCN2+"
formula = { "Fe3+" = 1, "SCN-" = 1 }
K = 98
epsilon = 4700

[instrument]
wavelength_nm = 450
path_length_cm = 1.0
absorbance_window = [0.30, 0.75]
absorbance_sd = 0.003
stray_light = 0.001
cuvette_fill_mL = 3.0

[[stocks]]
id = "iron"
contains_M = { "Fe3+" = 0.5, "H+" = 0.5, "NO3-" = 2.0 }
relative_uncertainty = 0.002

[[stocks]]
id = "iron-dilute"
contains_M = { "Fe3+" = 0.04, "H+" = 0.5, "NO3-" = 0.62 }
relative_uncertainty = 0.003

[[stocks]]
id = "thiocyanate"
contains_M = { "SCN-" = 0.8e-3, "K+" = 0.8e-3, "H+" = 0.5, "NO3-" = 0.5 }
relative_uncertainty = 0.003

[[stocks]]
id = "acid"
contains_M = { "H+" = 0.5, "NO3-" = 0.5 }
diluent = true

[[glassware]]
kind = "transfer-pipette"
volume_mL = 1
count = 4

[[glassware]]
kind = "transfer-pipette"
volume_mL = 2
count = 4

[design]
standards = 1
tests = 2
limiting = "SCN-"
assumption_tolerance = 0.1
vessel = "tube"
total_volume_mL = 10
bound_fraction_range = [0.5, 0.65]
bound_fraction_span = 0.05
"""


def _tiny_eligible_by_hand(margin):
    """The tiny shelf's eligible test recipes, enumerated by brute force.

    Every whole-millilitre recipe of the three reagent stocks in a 10 mL tube (the diluent
    the rest), solved with the 1:1 closed form (the quadratic root of K = x/((M - x)(L - x)))
    and read through Beer-Lambert with stray light, A = log10((1 + s)/(10^-A0 + s)); eligible
    when the bound fraction x/L is inside [0.5, 0.65] and the reading inside
    [0.30 + margin, 0.75 - margin].
    """
    import itertools
    import math

    K, eps, s = 98.0, 4700.0, 0.001
    found = []
    for strong, dilute, scn in itertools.product(range(11), repeat=3):
        if strong + dilute + scn > 10 or scn == 0:
            continue
        M = (0.5 * strong + 0.04 * dilute) / 10
        L = 0.8e-3 * scn / 10
        b = M + L + 1 / K
        x = (b - math.sqrt(b * b - 4 * M * L)) / 2
        reading = math.log10((1 + s) / (10 ** (-eps * x) + s))
        if 0.5 <= x / L <= 0.65 and 0.30 + margin <= reading <= 0.75 - margin:
            found.append(((strong, dilute, scn), x / L))
    return found


def test_a_tiny_shelf_allowing_two_distinct_sets_warns_with_four_sections(tmp_path):
    import itertools

    from planner.design.variants import shared_tests
    from planner.planfile import parse_plan

    # Brute force: the recipes eligible as tests (the same with no margin and with 0.05 on
    # the window, so the planner's 2 u(A) margin cannot change them), every valid set of two
    # tests (bound fractions at least 0.05 apart), and the most sets no two of which share a
    # recipe.
    eligible = _tiny_eligible_by_hand(0.0)
    assert eligible == _tiny_eligible_by_hand(0.05)
    fraction = dict(eligible)
    sets = [
        pair
        for pair in itertools.combinations(sorted(fraction), 2)
        if abs(fraction[pair[0]] - fraction[pair[1]]) >= 0.05
    ]
    most = max(
        n
        for n in range(1, len(sets) + 1)
        for group in itertools.combinations(sets, n)
        if len({r for pair in group for r in pair}) == 2 * n
    )
    assert (len(eligible), most) == (4, 2)

    found = design_variants(parse_plan(TINY_SHELF), 4, np.random.default_rng(1))
    assert found.complete
    assert found.eligible_recipes == len(eligible)
    assert found.allowed_sets == most
    assert found.distinct_sections == 2
    check = found.combined.checks[-1]
    assert check.name == "section-distinctness"
    assert check.status == "warn"
    pairs = shared_tests(found.plans)
    first = pairs[0]
    assert first.first != first.second
    expected = (
        f"the shelf allows {most} distinct set(s) of 2 test(s) (an upper bound: 4 eligible "
        f"test recipes / 2), 4 sections were asked for: sections {first.first} and {first.second} "
        f"share test {first.first_test} recipe"
    )
    assert expected in check.detail
    # Sections 1 and 2 share nothing; the two others reuse single recipes, never a whole set.
    recipes = [set(_test_recipes(p).values()) for p in found.plans]
    assert not recipes[0] & recipes[1]
    assert len({frozenset(r) for r in recipes}) == 4
    assert (1, 2) not in {(p.first, p.second) for p in pairs}
    # Every section's test is one the brute force lists, at the difficulty band.
    listed = {
        frozenset(
            (stock, float(v))
            for stock, v in zip(("iron", "iron-dilute", "thiocyanate"), r, strict=True)
            if v
        )
        for r in fraction
    }
    for r in set().union(*recipes):
        assert frozenset(x for x in r if x[0] != "acid") in listed
    objectives = np.array(found.objectives)
    assert objectives.max() <= 1.2 * objectives.min()

    # The command line: exit 0 (a warning), the warning on the terminal and on the index.
    path = tmp_path / "tiny.toml"
    path.write_text(TINY_SHELF, encoding="utf-8")
    result = CliRunner().invoke(
        app,
        ["variants", str(path), "--sections", "4", "--seed", "1", "--out", str(tmp_path / "v")],
    )
    assert result.exit_code == 0, result.stderr
    said = " ".join(result.stderr.split())
    assert "section-distinctness:" in said
    assert expected in said
    for name in ("index.md", "index.html"):
        index = " ".join((tmp_path / "v" / name).read_text(encoding="utf-8").split())
        assert "the shelf allows 2 distinct set(s) of 2 test(s)" in index
        assert "WARN section" in index


def test_each_benchs_sheet_is_the_one_rendered_for_that_bench_alone(six):
    # The variants folder numbers the benches of a section from two rendered sheets; every
    # bench's files must be exactly what rendering that bench alone gives (the sheets'
    # own functions, one bench each), header and table alike.
    from planner.report.sheets import BenchSlot, bench_sheet_html, bench_sheet_md
    from planner.report.variants_index import variants_files

    plans = six.plans[:2]
    files = variants_files(plans, combined=six.combined, date="2026-12-02", seed=1)
    benches = plans[0].inputs.session.benches_per_section
    assert benches >= 3  # so that some sheets are numbered, not rendered
    for number, plan in enumerate(plans, start=1):
        for bench in range(1, benches + 1):
            slot = BenchSlot(section=number, bench=bench, of_sections=2)
            stem = f"section-{number:02d}/benches/section-{number:02d}-bench-{bench:02d}"
            assert files[stem + ".md"] == bench_sheet_md(plan, date="2026-12-02", slot=slot)
            assert files[stem + ".html"] == bench_sheet_html(plan, date="2026-12-02", slots=[slot])
            assert f"Bench {bench} of {benches}" in files[stem + ".md"]


def test_the_distinct_sections_are_counted_in_words():
    # "sections 1 to 1 have test recipes of their own" was printed for a shelf with one
    # distinct set (an invented nickel shelf, four sections asked for).
    from planner.design.variants import _own_sections

    assert _own_sections(1) == "only section 1 has test recipes of its own"
    assert _own_sections(3) == "sections 1 to 3 have test recipes of their own"


def test_the_combined_prep_sheet_says_what_its_columns_hold(six):
    # The sections' recipes differ, so the combined sheet's per-bench and per-section columns
    # are the largest section's and its session the sum: the sheet says so, instead of
    # "per section = per bench x benches", which its numbers would contradict. A section's
    # own sheet keeps that rule, and its numbers obey it.
    from planner.report.sheets import prep_sheet_md

    assert six.combined is not None
    totals = six.combined.totals
    for stock, session in totals.session.items():
        assert session == pytest.approx(sum(p.totals.session[stock] for p in six.plans))
        assert totals.per_section[stock] == max(p.totals.per_section[stock] for p in six.plans)
    combined = prep_sheet_md(six.combined, date="2026-01-01")
    assert "per bench and per section are the largest of any section" in combined
    assert "Per section = per bench" not in combined
    section = prep_sheet_md(six.plans[0], date="2026-01-01")
    assert "Per section = per bench × benches per section × replicates" in section


def test_variants_hold_the_recipes_within_the_stock_of_the_whole_session():
    # The invented nickel lab (tests/design/test_plan.py) has 2000 mL of ligand for the
    # session. Designed without regard to it, each section's standards took 30 mL of ligand
    # and two sections asked for 3619 mL (stock-inventory failed on the combined sheet); held
    # within the stock for three sections, the standards take 10 mL and still bind 99 %.
    # The shelf allows two sections here; their ligand, by hand: per bench 5 x 10 mL (blank
    # and four standards) + 6 x 0.5 mL (tests) = 53 mL; x 10 benches x 2 sections = 1060 mL;
    # + 15 % = 1219 mL; + 5 mL dead volume x 20 bench containers = 1319 mL, under 2000.
    from planner.planfile import parse_plan
    from tests.design.test_plan import NICKEL_FLASKS

    found = design_variants(parse_plan(NICKEL_FLASKS), 3, np.random.default_rng(7))
    assert len(found.plans) == 2
    inventory = next(c for c in found.combined.checks if c.name == "stock-inventory")
    assert inventory.status == "pass"
    assert found.combined.totals.to_prepare["ligand"] == pytest.approx(1319.0)
    for plan in found.plans:
        standards = plan.by_role("standard")
        assert all(m.volume_of("ligand") == pytest.approx(10.0) for m in standards)
        assert min(m.bound_fraction for m in standards) >= 0.98
        assert any("held within the stock on hand: ligand" in note for note in plan.notes)
