"""Printed sheets of a plan: pipetting sheets per bench, the prep-room sheet, the answer key.

Each sheet comes as Markdown and as self-contained, printable HTML, rendered from the jinja2
templates in ``planner/report/templates``; :func:`mixtures_csv` gives the recipes and their
predictions as CSV. Every function returns text and writes nothing: the date on a sheet is a
parameter (the report layer never reads the clock), and where the text goes is the caller's
business (:mod:`planner.report.outdir` for an output folder).

The Python side builds small view objects with every number already rounded for people
(volumes to their device's reading resolution, other values to 3-4 significant figures); the
templates only lay them out. The cautions come from :mod:`planner.report.cautions`.

Text from the plan file (title, stock ids, species names, notes) is made inert in every
output without the templates having to ask: the HTML templates autoescape every value, the
Markdown templates pass every value through :func:`planner.report._format.markdown_text`
(a jinja2 ``finalize`` hook), and every text cell of the CSV goes through
:func:`planner.report._format.csv_text`.
"""

from __future__ import annotations

import csv
import functools
import io
import math
from collections.abc import Callable, Sequence
from typing import Any

import jinja2

from planner.records import record
from planner.report._format import (
    additions_of,
    amount_text,
    checks_worst_first,
    csv_text,
    deliveries_text,
    devices_text,
    is_to_the_mark,
    markdown_text,
    plain,
    relative_bias,
    scientific,
    significant,
    stock_roles,
    stocks_in_addition_order,
    volume,
)
from planner.report.bench_text import bias_line, medium_line, ranges_line
from planner.report.cautions import cautions_for, label_hazards
from planner.result import Mixture, Plan, Role, StockPreparation, StockRole, stock_volume_text

__all__ = [
    "READINGS_COLUMNS",
    "BenchSlot",
    "answer_key_html",
    "answer_key_md",
    "bench_sheet_html",
    "bench_sheet_md",
    "mixtures_csv",
    "prep_sheet_html",
    "prep_sheet_md",
    "readings_template_csv",
]


@record
class BenchSlot:
    """Which bench a pipetting sheet is for.

    Attributes
    ----------
    section
        Section number, from 1.
    bench
        Bench number within the section, from 1; ``None`` prints a blank to fill in (one
        sheet copied for every bench of a section).
    of_sections
        Sections in the whole session when a plan serves one section of several (variants);
        ``None`` takes the plan's own ``session.sections``.
    """

    section: int
    bench: int | None = None
    of_sections: int | None = None


# ---------------------------------------------------------------------------------------------
# Templates
# ---------------------------------------------------------------------------------------------


@functools.cache
def _environment(markdown: bool) -> jinja2.Environment:
    """The jinja2 environment of the HTML templates, or of the Markdown ones.

    Every ``{{ value }}`` is escaped on the way out, so a template cannot forget to: HTML by
    autoescaping, Markdown by the ``finalize`` hook, which jinja2 applies to the result of
    every expression (constants included) before it is written. Markdown a template means
    as Markdown (``**``, ``[ ]``, ``______``) is template text, never an expression.
    """
    return jinja2.Environment(
        loader=jinja2.PackageLoader("planner.report", "templates"),
        autoescape=not markdown,
        finalize=markdown_text if markdown else None,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
        # The templates ship with the package and do not change while it runs: no file
        # check on every lookup (one per sheet, hundreds for the variants of a session).
        auto_reload=False,
    )


def _render(name: str, **context: Any) -> str:
    """Render the template ``name`` (``*.md`` or ``*.html``) with its escaping."""
    return _environment(name.endswith(".md")).get_template(name).render(**context)


# ---------------------------------------------------------------------------------------------
# Pipetting sheets
# ---------------------------------------------------------------------------------------------


@record
class _Delivery:
    volume: str
    devices: str


@record
class _Column:
    stock: str
    position: int
    part: str


@record
class _RecipeRow:
    id: str
    role: Role
    cells: tuple[tuple[_Delivery, ...], ...]
    total: str


@record
class _BenchPage:
    section: int
    bench: int | None


_PART_WORDS: dict[StockRole, str] = {
    "diluent": "diluent",
    "excess": "reagent in excess",
    "limiting": "limiting",
}


def _part(stock_id: str, role: StockRole | None) -> str:
    """The stock's part in the order of addition, unless its id already says so."""
    words = _PART_WORDS[role] if role is not None else ""
    return "" if words == stock_id else words


def _recipe_rows(plan: Plan, stocks: Sequence[str]) -> list[_RecipeRow]:
    rows = []
    for mixture in plan.mixtures:
        cells = []
        for stock_id in stocks:
            deliveries = []
            for addition in additions_of(mixture, stock_id):
                if is_to_the_mark(addition):
                    deliveries.append(_Delivery("to the mark", devices_text(addition.devices)))
                else:
                    repeated = deliveries_text(plan.inputs, addition)
                    deliveries.append(
                        _Delivery(
                            amount_text(plan.inputs, addition)
                            + (f" ({repeated})" if repeated else ""),
                            devices_text(addition.devices),
                        )
                    )
            cells.append(tuple(deliveries))
        rows.append(
            _RecipeRow(
                id=mixture.id,
                role=mixture.role,
                cells=tuple(cells),
                total=f"{volume(mixture.total_volume_mL, 2)} mL",
            )
        )
    return rows


def _order_lines(plan: Plan, columns: Sequence[_Column]) -> tuple[str, str]:
    """The order-of-addition line and the line on making up the volume."""
    sequence = ", ".join(f"{c.position}. {c.stock}" for c in columns)
    diluent = plan.inputs.diluent
    diluent_name = f" ({diluent.id})" if diluent is not None else ""
    uses_flask = plan.inputs.design.vessel_kind == "volumetric-flask" or any(
        is_to_the_mark(a) for m in plan.mixtures for a in m.additions
    )
    # Common practice: the limiting reagent goes in last, into the diluent and the excess
    # already there; in a volumetric flask the diluent "to the mark" necessarily comes last.
    practice = (
        "the reagent in excess first, then the limiting reagent, the diluent to the mark last"
        if uses_flask
        else "the diluent first, then the reagent in excess, the limiting reagent last"
    )
    order = f"Order of addition: {sequence}. Common practice: {practice}."
    if uses_flask:
        making_up = (
            f"Flasks are filled to the mark with the diluent{diluent_name} after the last "
            "addition; then stopper and invert to mix."
        )
    else:
        making_up = (
            "Tubes: the additions make up the total volume; mix well after the last addition."
        )
    return order, making_up


def _shared_piston_pipettes(plan: Plan) -> list[str]:
    """The piston pipettes that deliver more than one stock, by id, in shelf order."""
    stocks: dict[str, set[str]] = {}
    for mixture in plan.mixtures:
        for addition in mixture.additions:
            for device in addition.devices:
                stocks.setdefault(device, set()).add(addition.stock)
    return [
        d.id
        for d in plan.inputs.glassware
        if d.kind == "piston-pipette" and len(stocks.get(d.id, ())) > 1
    ]


def _bench_base(plan: Plan, date: str) -> dict[str, Any]:
    """The parts of a pipetting sheet shared by every bench of a plan."""
    session = plan.inputs.session
    roles = stock_roles(plan.inputs)
    stocks = stocks_in_addition_order(plan)
    columns = [
        _Column(stock=s, position=i + 1, part=_part(s, roles.get(s))) for i, s in enumerate(stocks)
    ]
    order_line, making_up_line = _order_lines(plan, columns)
    shared_tips = _shared_piston_pipettes(plan)
    if shared_tips:
        making_up_line += (
            f" Piston pipettes ({', '.join(shared_tips)}): a fresh tip for each stock, so no "
            "stock carries into another (common practice)."
        )
    return {
        "title": plan.inputs.title,
        "date": date,
        "sections": session.sections,
        "benches_per_section": session.benches_per_section,
        "replicates": session.replicates,
        "columns": columns,
        "rows": _recipe_rows(plan, stocks),
        "order_line": order_line,
        "making_up_line": making_up_line,
        "cautions": cautions_for(plan.inputs),
    }


def _bench_context(
    plan: Plan, date: str, slots: Sequence[BenchSlot], base: dict[str, Any] | None = None
) -> dict[str, Any]:
    context = dict(base if base is not None else _bench_base(plan, date))
    context["pages"] = [_BenchPage(section=s.section, bench=s.bench) for s in slots]
    if slots and slots[0].of_sections:
        context["sections"] = slots[0].of_sections
    return context


def bench_sheets(plan: Plan, *, date: str, slots: Sequence[BenchSlot]) -> list[tuple[str, str]]:
    """Markdown and HTML pipetting sheets of many benches, the shared parts built once.

    The sheets of one section's numbered benches differ only in the bench number the header
    prints (``{{ page.bench }}``, the one place the templates use it besides ``is none``):
    benches 1 and 2 are rendered, and when they differ in exactly that one character, every
    other bench's sheet is bench 1's with its number put there; otherwise each is rendered.

    Returns
    -------
    list of (markdown, html)
        One pair per slot, in order.
    """
    base = _bench_base(plan, date)

    def render(slot: BenchSlot) -> tuple[str, str]:
        return (
            _render("bench.md", **_bench_context(plan, date, [slot], base)),
            _render("bench.html", **_bench_context(plan, date, [slot], base)),
        )

    sheets: dict[int, tuple[str, str]] = {}
    numbered: dict[tuple[int, int | None], list[int]] = {}
    for position, slot in enumerate(slots):
        if slot.bench is None:
            sheets[position] = render(slot)
        else:
            numbered.setdefault((slot.section, slot.of_sections), []).append(position)
    for (section, of_sections), positions in numbered.items():
        if len(positions) <= 2:
            sheets.update((position, render(slots[position])) for position in positions)
            continue
        first = render(BenchSlot(section, 1, of_sections))
        second = render(BenchSlot(section, 2, of_sections))
        markdown = _numbered_sheet(first[0], second[0])
        html = _numbered_sheet(first[1], second[1])
        for position in positions:
            bench = slots[position].bench
            assert bench is not None
            sheets[position] = (
                (markdown(bench), html(bench))
                if markdown is not None and html is not None
                else render(slots[position])
            )
    return [sheets[position] for position in range(len(slots))]


def _numbered_sheet(first: str, second: str) -> Callable[[int], str] | None:
    """The sheet of any bench from the sheets of benches 1 and 2, when they differ in one
    character only, ``1`` in the first and ``2`` in the second; else None."""
    if len(first) != len(second) or first == second:
        return None
    # The first position where they differ (binary search on equal prefixes).
    low, high = 0, len(first)
    while low < high:
        middle = (low + high) // 2
        if first[: middle + 1] == second[: middle + 1]:
            low = middle + 1
        else:
            high = middle
    at = low
    if first[at] != "1" or second[at] != "2" or first[at + 1 :] != second[at + 1 :]:
        return None
    head, tail = first[:at], first[at + 1 :]
    return lambda bench: f"{head}{bench}{tail}"


def bench_sheet_md(plan: Plan, *, date: str, slot: BenchSlot) -> str:
    """The pipetting sheet of one bench (or of every bench of a section), as Markdown.

    Parameters
    ----------
    plan
        A finished plan.
    date
        The date printed in the header (any text; the caller decides, e.g. ``2025-03-14``).
    slot
        Section and bench number; a bench of ``None`` prints a blank to fill in.

    Returns
    -------
    str
        Header, one row per mixture with each stock's volume and devices in order of addition,
        the total volume and a tick box per addition, the order of addition, how the volume is
        made up, and the cautions.
    """
    return _render("bench.md", **_bench_context(plan, date, [slot]))


def bench_sheet_html(plan: Plan, *, date: str, slots: Sequence[BenchSlot]) -> str:
    """Pipetting sheets as one printable HTML document, one bench (or section) per page.

    Parameters
    ----------
    plan
        A finished plan.
    date
        The date printed in each header.
    slots
        The pages to print, in order; at least one.

    Returns
    -------
    str
        A self-contained HTML document (inline CSS, A4 and US Letter print layout).
    """
    if not slots:
        raise ValueError("bench_sheet_html needs at least one bench slot")
    return _render("bench.html", **_bench_context(plan, date, slots))


# ---------------------------------------------------------------------------------------------
# Prep-room sheet
# ---------------------------------------------------------------------------------------------


@record
class _PreparationRow:
    stock: str
    flasks: str
    solid: str
    molar_mass: str
    purity: str
    mass: str
    target: str
    medium: str


@record
class _Label:
    stock: str
    lines: tuple[str, ...]


@record
class _TotalsRow:
    stock: str
    per_bench: str
    per_section: str
    session: str
    to_prepare: str
    available: str
    verdict: str
    short: bool


@record
class _CheckRow:
    name: str
    status: str
    detail: str


def _concentrations(contains_M: dict[str, float]) -> str:
    return ", ".join(f"{ion} {plain(c_M, 4)} mol/L" for ion, c_M in contains_M.items())


def _preparation_rows(plan: Plan) -> list[_PreparationRow]:
    rows = []
    diluent = plan.inputs.diluent
    medium_id = diluent.id if diluent is not None else None
    for prep in plan.preparations:
        has_solid = bool(prep.solid_formula)
        rows.append(
            _PreparationRow(
                stock=prep.stock,
                # The solvent alone is set out as it is: no volumetric flask to fill.
                flasks="-"
                if _solvent_alone(plan, prep)
                else f"{prep.flasks} × {plain(prep.flask_mL, 4)} mL",
                solid=prep.solid_formula if has_solid else _no_solid(prep, medium_id, plan),
                molar_mass=f"{significant(prep.molar_mass_g_per_mol, 5)} g/mol"
                if has_solid
                else "-",
                purity=f"{plain(100 * prep.purity, 4)} %" if has_solid else "-",
                mass=f"{significant(prep.mass_g, 4)} g" if has_solid else "-",
                target=f"{prep.provides} {plain(prep.concentration_M, 4)} mol/L"
                if prep.provides
                else "-",
                medium=prep.medium or "-",
            )
        )
    return rows


def _solvent_alone(plan: Plan, prep: StockPreparation) -> bool:
    """Whether a stock is the solvent itself: nothing dissolved, no salt, no recipe."""
    stock = next((st for st in plan.inputs.stocks if st.id == prep.stock), None)
    return (
        stock is not None
        and not stock.contains_M
        and not (prep.solid_formula or prep.source or prep.salt_formula)
    )


def _no_solid(prep: StockPreparation, medium_id: str | None, plan: Plan) -> str:
    """The Solid cell of a stock without one: its dilution, or who supplies it."""
    if prep.source:
        return (
            f"none: dilute {significant(prep.aliquot_mL, 4)} mL of {prep.source} per flask "
            "to the mark"
        )
    if _solvent_alone(plan, prep):
        return "none: the solvent itself, set out as it is (see To prepare below)"
    if prep.stock == medium_id:
        return "none listed (the medium itself)"
    return "none listed: must be supplied ready-made"


def _salt_lines(plan: Plan) -> list[str]:
    """The inert salt of design.ionic_medium to weigh into each flask, one line per stock."""
    medium = plan.inputs.design.ionic_medium
    if medium is None:
        return []
    lines = [
        f"{prep.stock}: {plain(prep.salt_M, 4)} mol/L {prep.salt_formula}, "
        f"{significant(prep.salt_mass_g, 4)} g per {plain(prep.flask_mL, 4)} mL flask"
        for prep in plan.preparations
        if prep.salt_formula
    ]
    diluent = plan.inputs.diluent
    making = plan.totals.for_stocks.get(diluent.id, 0.0) if diluent is not None else 0.0
    if diluent is not None and making > 0 and diluent.medium_salt_M > 0:
        lines.append(
            f"make up the other stocks in {diluent.id} before its salt ({significant(making)} "
            f"mL of it, no {medium.salt}): each stock's own salt above brings it to "
            f"{plain(medium.ionic_strength_M, 3)} mol/L; only the {diluent.id} for the "
            "benches is salted"
        )
    return lines


def _labels(plan: Plan) -> list[_Label]:
    preparations = {p.stock: p for p in plan.preparations}
    labels = []
    for stock in plan.inputs.stocks:
        contents = _concentrations(stock.contains_M) or "the solvent alone, no reagent"
        lines = [f"Contains: {contents}"]
        prep = preparations.get(stock.id)
        if prep is not None and prep.medium:
            lines.append(f"Medium: {prep.medium}")
        if prep is not None and prep.solid_formula:
            lines.append(f"Made from: {prep.solid_formula}")
        elif prep is not None and prep.source:
            lines.append(f"Made from: {prep.source}, diluted")
        hazards = label_hazards(stock)
        if hazards:
            lines.append("Caution: " + "; ".join(hazards))
        lines.append(f"Plan: {plan.inputs.title}")
        labels.append(_Label(stock=stock.id, lines=tuple(lines)))
    return labels


def _availability(available_mL: float | None, session_mL: float, needed_mL: float) -> str:
    if available_mL is None:
        return "no limit given"
    if available_mL >= needed_mL:
        return f"enough ({stock_volume_text(available_mL - needed_mL)} mL spare)"
    if available_mL >= session_mL:
        return (
            f"SHORT of the margin by {stock_volume_text(needed_mL - available_mL)} mL "
            "(covers the bare need)"
        )
    return f"SHORT by {stock_volume_text(needed_mL - available_mL)} mL"


def _totals_rows(plan: Plan) -> list[_TotalsRow]:
    totals = plan.totals
    order = [stock.id for stock in plan.inputs.stocks]
    order += [s for s in totals.to_prepare if s not in order]
    rows = []
    for stock_id in order:
        if stock_id not in totals.to_prepare:
            continue
        try:
            available_mL = plan.inputs.stock(stock_id).available_mL
        except KeyError:
            available_mL = None
        needed_mL = totals.to_prepare[stock_id]
        session_mL = totals.session.get(stock_id, 0.0)
        rows.append(
            _TotalsRow(
                stock=stock_id,
                per_bench=significant(totals.per_bench.get(stock_id, 0.0)),
                per_section=significant(totals.per_section.get(stock_id, 0.0)),
                session=significant(session_mL),
                to_prepare=significant(needed_mL),
                available="-" if available_mL is None else significant(available_mL),
                verdict=_availability(available_mL, session_mL, needed_mL),
                short=available_mL is not None and available_mL < needed_mL,
            )
        )
    return rows


def _open_checks(plan: Plan) -> list[_CheckRow]:
    return [
        _CheckRow(name=c.name, status=c.status.upper(), detail=c.detail)
        for c in checks_worst_first(plan.checks)
        if c.status != "pass"
    ]


def _prep_context(plan: Plan, date: str) -> dict[str, Any]:
    session = plan.inputs.session
    benches = session.sections * session.benches_per_section
    session_line = (
        f"{session.sections} section(s) × {session.benches_per_section} bench(es) × "
        f"{session.replicates} replicate(s) = {session.sets} full set(s) of mixtures."
    )
    totals = plan.totals
    # Sections of a variants folder have recipes of their own: the combined sheet's per-bench
    # and per-section columns are then the largest section's, and the session their sum.
    alike = all(
        math.isclose(
            totals.per_section.get(s, 0.0) * session.sections, v, rel_tol=1e-9, abs_tol=1e-9
        )
        for s, v in totals.session.items()
    )
    columns = (
        "Per section = per bench × benches per section × replicates; session = the sum over "
        "sections."
        if alike
        else "The sections' recipes differ: per bench and per section are the largest of any "
        "section; session = the sum over the sections."
    )
    dead_volume_line = (
        f"To prepare = session need × (1 + margin {plain(100 * session.margin, 3)} %) + a dead "
        f"volume of {plain(totals.dead_volume_mL, 3)} mL per stock assumed left unusable in "
        f"each bench container. {columns}"
    )
    making = plan.totals.for_stocks
    if making:
        dead_volume_line += (
            " To prepare also holds what making the stocks takes: "
            + ", ".join(f"{significant(v)} mL of {k}" for k, v in making.items())
            + " (the medium that fills each flask to the mark, and the aliquots of dilutions)."
        )
    labels_line = (
        f"Print one label per bench container ({benches}) and one per prep flask of each stock."
    )
    prepared = {p.stock for p in plan.preparations}
    unprepared = [s for s in plan.totals.to_prepare if s not in prepared]
    return {
        "title": plan.inputs.title,
        "date": date,
        "session_line": session_line,
        "preparations": _preparation_rows(plan),
        "salts": _salt_lines(plan),
        "unprepared": unprepared,
        "labels": _labels(plan),
        "labels_line": labels_line,
        "totals": _totals_rows(plan),
        "dead_volume_line": dead_volume_line,
        "open_checks": _open_checks(plan),
        "notes": list(plan.notes),
        "cautions": cautions_for(plan.inputs),
    }


def prep_sheet_md(plan: Plan, *, date: str) -> str:
    """The prep-room sheet as Markdown.

    Parameters
    ----------
    plan
        A finished plan: its stocks, preparations, totals, open checks and notes.
    date
        The date printed in the header (any text; the caller decides).

    Returns
    -------
    str
        Stocks to make (flask size and count, mass of solid with formula, molar mass and
        purity, medium), bottle labels, stock totals per bench, section and session and to
        prepare with the dead-volume assumption written out, available against needed, any
        check that did not pass, and the cautions.
    """
    return _render("prep.md", **_prep_context(plan, date))


def prep_sheet_html(plan: Plan, *, date: str) -> str:
    """The prep-room sheet as a self-contained printable HTML document (see prep_sheet_md)."""
    return _render("prep.html", **_prep_context(plan, date))


# ---------------------------------------------------------------------------------------------
# Answer key
# ---------------------------------------------------------------------------------------------


@record
class _AnswerRow:
    id: str
    role: Role
    absorbance: str
    u_absorbance: str
    products: tuple[str, ...]
    bound_fraction: str
    ionic_strength: str


@record
class _PredictionRow:
    quantity: str
    expected: str
    u: str
    assumed: str


@record
class _AnalysisView:
    """One analysis's expected result on the answer key: a ``heading``, an ``intro``
    paragraph, the table's ``rows`` (quantity, expected value, u, value assumed; none when
    there is no prediction) and the paragraphs (``lines``) below the table."""

    heading: str
    intro: str
    rows: tuple[_PredictionRow, ...]
    lines: tuple[str, ...]


def _prediction_rows(
    *quantities: tuple[str, float, float, float],
) -> tuple[_PredictionRow, ...]:
    """Rows (quantity, expected, u, assumed), values to 4 significant figures and u to 2."""
    return tuple(
        _PredictionRow(name, significant(value, 4), significant(u, 2), significant(assumed, 4))
        for name, value, u, assumed in quantities
    )


def _analysis_views(plan: Plan) -> tuple[_AnalysisView, ...]:
    """The expected results of both analyses, the one the plan is designed for first."""
    species = plan.inputs.measured_species
    unit = species.K_unit
    k_label = f"K of {species.name}" + (f" ({unit})" if unit else "")
    eps_label = "Molar absorptivity (L mol⁻¹ cm⁻¹)"
    fit = plan.global_fit
    fit_view = _AnalysisView(
        heading="Expected result of the global fit",
        intro=(
            f"The global fit adjusts K and the molar absorptivity of {species.name} together "
            "to every blank-subtracted standard and test reading with the full equilibrium "
            "model. From readings without error it returns the values the plan assumes, so "
            "it carries no bias to first order."
            if fit is not None
            else "No global-fit prediction: the plan's standards and tests do not separate "
            "K from the molar absorptivity."
        ),
        rows=()
        if fit is None
        else _prediction_rows(
            (eps_label, fit.epsilon, fit.u_epsilon, species.epsilon),
            (k_label, fit.K, fit.u_K, plan.K_at_benches),
        ),
        lines=_fit_medium_line(plan),
    )
    p = plan.prediction
    causes = bias_line(plan.uncertainty.bias_causes if plan.uncertainty is not None else None)
    if p is not None:
        tests = [m.id for m in plan.mixtures if m.role == "test"]
        per_test = "; ".join(
            f"{tests[i] if i < len(tests) else f'test {i + 1}'} {significant(k, 4)}"
            for i, k in enumerate(p.K_per_test)
        )
        bound_view = _AnalysisView(
            heading="Expected result of the all-bound analysis",
            intro=(
                "The all-bound analysis takes the limiting reagent of the standards as fully "
                "bound. It is expected to give:"
            ),
            rows=_prediction_rows(
                (eps_label, p.epsilon, p.u_epsilon, p.epsilon_true),
                (k_label, p.K, p.u_K, p.K_true),
            ),
            lines=(
                "Relative bias of K from the all-bound assumption: "
                f"{relative_bias(p.K_bias_from_assumption, 3)}.",
                *((causes,) if causes else ()),
                *((f"K from each test mixture: {per_test} {unit}.",) if per_test else ()),
            ),
        )
    elif plan.analysis == "global-fit":
        bound_view = _AnalysisView(
            heading="The all-bound analysis",
            intro=(
                "The all-bound analysis does not suit this plan (see the analysis check), so "
                "its numbers are not given: they would mean nothing here."
            ),
            rows=(),
            lines=(),
        )
    else:
        bound_view = _AnalysisView(
            heading="Expected result of the all-bound analysis",
            intro="No prediction: the plan gives no test mixtures to analyse.",
            rows=(),
            lines=(),
        )
    if plan.analysis == "global-fit":
        return (fit_view, bound_view)
    return (bound_view, fit_view) if fit is not None else (bound_view,)


def _fit_medium_line(plan: Plan) -> tuple[str, ...]:
    """The ionic medium's share of the global fit's K, said apart (not in its values)."""
    medium = plan.uncertainty.medium if plan.uncertainty is not None else None
    if plan.global_fit is None or medium is None:
        return ()
    bias = medium.K_bias_global_fit
    return (medium_line(bias),) if math.isfinite(bias) and bias != 0 else ()


def _designed_for(plan: Plan) -> str:
    """The sentence that says which analysis the plan is designed for."""
    if plan.analysis == "global-fit":
        return (
            "This plan is designed for the global fit (see the analysis check): its test "
            "mixtures are chosen to make the global fit's K most precise."
        )
    return (
        "This plan is designed for the all-bound analysis: its standards bind the limiting "
        "reagent as fully as the shelf allows and its tests make the mean K most precise."
    )


@record
class _Figure:
    """A plot shown on the answer key: file stem under ``plots/``, heading, caption."""

    stem: str
    heading: str
    caption: str


def _figures(plan: Plan, stems: Sequence[str]) -> tuple[_Figure, ...]:
    """The answer key's figures, in the order given, for the plot stems that were written."""
    limiting = plan.inputs.design.limiting
    tolerance = plain(plan.inputs.design.assumption_tolerance, 3)
    low, high = plan.inputs.design.bound_fraction_range
    texts = {
        "ladder": (
            "Planned calibration ladder",
            "Predicted reading of each standard (filled circles) and of the blank (square) "
            "against the coloured product's concentration, inside the photometer's linear "
            "window (band); the solid curve is the photometer's response with stray light, "
            "the dashed line Beer-Lambert without it. Hollow circles: where the all-bound analysis "
            f"places the standards, taking all of the {limiting} as the coloured product.",
        ),
        "bound-fraction": (
            "Bound fraction against the excess",
            f"Fraction of the {limiting} held in the products as the total excess changes "
            f"(equilibrium solver, at the standards' {limiting} concentrations). For the all-bound "
            f"analysis the standards should sit above the line 1 − {tolerance}.",
        ),
        "coverage": (
            "Coverage of bound fraction by the tests",
            f"Bound fraction of the {limiting} in each test mixture. The band 0.2–0.8 is where a "
            f"test is informative about K; the dashed lines are the design's range "
            f"{plain(low, 3)}–{plain(high, 3)}.",
        ),
    }
    return tuple(_Figure(stem, *texts[stem]) for stem in stems if stem in texts)


@record
class _RangeRow:
    quantity: str
    low: str
    high: str


def _ranges_view(plan: Plan) -> tuple[_RangeRow, ...]:
    """The 95 % ranges a class will likely report: each analysis's eps and K (the one the plan
    is designed for first) and every standard's and test's reading (value -/+ 1.96 u(A) of
    the mixture)."""
    unit = plan.inputs.measured_species.K_unit
    k_unit = f" ({unit})" if unit else ""
    eps_unit = " (L mol⁻¹ cm⁻¹)"
    fit_rows: list[_RangeRow] = []
    if plan.global_fit is not None:
        fit_rows = [
            _RangeRow(
                f"Molar absorptivity, global fit{eps_unit}", *_pair(plan.global_fit.epsilon_ci95)
            ),
            _RangeRow(f"K, global fit{k_unit}", *_pair(plan.global_fit.K_ci95)),
        ]
    bound_rows: list[_RangeRow] = []
    p = plan.prediction
    if p is not None and p.epsilon_ci95 is not None and p.K_ci95 is not None:
        bound_rows = [
            _RangeRow(f"Molar absorptivity, all-bound analysis{eps_unit}", *_pair(p.epsilon_ci95)),
            _RangeRow(f"K, mean of the tests, all-bound analysis{k_unit}", *_pair(p.K_ci95)),
        ]
        tests = [m.id for m in plan.mixtures if m.role == "test"]
        for mixture_id, interval in zip(tests, p.K_per_test_ci95, strict=False):
            bound_rows.append(
                _RangeRow(f"K from {mixture_id}, all-bound analysis{k_unit}", *_pair(interval))
            )
    rows = fit_rows + bound_rows if plan.analysis == "global-fit" else bound_rows + fit_rows
    if not rows:
        return ()
    for m in plan.mixtures:
        # A blank reads zero within its noise: a range reaching below zero says nothing.
        if m.role != "blank" and math.isfinite(m.u_absorbance):
            low, high = m.absorbance_ci95
            rows.append(_RangeRow(f"Reading of {m.id}", f"{low:.3f}", f"{high:.3f}"))
    return tuple(rows)


def _blank_note(plan: Plan) -> str:
    """Where each reagent blank should read: its expected reading -/+ 1.96 u(A), said as a
    tolerance (a blank's range reaches below zero, which a From-To row would print)."""
    parts = [
        f"{m.id} {m.absorbance:.3f} ± {1.96 * m.u_absorbance:.3f}"
        for m in plan.mixtures
        if m.role == "blank" and math.isfinite(m.u_absorbance)
    ]
    if not parts:
        return ""
    return "Each reagent blank should read (± 1.96 u(A)): " + "; ".join(parts) + "."


def _pair(interval: tuple[float, float]) -> tuple[str, str]:
    return significant(interval[0], 4), significant(interval[1], 4)


def _coloured_species(plan: Plan) -> tuple[str, ...]:
    species = plan.inputs.reaction.species
    coloured = tuple(sp.name for sp in species if sp.epsilon > 0)
    return coloured or tuple(sp.name for sp in species)


# Product concentrations the expected-readings table holds beside its five other columns, and
# each table after it (a mixture column and these) holds at most: a column of 4-significant-
# figure numbers takes about 80 px of the 703 px printable width (the browser tests measure).
_MAIN_PRODUCTS = 4
_MORE_PRODUCTS = 6


@record
class _ConcentrationTable:
    """Product concentrations that did not fit the expected-readings table: ``names`` and,
    per mixture, its id and their values."""

    names: tuple[str, ...]
    rows: tuple[tuple[str, tuple[str, ...]], ...]


def _concentration(m: Mixture, name: str) -> str:
    return scientific(m.equilibrium_M[name], 4) if name in m.equilibrium_M else "-"


def _answer_context(plan: Plan, date: str, plots: Sequence[str] = ()) -> dict[str, Any]:
    coloured = _coloured_species(plan)
    products, more = coloured[:_MAIN_PRODUCTS], coloured[_MAIN_PRODUCTS:]
    rows = [
        _AnswerRow(
            id=m.id,
            role=m.role,
            absorbance=f"{m.absorbance:.3f}",
            u_absorbance=significant(m.u_absorbance, 2),
            products=tuple(_concentration(m, name) for name in products),
            bound_fraction=f"{m.bound_fraction:.3f}",
            ionic_strength=significant(m.ionic_strength_M, 3),
        )
        for m in plan.mixtures
    ]
    more_tables = [
        _ConcentrationTable(
            names=names,
            rows=tuple(
                (m.id, tuple(_concentration(m, name) for name in names)) for m in plan.mixtures
            ),
        )
        for names in (
            more[start : start + _MORE_PRODUCTS] for start in range(0, len(more), _MORE_PRODUCTS)
        )
    ]
    instrument = plan.inputs.instrument
    return {
        "title": plan.inputs.title,
        "date": date,
        "products": products,
        "rows": rows,
        "more_concentrations": more_tables,
        "designed_for": _designed_for(plan),
        "analyses": _analysis_views(plan),
        "ranges": _ranges_view(plan),
        "blank_note": _blank_note(plan),
        "ranges_include": ranges_line(plan.inputs),
        "limiting": plan.inputs.design.limiting,
        "wavelength": significant(instrument.wavelength_nm, 4),
        "path_length": significant(instrument.path_length_cm, 3),
        "open_checks": _open_checks(plan),
        "notes": list(plan.notes),
        "figures": _figures(plan, plots),
        "cautions": cautions_for(plan.inputs),
    }


def answer_key_md(plan: Plan, *, date: str, plots: Sequence[str] = ()) -> str:
    """The answer key as Markdown.

    Parameters
    ----------
    plan
        A finished plan.
    date
        The date printed in the header.
    plots
        Stems of the plot files written beside the sheet (``ladder``, ``bound-fraction``,
        ``coverage``, see :func:`planner.report.plots.plan_plots`); each is shown from
        ``plots/<stem>.svg`` with its caption. Empty: no plots.

    Returns
    -------
    str
        Per mixture the expected absorbance (blank not subtracted), the concentration of each
        coloured product and the bound fraction of the limiting reagent; the molar
        absorptivity and K the all-bound analysis is expected to give, with uncertainties and the
        bias of K, against the values the plan assumes; the 95 % ranges a class will likely
        report for eps, K, each test's K and each reading (value -/+ 1.96 u from the
        first-order budget of :mod:`planner.predict.uncertainty`), for acceptance windows;
        the plots, when given; and the cautions.
    """
    return _render("answer.md", **_answer_context(plan, date, plots))


def answer_key_html(plan: Plan, *, date: str, plots: Sequence[str] = ()) -> str:
    """The answer key as a printable HTML document (see answer_key_md).

    Self-contained but for the plots: each stem in ``plots`` is shown from
    ``plots/<stem>.svg`` (a path relative to the sheet), no wider than the printable width.
    """
    return _render("answer.html", **_answer_context(plan, date, plots))


# ---------------------------------------------------------------------------------------------
# CSV
# ---------------------------------------------------------------------------------------------


def _csv_number(value: float) -> str:
    """A number cell: the shortest text that reads back as the same float; empty for NaN."""
    value = float(value)
    return "" if math.isnan(value) else repr(value)


def mixtures_csv(plan: Plan) -> str:
    """The mixtures as CSV, one row per mixture, at full float precision.

    Parameters
    ----------
    plan
        A finished plan; its mixtures are the rows.

    Returns
    -------
    str
        Columns ``id``, ``role``, ``total_volume_mL``, ``volume_<stock>_mL`` for each stock in
        order of addition [mL], ``absorbance``, ``u_absorbance``, ``bound_fraction``,
        ``ionic_strength_M`` [mol/L], and ``<species>_M`` for each product species [mol/L].
        Lines end in ``\\n`` on every platform; a cell holding a comma, a quote or a line
        break is quoted (RFC 4180, Python's csv module).

    Notes
    -----
    Numbers are written as Python writes a float, the shortest text that reads back as the
    same value (``-0.5``, ``7.5e-05``), and stay numbers in a spreadsheet. Text cells (the
    mixture ids and roles, and the column names, which hold stock ids and species names
    from the plan file) follow the common practice (OWASP CSV injection guidance) of a
    leading apostrophe when they start with ``=``, ``+``, ``-``, ``@``, a tab or a carriage
    return, so that no spreadsheet runs them as a formula; NUL characters are dropped (see
    :func:`planner.report._format.csv_text`).
    """
    stocks = stocks_in_addition_order(plan)
    species = plan.inputs.reaction.species_names()
    header = [
        "id",
        "role",
        "total_volume_mL",
        *(f"volume_{s}_mL" for s in stocks),
        "absorbance",
        "u_absorbance",
        "bound_fraction",
        "ionic_strength_M",
        *(f"{name}_M" for name in species),
    ]
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    writer.writerow([csv_text(name) for name in header])
    for m in plan.mixtures:
        numbers = [
            m.total_volume_mL,
            *(m.volume_of(stock_id) for stock_id in stocks),
            m.absorbance,
            m.u_absorbance,
            m.bound_fraction,
            m.ionic_strength_M,
            *(m.equilibrium_M.get(name, 0.0) for name in species),
        ]
        writer.writerow([csv_text(m.id), csv_text(m.role), *(_csv_number(x) for x in numbers)])
    return buffer.getvalue()


#: The columns of the readings template, in order; ``planner analyse`` reads the same names.
READINGS_COLUMNS = ("section", "bench", "replicate", "mixture", "absorbance")


def readings_template_csv(sections: Sequence[tuple[int, Plan]]) -> str:
    """The readings template: one row per section, bench, replicate and mixture.

    Parameters
    ----------
    sections
        (section number, the plan that section makes), in order: every section of a plan,
        or one plan per section for variants.

    Returns
    -------
    str
        Columns :data:`READINGS_COLUMNS`; the absorbance is empty, to be filled in. Rows go
        section by section, bench by bench, replicate by replicate, and then mixture by
        mixture in the order of the bench sheet, so that the file is typed in as the sheet
        is read. Lines end in ``\\n``.
    """
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    writer.writerow(READINGS_COLUMNS)
    for number, plan in sections:
        session = plan.inputs.session
        for bench in range(1, session.benches_per_section + 1):
            for replicate in range(1, session.replicates + 1):
                for m in plan.mixtures:
                    writer.writerow([number, bench, replicate, csv_text(m.id), ""])
    return buffer.getvalue()
