"""The planner analyse report in headless Chromium: it fits the printable width, its plots
load, and it names every flagged bench (as tests/report/test_browser.py checks the sheets)."""

from __future__ import annotations

import numpy as np
from typer.testing import CliRunner

from planner.cli import app
from planner.readings.analyse import analyse_class
from planner.readings.files import load_plans, section_shapes
from planner.readings.table import parse_readings
from planner.report.analyse_html import analysis_files
from planner.report.browser import PRINTABLE_WIDTH_PX, chromium_path, measure_layout
from tests.readings.classes import Fault, Section, class_rows, rows_csv


def test_analysis_report_fits_the_printable_width_with_its_plots(tmp_path):
    assert chromium_path() is not None, "Chromium is required: apt-get install chromium"
    folder = tmp_path / "plan"
    args = ["plan", "--out", str(folder), "--date", "2026-01-01", "-q", "--no-plots"]
    made = CliRunner().invoke(app, args)
    assert made.exit_code == 0, made.output
    plans = load_plans(folder)
    synthetic = {n: Section.of(folder / "plan.json") for n in plans}
    faults = [Fault("cuvette", 2, 5, {"path_cm": 1.1})]
    rows = class_rows(synthetic, np.random.default_rng(0), faults=faults)
    result = analyse_class(plans, parse_readings(rows_csv(rows), section_shapes(plans)))
    files = analysis_files(result, readings="readings.csv", plan="plan/")
    plots = {name: data for name, data in files.items() if name.startswith("plots/")}
    layout = measure_layout(files["analysis.html"], assets=plots)
    assert layout["width"] == PRINTABLE_WIDTH_PX
    for table in layout["tables"]:
        assert table["right"] <= PRINTABLE_WIDTH_PX + 0.5
        assert table["scroll"] <= table["client"] + 1
    assert len(layout["images"]) == 2
    for image in layout["images"]:
        assert image["loaded"], image["src"]
        assert image["right"] <= PRINTABLE_WIDTH_PX + 0.5
    assert "readings-scaled" in layout["text"]
    assert "Pooled global fit" in layout["text"]
