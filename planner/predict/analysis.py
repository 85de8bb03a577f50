"""The analysis usually applied to the class's readings.

The usual analysis assumes the limiting reagent L of every standard entirely bound in the
coloured product, so the standard curve is A_net = eps b [L]0 (blank-subtracted readings,
least squares through the origin), and then, for each test mixture, x = A_net/(eps b) and
K = x / (([M]0 - x)([L]0 - x)), averaged over the tests (the 1:1 expression; see e.g. Harris,
Quantitative Chemical Analysis, 9th ed., 2016, section 19-2, from memory).

Every function is vectorised over any leading axes (Monte Carlo trials).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["taught_K", "taught_epsilon"]


def taught_epsilon(
    limiting_total_M: NDArray[np.float64],
    net_absorbance: NDArray[np.float64],
    path_length_cm: float,
    *,
    intercept: bool = False,
) -> NDArray[np.float64]:
    """Molar absorptivity from the standard curve, assuming [product] = [L]0.

    Parameters
    ----------
    limiting_total_M
        Limiting-reagent totals of the standards, shape (..., n_standards) [mol/L].
    net_absorbance
        Blank-subtracted readings, same shape [unitless].
    path_length_cm
        Path length [cm].
    intercept
        False: least squares through the origin, slope = sum(c A)/sum(c^2); True: ordinary
        least squares with an intercept (Draper and Smith, Applied Regression Analysis,
        3rd ed., 1998, eq. 1.2.9, from memory).

    Returns
    -------
    NDArray[np.float64]
        eps, shape (...) [L mol⁻¹ cm⁻¹].
    """
    c = np.asarray(limiting_total_M, dtype=float)
    a = np.asarray(net_absorbance, dtype=float)
    if intercept:
        c_mean = c.mean(axis=-1, keepdims=True)
        a_mean = a.mean(axis=-1, keepdims=True)
        slope = ((c - c_mean) * (a - a_mean)).sum(axis=-1) / ((c - c_mean) ** 2).sum(axis=-1)
    else:
        slope = (c * a).sum(axis=-1) / (c * c).sum(axis=-1)
    result: NDArray[np.float64] = slope / path_length_cm
    return result


def taught_K(
    epsilon: NDArray[np.float64],
    excess_total_M: NDArray[np.float64],
    limiting_total_M: NDArray[np.float64],
    net_absorbance: NDArray[np.float64],
    path_length_cm: float,
) -> NDArray[np.float64]:
    """K from each test mixture with the 1:1 expression.

    Parameters
    ----------
    epsilon
        Molar absorptivity from the standards, shape (...) [L mol⁻¹ cm⁻¹].
    excess_total_M, limiting_total_M
        Totals of the test mixtures, shape (..., n_tests) [mol/L].
    net_absorbance
        Blank-subtracted readings of the tests, shape (..., n_tests) [unitless].
    path_length_cm
        Path length [cm].

    Returns
    -------
    NDArray[np.float64]
        K per test, shape (..., n_tests) [L/mol]; a reading implying more product than
        reagent gives a non-positive denominator and so a nonsensical K, as it would at the
        bench (inf where the denominator is 0).
    """
    eps = np.asarray(epsilon, dtype=float)[..., None]
    x = np.asarray(net_absorbance, dtype=float) / (eps * path_length_cm)
    denominator = (excess_total_M - x) * (limiting_total_M - x)
    safe = np.where(denominator != 0, denominator, 1.0)
    result: NDArray[np.float64] = np.where(denominator != 0, x / safe, np.inf)
    return result
