"""The constants at the bench: the plan's constants moved to the benches' temperature and medium.

The plan gives each constant at ``reaction.temperature_C`` and ``reaction.ionic_strength_M``.
The benches work at the session's temperature (van 't Hoff,
:mod:`planner.chem.thermodynamics`) and, when the design sets a constant ionic medium
(``design.ionic_medium``), at that medium's ionic strength (Davies or SIT,
:mod:`planner.chem.activity`); every mixture of such a plan has that ionic strength, so the
constants move alike in all of them. Every forward model, analysis and design stage of the
planner reads its constants from :func:`bench_log_beta`. A plan without a constant medium
keeps its constants' medium here; its mixtures' own ionic strengths are followed apart, as the
medium's share of the bias (:func:`medium_log_beta`, :mod:`planner.predict.medium`).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from planner.chem.activity import delta_z_squared, log_beta_in_medium
from planner.chem.species import charge_from_name
from planner.chem.thermodynamics import log_beta_at_temperature
from planner.inputs import PlanInputs, Reaction

__all__ = ["bench_K", "bench_log_beta", "bench_medium_M", "medium_log_beta", "medium_matters"]


def _delta_z2(reaction: Reaction) -> list[int]:
    charges = {c: charge_from_name(c) for c in reaction.components}
    return [delta_z_squared(sp.formula, charges) for sp in reaction.species]


def bench_medium_M(reaction: Reaction) -> float:
    """Ionic strength of the benches' medium [mol/L]: the constant medium the design sets,
    else the one the constants refer to."""
    if reaction.bench_ionic_strength_M is None:
        return reaction.ionic_strength_M
    return reaction.bench_ionic_strength_M


def bench_log_beta(reaction: Reaction, temperature_C: float | None = None) -> NDArray[np.float64]:
    """log10 beta of every product species at the benches, shape (n_species,).

    At ``temperature_C`` when given, else at ``reaction.bench_temperature_C`` (the session's
    room), else at the constants' own temperature; species without an enthalpy keep their
    constant. In the design's constant ionic medium when there is one (Davies up to 0.5
    mol/L, SIT above, :func:`planner.chem.activity.log_beta_in_medium`).
    """
    logs = reaction.log_beta()
    wanted = reaction.bench_temperature_C if temperature_C is None else temperature_C
    if wanted is not None and wanted != reaction.temperature_C:
        logs = log_beta_at_temperature(
            logs, reaction.enthalpy_kJ_mol(), reaction.temperature_C, wanted
        )
    medium = bench_medium_M(reaction)
    if medium != reaction.ionic_strength_M:
        logs = log_beta_in_medium(
            logs,
            _delta_z2(reaction),
            reaction.ionic_strength_M,
            [medium],
            reaction.sit_delta_epsilon_kg_mol,
        )[0]
    return np.asarray(logs, dtype=float)


def bench_K(inputs: PlanInputs) -> float:
    """The measured species' constant at the benches [(mol/L)^(1-n)]: what a class should
    find."""
    return float(10.0 ** bench_log_beta(inputs.reaction)[inputs.measured])


def medium_log_beta(reaction: Reaction, ionic_strength_M: ArrayLike) -> NDArray[np.float64]:
    """Every product's log10 beta in each mixture's own ionic medium, shape (n, n_species).

    Parameters
    ----------
    reaction
        The reaction; the SIT branch uses ``reaction.sit_delta_epsilon_kg_mol`` for every
        product.
    ionic_strength_M
        Ionic strength of each mixture, shape (n,) [mol/L].

    Returns
    -------
    NDArray[np.float64]
        The bench constants (:func:`bench_log_beta`) moved from the benches' medium
        (:func:`bench_medium_M`) to each mixture's, by :func:`log_beta_in_medium`.
    """
    return log_beta_in_medium(
        bench_log_beta(reaction),
        _delta_z2(reaction),
        bench_medium_M(reaction),
        ionic_strength_M,
        reaction.sit_delta_epsilon_kg_mol,
    )


def medium_matters(reaction: Reaction, ionic_strength_M: ArrayLike) -> bool:
    """Whether any product's constant or molar absorptivity at these ionic strengths differs
    from its value in the benches' medium (:func:`planner.chem.constants.bench_medium_M`)."""
    if any(sp.epsilon_ionic_slope for sp in reaction.species):
        return True
    rows = medium_log_beta(reaction, ionic_strength_M)
    return not np.array_equal(rows, np.broadcast_to(bench_log_beta(reaction), rows.shape))
