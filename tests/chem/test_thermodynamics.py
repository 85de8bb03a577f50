"""The integrated van 't Hoff equation (planner.chem.thermodynamics) against hand values."""

from __future__ import annotations

import math

import numpy as np
import pytest

from planner.chem.thermodynamics import d_log_beta_d_temperature, log_beta_at_temperature


def test_van_t_hoff_hand_calculation() -> None:
    # ln(K2/K1) = -(dH/R)(1/T2 - 1/T1) (Atkins and de Paula, Physical Chemistry, 9th ed.,
    # 2010, eq. 6.23, from memory), by hand with R = 8.314462618 J/(mol K) (CODATA 2018):
    # dH = -6.0 kJ/mol, T1 = 298.15 K, T2 = 293.15 K:
    # 1/T2 - 1/T1 = 0.003411223 - 0.003354016 = 5.72075e-5 K^-1;
    # dH/R = -721.6346 K; ln(K2/K1) = 721.6346 * 5.72075e-5 = 0.0412831;
    # K2/K1 = exp(0.0412831) = 1.042147, so K = 98 at 25 °C becomes 102.1304 at 20 °C.
    log_k = float(log_beta_at_temperature(math.log10(98.0), -6.0, 25.0, 20.0))
    assert 10.0**log_k == pytest.approx(102.1304, rel=1e-5)
    # An endothermic reaction moves the other way, and no enthalpy moves nothing.
    assert float(log_beta_at_temperature(2.0, 6.0, 25.0, 20.0)) < 2.0
    assert float(log_beta_at_temperature(2.0, 0.0, 25.0, 20.0)) == 2.0


def test_one_per_cent_per_kelvin_for_a_few_kilojoules() -> None:
    # d ln K/dT = dH/(R T^2): for dH = -6 kJ/mol at 298.15 K, -6000/(8.314462618 * 88893.4)
    # = -0.0081184 per kelvin, the "about 1 % per kelvin" of |dH| 5-8 kJ/mol.
    slope = float(d_log_beta_d_temperature(-6.0, 25.0)) * math.log(10.0)
    assert slope == pytest.approx(-0.0081184, rel=1e-4)
    # The slope is the derivative of the integrated form (central difference, 1e-3 K).
    h = 1e-3
    numeric = (
        log_beta_at_temperature(2.0, -6.0, 25.0, 25.0 + h)
        - log_beta_at_temperature(2.0, -6.0, 25.0, 25.0 - h)
    ) / (2 * h)
    np.testing.assert_allclose(numeric, d_log_beta_d_temperature(-6.0, 25.0), rtol=1e-6)
