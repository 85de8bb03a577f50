"""Terminal answer of ``planner check``: is the excess large enough?"""

from __future__ import annotations

import math
from typing import Any

from rich.console import Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from planner.chem.assumption import PRACTICAL_FREE_EXCESS_M, AssumptionCheck
from planner.chem.equilibrium import one_to_one_complex_M

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
    }


def _pct(value: float) -> str:
    return f"{100 * value:.3g} %"


def _diluted_fraction(result: AssumptionCheck) -> float:
    diluted = one_to_one_complex_M(result.excess_M / 10, result.limiting_M / 10, result.K)
    return float(diluted) / (result.limiting_M / 10)


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
        lines.append(_bias_sentence(result))
    if result.excess_M < result.limiting_M:
        lines.append(
            f"The excess total ({result.excess_M:.4g} mol/L) is below the limiting total "
            f"({result.limiting_M:.4g} mol/L): the roles are swapped, the reagent called "
            "the excess runs short, so this mixture cannot serve as a standard."
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
        # Accepting the present error is advice only while most of the reagent is bound.
        accept = (
            f", or accept a tolerance of {_pct(result.assumption_error)}"
            if result.assumption_error < 0.5
            else ""
        )
        lines.append(f"Raise the total excess to at least {result.min_excess_M:.4g} mol/L{accept}.")
    return Group(table, Panel(Text("\n".join(lines)), title=verdict, title_align="left"))
