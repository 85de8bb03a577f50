"""Tests of planner.report.plots: valid files, same bytes every run, labels, plotted data.

The plotted data are read back from the figure objects (each series carries a ``gid``) and
compared with the plan they were drawn from, or with formulas typed here.
"""

from __future__ import annotations

import dataclasses
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from planner.cli import app
from planner.predict.montecarlo import simulate
from planner.report.outdir import plan_files
from planner.report.plots import (
    PLAN_PLOTS,
    available_plan_plots,
    bound_fraction_figure,
    coverage_figure,
    histogram_figure,
    ladder_figure,
    plan_plots,
    simulation_plots,
)
from tests.conftest import DEFAULT_OUT_DATE
from tests.plans import plan_of
from tests.report.conftest import make_inputs, make_plan
from tests.report.test_svg_kit import assert_coordinates_finite

ROOT = Path(__file__).resolve().parents[2]
DATE = "2026-12-02"
SVG = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def default_plan():
    return plan_of(ROOT / "planner" / "data" / "default.toml")


@pytest.fixture(scope="module")
def drawn():
    """The invented plan's figures, drawn once for the tests that only read the files."""
    return plan_plots(make_plan())


@pytest.fixture(scope="module")
def simulation(default_plan):
    return simulate(
        default_plan.inputs, default_plan.mixtures, trials=400, rng=np.random.default_rng(2)
    )


def _series(figure, gid):
    """The one mark of a series, found by its gid."""
    return figure.one(gid)


def _svg_texts(svg: bytes) -> list[str]:
    root = ET.fromstring(svg)
    assert root.tag == SVG + "svg"
    return ["".join(node.itertext()) for node in root.iter(SVG + "text")]


def _notes(figure) -> set[str]:
    return {note.text for note in figure.notes}


# ---------------------------------------------------------------------------------------------
# Files
# ---------------------------------------------------------------------------------------------


def test_plan_plots_are_valid_svg(drawn):
    files = drawn
    assert sorted(files) == sorted(f"plots/{stem}.svg" for stem in PLAN_PLOTS)
    for data in files.values():
        assert _svg_texts(data)  # parses as SVG 1.1 and has text
        root = ET.fromstring(data)
        assert root.get("version") == "1.1"
        # Printed at its natural size inside the A4 printable width (703 px = 527 pt).
        width = root.get("width")
        assert width is not None
        assert width.endswith("pt")
        assert float(width[:-2]) <= 527
        # The viewBox is the page in points, so user units are points.
        assert root.get("viewBox") == f"0 0 {width[:-2]} {root.get('height')[:-2]}"
        # No coordinate is lost to a number a renderer cannot read.
        assert_coordinates_finite(root)


def test_plan_plots_are_byte_identical_on_two_runs(plan, drawn):
    # drawn is the first run (the same invented plan), this the second.
    assert plan_plots(plan) == drawn


def test_files_carry_no_date_or_version(drawn):
    for name, data in drawn.items():
        assert b"<dc:date>" not in data, name
        assert b"2026" not in data, name  # the plan's date is on the sheets, not the figures
        assert b"matplotlib" not in data.lower(), name


def test_simulation_plots_valid_identical_and_labelled(simulation):
    files = simulation_plots(simulation)
    assert sorted(files) == ["K-histogram.svg", "epsilon-histogram.svg"]
    assert files == simulation_plots(simulation)
    assert "K [L/mol]" in _svg_texts(files["K-histogram.svg"])
    assert "ε [L mol⁻¹ cm⁻¹]" in _svg_texts(files["epsilon-histogram.svg"])
    assert "benches per bin [count]" in _svg_texts(files["epsilon-histogram.svg"])


def test_histogram_bars_count_the_benches(simulation):
    # numpy.histogram is the independent count: every finite K of the class in some bar.
    figure = histogram_figure(simulation, "K")
    bars = _series(figure, "all_bound")
    counts = bars.y1
    finite = simulation.K_all_bound[np.isfinite(simulation.K_all_bound)]
    expected, _ = np.histogram(finite, bins=np.append(bars.x0, bars.x1[-1]))
    np.testing.assert_array_equal(counts, expected)
    # The bins span the middle 99.9 % of both analyses, so at most a few far outliers fall
    # outside them (400 benches here).
    assert counts.sum() >= 0.99 * finite.size


# ---------------------------------------------------------------------------------------------
# Labels and plotted data
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("stem", "labels"),
    [
        (
            "ladder",
            [
                "FeSCN2+ concentration at equilibrium [mol/L]",
                "predicted reading A [unitless]",
                "Beer-Lambert absorbance (no stray light) [unitless]",
            ],
        ),
        (
            "bound-fraction",
            ["Fe3+ total (reagent in excess) [mol/L]", "bound fraction of SCN- [unitless]"],
        ),
        ("coverage", ["bound fraction of SCN- [unitless]", "test mixture"]),
    ],
)
def test_svg_has_axis_labels_as_text(drawn, stem, labels):
    texts = _svg_texts(drawn[f"plots/{stem}.svg"])
    for label in labels:
        assert label in texts


def test_ladder_points_are_the_plans_standards(plan):
    figure = ladder_figure(plan)
    standards = _series(figure, "standards")
    # conftest: S1 and S2 have FeSCN2+ 7.5e-5 and 7.27e-5 mol/L and read 0.357 and 0.346.
    assert list(standards.x) == [7.5e-5, 7.27e-5]
    assert list(standards.y) == [0.357, 0.346]
    assert list(standards.x) == [m.equilibrium_M["FeSCN2+"] for m in plan.by_role("standard")]
    blank = _series(figure, "blank")
    assert list(blank.x) == [0.0]
    assert list(blank.y) == [0.012]
    assert {"S1", "S2", "B1"} <= _notes(figure)


def test_ladder_curves_follow_the_stray_light_formula(plan):
    figure = ladder_figure(plan)
    beer_lambert = _series(figure, "beer-lambert").y
    reading = _series(figure, "stray-light").y
    s = 0.001  # conftest: stray_light
    # A_obs = log10((1 + s) / (10^-A + s)) (DESIGN.md section 3).
    np.testing.assert_allclose(reading, np.log10((1 + s) / (10.0**-beer_lambert + s)), rtol=1e-12)
    # The Beer-Lambert line is straight with slope b eps = 1 cm x 4600 L/(mol cm).
    x = _series(figure, "beer-lambert").x
    np.testing.assert_allclose(np.diff(beer_lambert) / np.diff(x), 4600.0, rtol=1e-9)
    # The window is the shaded band 0.1-0.9, across the readings' axis.
    band = _series(figure, "window")
    assert (band.axis, band.low, band.high) == ("y", pytest.approx(0.1), pytest.approx(0.9))
    # The top axis is the Beer-Lambert absorbance: the blank's 0.012 read through the stray
    # light, plus b eps c.
    assert figure.top.slope == pytest.approx(4600.0)
    assert figure.top.intercept == pytest.approx(-np.log10((1 + s) * 10.0**-0.012 - s))


def _one_to_one_plan():
    inputs = make_inputs()
    reaction = dataclasses.replace(inputs.reaction, species=inputs.reaction.species[:1])
    return make_plan(dataclasses.replace(inputs, reaction=reaction))


def test_bound_fraction_sweep_matches_the_one_to_one_quadratic():
    plan = _one_to_one_plan()
    figure = bound_fraction_figure(plan)
    sweep = _series(figure, "sweep")
    excess_M = sweep.x
    bound = sweep.y
    K = 100.0  # conftest: log_beta 2.0
    limiting_M = 2e-4 * 4.123456789012  # conftest: the larger standard's SCN- total (S1)
    # [ML] is the smaller root of [ML]^2 - (M + L + 1/K)[ML] + M L = 0 (mass balances of
    # M + L = ML), written as 2ML / (s + sqrt(s^2 - 4ML)) to avoid cancellation.
    s = excess_M + limiting_M + 1.0 / K
    complex_M = 2 * excess_M * limiting_M / (s + np.sqrt(s**2 - 4 * excess_M * limiting_M))
    np.testing.assert_allclose(bound, complex_M / limiting_M, rtol=1e-8, atol=1e-12)
    assert np.all(np.diff(excess_M) > 0)
    # Log axis in mol/L.
    assert figure.x.log


def test_bound_fraction_marks_tolerance_needed_excess_and_standards():
    plan = _one_to_one_plan()
    figure = bound_fraction_figure(plan)
    tolerance = _series(figure, "tolerance")
    assert (tolerance.axis, tolerance.value) == ("y", pytest.approx(0.98))
    # DESIGN.md section 3: [M]total = (1 - tol)[L]total + (1 - tol)/(K tol).
    tol, K, limiting_M = 0.02, 100.0, 2e-4 * 4.123456789012
    needed_M = (1 - tol) * limiting_M + (1 - tol) / (K * tol)
    assert _series(figure, "needed").value == pytest.approx(needed_M, rel=2e-3)
    standards = _series(figure, "standards")
    # conftest: both standards hold 5 mL of 0.2 mol/L iron in 10 mL, bound fraction 0.909.
    assert list(standards.x) == pytest.approx([0.1, 0.1])
    assert list(standards.y) == [0.909, 0.909]
    assert "S1, S2" in _notes(figure)
    # The strongest excess stock (iron, 0.2 mol/L) bounds the hatched region.
    beyond = _series(figure, "beyond-stock")
    assert beyond.hatch
    assert (beyond.axis, beyond.low) == ("x", pytest.approx(0.2))


def test_bound_fraction_shows_the_coloured_share_when_another_product_holds_some():
    # With iron in excess (the fixture), Fe(SCN)2+ holds almost no thiocyanate: no extra
    # curve. With thiocyanate in excess (the recipe), it holds much of the iron.
    figure = bound_fraction_figure(make_plan())
    assert not figure.find("coloured-only")
    recipe = plan_of(ROOT / "recipes" / "iron-thiocyanate-ligand-excess.toml")
    figure = bound_fraction_figure(recipe)
    coloured = _series(figure, "coloured-only").y
    bound = _series(figure, "sweep").y
    assert np.all(coloured <= bound + 1e-12)
    assert float(np.max(bound - coloured)) > 0.1


def test_coverage_points_are_the_plans_tests(plan):
    figure = coverage_figure(plan)
    tests = _series(figure, "tests")
    # conftest: T1 and T2 are bound 0.45 and 0.425.
    assert list(tests.x) == [0.45, 0.425]
    rows = dict(zip(figure.y.ticks, figure.y.tick_labels, strict=True))
    assert [rows[y] for y in tests.y] == ["T1", "T2"]
    band = _series(figure, "informative")
    assert (band.low, band.high) == pytest.approx((0.2, 0.8))
    edges = [rule.value for rule in figure.find("design-range")]
    assert edges == pytest.approx([0.15, 0.85])


def test_histograms_mark_the_true_values(simulation):
    k_figure = histogram_figure(simulation, "K")
    assert _series(k_figure, "true").value == simulation.K_true
    epsilon_figure = histogram_figure(simulation, "epsilon")
    assert _series(epsilon_figure, "true").value == simulation.epsilon_true
    assert simulation.epsilon_true == pytest.approx(4700.0)  # default.toml: epsilon = 4700


def test_a_figure_writes_the_same_bytes_twice(plan):
    figure = coverage_figure(plan)
    assert figure.svg() == figure.svg()


# ---------------------------------------------------------------------------------------------
# Which plots apply, and the answer key
# ---------------------------------------------------------------------------------------------


def test_plots_that_do_not_apply_are_left_out(plan):
    no_tests = dataclasses.replace(
        plan, mixtures=tuple(m for m in plan.mixtures if m.role != "test")
    )
    assert available_plan_plots(no_tests) == ("ladder", "bound-fraction")
    with pytest.raises(ValueError, match="coverage"):
        coverage_figure(no_tests)
    no_standards = dataclasses.replace(
        plan, mixtures=tuple(m for m in plan.mixtures if m.role != "standard")
    )
    assert available_plan_plots(no_standards) == ("coverage",)
    with pytest.raises(ValueError, match="ladder"):
        ladder_figure(no_standards)
    files = plan_files(no_tests, date=DATE, plots=True)
    assert "plots/coverage.svg" not in files
    assert "plots/coverage.svg" not in files["answer-key.html"]


_IMG = re.compile(r'<img src="([^"]+)"')
_MD_IMAGE = re.compile(r"!\[[^\]]*\]\(([^)]+)\)")


@pytest.mark.parametrize("drop", [(), ("test",)])
def test_answer_key_references_each_plot_in_the_folder(plan, drop):
    plan = dataclasses.replace(plan, mixtures=tuple(m for m in plan.mixtures if m.role not in drop))
    files = plan_files(plan, date=DATE, plots=True)
    svgs = sorted(name for name in files if name.startswith("plots/"))
    assert svgs
    assert all(name.endswith(".svg") for name in svgs)
    assert sorted(_IMG.findall(files["answer-key.html"])) == svgs
    assert sorted(_MD_IMAGE.findall(files["answer-key.md"])) == svgs
    # Sized to the printable width.
    assert ".plot img { display: block; max-width: 100%;" in files["answer-key.html"]


def test_without_plots_the_answer_key_has_no_images(plan):
    files = plan_files(plan, date=DATE)
    assert not [name for name in files if name.startswith("plots/")]
    assert "<img" not in files["answer-key.html"]
    assert "](plots/" not in files["answer-key.md"]


# ---------------------------------------------------------------------------------------------
# Command line
# ---------------------------------------------------------------------------------------------


def test_plan_out_writes_the_plots(tmp_path, default_out):
    # Two runs: the session's `plan --out` folder of the default plan and one more, here.
    first, second = default_out, tmp_path / "b"
    result = CliRunner().invoke(app, ["plan", "--out", str(second), "--date", DATE, "-q"])
    assert result.exit_code == 0, result.stderr
    names = sorted(p.name for p in (first / "plots").iterdir())
    assert names == sorted(f"{stem}.svg" for stem in PLAN_PLOTS)
    for path in (first / "plots").iterdir():
        assert (second / "plots" / path.name).read_bytes() == path.read_bytes(), path.name
    html = (first / "answer-key.html").read_text()
    for stem in PLAN_PLOTS:
        assert f'src="plots/{stem}.svg"' in html


def test_no_plots_writes_the_same_sheets_without_figures(tmp_path, default_out):
    # --no-plots: no plots/ folder, the answer key shows no figure and points to none, and
    # every other file is the one a run with the plots writes but for the answer key.
    out = tmp_path / "sheets"
    result = CliRunner().invoke(
        app, ["plan", "--out", str(out), "--date", DEFAULT_OUT_DATE, "-q", "--no-plots"]
    )
    assert result.exit_code == 0, result.stderr
    assert not (out / "plots").exists()
    for name in ("answer-key.html", "answer-key.md"):
        assert "plots/" not in (out / name).read_text(encoding="utf-8")
    with_plots = {
        p.relative_to(default_out).as_posix()
        for p in default_out.rglob("*")
        if p.is_file() and "plots" not in p.parts
    }
    without = {p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file()}
    assert without == with_plots
    for name in without - {"answer-key.html", "answer-key.md", ".planner-output"}:
        assert (out / name).read_bytes() == (default_out / name).read_bytes(), name


def test_plan_without_out_imports_no_heavy_library():
    # No plotting library at all (the figures are SVG written by the planner), and none of
    # the libraries `planner plan` has no use for without --out: scipy, sympy, jinja2, and
    # periodictable with its formula grammar pyparsing (the planner reads formulas and
    # weighs them with its own table of atomic weights; the tests hold both to periodictable),
    # nor numpy's masked arrays (numpy.unique imports them on first use, 15-20 ms; the
    # design's planner.design._arrays does without).
    code = (
        "import sys\n"
        "from planner.cli import main\n"
        "sys.argv = ['planner', 'plan', '--quiet']\n"
        "try:\n"
        "    main()\n"
        "except SystemExit:\n"
        "    pass\n"
        "heavy = ('matplotlib', 'scipy', 'sympy', 'jinja2', 'pyparsing', 'periodictable',\n"
        "         'numpy.ma')\n"
        "print(sorted(name for name in heavy if name in sys.modules))\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT
    )
    assert done.stdout.strip() == "[]"


def test_tick_labels_use_powers_of_ten_without_mathtext(drawn):
    texts = _svg_texts(drawn["plots/bound-fraction.svg"])
    assert any(re.fullmatch(r"10⁻[¹²³⁴⁵⁶⁷⁸⁹]", t) for t in texts)
    assert not any("$" in t for t in texts)


def test_plan_out_leaves_a_fresh_home_untouched(tmp_path):
    # The planner writes only where it is told: no configuration or cache folder appears in
    # a home that had none.
    home = tmp_path / "home"
    (home / "tmp").mkdir(parents=True)
    environment = {
        "PATH": "/usr/bin:/bin",
        "PYTHONPATH": str(ROOT),
        "PYTHONDONTWRITEBYTECODE": "1",
        "HOME": str(home),
        "TMPDIR": str(home / "tmp"),
    }
    done = subprocess.run(
        [sys.executable, "-m", "planner", "plan", "--out", str(tmp_path / "out"), "-q"],
        env=environment,
        capture_output=True,
        text=True,
        check=False,
        cwd=tmp_path,
    )
    assert done.returncode == 0, done.stderr
    assert (tmp_path / "out" / "plots" / "ladder.svg").is_file()
    assert sorted(p.relative_to(home).as_posix() for p in home.rglob("*")) == ["tmp"]


def test_bound_fraction_labels_never_print_over_each_other():
    # The research scenario's four standards share one excess (4e-4 mol/L) and bind 0.9207
    # to 0.9227 of the cobalt: one marker on the page, so one label for all four, where
    # labels by exact position printed "S1", "S2, S3" and "S4" over each other.
    plan = plan_of(ROOT / "tests" / "scenarios" / "long-cell-research.toml")
    figure = bound_fraction_figure(plan)
    assert [note.text for note in figure.notes] == ["S1–S4"]
    # And on every plan figure of the default, no two labels share a spot (3 % of the axes).
    for figure in (bound_fraction_figure(plan_of(ROOT / "planner" / "data" / "default.toml")),):
        span = np.log10(figure.x.high / figure.x.low)
        notes = figure.notes
        for i, a in enumerate(notes):
            for b in notes[i + 1 :]:
                apart_x = abs(np.log10(a.x / b.x)) >= 0.03 * span
                apart_y = abs(a.y - b.y) >= 0.03 * (figure.y.high - figure.y.low)
                assert apart_x or apart_y, (a.text, b.text)
