"""The design stage: candidates -> standards and tests -> recipes.

:func:`design_recipes` is a pure function of the validated inputs and returns recipes only:
the mixtures with their predicted state, the stock totals and preparations, and the
feasibility findings of the design itself. Verification and prediction are later stages,
run once by :mod:`planner.pipeline`; this package imports neither.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Protocol, TypeVar

import numpy as np
from numpy.typing import NDArray

from planner.analysis import Layout, all_bound_mean_K
from planner.chem.assumption import LARGEST_DISSOLVED_M
from planner.chem.constants import bench_K
from planner.design.candidates import CandidateSet, candidate_set
from planner.design.logistics import preparations, stock_totals
from planner.design.mixtures import (
    Objective,
    TestsChoice,
    choose_tests,
    global_fit_objective,
    mean_K_objective,
    mse_objective,
    own_scores,
    robust_global_fit_objective,
)
from planner.design.standards import StandardsChoice, StandardsMemo, choose_standards
from planner.errors import PlannerError
from planner.inputs import PlanInputs, Stock
from planner.lab.bench import reading_sd
from planner.records import record
from planner.result import (
    Addition,
    Check,
    Delivery,
    Mixture,
    Role,
    StockPreparation,
    Totals,
    stock_volume_text,
)

__all__ = [
    "Design",
    "Recipes",
    "SharedWork",
    "design_recipes",
    "hold_within_stock",
    "mixture_from_candidate",
]


@record
class Design:
    """What the design stage hands on: recipes, totals and the design's own findings.

    Attributes
    ----------
    inputs
        The validated plan.
    mixtures
        Blanks, standards and tests, in that order, with their predicted state; their
        ``u_absorbance`` is NaN until the prediction stage fills it.
    totals
        Stock totals per bench, session and to prepare.
    preparations
        How to prepare each stock.
    checks
        The design's feasibility findings (which constraint binds), before verification.
    notes
        Notes for the sheets.
    objective
        The value of the test-set objective the design minimised, or None when no test set
        met the constraints [unitless].
    analysis
        The analysis the tests were designed for, ``"all-bound"`` or ``"global-fit"``.
    all_bound_error
        Relative error of the all-bound analysis's K on the plan's noise-free readings, or
        None when it has no value [unitless].
    """

    inputs: PlanInputs
    mixtures: tuple[Mixture, ...]
    totals: Totals
    preparations: tuple[StockPreparation, ...]
    checks: tuple[Check, ...]
    notes: tuple[str, ...]
    objective: float | None
    analysis: str = "all-bound"
    all_bound_error: float | None = None


@dataclass(eq=False)
class SharedWork:
    """Work that designs on one candidate set share (variants design every section from one).

    The standards chosen for each set of candidates they may be drawn from, and each test
    objective with every candidate's own score under it, keyed by what they depend on (the
    analysis, the criterion, the standards and the blank). Bound to the first inputs and
    candidate set it serves; designs of any other inputs or candidates do not use it.
    Results are the same with and without it.
    """

    standards: StandardsMemo = field(default_factory=StandardsMemo)
    objectives: dict[tuple[object, ...], tuple[Objective, NDArray[np.float64]]] = field(
        default_factory=dict
    )
    bound_to: tuple[PlanInputs, CandidateSet] | None = None

    def serves(self, inputs: PlanInputs, candidates: CandidateSet) -> bool:
        """True when this work belongs to these very inputs and candidates (binding it to
        them on first use)."""
        if self.bound_to is None:
            self.bound_to = (inputs, candidates)
        return self.bound_to[0] is inputs and self.bound_to[1] is candidates

    def objective(
        self,
        key: tuple[object, ...],
        inputs: PlanInputs,
        candidates: CandidateSet,
        build: Callable[[], Objective],
    ) -> tuple[Objective, NDArray[np.float64]]:
        """The objective under ``key`` and every candidate's own score, built once."""
        found = self.objectives.get(key)
        if found is None:
            made = build()
            found = self.objectives[key] = (made, own_scores(inputs, candidates, made))
        return found


def mixture_from_candidate(
    inputs: PlanInputs, candidates: CandidateSet, index: int, mixture_id: str, role: Role
) -> Mixture:
    """The recipe and predicted state of one candidate.

    Additions follow the order of addition: in a tube the diluent first, then the excess
    reagents, the limiting reagent last; in a flask the reagents first and the diluent to
    the mark last (common practice).
    """
    ev = candidates.evaluation
    reaction = inputs.reaction
    in_flask = inputs.design.vessel_kind == "volumetric-flask"
    diluent = inputs.diluent
    columns = list(range(len(candidates.stock_ids)))
    if diluent is not None:
        reagents = [j for j in columns if candidates.stock_ids[j] != diluent.id]
        diluent_column = [candidates.stock_ids.index(diluent.id)]
        columns = reagents + diluent_column if in_flask else diluent_column + reagents
    additions: list[Addition] = []
    for j in columns:
        option = candidates.options[j][int(candidates.option_index[index, j])]
        volume = float(candidates.volumes_mL[index, j])
        if volume <= 0 or not option.devices:
            continue
        # The diluent to the mark of a flask: the flask makes up what the reagents leave.
        deliveries = option.deliveries or (Delivery(option.devices[0], volume),)
        additions.append(
            Addition(
                stock=candidates.stock_ids[j],
                volume_mL=volume,
                devices=option.devices,
                order=len(additions) + 1,
                deliveries=deliveries,
            )
        )
    initial = {
        ion: float(ev.initial_M[index, k])
        for k, ion in enumerate(candidates.ions.names)
        if ev.initial_M[index, k] > 0
    }
    equilibrium = {c: float(ev.free_M[index, j]) for j, c in enumerate(reaction.components)}
    equilibrium.update(
        {sp.name: float(ev.species_M[index, i]) for i, sp in enumerate(reaction.species)}
    )
    return Mixture(
        id=mixture_id,
        role=role,
        total_volume_mL=candidates.total_volume_mL,
        additions=tuple(additions),
        initial_M=initial,
        equilibrium_M=equilibrium,
        absorbance=float(ev.absorbance[index]),
        u_absorbance=float("nan"),  # the prediction stage's, see planner.pipeline
        bound_fraction=float(ev.bound_fraction[index]),
        ionic_strength_M=float(ev.ionic_strength_M[index]),
    )


def _feasibility(inputs: PlanInputs, candidates: CandidateSet, n_standards: int) -> list[Check]:
    """Say which constraint binds when the shelf cannot make what the design asks."""
    low, high = inputs.instrument.absorbance_window
    extremes = _window_extremes(inputs, candidates)
    if extremes is None:
        return [
            Check(
                "design-feasibility",
                "fail",
                "no deliverable mixture forms the measured product (none holds the limiting "
                "reagent with its partner)",
            )
        ]
    top, bottom = extremes
    if top < low:
        return [
            Check(
                "design-feasibility",
                "fail",
                f"the strongest mixture the shelf can make reads {top:.3f}, below the window's "
                f"{low:g}: {_limiting_fix(inputs, stronger=True)}; or use a longer cuvette or "
                "larger pipettes",
            )
        ]
    if bottom > high:
        return [
            Check(
                "design-feasibility",
                "fail",
                f"the weakest mixture the shelf can make reads {bottom:.3f}, above the window's "
                f"{high:g}: {_limiting_fix(inputs, stronger=False)}; or add a smaller pipette",
            )
        ]
    if n_standards < inputs.design.standards:
        return [
            Check(
                "design-feasibility",
                "fail",
                f"only {n_standards} distinct standards fit the window with the shelf's "
                "volumes: add a graduated pipette or buret, or ask for fewer standards",
            )
        ]
    return []


def _window_extremes(inputs: PlanInputs, candidates: CandidateSet) -> tuple[float, float] | None:
    """Readings of the strongest and the weakest mixture that forms the measured product, or
    None when no deliverable mixture forms it.

    A mixture holding the limiting reagent without its partner forms no product and reads
    like the blank: counted, it made a shelf whose smallest deliveries overshoot the window
    (every mixture with both reagents above it) look as if some mixture reached below it.
    """
    ev = candidates.evaluation
    coloured = ev.species_M[:, inputs.measured] > 0
    if not np.any(coloured):
        return None
    return float(np.max(ev.absorbance[coloured])), float(np.min(ev.absorbance[coloured]))


# Rounds of "scale the limiting stock by the ratio still missing": the reading is nearly
# proportional to the limiting total, so two or three usually land on the aim.
_WINDOW_FIX_ROUNDS = 8
# Where a fixed limiting stock puts the extreme mixture, as a fraction of the window's width
# in from its near end: the weakest mixture near the low end (or the strongest near the high
# end) leaves the rest of the window to the standards, where an extreme just inside the far
# edge left room for one or two (common practice: standards spread over the working range).
_WINDOW_FIX_AIM = 0.1
# How close to the aim a round must land, as a fraction of the window's width.
_WINDOW_FIX_CLOSE = 0.05


def _limiting_fix(inputs: PlanInputs, *, stronger: bool) -> str:
    """The limiting stock's concentration that brings the strongest mixture up to near the
    window's high end (``stronger``) or the weakest down to near its low end, so that the
    standards can spread over the window, solved for and checked again on a copy of the inputs
    with every candidate mixed and read anew; or why no concentration does (above
    :data:`LARGEST_DISSOLVED_M`, or the reading does not follow the limiting reagent).
    """
    low, high = inputs.instrument.absorbance_window
    width = high - low
    limiting = inputs.design.limiting
    stocks = [st for st in inputs.stocks if limiting in st.contains_M and not st.diluent]
    if not stocks:
        return f"give a stock of {limiting}"
    stock = max(stocks, key=lambda st: st.contains_M[limiting])
    now = stock.contains_M[limiting]

    def reading(c_M: float) -> float | None:
        changed = dataclasses.replace(stock, contains_M={**stock.contains_M, limiting: c_M})
        fixed = dataclasses.replace(
            inputs, stocks=tuple(changed if st.id == stock.id else st for st in inputs.stocks)
        )
        try:
            extremes = _window_extremes(fixed, candidate_set(fixed))
        except PlannerError:
            return None
        if extremes is None:
            return None
        return extremes[0] if stronger else extremes[1]

    aim = high - _WINDOW_FIX_AIM * width if stronger else low + _WINDOW_FIX_AIM * width
    value = now
    for _ in range(_WINDOW_FIX_ROUNDS):
        read = reading(value)
        if read is None or read <= 0:
            break
        if abs(read - aim) <= _WINDOW_FIX_CLOSE * width:
            rounded = float(f"{value:.3g}")
            at_rounded = reading(rounded)
            if at_rounded is None or not low <= at_rounded <= high:
                rounded, at_rounded = value, read
            if rounded > LARGEST_DISSOLVED_M:
                break
            extreme, end = ("strongest", "high") if stronger else ("weakest", "low")
            return (
                f"make the {stock.id} stock {rounded:.3g} mol/L {limiting} (now {now:.3g}), "
                f"with which the {extreme} mixture reads {at_rounded:.2f}, near the window's "
                f"{end} end, and the standards can spread over the window (mixed and read again)"
            )
        value *= aim / read
        if value > LARGEST_DISSOLVED_M:
            break
    if stronger:
        return (
            f"no strength of the {stock.id} stock does it: it would need more than "
            f"{LARGEST_DISSOLVED_M:g} mol/L {limiting}, the most a dissolved reagent reaches "
            "(common practice)"
        )
    return (
        f"diluting the {stock.id} stock does not bring it down: the reading does not follow "
        f"{limiting} (the excess reagent or the medium reads above the window), so choose "
        "another wavelength, where they absorb less"
    )


def _epsilon_relative_u(
    inputs: PlanInputs, candidates: CandidateSet, standards: Sequence[int]
) -> float:
    """u(eps)/eps of a standard curve through the origin from reading noise alone.

    eps = sum c A / (b sum c^2) gives u(eps) = sqrt(sum c_i^2 u_i^2) / (b sum c^2) (GUM,
    JCGM 100:2008, eq. 10), so u(eps)/eps = sqrt(sum A_i^2 u_i^2) / sum A_i^2 for readings
    A_i = eps b c_i, u_i the heteroscedastic reading noise (:func:`planner.lab.bench.reading_sd`).
    """
    if not standards:
        return 0.0
    rows = np.array(standards)
    readings = candidates.evaluation.true_absorbance[rows]
    u_read = reading_sd(inputs.instrument, inputs.bench, candidates.evaluation.absorbance[rows])
    total = float(np.sum(readings**2))
    return float(np.sqrt(np.sum((readings * u_read) ** 2))) / total if total > 0 else 0.0


def design_recipes(
    inputs: PlanInputs,
    objective: Objective | None = None,
    *,
    candidates: CandidateSet | None = None,
    allowed: NDArray[np.bool_] | None = None,
    shared: SharedWork | None = None,
) -> Design:
    """Design the recipes of a plan: blanks, standards and tests, with their totals.

    Parameters
    ----------
    inputs
        Validated plan inputs.
    objective
        Scores a set of test mixtures (lower is better); by default the predicted relative
        SD of the mean K including the standard curve's share
        (:func:`planner.design.mixtures.mean_K_objective`).
    candidates
        Candidates already enumerated for these inputs (variants reuse one set).
    allowed
        Optional mask of the candidates standards and tests may use (variants draw one per
        section).
    shared
        Work shared with other designs of the same inputs and candidates (variants): the
        same recipes, sooner.

    Returns
    -------
    Design
        With the design's feasibility findings; verification and prediction follow in
        :func:`planner.pipeline.design_plan`.
    """
    if candidates is None:
        candidates = candidate_set(inputs)
        design = _design(inputs, objective, candidates, allowed, shared)
        unused = _unused_stocks(inputs, design.mixtures)
        if unused:
            # A stock no recipe uses (a source kept for making another stock, say) still took
            # a buret and a share of the candidate grid's volumes: design again without it,
            # its buret and volumes going to the stocks that are used; keep the better design.
            fewer = candidate_set(inputs, unused)
            again = _design(inputs, objective, fewer, allowed, shared)
            if _rank(again) < _rank(design):
                design, candidates = again, fewer
        return _within_stock(inputs, objective, candidates, allowed, shared, design)
    return _design(inputs, objective, candidates, allowed, shared)


# Rounds of "cap the short stock's volume by the share of it on hand": the need is nearly
# proportional to the largest volumes, so one or two rounds usually fit.
_STOCK_FIT_ROUNDS = 3


class Recipes(Protocol):
    """What holding recipes within the stock reads: a :class:`Design` or a whole plan."""

    @property
    def mixtures(self) -> tuple[Mixture, ...]: ...
    @property
    def totals(self) -> Totals: ...
    @property
    def checks(self) -> tuple[Check, ...]: ...


_R = TypeVar("_R", bound=Recipes)


def _within_stock(
    inputs: PlanInputs,
    objective: Objective | None,
    candidates: CandidateSet,
    allowed: NDArray[np.bool_] | None,
    shared: SharedWork | None,
    design: Design,
) -> Design:
    """The design, or one made again within the stock on hand (:func:`hold_within_stock`)."""

    def again(mask: NDArray[np.bool_]) -> Design:
        return _design(inputs, objective, candidates, mask, shared)

    held, _, note = hold_within_stock(inputs, design, again, candidates, allowed)
    return dataclasses.replace(held, notes=(*held.notes, note)) if note else held


def hold_within_stock(
    inputs: PlanInputs,
    first: _R,
    make: Callable[[NDArray[np.bool_]], _R],
    candidates: CandidateSet,
    allowed: NDArray[np.bool_] | None = None,
    *,
    sets: int = 1,
) -> tuple[_R, NDArray[np.bool_] | None, str]:
    """Recipes made again within the stock on hand when ``first`` needs more of an excess
    stock than ``available_mL``.

    The standards bind the limiting reagent with as much excess as the shelf allows, which
    can ask for litres of an excess stock when a tenth of it would keep the standards within
    ``assumption_tolerance``. For each short stock without the limiting reagent the
    candidates are held to volumes of it at most the recipes' largest times the share on
    hand (available over needed), and ``make`` designs again within that mask, up to
    :data:`_STOCK_FIT_ROUNDS` times. (A short limiting stock is left to the
    ``stock-inventory`` check: less of it would only lower every reading.) Recipes made so
    replace the first only when they are short of less stock, fail no more checks, have as
    many mixtures, and their standards still bind within the tolerance (or no worse than the
    first's).

    Parameters
    ----------
    inputs
        The plan; ``available_mL`` of its stocks is what is on hand.
    first
        The recipes designed without regard to the stock (a :class:`Design` or a plan).
    make
        Designs the recipes again from the candidates a mask allows.
    candidates
        The candidates ``first`` was chosen from.
    allowed
        The mask ``first`` was chosen within, if any; the held mask is a part of it.
    sets
        How many times the session needs ``first``'s totals: 1 for a plan, the number of
        sections for variants that each design one section.

    Returns
    -------
    tuple
        The recipes kept, the mask they were designed within (None when ``first`` is kept)
        and a note saying what was held (``""`` when ``first`` is kept).
    """
    tolerance = inputs.design.assumption_tolerance
    if not any(m.role == "standard" for m in first.mixtures):
        return first, None, ""  # no standards to hold: nothing asks for an excess
    first_bound = _standards_bound(first)
    first_fails = _fails(first)
    best, best_mask = first, None
    mask = np.ones(candidates.size, dtype=bool) if allowed is None else allowed.copy()
    for _ in range(_STOCK_FIT_ROUNDS):
        short = _short_excess_stocks(inputs, best, sets)
        caps = {
            st.id: max((m.volume_of(st.id) for m in best.mixtures), default=0.0)
            * st.available_mL
            / (sets * best.totals.to_prepare[st.id])
            for st in short
            if st.available_mL is not None and st.id in candidates.stock_ids
        }
        if not caps:
            break
        for stock_id, cap in caps.items():
            column = candidates.volumes_mL[:, candidates.stock_ids.index(stock_id)]
            mask &= column <= cap + 1e-9
        again = make(mask.copy())
        if (
            _shortage(inputs, again, sets) >= _shortage(inputs, best, sets)
            or _fails(again) > first_fails
            or len(again.mixtures) < len(first.mixtures)
            or _standards_bound(again) < min(1.0 - tolerance, first_bound)
        ):
            break
        best, best_mask = again, mask.copy()
    if best is first:
        return first, None, ""
    held = ", ".join(
        f"{st.id} (at most "
        f"{stock_volume_text(max((m.volume_of(st.id) for m in best.mixtures), default=0.0))} "
        f"mL a mixture; {st.available_mL:g} mL on hand)"
        for st in _short_excess_stocks(inputs, first, sets)
    )
    note = (
        f"Recipes held within the stock on hand: {held}. The standards still bind at least "
        f"{100 * _standards_bound(best):.1f} % of {inputs.design.limiting} (tolerance "
        f"{100 * tolerance:g} %); more of that stock would bind more."
    )
    return best, best_mask, note


def _short_excess_stocks(inputs: PlanInputs, recipes: Recipes, sets: int) -> list[Stock]:
    """Stocks without the limiting reagent of which ``sets`` times the recipes' totals need
    more than is on hand."""
    return [
        st
        for st in inputs.stocks
        if st.available_mL is not None
        and sets * recipes.totals.to_prepare.get(st.id, 0.0) > st.available_mL + 1e-9
        and inputs.design.limiting not in st.contains_M
    ]


def _fails(recipes: Recipes) -> int:
    return sum(1 for c in recipes.checks if c.status == "fail")


def _standards_bound(recipes: Recipes) -> float:
    """The least bound fraction of the recipes' standards (0 without standards)."""
    return min((m.bound_fraction for m in recipes.mixtures if m.role == "standard"), default=0.0)


def _shortage(inputs: PlanInputs, recipes: Recipes, sets: int = 1) -> float:
    """How much stock ``sets`` times the recipes lack, summed over stocks as fractions of what
    is on hand."""
    return sum(
        max(0.0, sets * recipes.totals.to_prepare.get(st.id, 0.0) - st.available_mL)
        / st.available_mL
        for st in inputs.stocks
        if st.available_mL
    )


def _unused_stocks(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> frozenset[str]:
    """Reagent stocks (not the diluent) that no recipe uses."""
    used = {a.stock for m in mixtures for a in m.additions}
    return frozenset(st.id for st in inputs.stocks if not st.diluent and st.id not in used)


def _rank(design: Design) -> tuple[int, float]:
    """Fewer failed feasibility checks first, then the lower test objective."""
    fails = sum(1 for c in design.checks if c.status == "fail")
    return fails, design.objective if design.objective is not None else math.inf


def _design(
    inputs: PlanInputs,
    objective: Objective | None,
    candidates: CandidateSet,
    allowed: NDArray[np.bool_] | None,
    shared: SharedWork | None,
) -> Design:
    """:func:`design_recipes` on one candidate set."""
    if shared is not None and not shared.serves(inputs, candidates):
        shared = None
    standards = choose_standards(
        inputs, candidates, allowed, shared.standards if shared is not None else None
    )
    used = ((standards.blank,) if standards.blank >= 0 else ()) + standards.standards
    tests, analysis, error, analysis_check = _tests_for_analysis(
        inputs, candidates, standards, used, objective, allowed, shared
    )
    mixtures: list[Mixture] = []
    if standards.blank >= 0:
        # design.blanks identical reagent blanks (replicates of one recipe).
        for n in range(1, inputs.design.blanks + 1):
            mixtures.append(
                mixture_from_candidate(inputs, candidates, standards.blank, f"B{n}", "blank")
            )
    for n, index in enumerate(standards.standards, start=1):
        mixtures.append(mixture_from_candidate(inputs, candidates, index, f"S{n}", "standard"))
    for n, index in enumerate(tests.tests, start=1):
        mixtures.append(mixture_from_candidate(inputs, candidates, index, f"T{n}", "test"))

    totals = stock_totals(inputs, mixtures)
    notes = [
        "Order of addition: in tubes the diluent first, then the excess reagent, the limiting "
        "reagent last; in flasks the reagents first, then the diluent to the mark "
        "(common practice).",
    ]
    if np.isfinite(tests.objective):
        of_what = "of the mean K" if analysis == "all-bound" else "of the global fit's K"
        if inputs.design.criterion == "mse" and objective is None:
            what = (
                f"the predicted root mean squared error {of_what}, bias included, averaged "
                "over the uncertainty of the expected K"
            )
        else:
            what = f"the predicted u(K)/K {of_what}"
        room = (
            "reading below the window's top tenth (common practice)"
            if tests.headroom
            else "reading at least 2 u(A) inside the window (too few read below its top tenth)"
        )
        notes.append(
            f"Test mixtures chosen to minimise {what} among {tests.eligible} eligible "
            f"mixtures {room} (the answer key gives the resulting u(K))."
        )
    else:
        notes.append("No test mixture met the window and bound-fraction constraints.")
    return Design(
        inputs=inputs,
        mixtures=tuple(mixtures),
        totals=totals,
        preparations=preparations(inputs, totals),
        checks=(
            *_feasibility(inputs, candidates, len(standards.standards)),
            *((analysis_check,) if tests.tests and standards.standards else ()),
        ),
        notes=tuple(notes),
        objective=float(tests.objective) if np.isfinite(tests.objective) else None,
        analysis=analysis,
        all_bound_error=error,
    )


#: Name of the check that says which analysis the tests are designed for, and why.
ANALYSIS_CHECK = "analysis"


def _tests_for_analysis(
    inputs: PlanInputs,
    candidates: CandidateSet,
    standards: StandardsChoice,
    used: tuple[int, ...],
    objective: Objective | None,
    allowed: NDArray[np.bool_] | None,
    shared: SharedWork | None = None,
) -> tuple[TestsChoice, str, float | None, Check]:
    """Choose the tests for the analysis the plan will use, and say which and why.

    The all-bound analysis is used when the plan asks for it, it applies to this reaction and
    these standards (:func:`_all_bound_inapplicable`), and its K errs on the noise-free
    readings of the chosen set by no more than ``design.K_bias_tolerance``; otherwise the
    tests are designed for the global fit (:class:`planner.design.mixtures.GlobalFitObjective`).

    Returns
    -------
    tuple
        (the tests, ``"all-bound"`` or ``"global-fit"``, the all-bound analysis's relative
        error on noise-free readings or None, the ``analysis`` check).
    """
    design = inputs.design
    tolerance = design.K_bias_tolerance
    floor = standards.achieved_bound_fraction
    binds = f"the standards bind at least {100 * floor:.1f} % of {design.limiting}"
    reason = _all_bound_inapplicable(inputs, candidates, standards.standards)
    if design.analysis == "all-bound" and reason is None:

        def all_bound_objective() -> Objective:
            epsilon_u = _epsilon_relative_u(inputs, candidates, standards.standards)
            return (
                mse_objective(inputs, candidates, standards.standards, standards.blank, epsilon_u)
                if design.criterion == "mse"
                else mean_K_objective(epsilon_u)
            )

        chosen, scores = _objective_and_scores(
            ("all-bound", standards), inputs, candidates, objective, all_bound_objective, shared
        )
        tests = choose_tests(
            inputs, candidates, exclude=used, objective=chosen, allowed=allowed, scores=scores
        )
        error = _all_bound_error(inputs, candidates, standards, tests.tests)
        reason = _all_bound_inapplicable(inputs, candidates, tests.tests)
        if reason is None and error is not None and abs(error) <= tolerance:
            return (
                tests,
                "all-bound",
                error,
                Check(
                    ANALYSIS_CHECK,
                    "pass",
                    f"all-bound analysis: {binds}, so its K errs by {100 * error:+.1f} % on "
                    f"noise-free readings (tolerance {100 * tolerance:g} %)",
                ),
            )
        if reason is None:
            reason = (
                f"its K would err by {100 * error:+.1f} % on noise-free readings even with "
                f"tests chosen for it ({binds}; tolerance {100 * tolerance:g} %)"
                if error is not None
                else f"its K has no value on this shelf ({binds})"
            )

    def fit_objective() -> Objective:
        return (
            robust_global_fit_objective(inputs, candidates, standards.standards, standards.blank)
            if design.criterion == "mse"
            else global_fit_objective(inputs, candidates, standards.standards, standards.blank)
        )

    fit, scores = _objective_and_scores(
        ("global-fit", standards), inputs, candidates, objective, fit_objective, shared
    )
    tests = choose_tests(
        inputs, candidates, exclude=used, objective=fit, allowed=allowed, scores=scores
    )
    error = _all_bound_error(inputs, candidates, standards, tests.tests)
    if design.analysis == "global-fit":
        return (
            tests,
            "global-fit",
            error,
            Check(ANALYSIS_CHECK, "pass", "tests designed for the global fit (design.analysis)"),
        )
    return (
        tests,
        "global-fit",
        error,
        Check(
            ANALYSIS_CHECK,
            "warn",
            f"the all-bound analysis does not suit this plan: {reason}; so the tests are "
            "designed for the global fit of K and eps with the full equilibrium model, whose "
            "K and u(K) the answer key gives",
        ),
    )


def _objective_and_scores(
    key: tuple[object, ...],
    inputs: PlanInputs,
    candidates: CandidateSet,
    given: Objective | None,
    build: Callable[[], Objective],
    shared: SharedWork | None,
) -> tuple[Objective, NDArray[np.float64] | None]:
    """The objective the caller gave, else the one ``build`` makes: from the shared work with
    every candidate's own score when there is some (the key names the analysis and the
    standards, on which the objective depends besides the inputs and candidates)."""
    if given is not None:
        return given, None
    if shared is None:
        return build(), None
    return shared.objective(key, inputs, candidates, build)


def _all_bound_inapplicable(
    inputs: PlanInputs, candidates: CandidateSet, rows: Sequence[int]
) -> str | None:
    """Why the all-bound analysis (a 1:1 expression) does not apply, or None when it does.

    It does not apply when the measured species is not the 1:1 product of the limiting and
    the excess component, when another product absorbs too, or when, in one of ``rows``,
    another product holds more of the limiting reagent than the measured one does.
    """
    reaction = inputs.reaction
    measured = inputs.measured_species
    limiting = inputs.design.limiting
    if inputs.excess is None or measured.formula != {limiting: 1, inputs.excess: 1}:
        return (
            f"{measured.name} is not the 1:1 product of {limiting} and one excess reagent, "
            "and the all-bound expression is the 1:1 one"
        )
    others = [
        sp.name for i, sp in enumerate(reaction.species) if i != inputs.measured and sp.epsilon
    ]
    if others:
        return f"{', '.join(others)} absorb(s) too, which the all-bound expression ignores"
    if rows:
        species = candidates.evaluation.species_M[np.array(rows)]
        limiting_column = reaction.components.index(limiting)
        held = species * reaction.stoichiometry()[:, limiting_column][None, :]
        rivals = [i for i in range(len(reaction.species)) if i != inputs.measured]
        if rivals:
            rival = held[:, rivals].max(axis=1)
            if np.any(rival > held[:, inputs.measured]):
                worst = rivals[int(np.argmax(held[:, rivals].max(axis=0)))]
                return (
                    f"{reaction.species[worst].name} holds more of {limiting} than "
                    f"{measured.name} in some mixtures"
                )
    return None


def _all_bound_error(
    inputs: PlanInputs,
    candidates: CandidateSet,
    standards: StandardsChoice,
    tests: Sequence[int],
) -> float | None:
    """Relative error of the all-bound mean K on the set's noise-free readings, or None."""
    if not tests or not standards.standards or inputs.excess is None:
        return None
    ev = candidates.evaluation
    blank = [standards.blank] if standards.blank >= 0 else []
    rows = np.array([*blank, *standards.standards, *tests], dtype=np.int64)
    n_blank, n_std = len(blank), len(standards.standards)
    components = inputs.reaction.components
    layout = Layout(
        totals_M=ev.total_M[rows],
        blanks=np.arange(n_blank, dtype=np.int64),
        standards=np.arange(n_blank, n_blank + n_std, dtype=np.int64),
        tests=np.arange(n_blank + n_std, rows.size, dtype=np.int64),
        limiting=components.index(inputs.design.limiting),
        excess=components.index(inputs.excess),
        measured=inputs.measured,
        epsilon_true=inputs.measured_species.epsilon,
        K_true=bench_K(inputs),
    )
    readings = ev.absorbance[rows]
    net = readings - (readings[:n_blank].mean() if n_blank else 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        _, k = all_bound_mean_K(layout, net[None, :], inputs.instrument.path_length_cm)
        error = float(k.mean()) / layout.K_true - 1.0
    return error if np.isfinite(error) and k.mean() > 0 else None
