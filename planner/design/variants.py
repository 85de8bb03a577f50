"""Per-section recipe variants: distinct, each verified, of equal difficulty.

An instructor running several sections gives each its own recipes, so answers cannot be
copied between sections, while every section is judged by the same yardstick.

Rules
-----
- **Distinct**: no two sections have the same set of test recipes (and so no two share the
  same set of standard and test recipes). A recipe is the list of (stock, volume) pairs of
  one mixture; two sections' test sets are the same only when they are recipe for recipe
  identical, in any order. Standards may coincide between sections.
- **Valid**: every section's plan passes :func:`planner.verify.verify_plan` with no failed
  check.
- **Equal difficulty**: the predicted relative SD of the mean K (the design objective) of
  every section lies within ``_DIFFICULTY_BAND`` (+20 %) of the best section's, so any two
  sections are within +/-20 % of each other.

Each section is designed from the shared candidate set with a random mask drawn from the
given seed (one numpy Generator, passed in), so a seed gives the same variants every time.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from planner.design.candidates import CandidateSet, candidate_set
from planner.errors import InvalidInputError
from planner.inputs import PlanInputs
from planner.result import Plan, Role

__all__ = ["MAX_SECTIONS", "PlanMaker", "VariantSet", "design_variants", "recipe_key"]

#: Makes one verified, predicted plan from the inputs, the shared candidates and an optional
#: mask of allowed candidates (:func:`planner.pipeline.design_plan`, passed in by the
#: pipeline so that this package needs neither verification nor prediction).
PlanMaker = Callable[[PlanInputs, CandidateSet, NDArray[np.bool_] | None], Plan]

#: Most sections one call designs: each is a full design (about 0.2 s) with its own folder of
#: sheets (about 0.3 MB), and up to _TRIES_PER_SECTION draws are made per section, so 100
#: sections take tens of seconds to a few minutes. No course runs more sections of one lab;
#: a count of a million ran for days (found by fuzzing).
MAX_SECTIONS = 100

# Best section's objective x this is the worst accepted (any two within +/-20 % of each other).
_DIFFICULTY_BAND = 1.2
# Share of candidates each section may draw from; lower gives more variety, higher stays
# closer to the single best design (chosen so 30 sections of the default stay within band).
_KEEP_FRACTION = 0.5
# Draws tried per requested section before giving up.
_TRIES_PER_SECTION = 8


@dataclass(frozen=True, slots=True)
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
    """

    plans: tuple[Plan, ...]
    requested: int
    reason: str
    objectives: tuple[float, ...]
    combined: Plan | None = None

    @property
    def complete(self) -> bool:
        """True when every requested section has a variant."""
        return len(self.plans) == self.requested


def recipe_key(plan: Plan, role: Role = "test") -> tuple[tuple[tuple[str, float], ...], ...]:
    """The recipes of one role as a comparable, order-free key."""
    return tuple(
        sorted(
            tuple(sorted((a.stock, round(a.volume_mL, 6)) for a in m.additions))
            for m in plan.by_role(role)
        )
    )


def design_variants(
    inputs: PlanInputs,
    sections: int,
    rng: np.random.Generator,
    make_plan: PlanMaker,
    progress: Callable[[int, int], None] | None = None,
) -> VariantSet:
    """Design ``sections`` distinct, verified recipe sets of equal difficulty.

    Parameters
    ----------
    inputs
        The plan; its session describes one section's benches.
    make_plan
        Makes one whole plan (design, verification, prediction) from the one-section inputs,
        the shared candidates and a mask.
    sections
        Number of sections, 1 to :data:`MAX_SECTIONS`.
    rng
        The one random generator (from the command's seed).
    progress
        Called with (sections found, sections requested) after each success.

    Returns
    -------
    VariantSet
        Possibly fewer plans than requested, with the reason.

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
    reference = make_plan(one_section, candidates, None)
    best = reference.design_objective
    plans: list[Plan] = []
    objectives: list[float] = []
    seen: set[tuple[tuple[tuple[str, float], ...], ...]] = set()
    if not reference.failed and best is not None:
        plans.append(reference)
        objectives.append(best)
        seen.add(recipe_key(reference))
        if progress:
            progress(1, sections)
    tries = 0
    rejected_difficulty = 0
    while len(plans) < sections and tries < _TRIES_PER_SECTION * sections and plans:
        tries += 1
        allowed = rng.random(candidates.size) < _KEEP_FRACTION
        plan = make_plan(one_section, candidates, allowed)
        if plan.failed or plan.design_objective is None:
            continue
        assert best is not None
        if plan.design_objective > _DIFFICULTY_BAND * best:
            rejected_difficulty += 1
            continue
        key = recipe_key(plan)
        if key in seen:
            continue
        seen.add(key)
        plans.append(plan)
        objectives.append(plan.design_objective)
        if progress:
            progress(len(plans), sections)

    reason = ""
    if len(plans) < sections:
        if not plans:
            reason = (
                "the plan itself does not verify (see its failed checks with planner plan): "
                "fix it before asking for variants"
            )
        else:
            reason = (
                f"only {len(plans)} distinct sets of equal difficulty (predicted u(K)/K within "
                f"{100 * (_DIFFICULTY_BAND - 1):.0f} % of the best, {rejected_difficulty} "
                "draws were harder) could be found: more glassware with finer steps (a buret "
                "or graduated pipette), more stocks at other concentrations, a wider "
                "design.bound_fraction_range or fewer tests would allow more"
            )
    return VariantSet(
        plans=tuple(plans), requested=sections, reason=reason, objectives=tuple(objectives)
    )
