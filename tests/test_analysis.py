"""The two analyses of planner.analysis, against independent references.

- The all-bound standard curve against numpy.polyfit (least squares with an intercept) and the
  normal equation of a line through the origin written out by hand.
- The all-bound K against the 1:1 expression evaluated by hand on a worked example.
- The global fit against readings made in the test from the closed-form 1:1 equilibrium (the
  quadratic root, written out here, not the planner's solver), and the vectorised fit against
  scipy.optimize.least_squares on the same data.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from planner.analysis import (
    Layout,
    all_bound_epsilon,
    all_bound_K,
    global_fit,
    global_fit_batch,
    global_fit_table,
)
from planner.inputs import Instrument, ProductSpecies, Reaction

REACTION = Reaction(
    temperature_C=25.0,
    ionic_strength_M=0.5,
    components=("M", "L"),
    species=(ProductSpecies(name="ML", formula={"M": 1, "L": 1}, log_beta=2.0, epsilon=4000.0),),
)
INSTRUMENT = Instrument(
    wavelength_nm=450.0,
    path_length_cm=1.0,
    absorbance_window=(0.1, 1.0),
    absorbance_sd=0.003,
    stray_light=0.0,
    cuvette_fill_mL=3.0,
)


def _complex_M(K: float, m0: float, l0: float) -> float:
    """[ML] of a 1:1 system: the smaller root of K x^2 - (K m0 + K l0 + 1) x + K m0 l0 = 0."""
    b = K * (m0 + l0) + 1.0
    return (b - math.sqrt(b * b - 4.0 * K * K * m0 * l0)) / (2.0 * K)


def test_standard_curve_through_the_origin_is_the_normal_equation():
    c = np.array([1e-5, 2e-5, 4e-5, 8e-5])
    a = np.array([0.041, 0.079, 0.162, 0.318])
    # Hand derivation: minimising sum (a - s c)^2 gives s = sum(c a) / sum(c^2).
    expected = float((c * a).sum() / (c * c).sum()) / 2.0
    assert float(all_bound_epsilon(c, a, 2.0)) == pytest.approx(expected, rel=1e-12)


def test_standard_curve_with_an_intercept_matches_numpy_polyfit():
    c = np.array([1e-5, 2e-5, 4e-5, 8e-5])
    a = np.array([0.046, 0.083, 0.161, 0.322])
    slope, _ = np.polyfit(c, a, 1)  # numpy's least-squares line, an independent routine
    assert float(all_bound_epsilon(c, a, 1.0, intercept=True)) == pytest.approx(slope, rel=1e-10)


def test_all_bound_K_worked_example():
    # eps 4000, b 1 cm, A_net 0.2 -> x = 5e-5 mol/L; M0 = 1e-3, L0 = 1e-4:
    # K = 5e-5 / ((1e-3 - 5e-5)(1e-4 - 5e-5)) = 5e-5 / (9.5e-4 * 5e-5) = 1052.63... L/mol.
    k = all_bound_K(4000.0, np.array([1e-3]), np.array([1e-4]), np.array([0.2]), 1.0)
    assert float(k[0]) == pytest.approx(1052.6315789, rel=1e-9)


def test_all_bound_K_of_an_impossible_reading_is_not_finite_and_positive():
    # A reading implying all of the limiting reagent bound: the denominator is zero.
    k = all_bound_K(4000.0, np.array([1e-3]), np.array([1e-4]), np.array([0.4]), 1.0)
    assert not np.isfinite(k[0])


def _layout() -> tuple[Layout, np.ndarray]:
    totals = np.array(
        [
            [5e-3, 0.0],  # blank
            [0.2, 2e-5],
            [0.2, 5e-5],
            [0.2, 1e-4],  # standards
            [2e-3, 1e-4],
            [5e-3, 1e-4],
            [1e-2, 1e-4],  # tests
        ]
    )
    layout = Layout(
        totals_M=totals,
        blanks=np.array([0]),
        standards=np.array([1, 2, 3]),
        tests=np.array([4, 5, 6]),
        limiting=1,
        excess=0,
        measured=0,
        epsilon_true=4000.0,
        K_true=100.0,
    )
    return layout, totals


def test_global_fit_recovers_K_and_epsilon_from_closed_form_readings():
    layout, totals = _layout()
    true_K, true_eps = 130.0, 3600.0
    readings = np.array([true_eps * _complex_M(true_K, m0, l0) for m0, l0 in totals])
    eps, k = global_fit(REACTION, INSTRUMENT, layout, readings)
    assert k == pytest.approx(true_K, rel=1e-6)
    assert eps == pytest.approx(true_eps, rel=1e-6)


def test_vectorised_global_fit_matches_scipy_least_squares():
    layout, totals = _layout()
    rng = np.random.default_rng(7)
    clean = np.array([3900.0 * _complex_M(90.0, m0, l0) for m0, l0 in totals])
    sets = clean[None, :] + 0.002 * rng.standard_normal((5, clean.size))
    table = global_fit_table(REACTION, INSTRUMENT, layout)
    net = sets - sets[:, layout.blanks].mean(axis=1, keepdims=True)
    start = np.tile([4000.0, 2.0], (5, 1))
    eps, k = global_fit_batch(table, net, start)
    for row in range(5):
        ref_eps, ref_k = global_fit(REACTION, INSTRUMENT, layout, sets[row])
        # The table's spline error is below 1e-7 relative; the fits agree far inside the noise.
        assert k[row] == pytest.approx(ref_k, rel=1e-5)
        assert eps[row] == pytest.approx(ref_eps, rel=1e-5)


def test_log_sensitivities_are_sympys_derivatives_of_the_one_expression():
    import sympy as sp

    from planner.analysis import all_bound_K_from_x, all_bound_K_log_sensitivities

    x, m, lig = sp.symbols("x M L", positive=True)
    k = all_bound_K_from_x(x, m, lig)
    point = {x: 4e-5, m: 2e-3, lig: 1e-4}
    expected = [
        abs(float((sp.diff(k, v) * v / k).subs(point))) for v in (x, m, lig)
    ]  # d ln K / d ln v = (dK/dv) v / K, by sympy (an independent differentiation)
    got = all_bound_K_log_sensitivities(np.array(4e-5), np.array(2e-3), np.array(1e-4))
    assert [float(g) for g in got] == pytest.approx(expected, rel=1e-12)


def test_global_fit_gain_predicts_how_scipy_least_squares_answers_a_small_change():
    # The linearised fit (J^T J)^-1 J^T against the fit itself: scipy.optimize.least_squares
    # refits readings moved by a small, arbitrary change; the two moves of (eps, log10 K) agree
    # to first order.
    from planner.analysis import global_fit_gain, global_fit_jacobian

    layout, totals = _layout()
    clean = np.array([4000.0 * _complex_M(100.0, m0, l0) for m0, l0 in totals])
    gain = global_fit_gain(global_fit_jacobian(REACTION, INSTRUMENT, layout))
    fitted_rows = np.concatenate([layout.standards, layout.tests])
    change = 1e-4 * np.array([0.3, -0.7, 1.0, 0.4, -0.2, 0.9, -1.0])
    eps, k = global_fit(REACTION, INSTRUMENT, layout, clean + change)
    net_change = change[fitted_rows] - change[layout.blanks].mean()
    predicted = gain @ net_change
    assert eps - 4000.0 == pytest.approx(predicted[0], rel=2e-3)
    assert math.log10(k / 100.0) == pytest.approx(predicted[1], rel=2e-3)


def test_global_fit_jacobian_with_stray_light_matches_the_hand_derivative():
    # Reference: a hand derivation on the 1:1 closed form (not the planner's solver). With
    # only ML absorbing (eps 4000, b 1 cm) and stray light s = 0.01, the reading is
    # A_obs = log10((1 + s)/(10^-A + s)) with A = eps x, so dA_obs/d eps = f x and
    # dA_obs/d log10 K = f eps ln(10) K dx/dK with f = 10^-A/(10^-A + s). Differentiating
    # K (M0 - x)(L0 - x) = x gives dx/dK = (M0 - x)(L0 - x)/(1 + K (M0 + L0 - 2x)); x is the
    # quadratic's smaller root in its cancellation-free form 2 K M0 L0/(b + sqrt(b^2 - 4K^2 M0 L0)).
    # Each column has the blank's derivative subtracted, as the fit subtracts the blank.
    import dataclasses

    from planner.analysis import global_fit_jacobian

    layout, totals = _layout()
    k, eps, s = 100.0, 4000.0, 0.01
    jacobian = global_fit_jacobian(REACTION, dataclasses.replace(INSTRUMENT, stray_light=s), layout)
    rows = []
    for m0, l0 in totals:
        b = k * (m0 + l0) + 1.0
        x = 2.0 * k * m0 * l0 / (b + math.sqrt(b * b - 4.0 * k * k * m0 * l0))
        dx_dk = (m0 - x) * (l0 - x) / (1.0 + k * (m0 + l0 - 2.0 * x))
        f = 10 ** (-eps * x) / (10 ** (-eps * x) + s)
        rows.append([f * x, f * eps * math.log(10.0) * k * dx_dk])
    derivative = np.array(rows)
    fitted = np.concatenate([layout.standards, layout.tests])
    expected = derivative[fitted] - derivative[layout.blanks].mean(axis=0)
    np.testing.assert_allclose(jacobian, expected, rtol=1e-10)


def test_global_fit_gain_of_inseparable_parameters_is_not_finite():
    from planner.analysis import global_fit_gain

    # Two identical columns: eps and log10 K move the readings the same way.
    jacobian = np.array([[1.0, 1.0], [2.0, 2.0], [3.0, 3.0]])
    assert not np.isfinite(global_fit_gain(jacobian)).any()
