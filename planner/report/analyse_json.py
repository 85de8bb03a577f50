"""``planner analyse``: the ``planner.analysis/1`` document and the per-bench CSV.

Numbers that cannot be computed (a bench without a reading of a blank, a failed fit) are
``null`` in JSON and empty in CSV, never NaN.
"""

from __future__ import annotations

import csv
import io
import math
from typing import Any

from planner.readings.analyse import BenchResult, ClassAnalysis, ClassStatistic, Estimate, Flag
from planner.report._format import csv_text
from planner.report.jsonout import dumps

__all__ = ["SCHEMA", "analysis_document", "analysis_json", "bench_csv"]

#: Schema name and version of the document.
SCHEMA = "planner.analysis/1"


def _number(value: float) -> float | None:
    return value if math.isfinite(value) else None


def _estimate(estimate: Estimate) -> dict[str, Any]:
    return {
        "value": _number(estimate.value),
        "predicted": _number(estimate.predicted),
        "ci95": (
            [estimate.low, estimate.high]
            if math.isfinite(estimate.low) and math.isfinite(estimate.high)
            else None
        ),
        "inside_ci95": estimate.inside,
    }


def _flag(flag: Flag) -> dict[str, Any]:
    return {
        "rule": flag.rule,
        "mixtures": list(flag.mixtures),
        "cause": flag.cause,
        "evidence": flag.evidence,
        "threshold": flag.threshold,
    }


def _bench(bench: BenchResult) -> dict[str, Any]:
    return {
        "section": bench.section,
        "bench": bench.bench,
        "replicate": bench.replicate,
        "status": bench.status,
        "epsilon": {
            "all_bound": _estimate(bench.epsilon_all_bound),
            "global_fit": _estimate(bench.epsilon_global_fit),
        },
        "K": {
            "all_bound": _estimate(bench.K_all_bound),
            "global_fit": _estimate(bench.K_global_fit),
        },
        "scale": _number(bench.scale),
        "flags": [_flag(f) for f in bench.flags],
        "rows": list(bench.rows),
        "mixtures": [
            {
                "id": m.id,
                "role": m.role,
                "reading": _number(m.reading),
                "predicted": m.expected.predicted,
                "ci95": [m.expected.low, m.expected.high],
                "inside_ci95": m.expected.inside,
                "u_absorbance": m.u_absorbance,
                "residual": _number(m.residual),
                "line_residual": _number(m.line_residual),
                "u_residual": _number(m.u_residual),
                "bound_fraction": m.bound_fraction,
                "K": _estimate(m.K) if m.role == "test" else None,
            }
            for m in bench.mixtures
        ],
    }


def _statistic(statistic: ClassStatistic) -> dict[str, Any]:
    return {
        "n": statistic.n,
        "mean": _number(statistic.mean),
        "sd": _number(statistic.sd),
        "range95": ([statistic.low, statistic.high] if math.isfinite(statistic.sd) else None),
        "predicted": _number(statistic.predicted),
        "predicted_ci95": (
            [statistic.predicted_low, statistic.predicted_high]
            if math.isfinite(statistic.predicted_low)
            else None
        ),
    }


def analysis_document(result: ClassAnalysis, *, readings: str, plan: str) -> dict[str, Any]:
    """The analysis as JSON-able data (schema ``planner.analysis/1``, docs/guide.md).

    Parameters
    ----------
    result
        From :func:`planner.readings.analyse_class`.
    readings, plan
        The readings file and the plan folder, as the user named them.
    """
    pooled = result.pooled
    k_global = _statistic(result.K_global_fit)
    eps_global = _statistic(result.epsilon_global_fit)
    if pooled is not None:
        k_global.update(value=pooled.K, u=_number(pooled.u_K))
        eps_global.update(value=pooled.epsilon, u=_number(pooled.u_epsilon))
    else:
        k_global.update(value=None, u=None)
        eps_global.update(value=None, u=None)
    return {
        "schema": SCHEMA,
        "readings": readings,
        "plan": plan,
        "sections": list(result.sections),
        "benches": [_bench(b) for b in result.benches],
        "rejections": [
            {
                "row": r.row,
                "column": r.column,
                "value": r.value,
                "problem": r.problem,
                "hint": r.hint,
            }
            for r in result.rejections
        ],
        "unmeasured": [{"section": s, "bench": b, "replicate": r} for s, b, r in result.unmeasured],
        "lost": [{"section": s, "bench": b, "replicate": r} for s, b, r in result.lost],
        "absent": {
            "count": result.n_absent,
            "listed": [{"section": s, "bench": b, "replicate": r} for s, b, r in result.absent],
            "sections": list(result.sections_without_rows),
        },
        "class": {
            "benches": len(result.benches),
            "ok": sum(1 for b in result.benches if not b.flags),
            "flagged": sum(1 for b in result.benches if b.flags),
            "K_true": result.K_true,
            "K": {"all_bound": _statistic(result.K_all_bound), "global_fit": k_global},
            "epsilon": {
                "all_bound": _statistic(result.epsilon_all_bound),
                "global_fit": eps_global,
            },
            "pooled_fit": (
                None
                if pooled is None
                else {
                    "n_readings": pooled.n_readings,
                    "n_benches": pooled.n_benches,
                    "includes_flagged": pooled.includes_flagged,
                    "rms_residual": _number(pooled.rms_residual),
                    "lack_of_fit": {
                        "F": _number(pooled.lack_of_fit_F),
                        "p": _number(pooled.lack_of_fit_p),
                        "df_lack_of_fit": pooled.df_lack_of_fit,
                        "df_pure_error": pooled.df_pure_error,
                    },
                }
            ),
        },
    }


def analysis_json(result: ClassAnalysis, *, readings: str, plan: str) -> str:
    """:func:`analysis_document` as one JSON text: sorted keys, final newline."""
    return dumps(analysis_document(result, readings=readings, plan=plan))


def _cell(value: float) -> str:
    return repr(float(value)) if math.isfinite(value) else ""


def bench_csv(bench: BenchResult) -> str:
    """One bench's mixtures as CSV: reading, prediction and its 95 % range, residuals, the
    test's K and its range; then the bench's eps and K by both analyses and its flags as
    comment-free rows of their own (``quantity`` rows). Lines end in ``\\n``."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(
        [
            "mixture",
            "role",
            "reading",
            "predicted",
            "low95",
            "high95",
            "residual_global_fit",
            "residual_line",
            "u_residual",
            "K_all_bound",
            "K_predicted",
            "K_low95",
            "K_high95",
        ]
    )
    for m in bench.mixtures:
        writer.writerow(
            [
                csv_text(m.id),
                m.role,
                _cell(m.reading),
                _cell(m.expected.predicted),
                _cell(m.expected.low),
                _cell(m.expected.high),
                _cell(m.residual),
                _cell(m.line_residual),
                _cell(m.u_residual),
                _cell(m.K.value),
                _cell(m.K.predicted),
                _cell(m.K.low),
                _cell(m.K.high),
            ]
        )
    writer.writerow([])
    writer.writerow(["quantity", "analysis", "value", "predicted", "low95", "high95"])
    for name, analysis, estimate in (
        ("epsilon", "all_bound", bench.epsilon_all_bound),
        ("K", "all_bound", bench.K_all_bound),
        ("epsilon", "global_fit", bench.epsilon_global_fit),
        ("K", "global_fit", bench.K_global_fit),
    ):
        writer.writerow(
            [
                name,
                analysis,
                _cell(estimate.value),
                _cell(estimate.predicted),
                _cell(estimate.low),
                _cell(estimate.high),
            ]
        )
    writer.writerow([])
    writer.writerow(["flag", "mixtures", "cause", "evidence", "threshold"])
    for flag in bench.flags:
        writer.writerow(
            [flag.rule, " ".join(flag.mixtures), flag.cause, flag.evidence, flag.threshold]
        )
    return buffer.getvalue()
