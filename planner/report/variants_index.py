"""Output folder of ``planner variants``: one sub-folder per section plus an index."""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass

from planner.design.logistics import combined_totals, preparations
from planner.report._format import percent, significant
from planner.report.cautions import cautions_for
from planner.report.outdir import plan_files
from planner.report.sheets import _render, prep_sheet_html, prep_sheet_md
from planner.result import Check, Plan

__all__ = ["combined_plan", "variants_files"]


@dataclass(frozen=True, slots=True)
class _SectionRow:
    number: int
    folder: str
    K: str
    u_rel: str
    bias: str


def combined_plan(plans: Sequence[Plan]) -> Plan:
    """A plan standing for every section together, for the combined prep-room sheet.

    Its session counts all sections, its totals are the sections' totals added up, and its
    checks are each section's checks that did not pass, prefixed with the section.
    """
    first = plans[0]
    inputs = dataclasses.replace(
        first.inputs, session=dataclasses.replace(first.inputs.session, sections=len(plans))
    )
    totals = combined_totals([p.totals for p in plans])
    checks = tuple(
        Check(c.name, c.status, f"section {n}: {c.detail}")
        for n, p in enumerate(plans, start=1)
        for c in p.checks
        if c.status != "pass"
    )
    return dataclasses.replace(
        first,
        inputs=inputs,
        totals=totals,
        preparations=preparations(inputs, totals),
        checks=checks,
    )


def _folder(number: int, width: int) -> str:
    return f"section-{number:0{width}d}"


def variants_files(plans: Sequence[Plan], *, date: str, seed: int) -> dict[str, str]:
    """Every file of the variants folder.

    ``section-NN/`` holds each section's plan folder (bench sheets, prep sheet, answer key,
    plan.json, CSV); ``index.md``/``index.html`` list the sections, and
    ``prep-sheet.md``/``.html`` give the stock totals of all sections together.
    """
    width = max(2, len(str(len(plans))))
    files: dict[str, str] = {}
    rows = []
    for number, plan in enumerate(plans, start=1):
        folder = _folder(number, width)
        for name, text in plan_files(
            plan, date=date, section=number, of_sections=len(plans)
        ).items():
            files[f"{folder}/{name}"] = text
        prediction = plan.prediction
        rows.append(
            _SectionRow(
                number=number,
                folder=folder + "/",
                K=significant(prediction.K) if prediction else "-",
                u_rel=percent(plan.design_objective) if plan.design_objective else "-",
                bias=percent(prediction.K_bias_from_assumption, signed=True) if prediction else "-",
            )
        )
    together = combined_plan(plans)
    context = {
        "title": plans[0].inputs.title,
        "date": date,
        "seed": seed,
        "sections": rows,
        "cautions": cautions_for(plans[0].inputs),
    }
    files["index.md"] = _render("variants.md", **context)
    files["index.html"] = _render("variants.html", **context)
    files["prep-sheet.md"] = prep_sheet_md(together, date=date)
    files["prep-sheet.html"] = prep_sheet_html(together, date=date)
    return files
