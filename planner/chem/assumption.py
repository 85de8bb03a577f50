"""The limiting-reagent assumption of calibration standards, for a 1:1 complex.

Standards are usually analysed as if the limiting reagent L were entirely bound in the coloured
product ML ("[ML] = [L]total"), made so by a large excess of the other reagent M. Whether the
excess is large enough depends on the *free* excess concentration, not on the ratio of the
totals: the bound fraction is

    f = K [M]free / (1 + K [M]free)                                              (1)

(the 1:1 binding isotherm; Connors, Binding Constants, Wiley 1987, eq. 2.7 (from memory)).
Requiring a relative error of the assumption of at most tol, f >= 1 - tol, gives the smallest
free excess (1 - tol) / (K tol), and with [M]total = [M]free + f [L]total the smallest total

    [M]total,min = (1 - tol) [L]total + (1 - tol) / (K tol).                     (2)

A molar absorptivity measured from such standards is low by the factor f: eps_measured = f eps.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from planner.chem.equilibrium import one_to_one_complex_M
from planner.errors import InvalidInputError

__all__ = ["PRACTICAL_FREE_EXCESS_M", "AssumptionCheck", "check_assumption", "min_excess_M"]

#: Free excess above which a tolerance is "out of practical reach": at about 1 mol/L the
#: excess reagent itself sets the ionic strength and the medium no longer matches the one the
#: constant refers to (common practice).
PRACTICAL_FREE_EXCESS_M = 1.0

# Accepted inputs, found by fuzzing to keep every result finite and right (K and the
# tolerance as the plan file accepts them, planner.planfile). Beyond them the arithmetic
# broke down: a tolerance of 5e-324 made K * tol underflow to 0 (ZeroDivisionError),
# concentrations of 1e308 overflowed the quadratic root, K = 1e308 printed overflow
# warnings, and a limiting total of 1e-300 underflowed its free part to 0, so a fully bound
# reagent was reported as not bound at all.
_K_LIMITS = (1e-60, 1e60)  # [L/mol]
# [mol/L]: far beyond any solution (water itself is 55 mol/L), but a what-if check may ask
# about excesses above the 20 mol/L a stock may hold; 1e6 keeps K * c within float range.
_LARGEST_M = 1e6
_SMALLEST_LIMITING_M = 1e-30  # [mol/L]: under one ion per cubic metre
_SMALLEST_TOLERANCE = 1e-6  # [unitless]: a ppm is far below any photometric precision


@dataclass(frozen=True, slots=True)
class AssumptionCheck:
    """Answer to "is this excess large enough to treat the limiting reagent as all bound?".

    Attributes
    ----------
    K
        Formation constant [L/mol].
    excess_M
        Total concentration of the reagent in excess [mol/L].
    limiting_M
        Total concentration of the limiting reagent [mol/L].
    tolerance
        Accepted relative error of the assumption [unitless].
    bound_fraction
        Fraction of the limiting reagent in the complex at equilibrium [unitless].
    assumption_error
        1 - bound_fraction [unitless]: the shortfall that the tolerance bounds.
    free_excess_M
        Free concentration of the excess reagent at equilibrium [mol/L].
    min_excess_M
        Smallest total excess that meets the tolerance, equation (2) [mol/L].
    min_free_excess_M
        The free excess that meets it, (1 - tol)/(K tol) [mol/L].
    epsilon_bias
        Relative error of a molar absorptivity measured from such standards, f - 1 [unitless].
    verdict
        ``"ok"`` when bound_fraction >= 1 - tolerance, else ``"insufficient"``.
    practical
        False when the tolerance needs a free excess above :data:`PRACTICAL_FREE_EXCESS_M`.
    """

    K: float
    excess_M: float
    limiting_M: float
    tolerance: float
    bound_fraction: float
    assumption_error: float
    free_excess_M: float
    min_excess_M: float
    min_free_excess_M: float
    epsilon_bias: float
    verdict: str
    practical: bool


def min_excess_M(K: float, limiting_M: float, tolerance: float) -> float:
    """Smallest total excess concentration keeping the assumption's error below ``tolerance``.

    Parameters
    ----------
    K
        Formation constant of the 1:1 complex [L/mol].
    limiting_M
        Total concentration of the limiting reagent [mol/L].
    tolerance
        Accepted relative error of "[ML] = [L]total" [unitless], 0 < tolerance < 1.

    Returns
    -------
    float
        (1 - tol) [L]total + (1 - tol)/(K tol) [mol/L], equation (2) of the module notes.
    """
    return (1.0 - tolerance) * limiting_M + (1.0 - tolerance) / (K * tolerance)


def check_assumption(
    K: float, excess_M: float, limiting_M: float, tolerance: float = 0.02
) -> AssumptionCheck:
    """Exact bound fraction of the limiting reagent and the excess the tolerance needs.

    Parameters
    ----------
    K
        Formation constant of the 1:1 complex [L/mol], > 0.
    excess_M
        Total concentration of the reagent in excess [mol/L], >= 0.
    limiting_M
        Total concentration of the limiting reagent [mol/L], > 0.
    tolerance
        Accepted relative error of the assumption [unitless], 0 < tolerance < 1.

    Returns
    -------
    AssumptionCheck

    Raises
    ------
    InvalidInputError
        For K outside 1e-60 to 1e60 L/mol, an excess outside 0 to 1e6 mol/L, a limiting
        total outside 1e-30 to 1e6 mol/L, a non-finite value, or a tolerance outside [1e-6, 1).

    Examples
    --------
    >>> c = check_assumption(98, 0.1, 1.5e-4, 0.02)
    >>> round(c.bound_fraction, 3), c.verdict, round(c.min_excess_M, 2)
    (0.907, 'insufficient', 0.5)
    """
    _require(
        bool(np.isfinite(K)) and _K_LIMITS[0] <= K <= _K_LIMITS[1],
        "K",
        K,
        "the formation constant must be > 0 (from 1e-60 to 1e60)",
        "give K in L/mol, e.g. 98",
    )
    _require(
        bool(np.isfinite(excess_M)) and 0 <= excess_M <= _LARGEST_M,
        "excess",
        excess_M,
        "the excess concentration must be >= 0 (at most 1e6 mol/L)",
        "give the total concentration of the reagent in excess in mol/L, e.g. 0.1",
    )
    _require(
        bool(np.isfinite(limiting_M)) and _SMALLEST_LIMITING_M <= limiting_M <= _LARGEST_M,
        "limiting",
        limiting_M,
        "the limiting-reagent concentration must be > 0 (from 1e-30 to 1e6 mol/L)",
        "give its total concentration in mol/L, e.g. 1.5e-4",
    )
    _require(
        bool(np.isfinite(tolerance)) and _SMALLEST_TOLERANCE <= tolerance < 1,
        "tolerance",
        tolerance,
        "the tolerance must lie strictly between 0 and 1 (at least 1e-6)",
        "give the accepted relative error as a fraction, e.g. 0.02 for 2 %",
    )
    excess_M = float(excess_M) + 0.0  # -0.0 (accepted as 0) becomes 0.0: no "-0" in reports
    complex_M = float(one_to_one_complex_M(excess_M, limiting_M, K))
    fraction = complex_M / limiting_M
    free_needed = (1.0 - tolerance) / (K * tolerance)
    return AssumptionCheck(
        K=float(K),
        excess_M=float(excess_M),
        limiting_M=float(limiting_M),
        tolerance=float(tolerance),
        bound_fraction=fraction,
        assumption_error=1.0 - fraction,
        free_excess_M=float(excess_M) - complex_M,
        min_excess_M=min_excess_M(K, limiting_M, tolerance),
        min_free_excess_M=free_needed,
        epsilon_bias=fraction - 1.0,
        verdict="ok" if fraction >= 1.0 - tolerance else "insufficient",
        practical=free_needed <= PRACTICAL_FREE_EXCESS_M,
    )


def _require(condition: bool | np.bool_, field: str, value: float, problem: str, hint: str) -> None:
    if not condition:
        raise InvalidInputError(problem, field=field, value=value, hint=hint)
