"""Per-section recipe variants: no test recipe in two sections, each verified, equal difficulty.

An instructor running several sections gives each its own recipes, so answers cannot be
copied between sections, while every section is judged by the same yardstick.

Rules
-----
- **Distinct**: no test recipe appears in two sections, whenever the shelf allows it. A
  recipe is the list of (stock, volume) pairs of one mixture. Standards and the blank may be
  the same in every section: the answers a class copies are the test mixtures' K, while a
  shared standard curve is normal practice (common practice), so only the tests are varied.
- **Valid**: every section's plan passes :func:`planner.verify.verify_plan` with no failed
  check.
- **Equal difficulty**: the sections' design objectives (what their tests minimise: the
  predicted root mean squared error of K, bias included, under the MSE criterion) and their
  u(K)/K (what each answer key prints, :func:`relative_u_K`) each stay within
  ``_DIFFICULTY_BAND`` of each other: the largest is at most 1.2 times the smallest, so any
  two sections are within +/-20 % of each other on both. Every section uses the first
  section's analysis, so the numbers are the same yardstick.

Construction
------------
The first section is the plan ``planner plan`` makes. Each next section is designed from the
shared candidate set with every candidate whose recipe is already some section's test taken
out of its ``allowed`` mask, so its tests differ from all earlier sections' by construction;
a random share of the remaining test candidates (drawn from the one generator of the seed) is
left out as well, so another seed gives other sets. When no such section of equal
difficulty can be found (the shelf has run out of test recipes), the remaining sections may
share single test recipes with earlier ones but never their whole test set (the
``section-distinctness`` check of the combined plan then warns and names the sections).

How many sections the shelf allows with fully distinct test sets is bounded above by the
number of distinct eligible test recipes divided by the tests per section
(:func:`distinctness_check` states both that bound and the number achieved).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Sequence

import numpy as np
from numpy.typing import NDArray

from planner.design.candidates import CandidateSet, candidate_set
from planner.design.mixtures import eligible_for_tests
from planner.design.plan import hold_within_stock
from planner.errors import InvalidInputError
from planner.inputs import PlanInputs
from planner.records import record
from planner.result import Check, Plan, Role

__all__ = [
    "DISTINCTNESS_CHECK",
    "MAX_SECTIONS",
    "PlanMaker",
    "SharedTest",
    "VariantSet",
    "design_variants",
    "distinctness_check",
    "eligible_tests",
    "recipe_key",
    "shared_tests",
]

#: Makes one verified, predicted plan from the inputs, the shared candidates and an optional
#: mask of allowed candidates (:func:`planner.pipeline.design_plan`, passed in by the
#: pipeline so that this package needs neither verification nor prediction).
PlanMaker = Callable[[PlanInputs, CandidateSet, NDArray[np.bool_] | None], Plan]

#: Most sections one call designs: each is a full design (about 0.2 s) with its own folder of
#: sheets (about 0.3 MB), and up to _TRIES_PER_SECTION draws are made per section, so 100
#: sections take tens of seconds to a few minutes. No course runs more sections of one lab;
#: a count of a million ran for days (found by fuzzing).
MAX_SECTIONS = 100

#: Name of the combined plan's check that no test recipe appears in two sections.
DISTINCTNESS_CHECK = "section-distinctness"

# Largest section objective / smallest accepted (any two within +/-20 % of each other).
_DIFFICULTY_BAND = 1.2
# Share of the still unused test candidates a section with distinct tests may draw from: the
# seed's variety. Lower gives more variety but harder sections sooner; with 0.8, 29 of 30
# sections of the default plan have tests of their own inside the band on both u(K)/K and
# the objective (tests/benchmarks/variants.py, seed 1; 0.7 and 0.9 give 30 there, and 29
# and 28 of 30 on recipes/iron-thiocyanate-tubes.toml).
_DISTINCT_KEEP_FRACTION = 0.8
# Random draws tried for the next section with distinct tests before the unmasked one (the
# best remaining tests); when that too fails the shelf has run out of distinct sections.
_DISTINCT_DRAWS = 2
# Share of test candidates each section that may share test recipes draws from.
_KEEP_FRACTION = 0.5
# Draws tried per requested section that may share test recipes, before giving up.
_TRIES_PER_SECTION = 8
# Volumes closer than this are the same volume [mL] (far below any device's step).
_SAME_VOLUME_mL = 1e-9

RecipeKey = tuple[tuple[tuple[str, float], ...], ...]


@record
class SharedTest:
    """Two sections with a test recipe in common.

    Attributes
    ----------
    first, second
        Section numbers, from 1, ``first < second``.
    first_test, second_test
        The test's id in each section (e.g. ``T1``).
    """

    first: int
    second: int
    first_test: str
    second_test: str


@record
class VariantSet:
    """The variants found.

    Attributes
    ----------
    plans
        One plan per section (its session has ``sections = 1``), in section order.
    requested
        Sections asked for.
    reason
        Empty when every requested section was found; otherwise why not, and what would
        allow more.
    objectives
        Each section's design objective (predicted relative SD of mean K) [unitless].
    combined
        A plan standing for every section together (the whole session's totals and
        preparation, and its checks), filled by :func:`planner.pipeline.design_variants`.
    eligible_recipes
        Distinct recipes the shelf can make that are eligible as tests (absorbance window
        with its margin, bound-fraction range) [unitless].
    tests_per_section
        Test mixtures per section (``design.tests``).
    distinct_sections
        Sections made with test recipes no other of them uses (the first ones, in order).
    """

    plans: tuple[Plan, ...]
    requested: int
    reason: str
    objectives: tuple[float, ...]
    combined: Plan | None = None
    eligible_recipes: int = 0
    tests_per_section: int = 1
    distinct_sections: int = 0

    @property
    def complete(self) -> bool:
        """True when every requested section has a variant."""
        return len(self.plans) == self.requested

    @property
    def allowed_sets(self) -> int:
        """Most sections with pairwise-distinct test sets the shelf allows (an upper bound:
        eligible test recipes // tests per section)."""
        return self.eligible_recipes // max(self.tests_per_section, 1)


def _recipe(mixture_additions: Sequence[tuple[str, float]]) -> tuple[tuple[str, float], ...]:
    return tuple(sorted((stock, round(volume_mL, 6)) for stock, volume_mL in mixture_additions))


def recipe_key(plan: Plan, role: Role = "test") -> RecipeKey:
    """The recipes of one role as a comparable, order-free key."""
    return tuple(
        sorted(
            _recipe([(a.stock, a.volume_mL) for a in m.additions if a.volume_mL > 0])
            for m in plan.by_role(role)
        )
    )


def eligible_tests(inputs: PlanInputs, candidates: CandidateSet) -> NDArray[np.bool_]:
    """Candidates eligible as test mixtures, shape (n,): the rule of
    :func:`planner.design.mixtures.choose_tests` (:func:`planner.design.mixtures.
    eligible_for_tests`), so the count of distinct sets the shelf allows is the designs' own."""
    return eligible_for_tests(inputs, candidates)[0]


def _distinct_rows(volumes_mL: NDArray[np.float64]) -> int:
    """Number of distinct recipes (rows of stock volumes) [unitless]."""
    if not volumes_mL.shape[0]:
        return 0
    grid = np.round(volumes_mL / _SAME_VOLUME_mL).astype(np.int64)
    return int(np.unique(grid, axis=0).shape[0])


def _same_recipes(candidates: CandidateSet, plan: Plan) -> NDArray[np.bool_]:
    """Candidates whose recipe (stock volumes) is one of the plan's tests, shape (n,)."""
    column = {stock: j for j, stock in enumerate(candidates.stock_ids)}
    mask = np.zeros(candidates.size, dtype=np.bool_)
    for mixture in plan.by_role("test"):
        row = np.zeros(len(candidates.stock_ids))
        for addition in mixture.additions:
            if addition.stock in column:
                row[column[addition.stock]] += addition.volume_mL
        # Column by column, among the candidates that still match (the same test as on
        # every column at once, on fewer rows).
        rows = np.arange(candidates.size)
        for j, volume in enumerate(row):
            rows = rows[np.abs(candidates.volumes_mL[rows, j] - volume) <= _SAME_VOLUME_mL]
        mask[rows] = True
    return mask


def shared_tests(plans: Sequence[Plan]) -> tuple[SharedTest, ...]:
    """Every pair of sections that share a test recipe (first shared test of each pair).

    Parameters
    ----------
    plans
        The sections' plans, section 1 first.

    Returns
    -------
    tuple of SharedTest
        In order of the first section, then the second; empty when no test recipe appears in
        two sections.
    """
    recipes = [
        {
            _recipe([(a.stock, a.volume_mL) for a in m.additions if a.volume_mL > 0]): m.id
            for m in plan.by_role("test")
        }
        for plan in plans
    ]
    found: list[SharedTest] = []
    for i, first in enumerate(recipes):
        for j in range(i + 1, len(recipes)):
            common = [key for key in first if key in recipes[j]]
            if common:
                key = min(common, key=lambda k: first[k])
                found.append(SharedTest(i + 1, j + 1, first[key], recipes[j][key]))
    return tuple(found)


def distinctness_check(found: VariantSet) -> Check:
    """The ``section-distinctness`` check of a whole session.

    Passes when no test recipe appears in two sections; warns, naming the first pair of
    sections that share one and how many distinct sets the shelf allows, otherwise.
    """
    plans = found.plans
    bound = (
        f"the shelf allows {found.allowed_sets} distinct set(s) of {found.tests_per_section} "
        f"test(s) (an upper bound: {found.eligible_recipes} eligible test recipes / "
        f"{found.tests_per_section})"
    )
    pairs = shared_tests(plans)
    if not pairs:
        return Check(
            DISTINCTNESS_CHECK,
            "pass",
            f"all {len(plans)} section(s) have test recipes of their own (no test recipe "
            f"appears in two sections); {bound}; standards and the blank may be the same in "
            "every section (common practice)",
        )
    first = pairs[0]
    more = f" ({len(pairs) - 1} more pair(s) share a test recipe)" if len(pairs) > 1 else ""
    if found.allowed_sets >= len(plans):
        why = (
            f"only {found.distinct_sections} of them could be made valid and within the "
            f"{_band_text()} difficulty band"
        )
    else:
        why = f"{len(plans)} sections were asked for"
    return Check(
        DISTINCTNESS_CHECK,
        "warn",
        f"{bound}, {why}: sections {first.first} and {first.second} share test "
        f"{first.first_test} recipe"
        + (
            f" ({first.second_test} in section {first.second})"
            if first.second_test != first.first_test
            else ""
        )
        + f"{more}; {_own_sections(found.distinct_sections)}. "
        "Finer glassware (a buret or graduated pipette), more stocks at other concentrations, "
        "a wider design.bound_fraction_range or fewer tests allow more distinct sets",
    )


def _own_sections(count: int) -> str:
    """Which sections have test recipes of their own (the first ``count``), in words."""
    if count <= 1:
        return "only section 1 has test recipes of its own"
    return f"sections 1 to {count} have test recipes of their own"


def _band_text() -> str:
    return f"+/-{100 * (_DIFFICULTY_BAND - 1):.0f} %"


def relative_u_K(plan: Plan) -> float | None:
    """u(K)/K of the analysis the plan is designed for, as its answer key prints it
    (:attr:`planner.result.Plan.expected_K`), or None when the plan gives none [unitless]."""
    expected = plan.expected_K
    return expected[1] / expected[0] if expected is not None and expected[0] > 0 else None


class _Band:
    """Smallest and largest accepted design objective and u(K)/K, and the analysis."""

    def __init__(self, reference: Plan) -> None:
        assert reference.design_objective is not None
        self.analysis = reference.analysis
        self.objective = [reference.design_objective] * 2
        u = relative_u_K(reference)
        self.u = [u, u] if u is not None else None
        self.harder = 0

    def admits(self, plan: Plan) -> bool:
        """True when the plan is valid, uses the same analysis and keeps both bands: its
        design objective (what the tests minimise, bias included under the MSE criterion)
        and its u(K)/K (what its answer key prints) each within the band of the others'."""
        value = plan.design_objective
        if plan.failed or value is None or plan.analysis != self.analysis:
            return False
        u = relative_u_K(plan)
        if (self.u is None) != (u is None):
            return False
        for (low, high), x in ((self.objective, value), (self.u or (0.0, 0.0), u or 0.0)):
            if x and max(high, x) > _DIFFICULTY_BAND * min(low, x):
                self.harder += 1
                return False
        return True

    def take(self, plan: Plan) -> None:
        assert plan.design_objective is not None
        value, u = plan.design_objective, relative_u_K(plan)
        self.objective = [min(self.objective[0], value), max(self.objective[1], value)]
        if self.u is not None and u is not None:
            self.u = [min(self.u[0], u), max(self.u[1], u)]


def _within(
    allowed: NDArray[np.bool_], within_stock: NDArray[np.bool_] | None
) -> NDArray[np.bool_]:
    """A section's mask, held within the stock on hand when the session is short."""
    return allowed if within_stock is None else allowed & within_stock


def design_variants(
    inputs: PlanInputs,
    sections: int,
    rng: np.random.Generator,
    make_plan: PlanMaker,
    progress: Callable[[int, int], None] | None = None,
) -> VariantSet:
    """Design ``sections`` verified recipe sets of equal difficulty, no test in two sections.

    Parameters
    ----------
    inputs
        The plan; its session describes one section's benches.
    sections
        Number of sections, 1 to :data:`MAX_SECTIONS`.
    rng
        The one random generator (from the command's seed).
    make_plan
        Makes one whole plan (design, verification, prediction) from the one-section inputs,
        the shared candidates and a mask.
    progress
        Called with (sections found, sections requested) after each success.

    Returns
    -------
    VariantSet
        Possibly fewer plans than requested, with the reason; the sections with test recipes
        of their own come first.

    Raises
    ------
    InvalidInputError
        For a number of sections outside 1 to :data:`MAX_SECTIONS` (field ``sections``).
    """
    if not 1 <= sections <= MAX_SECTIONS:
        raise InvalidInputError(
            f"the number of sections must be from 1 to {MAX_SECTIONS}",
            field="sections",
            value=sections,
            hint=f"ask for at most {MAX_SECTIONS} sections",
        )
    one_section = dataclasses.replace(
        inputs, session=dataclasses.replace(inputs.session, sections=1)
    )
    candidates = candidate_set(one_section)
    # The stock on hand is for the whole session: with an excess stock short for that many
    # sections, every section is designed within the volumes that fit (as planner plan does).
    reference, within_stock, held_note = hold_within_stock(
        one_section,
        make_plan(one_section, candidates, None),
        lambda mask: make_plan(one_section, candidates, mask),
        candidates,
        sets=sections,
    )
    eligible = eligible_tests(one_section, candidates)
    if within_stock is not None:
        eligible &= within_stock
    tests_per_section = one_section.design.tests
    eligible_recipes = _distinct_rows(candidates.volumes_mL[eligible])
    if reference.failed or reference.design_objective is None:
        return VariantSet(
            plans=(),
            requested=sections,
            reason=(
                "the plan itself does not verify (see its failed checks with planner plan): "
                "fix it before asking for variants"
            ),
            objectives=(),
            eligible_recipes=eligible_recipes,
            tests_per_section=tests_per_section,
        )
    band = _Band(reference)
    plans = [reference]
    used = _same_recipes(candidates, reference)

    def accept(plan: Plan) -> None:
        band.take(plan)
        plans.append(plan)
        if progress:
            progress(len(plans), sections)

    if progress:
        progress(1, sections)
    # Sections whose tests no other section uses: the used recipes leave the mask.
    while len(plans) < sections:
        placed = None
        for draw in range(_DISTINCT_DRAWS + 1):
            left_out = used.copy()
            if draw < _DISTINCT_DRAWS:
                left_out |= eligible & (rng.random(candidates.size) >= _DISTINCT_KEEP_FRACTION)
            plan = make_plan(one_section, candidates, _within(~left_out, within_stock))
            if band.admits(plan) and not np.any(_same_recipes(candidates, plan) & used):
                placed = plan
                break
        if placed is None:
            break
        accept(placed)
        used |= _same_recipes(candidates, placed)
    distinct_sections = len(plans)

    # More sections than that: single test recipes may repeat, whole test sets may not.
    seen = {recipe_key(p) for p in plans}
    tries = 0
    while len(plans) < sections and tries < _TRIES_PER_SECTION * (sections - distinct_sections):
        tries += 1
        left_out = eligible & (rng.random(candidates.size) >= _KEEP_FRACTION)
        plan = make_plan(one_section, candidates, _within(~left_out, within_stock))
        if not band.admits(plan):
            continue
        key = recipe_key(plan)
        if key in seen:
            continue
        seen.add(key)
        accept(plan)

    reason = ""
    if len(plans) < sections:
        reason = (
            f"only {len(plans)} distinct sets of equal difficulty (predicted u(K)/K within "
            f"{_band_text()} of each other, {band.harder} draws were harder) could be found, "
            f"{distinct_sections} of them with test recipes of their own: more glassware with "
            "finer steps (a buret or graduated pipette), more stocks at other concentrations, a "
            "wider design.bound_fraction_range or fewer tests would allow more"
        )
    if held_note:
        plans = [dataclasses.replace(p, notes=(*p.notes, held_note)) for p in plans]
    return VariantSet(
        plans=tuple(plans),
        requested=sections,
        reason=reason,
        objectives=tuple(p.design_objective or 0.0 for p in plans),
        eligible_recipes=eligible_recipes,
        tests_per_section=tests_per_section,
        distinct_sections=distinct_sections,
    )
