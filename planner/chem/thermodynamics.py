"""Temperature dependence of formation constants: the integrated van 't Hoff equation.

A constant measured at one temperature is needed at the bench's: with the reaction enthalpy
taken as constant over the few kelvin between them,

    log10 beta(T) = log10 beta(T0) - dH / (R ln 10) (1/T - 1/T0),

temperatures in kelvin. All functions are vectorised and pure; temperatures are given in °C
(the plan file's unit) and converted here.

References
----------
P. Atkins and J. de Paula, Atkins' Physical Chemistry, 9th ed., Oxford University Press,
2010, section 6.2(c), "The response of equilibria to temperature", eq. 6.23 (the integrated
van 't Hoff equation; equation number from memory).
CODATA 2018: the molar gas constant R = N_A k = 8.314 462 618... J mol⁻¹ K⁻¹, exact since
the 2019 redefinition of the SI (E. Tiesinga et al., Rev. Mod. Phys. 93 (2021) 025010).
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "GAS_CONSTANT_J_PER_MOL_K",
    "ZERO_CELSIUS_K",
    "d_log_beta_d_temperature",
    "log_beta_at_temperature",
]

#: Molar gas constant R [J mol⁻¹ K⁻¹] (CODATA 2018, exact: N_A k).
GAS_CONSTANT_J_PER_MOL_K = 8.314462618
#: 0 °C in kelvin [K] (the definition of the Celsius scale).
ZERO_CELSIUS_K = 273.15
_J_PER_KJ = 1000.0


def log_beta_at_temperature(
    log_beta: ArrayLike,
    enthalpy_kJ_mol: ArrayLike,
    reference_C: float,
    temperature_C: ArrayLike,
) -> NDArray[np.float64]:
    """log10 beta at another temperature by the integrated van 't Hoff equation.

    Parameters
    ----------
    log_beta
        log10 beta at ``reference_C`` [log10 of (mol/L)^(1-n)].
    enthalpy_kJ_mol
        Standard reaction enthalpy of the formation reaction [kJ/mol] (negative: exothermic,
        beta falls as T rises); broadcast against ``log_beta``.
    reference_C
        Temperature the constants refer to [°C].
    temperature_C
        Temperature wanted [°C]; broadcast against ``log_beta``.

    Returns
    -------
    NDArray[np.float64]
        log10 beta(T) = log10 beta(T0) - dH/(R ln 10) (1/T - 1/T0).

    Examples
    --------
    >>> round(float(log_beta_at_temperature(2.0, -6.0, 25.0, 20.0)), 6)
    2.017929
    """
    t0 = reference_C + ZERO_CELSIUS_K
    t = np.asarray(temperature_C, dtype=float) + ZERO_CELSIUS_K
    slope = np.asarray(enthalpy_kJ_mol, dtype=float) * _J_PER_KJ / GAS_CONSTANT_J_PER_MOL_K
    result = np.asarray(log_beta, dtype=float) - slope / math.log(10.0) * (1.0 / t - 1.0 / t0)
    return np.asarray(result, dtype=float)


def d_log_beta_d_temperature(
    enthalpy_kJ_mol: ArrayLike, temperature_C: float
) -> NDArray[np.float64]:
    """d log10 beta / dT = dH / (R T^2 ln 10) [1/K], the van 't Hoff slope at T."""
    t = temperature_C + ZERO_CELSIUS_K
    slope = np.asarray(enthalpy_kJ_mol, dtype=float) * _J_PER_KJ / GAS_CONSTANT_J_PER_MOL_K
    return np.asarray(slope / (t * t * math.log(10.0)), dtype=float)
