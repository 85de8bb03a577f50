"""The public API of DESIGN section 2, used the way the package docstring shows."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np

import planner

ROOT = Path(__file__).resolve().parents[1]


def test_public_api_end_to_end(tmp_path):
    inputs = planner.load_plan(ROOT / "recipes" / "micro-piston.toml")
    plan = planner.design_plan(inputs)
    checks = planner.verify_plan(inputs, plan.mixtures, plan.totals)
    assert not [c for c in checks if c.status == "fail"]
    result = planner.simulate(inputs, plan.mixtures, trials=2000, rng=np.random.default_rng(3))
    assert result is not None
    planner.write_reports(plan, tmp_path / "sheets", date="2026-12-02")
    saved = json.loads((tmp_path / "sheets" / "plan.json").read_text())
    assert saved["schema"] == "planner.plan/2"
    assert sorted(planner.__all__) == sorted(
        ["load_plan", "design_plan", "verify_plan", "simulate", "write_reports"]
    )


def test_import_planner_stays_light():
    # The command line imports the package first; numpy, scipy, pydantic, sympy and
    # matplotlib must not come with it.
    code = (
        "import sys, planner.cli; "
        "print(sorted(m for m in ('numpy', 'scipy', 'pydantic', 'sympy', 'matplotlib') "
        "if m in sys.modules))"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert done.stdout.strip() == "[]"
