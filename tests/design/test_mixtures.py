"""The test-mixture optimiser `choose_tests` against exhaustive enumeration, on small shelves.

Outside reference: exhaustive enumeration. On a shelf small enough to list every set of the
requested size (``itertools.combinations``), the best admissible set is found by brute force,
each set scored with the same objective callable the optimiser is given. The admissibility
rules are the documented ones (docs/methods.md, "Informative test mixtures"), written out here
from the plan's numbers, not taken from the optimiser:

- a candidate is eligible when its reading lies inside the absorbance window at least two
  reading SDs from each end and its bound fraction inside ``design.bound_fraction_range``;
- the set spans at least ``design.bound_fraction_span`` of bound fraction;
- its members are at least span/(2(n - 1)) apart in bound fraction.

The chemistry is the default's without its constant medium (iron(III) thiocyanate, K1 = 98, K2 = 7
L/mol from de Berg, Maeder and Clifford, Inorganica Chimica Acta 445 (2016) 155-159) with an
invented tiny shelf of 1 mL and 2 mL transfer pipettes, which gives a few hundred candidates.
"""

from __future__ import annotations

import itertools
import tomllib
from pathlib import Path

import numpy as np
import pytest

from planner.design.candidates import candidate_set
from planner.design.mixtures import (
    choose_tests,
    first_order_relative_u_K,
    global_fit_objective,
    mean_K_objective,
)
from planner.design.standards import choose_standards
from planner.planfile import plan_from_mapping

ROOT = Path(__file__).resolve().parents[2]
# The default's chemistry and stocks without its constant medium, for the all-bound analysis.
DEFAULT = ROOT / "recipes" / "iron-thiocyanate-tubes.toml"

# Invented tiny shelf: 1 mL and 2 mL transfer pipettes, three of each.
TINY_SHELF = [
    {"kind": "transfer-pipette", "volume_mL": 1, "class": "A", "count": 3},
    {"kind": "transfer-pipette", "volume_mL": 2, "class": "A", "count": 3},
]

# Relative tolerance of "never worse than exhaustive": rounding only (the two sides evaluate
# the same callable on index arrays that may be ordered differently).
REL = 1e-9


def _instance(tests: int):
    """Inputs, candidates, standards and the default objective for the tiny shelf."""
    data = tomllib.loads(DEFAULT.read_text(encoding="utf-8"))
    data["glassware"] = TINY_SHELF
    data["design"]["tests"] = tests
    inputs = plan_from_mapping(data)
    candidates = candidate_set(inputs)
    standards = choose_standards(inputs, candidates)
    exclude = (standards.blank, *standards.standards)
    # u(eps)/eps of a curve through the origin from reading noise alone,
    # sigma_A / sqrt(sum A_k^2) over the standards' Beer-Lambert readings (docs/methods.md,
    # from eps = sum c A / (b sum c^2) and JCGM 100:2008, eq. 10); written out here.
    readings = candidates.evaluation.true_absorbance[list(standards.standards)]
    epsilon_u = inputs.instrument.absorbance_sd / float(np.sqrt(np.sum(readings**2)))
    return inputs, candidates, exclude, mean_K_objective(epsilon_u)


@pytest.fixture(scope="module", params=[2, 3], ids=lambda n: f"{n}-tests")
def tiny(request):
    return _instance(request.param)


def _eligible(inputs, candidates, exclude=(), allowed=None):
    """Eligibility from the documented rules (window with a 2 u(A) margin, u(A) each
    candidate's screening reading uncertainty, docs/methods.md section 7; range; the top
    tenth of the window kept free when at least ``design.tests`` candidates remain below it)."""
    ev = candidates.evaluation
    low, high = inputs.instrument.absorbance_window
    margin = 2.0 * candidates.u_absorbance
    f_low, f_high = inputs.design.bound_fraction_range
    eligible = (
        (ev.absorbance >= low + margin)
        & (ev.absorbance <= high - margin)
        & (ev.bound_fraction >= f_low)
        & (ev.bound_fraction <= f_high)
    )
    eligible[list(exclude)] = False
    if allowed is not None:
        eligible &= allowed
    below = eligible & (ev.absorbance <= high - np.maximum(margin, 0.1 * (high - low)))
    return below if below.sum() >= inputs.design.tests else eligible


def _admissible(inputs, fractions):
    """Span and separation rules for rows of bound fractions, shape (sets, n)."""
    n = fractions.shape[1]
    if n == 1:
        return np.ones(fractions.shape[0], dtype=bool)
    span = inputs.design.bound_fraction_span
    gap = span / (2 * (n - 1))
    ordered = np.sort(fractions, axis=1)
    return (ordered[:, -1] - ordered[:, 0] >= span) & (
        np.min(np.diff(ordered, axis=1), axis=1) >= gap
    )


def _exhaustive(inputs, candidates, pool, count, objective):
    """Best admissible set of `count` from `pool` by brute force (the independent reference).

    Returns (value, members, number of admissible sets); value is inf when no set is
    admissible.
    """
    combos = np.array(list(itertools.combinations(pool.tolist(), count)), dtype=np.int64)
    combos = combos.reshape(-1, count)
    ok = _admissible(inputs, candidates.evaluation.bound_fraction[combos])
    best_value, best_members = np.inf, None
    for members in combos[ok]:
        value = objective(inputs, candidates, members)
        if value < best_value:
            best_value, best_members = value, members
    return best_value, best_members, int(ok.sum())


def _assert_inside(inputs, candidates, chosen):
    ev = candidates.evaluation
    low, high = inputs.instrument.absorbance_window
    margin = 2.0 * inputs.instrument.absorbance_sd
    f_low, f_high = inputs.design.bound_fraction_range
    for i in chosen:
        assert low + margin <= ev.absorbance[i] <= high - margin
        assert low <= ev.absorbance[i] <= high
        assert f_low <= ev.bound_fraction[i] <= f_high


# ---------------------------------------------------------------------------------------------
# (a) never worse than exhaustive search
# ---------------------------------------------------------------------------------------------


def _objective(name, inputs, candidates, exclude, mean_k):
    if name == "mean-K":
        return mean_k
    if name == "global-fit":
        return global_fit_objective(inputs, candidates, exclude[1:], exclude[0])
    return first_order_relative_u_K


@pytest.mark.parametrize("objective_name", ["mean-K", "first-order", "global-fit"])
def test_never_worse_than_exhaustive_search(tiny, objective_name):
    inputs, candidates, exclude, mean_k = tiny
    objective = _objective(objective_name, inputs, candidates, exclude, mean_k)
    count = inputs.design.tests
    eligible = _eligible(inputs, candidates, exclude)
    pool = np.flatnonzero(eligible)
    best, best_members, sets = _exhaustive(inputs, candidates, pool, count, objective)
    assert sets > 0  # the instance admits a set, so the comparison means something
    result = choose_tests(inputs, candidates, exclude=exclude, objective=objective)
    chosen = np.array(result.tests, dtype=np.int64)
    assert len(chosen) == count
    # The reported value is the objective of the set returned.
    assert result.objective == pytest.approx(objective(inputs, candidates, chosen), rel=REL)
    # The chosen set obeys the same rules, so it is one of the sets enumerated ...
    assert _admissible(inputs, candidates.evaluation.bound_fraction[chosen][None, :])[0]
    # ... and none of them is better.
    assert result.objective <= best * (1 + REL), (result.tests, best_members)


@pytest.mark.parametrize(("tests", "keep", "seed"), [(4, 22, 1), (4, 22, 2), (5, 20, 3)])
def test_never_worse_than_exhaustive_search_on_a_random_allowed_subset(tests, keep, seed):
    # (a) and (d) together: a random mask of `keep` eligible candidates makes sets of four
    # and five small enough to enumerate; the optimiser may use only the mask.
    inputs, candidates, exclude, objective = _instance(tests)
    eligible = _eligible(inputs, candidates, exclude)
    rng = np.random.default_rng(seed)
    pool = np.sort(rng.choice(np.flatnonzero(eligible), size=keep, replace=False))
    allowed = np.zeros(candidates.size, dtype=bool)
    allowed[pool] = True
    best, best_members, sets = _exhaustive(inputs, candidates, pool, tests, objective)
    assert sets > 0
    result = choose_tests(inputs, candidates, exclude=exclude, objective=objective, allowed=allowed)
    assert len(result.tests) == tests
    assert set(result.tests) <= set(pool.tolist())
    assert result.objective <= best * (1 + REL), (result.tests, best_members)


# ---------------------------------------------------------------------------------------------
# (b) window, range and span
# ---------------------------------------------------------------------------------------------


def test_chosen_tests_lie_inside_window_and_range_and_span_enough(tiny):
    inputs, candidates, exclude, objective = tiny
    result = choose_tests(inputs, candidates, exclude=exclude, objective=objective)
    fractions = candidates.evaluation.bound_fraction[list(result.tests)]
    _assert_inside(inputs, candidates, result.tests)
    # The exhaustive test above shows this instance admits a set spanning the span.
    assert np.ptp(fractions) >= inputs.design.bound_fraction_span
    assert result.span == pytest.approx(float(np.ptp(fractions)), rel=1e-12)
    # Documented order: ascending bound fraction.
    assert list(fractions) == sorted(fractions)


def test_eligible_count_matches_the_documented_rules(tiny):
    inputs, candidates, exclude, objective = tiny
    eligible = _eligible(inputs, candidates, exclude)
    result = choose_tests(inputs, candidates, exclude=exclude, objective=objective)
    assert result.eligible == int(eligible.sum())


def test_span_falls_short_only_when_the_allowed_candidates_cannot_span_it():
    # Allow only eligible candidates whose bound fractions lie in a band narrower than the
    # span: no admissible set exists, so the result reports the span it reached (below the
    # requested one) and still keeps every member inside the window and the range.
    inputs, candidates, exclude, objective = _instance(3)
    eligible = _eligible(inputs, candidates, exclude)
    fraction = candidates.evaluation.bound_fraction
    span = inputs.design.bound_fraction_span
    centre = float(np.median(fraction[eligible]))
    band = eligible & (np.abs(fraction - centre) <= 0.4 * span)
    assert band.sum() >= 3
    best, _, sets = _exhaustive(inputs, candidates, np.flatnonzero(band), 3, objective)
    assert sets == 0
    assert best == np.inf
    result = choose_tests(inputs, candidates, exclude=exclude, objective=objective, allowed=band)
    assert set(result.tests) <= set(np.flatnonzero(band).tolist())
    _assert_inside(inputs, candidates, result.tests)
    assert result.span == pytest.approx(float(np.ptp(fraction[list(result.tests)])), rel=1e-12)
    assert result.span < span


# ---------------------------------------------------------------------------------------------
# (c) excluded candidates
# ---------------------------------------------------------------------------------------------


def test_standards_and_blank_are_never_chosen(tiny):
    # Here the standards bind about 96 % of the limiting reagent, above the range, so the
    # range alone keeps them out; the next test excludes eligible candidates, a sharper check.
    inputs, candidates, exclude, objective = tiny
    result = choose_tests(inputs, candidates, exclude=exclude, objective=objective)
    assert not set(result.tests) & set(exclude)


def test_excluding_the_best_set_moves_the_search_to_the_next_best(tiny):
    # Excluding the optimum's members as well: none of them may come back, and the new set is
    # again the exhaustive optimum of what is left.
    inputs, candidates, exclude, objective = tiny
    first = choose_tests(inputs, candidates, exclude=exclude, objective=objective)
    more = (*exclude, *first.tests)
    second = choose_tests(inputs, candidates, exclude=more, objective=objective)
    assert not set(second.tests) & set(more)
    eligible = _eligible(inputs, candidates, more)
    best, _, sets = _exhaustive(
        inputs, candidates, np.flatnonzero(eligible), inputs.design.tests, objective
    )
    assert sets > 0
    assert second.objective <= best * (1 + REL)
    assert second.objective >= first.objective * (1 - REL)


def test_an_excluded_candidate_that_would_be_best_alone_is_skipped():
    # With one test the best set is the single eligible candidate of lowest objective
    # (found here by scoring each in turn); excluding it must give the second best.
    inputs, candidates, exclude, objective = _instance(1)
    eligible = _eligible(inputs, candidates, exclude)
    pool = np.flatnonzero(eligible)
    scores = np.array([objective(inputs, candidates, np.array([i])) for i in pool])
    order = pool[np.argsort(scores, kind="stable")]
    result = choose_tests(inputs, candidates, exclude=exclude, objective=objective)
    assert result.tests == (int(order[0]),)
    result = choose_tests(
        inputs, candidates, exclude=(*exclude, int(order[0])), objective=objective
    )
    assert result.tests == (int(order[1]),)


# ---------------------------------------------------------------------------------------------
# (d) allowed mask
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("seed", [11, 12, 13])
def test_allowed_mask_is_respected(tiny, seed):
    inputs, candidates, exclude, objective = tiny
    rng = np.random.default_rng(seed)
    allowed = rng.random(candidates.size) < 0.5
    result = choose_tests(inputs, candidates, exclude=exclude, objective=objective, allowed=allowed)
    assert result.tests
    assert all(allowed[i] for i in result.tests)
    eligible = _eligible(inputs, candidates, exclude, allowed)
    assert result.eligible == int(eligible.sum())


def test_fewer_allowed_candidates_than_asked_gives_all_of_them():
    # Documented: fewer tests than asked when fewer eligible candidates exist.
    inputs, candidates, exclude, objective = _instance(3)
    eligible = _eligible(inputs, candidates, exclude)
    two = np.flatnonzero(eligible)[:2]
    allowed = np.zeros(candidates.size, dtype=bool)
    allowed[two] = True
    result = choose_tests(inputs, candidates, exclude=exclude, objective=objective, allowed=allowed)
    assert sorted(result.tests) == sorted(two.tolist())
    assert result.eligible == 2


def test_nothing_allowed_gives_no_tests():
    inputs, candidates, exclude, objective = _instance(3)
    allowed = np.zeros(candidates.size, dtype=bool)
    result = choose_tests(inputs, candidates, exclude=exclude, objective=objective, allowed=allowed)
    assert result.tests == ()
    assert result.eligible == 0
    assert result.objective == np.inf


def test_global_fit_objective_is_the_sandwich_covariance_written_out(tiny):
    # u(K)/K = ln 10 sqrt([(J^T J)^-1 J^T S J (J^T J)^-1]_{lgK,lgK}) of the unweighted least
    # squares fit, computed here with numpy.linalg.inv on the set's explicit rows.
    inputs, candidates, exclude, _ = tiny
    objective = global_fit_objective(inputs, candidates, exclude[1:], exclude[0])
    result = choose_tests(inputs, candidates, exclude=exclude, objective=objective)
    rows = np.array([*exclude[1:], *result.tests])
    jacobian = objective.rows[rows]
    covariance_readings = np.diag(candidates.u_absorbance[rows] ** 2)
    inverse = np.linalg.inv(jacobian.T @ jacobian)
    sandwich = inverse @ jacobian.T @ covariance_readings @ jacobian @ inverse
    expected = np.log(10.0) * np.sqrt(sandwich[1, 1])
    assert result.objective == pytest.approx(expected, rel=1e-9)
