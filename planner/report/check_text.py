"""Terminal answer of ``planner check``: is the excess large enough?"""

from __future__ import annotations

from typing import Any

from rich.console import Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from planner.chem.assumption import PRACTICAL_FREE_EXCESS_M, AssumptionCheck
from planner.chem.equilibrium import one_to_one_complex_M

__all__ = ["check_document", "render_check"]


def check_document(result: AssumptionCheck) -> dict[str, Any]:
    """The JSON document of ``planner check --format json``."""
    return {
        "schema": "planner.check/1",
        "K": result.K,
        "excess_M": result.excess_M,
        "limiting_M": result.limiting_M,
        "tolerance": result.tolerance,
        "bound_fraction": result.bound_fraction,
        "assumption_error": result.assumption_error,
        "free_excess_M": result.free_excess_M,
        "min_excess_M": result.min_excess_M,
        "min_free_excess_M": result.min_free_excess_M,
        "epsilon_bias": result.epsilon_bias,
        "verdict": result.verdict,
        "practical": result.practical,
    }


def _pct(value: float) -> str:
    return f"{100 * value:.3g} %"


def _diluted_fraction(result: AssumptionCheck) -> float:
    diluted = one_to_one_complex_M(result.excess_M / 10, result.limiting_M / 10, result.K)
    return float(diluted) / (result.limiting_M / 10)


def render_check(result: AssumptionCheck) -> Group:
    """A rich renderable with the figures and a plain-language explanation."""
    ok = result.verdict == "ok"
    table = Table(show_header=False, box=None, pad_edge=False)
    table.add_column(style="bold")
    table.add_column()
    table.add_row("bound fraction", f"{result.bound_fraction:.4f}")
    table.add_row(
        "assumption error", f"{_pct(result.assumption_error)} (tolerance {_pct(result.tolerance)})"
    )
    table.add_row("free excess", f"{result.free_excess_M:.4g} mol/L")
    table.add_row("smallest sufficient excess", f"{result.min_excess_M:.4g} mol/L total")
    verdict = Text(
        "OK: the excess is large enough" if ok else "INSUFFICIENT: the excess is too small",
        style="bold green" if ok else "bold red",
    )
    lines = [
        f"With K = {result.K:.4g} L/mol, a free excess of {result.free_excess_M:.4g} mol/L binds "
        f"{_pct(result.bound_fraction)} of the limiting reagent "
        f"(f = K[M]free / (1 + K[M]free)).",
        "The free excess concentration decides, not the ratio of the totals: the same "
        f"ratio at ten times lower concentrations would bind only "
        f"{_pct(_diluted_fraction(result))}.",
    ]
    if not ok:
        lines.append(
            f"A molar absorptivity measured from such standards (assuming all of the limiting "
            f"reagent is bound) comes out {_pct(-result.epsilon_bias)} low, and every "
            f"product concentration derived from it too high by the factor "
            f"{1 / result.bound_fraction:.4g}, which biases K."
        )
    if not result.practical:
        lines.append(
            f"Out of practical reach: this tolerance needs a free excess of "
            f"{result.min_free_excess_M:.3g} mol/L, above about {PRACTICAL_FREE_EXCESS_M:g} mol/L, "
            "where the excess reagent itself changes the ionic medium. Accept a larger "
            "tolerance and correct for the bound fraction, or fit eps and K together with the "
            "exact equilibrium model."
        )
    elif not ok:
        lines.append(
            f"Raise the total excess to at least {result.min_excess_M:.4g} mol/L, or accept a "
            f"tolerance of {_pct(result.assumption_error)}."
        )
    return Group(table, Panel(Text("\n".join(lines)), title=verdict, title_align="left"))
