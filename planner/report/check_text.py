"""Terminal answer of ``planner check``: is the excess large enough?"""

from __future__ import annotations

import math
from typing import Any

from rich.console import Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from planner.chem.assumption import LARGEST_DISSOLVED_M, PRACTICAL_FREE_EXCESS_M, AssumptionCheck

__all__ = ["check_document", "render_check"]

# A bound fraction below 1e-6 (one part in a million bound) is "practically none": the factor
# 1/f then says nothing a person can use.
_LARGEST_FACTOR_SHOWN = 1e6


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
        "diluted_bound_fraction": result.diluted_bound_fraction,
        "suggested_excess_M": result.suggested_excess_M,
        "excess_reachable": result.excess_reachable,
        "suggested_tolerance": result.suggested_tolerance,
    }


def _pct(value: float) -> str:
    return f"{100 * value:.3g} %"


def _bias_sentence(result: AssumptionCheck) -> str:
    """What an insufficient excess does to eps and K; the factor 1/f only where f > 0.

    Found by fuzzing: with no excess at all nothing is bound (f = 0), and 1/f divided by zero.
    """
    factor = 1.0 / result.bound_fraction if result.bound_fraction > 0 else math.inf
    if not math.isfinite(factor) or factor > _LARGEST_FACTOR_SHOWN:
        return (
            "Practically none of the limiting reagent is bound, so standards made this way "
            "show almost no coloured product: a molar absorptivity measured from them "
            "(assuming all of it is bound) comes out near zero, and K cannot be found."
        )
    return (
        f"A molar absorptivity measured from such standards (assuming all of the limiting "
        f"reagent is bound) comes out {_pct(-result.epsilon_bias)} low, and every "
        f"product concentration derived from it too high by the factor "
        f"{factor:.4g}, which biases K."
    )


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
    table.add_row("smallest sufficient excess", f"{result.min_excess_M:.6g} mol/L total")
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
        f"{_pct(result.diluted_bound_fraction)}.",
    ]
    if not ok:
        lines.append(_bias_sentence(result))
    if result.excess_M < result.limiting_M:
        lines.append(
            f"The excess total ({result.excess_M:.4g} mol/L) is below the limiting total "
            f"({result.limiting_M:.4g} mol/L): the roles are swapped, the reagent called "
            "the excess runs short, so this mixture cannot serve as a standard."
        )
    if not ok and not result.excess_reachable:
        lines.append(
            f"No excess fixes this: the tolerance needs {result.min_excess_M:.4g} mol/L of the "
            f"excess reagent in the mixture, above the {LARGEST_DISSOLVED_M:g} mol/L a "
            "dissolved reagent reaches (common practice). Lower the limiting total, accept a "
            "larger tolerance, or fit eps and K together with the exact equilibrium model."
        )
    elif not result.practical:
        lines.append(
            f"Out of practical reach: this tolerance needs a free excess of "
            f"{result.min_free_excess_M:.3g} mol/L, above about {PRACTICAL_FREE_EXCESS_M:g} mol/L, "
            "where the excess reagent itself changes the ionic medium. Accept a larger "
            "tolerance and correct for the bound fraction, or fit eps and K together with the "
            "exact equilibrium model."
        )
    elif not ok and result.suggested_excess_M is not None:
        # Both figures are solved for and checked again in planner.chem.assumption.
        accept = (
            f", or accept a tolerance of {_pct(result.suggested_tolerance)}"
            if result.suggested_tolerance is not None
            else ""
        )
        lines.append(
            f"Raise the total excess to at least {result.suggested_excess_M:.4g} mol/L{accept}."
        )
    return Group(table, Panel(Text("\n".join(lines)), title=verdict, title_align="left"))
