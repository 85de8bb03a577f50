"""The forward model: component totals -> equilibrium -> Beer-Lambert -> photometer reading.

One function, :func:`predict_readings`, turns the total concentration of every reaction
component in a batch of mixtures into what the photometer reads: the exact mass-action
equilibrium (:func:`planner.chem.equilibrium.solve_equilibrium`), the absorbance of every
absorber, product species and free components alike (Beer-Lambert with several absorbers), and
the stray-light response of the photometer. The design's candidates, the first-order
prediction, the virtual class (Monte Carlo), the global fit and the figures all call it, so
they cannot disagree about a reading. :mod:`planner.verify` keeps its own re-derivation on
purpose (it checks this model's results).

References
----------
Skoog, Holler and Crouch, Principles of Instrumental Analysis, 7th ed., 2017, sections 13B-1
(Beer's law for mixtures) and 13B-2 (stray radiation), from memory.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from planner.chem.constants import bench_log_beta
from planner.chem.equilibrium import (
    bound_fraction,
    log_beta_sensitivity,
    solve_equilibrium,
    total_sensitivity,
)
from planner.inputs import Instrument, Reaction
from planner.lab.photometer import observed_absorbance, observed_absorbance_slope, true_absorbance
from planner.records import record

__all__ = [
    "Readings",
    "bound_fraction_sweep",
    "predict_readings",
    "reading_sensitivity",
    "total_reading_sensitivity",
]


@record
class Readings:
    """The forward model's result for a batch of mixtures.

    Attributes
    ----------
    free_M, species_M
        The equilibrium the readings come from, as in
        :class:`planner.chem.equilibrium.Equilibrium` [mol/L].
    true_absorbance
        Beer-Lambert absorbance of every absorber together, shape (n,) [unitless].
    absorbance
        The photometer's reading, stray light applied, blank not subtracted, shape (n,)
        [unitless].
    """

    free_M: NDArray[np.float64]
    species_M: NDArray[np.float64]
    true_absorbance: NDArray[np.float64]
    absorbance: NDArray[np.float64]


def predict_readings(
    reaction: Reaction,
    instrument: Instrument,
    total_M: ArrayLike,
    *,
    log_beta: ArrayLike | None = None,
    species_epsilon: ArrayLike | None = None,
) -> Readings:
    """Predict the photometer reading of every mixture from its component totals.

    Parameters
    ----------
    reaction
        Components, product species (formulae, constants, absorptivities) and the absorbing
        free components.
    instrument
        Path length and stray light.
    total_M
        Total of each component in each mixture, shape (n, n_components) [mol/L].
    log_beta
        log10 beta of each product species, shape (n_species,), instead of the reaction's
        (the global fit varies the measured species' constant).
    species_epsilon
        Molar absorptivity of each product species, shape (n_species,), or one row per
        mixture, shape (n, n_species), instead of the reaction's [L mol⁻¹ cm⁻¹].

    Returns
    -------
    Readings
    """
    totals = np.asarray(total_M, dtype=float)
    logs = bench_log_beta(reaction) if log_beta is None else np.asarray(log_beta, dtype=float)
    epsilon = (
        reaction.species_epsilon()
        if species_epsilon is None
        else np.asarray(species_epsilon, dtype=float)
    )
    solved = solve_equilibrium(totals, reaction.stoichiometry(), logs)
    absorbers = np.concatenate([solved.species_M, solved.free_M], axis=1)
    free = reaction.free_epsilon()
    absorptivity = (
        np.concatenate([epsilon, np.broadcast_to(free, (epsilon.shape[0], free.size))], axis=1)
        if epsilon.ndim == 2
        else np.concatenate([epsilon, free])
    )
    true_a = np.asarray(
        true_absorbance(absorbers, absorptivity, instrument.path_length_cm), dtype=float
    )
    return Readings(
        free_M=solved.free_M,
        species_M=solved.species_M,
        true_absorbance=true_a,
        absorbance=observed_absorbance(true_a, instrument.stray_light),
    )


def reading_sensitivity(
    reaction: Reaction,
    instrument: Instrument,
    readings: Readings,
    species: int,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """How each reading of :func:`predict_readings` moves with one species' eps and constant.

    Parameters
    ----------
    reaction, instrument
        As the readings were predicted with.
    readings
        From :func:`predict_readings`, shape (n,).
    species
        Row of the product species (the measured one).

    Returns
    -------
    tuple
        (dA_obs/d eps [L^-1 mol cm], dA_obs/d log10 beta [unitless]) of each mixture, each
        shape (n,).

    Notes
    -----
    The exact derivatives of the same chain as :func:`predict_readings`: the equilibrium's
    (:func:`planner.chem.equilibrium.log_beta_sensitivity`), Beer-Lambert's with every
    absorber, and the stray-light response's
    (:func:`planner.lab.photometer.observed_absorbance_slope`). No further equilibrium is
    solved.
    """
    d_free, d_species = log_beta_sensitivity(
        readings.free_M, readings.species_M, reaction.stoichiometry(), species
    )
    slope = observed_absorbance_slope(readings.true_absorbance, instrument.stray_light)
    d_epsilon = slope * instrument.path_length_cm * readings.species_M[:, species]
    d_log_beta = _reading_change(
        reaction, instrument, readings, d_free, d_species, reaction.species_epsilon()
    )
    return d_epsilon, d_log_beta * float(np.log(10.0))


def total_reading_sensitivity(
    reaction: Reaction,
    instrument: Instrument,
    readings: Readings,
    total_M: NDArray[np.float64],
    component: int,
) -> NDArray[np.float64]:
    """dA_obs/dT of each reading of :func:`predict_readings` for one component's total.

    Parameters
    ----------
    reaction, instrument
        As the readings were predicted with.
    readings
        From :func:`predict_readings` for ``total_M``, shape (n,).
    total_M
        The totals, shape (n, n_components) [mol/L].
    component
        Column of the component.

    Returns
    -------
    NDArray[np.float64]
        Shape (n,) [L/mol]; 0 where that total is 0. The exact derivative of the same chain
        (:func:`planner.chem.equilibrium.total_sensitivity`, Beer-Lambert, stray light).
    """
    d_free, d_species = total_sensitivity(
        readings.free_M, readings.species_M, total_M, reaction.stoichiometry(), component
    )
    return _reading_change(
        reaction, instrument, readings, d_free, d_species, reaction.species_epsilon()
    )


def _reading_change(
    reaction: Reaction,
    instrument: Instrument,
    readings: Readings,
    d_free: NDArray[np.float64],
    d_species: NDArray[np.float64],
    epsilon: NDArray[np.float64],
) -> NDArray[np.float64]:
    """The reading's change for a change of the equilibrium (d_free, d_species): Beer-Lambert
    over every absorber, then the stray-light slope at each reading."""
    slope = observed_absorbance_slope(readings.true_absorbance, instrument.stray_light)
    # Element-wise sums over the few absorbers (no BLAS call; see the solver's _small_product).
    d_true = instrument.path_length_cm * (
        (d_species * epsilon).sum(axis=1) + (d_free * reaction.free_epsilon()).sum(axis=1)
    )
    result: NDArray[np.float64] = slope * d_true
    return result


def bound_fraction_sweep(
    reaction: Reaction,
    base_total_M: NDArray[np.float64],
    limiting: int,
    measured: int,
    excess: int,
    excess_M: NDArray[np.float64],
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Bound fraction of the limiting reagent as the excess reagent's total is swept.

    Parameters
    ----------
    reaction
        The reaction.
    base_total_M
        Component totals the sweep starts from, shape (n_components,) [mol/L].
    limiting, measured, excess
        Column of the limiting component, row of the measured species, column of the excess
        component.
    excess_M
        Totals of the excess component to evaluate, shape (n,) [mol/L].

    Returns
    -------
    tuple
        (fraction held in all products, fraction held in the measured species alone), each
        shape (n,) [unitless], weighted by coefficient.
    """
    matrix = reaction.stoichiometry()
    totals = np.tile(np.asarray(base_total_M, dtype=float), (excess_M.size, 1))
    totals[:, excess] = excess_M
    solved = solve_equilibrium(totals, matrix, bench_log_beta(reaction))
    bound = bound_fraction(solved.species_M, matrix, limiting, totals)
    in_measured = solved.species_M[:, measured] * matrix[measured, limiting] / totals[:, limiting]
    return bound, in_measured
