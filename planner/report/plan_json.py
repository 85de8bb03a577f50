"""The plan result as a JSON document, schema ``planner.plan/2`` (DESIGN.md section 5).

The document is the model :class:`planner.resultfile.schema.PlanDocument`, the one
``planner verify`` reads back: this module fills it from a finished plan and dumps it.
Numbers keep full float precision; :func:`plan_json` serialises with sorted keys through
:func:`planner.report.jsonout.dumps`. Besides the keys of the contract, the document carries
``preparation`` (how the prep room makes each stock) and ``notes``.
"""

from __future__ import annotations

from typing import Any

from planner.planfile import plan_to_mapping
from planner.report._format import checks_worst_first
from planner.report.jsonout import dumps
from planner.result import Check, Plan
from planner.resultfile.schema import (
    SCHEMA,
    CheckEntry,
    GlobalFitEntry,
    MixtureEntry,
    PlanDocument,
    PredictionEntry,
    PreparationEntry,
    TotalsEntry,
)

__all__ = ["SCHEMA", "checks_worst_first", "plan_document", "plan_json"]


def check_entries(checks: tuple[Check, ...]) -> list[dict[str, Any]]:
    """The checks as the documents list them, ``{name, status, detail}``, worst first."""
    return [CheckEntry.of(check).model_dump() for check in checks_worst_first(checks)]


def plan_document(plan: Plan) -> dict[str, Any]:
    """The plan result as JSON-able data, exactly the keys of DESIGN.md section 5.

    Parameters
    ----------
    plan
        The plan to write, as the pipeline finished it.

    Returns
    -------
    dict
        Keys ``schema``, ``title``, ``inputs`` (the validated plan file, as
        :func:`planner.planfile.plan_to_mapping` writes it), ``mixtures``, ``totals_mL``,
        ``checks`` (failed first, then warnings, then passes), ``prediction`` (the all-bound
        analysis's, or ``None``), ``analysis`` (which one the plan is designed for),
        ``global_fit_prediction`` (or ``None``),
        ``preparation`` and ``notes``. Floats are not rounded.
    """
    document = PlanDocument.model_validate(
        {
            "schema": SCHEMA,
            "title": plan.inputs.title,
            "inputs": plan_to_mapping(plan.inputs),
            "mixtures": [MixtureEntry.of(m) for m in plan.mixtures],
            "totals_mL": TotalsEntry.of(plan.totals),
            "checks": [CheckEntry.of(c) for c in checks_worst_first(plan.checks)],
            "prediction": None if plan.prediction is None else PredictionEntry.of(plan.prediction),
            "analysis": plan.analysis,
            "global_fit_prediction": (
                None if plan.global_fit is None else GlobalFitEntry.of(plan.global_fit)
            ),
            "preparation": [PreparationEntry.of(p) for p in plan.preparations],
            "notes": list(plan.notes),
        }
    )
    return document.model_dump(by_alias=True)


def plan_json(plan: Plan) -> str:
    """:func:`plan_document` as one JSON text: sorted keys, full precision, final newline."""
    return dumps(plan_document(plan))
