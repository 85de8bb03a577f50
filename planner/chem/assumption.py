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

The fixes :func:`check_assumption` offers are solved for and checked again before they are
offered: the smallest sufficient excess, rounded *up* to the four digits a person reads, is put
back through the exact bound fraction and must meet the tolerance; so must the tolerance that
would accept the present error. An excess above :data:`LARGEST_DISSOLVED_M` is no fix at all.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from planner.chem.equilibrium import one_to_one_complex_M
from planner.errors import InvalidInputError
from planner.records import record

__all__ = [
    "LARGEST_DISSOLVED_M",
    "LARGEST_TOTAL_M",
    "PRACTICAL_FREE_EXCESS_M",
    "AssumptionCheck",
    "check_assumption",
    "checked_round_down",
    "checked_round_up",
    "min_excess_M",
    "round_down",
    "round_up",
]

#: Free excess above which a tolerance is "out of practical reach": at about 1 mol/L the
#: excess reagent itself sets the ionic strength and the medium no longer matches the one the
#: constant refers to (common practice).
PRACTICAL_FREE_EXCESS_M = 1.0

#: Most a fix may ask of a dissolved reagent, in a stock or a mixture [mol/L]: above about
#: 10 mol/L a solution is more solute than water (pure water is 55.5 mol/L) and few salts
#: dissolve so far at room temperature, so such a stock cannot be made up in the medium
#: (common practice). A fix that needs more is said to be impossible.
LARGEST_DISSOLVED_M = 10.0

#: Largest total concentration ``planner check`` accepts [mol/L]: the most a plan file lets a
#: stock hold (``contains_M`` at most 20 mol/L, planner.planfile.schema), and a mixture holds
#: no more than its strongest stock. Beyond it a value is a typo, not a solution.
LARGEST_TOTAL_M = 20.0

# Accepted inputs, found by fuzzing to keep every result finite and right (K and the
# tolerance as the plan file accepts them, planner.planfile). Beyond them the arithmetic
# broke down: a tolerance of 5e-324 made K * tol underflow to 0 (ZeroDivisionError),
# concentrations of 1e308 overflowed the quadratic root, K = 1e308 printed overflow
# warnings, and a limiting total of 1e-300 underflowed its free part to 0, so a fully bound
# reagent was reported as not bound at all. Concentrations stop at LARGEST_TOTAL_M.
_K_LIMITS = (1e-60, 1e60)  # [L/mol]
_SMALLEST_LIMITING_M = 1e-30  # [mol/L]: under one ion per cubic metre
_SMALLEST_TOLERANCE = 1e-6  # [unitless]: a ppm is far below any photometric precision


@record
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
    diluted_bound_fraction
        The bound fraction with both totals ten times lower, same ratio [unitless].
    suggested_excess_M
        The fix "raise the total excess to this": the smallest sufficient excess rounded up to
        four significant digits and checked again to meet the tolerance; None when the excess
        already suffices or the fix is impossible (``excess_reachable`` False) [mol/L].
    excess_reachable
        False when the smallest sufficient excess is above :data:`LARGEST_DISSOLVED_M`: no
        shelf can make it.
    suggested_tolerance
        The fix "accept this tolerance": the present error rounded up to two significant
        digits and checked again to accept it; None when the excess suffices or when most of
        the limiting reagent is unbound (an error of 50 % or more is no standard) [unitless].
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
    diluted_bound_fraction: float
    suggested_excess_M: float | None
    excess_reachable: bool
    suggested_tolerance: float | None


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
        For K outside 1e-60 to 1e60 L/mol, an excess outside 0 to 20 mol/L, a limiting
        total outside 1e-30 to 20 mol/L, a non-finite value, or a tolerance outside [1e-6, 1).

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
        bool(np.isfinite(excess_M)) and 0 <= excess_M <= LARGEST_TOTAL_M,
        "excess",
        excess_M,
        f"the excess concentration must be from 0 to {LARGEST_TOTAL_M:g} mol/L, the most a "
        "stock may hold",
        "give the total concentration of the reagent in excess in mol/L, e.g. 0.1",
    )
    _require(
        bool(np.isfinite(limiting_M)) and _SMALLEST_LIMITING_M <= limiting_M <= LARGEST_TOTAL_M,
        "limiting",
        limiting_M,
        f"the limiting-reagent concentration must be > 0 (from 1e-30 to {LARGEST_TOTAL_M:g} "
        "mol/L, the most a stock may hold)",
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
    ok = fraction >= 1.0 - tolerance
    needed = min_excess_M(K, limiting_M, tolerance)
    reachable = needed <= LARGEST_DISSOLVED_M
    suggested_excess = None
    if not ok and reachable:
        suggested_excess = checked_round_up(
            needed, lambda c: _bound_fraction(K, c, limiting_M) >= 1.0 - tolerance
        )
        if suggested_excess is not None and suggested_excess > LARGEST_DISSOLVED_M:
            suggested_excess, reachable = None, False
    suggested_tolerance = None
    if not ok and 1.0 - fraction < 0.5:
        suggested_tolerance = checked_round_up(
            1.0 - fraction, lambda t: fraction >= 1.0 - t, digits=2
        )
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
        verdict="ok" if ok else "insufficient",
        practical=free_needed <= PRACTICAL_FREE_EXCESS_M,
        diluted_bound_fraction=_bound_fraction(K, excess_M / 10, limiting_M / 10),
        suggested_excess_M=suggested_excess,
        excess_reachable=reachable,
        suggested_tolerance=suggested_tolerance,
    )


def round_up(value: float, digits: int = 4) -> float:
    """``value`` rounded up (away from zero for a positive value) to ``digits`` significant
    digits, so that a printed minimum is never below the true one.

    >>> round_up(0.500147), round_up(0.5001, 2)
    (0.5002, 0.51)
    """
    return _rounded(value, digits, math.ceil)


def _last_digit(value: float, digits: int) -> float:
    """The place value of the last of ``digits`` significant digits of a positive value."""
    return float(10.0 ** (math.floor(math.log10(value)) - digits + 1))


def _rounded(value: float, digits: int, direction: Callable[[float], int]) -> float:
    """A positive ``value`` to ``digits`` significant digits, its last digit chosen by
    ``direction`` (math.ceil: up, math.floor: down); any other value unchanged."""
    if not math.isfinite(value) or value <= 0:
        return value
    unit = _last_digit(value, digits)
    # round() first: value / unit may come out as 5001.000000001 for an exact 5001.
    steps = direction(round(value / unit, 9))
    return float(f"{steps * unit:.{digits}g}")


def round_down(value: float, digits: int = 4) -> float:
    """``value`` rounded down (towards zero for a positive value) to ``digits`` significant
    digits, so that a printed maximum is never above the true one.

    >>> round_down(0.00049987), round_down(0.5009, 2)
    (0.0004998, 0.5)
    """
    return _rounded(value, digits, math.floor)


def checked_round_down(
    value: float, passes: Callable[[float], bool], digits: int = 4
) -> float | None:
    """``value`` rounded down to ``digits`` significant digits, then lowered by one last digit
    at a time until ``passes`` accepts it (the counterpart of :func:`checked_round_up` for a
    fix that asks for less); None when a few steps do not get there."""
    candidate = round_down(value, digits)
    for _ in range(4):
        if candidate <= 0:
            return None
        if passes(candidate):
            return candidate
        candidate = round_down(candidate - _last_digit(candidate, digits), digits)
    return None


def checked_round_up(
    value: float, passes: Callable[[float], bool], digits: int = 4
) -> float | None:
    """``value`` rounded up to ``digits`` significant digits, then raised by one last digit at
    a time until ``passes`` accepts it, so that the printed figure of a fix is one that works;
    None when a few steps do not get there.

    >>> checked_round_up(0.500147, lambda c: c >= 0.500147)
    0.5002
    """
    candidate = round_up(value, digits)
    for _ in range(4):
        if passes(candidate):
            return candidate
        candidate = round_up(candidate + _last_digit(candidate, digits), digits)
    return None


def _bound_fraction(K: float, excess_M: float, limiting_M: float) -> float:
    """Exact bound fraction of the limiting reagent, equation (1) through the 1:1 root."""
    return float(one_to_one_complex_M(excess_M, limiting_M, K)) / limiting_M


def _require(condition: bool | np.bool_, field: str, value: float, problem: str, hint: str) -> None:
    if not condition:
        raise InvalidInputError(problem, field=field, value=value, hint=hint)
