"""Equilibrium solver against exact algebra (sympy) and mass-balance invariants."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st

from planner.chem.equilibrium import (
    bound_fraction,
    log_beta_sensitivity,
    one_to_one_complex_M,
    solve_equilibrium,
    total_sensitivity,
)
from planner.errors import InvalidInputError

ONE_TO_ONE = np.array([[1.0, 1.0]])
ONE_AND_TWO = np.array([[1.0, 1.0], [1.0, 2.0]])
# Iron(III) thiocyanate at ionic strength 0.5 mol/L, 25 °C: K1 = 98 and K2 = 7 L/mol
# (de Berg, Maeder and Clifford, Inorganica Chimica Acta 445 (2016) 155-159), so
# beta2 = K1 K2 = 686 (L/mol)^2.
FE_SCN_LOG_BETA = np.array([np.log10(98.0), np.log10(98.0 * 7.0)])


def _sympy_one_to_one(metal: float, ligand: float, k: float) -> float:
    """[ML] from sympy's exact root of K (M0 - x)(L0 - x) = x in the physical interval."""
    x = sympy.symbols("x", positive=True)
    m0, l0, kk = sympy.Rational(str(metal)), sympy.Rational(str(ligand)), sympy.Rational(str(k))
    roots = sympy.solve(sympy.Eq(kk * (m0 - x) * (l0 - x), x), x)
    physical = [r for r in roots if 0 <= r <= min(m0, l0)]
    assert len(physical) == 1
    return float(sympy.N(physical[0], 30))


@pytest.mark.parametrize(
    ("metal", "ligand", "k"),
    [
        (0.1, 1.5e-4, 98.0),  # iron(III) thiocyanate, K from de Berg et al. 2016
        (1e-3, 1e-3, 1e6),  # equal totals, strong binding
        (2e-4, 0.05, 3.5e3),  # ligand in excess
        (1e-6, 2e-6, 1e-2),  # very weak complex
    ],
)
def test_one_to_one_matches_sympy_exact_root(metal, ligand, k):
    # Reference: the exact root of the mass-action quadratic computed by sympy (an
    # independent general-purpose algebra system); relative tolerance 1e-12 (rounding only).
    expected = _sympy_one_to_one(metal, ligand, k)
    closed = float(one_to_one_complex_M(metal, ligand, k))
    solved = solve_equilibrium([[metal, ligand]], ONE_TO_ONE, [np.log10(k)])
    assert closed == pytest.approx(expected, rel=1e-12)
    assert solved.species_M[0, 0] == pytest.approx(expected, rel=1e-12)


def test_one_to_one_general_newton_agrees_with_closed_form():
    # The same 1:1 system passed with a dummy third species that never forms (log beta = -50)
    # goes through Newton instead of the closed form; both must agree to 1e-10 relative.
    rng = np.random.default_rng(7)
    totals = 10 ** rng.uniform(-7, 0, size=(500, 2))
    matrix = np.array([[1.0, 1.0], [2.0, 3.0]])
    solved = solve_equilibrium(totals, matrix, [3.7, -50.0])
    closed = one_to_one_complex_M(totals[:, 0], totals[:, 1], 10**3.7)
    np.testing.assert_allclose(solved.species_M[:, 0], closed, rtol=1e-10)


def test_a_batch_of_several_solver_blocks_agrees_with_the_closed_form():
    # The solver works through long batches in blocks of mixtures; 70 000 mixtures span
    # three blocks, with absent components in the first and the last. Each mixture must still
    # match the closed-form root (Newton path, as in the test above) and the zeros stay exact.
    rng = np.random.default_rng(12)
    totals = 10 ** rng.uniform(-7, 0, size=(70_000, 2))
    totals[[0, 69_999], 0] = 0.0
    totals[[5, 69_998], 1] = 0.0
    matrix = np.array([[1.0, 1.0], [2.0, 3.0]])
    solved = solve_equilibrium(totals, matrix, [3.7, -50.0])
    closed = one_to_one_complex_M(totals[:, 0], totals[:, 1], 10**3.7)
    np.testing.assert_allclose(solved.species_M[:, 0], closed, rtol=1e-10)
    assert solved.free_M.shape == (70_000, 2)
    for row in (0, 5, 69_998, 69_999):
        assert solved.species_M[row, 0] == 0.0


def test_constants_per_mixture_over_several_solver_blocks():
    # One row of constants per mixture (each mixture in its own medium) across three blocks:
    # each block must be solved with its own rows of constants (the whole table was passed
    # to every block, which failed to broadcast). Each mixture against the closed-form root
    # with its own K (Newton path, as above).
    rng = np.random.default_rng(13)
    totals = 10 ** rng.uniform(-7, 0, size=(70_000, 2))
    log_k = rng.uniform(1.0, 6.0, size=70_000)
    logs = np.column_stack([log_k, np.full(70_000, -50.0)])
    solved = solve_equilibrium(totals, np.array([[1.0, 1.0], [2.0, 3.0]]), logs)
    closed = one_to_one_complex_M(totals[:, 0], totals[:, 1], 10**log_k)
    np.testing.assert_allclose(solved.species_M[:, 0], closed, rtol=1e-10)


def test_one_to_two_system_matches_sympy():
    # Reference: sympy solves the two mass balances of M + L = ML, M + 2L = ML2 exactly
    # (nsolve to 40 digits from the planner's answer's neighbourhood, then checked to be the
    # unique positive root); iron(III) thiocyanate constants from de Berg et al. 2016.
    metal, ligand = 0.02, 0.01
    beta1, beta2 = 98.0, 686.0
    m, lig = sympy.symbols("m l", positive=True)
    equations = [
        m + beta1 * m * lig + beta2 * m * lig**2 - metal,
        lig + beta1 * m * lig + 2 * beta2 * m * lig**2 - ligand,
    ]
    # Eliminate m exactly: m = metal / (1 + b1 l + b2 l^2); the ligand balance becomes a
    # cubic in l with exactly one root in (0, ligand).
    m_of_l = metal / (1 + beta1 * lig + beta2 * lig**2)
    cubic = sympy.numer(sympy.together(equations[1].subs(m, m_of_l)))
    roots = [r for r in sympy.Poly(cubic, lig).nroots(n=30) if r.is_real and 0 < r < ligand]
    assert len(roots) == 1
    free_l = float(roots[0])
    free_m = float(m_of_l.subs(lig, roots[0]))
    solved = solve_equilibrium([[metal, ligand]], ONE_AND_TWO, np.log10([beta1, beta2]))
    assert solved.free_M[0, 0] == pytest.approx(free_m, rel=1e-11)
    assert solved.free_M[0, 1] == pytest.approx(free_l, rel=1e-11)
    assert solved.species_M[0, 1] == pytest.approx(beta2 * free_m * free_l**2, rel=1e-10)


def test_zero_total_gives_exact_zeros():
    # A reagent blank has no ligand at all: free ligand and every complex are exactly 0.
    solved = solve_equilibrium([[0.1, 0.0]], ONE_AND_TWO, FE_SCN_LOG_BETA)
    assert solved.free_M[0, 1] == 0.0
    assert np.all(solved.species_M[0] == 0.0)
    assert solved.free_M[0, 0] == pytest.approx(0.1, rel=1e-14)


def test_hydroxo_species_with_negative_coefficient():
    # M + L = ML and M - H = MOH (hydrolysis written with -1 H+): mass balance must hold for
    # all three components, including H+ whose total counts the released proton negatively.
    matrix = np.array([[1.0, 1.0, 0.0], [1.0, 0.0, -1.0]])
    totals = np.array([[0.05, 1e-4, 0.5]])
    solved = solve_equilibrium(totals, matrix, [2.0, -2.8])
    assert np.max(np.abs(solved.relative_residual)) <= 1e-10
    free = solved.free_M[0]
    assert solved.species_M[0, 1] == pytest.approx(10**-2.8 * free[0] / free[2], rel=1e-12)


def test_bound_fraction_counts_coefficients():
    solved = solve_equilibrium([[0.02, 0.01]], ONE_AND_TWO, FE_SCN_LOG_BETA)
    fraction = bound_fraction(solved.species_M, ONE_AND_TWO, 1, np.array([[0.02, 0.01]]))
    held = solved.species_M[0, 0] + 2 * solved.species_M[0, 1]
    assert fraction[0] == pytest.approx(held / 0.01, rel=1e-14)
    # and it equals 1 - free/total by the ligand's mass balance
    assert fraction[0] == pytest.approx(1 - solved.free_M[0, 1] / 0.01, rel=1e-10)


def test_bad_inputs_name_the_field():
    with pytest.raises(InvalidInputError, match="total_M"):
        solve_equilibrium([[-1.0, 0.1]], ONE_TO_ONE, [2.0])
    with pytest.raises(InvalidInputError, match="stoichiometry"):
        solve_equilibrium([[1.0, 0.1]], [[1.0, 1.0, 1.0]], [2.0])
    with pytest.raises(InvalidInputError, match="log_beta"):
        solve_equilibrium([[1.0, 0.1]], ONE_AND_TWO, [2.0])


_totals = st.floats(min_value=1e-9, max_value=5.0)
_log_beta = st.floats(min_value=-5.0, max_value=30.0)

SYSTEMS = {
    "1:1": np.array([[1.0, 1.0]]),
    "1:1+1:2": ONE_AND_TWO,
    "1:2 only": np.array([[1.0, 2.0]]),
    "2:1+1:1+1:3": np.array([[2.0, 1.0], [1.0, 1.0], [1.0, 3.0]]),
    "three components": np.array([[1.0, 1.0, 0.0], [1.0, 0.0, 1.0], [1.0, 1.0, 1.0]]),
}


@settings(max_examples=60, deadline=None)
@given(
    system=st.sampled_from(sorted(SYSTEMS)),
    totals=st.lists(_totals, min_size=3, max_size=3),
    logs=st.lists(_log_beta, min_size=3, max_size=3),
)
def test_mass_balance_holds_everywhere(system, totals, logs):
    # Design requirement: relative mass-balance residual <= 1e-10 for totals 1e-9 to 5 mol/L
    # and log beta -5 to 30, with no warnings and no NaN.
    matrix = SYSTEMS[system]
    n_components = matrix.shape[1]
    total = np.array([totals[:n_components]])
    log_beta = np.array(logs[: matrix.shape[0]])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        solved = solve_equilibrium(total, matrix, log_beta)
    assert np.all(np.isfinite(solved.free_M))
    assert np.all(np.isfinite(solved.species_M))
    # Independent recomputation of the residual from the returned concentrations.
    recomputed = solved.free_M + solved.species_M @ matrix
    assert np.all(np.abs(recomputed - total) <= 1e-10 * total)


def test_vectorised_batch_spanning_the_whole_range():
    rng = np.random.default_rng(11)
    n = 20_000
    totals = 10 ** rng.uniform(-9, np.log10(5.0), size=(n, 2))
    for log_beta in ([-5.0, -5.0], [1.99, 2.84], [12.0, 20.0], [30.0, 30.0], [-5.0, 30.0]):
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            solved = solve_equilibrium(totals, ONE_AND_TWO, log_beta)
        recomputed = solved.free_M + solved.species_M @ ONE_AND_TWO
        assert np.max(np.abs(recomputed - totals) / totals) <= 1e-10, log_beta


# --- regressions found by fuzzing (tests/test_fuzz.py) ---------------------------------------


@pytest.mark.parametrize("matrix", [ONE_TO_ONE, ONE_AND_TWO], ids=["1:1 closed form", "Newton"])
def test_zero_total_with_a_huge_constant_gives_exact_zeros(matrix):
    # log beta 60: the free deficit component of a zero total's 1e-280 stand-in is about
    # 1e-341, below the smallest float; its logarithm was -inf ("divide by zero in log",
    # an internal error under warnings-as-errors). Expected: the blank rule, exact zeros.
    logs = [60.0] if matrix is ONE_TO_ONE else [60.0, 61.0]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        solved = solve_equilibrium([[0.4, 0.0], [0.0, 6e-4]], matrix, logs)
    assert solved.free_M[0, 1] == 0.0
    assert solved.free_M[1, 0] == 0.0
    assert np.all(solved.species_M == 0.0)
    assert solved.free_M[0, 0] == pytest.approx(0.4, rel=1e-14)
    assert solved.free_M[1, 1] == pytest.approx(6e-4, rel=1e-14)


def test_negative_coefficient_species_far_above_the_total_converges():
    # M + L = ML and M - L (a species releasing L, as M(OH) releases H+): with T_L = 1e-12 and
    # T_M = 0.4 the released L (about 0.38 mol/L) dwarfs T_L, and a residual of 1e-12 T_L is
    # below the rounding of the terms, so the solver used to report non-convergence. The
    # balance must hold to rounding of its largest terms: |c_L + s1 - s2 - T_L| <= 1e-12 x 0.4.
    matrix = np.array([[1.0, 1.0], [1.0, -1.0]])
    totals = np.array([[0.4, 1e-12]])
    solved = solve_equilibrium(totals, matrix, [1.99, 2.8363])
    free_m, free_l = solved.free_M[0]
    s1, s2 = solved.species_M[0]
    assert free_m + s1 + s2 == pytest.approx(0.4, rel=1e-12)
    assert abs(free_l + s1 - s2 - 1e-12) <= 1e-12 * 0.4
    assert s2 == pytest.approx(10**2.8363 * free_m / free_l, rel=1e-12)


# ---------------------------------------------------------------------------------------------
# How the equilibrium moves with one constant (implicit differentiation of the mass balances)
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("metal", "ligand", "k"),
    [(0.1, 1.5e-4, 98.0), (1e-3, 1e-3, 1e6), (2e-4, 0.05, 3.5e3), (1e-6, 2e-6, 1e-2)],
)
def test_one_to_one_sensitivity_matches_sympy_derivative_of_the_exact_root(metal, ligand, k):
    # Reference: sympy differentiates the closed-form root of K (M0 - x)(L0 - x) = x with
    # respect to ln K (d/d ln K = K d/dK), to 30 digits; the complex moves by dx, each free
    # reagent by -dx.
    k_sym = sympy.symbols("K", positive=True)
    m0, l0 = sympy.Rational(str(metal)), sympy.Rational(str(ligand))
    total = m0 + l0 + 1 / k_sym
    root = (total - sympy.sqrt(total**2 - 4 * m0 * l0)) / 2
    expected = float(
        sympy.N((k_sym * sympy.diff(root, k_sym)).subs(k_sym, sympy.Rational(str(k))), 30)
    )
    solved = solve_equilibrium([[metal, ligand]], ONE_TO_ONE, [np.log10(k)])
    d_free, d_species = log_beta_sensitivity(solved.free_M, solved.species_M, ONE_TO_ONE, 0)
    assert d_species[0, 0] == pytest.approx(expected, rel=1e-9)
    assert d_free[0] == pytest.approx([-expected, -expected], rel=1e-9)


def test_sensitivity_of_each_constant_of_a_one_to_two_system_matches_central_differences():
    # Reference: central differences of the solver's own answers (step 1e-5 in log10 beta;
    # truncation and the solver's rounding below 1e-6 relative), for each of the two
    # constants, over mixtures that span ligand-poor, metal-poor, equimolar and a blank
    # without ligand (which must not move).
    totals = np.array([[1e-3, 2e-3], [1e-4, 0.1], [0.05, 1e-4], [2e-3, 2e-3], [0.1, 0.0]])
    base = FE_SCN_LOG_BETA
    solved = solve_equilibrium(totals, ONE_AND_TWO, base)
    step = 1e-5
    for k in (0, 1):
        up, down = base.copy(), base.copy()
        up[k] += step
        down[k] -= step
        high = solve_equilibrium(totals, ONE_AND_TWO, up)
        low = solve_equilibrium(totals, ONE_AND_TWO, down)
        scale = 2 * step * np.log(10.0)
        d_free, d_species = log_beta_sensitivity(solved.free_M, solved.species_M, ONE_AND_TWO, k)
        np.testing.assert_allclose(
            d_species, (high.species_M - low.species_M) / scale, rtol=1e-6, atol=1e-20
        )
        # A free concentration near its total (0.1 mol/L) moves by less than its differences'
        # rounding (about 1e-16 x 0.1 / 2e-5), hence the absolute floor.
        np.testing.assert_allclose(
            d_free, (high.free_M - low.free_M) / scale, rtol=1e-6, atol=1e-11
        )
        assert np.all(d_species[4] == 0.0)
        assert np.all(d_free[4] == 0.0)


def test_sensitivity_of_three_components_with_a_negative_coefficient():
    # The hydroxo system above (three components, Cholesky branch): the implicit derivative
    # agrees with central differences of the solver, and every mass balance stays balanced
    # (sum over species of a_ij ds_i + dc_j = 0 for each component).
    matrix = np.array([[1.0, 1.0, 0.0], [1.0, 0.0, -1.0]])
    totals = np.array([[0.05, 1e-4, 0.5], [1e-3, 2e-3, 1e-2]])
    logs = np.array([2.0, -2.8])
    solved = solve_equilibrium(totals, matrix, logs)
    d_free, d_species = log_beta_sensitivity(solved.free_M, solved.species_M, matrix, 0)
    up, down = logs.copy(), logs.copy()
    up[0] += 1e-5
    down[0] -= 1e-5
    numeric = (
        solve_equilibrium(totals, matrix, up).species_M
        - solve_equilibrium(totals, matrix, down).species_M
    ) / (2e-5 * np.log(10.0))
    np.testing.assert_allclose(d_species, numeric, rtol=1e-6)
    balance = d_free + d_species @ matrix
    assert np.max(np.abs(balance) / totals) < 1e-12


@pytest.mark.parametrize(
    ("metal", "ligand", "k"),
    [(0.1, 1.5e-4, 98.0), (1e-3, 1e-3, 1e6), (2e-4, 0.05, 3.5e3), (1e-6, 2e-6, 1e-2)],
)
def test_total_sensitivity_matches_sympy_derivative_of_the_exact_root(metal, ligand, k):
    # Reference: sympy differentiates the closed-form root of K (M0 - x)(L0 - x) = x with
    # respect to each total, to 30 digits.
    m_sym, l_sym = sympy.symbols("M L", positive=True)
    kk = sympy.Rational(str(k))
    total = m_sym + l_sym + 1 / kk
    root = (total - sympy.sqrt(total**2 - 4 * m_sym * l_sym)) / 2
    point = {m_sym: sympy.Rational(str(metal)), l_sym: sympy.Rational(str(ligand))}
    solved = solve_equilibrium([[metal, ligand]], ONE_TO_ONE, [np.log10(k)])
    for column, symbol in enumerate((m_sym, l_sym)):
        expected = float(sympy.N(sympy.diff(root, symbol).subs(point), 30))
        d_free, d_species = total_sensitivity(
            solved.free_M, solved.species_M, [[metal, ligand]], ONE_TO_ONE, column
        )
        assert d_species[0, 0] == pytest.approx(expected, rel=1e-9, abs=1e-15)
        # Each free reagent is its total minus the complex.
        own = np.array([1.0 if j == column else 0.0 for j in range(2)])
        assert d_free[0] == pytest.approx(own - expected, rel=1e-9, abs=1e-15)


def test_total_sensitivity_of_a_one_to_two_system_with_absent_components():
    # Reference: central differences of the solver (relative step 1e-6 of the total) where
    # the total is present; hand reasoning where a mixture lacks a reagent: adding metal to a
    # mixture without ligand forms nothing (free metal rises one for one), and a component a
    # mixture lacks gets 0 (not differentiable at 0). Every balance holds to first order:
    # dc_j + sum_i a_ij ds_i is 1 for the component added and 0 for the other.
    totals = np.array([[1e-3, 2e-3], [1e-4, 0.1], [0.05, 1e-4], [1e-3, 0.0], [0.0, 1e-3]])
    solved = solve_equilibrium(totals, ONE_AND_TWO, FE_SCN_LOG_BETA)
    for j in (0, 1):
        d_free, d_species = total_sensitivity(
            solved.free_M, solved.species_M, totals, ONE_AND_TWO, j
        )
        present = totals[:, j] > 0
        step = 1e-6 * totals[present, j]
        up, down = totals[present].copy(), totals[present].copy()
        up[:, j] += step
        down[:, j] -= step
        numeric = (
            solve_equilibrium(up, ONE_AND_TWO, FE_SCN_LOG_BETA).species_M
            - solve_equilibrium(down, ONE_AND_TWO, FE_SCN_LOG_BETA).species_M
        ) / (2 * step[:, None])
        np.testing.assert_allclose(d_species[present], numeric, rtol=1e-6, atol=1e-12)
        assert np.all(d_species[~present] == 0.0)
        assert np.all(d_free[~present] == 0.0)
        balance = d_free + d_species @ ONE_AND_TWO
        expected = np.zeros(2)
        expected[j] = 1.0
        np.testing.assert_allclose(
            balance[present], np.tile(expected, (present.sum(), 1)), atol=1e-9
        )
    d_free, d_species = total_sensitivity(solved.free_M, solved.species_M, totals, ONE_AND_TWO, 0)
    assert d_free[3] == pytest.approx([1.0, 0.0])
    assert np.all(d_species[3] == 0.0)
