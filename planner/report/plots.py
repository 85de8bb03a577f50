"""Figures of a plan and of its virtual class: matplotlib figures, PNG and SVG bytes.

Plan figures (written by ``planner plan --out`` into ``plots/``, shown on the answer key):

- :func:`ladder_figure`: the planned calibration ladder, predicted reading against the
  coloured product's concentration, with the linear window, the Beer-Lambert line and the
  photometer's stray-light response, the blank and the standards;
- :func:`bound_fraction_figure`: bound fraction of the limiting reagent against the total
  excess concentration (equilibrium solver over a sweep), the tolerance line of the
  all-bound assumption and the plan's standards;
- :func:`coverage_figure`: the bound fractions of the test mixtures against the informative
  range 0.2-0.8 and the design's range.

Virtual-class figures (``planner simulate --out``): :func:`histogram_figure` for K or eps by
analysis, with :func:`k_histogram_png` and :func:`epsilon_histogram_png` as shortcuts.

Every figure is a :class:`matplotlib.figure.Figure` on an Agg canvas: nothing touches pyplot's
global figure list or a display. matplotlib is imported inside the functions, so importing this
module costs nothing until a figure is drawn (``planner plan`` without ``--out`` never pays for
it). Drawing and saving run inside :func:`matplotlib.rc_context` with the settings below, which
fix the SVG id salt and leave out dates and version strings, so the bytes depend only on the
data and the matplotlib version. SVG text stays text (``svg.fonttype = "none"``), so labels can
be searched and read by screen readers.

Colours are our own, taken from the sheets' palette: ink, slate teal and rust are dark, ochre
is mid-grey in greyscale and the blue-grey of the bands pale; every series also differs from
the others in its figure by marker, fill, line style or hatching, so the figures read in
greyscale and on a monochrome printer.
Figures are 6.6 in wide (168 mm) to print at their natural size inside the A4 printable width,
with text from 9 to 11 pt.
"""

from __future__ import annotations

import io
import math
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from planner.report._format import plain, significant

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from planner.predict.montecarlo import Simulation, Summary
    from planner.result import Plan

__all__ = [
    "PLAN_PLOTS",
    "available_plan_plots",
    "bound_fraction_figure",
    "coverage_figure",
    "epsilon_histogram_png",
    "figure_png",
    "figure_svg",
    "histogram_figure",
    "k_histogram_png",
    "ladder_figure",
    "plan_plots",
    "simulation_plots",
]

#: The plan figures, by file stem, in the order the answer key shows them.
PLAN_PLOTS = ("ladder", "bound-fraction", "coverage")

# Palette, with relative luminance (what greyscale keeps): ink 0.02, slate teal 0.09, rust
# 0.09, ochre 0.42, pale blue-grey band 0.79, rule grey 0.19.
_INK = "#1c2830"
_TEAL = "#1f5c63"
_RUST = "#7a4a12"
_OCHRE = "#d9a441"
_BAND = "#dfe8eb"
_RULE = "#6b7b83"
_WIDTH_IN = 6.6
# Behind point labels, so a line under a label never makes it hard to read.
_LABEL_BOX = {"boxstyle": "round,pad=0.15", "facecolor": "white", "edgecolor": "none"}
_PNG_DPI = 150
_BINS = 60
# Informative bound fractions of a test mixture (Deranleau, J. Am. Chem. Soc. 91 (1969) 4044;
# DESIGN.md section 3).
_INFORMATIVE = (0.2, 0.8)
# The equilibrium solver is documented for totals from 1e-9 to 5 mol/L; the sweep stays inside.
_SWEEP_M = (1e-9, 5.0)
_SWEEP_POINTS = 320

_RC: dict[str, Any] = {
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],
    "font.size": 10.0,
    "axes.titlesize": 11.0,
    "axes.labelsize": 10.5,
    "xtick.labelsize": 9.5,
    "ytick.labelsize": 9.5,
    "legend.fontsize": 9.0,
    "axes.edgecolor": _INK,
    "axes.labelcolor": _INK,
    "text.color": _INK,
    "xtick.color": _INK,
    "ytick.color": _INK,
    "axes.prop_cycle": f"cycler(color=['{_TEAL}', '{_RUST}', '{_OCHRE}', '{_INK}'])",
    # Tick labels are formatted here with Unicode superscripts (see _power_label): matplotlib's
    # mathtext parser, built on first use, measured at most of a second per run.
    "axes.formatter.use_mathtext": False,
    "hatch.color": _RULE,
    "hatch.linewidth": 0.6,
    # Layout is chosen per figure (constrained, then fixed); a matplotlibrc must not add one.
    "figure.autolayout": False,
    "figure.constrained_layout.use": False,
    "svg.fonttype": "none",
    # A fixed salt makes the SVG's clip-path ids the same on every run (otherwise random).
    "svg.hashsalt": "planner-plots",
    "svg.id": None,
}


@contextmanager
def _style() -> Iterator[None]:
    import matplotlib

    settings: Any = _RC  # rc_context's stub lists every key as a Literal; ours are a subset
    with matplotlib.rc_context(settings):
        yield


def _new_figure(height_in: float) -> tuple[Figure, Axes]:
    """A figure of the standard width; ``height_in`` [in] excludes the legend rows."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    figure = Figure(figsize=(_WIDTH_IN, height_in), dpi=_PNG_DPI, layout="constrained")
    FigureCanvasAgg(figure)
    return figure, figure.add_subplot()


def _text(text: str) -> str:
    """Free text (species names, ids) safe from matplotlib's ``$...$`` mathtext."""
    return text.replace("$", r"\$")


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def _power(exponent: int) -> str:
    return "10" + str(exponent).translate(_SUPERSCRIPT)


def _power_label(value: float, _position: object = None) -> str:
    """A value as ``1.92×10⁻⁴``, ``10⁻³`` or ``0``, with Unicode superscripts."""
    if value == 0 or not math.isfinite(value):
        return "0"
    exponent = math.floor(math.log10(abs(value)) + 1e-9)
    mantissa = float(f"{value / 10.0**exponent:.3g}")
    if mantissa >= 10.0:
        mantissa, exponent = mantissa / 10.0, exponent + 1
    if exponent in (0, 1, 2):
        return f"{mantissa * 10.0**exponent:.3g}"
    if abs(mantissa - 1.0) < 1e-9:
        return _power(exponent)
    return f"{mantissa:.3g}×{_power(exponent)}"


def _concentration_axis(axis: Any, *, log: bool) -> None:
    """Concentration ticks [mol/L]: powers of ten on a log axis; on a linear axis, plain
    numbers with the shared power of ten written at the end of the axis (``×10⁻⁴``).

    Call it after the axis limits are set. matplotlib's mathtext is avoided (see ``_RC``).
    """
    from matplotlib.ticker import FuncFormatter, LogLocator, MaxNLocator, NullFormatter

    if log:
        axis.set_major_formatter(FuncFormatter(_power_label))
        axis.set_major_locator(LogLocator(base=10.0, numticks=12))
        axis.set_minor_formatter(NullFormatter())
        return
    high = max(abs(v) for v in axis.get_view_interval())
    exponent = math.floor(math.log10(high)) if high > 0 else 0
    if exponent in (-1, 0, 1, 2):
        exponent = 0
    scale = 10.0**exponent
    formatter = FuncFormatter(lambda value, _position: f"{value / scale:g}")
    if exponent:
        formatter.set_offset_string("×" + _power(exponent))
    axis.set_major_locator(MaxNLocator(nbins=6, steps=[1, 2, 2.5, 5, 10]))
    axis.set_major_formatter(formatter)


# Legend entries longer than this many characters get one column, so none is cut off at the
# figure's edge (two columns of 9 pt text fit about 42 characters each in 6.6 in).
_TWO_COLUMN_CHARS = 42
# Height of one legend row at 9 pt [in].
_LEGEND_ROW_IN = 0.22


def _finish(figure: Figure, axes: Axes, columns: int = 2) -> Figure:
    """Put the legend under the axes, grow the figure to hold it, and fix the layout once.

    ``columns`` is the most legend columns; long entries get fewer. The layout is computed
    by one Agg draw at the PNG resolution, whose pixels :func:`_both` then encodes as the
    PNG; constrained layout would otherwise run again on every save (it is about half of the
    drawing time). Positions are fractions of the figure, so one layout serves PNG and SVG.
    """
    handles, labels = axes.get_legend_handles_labels()
    if handles:
        longest = max(len(label) for label in labels)
        if columns > 1 and longest * columns > _TWO_COLUMN_CHARS * 2:
            columns = max(1, (_TWO_COLUMN_CHARS * 2) // longest)
        rows = math.ceil(len(handles) / columns)
        width, height = figure.get_size_inches()
        figure.set_size_inches(width, height + rows * _LEGEND_ROW_IN)
        figure.legend(handles, labels, loc="outside lower center", ncols=columns, frameon=False)
    figure.canvas.draw()
    # No layout engine at all from here on ("none" would leave a placeholder engine, for
    # which savefig draws the figure once more before saving); with figure.autolayout and
    # figure.constrained_layout.use off (_RC), None means exactly that.
    figure.set_layout_engine(None)
    return figure


def _amount(value: float) -> str:
    """A concentration for a label: ``0.25``, ``0.0643`` or ``1.92×10⁻⁴`` (3 figures)."""
    if 1e-2 <= abs(value) < 1e4:
        return plain(value, 3)
    return _power_label(value)


def figure_png(figure: Figure, *, dpi: int = _PNG_DPI) -> bytes:
    """A figure as PNG bytes, without the software tag (so the bytes do not name versions).

    Parameters
    ----------
    figure
        From one of the ``*_figure`` functions.
    dpi
        Resolution [dots per inch].
    """
    buffer = io.BytesIO()
    with _style():
        figure.savefig(buffer, format="png", dpi=dpi, metadata={"Software": None})
    return buffer.getvalue()


def figure_svg(figure: Figure) -> bytes:
    """A figure as SVG bytes: text as text, fixed ids, no date, no version string."""
    buffer = io.BytesIO()
    with _style():
        figure.savefig(buffer, format="svg", metadata={"Date": None, "Creator": "planner"})
    return buffer.getvalue()


def _both(stem: str, figure: Figure) -> dict[str, bytes]:
    """PNG and SVG of a figure just finished by :func:`_finish`.

    The PNG is the canvas that :func:`_finish` drew, encoded as ``savefig`` would encode it
    (the same call matplotlib's Agg backend makes), so the figure is drawn twice, not three
    times; the bytes equal :func:`figure_png`'s.
    """
    from matplotlib.image import imsave

    canvas: Any = figure.canvas
    assert figure.dpi == _PNG_DPI
    # None drops the entry, as in savefig; imsave's stub allows only str values.
    no_software: Any = {"Software": None}
    buffer = io.BytesIO()
    imsave(
        buffer,
        np.asarray(canvas.buffer_rgba()),
        format="png",
        origin="upper",
        dpi=_PNG_DPI,
        metadata=no_software,
    )
    return {f"{stem}.png": buffer.getvalue(), f"{stem}.svg": figure_svg(figure)}


# ---------------------------------------------------------------------------------------------
# What the plan figures need
# ---------------------------------------------------------------------------------------------


def available_plan_plots(plan: Plan) -> tuple[str, ...]:
    """The plan figures that apply to a plan, by stem (a subset of :data:`PLAN_PLOTS`).

    The ladder and the bound-fraction sweep need standards and a coloured product (absorbing,
    for the ladder) holding the limiting reagent, the sweep also standards that hold some of
    the limiting reagent; the coverage figure needs test mixtures.
    """
    standards = plan.by_role("standard")
    names = []
    if standards:
        limiting = plan.inputs.design.limiting
        if plan.inputs.measured_species.epsilon > 0:
            names.append("ladder")
        holding = any(m.initial_M.get(limiting, 0.0) > 0 for m in standards)
        if holding and plan.inputs.excess is not None:
            names.append("bound-fraction")
    if plan.by_role("test"):
        names.append("coverage")
    return tuple(names)


def _not_applicable(plan: Plan, stem: str) -> None:
    if stem not in available_plan_plots(plan):
        reasons = {
            "ladder": "standards and an absorbing product holding the limiting reagent",
            "bound-fraction": "standards and a product of the limiting and an excess reagent",
            "coverage": "test mixtures",
        }
        raise ValueError(f"the {stem} figure needs {reasons[stem]}; this plan has none")


def _id_group(ids: Sequence[str]) -> str:
    """``S1``, ``S1, S3`` or ``S1–S5`` (a run of consecutive numbers)."""
    if len(ids) <= 2:
        return ", ".join(ids)
    prefix = ids[0].rstrip("0123456789")
    numbers = [i[len(prefix) :] for i in ids]
    if all(i.startswith(prefix) and n.isdigit() for i, n in zip(ids, numbers, strict=True)):
        values = [int(n) for n in numbers]
        if values == list(range(values[0], values[0] + len(values))):
            return f"{ids[0]}–{ids[-1]}"
    return ", ".join(ids)


# ---------------------------------------------------------------------------------------------
# 1. The calibration ladder
# ---------------------------------------------------------------------------------------------


def ladder_figure(plan: Plan) -> Figure:
    """The planned calibration ladder: predicted reading against coloured-product concentration.

    Parameters
    ----------
    plan
        A finished plan with standards.

    Returns
    -------
    Figure
        One axes. x: equilibrium concentration of the coloured product [mol/L] (top axis: the
        Beer-Lambert absorbance it gives, blank included [unitless]); y: photometer reading
        [unitless]. Series (``gid``): ``window`` (the linear window, a shaded band),
        ``beer-lambert`` (the reading without stray light, dashed), ``stray-light`` (the
        photometer's response with the plan's stray-light fraction, solid), ``standards``
        (each standard's predicted reading at its coloured-product concentration, labelled
        S1...), ``assumed`` (the same readings where the usual analysis places them, at the
        limiting reagent's total divided by its coefficient, hollow), ``blank`` (the blank's
        reading, square).

    Raises
    ------
    ValueError
        When the plan has no standards or no absorbing product holding the limiting reagent.

    Notes
    -----
    The curves are A_obs = log10((1 + s) / (10^-A + s)) of A = A_0 + b eps c, with A_0 the
    blank's Beer-Lambert absorbance (:func:`planner.lab.photometer.true_from_observed` of its
    reading) and eps the coloured product's molar absorptivity
    (:func:`planner.lab.photometer.observed_absorbance`; DESIGN.md section 3).
    """
    from planner.lab.photometer import (
        observed_absorbance,
        stray_light_ceiling,
        true_from_observed,
    )

    _not_applicable(plan, "ladder")
    species = plan.inputs.measured_species
    product = species.name
    limiting = plan.inputs.design.limiting
    coefficient = species.formula[limiting]
    instrument = plan.inputs.instrument
    stray = instrument.stray_light
    slope = instrument.path_length_cm * species.epsilon  # A per mol/L of product
    low, high = instrument.absorbance_window
    ceiling = stray_light_ceiling(stray)
    standards = plan.by_role("standard")
    blanks = plan.by_role("blank")

    x_std = np.array([m.equilibrium_M.get(product, 0.0) for m in standards])
    y_std = np.array([m.absorbance for m in standards])
    x_assumed = np.array([m.initial_M.get(limiting, 0.0) / coefficient for m in standards])
    base = 0.0
    if blanks and blanks[0].absorbance < ceiling:
        base = float(true_from_observed(blanks[0].absorbance, stray))
    top_c = (float(true_from_observed(high, stray)) - base) / slope if high < ceiling else 0.0
    x_max = 1.08 * max(float(x_std.max()), float(x_assumed.max()), top_c)
    if not x_max > 0:  # no product anywhere and no window top below the ceiling: A = 1
        x_max = 1.0 / slope
    concentration = np.linspace(0.0, x_max, 240)
    beer_lambert = base + slope * concentration
    reading = observed_absorbance(beer_lambert, stray)
    deficit = high - float(observed_absorbance(high, stray))

    with _style():
        figure, axes = _new_figure(3.9)
        axes.axhspan(
            low,
            high,
            facecolor=_BAND,
            edgecolor=_RULE,
            linestyle=":",
            linewidth=0.9,
            zorder=0,
            gid="window",
            label=f"linear window {plain(low, 3)}–{plain(high, 3)}",
        )
        axes.plot(
            concentration,
            beer_lambert,
            color=_INK,
            linestyle="--",
            linewidth=1.1,
            gid="beer-lambert",
            label="Beer-Lambert, no stray light",
        )
        axes.plot(
            concentration,
            reading,
            color=_TEAL,
            linewidth=2.0,
            gid="stray-light",
            label=f"stray light {plain(100 * stray, 3)} %: {significant(deficit, 2)} low at "
            f"{plain(high, 3)}",
        )
        axes.plot(
            x_assumed,
            y_std,
            linestyle="none",
            marker="o",
            markersize=8,
            markerfacecolor="none",
            markeredgecolor=_RUST,
            markeredgewidth=1.3,
            gid="assumed",
            label=f"standards at total {_text(limiting)} (usual analysis)",
        )
        axes.plot(
            x_std,
            y_std,
            linestyle="none",
            marker="o",
            markersize=6.5,
            markerfacecolor=_TEAL,
            markeredgecolor=_INK,
            gid="standards",
            label="standards, predicted",
        )
        for mixture, x, y in zip(standards, x_std, y_std, strict=True):
            axes.annotate(
                _text(mixture.id),
                (float(x), float(y)),
                xytext=(-6, 5),
                textcoords="offset points",
                ha="right",
                fontsize=9.5,
            )
        if blanks:
            blank_ids = _id_group([m.id for m in blanks])
            x_blank = [m.equilibrium_M.get(product, 0.0) for m in blanks]
            y_blank = [m.absorbance for m in blanks]
            axes.plot(
                x_blank,
                y_blank,
                linestyle="none",
                marker="s",
                markersize=7,
                markerfacecolor=_OCHRE,
                markeredgecolor=_INK,
                zorder=4,
                gid="blank",
                label=f"blank {_text(blank_ids)}",
            )
            axes.annotate(
                _text(blank_ids),
                (x_blank[0], y_blank[0]),
                xytext=(8, 0),
                textcoords="offset points",
                va="center",
                fontsize=9.5,
                bbox=_LABEL_BOX,
            )
        # A small margin below zero and left of zero keeps the blank's marker off the frame.
        axes.set_xlim(-0.015 * x_max, x_max)
        _concentration_axis(axes.xaxis, log=False)
        # The curves may run past the top: the ladder, not the curve's far end, sets the scale.
        y_top = max(high, float(y_std.max())) * 1.12
        axes.set_ylim(min(0.0, float(reading.min())) - 0.025 * y_top, y_top)
        axes.set_xlabel(f"{_text(product)} concentration at equilibrium [mol/L]")
        axes.set_ylabel("predicted reading A [unitless]")

        def to_absorbance(c_M: ArrayLike) -> NDArray[np.float64]:
            return base + slope * np.asarray(c_M, dtype=float)

        def to_concentration(a: ArrayLike) -> NDArray[np.float64]:
            return (np.asarray(a, dtype=float) - base) / slope

        top = axes.secondary_xaxis("top", functions=(to_absorbance, to_concentration))
        top.set_xlabel("Beer-Lambert absorbance (no stray light) [unitless]", fontsize=9.5)
        axes.set_title(
            f"Planned calibration ladder: {_text(_id_group([m.id for m in standards]))}"
            + (f" and blank {_text(_id_group([m.id for m in blanks]))}" if blanks else ""),
            loc="left",
        )
        return _finish(figure, axes)


# ---------------------------------------------------------------------------------------------
# 2. Bound fraction against the excess
# ---------------------------------------------------------------------------------------------


def _sweep(
    plan: Plan, base_totals_M: NDArray[np.float64], excess_index: int, excess_M: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Bound fraction of the limiting reagent over a sweep of the excess total.

    Returns (all products, the coloured product only), each shape (n,) [unitless].
    """
    from planner.forward import bound_fraction_sweep

    inputs = plan.inputs
    limiting = inputs.reaction.components.index(inputs.design.limiting)
    return bound_fraction_sweep(
        inputs.reaction, base_totals_M, limiting, inputs.measured, excess_index, excess_M
    )


def _crossing(x: NDArray[np.float64], y: NDArray[np.float64], level: float) -> float | None:
    """First x where an increasing curve reaches ``level`` (log-linear interpolation)."""
    above = np.nonzero(y >= level)[0]
    if above.size == 0:
        return None
    i = int(above[0])
    if i == 0:
        return float(x[0])
    t = (level - y[i - 1]) / (y[i] - y[i - 1])
    return float(10 ** (math.log10(x[i - 1]) + t * (math.log10(x[i]) - math.log10(x[i - 1]))))


def bound_fraction_figure(plan: Plan) -> Figure:
    """Bound fraction of the limiting reagent against the total excess concentration.

    Parameters
    ----------
    plan
        A finished plan with standards.

    Returns
    -------
    Figure
        One axes, log x. x: total concentration of the reagent in excess [mol/L]; y: fraction
        of the limiting reagent held in product species, weighted by coefficient [unitless].
        Series (``gid``): ``sweep`` (the solver's curve at the standards' highest
        limiting-reagent total), ``sweep-lowest`` (at their lowest, dashed, when the curves
        differ by more than 0.005 somewhere), ``coloured-only`` (held in the coloured product
        alone, dotted, when other products hold more than 0.01 of the limiting reagent
        somewhere), ``tolerance`` (the line 1 - tolerance),
        ``needed`` (the smallest excess meeting it), ``beyond-stock`` (excess totals beyond the
        strongest excess stock, hatched) and ``standards`` (the plan's standards).

    Raises
    ------
    ValueError
        When the plan has no standards or no product of the limiting and an excess reagent.

    Notes
    -----
    Each point of the sweep is an exact mass-action solution
    (:func:`planner.chem.equilibrium.solve_equilibrium`) at the first standard's component
    totals with the limiting reagent's total set to the standards' extreme and the excess
    reagent's total swept. For a 1:1 product, f = K[M]/(1 + K[M]) with [M] the free excess
    (DESIGN.md section 3).
    """
    _not_applicable(plan, "bound-fraction")
    standards = plan.by_role("standard")
    excess = plan.inputs.excess
    assert excess is not None
    reaction = plan.inputs.reaction
    components = reaction.components
    limiting = plan.inputs.design.limiting
    limiting_index = components.index(limiting)
    excess_index = components.index(excess)
    tolerance = plan.inputs.design.assumption_tolerance
    level = 1.0 - tolerance

    x_std = np.array([m.initial_M.get(excess, 0.0) for m in standards])
    f_std = np.array([m.bound_fraction for m in standards])
    l_std = np.array([m.initial_M.get(limiting, 0.0) for m in standards])
    base = np.array([standards[0].initial_M.get(c, 0.0) for c in components], dtype=float)
    highest = base.copy()
    highest[limiting_index] = float(l_std.max())
    lowest = base.copy()
    lowest[limiting_index] = float(l_std.min())

    # Range: from a bound fraction of a few per cent to past the tolerance, and always the
    # standards and the strongest excess stock, inside the solver's documented range.
    wide = np.logspace(math.log10(_SWEEP_M[0]), math.log10(_SWEEP_M[1]), 200)
    wide_bound, _ = _sweep(plan, highest, excess_index, wide)
    start = _crossing(wide, wide_bound, 0.03) or _SWEEP_M[0]
    end = _crossing(wide, wide_bound, 1.0 - tolerance / 10.0) or _SWEEP_M[1]
    stock_M = max(
        (
            s.contains_M.get(excess, 0.0)
            for s in plan.inputs.stocks
            if not s.diluent and s.contains_M.get(limiting, 0.0) == 0.0
        ),
        default=0.0,
    )
    positive = x_std[x_std > 0]
    x_low = min(start, float(positive.min()) / 3.0) if positive.size else start
    x_high = max(end, float(x_std.max()) * 3.0, 1.6 * stock_M)
    x_low, x_high = max(x_low, _SWEEP_M[0]), min(x_high, _SWEEP_M[1])
    x = np.logspace(math.log10(x_low), math.log10(x_high), _SWEEP_POINTS)
    bound_high, coloured_high = _sweep(plan, highest, excess_index, x)
    needed = _crossing(x, bound_high, level)
    if needed is None:
        wide_needed = _crossing(wide, wide_bound, level)
        needed = wide_needed if wide_needed is not None and wide_needed <= x_high else None

    with _style():
        figure, axes = _new_figure(3.9)
        if 0.0 < stock_M < x_high:
            axes.axvspan(
                stock_M,
                x_high,
                facecolor="none",
                edgecolor=_RULE,
                hatch="//",
                linewidth=0.0,
                zorder=0,
                gid="beyond-stock",
                label=f"beyond the excess stock ({_amount(stock_M)} mol/L)",
            )
        axes.plot(
            x,
            bound_high,
            color=_TEAL,
            linewidth=2.0,
            gid="sweep",
            label=f"solver at {_text(limiting)} total {_amount(float(l_std.max()))} mol/L",
        )
        bound_low, _ = _sweep(plan, lowest, excess_index, x)
        # The lowest standard's curve only when it can be told apart from the highest's.
        if float(np.max(np.abs(bound_low - bound_high))) > 0.005:
            axes.plot(
                x,
                bound_low,
                color=_TEAL,
                linestyle="--",
                linewidth=1.4,
                gid="sweep-lowest",
                label=f"solver at {_text(limiting)} total {_amount(float(l_std.min()))} mol/L",
            )
        # Drawn only when it can be told apart from the curve of all products (1 % of the axis).
        if float(np.max(bound_high - coloured_high)) > 0.01:
            coloured = plan.inputs.measured_species.name
            axes.plot(
                x,
                coloured_high,
                color=_RUST,
                linestyle=":",
                linewidth=1.8,
                gid="coloured-only",
                label=f"held in {_text(coloured)} only",
            )
        axes.axhline(
            level,
            color=_INK,
            linestyle="-.",
            linewidth=1.1,
            gid="tolerance",
            label=f"tolerance: 1 − {plain(tolerance, 3)} = {plain(level, 4)} bound",
        )
        if needed is not None:
            axes.axvline(
                needed,
                color=_RUST,
                linestyle=(0, (5.0, 1.5, 1.5, 1.5, 1.5, 1.5)),
                linewidth=1.3,
                gid="needed",
                label=f"smallest sufficient excess {_amount(needed)} mol/L",
            )
        else:
            axes.text(
                0.02,
                0.5,
                f"tolerance not reached below {_amount(x_high)} mol/L",
                transform=axes.transAxes,
                fontsize=9.5,
            )
        axes.plot(
            x_std,
            f_std,
            linestyle="none",
            marker="o",
            markersize=7,
            markerfacecolor=_OCHRE,
            markeredgecolor=_INK,
            zorder=4,
            gid="standards",
            label="the plan's standards",
        )
        groups: dict[tuple[float, float], list[str]] = {}
        for mixture, xs, fs in zip(standards, x_std, f_std, strict=True):
            key = (round(math.log10(max(float(xs), 1e-300)), 2), round(float(fs), 3))
            groups.setdefault(key, []).append(mixture.id)
        for ids in groups.values():
            first = next(m for m in standards if m.id == ids[0])
            axes.annotate(
                _text(_id_group(ids)),
                (first.initial_M.get(excess, 0.0), first.bound_fraction),
                xytext=(-9, 0),
                textcoords="offset points",
                ha="right",
                va="center",
                fontsize=9.5,
                bbox=_LABEL_BOX,
            )
        axes.set_xscale("log")
        axes.set_xlim(x_low, x_high)
        _concentration_axis(axes.xaxis, log=True)
        axes.set_ylim(0.0, 1.06)
        axes.set_xlabel(f"{_text(excess)} total (reagent in excess) [mol/L]")
        axes.set_ylabel(f"bound fraction of {_text(limiting)} [unitless]")
        axes.set_title(
            f"Is the excess large enough? Standards {_text(_id_group([m.id for m in standards]))}",
            loc="left",
        )
        axes.grid(True, which="major", color=_BAND, linewidth=0.8, zorder=0)
        return _finish(figure, axes)


# ---------------------------------------------------------------------------------------------
# 3. Coverage of bound fraction by the tests
# ---------------------------------------------------------------------------------------------


def coverage_figure(plan: Plan) -> Figure:
    """The test mixtures' bound fractions against the informative range.

    Parameters
    ----------
    plan
        A finished plan with test mixtures.

    Returns
    -------
    Figure
        One axes. x: bound fraction of the limiting reagent [unitless], 0 to 1; one row per
        test, the first at the top, labelled with its id. Series (``gid``): ``informative``
        (0.2-0.8, shaded), ``design-range`` (the design's ``bound_fraction_range``, two dashed
        lines), ``tests`` (one diamond per test) and ``span`` (the span of the set, with the
        span the design asked for).

    Raises
    ------
    ValueError
        When the plan has no test mixtures.
    """
    _not_applicable(plan, "coverage")
    tests = plan.by_role("test")
    design = plan.inputs.design
    fractions = np.array([m.bound_fraction for m in tests])
    rows = np.arange(len(tests), 0, -1, dtype=float)
    low, high = design.bound_fraction_range

    with _style():
        figure, axes = _new_figure(1.9 + 0.32 * len(tests))
        axes.axvspan(
            *_INFORMATIVE,
            facecolor=_BAND,
            edgecolor="none",
            zorder=0,
            gid="informative",
            label=f"informative about K, {plain(_INFORMATIVE[0], 2)}–{plain(_INFORMATIVE[1], 2)}",
        )
        for k, edge in enumerate((low, high)):
            axes.axvline(
                edge,
                color=_RUST,
                linestyle="--",
                linewidth=1.2,
                gid="design-range",
                label=f"design range {plain(low, 3)}–{plain(high, 3)}" if k == 0 else None,
            )
        axes.hlines(rows, 0.0, fractions, color=_RULE, linewidth=0.8, zorder=1)
        axes.plot(
            fractions,
            rows,
            linestyle="none",
            marker="D",
            markersize=7,
            markerfacecolor=_TEAL,
            markeredgecolor=_INK,
            zorder=3,
            gid="tests",
            label="test mixtures",
        )
        for f, y in zip(fractions, rows, strict=True):
            axes.annotate(
                f"{f:.3f}",
                (float(f), float(y)),
                xytext=(7, 0),
                textcoords="offset points",
                va="center",
                fontsize=9,
            )
        span_y = 0.25
        if len(tests) > 1:
            span = float(fractions.max() - fractions.min())
            axes.annotate(
                "",
                xy=(float(fractions.max()), span_y),
                xytext=(float(fractions.min()), span_y),
                arrowprops={"arrowstyle": "<->", "color": _INK, "linewidth": 1.1},
                gid="span",
            )
            axes.text(
                float(fractions.max()) + 0.015,
                span_y,
                f"span {span:.2f} (asked ≥ {plain(design.bound_fraction_span, 3)})",
                va="center",
                fontsize=9,
            )
        axes.set_yticks(rows, [_text(m.id) for m in tests])
        axes.set_ylim(span_y - 0.45, len(tests) + 0.6)
        axes.set_xlim(0.0, 1.0)
        axes.set_xlabel(f"bound fraction of {_text(design.limiting)} [unitless]")
        axes.set_ylabel("test mixture")
        axes.set_title("Coverage of bound fraction by the test mixtures", loc="left")
        return _finish(figure, axes, columns=3)


def plan_plots(plan: Plan) -> dict[str, bytes]:
    """Every plan figure that applies, as ``plots/<stem>.png`` and ``plots/<stem>.svg``.

    Stems are those of :func:`available_plan_plots`; values are the files' bytes.
    """
    builders = {
        "ladder": ladder_figure,
        "bound-fraction": bound_fraction_figure,
        "coverage": coverage_figure,
    }
    files: dict[str, bytes] = {}
    for stem in available_plan_plots(plan):
        files.update(_both(f"plots/{stem}", builders[stem](plan)))
    return files


# ---------------------------------------------------------------------------------------------
# 4. The virtual class
# ---------------------------------------------------------------------------------------------


def _finite(values: NDArray[np.float64]) -> NDArray[np.float64]:
    result: NDArray[np.float64] = values[np.isfinite(values)]
    return result


def histogram_figure(simulation: Simulation, quantity: Literal["K", "epsilon"] = "K") -> Figure:
    """Histogram of K or of eps over the virtual class, taught and exact analyses.

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
        One axes: the quantity on x, benches per bin on y; the taught analysis filled
        (``gid`` ``taught``), the exact fit as a hatched outline (``exact``), the true value as
        a dashed line (``true``), and each analysis's 95 % interval as a bar along the top; the
        legend sits below the axes so it never hides the data.
    """
    if quantity == "K":
        taught, exact = _finite(simulation.K_taught), _finite(simulation.K_exact)
        true_value = simulation.K_true
        summaries: tuple[Summary, Summary] = (simulation.taught.K, simulation.exact.K)
        symbol, unit = "K", "L/mol"
    else:
        taught = _finite(simulation.epsilon_taught)
        exact = _finite(simulation.epsilon_exact)
        true_value = simulation.epsilon_true
        summaries = (simulation.taught.epsilon, simulation.exact.epsilon)
        symbol, unit = "ε", "L mol⁻¹ cm⁻¹"
    both = np.concatenate([taught, exact]) if exact.size else taught
    low, high = (float(v) for v in np.quantile(both, [0.0005, 0.9995]))
    low, high = min(low, true_value), max(high, true_value)
    pad = 0.03 * (high - low) if high > low else 1.0
    bins = [float(edge) for edge in np.linspace(low - pad, high + pad, _BINS + 1)]

    with _style():
        figure, axes = _new_figure(3.9)
        axes.hist(
            taught,
            bins=bins,
            color=_TEAL,
            edgecolor=_TEAL,
            alpha=0.85,
            gid="taught",
            label=f"taught analysis (mean {significant(summaries[0].mean, 4)} {unit})",
        )
        if exact.size:
            axes.hist(
                exact,
                bins=bins,
                histtype="step",
                color=_OCHRE,
                linewidth=2.0,
                hatch="///",
                fill=False,
                gid="exact",
                label=f"exact fit (mean {significant(summaries[1].mean, 4)} {unit})",
            )
        axes.axvline(
            true_value,
            color=_INK,
            linestyle="--",
            linewidth=1.4,
            gid="true",
            label=f"true {symbol} {significant(true_value, 4)} {unit}",
        )
        top = axes.get_ylim()[1]
        for summary, colour, height, name in (
            (summaries[0], _TEAL, 1.04, "taught"),
            (summaries[1], _OCHRE, 1.09, "exact"),
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
