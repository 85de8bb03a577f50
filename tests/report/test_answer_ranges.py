"""The answer key's 95 % ranges (issue 4 item 5): what a class will likely report."""

from __future__ import annotations

import dataclasses

import pytest

from planner.pipeline import design_plan
from planner.planfile import load_plan
from planner.report.sheets import answer_key_html, answer_key_md
from tests.predict.conftest import DEFAULT

DATE = "2026-01-05"


@pytest.fixture(scope="module")
def plan():
    return design_plan(load_plan(DEFAULT))


def test_ranges_follow_the_prediction(plan):
    p = plan.prediction
    assert p is not None
    text = answer_key_md(plan, date=DATE)
    assert "## Ranges a class will likely report (95 %)" in text
    # K, mean of the tests: expected value -/+ 1.96 u (JCGM 100:2008, Table G.1), printed to
    # four significant figures.
    low, high = p.K_ci95
    assert f"| K, mean of the tests (L/mol) | {low:.4g} | {high:.4g} |" in text
    for mixture in plan.mixtures:
        low, high = p.absorbance_ci95[mixture.id]
        assert f"| Reading of {mixture.id} | {low:.3f} | {high:.3f} |" in text
    html = answer_key_html(plan, date=DATE)
    assert "Ranges a class will likely report (95 %)" in html
    assert '<table class="ranges">' in html


def test_no_ranges_without_them(plan):
    assert plan.prediction is not None
    bare = dataclasses.replace(plan.prediction, epsilon_ci95=None, K_ci95=None)
    text = answer_key_md(dataclasses.replace(plan, prediction=bare), date=DATE)
    assert "Ranges a class will likely report" not in text
