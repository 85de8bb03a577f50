"""The analysis usually applied to the class's readings, and its first-order prediction.

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

from planner.result import Prediction

__all__ = ["predict_taught", "taught_K", "taught_epsilon"]


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


def _analysis(
    values: NDArray[np.float64], n_standards: int, n_tests: int, path_length_cm: float
) -> NDArray[np.float64]:
    """[eps, mean K] from one stacked vector of inputs (rows: evaluation points)."""
    blank = values[:, 0:1]
    s0 = 1
    std_l0 = values[:, s0 : s0 + n_standards]
    std_a = values[:, s0 + n_standards : s0 + 2 * n_standards] - blank
    t0 = s0 + 2 * n_standards
    test_m0 = values[:, t0 : t0 + n_tests]
    test_l0 = values[:, t0 + n_tests : t0 + 2 * n_tests]
    test_a = values[:, t0 + 2 * n_tests : t0 + 3 * n_tests] - blank
    eps = taught_epsilon(std_l0, std_a, path_length_cm)
    k = taught_K(eps, test_m0, test_l0, test_a, path_length_cm)
    return np.stack([eps, k.mean(axis=-1)], axis=-1)


def predict_taught(
    *,
    path_length_cm: float,
    blank_absorbance: float,
    standards_limiting_M: NDArray[np.float64],
    standards_absorbance: NDArray[np.float64],
    u_standards_limiting_rel: NDArray[np.float64],
    tests_excess_M: NDArray[np.float64],
    tests_limiting_M: NDArray[np.float64],
    tests_absorbance: NDArray[np.float64],
    u_tests_excess_rel: NDArray[np.float64],
    u_tests_limiting_rel: NDArray[np.float64],
    absorbance_sd: float,
    K_true: float,
    epsilon_true: float,
) -> Prediction:
    """Expected result of the usual analysis and its first-order standard uncertainty.

    The readings are the predicted ones (exact equilibrium, stray light), so the bias of the
    all-bound assumption is in the expected eps and K. Uncertainties follow the GUM law of
    propagation (JCGM 100:2008, eq. 10) for independent inputs: every reading (SD
    ``absorbance_sd``, blank included) and every total concentration, with sensitivity
    coefficients from central differences of the analysis itself.

    Returns
    -------
    Prediction
    """
    n_std = len(standards_limiting_M)
    n_test = len(tests_limiting_M)
    centre = np.concatenate(
        [
            [blank_absorbance],
            standards_limiting_M,
            standards_absorbance,
            tests_excess_M,
            tests_limiting_M,
            tests_absorbance,
        ]
    ).astype(float)
    u = np.concatenate(
        [
            [absorbance_sd],
            standards_limiting_M * u_standards_limiting_rel,
            np.full(n_std, absorbance_sd),
            tests_excess_M * u_tests_excess_rel,
            tests_limiting_M * u_tests_limiting_rel,
            np.full(n_test, absorbance_sd),
        ]
    )
    base = _analysis(centre[None, :], n_std, n_test, path_length_cm)[0]
    # Central differences with a step of 1e-4 u per input: linear to far better than 0.1 %.
    steps = np.where(u > 0, 1e-4 * u, 0.0)
    plus = centre[None, :] + np.diag(steps)
    minus = centre[None, :] - np.diag(steps)
    jac = (
        _analysis(plus, n_std, n_test, path_length_cm)
        - _analysis(minus, n_std, n_test, path_length_cm)
    ) / np.where(steps > 0, 2 * steps, 1.0)[:, None]
    variance = ((jac * u[:, None]) ** 2).sum(axis=0)
    k_per_test = taught_K(
        np.array(base[0]),
        tests_excess_M,
        tests_limiting_M,
        tests_absorbance - blank_absorbance,
        path_length_cm,
    )
    return Prediction(
        epsilon=float(base[0]),
        u_epsilon=float(np.sqrt(variance[0])),
        K=float(base[1]),
        u_K=float(np.sqrt(variance[1])),
        K_bias_from_assumption=float(base[1] / K_true - 1.0),
        K_true=float(K_true),
        epsilon_true=float(epsilon_true),
        K_per_test=tuple(float(k) for k in np.atleast_1d(k_per_test)),
    )
