"""The class's figures for ``planner analyse``: each bench's K against the prediction, and
the residuals by mixture.

See :mod:`planner.report.plots`.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from planner.report._format import significant
from planner.report.plots._style import BAND, INK, OCHRE, RUST, TEAL
from planner.report.plots._svg import (
    Band,
    Chart,
    Marker,
    Note,
    Points,
    Rects,
    Rule,
    Scale,
    Stroke,
    array,
)

if TYPE_CHECKING:
    from planner.readings.analyse import ClassAnalysis


def bench_K_figure(result: ClassAnalysis) -> Chart:
    """Each bench's K by both analyses, each beside its section's predicted 95 % range.

    One row per bench set; the grey bar is the predicted range of the global fit's K, the
    hatched one the all-bound analysis's; filled markers are ok benches, open markers
    flagged ones.
    """
    benches = result.benches
    chart = Chart(
        "bench-K", 1.4 + 0.16 * len(benches), title="Each bench's K against the prediction"
    )
    y = np.arange(len(benches))[::-1].astype(float)
    for analysis, offset, hatch in (("K_global_fit", 0.18, False), ("K_all_bound", -0.18, True)):
        ranges = [
            (row, getattr(bench, analysis))
            for row, bench in zip(y, benches, strict=True)
            if math.isfinite(getattr(bench, analysis).low)
        ]
        if ranges:
            chart.add(
                Rects(
                    f"{analysis}-range",
                    array([e.low for _, e in ranges]),
                    array([e.high for _, e in ranges]),
                    array([row + offset - 0.15 for row, _ in ranges]),
                    array([row + offset + 0.15 for row, _ in ranges]),
                    fill=BAND,
                    hatch=hatch,
                    edge=Stroke(INK, 0.3) if hatch else None,
                )
            )
    analyses: tuple[tuple[str, float, str, Marker, str], ...] = (
        ("K_global_fit", 0.18, TEAL, "o", "global fit"),
        ("K_all_bound", -0.18, RUST, "s", "all-bound"),
    )
    flagged_rows: list[tuple[str, float, str, Marker, str, list[tuple[float, float]]]] = []
    for analysis, offset, colour, marker, label in analyses:
        for flagged in (False, True):
            rows = [
                (row, getattr(b, analysis).value)
                for row, b in zip(y, benches, strict=True)
                if bool(b.flags) == flagged and math.isfinite(getattr(b, analysis).value)
            ]
            if not rows:
                continue
            if flagged:  # placed once the axis is known: far values go to its edge
                flagged_rows.append((analysis, offset, colour, marker, label, rows))
                continue
            chart.add(
                Points(
                    f"{analysis}-ok",
                    array([v for _, v in rows]),
                    array([r + offset for r, _ in rows]),
                    marker=marker,
                    size=5.0,
                    face=colour,
                    edge=colour,
                    label=f"{label}, ok bench",
                )
            )
    if math.isfinite(result.K_true):
        dashed = Stroke(OCHRE, 1.5, (4.0, 2.0))
        chart.add(Rule("true", "x", result.K_true, dashed, label="K the plan assumes"))
    # The axis spans the predicted ranges, the plan's K and the ok benches; a flagged bench's
    # K far outside (a swapped tube gives K several times the plan's) would squeeze every
    # other bench into a corner, so it sits at the axis's edge with its value written.
    low, high = _limits(chart)
    span = high - low
    beyond: dict[tuple[float, bool], list[float]] = {}  # (row, right edge) -> values
    for analysis, offset, colour, marker, label, rows in flagged_rows:
        shown = []
        for row, value in rows:
            if low <= value <= high:
                shown.append(value)
                continue
            right = value > high
            shown.append(high - 0.01 * span if right else low + 0.01 * span)
            beyond.setdefault((row, right), []).append(value)
        chart.add(
            Points(
                f"{analysis}-flagged",
                array(shown),
                array([r + offset for r, _ in rows]),
                marker=marker,
                size=5.0,
                face="#ffffff",
                edge=colour,
                label=f"{label}, flagged bench",
            )
        )
    # One note per bench and edge, its values in the legend's order (global fit first).
    for (row, right), values in beyond.items():
        text = ", ".join(significant(v, 4) for v in values)
        chart.note(
            Note(
                f"{text} \u2192" if right else f"\u2190 {text}",
                high - 0.01 * span if right else low + 0.01 * span,
                row,
                dx=-6.0 if right else 6.0,
                anchor="end" if right else "start",
                size=6.5,
                halo=True,
            )
        )
    chart.x = Scale(low, high, label="K (bars: predicted 95 % ranges; far values at the edge)")
    chart.y = Scale(
        -0.6,
        len(benches) - 0.4,
        label="section/bench/replicate",
        ticks=tuple(float(v) for v in y),
        tick_labels=tuple(f"{b.section}/{b.bench}/{b.replicate}" for b in benches),
        tick_size=7.5,
    )
    return chart


def _limits(chart: Chart) -> tuple[float, float]:
    """x limits holding every finite value the chart's marks place, with 5 % margins."""
    values: list[float] = []
    for mark in chart.marks:
        if isinstance(mark, Points):
            values.extend(mark.x.tolist())
        elif isinstance(mark, Rects):
            values.extend(mark.x0.tolist() + mark.x1.tolist())
        elif isinstance(mark, Rule):
            values.append(mark.value)
    finite = [v for v in values if math.isfinite(v)]
    if not finite:
        return 0.0, 1.0
    low, high = min(finite), max(finite)
    pad = 0.05 * (high - low) if high > low else max(abs(high), 1.0) * 0.05
    return low - pad, high + pad


def residuals_figure(result: ClassAnalysis) -> Chart:
    """Each bench's global-fit residuals by mixture, in units of the plan's u(A)."""
    ids: list[str] = []
    for bench in result.benches:
        for m in bench.mixtures:
            if m.role != "blank" and m.id not in ids:
                ids.append(m.id)
    position = {mixture_id: i for i, mixture_id in enumerate(ids)}
    rng = np.random.default_rng(0)  # fixed jitter: the same figure every run
    chart = Chart("residuals", 3.4, title="Global-fit residuals by mixture")
    chart.add(Band("within", "y", -3.0, 3.0, fill=BAND, label="within 3 u(A)"))
    chart.add(Rule("zero", "y", 0.0, Stroke(INK, 0.6)))
    largest = 3.0
    kinds: tuple[tuple[bool, str, Marker], ...] = ((False, TEAL, "o"), (True, RUST, "D"))
    for flagged, colour, marker in kinds:
        xs, ys = [], []
        for bench in result.benches:
            if bool(bench.flags) != flagged:
                continue
            for m in bench.mixtures:
                if m.role == "blank" or not math.isfinite(m.residual):
                    continue
                xs.append(position[m.id] + rng.uniform(-0.2, 0.2))
                ys.append(m.residual / m.u_absorbance)
        if xs:
            largest = max(largest, *(abs(v) for v in ys if math.isfinite(v)))
            chart.add(
                Points(
                    "flagged" if flagged else "ok",
                    array(xs),
                    array(ys),
                    marker=marker,
                    size=4.0,
                    face="#ffffff" if flagged else colour,
                    edge=colour,
                    label="flagged bench" if flagged else "ok bench",
                )
            )
    chart.x = Scale(
        -0.6,
        len(ids) - 0.4,
        label="mixture",
        ticks=tuple(float(i) for i in range(len(ids))),
        tick_labels=tuple(ids),
    )
    chart.y = Scale(-1.1 * largest, 1.1 * largest, label="residual / u(A)")
    return chart


def analysis_plots(result: ClassAnalysis) -> dict[str, bytes]:
    """``plots/bench-K.svg`` and ``plots/residuals.svg``, as bytes (none without benches)."""
    if not result.benches:
        return {}
    return {
        "plots/bench-K.svg": bench_K_figure(result).svg(),
        "plots/residuals.svg": residuals_figure(result).svg(),
    }
