"""The forward model's derivatives (planner.forward) against central differences of the forward
model itself, on a system where every part of the chain matters: two product species (1:1 and
1:2, iron(III) thiocyanate constants of de Berg, Maeder and Clifford, Inorg. Chim. Acta 445
(2016) 155-159), an absorbing free metal and stray light."""

from __future__ import annotations

import math

import numpy as np
import pytest

from planner.forward import predict_readings, reading_sensitivity, total_reading_sensitivity
from planner.inputs import Instrument, ProductSpecies, Reaction

REACTION = Reaction(
    temperature_C=25.0,
    ionic_strength_M=0.5,
    components=("Fe3+", "SCN-"),
    species=(
        ProductSpecies(
            name="FeSCN2+",
            formula={"Fe3+": 1, "SCN-": 1},
            log_beta=math.log10(98.0),
            epsilon=4700.0,
        ),
        ProductSpecies(
            name="Fe(SCN)2+",
            formula={"Fe3+": 1, "SCN-": 2},
            log_beta=math.log10(686.0),
            epsilon=2500.0,
        ),
    ),
    # Invented: a weakly absorbing free metal, so the free concentrations enter the reading.
    component_epsilon={"Fe3+": 30.0},
)
INSTRUMENT = Instrument(
    wavelength_nm=447.0,
    path_length_cm=1.0,
    absorbance_window=(0.1, 1.0),
    absorbance_sd=0.003,
    stray_light=0.005,
    cuvette_fill_mL=3.0,
)
TOTALS = np.array(
    [
        [0.1, 1.5e-4],  # metal in excess, as the standards
        [2e-3, 2e-4],
        [2e-4, 2e-3],  # ligand in excess
        [5e-3, 0.0],  # no ligand: only the free metal reads
        [0.0, 1e-3],  # no metal
    ]
)


def _readings(totals: np.ndarray, reaction: Reaction = REACTION) -> np.ndarray:
    return predict_readings(reaction, INSTRUMENT, totals).absorbance


@pytest.mark.parametrize("component", [0, 1])
def test_total_reading_sensitivity_matches_central_differences(component):
    # Reference: central differences of predict_readings, relative step 1e-6 of the total
    # (truncation and rounding below 1e-6 relative); 0 where the mixture lacks the component.
    readings = predict_readings(REACTION, INSTRUMENT, TOTALS)
    got = total_reading_sensitivity(REACTION, INSTRUMENT, readings, TOTALS, component)
    present = TOTALS[:, component] > 0
    step = 1e-6 * TOTALS[present, component]
    up, down = TOTALS[present].copy(), TOTALS[present].copy()
    up[:, component] += step
    down[:, component] -= step
    numeric = (_readings(up) - _readings(down)) / (2 * step)
    np.testing.assert_allclose(got[present], numeric, rtol=1e-6)
    assert np.all(got[~present] == 0.0)


def test_reading_sensitivity_to_eps_and_log_beta_matches_central_differences():
    # Reference: central differences of predict_readings in the measured species' eps (step
    # 1e-4 relative) and log10 beta (step 1e-5), the other species and the free metal held.
    readings = predict_readings(REACTION, INSTRUMENT, TOTALS)
    d_eps, d_lg = reading_sensitivity(REACTION, INSTRUMENT, readings, 0)

    def shifted(epsilon: float = 0.0, log_beta: float = 0.0) -> np.ndarray:
        first = REACTION.species[0]
        moved = ProductSpecies(
            name=first.name,
            formula=first.formula,
            log_beta=first.log_beta + log_beta,
            epsilon=first.epsilon + epsilon,
        )
        reaction = Reaction(
            temperature_C=REACTION.temperature_C,
            ionic_strength_M=REACTION.ionic_strength_M,
            components=REACTION.components,
            species=(moved, REACTION.species[1]),
            component_epsilon=REACTION.component_epsilon,
        )
        return _readings(TOTALS, reaction)

    h_eps = 1e-4 * REACTION.species[0].epsilon
    np.testing.assert_allclose(
        d_eps, (shifted(epsilon=h_eps) - shifted(epsilon=-h_eps)) / (2 * h_eps), rtol=1e-6
    )
    h_lg = 1e-5
    numeric = (shifted(log_beta=h_lg) - shifted(log_beta=-h_lg)) / (2 * h_lg)
    np.testing.assert_allclose(d_lg, numeric, rtol=1e-6, atol=1e-12)
