"""Printed sheets in a real browser (headless Chromium): layout, content and page count.

Chromium is installed by .ci/run (Debian's ``chromium`` package); these tests fail, not skip,
when it is missing, because printing is part of the job.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from planner.cli import app
from planner.pipeline import design_plan, design_variants
from planner.planfile import load_plan
from planner.report.browser import (
    PRINTABLE_WIDTH_PX,
    chromium_path,
    html_to_pdf,
    html_to_png,
    measure_layout,
    pdf_page_count,
)
from planner.report.outdir import plan_files
from planner.report.variants_index import variants_files

ROOT = Path(__file__).resolve().parents[2]
# Few benches (1 section x 4 benches) keep the browser work short.
RECIPE = ROOT / "recipes" / "copper-ligand-excess.toml"


@pytest.fixture(scope="module")
def files():
    assert chromium_path() is not None, "Chromium is required: apt-get install chromium"
    plan = design_plan(load_plan(RECIPE))
    return plan, plan_files(plan, date="2026-12-02", plots=True)


def _plots(contents):
    return {name: data for name, data in contents.items() if name.startswith("plots/")}


def _assert_fits(layout):
    width = layout["width"]
    assert width == PRINTABLE_WIDTH_PX
    for table in layout["tables"]:
        # No table runs past the printable width, and none needs a scroll bar inside.
        assert table["right"] <= width + 0.5
        assert table["scroll"] <= table["client"] + 1
    for image in layout["images"]:
        # Every image loads and stays inside the printable width.
        assert image["loaded"], image["src"]
        assert image["right"] <= width + 0.5, image["src"]


@pytest.mark.parametrize("name", ["bench-sheets.html", "prep-sheet.html", "answer-key.html"])
def test_sheet_fits_printable_width_and_names_every_mixture(files, name):
    plan, contents = files
    layout = measure_layout(contents[name], assets=_plots(contents))
    _assert_fits(layout)
    text = layout["text"]
    if name != "prep-sheet.html":
        for mixture in plan.mixtures:
            assert mixture.id in text
    assert "safety data sheets" in text


def test_bench_sheets_pdf_has_one_page_per_bench(files, tmp_path):
    plan, contents = files
    html = tmp_path / "bench-sheets.html"
    html.write_text(contents["bench-sheets.html"])
    pdf = tmp_path / "bench-sheets.pdf"
    html_to_pdf(html, pdf)
    benches = plan.inputs.session.sections * plan.inputs.session.benches_per_section
    assert pdf_page_count(pdf.read_bytes()) == benches
    png = tmp_path / "bench-sheets.png"
    html_to_png(html, png)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_answer_key_shows_every_plot_inside_the_printable_width(files):
    _, contents = files
    svgs = sorted(name for name in contents if name.startswith("plots/") and name.endswith("svg"))
    assert svgs == ["plots/bound-fraction.svg", "plots/coverage.svg", "plots/ladder.svg"]
    layout = measure_layout(contents["answer-key.html"], assets=_plots(contents))
    _assert_fits(layout)
    assert sorted(image["src"] for image in layout["images"]) == svgs
    for image in layout["images"]:
        # Shown at the SVG's own size (6.6 in = 634 px), so its text prints at 9-11 pt.
        assert image["width"] == pytest.approx(6.6 * 96, abs=1)


@pytest.mark.parametrize("name", ["prep-sheet.html", "answer-key.html"])
def test_other_sheets_print_to_pdf(files, tmp_path, name):
    _, contents = files
    for plot, data in _plots(contents).items():
        (tmp_path / plot).parent.mkdir(exist_ok=True)
        (tmp_path / plot).write_bytes(data)
    html = tmp_path / name
    html.write_text(contents[name])
    pdf = tmp_path / "out.pdf"
    html_to_pdf(html, pdf)
    assert pdf_page_count(pdf.read_bytes()) >= 1


def test_variants_index_fits():
    inputs = load_plan(RECIPE)
    found = design_variants(inputs, 2, np.random.default_rng(5))
    contents = variants_files(found.plans, date="2026-12-02", seed=5)
    layout = measure_layout(contents["index.html"])
    _assert_fits(layout)
    assert "section-02/" in layout["text"]


def test_plan_pdf_option_writes_pdfs(tmp_path):
    out = tmp_path / "sheets"
    result = CliRunner().invoke(
        app, ["plan", str(RECIPE), "--out", str(out), "--pdf", "--date", "2026-12-02"]
    )
    assert result.exit_code == 0, result.stderr
    for name in ("bench-sheets.pdf", "prep-sheet.pdf", "answer-key.pdf"):
        assert (out / name).read_bytes().startswith(b"%PDF")


def test_plan_pdf_without_out_is_refused():
    result = CliRunner().invoke(app, ["plan", str(RECIPE), "--pdf"])
    assert result.exit_code == 2
    assert "--out" in result.stderr


def test_long_bench_sheet_still_one_page_per_bench(tmp_path):
    # The flask recipe has the tallest rows (several devices per addition): each bench's
    # table, order of addition and cautions must still share one printed page.
    plan = design_plan(load_plan(ROOT / "recipes" / "iron-thiocyanate-flasks.toml"))
    contents = plan_files(plan, date="2026-12-02")
    html = tmp_path / "bench-sheets.html"
    html.write_text(contents["bench-sheets.html"])
    pdf = tmp_path / "bench-sheets.pdf"
    html_to_pdf(html, pdf)
    session = plan.inputs.session
    assert pdf_page_count(pdf.read_bytes()) == session.sections * session.benches_per_section
