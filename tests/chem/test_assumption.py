"""The limiting-reagent assumption: worked example, closed forms and invariants."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from planner.chem.assumption import LARGEST_TOTAL_M, check_assumption, min_excess_M
from planner.errors import InvalidInputError

# Iron(III) thiocyanate 1:1 constant at I = 0.5 mol/L, 25 °C: K1 = 98 L/mol
# (de Berg, Maeder and Clifford, Inorganica Chimica Acta 445 (2016) 155-159).
K_FE_SCN = 98.0


def test_worked_example_hand_calculation():
    # Worked by hand: x = [FeSCN2+] solves 98 (0.1 - x)(1.5e-4 - x) = x. The quadratic
    # 98x^2 - (98*0.10015 + 1)x + 98*1.5e-5 = 0 has the small root
    # x = [10.8147 - sqrt(10.8147^2 - 4*98*1.47e-3)] / 196 = 1.36094e-4 mol/L, so
    # f = 0.90729; the smallest excess for a 2 % tolerance is
    # 0.98*1.5e-4 + 0.98/(98*0.02) = 0.500147 mol/L (DESIGN formula from f = K m/(1 + K m)).
    a, b, c = 98.0, -(98.0 * 0.10015 + 1.0), 98.0 * 1.5e-5
    x = (-b - math.sqrt(b * b - 4 * a * c)) / (2 * a)
    result = check_assumption(K_FE_SCN, 0.1, 1.5e-4, 0.02)
    assert result.bound_fraction == pytest.approx(x / 1.5e-4, rel=1e-9)
    assert result.bound_fraction == pytest.approx(0.907, abs=5e-4)
    assert result.verdict == "insufficient"
    assert result.min_excess_M == pytest.approx(0.500147, rel=1e-9)
    assert result.assumption_error == pytest.approx(1 - result.bound_fraction)
    assert result.epsilon_bias == pytest.approx(result.bound_fraction - 1)
    assert result.practical


def test_one_percent_at_k_near_100_is_out_of_practical_reach():
    # DESIGN section 3: with K near 100 a 1 % tolerance needs about 1 mol/L of free iron(III):
    # (1 - 0.01)/(98 * 0.01) = 1.0102 mol/L.
    result = check_assumption(K_FE_SCN, 0.1, 1.5e-4, 0.01)
    assert result.min_free_excess_M == pytest.approx(0.99 / 0.98, rel=1e-12)
    assert not result.practical


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"K": 0.0}, "K"),
        ({"K": -5.0}, "K"),
        ({"excess_M": -0.1}, "excess"),
        ({"limiting_M": -1e-4}, "limiting"),
        ({"limiting_M": 0.0}, "limiting"),
        ({"tolerance": 0.0}, "tolerance"),
        ({"tolerance": 1.0}, "tolerance"),
        ({"tolerance": float("nan")}, "tolerance"),
        # Found by fuzzing: each of these used to end in an internal error or a wrong answer.
        ({"tolerance": 5e-324}, "tolerance"),  # K * tol underflowed: ZeroDivisionError
        ({"excess_M": 1e308, "limiting_M": 1e308}, "excess"),  # the root overflowed
        ({"K": 1e308}, "K"),  # overflow warnings
        ({"K": float("inf")}, "K"),
        ({"limiting_M": 1e-300}, "limiting"),  # its free part underflowed: "not bound"
    ],
)
def test_invalid_arguments_name_the_field(kwargs, field):
    arguments = {"K": 98.0, "excess_M": 0.1, "limiting_M": 1.5e-4, "tolerance": 0.02} | kwargs
    with pytest.raises(InvalidInputError, match=f"^{field}:"):
        check_assumption(**arguments)


_k = st.floats(min_value=1e-2, max_value=1e10)
_conc = st.floats(min_value=1e-8, max_value=1.0)
_tol = st.floats(min_value=1e-4, max_value=0.5)


@settings(max_examples=200, deadline=None)
@given(k=_k, limiting=_conc, tolerance=_tol)
def test_min_excess_meets_tolerance_and_one_percent_less_does_not(k, limiting, tolerance):
    needed = min_excess_M(k, limiting, tolerance)
    if needed * (1 + 1e-9) > LARGEST_TOTAL_M:
        # Beyond what check accepts: the largest accepted excess falls short, and no fix.
        most = check_assumption(k, LARGEST_TOTAL_M, limiting, tolerance)
        assert most.verdict == "insufficient"
        assert not most.excess_reachable
        assert most.suggested_excess_M is None
        return
    enough = check_assumption(k, needed * (1 + 1e-9), limiting, tolerance)
    short = check_assumption(k, needed * 0.99, limiting, tolerance)
    assert enough.verdict == "ok"
    assert short.verdict == "insufficient"


@settings(max_examples=200, deadline=None)
@given(k=_k, limiting=_conc, low=_conc, factor=st.floats(min_value=1.01, max_value=100.0))
def test_bound_fraction_rises_with_excess(k, limiting, low, factor):
    lower = check_assumption(k, low, limiting).bound_fraction
    higher = check_assumption(k, min(low * factor, LARGEST_TOTAL_M), limiting).bound_fraction
    assert 0.0 <= lower <= 1.0
    assert higher >= lower


def test_extremes_of_the_accepted_range_stay_finite_and_right():
    # K = 1e60 L/mol, 20 mol/L excess, 1e-30 mol/L limiting: K[M]free is 2e61, so by
    # equation (1) the limiting reagent is bound to within 5e-62, i.e. exactly 1 in floats;
    # the smallest free excess for tol = 1e-6 is (1 - 1e-6)/(1e60 * 1e-6) = 9.99999e-55.
    result = check_assumption(1e60, 20.0, 1e-30, 1e-6)
    assert result.bound_fraction == 1.0
    assert result.verdict == "ok"
    assert result.min_free_excess_M == pytest.approx(9.99999e-55, rel=1e-12)
