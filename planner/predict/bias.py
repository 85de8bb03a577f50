"""The bias of the all-bound K split into its causes.

On noise-free readings the all-bound analysis errs for several reasons at once. Each share
is the relative change of its K when one cause is added to a model without it, in this
order: the all-bound assumption alone (only the measured product absorbs, no stray light),
then the other absorbers (the other products and the free reagents with their molar
absorptivities), then the stray light; the ionic medium's share comes from
:mod:`planner.predict.medium`; the temperature's is the change of the constant itself
between the temperature it refers to and the benches' (van 't Hoff), which a class reports
as it finds it. The shares multiply: (1 + total) = product of (1 + share) for the first three.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from planner.analysis import Layout, all_bound_mean_K
from planner.chem.constants import bench_log_beta
from planner.forward import predict_readings
from planner.inputs import Instrument, PlanInputs, Reaction
from planner.result import BiasCauses, MediumEffect

__all__ = ["bias_causes"]


def _all_bound_K(reaction: Reaction, instrument: Instrument, layout: Layout) -> float:
    readings = predict_readings(reaction, instrument, layout.totals_M).absorbance
    net = (readings - readings[layout.blanks].mean())[None, :]
    _, k_tests = all_bound_mean_K(layout, net, instrument.path_length_cm)
    with np.errstate(invalid="ignore"):
        return float(k_tests.mean())


def _ratio(numerator: float, denominator: float) -> float:
    if not (np.isfinite(numerator) and np.isfinite(denominator)) or denominator == 0:
        return float("nan")
    return numerator / denominator - 1.0


def bias_causes(inputs: PlanInputs, layout: Layout, medium: MediumEffect | None) -> BiasCauses:
    """The all-bound K's relative bias by cause (see the module notes).

    Parameters
    ----------
    inputs
        The validated plan.
    layout
        The set as the analyses see it.
    medium
        The medium's share (:func:`planner.predict.medium.medium_effect`), or None.

    Returns
    -------
    BiasCauses
    """
    reaction = inputs.reaction
    k_true = float(10.0 ** bench_log_beta(reaction)[inputs.measured])
    epsilon = np.zeros(len(reaction.species))
    epsilon[inputs.measured] = reaction.species[inputs.measured].epsilon
    only_measured = dataclasses.replace(
        reaction,
        species=tuple(
            dataclasses.replace(sp, epsilon=float(e))
            for sp, e in zip(reaction.species, epsilon, strict=True)
        ),
        component_epsilon={},
    )
    no_stray = dataclasses.replace(inputs.instrument, stray_light=0.0)
    clean = _all_bound_K(only_measured, no_stray, layout)
    absorbers = _all_bound_K(reaction, no_stray, layout)
    full = _all_bound_K(reaction, inputs.instrument, layout)
    at_reference = float(10.0 ** bench_log_beta(reaction, reaction.temperature_C)[inputs.measured])
    return BiasCauses(
        all_bound_assumption=_ratio(clean, k_true),
        absorbing_reagents=_ratio(absorbers, clean),
        stray_light=_ratio(full, absorbers),
        ionic_medium=medium.K_bias_all_bound if medium is not None else 0.0,
        temperature=_ratio(k_true, at_reference),
    )
