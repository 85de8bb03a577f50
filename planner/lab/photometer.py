"""The photometer: Beer-Lambert absorbance, linear window, stray light and reading noise.

All functions are vectorised over numpy arrays and pure. Absorbances are decadic and
unitless [absorbance units]; concentrations [mol/L]; path lengths [cm]; molar absorptivities
[L mol⁻¹ cm⁻¹]; transmittances T = P/P0 and the stray-light fraction s = Ps/P0 [unitless].
Array inputs give arrays of the same shape; scalar inputs give 0-d arrays (use ``float()``).

References
----------
D. A. Skoog, F. J. Holler and S. R. Crouch, Principles of Instrumental Analysis, 7th ed.,
Cengage Learning, 2017, chapter 13, "An Introduction to Ultraviolet-Visible Molecular
Absorption Spectrometry" (section and equation numbers below are from memory).
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from planner.errors import InvalidInputError

__all__ = [
    "RINGBOM_OPTIMUM_ABSORBANCE",
    "absorbance_sd_from_transmittance_sd",
    "in_window",
    "observed_absorbance",
    "observed_absorbance_slope",
    "relative_concentration_error",
    "stray_light_ceiling",
    "true_absorbance",
    "true_from_observed",
]

#: log10(e) = 1/ln(10) ≈ 0.4343, the factor between natural and decadic logarithms
#: [unitless].
_LOG10_E = 1.0 / math.log(10.0)

#: Absorbance at which constant transmittance noise gives the smallest relative concentration
#: error, A = 1/ln(10) ≈ 0.4343 (T = 1/e ≈ 0.368) [absorbance units]. Setting
#: d/dA [1/(A 10^-A)] = 0 gives 1 - A ln(10) = 0. Skoog, Holler and Crouch, Principles of
#: Instrumental Analysis, 7th ed., 2017, section 13C, "Effects of instrumental noise on
#: spectrophotometric analyses" (from memory); A. Ringbom, Z. Anal. Chem. 115 (1939) 332-343
#: (from memory).
RINGBOM_OPTIMUM_ABSORBANCE: float = _LOG10_E


def _check_stray_light(stray_light: float) -> float:
    value = float(stray_light)
    # A working photometer's stray light is a small fraction of the incident power (common
    # practice: below 1e-2); 1 or more is almost surely a percentage typed as a fraction.
    if not math.isfinite(value) or value < 0.0 or value >= 1.0:
        raise InvalidInputError(
            "the stray-light fraction must be at least 0 and below 1",
            field="stray_light",
            value=stray_light,
            hint="give a fraction of the incident power, e.g. 0.001 for 0.1 %",
        )
    return value


def true_absorbance(
    species_M: ArrayLike, epsilon: ArrayLike, path_length_cm: float
) -> NDArray[np.float64]:
    """Absorbance of mixtures of several absorbers (Beer-Lambert law).

    Parameters
    ----------
    species_M
        Concentration of each absorber in each mixture, shape (n, s), or (s,) for one mixture
        [mol/L].
    epsilon
        Molar absorptivity of each absorber at the working wavelength, shape (s,), or one
        row per mixture, the shape of ``species_M`` [L mol⁻¹ cm⁻¹].
    path_length_cm
        Cuvette path length b [cm], positive.

    Returns
    -------
    NDArray[np.float64]
        Absorbance A, shape (n,), or 0-d for an (s,) input [absorbance units].

    Raises
    ------
    InvalidInputError
        With field ``"path_length_cm"`` for a path that is not positive and finite, and
        ``"epsilon"`` when there is not one absorptivity per absorber (last axis).

    Notes
    -----
    A = b Σ_i ε_i c_i: absorbances of independent absorbers add.

    References
    ----------
    Skoog, Holler and Crouch, Principles of Instrumental Analysis, 7th ed., 2017, section
    13B-1, "Application of Beer's law to mixtures" (section number from memory).

    Examples
    --------
    >>> round(float(true_absorbance([1e-4, 2e-4], [4700.0, 100.0], 1.0)), 6)
    0.49
    """
    b_cm = float(path_length_cm)
    if not math.isfinite(b_cm) or b_cm <= 0.0:
        raise InvalidInputError(
            "the path length must be a positive number",
            field="path_length_cm",
            value=path_length_cm,
            hint="give the cuvette path length in cm, e.g. 1.0",
        )
    eps = np.asarray(epsilon, dtype=float)
    c_M = np.asarray(species_M, dtype=float)
    if c_M.ndim == 2 and eps.shape == c_M.shape:
        return np.asarray(b_cm * np.sum(c_M * eps, axis=1), dtype=float)
    if c_M.ndim < 1 or eps.shape != c_M.shape[-1:]:
        raise InvalidInputError(
            "there must be one molar absorptivity per absorber (last axis of species_M)",
            field="epsilon",
            value=eps.shape,
            hint=f"give an array of shape ({c_M.shape[-1] if c_M.ndim else 's'},)",
        )
    return np.asarray(b_cm * (c_M @ eps), dtype=float)


def stray_light_ceiling(stray_light: float) -> float:
    """Highest absorbance a photometer with stray light can read.

    Parameters
    ----------
    stray_light
        Stray-light fraction s = Ps/P0 [unitless], 0 <= s < 1.

    Returns
    -------
    float
        A_max = log10((1 + s)/s), the limit of :func:`observed_absorbance` as the true
        absorbance grows without bound [absorbance units]; ``inf`` for s = 0.

    Raises
    ------
    InvalidInputError
        With field ``"stray_light"`` when s is negative, 1 or more, or not finite.

    References
    ----------
    The module's reference (Skoog, Holler and Crouch, 2017), section 13B-2 on stray radiation,
    as :func:`observed_absorbance` (from memory).

    Examples
    --------
    >>> round(stray_light_ceiling(0.001), 4)
    3.0004
    """
    s = _check_stray_light(stray_light)
    if s == 0.0:
        return math.inf
    return math.log10((1.0 + s) / s)


def observed_absorbance(true_absorbance: ArrayLike, stray_light: float) -> NDArray[np.float64]:
    """Absorbance the photometer reads when stray light reaches the detector.

    Parameters
    ----------
    true_absorbance
        Beer-Lambert absorbance A, any shape [absorbance units].
    stray_light
        Stray-light fraction s = Ps/P0 [unitless], 0 <= s < 1.

    Returns
    -------
    NDArray[np.float64]
        A_obs = log10((1 + s)/(10^-A + s)), same shape as ``true_absorbance``
        [absorbance units]. A_obs = A for s = 0; A_obs < A for A > 0 and s > 0; A_obs tends
        to :func:`stray_light_ceiling` as A grows.

    Raises
    ------
    InvalidInputError
        With field ``"stray_light"`` when s is negative, 1 or more, or not finite.

    Notes
    -----
    The stray power Ps passes both reference and sample, so the reading is
    A_obs = log10((P0 + Ps)/(P + Ps)); dividing by P0 with T = P/P0 = 10^-A gives the
    formula above.

    References
    ----------
    Skoog, Holler and Crouch, Principles of Instrumental Analysis, 7th ed., 2017, section
    13B-2, "Instrumental deviations in the presence of stray radiation" (from memory).

    Examples
    --------
    >>> round(float(observed_absorbance(2.0, 0.01)), 4)
    1.7033
    """
    s = _check_stray_light(stray_light)
    a = np.asarray(true_absorbance, dtype=float)
    if s == 0.0:
        # Exact identity without rounding or overflow of 10^-A for very large A.
        return a.copy()
    return np.asarray(np.log10((1.0 + s) / (10.0 ** (-a) + s)), dtype=float)


def observed_absorbance_slope(
    true_absorbance: ArrayLike, stray_light: float
) -> NDArray[np.float64]:
    """How fast the reading follows the Beer-Lambert absorbance: dA_obs/dA.

    Parameters
    ----------
    true_absorbance
        Beer-Lambert absorbance A, any shape [absorbance units].
    stray_light
        Stray-light fraction s = Ps/P0 [unitless], 0 <= s < 1.

    Returns
    -------
    NDArray[np.float64]
        10^-A/(10^-A + s), the derivative of :func:`observed_absorbance`, same shape as
        ``true_absorbance`` [unitless]: 1 without stray light, falling towards 0 as the
        reading nears :func:`stray_light_ceiling`.

    Raises
    ------
    InvalidInputError
        With field ``"stray_light"`` for an invalid s.

    Examples
    --------
    >>> round(float(observed_absorbance_slope(2.0, 0.01)), 4)
    0.5
    """
    s = _check_stray_light(stray_light)
    a = np.asarray(true_absorbance, dtype=float)
    if s == 0.0:
        return np.ones_like(a)
    transmitted = 10.0 ** (-a)
    return np.asarray(transmitted / (transmitted + s), dtype=float)


def true_from_observed(observed: ArrayLike, stray_light: float) -> NDArray[np.float64]:
    """Beer-Lambert absorbance from a photometer reading with stray light (exact inverse).

    Parameters
    ----------
    observed
        Reading A_obs, any shape [absorbance units]; every value below
        :func:`stray_light_ceiling`.
    stray_light
        Stray-light fraction s = Ps/P0 [unitless], 0 <= s < 1.

    Returns
    -------
    NDArray[np.float64]
        A = -log10((1 + s) 10^-A_obs - s), same shape as ``observed`` [absorbance units].

    Raises
    ------
    InvalidInputError
        With field ``"observed"`` when some reading is at or above the stray-light ceiling
        log10((1 + s)/s) or is not finite, and ``"stray_light"`` for an invalid s.

    Notes
    -----
    Solving A_obs = log10((1 + s)/(10^-A + s)) for A. Close to the ceiling the inverse
    amplifies reading errors without bound.

    References
    ----------
    Skoog, Holler and Crouch, Principles of Instrumental Analysis, 7th ed., 2017, section
    13B-2 (from memory); inverse derived here.

    Examples
    --------
    >>> round(float(true_from_observed(1.7033, 0.01)), 3)
    2.0
    """
    s = _check_stray_light(stray_light)
    a_obs = np.asarray(observed, dtype=float)
    ceiling = stray_light_ceiling(s)
    bad = ~np.isfinite(a_obs) | (a_obs >= ceiling)
    if np.any(bad):
        first = float(a_obs[bad].flat[0]) if a_obs.ndim else float(a_obs)
        raise InvalidInputError(
            "an observed absorbance is at or above the highest reading the stray light allows",
            field="observed",
            value=first,
            hint=f"readings must be finite and below log10((1 + s)/s) = {ceiling:.4g} for "
            f"s = {s:g}",
        )
    if s == 0.0:
        return a_obs.copy()
    transmittance = (1.0 + s) * 10.0 ** (-a_obs) - s
    return np.asarray(-np.log10(transmittance), dtype=float)


def in_window(absorbance: ArrayLike, window: tuple[float, float]) -> NDArray[np.bool_]:
    """Whether absorbances lie inside the photometer's linear working window.

    Parameters
    ----------
    absorbance
        Absorbance, any shape [absorbance units].
    window
        (low, high) of the linear range [absorbance units], low < high; both ends inclusive.
        Common practice is roughly (0.1, 1.0).

    Returns
    -------
    NDArray[np.bool_]
        ``low <= A <= high``, same shape as ``absorbance``.

    Raises
    ------
    InvalidInputError
        With field ``"window"`` unless low < high, both finite.

    Examples
    --------
    >>> in_window([0.05, 0.1, 0.9, 1.2], (0.1, 0.9)).tolist()
    [False, True, True, False]
    """
    a = np.asarray(absorbance, dtype=float)
    low, high = (float(x) for x in window)
    if not (math.isfinite(low) and math.isfinite(high) and low < high):
        raise InvalidInputError(
            "the absorbance window must be (low, high) with low < high",
            field="window",
            value=window,
            hint="give the linear range of the photometer, e.g. (0.1, 0.9)",
        )
    return np.asarray((a >= low) & (a <= high), dtype=np.bool_)


def _check_transmittance_sd(transmittance_sd: ArrayLike) -> NDArray[np.float64]:
    sd = np.asarray(transmittance_sd, dtype=float)
    if not np.all(np.isfinite(sd)) or np.any(sd < 0.0):
        raise InvalidInputError(
            "the transmittance standard deviation must be finite and zero or more",
            field="transmittance_sd",
            value=transmittance_sd,
            hint="give sigma_T as a fraction of full scale, e.g. 0.003",
        )
    return sd


def absorbance_sd_from_transmittance_sd(
    absorbance: ArrayLike, transmittance_sd: ArrayLike
) -> NDArray[np.float64]:
    """Standard deviation of an absorbance reading from constant transmittance noise.

    Parameters
    ----------
    absorbance
        Absorbance A, any shape [absorbance units].
    transmittance_sd
        Standard deviation of the transmittance reading σT [unitless], broadcastable
        against ``absorbance``.

    Returns
    -------
    NDArray[np.float64]
        σA = log10(e) σT / T = 0.4343 σT 10^A, broadcast shape [absorbance units].

    Raises
    ------
    InvalidInputError
        With field ``"transmittance_sd"`` for a negative or non-finite σT.

    Notes
    -----
    First-order propagation through A = -log10 T: |dA/dT| = log10(e)/T (law of propagation
    of uncertainty, JCGM 100:2008, Evaluation of measurement data - Guide to the expression
    of uncertainty in measurement, eq. (10)).

    References
    ----------
    Skoog, Holler and Crouch, Principles of Instrumental Analysis, 7th ed., 2017, section
    13C (from memory). JCGM 100:2008 (GUM), section 5.1.2, eq. (10).

    Examples
    --------
    >>> round(float(absorbance_sd_from_transmittance_sd(1.0, 0.001)), 5)
    0.00434
    """
    sd = _check_transmittance_sd(transmittance_sd)
    a = np.asarray(absorbance, dtype=float)
    with np.errstate(over="ignore"):  # 10^A overflows to inf beyond A ≈ 308, its limit
        return np.asarray(_LOG10_E * sd * 10.0**a, dtype=float)


def relative_concentration_error(
    absorbance: ArrayLike, transmittance_sd: ArrayLike
) -> NDArray[np.float64]:
    """Relative standard uncertainty u(c)/c of a concentration from constant transmittance noise.

    Parameters
    ----------
    absorbance, transmittance_sd
        As for :func:`absorbance_sd_from_transmittance_sd`, with A >= 0.

    Returns
    -------
    NDArray[np.float64]
        σc/c = log10(e) σT / (T A) with T = 10^-A, broadcast shape [unitless]; ``inf`` at
        A = 0. Smallest at :data:`RINGBOM_OPTIMUM_ABSORBANCE`, growing without bound as
        A -> 0 and as A grows.

    Raises
    ------
    InvalidInputError
        With field ``"absorbance"`` for a negative or non-finite absorbance, and
        ``"transmittance_sd"`` for a negative or non-finite σT.

    Notes
    -----
    With c proportional to A = -log10 T, σc/c = σA/A = 0.4343 σT / (T |log10 T|), the
    Ringbom relation for noise independent of T (limited readout resolution, dark-current
    and amplifier noise).

    References
    ----------
    Skoog, Holler and Crouch, Principles of Instrumental Analysis, 7th ed., 2017, section
    13C-1, equation for σc/c with constant σT (section and equation numbers from memory).
    A. Ringbom, Z. Anal. Chem. 115 (1939) 332-343 (from memory).

    Examples
    --------
    >>> round(float(relative_concentration_error(RINGBOM_OPTIMUM_ABSORBANCE, 0.003)), 5)
    0.00815
    """
    a = np.asarray(absorbance, dtype=float)
    if not np.all(np.isfinite(a)) or np.any(a < 0.0):
        raise InvalidInputError(
            "the relative concentration error needs finite absorbances of zero or more",
            field="absorbance",
            value=float(a[~np.isfinite(a) | (a < 0.0)].flat[0]) if a.ndim else float(a),
            hint="pass Beer-Lambert absorbances of the sample, not blank-corrected noise",
        )
    # σc/c = σA/A. At A = 0 the relative error is infinite (its limit), and σA overflows to
    # inf beyond A ≈ 308, also its limit; neither should warn.
    sd_A = absorbance_sd_from_transmittance_sd(a, transmittance_sd)
    with np.errstate(invalid="ignore"):
        error = np.where(a > 0.0, sd_A / np.where(a > 0.0, a, 1.0), np.inf)
    return np.asarray(error, dtype=float)
