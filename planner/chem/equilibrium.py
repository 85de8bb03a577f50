"""Mass-action equilibrium of components and product species, vectorised over many mixtures.

Components (free reagent ions such as a metal ion M and a ligand L) combine into product
species ``M_a L_b ...`` with overall formation constants beta. Given the total (analytical)
concentration of every component in every mixture, :func:`solve_equilibrium` finds the free
component concentrations that satisfy all mass balances at once.

Notes
-----
With x_j = ln c_j the free log-concentrations, species i has concentration

    s_i = beta_i * prod_j c_j^(a_ij),   ln s_i = ln beta_i + sum_j a_ij x_j,

and the mass balance of component j is

    g_j(x) = c_j + sum_i a_ij s_i - T_j = 0.

g is the gradient of the strictly convex function
F(x) = sum_j c_j + sum_i s_i - sum_j T_j x_j, whose Hessian
H = diag(c) + A^T diag(s) A is symmetric positive definite, so the root is unique and a
Newton iteration with a line search on F converges from any start (the classical convex
formulation of chemical equilibrium: Smith and Missen, Chemical Reaction Equilibrium Analysis,
Wiley 1982, ch. 6). The start comes from a few positive-continued-fraction sweeps, which move
free concentrations by many orders of magnitude per sweep (Carrayrou, Mosé and Behra, AIChE J.
48 (2002) 894-904, doi:10.1002/aic.690480423).

Most of the time goes into exponentials and logarithms (each several times the cost of a
multiplication), so where every coefficient is a small whole number the species are formed as
beta times products of the free concentrations, and the sweeps run on the concentrations
themselves; the logarithms are taken once, after the sweeps, and each Newton step takes one
exponential per component.

The 1:1 system M + L = ML has a closed form (:func:`one_to_one_complex_M`), used as a fast path
and as an independent check.
"""

from __future__ import annotations

from typing import TypeAlias

import numpy as np
from numpy.typing import ArrayLike, NDArray

from planner.errors import ConvergenceError, InvalidInputError
from planner.records import record

# Array types of the annotations below: float64 and int64 arrays of any shape.
_Floats: TypeAlias = NDArray[np.float64]
_Ints: TypeAlias = NDArray[np.int64]

__all__ = [
    "Equilibrium",
    "bound_fraction",
    "log_beta_sensitivity",
    "one_to_one_complex_M",
    "solve_equilibrium",
    "total_sensitivity",
]

_LN10 = float(np.log(10.0))
# Zero totals are solved as this tiny positive total and then set back to exactly zero; at
# 1e-280 mol/L the stand-in changes no other mass balance by more than 1e-270 relative.
_ZERO_STAND_IN_M = 1e-280
# Newton stops when every relative mass-balance residual is below this; two decades below the
# 1e-10 the design requires, to leave room for rounding in the final species evaluation.
_RTOL = 1e-12
_MAX_NEWTON = 200
_PCF_SWEEPS = 6
# Species are formed as products of free concentrations (no exp) when every coefficient is a
# whole number up to this and no log beta exceeds _MAX_PRODUCT_LN_BETA (beta < 1e260, so that
# beta times free concentrations of at most a few mol/L cannot overflow).
_MAX_POWER = 4
_MAX_PRODUCT_LN_BETA = 600.0
# A free concentration below e^-700 (about 1e-304) is near the bottom of the float range,
# where products lose digits: species of such mixtures are formed as exp(ln beta + A x).
_LOWEST_PRODUCT_LN = -700.0
_SMALLEST_NORMAL = float(np.finfo(float).tiny)
# No Newton step moves a log-concentration by more than this, so exp never overflows.
_LONGEST_STEP = float(np.log(1e8))
# Mixtures solved together: 32768 mixtures make each temporary array 256 kB.
_CHUNK = 32768


@record
class Equilibrium:
    """Solution of the mass balances for a batch of mixtures.

    Attributes
    ----------
    free_M
        Free concentration of each component, shape (n, n_components) [mol/L].
    species_M
        Concentration of each product species, shape (n, n_species) [mol/L].
    relative_residual
        Mass-balance residual of each component divided by its total, shape
        (n, n_components) [unitless]; 0 where the total is 0.
    iterations
        Newton iterations used by the slowest mixture [unitless].
    """

    free_M: _Floats
    species_M: _Floats
    relative_residual: _Floats
    iterations: int


def one_to_one_complex_M(
    metal_total_M: ArrayLike, ligand_total_M: ArrayLike, K: ArrayLike
) -> _Floats:
    """Concentration of ML in M + L = ML from the closed-form quadratic root.

    Parameters
    ----------
    metal_total_M
        Total concentration of M, any shape broadcastable with the others [mol/L].
    ligand_total_M
        Total concentration of L [mol/L].
    K
        Formation constant [L/mol], > 0.

    Returns
    -------
    _Floats
        [ML] at equilibrium [mol/L], broadcast shape.

    Notes
    -----
    With a the component in excess (total T_a), b the other (T_b) and d = T_a - T_b >= 0, the
    free b satisfies K b^2 + (1 + K d) b - T_b = 0, whose positive root is written without
    subtraction, b = 2 T_b / ((1 + K d) + sqrt((1 + K d)^2 + 4 K T_b)) (the cancellation-free
    form of the quadratic formula: Press et al., Numerical Recipes, 3rd ed., 2007, eq. 5.6.4).
    Then a = b + d and [ML] = K a b, accurate to rounding for any K and totals.
    """
    k = np.asarray(K, dtype=float)
    free_metal, free_ligand = _one_to_one_free(metal_total_M, ligand_total_M, k)
    result: _Floats = k * free_metal * free_ligand
    return result


def _one_to_one_root_parts(
    metal_total_M: _Floats,
    ligand_total_M: _Floats,
    K: float | _Floats,
) -> tuple[_Floats, _Floats, _Floats]:
    """The parts of the 1:1 system's cancellation-free root: the total in deficit T_b, the
    excess d = |T_M - T_L| and the denominator (1 + K d) + sqrt((1 + K d)^2 + 4 K T_b) of the
    free amount in deficit, 2 T_b / denominator (see one_to_one_complex_M)."""
    small = np.minimum(metal_total_M, ligand_total_M)
    excess = np.abs(metal_total_M - ligand_total_M)
    linear = 1.0 + K * excess
    return small, excess, linear + np.sqrt(linear * linear + 4.0 * K * small)


def _metal_and_ligand(
    metal_total_M: _Floats,
    ligand_total_M: _Floats,
    of_small: _Floats,
    of_large: _Floats,
) -> tuple[_Floats, _Floats]:
    """(metal's, ligand's) value from the values of the component in deficit and in excess
    (the metal counts as in deficit on a tie)."""
    metal_is_small = metal_total_M <= ligand_total_M
    return (
        np.where(metal_is_small, of_small, of_large),
        np.where(metal_is_small, of_large, of_small),
    )


def _one_to_one_free(
    metal_total_M: ArrayLike, ligand_total_M: ArrayLike, K: ArrayLike
) -> tuple[_Floats, _Floats]:
    """Free M and free L of the 1:1 system, cancellation-free (see one_to_one_complex_M)."""
    metal, ligand, k = np.broadcast_arrays(
        np.asarray(metal_total_M, dtype=float),
        np.asarray(ligand_total_M, dtype=float),
        np.asarray(K, dtype=float),
    )
    small, excess, denominator = _one_to_one_root_parts(metal, ligand, k)
    free_small = 2.0 * small / denominator
    return _metal_and_ligand(metal, ligand, free_small, free_small + excess)


def _one_to_one_log_free(
    metal_total_M: _Floats,
    ligand_total_M: _Floats,
    K: float | _Floats,
) -> tuple[_Floats, _Floats]:
    """Natural logarithms of free M and free L of the 1:1 system (the root of
    :func:`_one_to_one_free`), without its underflow.

    The free amount of the component in deficit can fall below the smallest float when a
    zero total's 1e-280 stand-in meets a large K (1e-280 / 1e60 = 1e-340): the root is then
    0 and its logarithm -inf. Its logarithm, ln(2 T_b) - ln((1 + K d) + sqrt(...)), does not
    underflow. The component in excess is small + d, and either d > 0 or the small root is
    about sqrt(T_b / K), far from underflow, so its logarithm is taken directly.
    """
    small, excess, denominator = _one_to_one_root_parts(metal_total_M, ligand_total_M, K)
    ln_small = np.log(2.0 * small) - np.log(denominator)
    ln_large = np.log(np.exp(ln_small) + excess)
    return _metal_and_ligand(metal_total_M, ligand_total_M, ln_small, ln_large)


def bound_fraction(
    species_M: _Floats,
    stoichiometry: _Floats,
    component_index: int,
    total_M: _Floats,
) -> _Floats:
    """Fraction of one component held in product species, weighted by coefficient.

    Parameters
    ----------
    species_M
        Product species concentrations, shape (n, n_species) [mol/L].
    stoichiometry
        Coefficients, shape (n_species, n_components) [unitless].
    component_index
        Column of the component (the limiting reagent).
    total_M
        Totals, shape (n, n_components) [mol/L].

    Returns
    -------
    _Floats
        sum_i a_ij s_i / T_j, shape (n,) [unitless]; 0 where T_j is 0.
    """
    species = np.asarray(species_M, dtype=float)
    coefficients = np.clip(np.asarray(stoichiometry, dtype=float)[:, component_index], 0.0, None)
    held = _small_product(coefficients, species.T)
    total = total_M[:, component_index]
    safe = np.where(total > 0, total, 1.0)
    fraction: _Floats = np.where(total > 0, held / safe, 0.0)
    return fraction


def _check_inputs(
    total_M: ArrayLike, stoichiometry: ArrayLike, log_beta: ArrayLike
) -> tuple[_Floats, _Floats, _Floats]:
    totals = np.atleast_2d(np.asarray(total_M, dtype=float))
    matrix = np.atleast_2d(np.asarray(stoichiometry, dtype=float))
    logs = np.atleast_1d(np.asarray(log_beta, dtype=float))
    if matrix.shape[1] != totals.shape[1]:
        raise InvalidInputError(
            "stoichiometry has a column per component",
            field="stoichiometry",
            value=matrix.shape,
            hint=f"give {totals.shape[1]} columns, one per component of total_M",
        )
    # One set of constants shared by every mixture, or one row per mixture (each mixture in
    # its own ionic medium).
    if logs.shape != (matrix.shape[0],) and logs.shape != (totals.shape[0], matrix.shape[0]):
        raise InvalidInputError(
            "log_beta has one value per product species",
            field="log_beta",
            value=logs.shape,
            hint=f"give {matrix.shape[0]} values, or one row of them per mixture",
        )
    if not (np.all(np.isfinite(totals)) and np.all(totals >= 0)):
        raise InvalidInputError(
            "total concentrations must be finite and >= 0",
            field="total_M",
            value=float(totals[~(np.isfinite(totals) & (totals >= 0))][0]),
            hint="pass totals in mol/L, zero for an absent component",
        )
    if not np.all(np.isfinite(logs)):
        raise InvalidInputError(
            "log_beta must be finite", field="log_beta", value=logs.tolist(), hint="use log10"
        )
    return totals, matrix, logs


def _small_product(left: _Floats, right: _Floats) -> _Floats:
    """left @ right for a small left matrix (a, b) and a long right (b, n), or a vector.

    Written as b scaled vector additions instead of a BLAS call: for a handful of components
    and species, multithreaded BLAS spends its time starting threads and, on a loaded machine,
    waiting for them (the solver fell from 2.1e6 to 2.7e5 mixtures/s), while these element-wise
    loops stay on one core at full speed.
    """
    if left.ndim == 1:
        return _combination(left, right, np.empty(right.shape[1:]))
    # Each row is written in place into one output array (stacking separate rows copied
    # every result once more); the sums are the same, term by term.
    out = np.empty((left.shape[0], *right.shape[1:]))
    for i in range(left.shape[0]):
        _combination(left[i], right, out[i])
    return out


def _combination(coefficients: _Floats, rows: _Floats, out: _Floats) -> _Floats:
    """sum_k coefficients[k] rows[k] into out, term by term in order; terms with a
    coefficient of 0 are left out and those of 1 are added without multiplying (both exact)."""
    first = float(coefficients[0])
    if first == 1.0:
        np.copyto(out, rows[0])
    else:
        np.multiply(first, rows[0], out=out)
    for k in range(1, coefficients.shape[0]):
        coefficient = float(coefficients[k])
        if coefficient == 1.0:
            out += rows[k]
        elif coefficient != 0.0:
            out += coefficient * rows[k]
    return out


def _species_log(x: _Floats, matrix: _Floats, ln_beta: _Floats) -> _Floats:
    """ln s_i = ln beta_i + sum_j a_ij x_j, component-major: x (m, n) -> (s, n); ln_beta is
    (s, 1) for constants shared by every mixture or (s, n), one column per mixture."""
    result: _Floats = _small_product(matrix, x) + ln_beta
    return result


def _columns(ln_beta: _Floats, which: _Ints) -> _Floats:
    """The constants of some mixtures: every column when shared, else the chosen ones."""
    return ln_beta if ln_beta.shape[1] == 1 else ln_beta[:, which]


def _cholesky_solve(hessian: list[list[_Floats]], rhs: list[_Floats]) -> list[_Floats]:
    """Solve H d = rhs for n small SPD systems at once, component-major.

    hessian[j][k] and rhs[j] are length-n vectors. A Cholesky factorisation written over the
    vectors (Golub and Van Loan, Matrix Computations, 4th ed., 2013, Algorithm 4.2.2): for the
    2 to 4 components of a complexation problem this beats numpy.linalg.solve on an
    (n, m, m) stack several times over.
    """
    m = len(rhs)
    lower: list[list[_Floats]] = [[] for _ in range(m)]
    for j in range(m):
        for i in range(j + 1):
            total = hessian[j][i].copy()
            for k in range(i):
                total -= lower[j][k] * lower[i][k]
            if i == j:
                # A pivot lost to rounding is floored relative to the unit scaled diagonal,
                # which turns the step into a damped one instead of an overflow.
                lower[j].append(np.sqrt(np.maximum(total, 1e-12)))
            else:
                lower[j].append(total / lower[i][i])
    forward: list[_Floats] = []
    for i in range(m):
        total = rhs[i].copy()
        for k in range(i):
            total -= lower[i][k] * forward[k]
        forward.append(total / lower[i][i])
    solution: list[_Floats] = [np.empty(0)] * m
    for i in reversed(range(m)):
        total = forward[i].copy()
        for k in range(i + 1, m):
            total -= lower[k][i] * solution[k]
        solution[i] = total / lower[i][i]
    return solution


def _newton_step(free: _Floats, species: _Floats, gradient: _Floats, matrix: _Floats) -> _Floats:
    """Solve H d = -g with H = diag(c) + A^T diag(s) A, component-major (m, n).

    When one species dominates, H is rank-deficient to rounding: its determinant cancels
    catastrophically if formed as H11 H22 - H12^2. For two components the determinant is
    therefore expanded by the Cauchy-Binet formula into a sum of positive terms,
    det H = c1 c2 + c1 sum s a2^2 + c2 sum s a1^2 + sum_{i<k} s_i s_k (a_i1 a_k2 - a_k1 a_i2)^2
    (Horn and Johnson, Matrix Analysis, 2nd ed., 2013, section 0.8.7), and the adjugate's
    products are regrouped the same way (Cramer's rule, one vector operation at a time). More
    components go through a Jacobi-scaled Cholesky.
    """
    m = matrix.shape[1]
    if m == 2:
        return _newton_step_two(free, species, gradient, matrix)
    hessian = [[np.zeros(0)] * m for _ in range(m)]
    for j in range(m):
        for k in range(j + 1):
            entry = _small_product(matrix[:, j] * matrix[:, k], species)
            if j == k:
                entry = entry + free[j]
            hessian[j][k] = hessian[k][j] = entry
    # Symmetric Jacobi scaling keeps entries that span 1e-280 to 1 well conditioned.
    inv_root = [1.0 / np.sqrt(np.maximum(hessian[j][j], 1e-300)) for j in range(m)]
    scaled = [[hessian[j][k] * inv_root[j] * inv_root[k] for k in range(m)] for j in range(m)]
    solved = _cholesky_solve(scaled, [-gradient[j] * inv_root[j] for j in range(m)])
    return np.stack([solved[j] * inv_root[j] for j in range(m)])


def _times(vector: _Floats, coefficient: float) -> _Floats:
    """vector * coefficient; the vector itself (not a copy) for a coefficient of 1, which is
    exact."""
    return vector if coefficient == 1.0 else vector * coefficient


def _newton_step_two(
    free: _Floats,
    species: _Floats,
    gradient: _Floats,
    matrix: _Floats,
) -> _Floats:
    """:func:`_newton_step` for two components.

    With u_i = a_i2 g1 - a_i1 g2, the adjugate's rows are
    H22 g1 - H12 g2 = c2 g1 + sum_i (a_i2 u_i) s_i and
    H11 g2 - H12 g1 = c1 g2 - sum_i (a_i1 u_i) s_i, since a_i1 g2 - a_i2 g1 is -u_i exactly in
    floating point; each u_i is formed once.
    """
    a1 = [float(a) for a in matrix[:, 0]]
    a2 = [float(a) for a in matrix[:, 1]]
    c1, c2 = free[0], free[1]
    g1, g2 = gradient[0], gradient[1]
    det = c1 * c2
    det += c1 * _small_product(matrix[:, 1] * matrix[:, 1], species)
    det += c2 * _small_product(matrix[:, 0] * matrix[:, 0], species)
    first: _Floats | None = None
    second: _Floats | None = None
    for i in range(len(a1)):
        for k in range(i + 1, len(a1)):
            minor = a1[i] * a2[k] - a1[k] * a2[i]
            if minor:
                pair = species[i] * species[k]
                pair *= minor
                pair *= minor
                det += pair
        u = _times(g1, a2[i]) - _times(g2, a1[i])
        if a2[i]:
            term = np.multiply(_times(u, a2[i]), species[i])
            first = term if first is None else np.add(first, term, out=first)
        if a1[i]:
            term = np.multiply(_times(u, a1[i]), species[i])
            second = term if second is None else np.add(second, term, out=second)
    step = np.empty((2, c1.shape[0]))
    np.multiply(c2, g1, out=step[0])
    if first is not None:
        step[0] += first
    np.multiply(c1, g2, out=step[1])
    if second is not None:
        step[1] -= second
    # Where every term underflows (a mixture of two zero totals' 1e-280 stand-ins, whose
    # products are 1e-560), the floor makes the step 0 instead of 0 / 0.
    step /= np.maximum(det, _SMALLEST_NORMAL, out=det)
    np.negative(step, out=step)
    return step


def _column_sum(rows: _Floats) -> _Floats:
    """Sum over the first axis of a (k, n) array, row by row in order (as numpy's sum over
    that axis adds them)."""
    out: _Floats = rows[0].copy()
    for row in rows[1:]:
        out += row
    return out


def _potential(
    free: _Floats,
    species: _Floats,
    totals: _Floats,
    x: _Floats,
) -> tuple[_Floats, _Floats]:
    """(sum c + sum s, F = sum c + sum s - T.x) of each mixture, component-major."""
    mass = _column_sum(free)
    mass += _column_sum(species)
    dot = totals[0] * x[0]
    for j in range(1, x.shape[0]):
        dot += totals[j] * x[j]
    return mass, mass - dot


def _newton(
    x: _Floats,
    free: _Floats,
    totals: _Floats,
    matrix: _Floats,
    ln_beta: _Floats,
    beta: _Floats | None,
) -> tuple[_Floats, _Floats, _Floats, int]:
    """Damped Newton on the convex potential F, component-major: x, free = exp(x) and
    totals are (m, n); beta as in :func:`_species`.

    Returns the free components (m, n), the species (s, n) and the mass-balance residuals
    (m, n) at the solution, and the iterations of the slowest mixture. Arrays are laid out one
    row per component so every sum over components or species is a handful of contiguous
    vector operations (numpy reductions along a short last axis are several times slower).
    """
    m, n = x.shape
    matrix_t = np.ascontiguousarray(matrix.T)
    abs_t = np.abs(matrix_t)
    # The mixtures still iterating; until half of them have converged, all of them iterate
    # (a further Newton step keeps a converged mixture converged, and costs less than moving
    # every array's columns), and then the converged ones' results are set aside.
    active = np.arange(n)
    compacted = False
    free_out = species_out = gradient_out = np.empty((0, 0))
    xa, ta = x, totals
    lb, bt = ln_beta, beta  # the active mixtures' constants
    species = _species(xa, free, matrix, lb, bt)
    mass, f0 = _potential(free, species, ta, xa)
    iterations = 0
    # Without negative coefficients |A| = A, and the scale's sum is the gradient's.
    signed = bool(np.any(matrix_t < 0))
    while True:
        balance = _small_product(matrix_t, species)
        balance += free
        gradient = balance - ta
        # Converged when each residual is small against the largest terms of its balance:
        # with positive coefficients those sum to the total T, but a species with a negative
        # coefficient (M(OH) written with -1 H+) can hold far more than T of the component,
        # and then a residual of 1e-12 T is below the rounding of those terms (it never came
        # within reach and the solver reported non-convergence).
        if signed:
            balance = _small_product(abs_t, species)
            balance += free
        scale = np.maximum(ta, balance, out=balance)
        scale *= _RTOL
        within = np.abs(gradient) <= scale
        done = within[0]
        for j in range(1, m):
            done &= within[j]
        n_done = int(np.count_nonzero(done))
        if n_done == active.size:
            if not compacted:
                return free, species, gradient, iterations
            free_out[:, active] = free
            species_out[:, active] = species
            gradient_out[:, active] = gradient
            break
        if 2 * n_done >= active.size:
            if not compacted:
                free_out = np.empty((m, n))
                species_out = np.empty((matrix.shape[0], n))
                gradient_out = np.empty((m, n))
                compacted = True
            finished = active[done]
            free_out[:, finished] = free[:, done]
            species_out[:, finished] = species[:, done]
            gradient_out[:, finished] = gradient[:, done]
            keep = np.flatnonzero(~done)
            active = active[keep]
            xa, ta, free, species, gradient = (
                xa[:, keep],
                ta[:, keep],
                free[:, keep],
                species[:, keep],
                gradient[:, keep],
            )
            mass, f0 = mass[keep], f0[keep]
            lb = _columns(lb, keep)
            bt = None if bt is None else _columns(bt, keep)
        if iterations == _MAX_NEWTON:
            raise ConvergenceError(
                f"equilibrium solver did not converge for {active.size - n_done} mixture(s) "
                f"in {_MAX_NEWTON} Newton iterations",
                field="total_M",
                value=totals[:, active[np.argmin(done)]].tolist(),
                hint="check that the totals and log_beta are physically sensible",
            )
        iterations += 1
        step = _newton_step(free, species, gradient, matrix)
        # Armijo backtracking on F(x) = sum c + sum s - T.x (Nocedal and Wright, Numerical
        # Optimization, 2nd ed., 2006, Algorithm 3.1, c1 = 1e-4); no step moves a
        # log-concentration by more than ln(1e8), so exp never overflows.
        longest = np.abs(step[0])
        for j in range(1, m):
            np.maximum(longest, np.abs(step[j]), out=longest)
        if longest.max() > _LONGEST_STEP:
            step *= np.minimum(1.0, _LONGEST_STEP / np.maximum(longest, 1e-300))
        slope = gradient[0] * step[0]
        for j in range(1, m):
            slope += gradient[j] * step[j]
        bound = 1e-4 * slope
        bound += f0  # the Armijo bound of a full step
        # Near the root F changes by less than its rounding: accept such steps, which are
        # full Newton steps in the quadratic phase.
        flat = np.abs(f0)
        flat += mass
        flat *= 1e-14
        trial = xa + step
        trial_free = np.exp(trial)
        trial_species = _species(trial, trial_free, matrix, lb, bt)
        trial_mass, f1 = _potential(trial_free, trial_species, ta, trial)
        ok = f1 <= bound
        if not ok.all():
            ok |= np.abs(f1 - f0) <= flat
        if not ok.all():
            t = np.ones(active.size)
            for _ in range(60):
                bad = np.flatnonzero(~ok)
                t[bad] *= 0.5
                trial[:, bad] = xa[:, bad] + t[bad] * step[:, bad]
                trial_free[:, bad] = np.exp(trial[:, bad])
                trial_species[:, bad] = _species(
                    trial[:, bad],
                    trial_free[:, bad],
                    matrix,
                    _columns(lb, bad),
                    None if bt is None else _columns(bt, bad),
                )
                trial_mass, f1 = _potential(trial_free, trial_species, ta, trial)
                ok = (f1 <= f0 + 1e-4 * t * slope) | (np.abs(f1 - f0) <= flat)
                if ok.all():
                    break
        xa, free, species, mass, f0 = trial, trial_free, trial_species, trial_mass, f1
    return free_out, species_out, gradient_out, iterations


def _by_products(matrix: _Floats, ln_beta: _Floats) -> bool:
    """Whether species may be formed as beta times products of free concentrations: every
    coefficient a whole number from 0 to _MAX_POWER and every beta below e^_MAX_PRODUCT_LN_BETA,
    so that no product overflows."""
    return bool(
        np.all(matrix >= 0.0)
        and np.all(matrix == np.round(matrix))
        and np.max(matrix) <= _MAX_POWER
        and np.max(ln_beta) <= _MAX_PRODUCT_LN_BETA
    )


def _species_products(free: _Floats, matrix: _Floats, beta: _Floats) -> _Floats:
    """s_i = beta_i prod_j c_j^(a_ij) by repeated multiplication, component-major: free
    (m, n) -> (s, n); beta is (s, 1) or (s, n). For whole-number coefficients this is exp(ln
    beta_i + sum_j a_ij x_j) without the exponentials, to rounding."""
    out = np.empty((matrix.shape[0], free.shape[1]))
    for i, row in enumerate(matrix):
        started = False
        for j, coefficient in enumerate(row):
            for _ in range(int(coefficient)):
                if started:
                    out[i] *= free[j]
                else:
                    np.multiply(free[j], beta[i], out=out[i])
                    started = True
        if not started:
            out[i] = beta[i]
    return out


def _species(
    x: _Floats,
    free: _Floats,
    matrix: _Floats,
    ln_beta: _Floats,
    beta: _Floats | None,
) -> _Floats:
    """Species at the log-concentrations x, whose exponentials are free, component-major.

    With beta given (:func:`_by_products`), by products of the free concentrations, except in
    mixtures where a free concentration lies so near the bottom of the float range
    (x < _LOWEST_PRODUCT_LN) that a product would lose digits; those, and every mixture
    without beta, by exp(ln beta + A x).
    """
    if beta is None:
        return np.exp(_species_log(x, matrix, ln_beta))
    species = _species_products(free, matrix, beta)
    low = x[0] < _LOWEST_PRODUCT_LN
    for j in range(1, x.shape[0]):
        low |= x[j] < _LOWEST_PRODUCT_LN
    if low.any():
        which = np.flatnonzero(low)
        species[:, which] = np.exp(_species_log(x[:, which], matrix, _columns(ln_beta, which)))
    return species


def _start(
    totals: _Floats,
    matrix: _Floats,
    logs: _Floats,
    beta: _Floats | None,
) -> tuple[_Floats, _Floats]:
    """Starting log-concentrations and their exponentials, (m, n) layout; logs is (s, 1) or
    (s, n), beta the constants when species are formed by products (else None).

    When a 1:1 species of two components exists, the closed-form root of that pair alone is
    the start (the other species are then usually minor, and Newton needs 2 to 4 steps);
    otherwise positive-continued-fraction sweeps from c = T.
    """
    one_to_one = [
        i
        for i in range(matrix.shape[0])
        if np.count_nonzero(matrix[i]) == 2 and np.all(matrix[i][matrix[i] != 0] == 1.0)
    ]
    best = max(one_to_one, key=lambda i: float(np.max(logs[i]))) if one_to_one else None
    if beta is not None:
        return _pcf_start_products(totals, matrix, logs, beta, best)
    if best is None:
        x = _pcf_start(totals, matrix, logs * _LN10)
    else:
        first, second = np.flatnonzero(matrix[best])
        x = np.log(totals)
        x[first], x[second] = _one_to_one_log_free(
            totals[first], totals[second], 10.0 ** logs[best].reshape(-1)
        )
        # Two sweeps pull the start back when another species (a strong 1:2, say) dominates.
        x = _pcf_start(totals, matrix, logs * _LN10, x, sweeps=2)
    return x, np.exp(x)


def _pcf_start(
    totals: _Floats,
    matrix: _Floats,
    ln_beta: _Floats,
    x: _Floats | None = None,
    sweeps: int = _PCF_SWEEPS,
) -> _Floats:
    """Positive-continued-fraction sweeps (Carrayrou et al. 2002) from x (default c = T)."""
    positive = np.clip(matrix, 0.0, None)
    negative = np.clip(-matrix, 0.0, None)
    largest = np.maximum(positive.max(axis=0, initial=0.0), 1.0)[:, None]
    x = np.log(totals) if x is None else x
    has_negative = bool(np.any(negative))
    for _ in range(sweeps):
        species = np.exp(np.minimum(_species_log(x, matrix, ln_beta), 700.0))
        produced = np.exp(x) + _small_product(positive.T, species)
        # Without negative coefficients nothing but the total is consumed.
        consumed = totals + _small_product(negative.T, species) if has_negative else totals
        x = x + (np.log(consumed) - np.log(produced)) / largest
    return x


def _pcf_start_products(
    totals: _Floats,
    matrix: _Floats,
    logs: _Floats,
    beta: _Floats,
    best: int | None,
) -> tuple[_Floats, _Floats]:
    """:func:`_start` for whole, non-negative coefficients: the same sweeps on the free
    concentrations themselves, c_j <- c_j (T_j / (c_j + sum_i a_ij s_i))^(1 / max_i a_ij),
    with species by products, so that only the final logarithms are transcendental.

    Each sweep keeps c_j <= T_j, so no product overflows; free concentrations are held at or
    above 1e-300, so none underflows to 0 (Newton takes the few mixtures whose root lies
    lower the rest of the way).
    """
    free = totals.copy()
    sweeps = _PCF_SWEEPS
    if best is not None:
        first, second = np.flatnonzero(matrix[best])
        free[first], free[second] = _one_to_one_free(
            totals[first], totals[second], 10.0 ** logs[best].reshape(-1)
        )
        sweeps = 2
    matrix_t = np.ascontiguousarray(matrix.T)
    largest = [max(1, int(a)) for a in matrix.max(axis=0)]
    for _ in range(sweeps):
        np.maximum(free, 1e-300, out=free)
        produced = _small_product(matrix_t, _species_products(free, matrix, beta))
        produced += free
        np.divide(totals, produced, out=produced)
        for j, power in enumerate(largest):
            if power == 2:
                np.sqrt(produced[j], out=produced[j])
            elif power > 2:
                np.power(produced[j], 1.0 / power, out=produced[j])
        free *= produced
    x = np.log(np.maximum(free, 1e-300, out=free))
    # Where the floor held a free concentration up (a zero total's 1e-280 stand-in bound by a
    # large constant), the logarithmic sweeps start those mixtures at their far lower root.
    held_up = free[0] <= 1e-300
    for j in range(1, free.shape[0]):
        held_up |= free[j] <= 1e-300
    if held_up.any():
        which = np.flatnonzero(held_up)
        x[:, which] = _start(totals[:, which], matrix, _columns(logs, which), None)[0]
        free[:, which] = np.exp(x[:, which])
    return x, free


def solve_equilibrium(
    total_M: ArrayLike, stoichiometry: ArrayLike, log_beta: ArrayLike
) -> Equilibrium:
    """Solve the mass balances of every mixture for the free component concentrations.

    Parameters
    ----------
    total_M
        Total concentration of each component in each mixture, shape (n, n_components) or
        (n_components,) [mol/L], finite and >= 0.
    stoichiometry
        Coefficient of each component in each product species, shape
        (n_species, n_components) [unitless]; negative coefficients (such as -1 for H+ in a
        hydroxo species) are allowed.
    log_beta
        log10 of each overall formation constant, shape (n_species,), or one row per
        mixture, shape (n, n_species)
        [log10 of (mol/L)^(1-n)].

    Returns
    -------
    Equilibrium
        Free components, species and relative residuals; every relative mass-balance
        residual is at most 1e-10 (typically 1e-14).

    Raises
    ------
    InvalidInputError
        If shapes disagree or a total is negative or not finite.
    ConvergenceError
        If Newton does not converge (not seen for totals 1e-9 to 5 mol/L and log beta from
        -5 to 30).

    Notes
    -----
    See the module notes for the method. A component whose total is 0 has free concentration
    exactly 0, and so has every species containing it.

    Examples
    --------
    >>> eq = solve_equilibrium([[0.1, 1.5e-4]], [[1, 1]], [np.log10(98.0)])
    >>> round(float(eq.species_M[0, 0] / 1.5e-4), 4)
    0.9073
    """
    totals, matrix, logs = _check_inputs(total_M, stoichiometry, log_beta)
    n = totals.shape[0]
    free = np.empty(totals.shape)
    species = np.empty((n, matrix.shape[0]))
    residual = np.empty(totals.shape)
    iterations = 0
    # Blocks of mixtures small enough that every temporary array stays in the processor's
    # cache: on 1e6 mixtures the whole-batch arrays (8 MB each) made the solver wait on
    # memory and on fresh pages for most of its time. Each block's results are written
    # straight into the whole batch's arrays.
    for start in range(0, n, _CHUNK):
        block = slice(start, start + _CHUNK)
        iterations = max(
            iterations,
            _solve_block(
                totals[block],
                matrix,
                logs[block] if logs.ndim == 2 else logs,
                free[block],
                species[block],
                residual[block],
            ),
        )
    return Equilibrium(
        free_M=free, species_M=species, relative_residual=residual, iterations=iterations
    )


def _component_major(free_M: ArrayLike, species_M: ArrayLike) -> tuple[_Floats, _Floats]:
    """An equilibrium as the Newton system takes it, component-major: (free (m, n), species
    (s, n)), an absent component (free 0) at the stand-in for a zero total, so the system the
    sensitivities solve stays regular and that component does not move."""
    free_t = np.maximum(np.asarray(free_M, dtype=float).T, _ZERO_STAND_IN_M)
    species_t = np.ascontiguousarray(np.asarray(species_M, dtype=float).T)
    return free_t, species_t


def log_beta_sensitivity(
    free_M: _Floats, species_M: _Floats, stoichiometry: ArrayLike, species: int
) -> tuple[_Floats, _Floats]:
    """How an equilibrium moves when one species' formation constant changes, totals fixed.

    Parameters
    ----------
    free_M, species_M
        The equilibrium, as :class:`Equilibrium` holds it, shapes (n, n_components) and
        (n, n_species) [mol/L].
    stoichiometry
        The coefficients it was solved with, shape (n_species, n_components) [unitless].
    species
        Row of the product species whose constant changes.

    Returns
    -------
    tuple
        (d free_M/d ln beta, d species_M/d ln beta), shapes (n, n_components) and
        (n, n_species) [mol/L]; multiply by ln 10 for the change per unit of log10 beta.

    Notes
    -----
    Differentiating the mass balances g(x) = 0 (module notes) at fixed totals gives
    H dx = -dg/d ln beta_k = -a_k s_k, with H the Hessian the Newton steps solve with, so the
    sensitivity is one more Newton step (the same numerically careful solve) with the
    gradient a_k s_k; then dc_j = c_j dx_j and ds_i = s_i (delta_ik + sum_j a_ij dx_j)
    (implicit function theorem; e.g. Smith and Missen, 1982, ch. 6, from memory). A
    component whose total is 0 (free concentration 0) does not move.

    Examples
    --------
    >>> eq = solve_equilibrium([[0.1, 1.5e-4]], [[1, 1]], [np.log10(98.0)])
    >>> _, d_species = log_beta_sensitivity(eq.free_M, eq.species_M, [[1, 1]], 0)
    >>> round(float(d_species[0, 0] / 1.5e-4), 4)
    0.0828
    """
    matrix = np.asarray(stoichiometry, dtype=float)
    free_t, species_t = _component_major(free_M, species_M)
    gradient = np.outer(matrix[species], species_t[species])
    dx = _newton_step(free_t, species_t, gradient, matrix)
    d_free = (free_t * dx).T
    d_species_t = _small_product(matrix, dx)
    d_species_t[species] += 1.0
    d_species_t *= species_t
    return d_free, d_species_t.T


def total_sensitivity(
    free_M: _Floats,
    species_M: _Floats,
    total_M: _Floats,
    stoichiometry: ArrayLike,
    component: int,
) -> tuple[_Floats, _Floats]:
    """How an equilibrium moves when one component's total grows, constants fixed.

    Parameters
    ----------
    free_M, species_M
        The equilibrium, as :class:`Equilibrium` holds it, shapes (n, n_components) and
        (n, n_species) [mol/L].
    total_M
        The totals it was solved for, shape (n, n_components) [mol/L].
    stoichiometry
        The coefficients it was solved with, shape (n_species, n_components) [unitless].
    component
        Column of the component whose total changes.

    Returns
    -------
    tuple
        (d free_M/d T, d species_M/d T), shapes (n, n_components) and (n, n_species)
        [unitless]; rows where the component's total is 0 are 0 (the equilibrium is not
        differentiable there: the first of that component starts species from nothing).

    Notes
    -----
    As :func:`log_beta_sensitivity`: the mass balances g(x) = c + A^T s - T differentiated
    at fixed constants give H dx = e_j, one Newton-system solve. Another component absent
    from a mixture (free concentration 0) enters at the solver's stand-in for a zero total,
    so the system stays regular and that component does not move.

    Examples
    --------
    >>> eq = solve_equilibrium([[0.1, 1.5e-4]], [[1, 1]], [np.log10(98.0)])
    >>> _, d_species = total_sensitivity(eq.free_M, eq.species_M, [[0.1, 1.5e-4]], [[1, 1]], 1)
    >>> round(float(d_species[0, 0]), 4)
    0.9073
    """
    matrix = np.asarray(stoichiometry, dtype=float)
    free_t, species_t = _component_major(free_M, species_M)
    gradient = np.zeros_like(free_t)
    gradient[component] = -1.0
    dx = _newton_step(free_t, species_t, gradient, matrix)
    present = np.asarray(total_M, dtype=float)[:, component] > 0
    d_free = np.where(present[:, None], (free_t * dx).T, 0.0)
    d_species = np.where(present[:, None], (species_t * _small_product(matrix, dx)).T, 0.0)
    return d_free, d_species


def _solve_block(
    totals: _Floats,
    matrix: _Floats,
    logs: _Floats,
    free: _Floats,
    species: _Floats,
    residual: _Floats,
) -> int:
    """:func:`solve_equilibrium` on checked inputs, all mixtures at once, into free, species
    and residual (n, m), (n, s), (n, m); returns the Newton iterations."""
    zero = totals <= 0.0
    any_zero = bool(np.any(zero))
    work = np.where(zero, _ZERO_STAND_IN_M, totals) if any_zero else totals
    # Constants species-major, one column shared or one per mixture: (s, 1) or (s, n).
    logs_t = np.ascontiguousarray(logs.T) if logs.ndim == 2 else logs[:, None]
    ln_beta_t = logs_t * _LN10

    if _is_one_to_one(matrix):
        ln_metal, ln_ligand = _one_to_one_log_free(work[:, 0], work[:, 1], 10.0 ** logs_t[0])
        x = np.stack([ln_metal, ln_ligand], axis=1)
        iterations = 0
        np.exp(x, out=free)
        np.exp(_small_product(matrix, x.T).T + ln_beta_t.T, out=species)
        np.divide(free + _small_product(matrix.T, species.T).T - work, work, out=residual)
    else:
        work_t = np.ascontiguousarray(work.T)
        beta = np.exp(ln_beta_t) if _by_products(matrix, ln_beta_t) else None
        x, free_t = _start(work_t, matrix, logs_t, beta)
        free_t, species_t, gradient_t, iterations = _newton(
            x, free_t, work_t, matrix, ln_beta_t, beta
        )
        free[...] = free_t.T
        species[...] = species_t.T
        gradient_t /= work_t
        residual[...] = gradient_t.T
    if any_zero:
        free[zero] = 0.0
        residual[zero] = 0.0
        species[(zero.astype(float) @ (matrix != 0).T) > 0] = 0.0
    return iterations


def _is_one_to_one(matrix: _Floats) -> bool:
    return matrix.shape == (1, 2) and bool(np.all(matrix == 1.0))
