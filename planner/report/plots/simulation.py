"""The virtual class's figures: histograms of K and eps by analysis.

See :mod:`planner.report.plots`.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Literal

import numpy as np
from numpy.typing import NDArray

from planner.report._format import significant
from planner.report.plots._style import (
    _INK,
    _OCHRE,
    _PNG_DPI,
    _TEAL,
    _both,
    _finish,
    _new_figure,
    _style,
    figure_png,
)

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from planner.predict.montecarlo import Simulation, Summary


_BINS = 60


# ---------------------------------------------------------------------------------------------
# 4. The virtual class
# ---------------------------------------------------------------------------------------------


def _finite(values: NDArray[np.float64]) -> NDArray[np.float64]:
    result: NDArray[np.float64] = values[np.isfinite(values)]
    return result


def _true_line(axes: Axes, true_value: float, symbol: str, unit: str) -> None:
    """The dashed vertical line at the true value, labelled with it."""
    axes.axvline(
        true_value,
        color=_INK,
        linestyle="--",
        linewidth=1.4,
        gid="true",
        label=f"true {symbol} {significant(true_value, 4)} {unit}",
    )


def histogram_figure(simulation: Simulation, quantity: Literal["K", "epsilon"] = "K") -> Figure:
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
    Figure
        One axes: the quantity on x, benches per bin on y; the all-bound analysis filled
        (``gid`` ``all_bound``), the global fit as a hatched outline (``global_fit``), the
        true value as a dashed line (``true``), and each analysis's 95 % interval as a bar
        along the top; the legend sits below the axes so it never hides the data.
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
    bins = [float(edge) for edge in np.linspace(low - pad, high + pad, _BINS + 1)]

    with _style():
        figure, axes = _new_figure(3.9)
        axes.hist(
            all_bound,
            bins=bins,
            color=_TEAL,
            edgecolor=_TEAL,
            alpha=0.85,
            gid="all_bound",
            label=f"all-bound analysis (mean {significant(summaries[0].mean, 4)} {unit})",
        )
        if global_fit.size:
            axes.hist(
                global_fit,
                bins=bins,
                histtype="step",
                color=_OCHRE,
                linewidth=2.0,
                hatch="///",
                fill=False,
                gid="global_fit",
                label=f"global fit (mean {significant(summaries[1].mean, 4)} {unit})",
            )
        _true_line(axes, true_value, symbol, unit)
        top = axes.get_ylim()[1]
        for summary, colour, height, name in (
            (summaries[0], _TEAL, 1.04, "all_bound"),
            (summaries[1], _OCHRE, 1.09, "global_fit"),
        ):
            if summary.valid:
                axes.plot(
                    list(summary.ci95),
                    [top * height] * 2,
                    color=colour,
                    linewidth=3,
                    solid_capstyle="butt",
                    label=f"{name}: 95 % interval",
                )
        axes.set_ylim(0, top * 1.15)
        axes.set_xlabel(f"{symbol} [{unit}]")
        axes.set_ylabel("benches per bin [count]")
        axes.set_title(
            f"Virtual class of {simulation.trials} benches: {symbol} by analysis", loc="left"
        )
        return _finish(figure, axes)


def k_histogram_png(simulation: Simulation, *, dpi: int = _PNG_DPI) -> bytes:
    """Histogram of K over the virtual class (see :func:`histogram_figure`), as PNG bytes.

    Parameters
    ----------
    simulation
        From :func:`planner.predict.montecarlo.simulate`.
    dpi
        Resolution [dots per inch].
    """
    return figure_png(histogram_figure(simulation, "K"), dpi=dpi)


def epsilon_histogram_png(simulation: Simulation, *, dpi: int = _PNG_DPI) -> bytes:
    """Histogram of eps over the virtual class (see :func:`histogram_figure`), as PNG bytes."""
    return figure_png(histogram_figure(simulation, "epsilon"), dpi=dpi)


def simulation_plots(simulation: Simulation) -> dict[str, bytes]:
    """``K-histogram`` and ``epsilon-histogram``, each as ``.png`` and ``.svg`` bytes."""
    files: dict[str, bytes] = {}
    files.update(_both("K-histogram", histogram_figure(simulation, "K")))
    files.update(_both("epsilon-histogram", histogram_figure(simulation, "epsilon")))
    return files


def technique_histogram_figure(
    simulations: Mapping[str, Simulation], *, all_bound: Mapping[str, bool] | None = None
) -> Figure:
    """Histograms of the class's K, one per bench preset, on shared bins (all-bound analysis
    where ``all_bound`` says the plan gives it for that preset, else the global fit).

    Parameters
    ----------
    simulations
        Preset name -> the virtual class of the same recipes under that preset's bench.

    Returns
    -------
    Figure
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
    bins = [float(edge) for edge in np.linspace(low - pad, high + pad, _BINS + 1)]
    colours = (_TEAL, _OCHRE, _INK)
    with _style():
        figure, axes = _new_figure(3.9)
        for index, (name, data) in enumerate(values.items()):
            summary = shown[name]
            axes.hist(
                data,
                bins=bins,
                histtype="step",
                linewidth=2.0,
                color=colours[index % len(colours)],
                gid=name,
                label=f"{name}: 95 % of benches {significant(summary.ci95[0], 4)} to "
                f"{significant(summary.ci95[1], 4)} L/mol",
            )
        _true_line(axes, true_value, "K", "L/mol")
        axes.set_xlabel("K [L/mol]")
        axes.set_ylabel("benches per bin [count]")
        axes.set_title("Virtual class by bench preset: K", loc="left")
        return _finish(figure, axes)


def technique_plots(
    simulations: Mapping[str, Simulation], *, all_bound: Mapping[str, bool] | None = None
) -> dict[str, bytes]:
    """``K-histogram-by-technique`` as ``.png`` and ``.svg`` bytes."""
    return _both(
        "K-histogram-by-technique", technique_histogram_figure(simulations, all_bound=all_bound)
    )
