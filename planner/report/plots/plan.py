"""The plan figures: calibration ladder, bound fraction against the excess, test coverage.

See :mod:`planner.report.plots`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike, NDArray

from planner.report._format import plain, significant
from planner.report.plots._style import (
    _BAND,
    _INK,
    _LABEL_BOX,
    _OCHRE,
    _RULE,
    _RUST,
    _TEAL,
    _amount,
    _both,
    _concentration_axis,
    _finish,
    _new_figure,
    _style,
    _text,
)

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from planner.result import Plan


#: The plan figures, by file stem, in the order the answer key shows them.
PLAN_PLOTS = ("ladder", "bound-fraction", "coverage")
# Informative bound fractions of a test mixture (Deranleau, J. Am. Chem. Soc. 91 (1969) 4044;
# DESIGN.md section 3).
_INFORMATIVE = (0.2, 0.8)
# The equilibrium solver is documented for totals from 1e-9 to 5 mol/L; the sweep stays inside.
_SWEEP_M = (1e-9, 5.0)
_SWEEP_POINTS = 320

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


def _points(
    axes: Axes,
    x: ArrayLike,
    y: ArrayLike,
    *,
    marker: str,
    face: str,
    gid: str,
    label: str,
    size: float = 7.0,
    zorder: float = 2.0,
) -> None:
    """The plan's mixtures as markers of ``size`` points edged in ink, without a line
    (``gid`` names the series; ``zorder`` 2 is matplotlib's default for lines)."""
    axes.plot(
        x,
        y,
        linestyle="none",
        marker=marker,
        markersize=size,
        markerfacecolor=face,
        markeredgecolor=_INK,
        gid=gid,
        label=label,
        zorder=zorder,
    )


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
        S1...), ``assumed`` (the same readings where the all-bound analysis places them, at the
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
            label=f"standards at total {_text(limiting)} (all-bound analysis)",
        )
        _points(
            axes,
            x_std,
            y_std,
            marker="o",
            size=6.5,
            face=_TEAL,
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
            _points(
                axes,
                x_blank,
                y_blank,
                marker="s",
                face=_OCHRE,
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
        A finished plan whose standards hold the limiting reagent and a reagent in excess.

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
                hatch="//",
                edgecolor=_RULE,
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
        _points(
            axes,
            x_std,
            f_std,
            marker="o",
            face=_OCHRE,
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
        _points(
            axes,
            fractions,
            rows,
            marker="D",
            face=_TEAL,
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
