"""The answer key's 95 % ranges: what a class will likely report, for both analyses."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest

from planner.report.sheets import answer_key_html, answer_key_md
from tests.plans import plan_of
from tests.predict.conftest import TUBES

DATE = "2026-01-05"
ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def plan():
    return plan_of(TUBES)


@pytest.fixture(scope="module")
def global_fit_plan():
    # The recipe where Fe(SCN)2+ dominates: designed for the global fit.
    return plan_of(ROOT / "recipes" / "iron-thiocyanate-ligand-excess.toml")


def _rows(text: str) -> list[str]:
    """The Markdown rows of the ranges table."""
    section = text.split("## Ranges a class will likely report (95 %)")[1].split(
        "\n## ", maxsplit=1
    )[0]
    return [line for line in section.splitlines() if line.startswith("| ") and "---" not in line]


def test_ranges_follow_both_predictions(plan):
    p = plan.prediction
    fit = plan.global_fit
    assert p is not None
    assert fit is not None
    text = answer_key_md(plan, date=DATE)
    # Expected value -/+ 1.96 u (JCGM 100:2008, 6.3 and Table G.1), written out here, printed to
    # four significant figures.
    low, high = p.K - 1.96 * p.u_K, p.K + 1.96 * p.u_K
    rows = _rows(text)
    assert f"| K, mean of the tests, all-bound analysis (L/mol) | {low:.4g} | {high:.4g} |" in rows
    low, high = fit.K - 1.96 * fit.u_K, fit.K + 1.96 * fit.u_K
    assert f"| K, global fit (L/mol) | {low:.4g} | {high:.4g} |" in rows
    # The plan is designed for the all-bound analysis, so its rows come first.
    assert rows[1].startswith("| Molar absorptivity, all-bound analysis")
    for mixture in plan.mixtures:
        if mixture.role == "blank":
            continue
        low = mixture.absorbance - 1.96 * mixture.u_absorbance
        high = mixture.absorbance + 1.96 * mixture.u_absorbance
        assert f"| Reading of {mixture.id} | {low:.3f} | {high:.3f} |" in rows
    html = answer_key_html(plan, date=DATE)
    assert "Ranges a class will likely report (95 %)" in html
    assert '<table class="ranges">' in html


def test_a_global_fit_plan_leads_with_the_global_fit_and_withholds_the_all_bound_numbers(
    global_fit_plan,
):
    assert global_fit_plan.analysis == "global-fit"
    assert global_fit_plan.prediction is None
    fit = global_fit_plan.global_fit
    text = answer_key_md(global_fit_plan, date=DATE)
    assert "This plan is designed for the global fit" in text
    assert text.index("## Expected result of the global fit") < text.index(
        "## The all-bound analysis"
    )
    assert "all-bound analysis (L/mol)" not in text
    rows = _rows(text)
    low, high = fit.K - 1.96 * fit.u_K, fit.K + 1.96 * fit.u_K
    assert rows[2] == f"| K, global fit (L/mol) | {low:.4g} | {high:.4g} |"
    # No negative number anywhere in the ranges (rule: never a meaningless number).
    for row in rows[1:]:
        cells = [c.strip() for c in row.strip("|").split("|")]
        assert all(not cell.startswith("-") for cell in cells[1:]), row


def test_no_ranges_without_predictions(plan):
    bare = dataclasses.replace(plan, prediction=None, global_fit=None)
    text = answer_key_md(bare, date=DATE)
    assert "Ranges a class will likely report" not in text
