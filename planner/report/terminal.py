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
    deliveries_text,
    device_name,
    devices_short,
    is_to_the_mark,
    percent,
    plain,
    significant,
    stocks_in_addition_order,
    volume,
)
from planner.report.plan_json import checks_worst_first
from planner.result import Check, Mixture, Plan

__all__ = ["render_checks", "render_plan"]

_STATUS_STYLE = {"fail": "bold red", "warn": "bold yellow", "pass": "green"}


def _plain(text: str) -> Text:
    """Text shown as written: no console markup, no emoji codes."""
    return Text(text)


def _status(status: str) -> Text:
    return Text(status.upper(), style=_STATUS_STYLE.get(status, "bold"))


def _verdict(plan: Plan) -> Text:
    counts = {status: sum(c.status == status for c in plan.checks) for status in _STATUS_STYLE}
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


def _cell(plan: Plan, mixture: Mixture, stock_id: str) -> Text:
    parts = []
    for addition in additions_of(mixture, stock_id):
        if is_to_the_mark(addition):
            parts.append(f"to mark {devices_short(addition.devices)}")
        else:
            decimals = addition_decimals(plan.inputs, addition)
            devices = devices_short(addition.devices)
            repeated = deliveries_text(plan.inputs, addition)
            parts.append(f"{volume(addition.volume_mL, decimals)} {devices}".strip())
            if repeated:
                parts[-1] += f" ({repeated})"
    return _plain("; ".join(parts) if parts else "-")


def _device_legend(plan: Plan) -> Text:
    used: dict[str, str] = {}
    for mixture in plan.mixtures:
        for addition in mixture.additions:
            for device_id in addition.devices:
                used.setdefault(device_name(device_id).short, device_id)
    entries = [f"{code} = {device_id}" for code, device_id in used.items()]
    return Text("Devices: " + ", ".join(entries) if entries else "Devices: none", style="dim")


def _mixtures_table(plan: Plan) -> Table:
    stocks = stocks_in_addition_order(plan)
    table = Table(
        title="Mixtures (volumes in mL, columns in order of addition)",
        title_justify="left",
        box=box.SIMPLE_HEAD,
        # Width is scarce here: no outer edge, and one space of padding plus the (blank)
        # column rule between columns, so that four stocks still fit in 80 columns.
        show_edge=False,
        padding=(0, 1, 0, 0),
        pad_edge=False,
    )
    table.add_column("id", no_wrap=True)
    table.add_column("role")
    for stock_id in stocks:
        table.add_column(_plain(stock_id), overflow="fold")
    table.add_column("A", justify="right", no_wrap=True)
    table.add_column("bound", justify="right", no_wrap=True)
    for mixture in plan.mixtures:
        table.add_row(
            _plain(mixture.id),
            _plain(mixture.role),
            *(_cell(plan, mixture, stock_id) for stock_id in stocks),
            f"{mixture.absorbance:.3f}",
            f"{mixture.bound_fraction:.3f}",
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
    prediction = plan.prediction
    if prediction is None:
        return Text("Prediction: none (the plan gives no test mixtures to analyse).")
    return Text(
        f"Prediction (all-bound analysis): K = {significant(prediction.K, 4)} ± "
        f"{significant(prediction.u_K, 2)} L/mol, bias from the all-bound assumption "
        f"{percent(prediction.K_bias_from_assumption, signed=True)} "
        f"(true K {significant(prediction.K_true, 4)} L/mol)"
    )


def render_plan(plan: Plan) -> RenderableType:
    """A summary of a plan for the terminal, readable in 80 columns.

    Parameters
    ----------
    plan
        A finished plan.

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
        _device_legend(plan),
        _totals_table(plan),
        _prediction_line(plan),
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
    style = {"fail": "bold red", "warn": "yellow", "pass": "green"}
    for item in checks_worst_first(checks):
        table.add_row(
            Text(item.status.upper(), style=style.get(item.status, "")),
            Text(item.name),
            Text(item.detail),
        )
    return table
