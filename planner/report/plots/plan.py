"""The plan figures: calibration ladder, bound fraction against the excess, test coverage.

See :mod:`planner.report.plots`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from planner.report._format import plain, significant
from planner.report.plots._style import BAND, INK, OCHRE, RULE, RUST, TEAL, amount
from planner.report.plots._svg import (
    Arrow,
    Band,
    Chart,
    Line,
    Note,
    Points,
    Rule,
    Scale,
    Segments,
    Stroke,
    TopAxis,
    array,
)

if TYPE_CHECKING:
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


# ---------------------------------------------------------------------------------------------
# 1. The calibration ladder
# ---------------------------------------------------------------------------------------------


def ladder_figure(plan: Plan) -> Chart:
    """The planned calibration ladder: predicted reading against coloured-product concentration.

    Parameters
    ----------
    plan
        A finished plan with standards.

    Returns
    -------
    Chart
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

    chart = Chart(
        "ladder",
        3.9,
        title=f"Planned calibration ladder: {_id_group([m.id for m in standards])}"
        + (f" and blank {_id_group([m.id for m in blanks])}" if blanks else ""),
    )
    chart.add(
        Band(
            "window",
            "y",
            low,
            high,
            fill=BAND,
            edge=Stroke(RULE, 0.9, (1.0, 1.6)),
            label=f"linear window {plain(low, 3)}–{plain(high, 3)}",
        )
    )
    chart.add(
        Line(
            "beer-lambert",
            concentration,
            beer_lambert,
            Stroke(INK, 1.1, (4.0, 2.0)),
            label="Beer-Lambert, no stray light",
        )
    )
    chart.add(
        Line(
            "stray-light",
            concentration,
            reading,
            Stroke(TEAL, 2.0),
            label=f"stray light {plain(100 * stray, 3)} %: {significant(deficit, 2)} low at "
            f"{plain(high, 3)}",
        )
    )
    chart.add(
        Points(
            "assumed",
            x_assumed,
            y_std,
            size=8.0,
            face="none",
            edge=RUST,
            edge_width=1.3,
            label=f"standards at total {limiting} (all-bound analysis)",
        )
    )
    chart.add(Points("standards", x_std, y_std, size=6.5, face=TEAL, label="standards, predicted"))
    for mixture, x, y in zip(standards, x_std, y_std, strict=True):
        chart.note(Note(mixture.id, float(x), float(y), dx=-6.0, dy=7.0, anchor="end"))
    if blanks:
        blank_ids = _id_group([m.id for m in blanks])
        x_blank = array([m.equilibrium_M.get(product, 0.0) for m in blanks])
        y_blank = array([m.absorbance for m in blanks])
        label = f"blank {blank_ids}"
        chart.add(Points("blank", x_blank, y_blank, marker="s", face=OCHRE, z=4.0, label=label))
        chart.note(Note(blank_ids, float(x_blank[0]), float(y_blank[0]), dx=8.0, halo=True))
    # A small margin below zero and left of zero keeps the blank's marker off the frame; the
    # curves may run past the top: the ladder, not the curve's far end, sets the scale.
    y_top = max(high, float(y_std.max())) * 1.12
    chart.x = Scale(-0.015 * x_max, x_max, label=f"{product} concentration at equilibrium [mol/L]")
    chart.y = Scale(
        min(0.0, float(reading.min())) - 0.025 * y_top,
        y_top,
        label="predicted reading A [unitless]",
    )
    chart.top = TopAxis(base, slope, "Beer-Lambert absorbance (no stray light) [unitless]")
    return chart


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


def bound_fraction_figure(plan: Plan) -> Chart:
    """Bound fraction of the limiting reagent against the total excess concentration.

    Parameters
    ----------
    plan
        A finished plan whose standards hold the limiting reagent and a reagent in excess.

    Returns
    -------
    Chart
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

    chart = Chart(
        "bound-fraction",
        3.9,
        title=f"Is the excess large enough? Standards {_id_group([m.id for m in standards])}",
        grid=True,
    )
    if 0.0 < stock_M < x_high:
        chart.add(
            Band(
                "beyond-stock",
                "x",
                stock_M,
                x_high,
                hatch=True,
                label=f"beyond the excess stock ({amount(stock_M)} mol/L)",
            )
        )
    chart.add(
        Line(
            "sweep",
            x,
            bound_high,
            Stroke(TEAL, 2.0),
            label=f"solver at {limiting} total {amount(float(l_std.max()))} mol/L",
        )
    )
    bound_low, _ = _sweep(plan, lowest, excess_index, x)
    # The lowest standard's curve only when it can be told apart from the highest's.
    if float(np.max(np.abs(bound_low - bound_high))) > 0.005:
        chart.add(
            Line(
                "sweep-lowest",
                x,
                bound_low,
                Stroke(TEAL, 1.4, (4.0, 2.0)),
                label=f"solver at {limiting} total {amount(float(l_std.min()))} mol/L",
            )
        )
    # Drawn only when it can be told apart from the curve of all products (1 % of the axis).
    if float(np.max(bound_high - coloured_high)) > 0.01:
        coloured = plan.inputs.measured_species.name
        chart.add(
            Line(
                "coloured-only",
                x,
                coloured_high,
                Stroke(RUST, 1.8, (1.0, 2.5)),
                label=f"held in {coloured} only",
            )
        )
    chart.add(
        Rule(
            "tolerance",
            "y",
            level,
            Stroke(INK, 1.1, (5.0, 2.0, 1.0, 2.0)),
            label=f"tolerance: 1 − {plain(tolerance, 3)} = {plain(level, 4)} bound",
        )
    )
    if needed is not None:
        chart.add(
            Rule(
                "needed",
                "x",
                needed,
                Stroke(RUST, 1.3, (5.0, 1.5, 1.5, 1.5, 1.5, 1.5)),
                label=f"smallest sufficient excess {amount(needed)} mol/L",
            )
        )
    else:
        chart.note(
            Note(f"tolerance not reached below {amount(x_high)} mol/L", 0.02, 0.5, coords="axes")
        )
    chart.add(Points("standards", x_std, f_std, face=OCHRE, z=4.0, label="the plan's standards"))
    # One label for each cluster of markers too close to be told apart (within 3 % of the
    # axes in both directions), so labels never print over each other.
    decades = math.log10(x_high / x_low)
    clusters: list[list[int]] = []
    for i in sorted(range(len(standards)), key=lambda k: (float(x_std[k]), float(f_std[k]))):
        if clusters:
            j = clusters[-1][-1]
            near_x = abs(math.log10(max(float(x_std[i]), 1e-300) / max(float(x_std[j]), 1e-300)))
            if near_x < 0.03 * decades and abs(float(f_std[i] - f_std[j])) < 0.03 * 1.06:
                clusters[-1].append(i)
                continue
        clusters.append([i])
    for members in clusters:
        members.sort()
        chart.note(
            Note(
                _id_group([standards[k].id for k in members]),
                float(np.mean(x_std[members])),
                float(np.mean(f_std[members])),
                dx=-9.0,
                anchor="end",
                halo=True,
            )
        )
    chart.x = Scale(x_low, x_high, log=True, label=f"{excess} total (reagent in excess) [mol/L]")
    chart.y = Scale(0.0, 1.06, label=f"bound fraction of {limiting} [unitless]")
    return chart


# ---------------------------------------------------------------------------------------------
# 3. Coverage of bound fraction by the tests
# ---------------------------------------------------------------------------------------------


def coverage_figure(plan: Plan) -> Chart:
    """The test mixtures' bound fractions against the informative range.

    Parameters
    ----------
    plan
        A finished plan with test mixtures.

    Returns
    -------
    Chart
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

    chart = Chart(
        "coverage",
        1.9 + 0.32 * len(tests),
        title="Coverage of bound fraction by the test mixtures",
        legend_columns=3,
    )
    chart.add(
        Band(
            "informative",
            "x",
            *_INFORMATIVE,
            fill=BAND,
            label=f"informative about K, {plain(_INFORMATIVE[0], 2)}–{plain(_INFORMATIVE[1], 2)}",
        )
    )
    for k, edge in enumerate((low, high)):
        chart.add(
            Rule(
                "design-range",
                "x",
                edge,
                Stroke(RUST, 1.2, (4.0, 2.0)),
                label=f"design range {plain(low, 3)}–{plain(high, 3)}" if k == 0 else None,
            )
        )
    chart.add(Segments("stems", np.zeros_like(rows), rows, fractions, rows, Stroke(RULE, 0.8)))
    chart.add(Points("tests", fractions, rows, marker="D", face=TEAL, label="test mixtures"))
    for f, y in zip(fractions, rows, strict=True):
        chart.note(Note(f"{f:.3f}", float(f), float(y), dx=7.0, size=9.0))
    span_y = 0.25
    if len(tests) > 1:
        span = float(fractions.max() - fractions.min())
        chart.add(
            Arrow("span", float(fractions.min()), float(fractions.max()), span_y, Stroke(INK, 1.1))
        )
        chart.note(
            Note(
                f"span {span:.2f} (asked ≥ {plain(design.bound_fraction_span, 3)})",
                float(fractions.min() + fractions.max()) / 2,
                span_y,
                dy=8.0,
                anchor="middle",
                size=9.0,
                halo=True,
            )
        )
    chart.x = Scale(0.0, 1.0, label=f"bound fraction of {design.limiting} [unitless]")
    chart.y = Scale(
        span_y - 0.45,
        len(tests) + 0.6,
        label="test mixture",
        ticks=tuple(float(r) for r in rows),
        tick_labels=tuple(m.id for m in tests),
    )
    return chart


def plan_plots(plan: Plan) -> dict[str, bytes]:
    """Every plan figure that applies, as ``plots/<stem>.svg``.

    Stems are those of :func:`available_plan_plots`; values are the files' bytes.
    """
    builders = {
        "ladder": ladder_figure,
        "bound-fraction": bound_fraction_figure,
        "coverage": coverage_figure,
    }
    return {f"plots/{stem}.svg": builders[stem](plan).svg() for stem in available_plan_plots(plan)}
