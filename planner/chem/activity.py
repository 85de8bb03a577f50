"""Formation constants in another ionic medium: the Davies equation and SIT.

A formation constant is a concentration quotient valid in the medium it was measured in. In a
mixture of another ionic strength the activity coefficients of the reagents and the product
differ, and so does the constant. For a product P = sum_j nu_j C_j,

    log10 beta(I) = log10 beta(I0) + g(I) - g(I0),

with g the medium term of the reaction's activity coefficients:

- up to :data:`DAVIES_LIMIT_M` (0.5 mol/L), the Davies equation,
  log10 gamma_i = -A z_i^2 (sqrt(I)/(1 + sqrt(I)) - 0.3 I), so
  g_D(I) = -A dz2 (sqrt(I)/(1 + sqrt(I)) - 0.3 I);
- above it, the specific ion interaction theory (SIT),
  log10 gamma_i = -z_i^2 D + sum_k eps(i, k) m_k with D = A sqrt(I)/(1 + 1.5 sqrt(I)), so
  g_S(I) = -dz2 D(I) - d_eps I, joined to the Davies branch at 0.5 mol/L so that g is
  continuous: g(I) = g_D(0.5) + g_S(I) - g_S(0.5).

Here dz2 = sum_j nu_j z_j^2 - z_P^2 (reagents minus product; 6 for Fe3+ + SCN- -> FeSCN2+)
and d_eps is the reaction's SIT interaction coefficient in the NEA convention (products minus
reagents, kg/mol). Concentrations stand in for molalities (below about 3 mol/L the two differ
by a few per cent in dilute aqueous media, from memory), and A is its 25 °C value at every
temperature (it moves by about 2 % between 15 and 35 °C, from memory).

References
----------
C. W. Davies, Ion Association, Butterworths, London, 1962 (the equation, from memory).
W. Stumm and J. J. Morgan, Aquatic Chemistry, 3rd ed., Wiley, 1996, section 3.4 and
Table 3.3 (Davies activity coefficients; A = 0.51 at 25 °C; from memory).
I. Grenthe and I. Puigdomenech (eds.), Modelling in Aquatic Chemistry, OECD NEA, 1997,
chapter IX; and the NEA TDB guideline TDB-2, "Guidelines for the extrapolation to zero ionic
strength" (Grenthe, Plyasunov and Spahiu): D = A sqrt(Im)/(1 + 1.5 sqrt(Im)),
A = 0.509 kg^1/2 mol^-1/2 at 25 °C (from memory).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "DAVIES_A",
    "DAVIES_LIMIT_M",
    "INERT_SALTS",
    "SIT_BA",
    "davies_log_gamma",
    "delta_z_squared",
    "log_beta_in_medium",
    "medium_term",
    "sit_log_gamma",
]

#: Debye-Hückel A of water at 25 °C [(L/mol)^1/2 ~ kg^1/2 mol^-1/2] (NEA TDB-2; Stumm and
#: Morgan 1996, Table 3.3; from memory).
DAVIES_A = 0.509
#: Highest ionic strength of the Davies branch [mol/L]: the equation holds to about 0.5
#: mol/L (Stumm and Morgan 1996, section 3.4, from memory).
DAVIES_LIMIT_M = 0.5
#: Inert salts that set a constant ionic medium, with the ions one formula unit gives
#: (common practice: perchlorates and nitrates of the alkali metals complex hardly at all;
#: chloride binds iron(III), so it is not offered).
INERT_SALTS: dict[str, dict[str, int]] = {
    "NaNO3": {"Na+": 1, "NO3-": 1},
    "KNO3": {"K+": 1, "NO3-": 1},
    "NaClO4": {"Na+": 1, "ClO4-": 1},
    "LiClO4": {"Li+": 1, "ClO4-": 1},
}
#: B a_j of SIT's Debye-Hückel term [kg^1/2 mol^-1/2] (NEA TDB-2, from memory).
SIT_BA = 1.5


def davies_log_gamma(charge: ArrayLike, ionic_strength_M: ArrayLike) -> NDArray[np.float64]:
    """log10 of an ion's activity coefficient by the Davies equation [unitless].

    Examples
    --------
    >>> round(float(davies_log_gamma(1, 0.1)), 4)
    -0.107
    """
    root = np.sqrt(np.asarray(ionic_strength_M, dtype=float))
    z = np.asarray(charge, dtype=float)
    result = -DAVIES_A * z * z * (root / (1.0 + root) - 0.3 * root * root)
    return np.asarray(result, dtype=float)


def sit_log_gamma(
    charge: ArrayLike, ionic_strength_M: ArrayLike, epsilon_kg_mol: ArrayLike = 0.0
) -> NDArray[np.float64]:
    """log10 of an ion's activity coefficient by SIT: -z^2 D + eps m [unitless].

    ``epsilon_kg_mol`` is the ion's interaction coefficient with the medium's counter-ion
    [kg/mol]; the medium's molality is taken as its ionic strength (a 1:1 medium).
    """
    i = np.asarray(ionic_strength_M, dtype=float)
    root = np.sqrt(i)
    z = np.asarray(charge, dtype=float)
    d = DAVIES_A * root / (1.0 + SIT_BA * root)
    return np.asarray(-z * z * d + np.asarray(epsilon_kg_mol, dtype=float) * i, dtype=float)


def delta_z_squared(formula: Mapping[str, int], charges: Mapping[str, int]) -> int:
    """sum_j nu_j z_j^2 - z_P^2 of a product's formation [unitless]; z_P = sum_j nu_j z_j."""
    product = sum(n * charges[c] for c, n in formula.items())
    return sum(n * charges[c] ** 2 for c, n in formula.items()) - product * product


def _davies_g(delta_z2: NDArray[np.float64], i: NDArray[np.float64]) -> NDArray[np.float64]:
    root = np.sqrt(i)
    return np.asarray(-DAVIES_A * delta_z2 * (root / (1.0 + root) - 0.3 * i), dtype=float)


def _sit_g(
    delta_z2: NDArray[np.float64], delta_epsilon: NDArray[np.float64], i: NDArray[np.float64]
) -> NDArray[np.float64]:
    root = np.sqrt(i)
    d = DAVIES_A * root / (1.0 + SIT_BA * root)
    return np.asarray(-delta_z2 * d - delta_epsilon * i, dtype=float)


def medium_term(
    delta_z2: ArrayLike, ionic_strength_M: ArrayLike, delta_epsilon_kg_mol: ArrayLike = 0.0
) -> NDArray[np.float64]:
    """g(I): the medium's part of log10 beta (module notes), Davies then SIT [unitless]."""
    dz2 = np.asarray(delta_z2, dtype=float)
    deps = np.asarray(delta_epsilon_kg_mol, dtype=float)
    i = np.maximum(np.asarray(ionic_strength_M, dtype=float), 0.0)
    limit = np.asarray(DAVIES_LIMIT_M)
    low = _davies_g(dz2, np.minimum(i, limit))
    high = _sit_g(dz2, deps, np.maximum(i, limit)) - _sit_g(dz2, deps, limit)
    return np.asarray(np.where(i <= DAVIES_LIMIT_M, low, low + high), dtype=float)


def log_beta_in_medium(
    log_beta: ArrayLike,
    delta_z2: ArrayLike,
    reference_M: float,
    ionic_strength_M: ArrayLike,
    delta_epsilon_kg_mol: ArrayLike = 0.0,
) -> NDArray[np.float64]:
    """log10 beta at another ionic strength: log10 beta(I0) + g(I) - g(I0).

    Parameters
    ----------
    log_beta
        log10 beta at ``reference_M``, shape (n_species,).
    delta_z2
        sum nu z^2 - z_P^2 of each species, shape (n_species,).
    reference_M
        Ionic strength the constants refer to [mol/L].
    ionic_strength_M
        Ionic strength of each mixture, shape (n,) [mol/L].
    delta_epsilon_kg_mol
        SIT's reaction interaction coefficient (products minus reagents) [kg/mol], scalar or
        shape (n_species,); used above 0.5 mol/L only.

    Returns
    -------
    NDArray[np.float64]
        Shape (n, n_species).
    """
    logs = np.asarray(log_beta, dtype=float)[None, :]
    dz2 = np.asarray(delta_z2, dtype=float)[None, :]
    i = np.asarray(ionic_strength_M, dtype=float).reshape(-1, 1)
    shift = medium_term(dz2, i, delta_epsilon_kg_mol) - medium_term(
        dz2, np.asarray(reference_M), delta_epsilon_kg_mol
    )
    return np.asarray(logs + shift, dtype=float)
