"""The plan result as a JSON document, schema ``planner.plan/2`` (DESIGN.md section 5).

Numbers keep full float precision; :func:`plan_json` serialises with sorted keys through
:func:`planner.report.jsonout.dumps`. Besides the keys of the contract, the document carries
``preparation`` (how the prep room makes each stock) and ``notes``.
"""

from __future__ import annotations

from typing import Any

from planner.report.jsonout import dumps
from planner.result import CHECK_STATUSES, Addition, Check, Mixture, Plan, Prediction, Totals

__all__ = ["SCHEMA", "checks_worst_first", "plan_document", "plan_json"]

#: Schema name and version of the document.
SCHEMA = "planner.plan/2"


def checks_worst_first(checks: tuple[Check, ...]) -> tuple[Check, ...]:
    """Failed checks first, then warnings, then passes; plan order kept within each status.

    A status outside :data:`planner.result.CHECK_STATUSES` sorts after the known ones.
    """
    rank = {status: i for i, status in enumerate(CHECK_STATUSES)}
    # sorted() is stable, so checks of one status keep the order verification gave them.
    return tuple(sorted(checks, key=lambda c: rank.get(c.status, len(rank))))


def _addition(addition: Addition) -> dict[str, Any]:
    return {
        "stock": addition.stock,
        "volume_mL": addition.volume_mL,
        "devices": list(addition.devices),
        "order": addition.order,
        # Each delivery with its own volume ("2 x 1000 uL, then 650 uL" in the sheets).
        "deliveries": [{"device": d.device, "volume_mL": d.volume_mL} for d in addition.deliveries],
    }


def _mixture(mixture: Mixture) -> dict[str, Any]:
    return {
        "id": mixture.id,
        "role": mixture.role,
        "total_volume_mL": mixture.total_volume_mL,
        "additions": [_addition(a) for a in mixture.additions],
        "initial_M": dict(mixture.initial_M),
        "equilibrium_M": dict(mixture.equilibrium_M),
        "absorbance": mixture.absorbance,
        "u_absorbance": mixture.u_absorbance,
        "bound_fraction": mixture.bound_fraction,
        "ionic_strength_M": mixture.ionic_strength_M,
    }


def _totals(totals: Totals) -> dict[str, Any]:
    return {
        "per_bench": dict(totals.per_bench),
        "per_section": dict(totals.per_section),
        "session": dict(totals.session),
        "to_prepare": dict(totals.to_prepare),
        "dead_volume_mL": totals.dead_volume_mL,
    }


def _prediction(prediction: Prediction | None) -> dict[str, Any] | None:
    if prediction is None:
        return None
    return {
        "epsilon": prediction.epsilon,
        "u_epsilon": prediction.u_epsilon,
        "K": prediction.K,
        "u_K": prediction.u_K,
        "K_bias_from_assumption": prediction.K_bias_from_assumption,
        "K_true": prediction.K_true,
        "epsilon_true": prediction.epsilon_true,
        "K_per_test": list(prediction.K_per_test),
    }


def plan_document(plan: Plan) -> dict[str, Any]:
    """The plan result as JSON-able data, exactly the keys of DESIGN.md section 5.

    Parameters
    ----------
    plan
        A finished plan.

    Returns
    -------
    dict
        Keys ``schema``, ``title``, ``inputs`` (the validated plan file, as
        :func:`planner.planfile.plan_to_mapping` writes it), ``mixtures``, ``totals_mL``,
        ``checks`` (failed first, then warnings, then passes), ``prediction`` (or ``None``),
        ``preparation`` and ``notes``. Floats are not rounded.
    """
    # Imported here: planfile pulls in pydantic, which the rest of this module does not need.
    from planner.planfile import plan_to_mapping

    return {
        "schema": SCHEMA,
        "title": plan.inputs.title,
        "inputs": plan_to_mapping(plan.inputs),
        "mixtures": [_mixture(m) for m in plan.mixtures],
        "totals_mL": _totals(plan.totals),
        "checks": [
            {"name": c.name, "status": c.status, "detail": c.detail}
            for c in checks_worst_first(plan.checks)
        ],
        "prediction": _prediction(plan.prediction),
        "preparation": [
            {
                "stock": p.stock,
                "flask_mL": p.flask_mL,
                "flasks": p.flasks,
                "solid_formula": p.solid_formula,
                "molar_mass_g_per_mol": p.molar_mass_g_per_mol,
                "purity": p.purity,
                "mass_g": p.mass_g,
                "provides": p.provides,
                "concentration_M": p.concentration_M,
                "medium": p.medium,
            }
            for p in plan.preparations
        ],
        "notes": list(plan.notes),
    }


def plan_json(plan: Plan) -> str:
    """:func:`plan_document` as one JSON text: sorted keys, full precision, final newline."""
    return dumps(plan_document(plan))
