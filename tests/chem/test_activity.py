"""Activity corrections of formation constants (planner.chem.activity) against published values."""

from __future__ import annotations

import math

import numpy as np
import pytest

from planner.chem.activity import (
    davies_log_gamma,
    delta_z_squared,
    log_beta_in_medium,
    medium_term,
    sit_log_gamma,
)


@pytest.mark.parametrize(("charge", "gamma"), [(1, 0.78), (2, 0.37), (3, 0.11)])
def test_davies_gammas_at_0_1_mol_per_L(charge, gamma) -> None:
    # Stumm and Morgan, Aquatic Chemistry, 3rd ed., 1996, Table 3.3 (Davies, I = 0.1 mol/L;
    # from memory): 0.78, 0.37, 0.11 for charges 1, 2, 3; the table gives two figures.
    assert 10.0 ** float(davies_log_gamma(charge, 0.1)) == pytest.approx(gamma, abs=0.006)


def test_davies_by_hand() -> None:
    # -0.509 (sqrt(0.1)/(1 + sqrt(0.1)) - 0.03) = -0.509 * 0.210253 = -0.107019.
    assert float(davies_log_gamma(1, 0.1)) == pytest.approx(-0.107019, rel=1e-5)


def test_sit_hydrogen_ion_in_one_molal_perchloric_acid() -> None:
    # NEA TDB-2 (Grenthe, Plyasunov and Spahiu; Grenthe and Puigdomenech 1997, ch. IX), from
    # memory: D(1 m) = 0.509 / (1 + 1.5) = 0.2036 and eps(H+, ClO4-) = 0.14 kg/mol, so
    # log10 gamma(H+) = -0.2036 + 0.14 = -0.0636 in 1 mol/kg HClO4.
    assert float(sit_log_gamma(1, 1.0, 0.14)) == pytest.approx(-0.0636, abs=1e-4)
    # D(3 m) = 0.509 sqrt(3) / (1 + 1.5 sqrt(3)) = 0.24503, by hand.
    assert float(-sit_log_gamma(1, 3.0)) == pytest.approx(0.24503, rel=1e-4)


def test_iron_thiocyanate_constant_moves_with_the_medium() -> None:
    # Fe3+ + SCN- -> FeSCN2+: dz2 = 9 + 1 - 4 = 6. From I0 = 0.5 to I = 0.1 (Davies both):
    # g(0.1) - g(0.5) = -0.509 * 6 * (0.210253 - 0.264214) = +0.16480, K up by 46 %.
    charges = {"Fe3+": 3, "SCN-": -1}
    dz2 = delta_z_squared({"Fe3+": 1, "SCN-": 1}, charges)
    assert dz2 == 6
    logs = log_beta_in_medium([math.log10(98.0)], [dz2], 0.5, [0.1, 0.5])
    assert logs[1, 0] == pytest.approx(math.log10(98.0), rel=1e-14)
    assert logs[0, 0] - logs[1, 0] == pytest.approx(0.16480, abs=2e-5)


def test_sit_branch_joins_the_davies_branch_continuously() -> None:
    # The two branches meet at 0.5 mol/L; above it, by hand for dz2 = 6, d_eps = 0.2:
    # g(2.0) - g(0.5) = -6 (D(2) - D(0.5)) - 0.2 * 1.5, D(2) = 0.509 sqrt(2)/(1 + 1.5 sqrt(2))
    # = 0.719835/3.121320 = 0.230619, D(0.5) = 0.359917/2.060660 = 0.174661:
    # -6 * 0.055958 - 0.3 = -0.635748.
    below, at, above = medium_term(6, [0.5 - 1e-9, 0.5, 0.5 + 1e-9], 0.2)
    assert below == pytest.approx(at, abs=1e-8)
    assert above == pytest.approx(at, abs=1e-8)
    shift = float(medium_term(6, 2.0, 0.2) - medium_term(6, 0.5, 0.2))
    assert shift == pytest.approx(-0.635748, abs=5e-6)
    assert np.all(np.isfinite(medium_term(6, [0.0, 5.0], 0.2)))


def test_solver_takes_one_set_of_constants_per_mixture() -> None:
    # Each row solved with its own constants equals that row solved alone (the 1:1 + 1:2
    # system through Newton, and the 1:1 closed form).
    from planner.chem.equilibrium import solve_equilibrium

    totals = np.array([[0.05, 2e-4], [0.1, 1e-4], [0.02, 3e-4]])
    matrix = np.array([[1, 1], [1, 2]])
    logs = np.array([[2.0, 2.8], [1.8, 2.6], [2.2, 3.1]])
    together = solve_equilibrium(totals, matrix, logs)
    for row in range(3):
        alone = solve_equilibrium(totals[row : row + 1], matrix, logs[row])
        np.testing.assert_allclose(together.species_M[row], alone.species_M[0], rtol=1e-12)
    one = solve_equilibrium(totals, [[1, 1]], logs[:, :1])
    for row in range(3):
        alone = solve_equilibrium(totals[row : row + 1], [[1, 1]], logs[row, :1])
        np.testing.assert_allclose(one.species_M[row], alone.species_M[0], rtol=1e-12)
