"""Output folder of ``planner variants``: one sub-folder per section plus an index."""

from __future__ import annotations

from collections.abc import Sequence

from planner.design.variants import DISTINCTNESS_CHECK, shared_tests
from planner.records import record
from planner.report._format import percent, relative_bias, significant
from planner.report.cautions import cautions_for
from planner.report.outdir import plan_files
from planner.report.sheets import _render, prep_sheet_html, prep_sheet_md, readings_template_csv
from planner.result import Plan

__all__ = ["variants_files"]


@record
class _SectionRow:
    number: int
    folder: str
    analysis: str
    K: str
    u_rel: str
    bias: str
    shares: str


def _folder(number: int, width: int) -> str:
    return f"section-{number:0{width}d}"


def variants_files(
    plans: Sequence[Plan], *, combined: Plan, date: str, seed: int
) -> dict[str, str | bytes]:
    """Every file of the variants folder.

    ``section-NN/`` holds each section's plan folder (bench sheets, prep sheet, answer key,
    plan.json, CSV); ``index.md``/``index.html`` list the sections (with the sections each
    shares a test recipe with), the whole session's checks that did not pass and its
    ``section-distinctness`` check (how many distinct test sets the shelf allows), and
    ``prep-sheet.md``/``.html`` give the stock totals of all sections together
    (``combined``, from :func:`planner.pipeline.combined_plan`);
    ``readings-template.csv`` lists every section's benches and mixtures for ``planner
    analyse``.
    """
    width = max(2, len(str(len(plans))))
    partners: dict[int, list[int]] = {n: [] for n in range(1, len(plans) + 1)}
    for pair in shared_tests(plans):
        partners[pair.first].append(pair.second)
        partners[pair.second].append(pair.first)
    files: dict[str, str | bytes] = {}
    rows = []
    for number, plan in enumerate(plans, start=1):
        folder = _folder(number, width)
        for name, text in plan_files(
            plan, date=date, section=number, of_sections=len(plans)
        ).items():
            files[f"{folder}/{name}"] = text
        prediction = plan.prediction
        # The K and u(K)/K of the analysis the section is designed for (its answer key's).
        expected = plan.expected_K
        rows.append(
            _SectionRow(
                number=number,
                folder=folder + "/",
                analysis="global fit" if plan.analysis == "global-fit" else "all-bound",
                K=significant(expected[0]) if expected else "-",
                u_rel=percent(expected[1] / expected[0]) if expected else "-",
                bias=relative_bias(prediction.K_bias_from_assumption) if prediction else "-",
                shares=", ".join(str(n) for n in sorted(partners[number])) or "none",
            )
        )
    together = combined
    context = {
        "failed": tuple(c for c in combined.checks if c.status == "fail"),
        "distinctness": next((c for c in combined.checks if c.name == DISTINCTNESS_CHECK), None),
        "title": plans[0].inputs.title,
        "date": date,
        "seed": seed,
        "sections": rows,
        "K_unit": plans[0].inputs.measured_species.K_unit,
        "cautions": cautions_for(plans[0].inputs),
    }
    files["index.md"] = _render("variants.md", **context)
    files["index.html"] = _render("variants.html", **context)
    files["readings-template.csv"] = readings_template_csv(list(enumerate(plans, start=1)))
    files["prep-sheet.md"] = prep_sheet_md(together, date=date)
    files["prep-sheet.html"] = prep_sheet_html(together, date=date)
    return files
