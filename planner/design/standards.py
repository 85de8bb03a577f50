"""Calibration standards: a reagent blank plus standards spread evenly across the window.

The standards share one excess recipe (the same volumes of every reagent stock except the
limiting one), so a single reagent blank, that excess without the limiting reagent, serves
them all. For each excess recipe the standards are the candidates whose readings lie nearest
to evenly spaced targets in the absorbance window. The recipe chosen, in order of preference:

1. keeps the limiting reagent bound to within ``assumption_tolerance``;
2. gives as many standards as asked;
3. uses the fewest stocks;
4. has the lowest cost: the standards' mean miss of their targets (a fraction of the window)
   plus :data:`BOUND_WEIGHT` times the unbound share of the limiting reagent, so the standards
   both spread over the window and bind as much as the shelf allows (compared in steps of
   :data:`COST_STEP`);
5. hits the targets best, needs fewest deliveries, has the lowest predicted uncertainty.

No standard pads a stock with another that adds under
:data:`planner.design.candidates.MIN_REAGENT_SHARE` of a reagent (``CandidateSet.padded``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from planner.design._arrays import distinct_inverse
from planner.design.candidates import CandidateSet
from planner.inputs import PlanInputs
from planner.records import record

__all__ = ["StandardsChoice", "StandardsMemo", "absorbance_targets", "choose_standards"]

#: Weight of the unbound share (1 - f) of the limiting reagent against the standards' mean
#: miss of their targets (a fraction of the window) in the standards' cost. The all-bound K
#: errs by about twice the unbound share (the default plan: 4 % unbound, K +7.5 %), so a
#: recipe that binds 1 % more is worth standards 2 % of the window further from an even
#: series, and no more (common practice: a wide, even calibration and a bound limiting
#: reagent both matter).
BOUND_WEIGHT = 2.0
#: Step in which costs are compared [unitless]: closer costs count as equal, and fewer
#: deliveries and lower uncertainty decide.
COST_STEP = 0.005
# Groups examined in full after ranking by attainable bound fraction (enough to contain every
# distinct excess level of a shelf, and bounded so the search stays in milliseconds).
_GROUPS_EXAMINED = 150


@record
class StandardsChoice:
    """The chosen blank and standards, as indices into the candidate set they were chosen
    from (:class:`planner.design.candidates.CandidateSet`).

    Attributes
    ----------
    blank
        Candidate index of the reagent blank, or -1 when no blank recipe is deliverable.
    standards
        Candidate indices of the standards, ascending absorbance.
    targets
        Absorbance targets the standards aimed at [unitless].
    tolerance_met
        Every standard's bound fraction >= 1 - assumption_tolerance.
    achieved_bound_fraction
        Smallest bound fraction among the standards [unitless].
    """

    blank: int
    standards: tuple[int, ...]
    targets: tuple[float, ...]
    tolerance_met: bool
    achieved_bound_fraction: float


@dataclass(eq=False)
class StandardsMemo:
    """Standards already chosen on one candidate set, for the next choice on it (variants).

    A choice depends on the mask of allowed candidates only through the candidates the
    standards may be drawn from (``usable``). With each choice is kept what it rests on, when
    that can be stated exactly (the best group's score was unique and every score a number):
    the usable set, the excess recipes (groups) examined, the winning group, and the
    candidates every examined group picked. A smaller usable set that keeps all those picks
    gives each group the same picks (a pick is the first smallest key among the group's free
    candidates, and taking away candidates that were not picked leaves it the first
    smallest), so each group the same score; when the groups it examines are among those
    examined before and include the winner, the same group wins: the choice is reused.

    Attributes
    ----------
    exact
        Choices by the packed bits of the usable set.
    reusable
        The choices that may be reused for a smaller usable set, with what they rest on.
    """

    exact: dict[bytes, StandardsChoice] = field(default_factory=dict)
    reusable: list[_Reusable] = field(default_factory=list)

    def find(self, usable: NDArray[np.bool_], examined: frozenset[int]) -> StandardsChoice | None:
        """The choice for this usable set and these examined groups (by code), when one made
        before holds for it."""
        found = self.exact.get(np.packbits(usable).tobytes())
        if found is not None:
            return found
        for known in self.reusable:
            if (
                known.winner in examined
                and examined <= known.examined
                and not np.any(usable & ~known.usable)
                and not np.any(known.picked & ~usable)
            ):
                return known.choice
        return None


@record
class _Reusable:
    """A choice with what it rests on (see StandardsMemo)."""

    usable: NDArray[np.bool_]
    picked: NDArray[np.bool_]
    examined: frozenset[int]
    winner: int
    choice: StandardsChoice


def _group_codes(
    groups: NDArray[np.int64],
) -> tuple[NDArray[np.int64], NDArray[np.int64], bool]:
    """The distinct rows of ``groups`` in lexicographic order, as one code per row, and
    each row's position among them (what ``np.unique(groups, axis=0, return_inverse=True)``
    gives, sooner): option indices are non-negative, so a mixed-radix number per row orders
    as the rows do. The flag says whether the codes name the rows (the same row has the same
    code on any subset); when a code would not fit in 62 bits, ``np.unique`` numbers the
    distinct rows instead and the flag is False."""
    radix = groups.max(axis=0) + 1 if groups.size else np.ones(groups.shape[1], dtype=np.int64)
    if float(np.prod(radix.astype(float))) >= 2.0**62:
        keys, inverse = np.unique(groups, axis=0, return_inverse=True)
        return np.arange(len(keys), dtype=np.int64), inverse.reshape(-1), False
    code = np.zeros(groups.shape[0], dtype=np.int64)
    for j in range(groups.shape[1]):
        code = code * int(radix[j]) + groups[:, j]
    codes, inverse = distinct_inverse(code)
    return codes, inverse, True


def absorbance_targets(window: tuple[float, float], count: int) -> NDArray[np.float64]:
    """Evenly spaced absorbance targets inside the window, 5 % of its width in from each end.

    Parameters
    ----------
    window
        (low, high) linear working range [unitless].
    count
        Number of standards.

    Returns
    -------
    NDArray[np.float64]
        Targets, shape (count,) [unitless].
    """
    low, high = window
    inset = 0.05 * (high - low)
    if count == 1:
        return np.array([(low + high) / 2])
    return np.linspace(low + inset, high - inset, count)


def choose_standards(
    inputs: PlanInputs,
    candidates: CandidateSet,
    allowed: NDArray[np.bool_] | None = None,
    memo: StandardsMemo | None = None,
) -> StandardsChoice:
    """Choose the reagent blank and the standards from the candidates.

    Parameters
    ----------
    inputs
        The plan.
    candidates
        The deliverable mixtures, each evaluated, to choose from.
    allowed
        Optional mask of candidates the standards may be drawn from (shape (n,)); the blank
        is always free to match.
    memo
        Choices already made on this candidate set (variants design many sections from one;
        see :class:`StandardsMemo`): a choice that holds for this mask is reused, a new one
        is added. The result is the same with and without it.

    Returns
    -------
    StandardsChoice
        When fewer distinct standards than asked exist in the window, as many as exist.
    """
    design = inputs.design
    low, high = inputs.instrument.absorbance_window
    width = high - low
    evaluation = candidates.evaluation
    limiting = inputs.reaction.components.index(design.limiting)
    limiting_columns = [
        j
        for j, sid in enumerate(candidates.stock_ids)
        if design.limiting in inputs.stock(sid).contains_M
    ]
    has_limiting = evaluation.total_M[:, limiting] > 0
    diluent = inputs.diluent
    excess_columns = [
        j
        for j, sid in enumerate(candidates.stock_ids)
        if j not in limiting_columns and (diluent is None or sid != diluent.id)
    ]
    groups = (
        candidates.option_index[:, excess_columns]
        if excess_columns
        else np.zeros((candidates.size, 0), dtype=np.int64)
    )
    absorbance = evaluation.absorbance
    # Every reading +/- 2 u(A) inside the window, so a real bench stays inside it.
    margin = 2.0 * candidates.u_absorbance
    in_window = (absorbance >= low + margin) & (absorbance <= high - margin)
    usable = has_limiting & in_window & ~candidates.padded & np.any(groups > 0, axis=1)
    if excess_columns and not np.any(usable):
        usable = has_limiting & in_window & ~candidates.padded
    if allowed is not None:
        usable &= allowed
    targets = absorbance_targets((low, high), design.standards)
    tolerance = design.assumption_tolerance
    if not np.any(usable):
        return StandardsChoice(-1, (), tuple(targets), False, 0.0)

    codes, inverse, named = _group_codes(groups[usable])
    indices = np.flatnonzero(usable)
    fraction = evaluation.bound_fraction[indices]
    # Rank excess recipes by the bound fraction they keep at the top of the window.
    group_floor = np.full(len(codes), np.inf)
    np.minimum.at(group_floor, inverse, fraction)
    group_count = np.bincount(inverse, minlength=len(codes))
    order = np.lexsort((-group_count, -group_floor))[:_GROUPS_EXAMINED]
    examined = frozenset(codes[order].tolist())
    if memo is not None and named:
        known = memo.find(usable, examined)
        if known is not None:
            return known

    # Stocks each candidate uses besides the diluent (fewest stocks per mixture).
    reagent_columns = [
        j for j, sid in enumerate(candidates.stock_ids) if diluent is None or sid != diluent.id
    ]
    stock_count = np.count_nonzero(candidates.volumes_mL[:, reagent_columns] > 0, axis=1)
    by_group = np.argsort(inverse, kind="stable")
    starts = np.searchsorted(inverse[by_group], np.arange(len(codes) + 1))
    # The examined groups' members, one group after another in ranked order.
    segments = [by_group[starts[g] : starts[g + 1]] for g in order]
    members = indices[np.concatenate(segments)]
    lengths = np.array([segment.size for segment in segments])
    first = np.concatenate([[0], np.cumsum(lengths)[:-1]])
    # Nearest reading first; ties (within 1 % of the window) to fewer stocks, then fewer
    # deliveries, then the lower predicted relative uncertainty: one key per candidate.
    tie_break = (
        stock_count[members] * 100.0
        + candidates.deliveries[members] * 10.0
        + np.minimum(candidates.u_relative_total[members, limiting], 1.0)
    )
    # Each group picks its standards target by target, every group at once: the free member
    # of least key, the first of equal ones.
    taken = np.zeros(members.size, dtype=bool)
    position = np.arange(members.size)
    picks = np.full((order.size, targets.size), -1, dtype=np.int64)
    for t, target in enumerate(targets):
        miss = np.round(np.abs(absorbance[members] - target) / (0.01 * width))
        key = np.where(taken, np.inf, miss * 1e3 + tie_break)
        least = np.repeat(np.minimum.reduceat(key, first), lengths)
        at = np.minimum.reduceat(np.where(key == least, position, members.size), first)
        found = np.isfinite(np.minimum.reduceat(key, first))
        taken[at[found]] = True
        picks[found, t] = members[at[found]]
    best: tuple[tuple[float, ...], list[int]] | None = None
    winner = -1
    # Every group's picks, and how many groups share the best score (see StandardsMemo).
    picked = np.zeros(candidates.size, dtype=np.bool_)
    best_count = 0
    comparable = True
    for g, row in zip(order, picks, strict=True):
        chosen = [int(i) for i in row if i >= 0]
        floor = float(np.min(evaluation.bound_fraction[chosen])) if chosen else 0.0
        met = floor >= 1.0 - tolerance
        miss_total = float(np.sum(np.abs(absorbance[chosen] - targets[: len(chosen)])) / width)
        cost = miss_total / max(len(chosen), 1) + BOUND_WEIGHT * (1.0 - floor)
        # The all-bound assumption is what standards are for: a recipe that meets it beats
        # one with more standards that does not (the count shortfall is then a check).
        score = (
            0.0 if met else 1.0,
            -len(chosen),
            float(np.sum(stock_count[chosen])),
            float(np.round(cost / COST_STEP)),
            round(miss_total, 2),
            float(np.sum(candidates.deliveries[chosen])),
            float(np.sum(candidates.u_relative_total[chosen, limiting])),
        )
        picked[chosen] = True
        comparable = comparable and all(math.isfinite(value) for value in score)
        if best is None or score < best[0]:
            best = (score, chosen)
            winner = int(codes[g])
            best_count = 1
        elif score == best[0]:
            best_count += 1
    assert best is not None
    chosen = sorted(best[1], key=lambda i: absorbance[i])
    blank = _blank_for(candidates, chosen[0], limiting_columns, has_limiting)
    floor = float(np.min(evaluation.bound_fraction[chosen]))
    choice = StandardsChoice(
        blank=blank,
        standards=tuple(chosen),
        targets=tuple(float(t) for t in targets),
        tolerance_met=floor >= 1.0 - tolerance,
        achieved_bound_fraction=floor,
    )
    if memo is not None:
        memo.exact[np.packbits(usable).tobytes()] = choice
        if best_count == 1 and comparable and named:
            memo.reusable.append(_Reusable(usable, picked, examined, winner, choice))
    return choice


def _blank_for(
    candidates: CandidateSet,
    standard: int,
    limiting_columns: list[int],
    has_limiting: NDArray[np.bool_],
) -> int:
    """The candidate with the standard's excess recipe and no limiting reagent."""
    excess = [j for j in range(len(candidates.stock_ids)) if j not in limiting_columns]
    reference = candidates.volumes_mL[standard]
    blanks = np.flatnonzero(~has_limiting)
    if not blanks.size:
        return -1
    # Same excess volumes; the diluent differs by the limiting volume it replaces.
    non_diluent = [j for j in excess if j != len(candidates.stock_ids) - 1] or excess
    distance = np.sum(
        np.abs(candidates.volumes_mL[blanks][:, non_diluent] - reference[non_diluent]), axis=1
    )
    order = np.lexsort((candidates.deliveries[blanks], distance))
    return int(blanks[order[0]])
