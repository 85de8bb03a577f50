"""Terminal summary of a plan: the checks, the recipes, the stock totals and the prediction.

:func:`render_plan` builds a rich renderable and writes nothing; the CLI owns the Console. The
layout is meant to be read at a glance in 80 columns: statuses are spelled out as well as
coloured, so the summary reads the same without colour (``NO_COLOR``) or on paper.

Text that comes from the plan file (title, stock ids, check details that quote them, notes)
enters the renderable only as :class:`rich.text.Text`, never as a string: rich reads a string
cell as console markup (``[bold]``, ``[link=...]``) and emoji codes (``:warning:``), a Text
as the characters it holds.
"""

from __future__ import annotations

from rich import box
from rich.console import Group, RenderableType
from rich.table import Table
from rich.text import Text

from planner.report._format import (
    addition_decimals,
    additions_of,
    checks_worst_first,
    deliveries_text,
    devices_text,
    is_to_the_mark,
    plain,
    relative_bias,
    significant,
    stocks_in_addition_order,
    volume,
)
from planner.report.bench_text import bias_line, ranges_line
from planner.result import CHECK_STATUSES, Addition, Check, Plan, Status

__all__ = ["render_checks", "render_plan"]

_STATUS_STYLE: dict[Status, str] = {"fail": "bold red", "warn": "bold yellow", "pass": "green"}


def _plain(text: str) -> Text:
    """Text shown as written: no console markup, no emoji codes."""
    return Text(text)


def _status(status: Status) -> Text:
    """A check's status spelled out in capitals, coloured as well (the same on every table)."""
    return Text(status.upper(), style=_STATUS_STYLE[status])


def _verdict(plan: Plan) -> Text:
    counts = {status: sum(c.status == status for c in plan.checks) for status in CHECK_STATUSES}
    summary = f"{counts['fail']} failed, {counts['warn']} warning(s), {counts['pass']} passed"
    if counts["fail"]:
        return Text(f"PLAN HAS FAILED CHECKS ({summary})", style="bold red")
    if counts["warn"]:
        return Text(f"Plan usable with warnings ({summary})", style="bold yellow")
    return Text(f"All checks pass ({summary})", style="bold green")


def _header(plan: Plan) -> Text:
    session = plan.inputs.session
    design = plan.inputs.design
    vessel = "tubes" if design.vessel_kind == "tube" else "volumetric flasks"
    text = Text(plan.inputs.title or "Untitled plan", style="bold")
    text.append(
        f"\n{session.sections} section(s) × {session.benches_per_section} bench(es) × "
        f"{session.replicates} replicate(s); {plain(design.total_volume_mL)} mL {vessel}\n",
        style="",
    )
    text.append_text(_verdict(plan))
    return text


def _checks_table(plan: Plan) -> Table:
    table = Table(
        title="Checks", title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False, expand=False
    )
    table.add_column("status", no_wrap=True)
    table.add_column("check", overflow="fold")
    table.add_column("detail", ratio=1, overflow="fold")
    for check in checks_worst_first(plan.checks):
        table.add_row(_status(check.status), _plain(check.name), _plain(check.detail))
    return table


def _delivery(plan: Plan, addition: Addition) -> tuple[str, Text]:
    """The volume (or "to the mark") and the devices of one addition, as two cells; several
    deliveries of one device are spelled out ("2 x 1000 uL, then 650 uL")."""
    if is_to_the_mark(addition):
        amount = "to the mark"
    else:
        amount = volume(addition.volume_mL, addition_decimals(plan.inputs, addition))
        repeated = deliveries_text(plan.inputs, addition)
        if repeated:  # on lines of their own, so a long breakdown wraps in its column
            amount += f"\n({repeated})"
    return amount, _plain(devices_text(addition.devices))


def _mixtures_table(plan: Plan) -> Table:
    """One row per addition, grouped by mixture, so that every device is named by its full id
    (the name it has in the plan file, the JSON and the sheets) and still fits 80 columns."""
    stocks = stocks_in_addition_order(plan)
    table = Table(
        title="Mixtures (volumes in mL, stocks in order of addition)",
        title_justify="left",
        box=box.SIMPLE_HEAD,
        show_edge=False,
        padding=(0, 1, 0, 0),
        pad_edge=False,
    )
    table.add_column("id", no_wrap=True)
    table.add_column("role", no_wrap=True)
    table.add_column("stock", overflow="fold")
    table.add_column("volume", justify="right", min_width=6, max_width=22)
    table.add_column("devices", ratio=1)
    table.add_column("A", justify="right", no_wrap=True)
    table.add_column("bound", justify="right", no_wrap=True)
    for mixture in plan.mixtures:
        additions = [a for stock_id in stocks for a in additions_of(mixture, stock_id)]
        first = (
            _plain(mixture.id),
            _plain(mixture.role),
        )
        last = (f"{mixture.absorbance:.3f}", f"{mixture.bound_fraction:.3f}")
        if not additions:
            table.add_row(*first, "-", "", "", *last, end_section=True)
        for i, addition in enumerate(additions):
            amount, devices = _delivery(plan, addition)
            table.add_row(
                *(first if i == 0 else ("", "")),
                _plain(addition.stock),
                amount,
                devices,
                *(last if i == 0 else ("", "")),
                end_section=i == len(additions) - 1,
            )
    return table


def _totals_table(plan: Plan) -> Table:
    totals = plan.totals
    table = Table(
        title="Stock totals (mL)", title_justify="left", box=box.SIMPLE_HEAD, pad_edge=False
    )
    for name in ("stock", "per bench", "session", "to prepare", "available"):
        table.add_column(name, justify="left" if name == "stock" else "right")
    order = [stock.id for stock in plan.inputs.stocks]
    order += [s for s in totals.to_prepare if s not in order]
    for stock_id in order:
        if stock_id not in totals.to_prepare:
            continue
        needed_mL = totals.to_prepare[stock_id]
        try:
            available_mL = plan.inputs.stock(stock_id).available_mL
        except KeyError:
            available_mL = None
        if available_mL is None:
            available = Text("no limit")
        elif available_mL < needed_mL:
            available = Text(f"{significant(available_mL)} SHORT", style="bold red")
        else:
            available = Text(significant(available_mL))
        table.add_row(
            _plain(stock_id),
            significant(totals.per_bench.get(stock_id, 0.0)),
            significant(totals.session.get(stock_id, 0.0)),
            significant(needed_mL),
            available,
        )
    return table


def _prediction_line(plan: Plan) -> Text:
    """The expected K of both analyses, the one the plan is designed for first."""
    species = plan.inputs.measured_species
    unit = f" {species.K_unit}" if species.K_unit else ""
    fit = plan.global_fit
    prediction = plan.prediction
    fit_text = (
        f"global fit: K = {significant(fit.K, 4)} ± {significant(fit.u_K, 2)}{unit}"
        if fit is not None
        else "global fit: withheld, its numbers would mean nothing here (check "
        "prediction-meaningful)"
        if plan.analysis == "global-fit"
        else None
    )
    bound_text = (
        f"all-bound analysis: K = {significant(prediction.K, 4)} ± "
        f"{significant(prediction.u_K, 2)}{unit}, bias against the true K "
        f"{relative_bias(prediction.K_bias_from_assumption)}"
        if prediction is not None
        else "all-bound analysis: not applicable here"
        if plan.analysis == "global-fit"
        else None
    )
    parts = [fit_text, bound_text] if plan.analysis == "global-fit" else [bound_text, fit_text]
    shown = [p for p in parts if p]
    if not shown:
        return Text("Prediction: none (the plan gives no test mixtures to analyse).")
    designed = "global fit" if plan.analysis == "global-fit" else "all-bound analysis"
    bench = plan.K_at_benches
    given = float(10.0**species.log_beta)
    true_text = f"true K {significant(bench, 4)}{unit}"
    if significant(bench, 4) != significant(given, 4):
        true_text = (
            f"true K at the benches {significant(bench, 4)}{unit}, from the plan file's "
            f"{significant(given, 4)}"
        )
    return Text(f"Prediction (designed for the {designed}; {true_text}): " + "; ".join(shown))


def render_plan(plan: Plan) -> RenderableType:
    """A summary of a plan for the terminal, readable in 80 columns.

    Parameters
    ----------
    plan
        A finished plan, its checks and prediction included.

    Returns
    -------
    rich renderable
        Title and verdict, the checks (failures first), the mixtures with each stock's volume
        and devices, the stock totals against what is available, and the predicted K with its
        uncertainty and the bias of the all-bound analysis. Numbers are rounded for reading:
        volumes to the reading resolution of their device, the rest to 3-4 significant figures.
    """
    parts: list[RenderableType] = [
        _header(plan),
        _checks_table(plan),
        _mixtures_table(plan),
        _totals_table(plan),
        _prediction_line(plan),
        _bench_text(plan),
    ]
    if plan.notes:
        parts.append(Text("Notes:\n" + "\n".join(f"- {note}" for note in plan.notes)))
    return Group(*parts)


def render_checks(checks: tuple[Check, ...]) -> RenderableType:
    """The checks of ``planner verify`` as a table, failures first; every cell printed
    literally (details quote stock ids and species names from the plan file)."""
    table = Table(title="Verification", show_lines=False)
    table.add_column("status")
    table.add_column("check")
    table.add_column("detail", overflow="fold")
    for item in checks_worst_first(checks):
        table.add_row(_status(item.status), _plain(item.name), _plain(item.detail))
    return table


def _bench_text(plan: Plan) -> Text:
    """What the ranges include and the all-bound K's bias by cause (report.bench_text)."""
    # The causes explain the all-bound K's bias, said only where that K is printed.
    causes = (
        plan.uncertainty.bias_causes
        if plan.uncertainty is not None and plan.prediction is not None
        else None
    )
    lines = [ranges_line(plan.inputs), bias_line(causes)]
    return Text("\n".join(line for line in lines if line))
