"""Tests of planner.report.terminal: the 80-column summary."""

from __future__ import annotations

import dataclasses
import io
import subprocess
import sys
from pathlib import Path

from rich.console import Console

from planner.report.terminal import render_plan
from planner.result import Check
from tests.report.conftest import make_inputs, make_plan

ROOT = Path(__file__).resolve().parents[2]


def _text(plan, width=80):
    console = Console(width=width, record=True, file=io.StringIO(), color_system=None)
    console.print(render_plan(plan))
    return console.export_text(styles=False)


def test_fits_in_80_columns(plan):
    text = _text(plan)
    assert text.strip()
    assert max(len(line) for line in text.splitlines()) <= 80


def test_long_texts_still_fit_in_80_columns(plan):
    long_plan = dataclasses.replace(
        make_plan(make_inputs(title="A very long invented title " * 6)),
        checks=(Check("ionic-strength-and-a-long-name", "fail", "word " * 60),),
        notes=("note " * 40,),
    )
    text = _text(long_plan)
    assert max(len(line) for line in text.splitlines()) <= 80
    assert "FAIL" in text


def test_statuses_spelled_out_failures_first(plan):
    text = _text(plan)
    assert text.index("FAIL") < text.index("WARN") < text.index("PASS")
    assert "PLAN HAS FAILED CHECKS" in text


def test_mixtures_volumes_devices_and_readings(plan):
    text = _text(plan)
    for mixture_id in ("B1", "S1", "S2", "T1", "T2"):
        assert mixture_id in text
    # S2's thiocyanate: 4.00 mL from two 2 mL transfer pipettes; S1's from a graduated
    # pipette read to 0.1 mL, so 4.123456789012 shows as 4.1. Each device is named by its id,
    # as in the plan file, the JSON and the sheets (no short codes, no legend).
    lines = [" ".join(line.split()) for line in text.splitlines()]
    assert "thiocyanate 4.00 2 × transfer-pipette-2mL" in lines
    assert "thiocyanate 4.1 graduated-pipette-10mL" in lines
    assert "S2 standard diluent 1.00 buret-25mL 0.346 0.909" in lines
    assert "Devices:" not in text
    assert "P2" not in text.replace("pipette-2", "")
    assert "0.357" in text
    assert "0.909" in text


def test_totals_and_prediction(plan):
    text = _text(plan)
    assert "to prepare" in text
    assert "SHORT" in text  # thiocyanate: 100 mL available, about 127.5 mL to prepare
    assert "K = 112.3 ± 7.2 L/mol" in text
    assert "+12.3 %" in text


def test_without_prediction(plan):
    text = _text(dataclasses.replace(plan, prediction=None))
    assert "Prediction: none" in text


def test_the_text_summary_does_not_load_the_plan_json_models():
    # The plan.json document's pydantic models (planner.resultfile) cost about 0.03 s to
    # build; `planner plan` printing text has no use for them (docs/performance.md).
    code = (
        "import sys\n"
        "from planner.cli import main\n"
        "sys.argv = ['planner', 'plan']\n"
        "try:\n"
        "    main()\n"
        "except SystemExit:\n"
        "    pass\n"
        "loaded = ('planner.resultfile', 'planner.report.plan_json')\n"
        "sys.stderr.write(repr(sorted(name for name in loaded if name in sys.modules)))\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT
    )
    assert done.stdout.strip()  # the summary was printed
    assert done.stderr.strip().endswith("[]")
