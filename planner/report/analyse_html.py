"""``planner analyse --out``: the printable HTML report and the folder's contents."""

from __future__ import annotations

import math

from planner.readings.analyse import ClassAnalysis, ClassStatistic, Estimate
from planner.records import record
from planner.report._format import significant
from planner.report.analyse_json import analysis_json, bench_csv
from planner.report.analyse_text import not_analysed
from planner.report.sheets import _render

__all__ = ["analysis_files", "analysis_html"]


def _v(value: float) -> str:
    return significant(value, 4) if math.isfinite(value) else "-"


def _range(estimate: Estimate) -> str:
    if not math.isfinite(estimate.low):
        return "-"
    return f"{_v(estimate.low)}-{_v(estimate.high)}"


@record
class _Row:
    name: str
    section: int
    bench: int
    replicate: int
    K_all_bound: str
    K_all_bound_range: str
    K_global_fit: str
    K_global_fit_range: str
    status: str
    flags: tuple[tuple[str, str, str, str], ...]


@record
class _Statistic:
    name: str
    n: int
    mean: str
    sd: str
    range95: str
    predicted: str
    predicted_range: str


def _statistic(name: str, s: ClassStatistic) -> _Statistic:
    return _Statistic(
        name,
        s.n,
        _v(s.mean),
        _v(s.sd),
        f"{_v(s.low)}-{_v(s.high)}" if math.isfinite(s.sd) else "-",
        _v(s.predicted),
        f"{_v(s.predicted_low)}-{_v(s.predicted_high)}",
    )


def _csv_name(section: int, bench: int, replicate: int) -> str:
    return f"benches/section-{section:02d}-bench-{bench:02d}-replicate-{replicate}.csv"


def analysis_html(result: ClassAnalysis, *, readings: str, plan: str, plots: bool) -> str:
    """The report as one printable HTML document (plots from ``plots/*.svg``)."""
    rows = [
        _Row(
            _csv_name(b.section, b.bench, b.replicate),
            b.section,
            b.bench,
            b.replicate,
            _v(b.K_all_bound.value),
            _range(b.K_all_bound),
            _v(b.K_global_fit.value),
            _range(b.K_global_fit),
            b.status,
            tuple((f.rule, f.evidence, f.cause, f.threshold) for f in b.flags),
        )
        for b in result.benches
    ]
    pooled = result.pooled
    return _render(
        "analysis.html",
        title="Class readings against the plan",
        readings=readings,
        plan=plan,
        rows=rows,
        ok=sum(1 for b in result.benches if not b.flags),
        flagged=sum(1 for b in result.benches if b.flags),
        statistics=[
            _statistic("K, all-bound", result.K_all_bound),
            _statistic("K, global fit", result.K_global_fit),
            _statistic("eps, all-bound (L/mol/cm)", result.epsilon_all_bound),
            _statistic("eps, global fit (L/mol/cm)", result.epsilon_global_fit),
        ],
        pooled=None
        if pooled is None
        else {
            "K": _v(pooled.K),
            "u_K": _v(pooled.u_K),
            "epsilon": _v(pooled.epsilon),
            "u_epsilon": _v(pooled.u_epsilon),
            "n_readings": pooled.n_readings,
            "n_benches": pooled.n_benches,
            "which": "analysed (none was ok)" if pooled.includes_flagged else "ok",
            "rms": _v(pooled.rms_residual),
            "F": _v(pooled.lack_of_fit_F),
            "p": _v(pooled.lack_of_fit_p),
            "df1": pooled.df_lack_of_fit,
            "df2": pooled.df_pure_error,
        },
        K_true=_v(result.K_true),
        rejections=result.rejections,
        not_analysed=not_analysed(result),
        lost=len(result.lost),
        plots=plots,
    )


def analysis_files(result: ClassAnalysis, *, readings: str, plan: str) -> dict[str, str | bytes]:
    """The analysis folder: ``analysis.html``, ``analysis.json``, ``plots/`` and
    ``benches/section-NN-bench-NN-replicate-N.csv`` for every bench set."""
    from planner.report.plots.readings import analysis_plots

    figures = analysis_plots(result)
    files: dict[str, str | bytes] = {
        "analysis.html": analysis_html(result, readings=readings, plan=plan, plots=bool(figures)),
        "analysis.json": analysis_json(result, readings=readings, plan=plan),
    }
    for b in result.benches:
        files[_csv_name(b.section, b.bench, b.replicate)] = bench_csv(b)
    files.update(figures)
    return files
