"""The virtual class's figures: histograms of K and eps by analysis.

See :mod:`planner.report.plots`.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Literal

import numpy as np
from numpy.typing import NDArray

from planner.report._format import significant
from planner.report.plots._style import INK, OCHRE, TEAL
from planner.report.plots._svg import Chart, Line, Rects, Rule, Scale, Stroke, steps

if TYPE_CHECKING:
    from planner.predict.montecarlo import Simulation, Summary


_BINS = 60


# ---------------------------------------------------------------------------------------------
# 4. The virtual class
# ---------------------------------------------------------------------------------------------


def _finite(values: NDArray[np.float64]) -> NDArray[np.float64]:
    result: NDArray[np.float64] = values[np.isfinite(values)]
    return result


def _true_line(true_value: float, symbol: str, unit: str) -> Rule:
    """The dashed vertical line at the true value, labelled with it."""
    return Rule(
        "true",
        "x",
        true_value,
        Stroke(INK, 1.4, (4.0, 2.0)),
        label=f"true {symbol} {significant(true_value, 4)} {unit}",
    )


def histogram_figure(simulation: Simulation, quantity: Literal["K", "epsilon"] = "K") -> Chart:
    """Histogram of K or of eps over the virtual class, all-bound and global-fit analyses.

    Parameters
    ----------
    simulation
        From :func:`planner.predict.montecarlo.simulate`.
    quantity
        ``"K"`` (formation constant [L/mol]) or ``"epsilon"`` (molar absorptivity of the
        coloured product [L mol⁻¹ cm⁻¹]).

    Returns
    -------
    Chart
        One axes: the quantity on x, benches per bin on y; the all-bound analysis filled
        (``gid`` ``all_bound``), the global fit as an outline (``global_fit``), the true
        value as a dashed line (``true``), and each analysis's 95 % interval as a bar along
        the top (``all_bound-interval``, ``global_fit-interval``); the legend sits below the
        axes so it never hides the data.
    """
    if quantity == "K":
        all_bound, global_fit = _finite(simulation.K_all_bound), _finite(simulation.K_global_fit)
        true_value = simulation.K_true
        summaries: tuple[Summary, Summary] = (simulation.all_bound.K, simulation.global_fit.K)
        symbol, unit = "K", "L/mol"
    else:
        all_bound = _finite(simulation.epsilon_all_bound)
        global_fit = _finite(simulation.epsilon_global_fit)
        true_value = simulation.epsilon_true
        summaries = (simulation.all_bound.epsilon, simulation.global_fit.epsilon)
        symbol, unit = "ε", "L mol⁻¹ cm⁻¹"
    both = np.concatenate([all_bound, global_fit]) if global_fit.size else all_bound
    low, high = (float(v) for v in np.quantile(both, [0.0005, 0.9995]))
    low, high = min(low, true_value), max(high, true_value)
    pad = 0.03 * (high - low) if high > low else 1.0
    bins = np.linspace(low - pad, high + pad, _BINS + 1)

    counts, _ = np.histogram(all_bound, bins=bins)
    chart = Chart(
        f"{'K' if quantity == 'K' else 'epsilon'}-histogram",
        3.9,
        title=f"Virtual class of {simulation.trials} benches: {symbol} by analysis",
    )
    chart.add(
        Rects(
            "all_bound",
            bins[:-1],
            bins[1:],
            np.zeros_like(counts, dtype=float),
            counts.astype(float),
            fill=TEAL,
            opacity=0.85,
            label=f"all-bound analysis (mean {significant(summaries[0].mean, 4)} {unit})",
        )
    )
    top = float(counts.max()) if counts.size else 1.0
    if global_fit.size:
        fit_counts, _ = np.histogram(global_fit, bins=bins)
        top = max(top, float(fit_counts.max()))
        x, y = steps(bins, fit_counts)
        chart.add(
            Line(
                "global_fit",
                x,
                y,
                Stroke(OCHRE, 2.0),
                label=f"global fit (mean {significant(summaries[1].mean, 4)} {unit})",
            )
        )
    chart.add(_true_line(true_value, symbol, unit))
    top = 1.05 * max(top, 1.0)
    for summary, colour, height, name, shown in (
        (summaries[0], TEAL, 1.04, "all_bound", "all-bound analysis"),
        (summaries[1], OCHRE, 1.09, "global_fit", "global fit"),
    ):
        if summary.valid:
            chart.add(
                Line(
                    f"{name}-interval",
                    np.array(summary.ci95, dtype=float),
                    np.full(2, top * height),
                    Stroke(colour, 3.0),
                    label=f"{shown}: 95 % of benches",
                )
            )
    chart.x = Scale(bins[0], bins[-1], label=f"{symbol} [{unit}]")
    chart.y = Scale(0.0, top * 1.15, label="benches per bin [count]")
    return chart


def simulation_plots(simulation: Simulation) -> dict[str, bytes]:
    """``K-histogram.svg`` and ``epsilon-histogram.svg``, as bytes."""
    return {
        "K-histogram.svg": histogram_figure(simulation, "K").svg(),
        "epsilon-histogram.svg": histogram_figure(simulation, "epsilon").svg(),
    }


def technique_histogram_figure(
    simulations: Mapping[str, Simulation], *, all_bound: Mapping[str, bool] | None = None
) -> Chart:
    """Histograms of the class's K, one per bench preset, on shared bins (all-bound analysis
    where ``all_bound`` says the plan gives it for that preset, else the global fit).

    Parameters
    ----------
    simulations
        Preset name -> the virtual class of the same recipes under that preset's bench.

    Returns
    -------
    Chart
        One axes: K on x, benches per bin on y; one step outline per preset (``gid`` the
        preset's name) and the true K as a dashed line.
    """
    values: dict[str, NDArray[np.float64]] = {}
    shown: dict[str, Summary] = {}
    for name, sim in simulations.items():
        wanted = all_bound is None or all_bound.get(name, False)
        bound = _finite(sim.K_all_bound) if wanted else np.empty(0)
        values[name] = bound if bound.size else _finite(sim.K_global_fit)
        shown[name] = sim.all_bound.K if bound.size else sim.global_fit.K
    pooled = np.concatenate([v for v in values.values() if v.size])
    true_value = next(iter(simulations.values())).K_true
    low, high = (float(v) for v in np.quantile(pooled, [0.0005, 0.9995]))
    low, high = min(low, true_value), max(high, true_value)
    pad = 0.03 * (high - low) if high > low else 1.0
    bins = np.linspace(low - pad, high + pad, _BINS + 1)
    colours = (TEAL, OCHRE, INK)
    chart = Chart("K-histogram-by-technique", 3.9, title="Virtual class by bench preset: K")
    top = 1.0
    for index, (name, data) in enumerate(values.items()):
        summary = shown[name]
        counts, _ = np.histogram(data, bins=bins)
        top = max(top, float(counts.max()) if counts.size else 0.0)
        x, y = steps(bins, counts)
        chart.add(
            Line(
                name,
                x,
                y,
                Stroke(colours[index % len(colours)], 2.0),
                label=f"{name}: 95 % of benches {significant(summary.ci95[0], 4)} to "
                f"{significant(summary.ci95[1], 4)} L/mol",
            )
        )
    chart.add(_true_line(true_value, "K", "L/mol"))
    chart.x = Scale(bins[0], bins[-1], label="K [L/mol]")
    chart.y = Scale(0.0, top * 1.05, label="benches per bin [count]")
    return chart


def technique_plots(
    simulations: Mapping[str, Simulation], *, all_bound: Mapping[str, bool] | None = None
) -> dict[str, bytes]:
    """``K-histogram-by-technique.svg``, as bytes."""
    chart = technique_histogram_figure(simulations, all_bound=all_bound)
    return {"K-histogram-by-technique.svg": chart.svg()}
