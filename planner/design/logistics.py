"""Prep-room logistics: stock volumes per bench, section and session, and how to make them.

to_prepare = session x (1 + margin) + dead volume x bench containers. The dead volume is what
stays unusable in each bench's container of a stock (the bottom of a beaker a pipette cannot
reach, the tip and stopcock of a buret): ``session.dead_volume_mL`` per stock and bench
(common practice: 5 mL for a beaker with a pipette, more for a buret's reservoir).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from planner.chem.species import molar_mass_g_per_mol
from planner.inputs import PlanInputs, Stock
from planner.result import Mixture, StockPreparation, Totals

__all__ = ["FLASK_SIZES_mL", "combined_totals", "preparations", "stock_totals"]

#: Volumetric flask sizes a prep room usually has for making stocks [mL]
#: (ISO 1042 nominal capacities, from memory).
FLASK_SIZES_mL = (100.0, 250.0, 500.0, 1000.0, 2000.0)


def stock_totals(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> Totals:
    """Volume of every stock per bench, section, session and to prepare.

    Parameters
    ----------
    inputs
        The plan (session settings).
    mixtures
        One bench's full set of mixtures.

    Returns
    -------
    Totals
        Volumes [mL]; every stock appears, with 0 when unused.
    """
    session = inputs.session
    per_bench = {st.id: sum(m.volume_of(st.id) for m in mixtures) for st in inputs.stocks}
    per_section = {
        k: v * session.benches_per_section * session.replicates for k, v in per_bench.items()
    }
    total = {k: v * session.sets for k, v in per_bench.items()}
    containers = session.sections * session.benches_per_section
    to_prepare = {
        k: (v * (1.0 + session.margin) + session.dead_volume_mL * containers) if v > 0 else 0.0
        for k, v in total.items()
    }
    return Totals(
        per_bench=per_bench,
        per_section=per_section,
        session=total,
        to_prepare=to_prepare,
        dead_volume_mL=session.dead_volume_mL,
    )


def _medium(diluent: Stock | None) -> str:
    if diluent is None or not diluent.contains_M:
        return "water"
    parts = ", ".join(f"{ion} {conc:g} mol/L" for ion, conc in diluent.contains_M.items())
    return f"{diluent.id} ({parts})"


def _flask_plan(volume_mL: float) -> tuple[float, int]:
    """Largest flask that is not wastefully large, and how many of it cover the volume."""
    for size in FLASK_SIZES_mL:
        if size >= volume_mL:
            return size, 1
    size = FLASK_SIZES_mL[-1]
    return size, math.ceil(volume_mL / size)


def preparations(inputs: PlanInputs, totals: Totals) -> tuple[StockPreparation, ...]:
    """How to make every stock the session uses.

    The mass of solid for one flask is m = c V M / purity (amount c V of the provided ion,
    one formula unit per ion; Harris, Quantitative Chemical Analysis, 9th ed., 2016, ch. 1).

    Parameters
    ----------
    inputs
        The plan (stocks with their solids).
    totals
        Volumes to prepare [mL].

    Returns
    -------
    tuple of StockPreparation
        One per stock with a positive volume to prepare, in plan order.
    """
    medium = _medium(inputs.diluent)
    result = []
    components = inputs.reaction.components
    for stock in inputs.stocks:
        volume = totals.to_prepare.get(stock.id, 0.0)
        if volume <= 0:
            continue
        flask_mL, flasks = _flask_plan(volume)
        solid = stock.solid
        if solid is None:
            result.append(
                StockPreparation(
                    stock=stock.id,
                    flask_mL=flask_mL,
                    flasks=flasks,
                    solid_formula="",
                    molar_mass_g_per_mol=0.0,
                    purity=1.0,
                    mass_g=0.0,
                    provides="",
                    concentration_M=0.0,
                    medium="" if stock.diluent else medium,
                    **_salt(inputs, stock, flask_mL),
                )
            )
            continue
        provides = solid.provides or next(
            (ion for ion in stock.contains_M if ion in components), next(iter(stock.contains_M))
        )
        concentration = stock.contains_M[provides]
        molar_mass = molar_mass_g_per_mol(solid.formula)
        mass = concentration * flask_mL / 1000.0 * molar_mass / solid.purity
        result.append(
            StockPreparation(
                stock=stock.id,
                flask_mL=flask_mL,
                flasks=flasks,
                solid_formula=solid.formula,
                molar_mass_g_per_mol=molar_mass,
                purity=solid.purity,
                mass_g=mass,
                provides=provides,
                concentration_M=concentration,
                medium=medium,
                **_salt(inputs, stock, flask_mL),
            )
        )
    return tuple(result)


def _salt(inputs: PlanInputs, stock: Stock, flask_mL: float) -> dict[str, Any]:
    """The inert salt of ``design.ionic_medium`` to weigh into one flask of the stock:
    m = c V M with M from periodictable (:func:`planner.chem.species.molar_mass_g_per_mol`)."""
    medium = inputs.design.ionic_medium
    if medium is None or stock.medium_salt_M <= 0:
        return {}
    mass = stock.medium_salt_M * flask_mL / 1000.0 * molar_mass_g_per_mol(medium.salt)
    return {"salt_formula": medium.salt, "salt_M": stock.medium_salt_M, "salt_mass_g": mass}


def combined_totals(totals: Sequence[Totals]) -> Totals:
    """Stock volumes of several sections' plans added up [mL] (each keeps its dead volume).

    Parameters
    ----------
    totals
        One Totals per section, all for the same stocks.

    Returns
    -------
    Totals
        Sums per stock; ``per_bench`` and ``per_section`` are the largest of any section.
    """
    first = totals[0]

    def add(key: str) -> dict[str, float]:
        return {s: sum(getattr(t, key).get(s, 0.0) for t in totals) for s in first.session}

    def largest(key: str) -> dict[str, float]:
        return {s: max(getattr(t, key).get(s, 0.0) for t in totals) for s in first.session}

    return Totals(
        per_bench=largest("per_bench"),
        per_section=largest("per_section"),
        session=add("session"),
        to_prepare=add("to_prepare"),
        dead_volume_mL=first.dead_volume_mL,
    )
