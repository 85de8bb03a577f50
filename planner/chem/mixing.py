"""Mixing stocks: ion concentrations after dilution, component totals and ionic strength.

A mixture is a set of stock volumes brought to a total volume; every ion's initial
concentration is the volume-weighted sum c = sum_k c_k V_k / V_total (conservation of amount
on dilution; Harris, Quantitative Chemical Analysis, 9th ed., 2016, eq. 1-5). Counter-ions
that a stock does not list are added to make it electrically neutral
(:func:`planner.chem.species.neutralised`).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from planner.chem.species import charge_from_name, ionic_strength_M, neutralised, species_charge
from planner.inputs import Reaction, Stock
from planner.records import record

__all__ = [
    "IonTable",
    "ion_table",
    "ionic_strength_after_reaction_M",
    "medium_label",
    "mix_M",
]


@record
class IonTable:
    """Every ion of a set of stocks, with charges and each stock's concentrations.

    Attributes
    ----------
    names
        Ion names, in first-appearance order over the stocks.
    charges
        Charge of each ion, shape (k,) [unitless].
    stock_M
        Concentration of each ion in each stock, shape (n_stocks, k) [mol/L].
    stock_ids
        Stock ids, in the order of the rows of ``stock_M``.
    """

    names: tuple[str, ...]
    charges: NDArray[np.float64]
    stock_M: NDArray[np.float64]
    stock_ids: tuple[str, ...]

    def index(self, ion: str) -> int:
        """Column of an ion (ValueError if absent)."""
        return self.names.index(ion)

    def component_columns(self, components: Sequence[str]) -> list[int | None]:
        """Column of each reaction component, or None when no stock contains it."""
        return [self.names.index(c) if c in self.names else None for c in components]


def ion_table(stocks: Sequence[Stock]) -> IonTable:
    """Collect the ions of all stocks, neutralised with counter-ions where needed.

    Parameters
    ----------
    stocks
        Stocks in the order their volumes will be given.

    Returns
    -------
    IonTable
    """
    neutral = [neutralised(st.contains_M) for st in stocks]
    names: list[str] = []
    for contents in neutral:
        for ion in contents:
            if ion not in names:
                names.append(ion)
    matrix = np.zeros((len(stocks), len(names)))
    for row, contents in enumerate(neutral):
        for ion, conc in contents.items():
            matrix[row, names.index(ion)] = conc
    charges = np.array([charge_from_name(n) for n in names], dtype=float)
    return IonTable(
        names=tuple(names),
        charges=charges,
        stock_M=matrix,
        stock_ids=tuple(st.id for st in stocks),
    )


def mix_M(
    table: IonTable, volumes_mL: NDArray[np.float64], total_volume_mL: float | NDArray[np.float64]
) -> NDArray[np.float64]:
    """Initial ion concentrations of mixtures.

    Parameters
    ----------
    table
        Ions of the stocks.
    volumes_mL
        Volume of each stock in each mixture, shape (n, n_stocks) [mL].
    total_volume_mL
        Final volume of each mixture, scalar or shape (n,) [mL].

    Returns
    -------
    NDArray[np.float64]
        Concentrations, shape (n, k) [mol/L].
    """
    total = np.asarray(total_volume_mL, dtype=float)
    if total.ndim:
        total = total[:, None]
    result: NDArray[np.float64] = (volumes_mL @ table.stock_M) / total
    return result


def ionic_strength_after_reaction_M(
    table: IonTable,
    initial_M: NDArray[np.float64],
    reaction: Reaction,
    free_M: NDArray[np.float64],
    species_M: NDArray[np.float64],
) -> NDArray[np.float64]:
    """Ionic strength of mixtures at equilibrium.

    Spectator ions keep their initial concentrations; each reaction component counts with its
    free concentration, and each product species with its charge from its formula.

    Parameters
    ----------
    table
        Ions of the stocks.
    initial_M
        Initial ion concentrations, shape (n, k) [mol/L].
    reaction
        The complexation system.
    free_M
        Free components, shape (n, n_components) [mol/L].
    species_M
        Product species, shape (n, n_species) [mol/L].

    Returns
    -------
    NDArray[np.float64]
        I = 1/2 sum c z^2, shape (n,) [mol/L].
    """
    component_charges = {c: charge_from_name(c) for c in reaction.components}
    spectators = [i for i, name in enumerate(table.names) if name not in component_charges]
    spectator_I = ionic_strength_M(initial_M[:, spectators], table.charges[spectators])
    free_I = ionic_strength_M(free_M, [component_charges[c] for c in reaction.components])
    product_charges = [species_charge(sp.formula, component_charges) for sp in reaction.species]
    product_I = ionic_strength_M(species_M, product_charges)
    result: NDArray[np.float64] = spectator_I + free_I + product_I
    return result


def medium_label(diluent: Stock | None) -> str:
    """What a stock is made up in, as its label says: the diluent's id and composition, or
    ``"water"`` when the plan has no diluent or it lists no ions.

    >>> medium_label(None)
    'water'
    """
    if diluent is None or not diluent.contains_M:
        return "water"
    if diluent.medium_salt_M > 0 and diluent.plan_contains_M is not None:
        # A constant ionic medium: every stock gets its own share of the inert salt, so the
        # others are made up in the diluent as the plan file lists it, before its salt.
        parts = ", ".join(f"{i} {c:g} mol/L" for i, c in diluent.plan_contains_M.items())
        return f"{diluent.id} before its salt ({parts or 'nothing dissolved'})"
    parts = ", ".join(f"{ion} {conc:g} mol/L" for ion, conc in diluent.contains_M.items())
    return f"{diluent.id} ({parts})"
