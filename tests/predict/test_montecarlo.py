"""Tests of planner.predict.montecarlo: the virtual class (JCGM 101:2008).

Trial counts are small to keep the file fast; every tolerance below states the Monte Carlo
standard error it allows for.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from scipy.optimize import brentq

from planner.errors import InvalidInputError
from planner.predict.montecarlo import (
    CHUNK_TRIALS,
    MAX_TRIALS,
    MEMORY_BUDGET_BYTES,
    coverage_interval,
    global_fit_least_squares,
    largest_trials,
    simulate,
)
from planner.predict.uncertainty import propagate

# The default plan's constants (planner/data/default.toml): K1 = 98 and K2 = 7 L/mol at
# I = 0.5 mol/L (de Berg, Maeder and Clifford, Inorg. Chim. Acta 445 (2016) 155-159), and the
# molar absorptivity it assumes for FeSCN2+.
K1 = 98.0
K2 = 7.0
EPSILON = 4700.0
# Allowance for the second-order term of a Monte Carlo mean against a first-order value,
# (u/y)^2 ~ 1e-4 relative for the default plan's ~1 % uncertainties (the next term of a Taylor
# expansion of the mean, which the first-order derivation leaves out).
SECOND_ORDER = 2e-4


@pytest.fixture(scope="module")
def default_simulation(tubes_plan):
    return simulate(
        tubes_plan.inputs, tubes_plan.mixtures, trials=20_000, rng=np.random.default_rng(2024)
    )


def _complex_M(iron_M: float, thiocyanate_M: float) -> float:
    """[FeSCN2+] from the mass balances of Fe3+ + SCN- = FeSCN2+ (K1), FeSCN2+ + SCN- =
    Fe(SCN)2+ (K2), solved by bracketing (independent of planner.chem):
    Fe_T = F (1 + K1 s + K1 K2 s^2) and SCN_T = s (1 + K1 F + 2 K1 K2 F s)."""

    def excess_thiocyanate(s: float) -> float:
        free_iron = iron_M / (1 + K1 * s + K1 * K2 * s * s)
        return s * (1 + K1 * free_iron + 2 * K1 * K2 * free_iron * s) - thiocyanate_M

    s = brentq(excess_thiocyanate, 0.0, thiocyanate_M, xtol=1e-30, rtol=1e-15)
    return K1 * iron_M / (1 + K1 * s + K1 * K2 * s * s) * s


def test_gum_and_monte_carlo_agree_where_near_linear(tubes_plan, default_simulation):
    # The default plan's relative uncertainties are ~1 %, so the models are near-linear over
    # the input spread and JCGM 101:2008, 8 expects the Monte Carlo SD to match the GUM's.
    # Issue 4: within 10 %. (Measured: 1 % for eps, 1 % for K.) With 20000 trials the SD
    # itself carries ~0.5 % Monte Carlo error.
    gum = propagate(tubes_plan.inputs, tubes_plan.mixtures)
    all_bound = default_simulation.all_bound
    assert all_bound.epsilon.sd == pytest.approx(gum.epsilon.standard_uncertainty, rel=0.10)
    assert all_bound.K.sd == pytest.approx(gum.K.standard_uncertainty, rel=0.10)
    # And the means agree to within the second-order terms (~1e-4 relative).
    assert all_bound.epsilon.mean == pytest.approx(gum.epsilon.value, rel=1e-3)
    assert all_bound.K.mean == pytest.approx(gum.K.value, rel=1e-3)


def test_all_bound_bias_matches_the_bound_fraction_derivation(tubes_plan):
    # Hand derivation (issue 4, "Done when"): the standards hold only a fraction f of the
    # limiting reagent as FeSCN2+, so the curve through the origin gives eps_all_bound =
    # eps * f_bar, with f_bar = sum(L^2 f) / sum(L^2) (the least-squares weight of each
    # standard). Each test's product is then read as x / f_bar instead of x, and
    # K_i = (x/f_bar) / ((M - x/f_bar)(L - x/f_bar)), averaged over the tests.
    # Stray light is set to 0 for this check: it bends every reading on its own and is not
    # part of this derivation (the next test includes it). The recipes are the default plan's.
    inputs = dataclasses.replace(
        tubes_plan.inputs,
        instrument=dataclasses.replace(tubes_plan.inputs.instrument, stray_light=0.0),
    )
    standards = tubes_plan.by_role("standard")
    tests = tubes_plan.by_role("test")
    l_std = np.array([m.initial_M["SCN-"] for m in standards])
    f = np.array([_complex_M(m.initial_M["Fe3+"], m.initial_M["SCN-"]) for m in standards])
    f = f / l_std
    f_bar = (l_std**2 * f).sum() / (l_std**2).sum()
    assert 0.95 < f_bar < 0.97  # about 96 % bound: the assumption is 4 % off
    k_hand = []
    for m in tests:
        iron, thiocyanate = m.initial_M["Fe3+"], m.initial_M["SCN-"]
        x = _complex_M(iron, thiocyanate) / f_bar
        k_hand.append(x / ((iron - x) * (thiocyanate - x)))
    expected = float(np.mean(k_hand))

    sim = simulate(
        inputs, tubes_plan.mixtures, trials=5000, rng=np.random.default_rng(11), global_fit=False
    )
    # Within the Monte Carlo error: 3 standard errors of the mean (~0.04 L/mol here), plus
    # the mean's second-order term, which a first-order derivation leaves out: of order
    # (u(K)/K)^2 ~ 1e-4 relative (measured ~0.015 L/mol with 1e5 trials), allowed as 2e-4.
    tolerance = 3 * sim.all_bound.K.standard_error + SECOND_ORDER * expected
    assert abs(sim.all_bound.K.mean - expected) <= tolerance
    assert sim.K_bias_from_assumption == pytest.approx(sim.all_bound.K.mean / K1 - 1.0)
    # positive, and larger than the standards' 4 % shortfall alone (the 1:1 K amplifies it)
    assert sim.K_bias_from_assumption > 1.0 - f_bar


def test_all_bound_bias_with_stray_light(tubes_plan):
    # The same derivation on the unmodified default plan, with every reading passed through
    # the stray-light response A_obs = log10((1 + s)/(10^-A + s)) (Skoog, Holler and Crouch,
    # Principles of Instrumental Analysis, 7th ed., 2017, section 13B-2, from memory) before
    # the all-bound analysis: eps = sum(L A_obs) / (b sum L^2), x = A_obs / (b eps).
    s = tubes_plan.inputs.instrument.stray_light
    b = tubes_plan.inputs.instrument.path_length_cm

    def observed(absorbance):
        return math.log10((1 + s) / (10**-absorbance + s))

    standards = tubes_plan.by_role("standard")
    l_std = np.array([m.initial_M["SCN-"] for m in standards])
    a_std = np.array(
        [
            observed(b * EPSILON * _complex_M(m.initial_M["Fe3+"], m.initial_M["SCN-"]))
            for m in standards
        ]
    )
    eps_all_bound = (l_std * a_std).sum() / (b * (l_std**2).sum())
    k_hand = []
    for m in tubes_plan.by_role("test"):
        iron, thiocyanate = m.initial_M["Fe3+"], m.initial_M["SCN-"]
        x = observed(b * EPSILON * _complex_M(iron, thiocyanate)) / (b * eps_all_bound)
        k_hand.append(x / ((iron - x) * (thiocyanate - x)))
    sim = simulate(
        tubes_plan.inputs,
        tubes_plan.mixtures,
        trials=5000,
        rng=np.random.default_rng(12),
        global_fit=False,
    )
    # Tolerances as in the previous test: 3 standard errors plus the second-order term.
    expected = float(np.mean(k_hand))
    tolerance = 3 * sim.all_bound.K.standard_error + SECOND_ORDER * expected
    assert abs(sim.all_bound.K.mean - expected) <= tolerance
    tolerance = 3 * sim.all_bound.epsilon.standard_error + SECOND_ORDER * eps_all_bound
    assert abs(sim.all_bound.epsilon.mean - eps_all_bound) <= tolerance


def test_exact_analysis_recovers_true_constants(default_simulation):
    # The global fit uses the full equilibrium model, so it is unbiased to first order: the
    # true K (98 L/mol) and eps (4700) lie within one SD of its mean (issue 4, "Done when").
    global_fit = default_simulation.global_fit
    assert default_simulation.global_fit_failed == 0
    assert abs(global_fit.K.mean - K1) <= global_fit.K.sd
    assert abs(global_fit.epsilon.mean - EPSILON) <= global_fit.epsilon.sd
    # Tighter: within 3 Monte Carlo standard errors plus the second-order term.
    assert global_fit.K.mean == pytest.approx(
        K1, abs=3 * global_fit.K.standard_error + SECOND_ORDER * K1
    )


def test_vectorised_exact_fit_matches_least_squares(tubes_plan):
    # The reference is scipy.optimize.least_squares on the direct (untabulated) model.
    sim = simulate(tubes_plan.inputs, tubes_plan.mixtures, trials=3, rng=np.random.default_rng(5))
    for trial in range(3):
        readings = sim.trial_readings[trial]
        eps, k = global_fit_least_squares(tubes_plan.inputs, tubes_plan.mixtures, readings)
        assert sim.epsilon_global_fit[trial] == pytest.approx(eps, rel=1e-7)
        assert sim.K_global_fit[trial] == pytest.approx(k, rel=1e-7)


def test_same_seed_same_result(tubes_plan):
    def run(seed):
        return simulate(
            tubes_plan.inputs,
            tubes_plan.mixtures,
            trials=300,
            rng=np.random.default_rng(seed),
        )

    first, second, other = run(7), run(7), run(8)
    assert np.array_equal(first.K_all_bound, second.K_all_bound)
    assert np.array_equal(first.K_global_fit, second.K_global_fit, equal_nan=True)
    assert first.all_bound == second.all_bound
    assert not np.array_equal(first.K_all_bound, other.K_all_bound)


def test_progress_reports_every_chunk(tubes_plan):
    calls = []
    simulate(
        tubes_plan.inputs,
        tubes_plan.mixtures,
        trials=CHUNK_TRIALS + 10,
        rng=np.random.default_rng(1),
        progress=lambda done, total: calls.append((done, total)),
        global_fit=False,
    )
    assert calls == [(CHUNK_TRIALS, CHUNK_TRIALS + 10), (CHUNK_TRIALS + 10, CHUNK_TRIALS + 10)]


def test_per_mixture_ranges(tubes_plan, default_simulation):
    sim = default_simulation
    assert sim.mixture_ids == tuple(m.id for m in tubes_plan.mixtures)
    for mixture, summary in zip(tubes_plan.mixtures, sim.readings, strict=True):
        low, high = summary.ci95
        assert low < mixture.absorbance < high
    assert len(sim.K_per_test) == len(tubes_plan.by_role("test"))


def test_piston_and_flask_plans_run(piston_plan, flask_plan):
    for plan in (piston_plan, flask_plan):
        sim = simulate(plan.inputs, plan.mixtures, trials=2000, rng=np.random.default_rng(3))
        gum = propagate(plan.inputs, plan.mixtures)
        # 2000 trials: the SD carries ~1.6 % Monte Carlo error; the 10 % holds.
        assert sim.all_bound.K.sd == pytest.approx(gum.K.standard_uncertainty, rel=0.10)
        assert sim.global_fit_failed == 0


def test_coverage_interval_rule():
    # JCGM 101:2008, 7.7.1-7.7.2 (from memory): M = 100, p = 0.95 gives q = 95 and
    # (M - q)/2 = 2.5, not an integer, so r = int((M - q + 1)/2) = 3: [y_(3), y_(98)].
    values = np.arange(1.0, 101.0)[::-1]
    assert coverage_interval(values) == (3.0, 98.0)
    # M = 200: q = 190, r = 5: [y_(5), y_(195)].
    assert coverage_interval(np.arange(1.0, 201.0)) == (5.0, 195.0)


def test_coverage_interval_of_a_normal_sample():
    # For a normal distribution the 95 % interval is mean -/+ 1.960 sd (JCGM 100:2008,
    # Table G.1); 1e5 draws put each end within ~0.01 sd of it.
    values = np.random.default_rng(0).standard_normal(100_000)
    low, high = coverage_interval(values)
    assert low == pytest.approx(-1.960, abs=0.03)
    assert high == pytest.approx(1.960, abs=0.03)


def test_too_few_trials_is_refused(tubes_plan):
    with pytest.raises(InvalidInputError, match="trials"):
        simulate(tubes_plan.inputs, tubes_plan.mixtures, trials=1, rng=np.random.default_rng(0))


# Issue 9: --trials 1e9 tried to allocate 82 GiB. The trial count is bounded, and so is the
# memory of trials x mixtures; both are refused before anything is allocated.


def test_largest_trials_follows_the_memory_budget():
    # Hand count: 8 bytes x (211 mixtures + 100 tests + 4 kept + 6 working) = 2568 bytes a
    # trial; 2 GiB / 2568 bytes = 836 247 trials (integer part).
    assert MEMORY_BUDGET_BYTES == 2 * 1024**3
    assert largest_trials(211, 100) == 836_247
    assert largest_trials(11, 5) == MAX_TRIALS == 10_000_000


def test_the_command_line_bound_is_the_core_bound():
    from planner import cli

    assert cli._MAX_TRIALS == MAX_TRIALS


@pytest.mark.parametrize("trials", [MAX_TRIALS + 1, 10**9, 10**30])
def test_too_many_trials_are_refused_at_once(tubes_plan, trials):
    with pytest.raises(InvalidInputError, match=r"^trials: too many trials") as info:
        simulate(
            tubes_plan.inputs, tubes_plan.mixtures, trials=trials, rng=np.random.default_rng(0)
        )
    assert f"at most {MAX_TRIALS} trials" in str(info.value)


def test_trials_beyond_the_memory_budget_of_a_big_plan_are_refused(tubes_plan):
    # The default plan with its test mixtures repeated 40 times: 211 mixtures, 205 tests.
    tests = [m for m in tubes_plan.mixtures if m.role == "test"]
    many = list(tubes_plan.mixtures) + [
        dataclasses.replace(m, id=f"{m.id}-{i}") for i in range(40) for m in tests
    ]
    largest = largest_trials(len(many), 205)
    assert largest < MAX_TRIALS
    with pytest.raises(InvalidInputError, match="GiB") as info:
        simulate(tubes_plan.inputs, many, trials=largest + 1, rng=np.random.default_rng(0))
    assert f"at most {largest} trials" in str(info.value)
