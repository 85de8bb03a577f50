"""The class's figures for ``planner analyse``: each bench's K against the prediction, and
the residuals by mixture.

See :mod:`planner.report.plots`.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from planner.report.plots._style import (
    _BAND,
    _INK,
    _OCHRE,
    _RUST,
    _TEAL,
    _both,
    _finish,
    _new_figure,
    _style,
    _text,
)

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from planner.readings.analyse import ClassAnalysis


def bench_K_figure(result: ClassAnalysis) -> Figure:
    """Each bench's K by both analyses, each beside its section's predicted 95 % range.

    One row per bench set; the grey bar is the predicted range of the global fit's K, the
    hatched one the all-bound analysis's; filled markers are ok benches, open markers
    flagged ones.
    """
    benches = result.benches
    height = 1.4 + 0.16 * len(benches)
    with _style():
        figure, axes = _new_figure(height)
        y = np.arange(len(benches))[::-1]
        for row, bench in zip(y, benches, strict=True):
            for estimate, offset, hatch in (
                (bench.K_global_fit, 0.18, None),
                (bench.K_all_bound, -0.18, "////"),
            ):
                if math.isfinite(estimate.low):
                    axes.barh(
                        row + offset,
                        estimate.high - estimate.low,
                        left=estimate.low,
                        height=0.3,
                        color=_BAND,
                        hatch=hatch,
                        edgecolor=_INK if hatch else _BAND,
                        linewidth=0.3,
                    )
        for analysis, offset, colour, marker, label in (
            ("K_global_fit", 0.18, _TEAL, "o", "global fit"),
            ("K_all_bound", -0.18, _RUST, "s", "all-bound"),
        ):
            for flagged in (False, True):
                rows = [
                    (row, getattr(b, analysis).value)
                    for row, b in zip(y, benches, strict=True)
                    if bool(b.flags) == flagged and math.isfinite(getattr(b, analysis).value)
                ]
                if not rows:
                    continue
                axes.plot(
                    [v for _, v in rows],
                    [r + offset for r, _ in rows],
                    linestyle="none",
                    marker=marker,
                    markersize=5,
                    color=colour,
                    markerfacecolor="white" if flagged else colour,
                    label=f"{label}, {'flagged' if flagged else 'ok'} bench",
                )
        if math.isfinite(result.K_true):
            axes.axvline(result.K_true, color=_OCHRE, linestyle="--", label="K the plan assumes")
        axes.set_yticks(y)
        axes.set_yticklabels(
            [_text(f"{b.section}/{b.bench}/{b.replicate}") for b in benches], fontsize=7.5
        )
        axes.set_ylabel("section/bench/replicate")
        axes.set_xlabel("K (bars: predicted 95 % ranges)")
        axes.set_title("Each bench's K against the prediction")
        return _finish(figure, axes)


def residuals_figure(result: ClassAnalysis) -> Figure:
    """Each bench's global-fit residuals by mixture, in units of the plan's u(A)."""
    ids: list[str] = []
    for bench in result.benches:
        for m in bench.mixtures:
            if m.role != "blank" and m.id not in ids:
                ids.append(m.id)
    position = {mixture_id: i for i, mixture_id in enumerate(ids)}
    rng = np.random.default_rng(0)  # fixed jitter: the same figure every run
    with _style():
        figure, axes = _new_figure(3.4)
        axes.axhspan(-3, 3, color=_BAND, label="within 3 u(A)")
        for flagged, colour, marker in ((False, _TEAL, "o"), (True, _RUST, "D")):
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
                axes.plot(
                    xs,
                    ys,
                    linestyle="none",
                    marker=marker,
                    markersize=4,
                    color=colour,
                    markerfacecolor="white" if flagged else colour,
                    label="flagged bench" if flagged else "ok bench",
                )
        axes.axhline(0, color=_INK, linewidth=0.6)
        axes.set_xticks(range(len(ids)))
        axes.set_xticklabels([_text(i) for i in ids])
        axes.set_xlabel("mixture")
        axes.set_ylabel("residual / u(A)")
        axes.set_title("Global-fit residuals by mixture")
        return _finish(figure, axes)


def analysis_plots(result: ClassAnalysis) -> dict[str, bytes]:
    """``plots/bench-K.png``/``.svg`` and ``plots/residuals.png``/``.svg``."""
    files: dict[str, bytes] = {}
    if not result.benches:
        return files
    for stem, draw in (("bench-K", bench_K_figure), ("residuals", residuals_figure)):
        for name, data in _both(stem, draw(result)).items():
            files[f"plots/{name}"] = data
    return files
