"""The ionic medium's share of the bias: each mixture's constants at its own ionic strength.

The plan's constants refer to one medium (``reaction.ionic_strength_M``), but the mixtures of
a plan differ in ionic strength (the stocks' acid and salts, diluted in different
proportions), and a constant moves with the medium (:mod:`planner.chem.activity`: Davies up to
0.5 mol/L, SIT above). An analyst who fits one K to every mixture then reports a K biased by
the medium as well as by the analysis. This module reads the plan's mixtures with every
mixture's constants in its own medium and analyses those readings, free of noise, as the class
will: the relative change of each analysis's K against the readings in the reference medium is
the medium's share of the bias, shown apart from the all-bound assumption's.

The ionic strength of a mixture is that of the mixture as made up, every ion of its stocks
(``Mixture.initial_M``, counter-ions included), before the complex forms: the complex holds
a few 1e-4 mol/L against ionic strengths of tenths of a mol/L.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from planner.analysis import Layout, all_bound_mean_K, global_fit_jacobian
from planner.chem.constants import bench_medium_M, medium_log_beta, medium_matters
from planner.chem.species import charge_from_name, ionic_strength_M
from planner.errors import PlannerError
from planner.forward import predict_readings
from planner.inputs import PlanInputs
from planner.result import MediumEffect, Mixture

__all__ = ["initial_ionic_strength_M", "medium_effect"]


def initial_ionic_strength_M(mixtures: Sequence[Mixture]) -> NDArray[np.float64]:
    """Ionic strength of each mixture as made up, I = 1/2 sum c z^2 over ``initial_M``
    [mol/L], shape (n_mixtures,)."""
    result = np.zeros(len(mixtures))
    for row, mixture in enumerate(mixtures):
        names = list(mixture.initial_M)
        if names:
            values = np.array([mixture.initial_M[n] for n in names], dtype=float)
            charges = [charge_from_name(n) for n in names]
            result[row] = float(ionic_strength_M(values, charges))
    return result


def _global_fit_K(inputs: PlanInputs, layout: Layout, readings: NDArray[np.float64]) -> float:
    """The global fit's K of noise-free readings by Gauss-Newton from the plan's eps and K.

    Noise-free readings sit a few per cent from the plan's model, so a handful of
    Gauss-Newton steps on (eps, log10 K), each with :func:`planner.analysis.global_fit_jacobian`
    at the current estimate, converge (Nocedal and Wright, Numerical Optimization, 2nd ed.,
    2006, section 10.3); this avoids the tabulation the Monte Carlo needs for its thousands of
    fits. NaN when the steps do not settle.
    """
    fit = np.concatenate([layout.standards, layout.tests])
    target = readings[fit] - readings[layout.blanks].mean()
    measured = inputs.reaction.species[inputs.measured]
    epsilon, shift = float(measured.epsilon), 0.0
    for _ in range(_MAX_STEPS):
        species = list(inputs.reaction.species)
        species[inputs.measured] = dataclasses.replace(
            measured, log_beta=measured.log_beta + shift, epsilon=epsilon
        )
        reaction = dataclasses.replace(inputs.reaction, species=tuple(species))
        model = predict_readings(reaction, inputs.instrument, layout.totals_M).absorbance
        residual = target - (model[fit] - model[layout.blanks].mean())
        jacobian = global_fit_jacobian(reaction, inputs.instrument, layout)
        if not (np.all(np.isfinite(jacobian)) and np.all(np.isfinite(residual))):
            return math.nan
        step = np.linalg.lstsq(jacobian, residual, rcond=None)[0]
        if not np.all(np.isfinite(step)):
            return math.nan
        epsilon, shift = epsilon + float(step[0]), shift + float(step[1])
        if abs(shift) > _LARGEST_SHIFT:
            return math.nan  # the fit ran away: no medium share worth reporting
        if abs(step[1]) < _LOG_K_TOLERANCE and abs(step[0]) <= _LOG_K_TOLERANCE * abs(epsilon):
            return float(layout.K_true * 10.0**shift)
    return math.nan


#: Gauss-Newton steps allowed, and the change of log10 K (and relative change of eps) below
#: which the fit has settled (1e-10: far below any bias worth reporting).
_MAX_STEPS = 30
#: A fit whose log10 K moves further than this (a factor of 10^6) has run away.
_LARGEST_SHIFT = 6.0
_LOG_K_TOLERANCE = 1e-10


def _analyses(
    inputs: PlanInputs, layout: Layout, readings: NDArray[np.float64]
) -> tuple[float, float]:
    """(mean K of the all-bound analysis, K of the global fit) of noise-free readings."""
    net = (readings - readings[layout.blanks].mean())[None, :]
    _, k_tests = all_bound_mean_K(layout, net, inputs.instrument.path_length_cm)
    with np.errstate(invalid="ignore"):
        k_all_bound = float(k_tests.mean())
    return k_all_bound, _global_fit_K(inputs, layout, readings)


def _epsilon_rows(inputs: PlanInputs, strength: NDArray[np.float64]) -> NDArray[np.float64]:
    """Each product's molar absorptivity in each mixture's own medium, shape (n, n_species):
    the plan file's value moved by its ``epsilon_ionic_slope`` (0: unchanged)."""
    reaction = inputs.reaction
    return np.stack(
        [sp.epsilon_at(strength, reaction.ionic_strength_M) for sp in reaction.species], axis=1
    )


def medium_effect(inputs: PlanInputs, mixtures: Sequence[Mixture], layout: Layout) -> MediumEffect:
    """The medium's share of each analysis's bias on the plan's mixtures.

    Parameters
    ----------
    inputs
        The validated plan.
    mixtures
        The plan's mixtures, in layout order.
    layout
        The set as the analyses see it (nominal totals, roles).

    Returns
    -------
    MediumEffect
        Each mixture's ionic strength and its measured-species constant there, and the
        relative change of the all-bound and global-fit K from the medium (nan where an
        analysis gives no finite K).
    """
    strength = initial_ionic_strength_M(mixtures)
    # A constant ionic medium gives every mixture the benches' ionic strength up to round-off;
    # a share of 1e-13 % computed from round-off would be a number that means nothing.
    medium = bench_medium_M(inputs.reaction)
    strength = np.where(np.isclose(strength, medium, rtol=1e-9, atol=0.0), medium, strength)
    rows = medium_log_beta(inputs.reaction, strength)
    # Nor where no constant and no molar absorptivity depends on the ionic strength (every
    # product's delta z^2 is 0, with no SIT coefficient and no epsilon_ionic_slope): the
    # medium then moves no K, exactly, and a share from two fits' round-off would mislead.
    if np.all(strength == medium) or not medium_matters(inputs.reaction, strength):
        return MediumEffect(
            ionic_strength_M=tuple(float(i) for i in strength),
            K_in_medium=tuple(float(10.0 ** r[inputs.measured]) for r in rows),
            K_bias_all_bound=0.0,
            K_bias_global_fit=0.0,
        )
    totals = layout.totals_M
    try:
        reference = predict_readings(inputs.reaction, inputs.instrument, totals).absorbance
        in_medium = predict_readings(
            inputs.reaction,
            inputs.instrument,
            totals,
            log_beta=rows,
            species_epsilon=_epsilon_rows(inputs, strength),
        ).absorbance
        bound_ref, fit_ref = _analyses(inputs, layout, reference)
        bound_med, fit_med = _analyses(inputs, layout, in_medium)
    except (PlannerError, np.linalg.LinAlgError, OverflowError, FloatingPointError):
        # Constants far outside any activity model's range (a mixture at many mol/L) can
        # leave the equilibrium or the fit without a solution: the medium's share is then
        # unknown, and said nowhere, rather than a reason the plan cannot be made.
        bound_ref = fit_ref = bound_med = fit_med = math.nan
    return MediumEffect(
        ionic_strength_M=tuple(float(i) for i in strength),
        K_in_medium=tuple(float(10.0 ** r[inputs.measured]) for r in rows),
        K_bias_all_bound=bound_med / bound_ref - 1.0,
        K_bias_global_fit=fit_med / fit_ref - 1.0,
    )
