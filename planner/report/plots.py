"""Figures of the virtual class, as PNG bytes (matplotlib, Agg, no global pyplot state).

The figure is built on a :class:`matplotlib.figure.Figure` with an Agg canvas, so nothing here
touches pyplot's global figure list or a display, and the bytes depend only on the data and the
matplotlib version (the PNG carries no date).

Colours are our own and differ in lightness as well as hue, and the two analyses also differ in
fill and hatching, so the figure reads in greyscale and on a monochrome printer.
"""

from __future__ import annotations

import io

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from numpy.typing import NDArray

from planner.predict.montecarlo import Simulation

__all__ = ["k_histogram_png"]

# Dark teal (taught, filled) and light ochre (exact, hatched outline): relative luminance
# about 0.13 and 0.55, distinct in greyscale.
_TAUGHT = "#1f5c63"
_EXACT = "#d9a441"
_TRUE = "#222222"
_BINS = 60


def _finite(values: NDArray[np.float64]) -> NDArray[np.float64]:
    result: NDArray[np.float64] = values[np.isfinite(values)]
    return result


def k_histogram_png(simulation: Simulation, *, dpi: int = 150) -> bytes:
    """Histogram of K over the virtual class, taught and exact analyses, as PNG.

    Parameters
    ----------
    simulation
        From :func:`planner.predict.montecarlo.simulate`.
    dpi
        Resolution [dots per inch].

    Returns
    -------
    bytes
        A PNG image: K [L/mol] on the x axis, benches per bin on the y axis, the true K as a
        dashed line and each analysis's 95 % interval as a bar along the top; the legend sits
        below the axes so it never hides the data.
    """
    taught = _finite(simulation.K_taught)
    exact = _finite(simulation.K_exact)
    both = np.concatenate([taught, exact]) if exact.size else taught
    low, high = np.quantile(both, [0.0005, 0.9995])
    low, high = min(low, simulation.K_true), max(high, simulation.K_true)
    pad = 0.03 * (high - low) if high > low else 1.0
    bins = [float(edge) for edge in np.linspace(low - pad, high + pad, _BINS + 1)]

    figure = Figure(figsize=(7.0, 4.8), dpi=dpi)
    FigureCanvasAgg(figure)
    axes = figure.add_subplot()
    axes.hist(
        taught,
        bins=bins,
        color=_TAUGHT,
        edgecolor=_TAUGHT,
        alpha=0.85,
        label=f"taught analysis (mean {simulation.taught.K.mean:.4g} L/mol)",
    )
    if exact.size:
        axes.hist(
            exact,
            bins=bins,
            histtype="step",
            color=_EXACT,
            linewidth=2.0,
            hatch="///",
            fill=False,
            label=f"exact fit (mean {simulation.exact.K.mean:.4g} L/mol)",
        )
    axes.axvline(
        simulation.K_true,
        color=_TRUE,
        linestyle="--",
        linewidth=1.4,
        label=f"true K {simulation.K_true:.4g} L/mol",
    )
    top = axes.get_ylim()[1]
    for summary, colour, height, name in (
        (simulation.taught.K, _TAUGHT, 1.04, "taught"),
        (simulation.exact.K, _EXACT, 1.09, "exact"),
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
    axes.set_xlabel("K [L/mol]")
    axes.set_ylabel("benches per bin [count]")
    axes.set_title(f"Virtual class of {simulation.trials} benches: K by analysis", fontsize=11)
    axes.legend(loc="upper center", bbox_to_anchor=(0.5, -0.16), fontsize=8, frameon=False, ncols=3)
    figure.tight_layout()
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", metadata={"Software": None})
    return buffer.getvalue()
