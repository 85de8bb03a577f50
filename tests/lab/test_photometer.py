"""Tests of planner.lab.photometer: Beer-Lambert, stray light, window and Ringbom noise.

Formulas: Skoog, Holler and Crouch, Principles of Instrumental Analysis, 7th ed., 2017,
chapter 13 (Beer's law for mixtures, stray radiation, the effect of constant transmittance
noise; section numbers from memory). Expected values are worked by hand from those formulas
and written out beside each test.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.optimize import minimize_scalar

from planner.errors import InvalidInputError
from planner.lab.photometer import (
    RINGBOM_OPTIMUM_ABSORBANCE,
    absorbance_sd_from_transmittance_sd,
    in_window,
    observed_absorbance,
    observed_absorbance_slope,
    relative_concentration_error,
    stray_light_ceiling,
    true_absorbance,
    true_from_observed,
)

_ABSORBANCES = st.floats(min_value=0.0, max_value=3.0)
_STRAY = st.floats(min_value=0.0, max_value=0.05)
_CONCENTRATIONS = st.lists(st.floats(min_value=0.0, max_value=1e-2), min_size=3, max_size=3)

# ---------------------------------------------------------------------------------------------
# Beer-Lambert, A = b sum eps_i c_i (Skoog et al. 2017, section 13B-1)
# ---------------------------------------------------------------------------------------------


def test_true_absorbance_hand_values():
    # 1.36e-4 mol/L FeSCN2+ at eps 4700 L/(mol cm) in 1 cm: 4700 x 1.36e-4 = 0.6392; with a
    # second absorber at 2e-4 mol/L, eps 100: + 0.02 = 0.6592; in 2 cm twice that.
    species_M = np.array([[1.36e-4, 0.0], [1.36e-4, 2e-4]])
    epsilon = np.array([4700.0, 100.0])
    np.testing.assert_allclose(true_absorbance(species_M, epsilon, 1.0), [0.6392, 0.6592])
    np.testing.assert_allclose(true_absorbance(species_M, epsilon, 2.0), [1.2784, 1.3184])
    assert true_absorbance(species_M, epsilon, 1.0).shape == (2,)
    assert true_absorbance(species_M[1], epsilon, 1.0).shape == ()


@given(_CONCENTRATIONS, _CONCENTRATIONS, st.floats(min_value=0.1, max_value=10.0))
def test_true_absorbance_is_additive_over_absorbers_and_mixtures(first, second, path_cm):
    # Absorbances of independent absorbers add (Beer's law for mixtures).
    epsilon = np.array([4700.0, 120.0, 35.0])
    first_M, second_M = np.asarray(first), np.asarray(second)
    together = true_absorbance(first_M + second_M, epsilon, path_cm)
    apart = true_absorbance(first_M, epsilon, path_cm) + true_absorbance(second_M, epsilon, path_cm)
    assert float(together) == pytest.approx(float(apart), rel=1e-12, abs=1e-15)
    each = [true_absorbance(first_M * (np.arange(3) == i), epsilon, path_cm) for i in range(3)]
    assert float(true_absorbance(first_M, epsilon, path_cm)) == pytest.approx(
        float(sum(each)), rel=1e-12, abs=1e-15
    )


@pytest.mark.parametrize("path_length_cm", [0.0, -1.0, math.nan, math.inf])
def test_true_absorbance_bad_path_names_the_field(path_length_cm):
    with pytest.raises(InvalidInputError, match=r"^path_length_cm: "):
        true_absorbance([1e-4], [4700.0], path_length_cm)


def test_true_absorbance_epsilon_shape_names_the_field():
    with pytest.raises(InvalidInputError, match=r"^epsilon: "):
        true_absorbance(np.zeros((4, 2)), [4700.0, 1.0, 2.0], 1.0)


# ---------------------------------------------------------------------------------------------
# Stray light, A_obs = log10((1 + s)/(10^-A + s)) (Skoog et al. 2017, section 13B-2)
# ---------------------------------------------------------------------------------------------


@given(st.floats(min_value=-1.0, max_value=6.0))
def test_no_stray_light_is_the_identity(absorbance):
    assert float(observed_absorbance(absorbance, 0.0)) == absorbance
    assert float(true_from_observed(absorbance, 0.0)) == absorbance


def test_observed_absorbance_hand_values():
    # A = 2, s = 0.01: log10(1.01 / (0.01 + 0.01)) = log10(50.5) = 1.7032914.
    assert float(observed_absorbance(2.0, 0.01)) == pytest.approx(1.7032914, abs=1e-7)
    # A = 1, s = 0.001: log10(1.001 / 0.101) = log10(9.910891) = 0.9961127.
    assert float(observed_absorbance(1.0, 0.001)) == pytest.approx(0.9961127, abs=1e-7)
    # A = 0 reads 0 whatever s: log10((1 + s)/(1 + s)) = 0.
    assert float(observed_absorbance(0.0, 0.02)) == pytest.approx(0.0, abs=1e-15)


def test_stray_light_ceiling():
    # s = 0.001: log10(1.001 / 0.001) = log10(1001) = 3.0004341; s = 0.01: log10(101) = 2.0043214.
    assert stray_light_ceiling(0.001) == pytest.approx(3.0004341, abs=1e-7)
    assert stray_light_ceiling(0.01) == pytest.approx(2.0043214, abs=1e-7)
    assert stray_light_ceiling(0.0) == math.inf
    # The reading approaches the ceiling from below as the true absorbance grows.
    readings = observed_absorbance([3.0, 5.0, 8.0, 40.0], 0.001)
    assert np.all(np.diff(readings) > 0.0)
    assert np.all(readings[:-1] < stray_light_ceiling(0.001))
    assert readings[-1] == pytest.approx(stray_light_ceiling(0.001), abs=1e-12)


@given(st.floats(min_value=1e-3, max_value=6.0), st.floats(min_value=1e-6, max_value=0.05))
def test_stray_light_lowers_every_positive_absorbance(absorbance, stray_light):
    assert float(observed_absorbance(absorbance, stray_light)) < absorbance


@given(_ABSORBANCES, _STRAY)
def test_true_from_observed_inverts_observed(absorbance, stray_light):
    observed = observed_absorbance(absorbance, stray_light)
    assert float(true_from_observed(observed, stray_light)) == pytest.approx(
        absorbance, rel=1e-9, abs=1e-9
    )


@given(st.floats(min_value=-0.5, max_value=1.9), _STRAY)
def test_observed_inverts_true_from_observed(observed, stray_light):
    if observed >= stray_light_ceiling(stray_light):
        return
    absorbance = true_from_observed(observed, stray_light)
    assert float(observed_absorbance(absorbance, stray_light)) == pytest.approx(
        observed, rel=1e-9, abs=1e-9
    )


def test_stray_light_functions_keep_array_shape():
    absorbance = np.linspace(0.0, 2.0, 12).reshape(3, 4)
    observed = observed_absorbance(absorbance, 0.002)
    assert observed.shape == (3, 4)
    np.testing.assert_allclose(true_from_observed(observed, 0.002), absorbance, atol=1e-12)


@pytest.mark.parametrize("observed", [3.0004341, 3.5, [0.5, 4.0], math.inf, math.nan])
def test_reading_at_or_above_the_ceiling_names_the_field(observed):
    # The ceiling for s = 0.001 is log10(1001) = 3.0004341 (worked above).
    with pytest.raises(InvalidInputError, match=r"^observed: "):
        true_from_observed(observed, 0.001)


@pytest.mark.parametrize("stray_light", [-1e-3, 1.0, 5.0, math.nan])
def test_bad_stray_light_names_the_field(stray_light):
    with pytest.raises(InvalidInputError, match=r"^stray_light: "):
        observed_absorbance(0.5, stray_light)
    with pytest.raises(InvalidInputError, match=r"^stray_light: "):
        true_from_observed(0.5, stray_light)
    with pytest.raises(InvalidInputError, match=r"^stray_light: "):
        stray_light_ceiling(stray_light)


# ---------------------------------------------------------------------------------------------
# Linear window (inclusive)
# ---------------------------------------------------------------------------------------------


def test_in_window_is_inclusive():
    result = in_window([0.0999, 0.1, 0.5, 0.9, 0.9001], (0.1, 0.9))
    assert result.dtype == np.bool_
    assert result.tolist() == [False, True, True, True, False]
    assert bool(in_window(0.1, (0.1, 0.9)))


@pytest.mark.parametrize("window", [(0.9, 0.1), (0.5, 0.5), (math.nan, 1.0)])
def test_bad_window_names_the_field(window):
    with pytest.raises(InvalidInputError, match=r"^window: "):
        in_window([0.5], window)


# ---------------------------------------------------------------------------------------------
# Constant transmittance noise (Ringbom; Skoog et al. 2017, section 13C)
# ---------------------------------------------------------------------------------------------


def test_ringbom_optimum_constant():
    # d/dA [1/(A 10^-A)] = 0 gives A = 1/ln(10) = 0.4342945 (T = 1/e).
    assert pytest.approx(0.4342945, abs=1e-7) == RINGBOM_OPTIMUM_ABSORBANCE


def test_relative_error_is_smallest_near_0_4343():
    # Minimise numerically, independently of the closed form; 0.4343 within 1e-4.
    result = minimize_scalar(
        lambda a: float(relative_concentration_error(a, 0.003)),
        bounds=(0.05, 2.0),
        method="bounded",
        options={"xatol": 1e-8},
    )
    assert result.success
    assert result.x == pytest.approx(0.4343, abs=1e-4)


def test_relative_error_hand_values():
    # sigma_c/c = 0.4343 sigma_T / (T A). At A = 1/ln 10 (T = 1/e): e x sigma_T; for
    # sigma_T = 0.003 that is 0.0081548. At A = 1 (T = 0.1): 0.4343 x 0.003 / 0.1 = 0.0130288.
    assert float(relative_concentration_error(1 / math.log(10), 0.003)) == pytest.approx(
        0.0081548, abs=1e-7
    )
    assert float(relative_concentration_error(1.0, 0.003)) == pytest.approx(0.0130288, abs=1e-7)


def test_relative_error_diverges_at_both_ends():
    sigma_t = 0.003
    at_optimum = float(relative_concentration_error(RINGBOM_OPTIMUM_ABSORBANCE, sigma_t))
    small = relative_concentration_error([1e-2, 1e-4, 1e-6], sigma_t)
    large = relative_concentration_error([3.0, 5.0, 10.0], sigma_t)
    assert np.all(np.diff(small) > 0.0)  # grows as A -> 0
    assert np.all(np.diff(large) > 0.0)  # grows as A grows
    assert small[-1] > 1e5 * at_optimum
    assert large[-1] > 1e8 * at_optimum
    assert float(relative_concentration_error(0.0, sigma_t)) == math.inf
    assert float(relative_concentration_error(400.0, sigma_t)) == math.inf


@given(st.floats(min_value=1e-3, max_value=5.0))
def test_optimum_is_a_global_minimum(absorbance):
    at_optimum = float(relative_concentration_error(RINGBOM_OPTIMUM_ABSORBANCE, 0.003))
    assert float(relative_concentration_error(absorbance, 0.003)) >= at_optimum * (1 - 1e-12)


def test_absorbance_sd_hand_values():
    # sigma_A = 0.4343 sigma_T / T: at A = 0 (T = 1) 0.4343 x 0.002 = 8.686e-4; at A = 1
    # (T = 0.1) ten times that; at A = 2 a hundred times.
    np.testing.assert_allclose(
        absorbance_sd_from_transmittance_sd([0.0, 1.0, 2.0], 0.002),
        [8.6859e-4, 8.6859e-3, 8.6859e-2],
        rtol=1e-4,
    )


@given(_ABSORBANCES.filter(lambda a: a > 1e-3), st.floats(min_value=0.0, max_value=0.01))
def test_relative_error_is_absorbance_sd_over_absorbance(absorbance, sigma_t):
    # sigma_c/c = sigma_A / A when c is proportional to A (Beer's law).
    sigma_a = float(absorbance_sd_from_transmittance_sd(absorbance, sigma_t))
    assert float(relative_concentration_error(absorbance, sigma_t)) == pytest.approx(
        sigma_a / absorbance, rel=1e-12, abs=1e-300
    )


@pytest.mark.parametrize("sigma_t", [-0.001, math.nan])
def test_bad_transmittance_sd_names_the_field(sigma_t):
    with pytest.raises(InvalidInputError, match=r"^transmittance_sd: "):
        relative_concentration_error(0.5, sigma_t)
    with pytest.raises(InvalidInputError, match=r"^transmittance_sd: "):
        absorbance_sd_from_transmittance_sd(0.5, sigma_t)


@pytest.mark.parametrize("absorbance", [-0.01, [0.5, -1.0], math.nan])
def test_negative_absorbance_names_the_field(absorbance):
    with pytest.raises(InvalidInputError, match=r"^absorbance: "):
        relative_concentration_error(absorbance, 0.003)


@pytest.mark.parametrize("stray_light", [0.0, 1e-4, 0.01, 0.05])
@pytest.mark.parametrize("absorbance", [0.0, 0.3, 1.0, 2.5])
def test_observed_absorbance_slope_is_sympy_derivative(absorbance, stray_light):
    # Reference: sympy differentiates log10((1 + s)/(10^-A + s)) with respect to A.
    import sympy

    a, s = sympy.symbols("A s", nonnegative=True)
    reading = sympy.log((1 + s) / (10 ** (-a) + s), 10)
    expected = float(sympy.diff(reading, a).subs({a: absorbance, s: stray_light}))
    got = float(observed_absorbance_slope(absorbance, stray_light))
    assert got == pytest.approx(expected, rel=1e-12)
