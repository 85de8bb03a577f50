"""The design stage: candidates -> standards and tests -> recipes.

:func:`design_recipes` is a pure function of the validated inputs and returns recipes only:
the mixtures with their predicted state, the stock totals and preparations, and the
feasibility findings of the design itself. Verification and prediction are later stages,
run once by :mod:`planner.pipeline`; this package imports neither.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from planner.design.candidates import CandidateSet, candidate_set
from planner.design.logistics import preparations, stock_totals
from planner.design.mixtures import Objective, choose_tests, mean_K_objective
from planner.design.standards import choose_standards
from planner.inputs import PlanInputs
from planner.result import Addition, Check, Delivery, Mixture, StockPreparation, Totals

__all__ = ["Design", "design_recipes", "mixture_from_candidate"]


@dataclass(frozen=True, slots=True)
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
    """

    inputs: PlanInputs
    mixtures: tuple[Mixture, ...]
    totals: Totals
    preparations: tuple[StockPreparation, ...]
    checks: tuple[Check, ...]
    notes: tuple[str, ...]
    objective: float | None


def mixture_from_candidate(
    inputs: PlanInputs, candidates: CandidateSet, index: int, mixture_id: str, role: str
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
    ev = candidates.evaluation
    low, high = inputs.instrument.absorbance_window
    limiting = inputs.reaction.components.index(inputs.design.limiting)
    coloured = ev.total_M[:, limiting] > 0
    if not np.any(coloured):
        return [
            Check(
                "design-feasibility", "fail", "no deliverable mixture contains the limiting reagent"
            )
        ]
    top = float(np.max(ev.absorbance[coloured]))
    bottom = float(np.min(ev.absorbance[coloured]))
    if top < low:
        return [
            Check(
                "design-feasibility",
                "fail",
                f"the strongest mixture the shelf can make reads {top:.3f}, below the window's "
                f"{low:g}: use a limiting stock at least {low / max(top, 1e-12):.2g} times "
                "stronger, a longer cuvette, or larger pipettes",
            )
        ]
    if bottom > high:
        return [
            Check(
                "design-feasibility",
                "fail",
                f"the weakest mixture the shelf can make reads {bottom:.3f}, above the window's "
                f"{high:g}: dilute the limiting stock or add a smaller pipette",
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


def _epsilon_relative_u(
    inputs: PlanInputs, candidates: CandidateSet, standards: Sequence[int]
) -> float:
    """u(eps)/eps of a standard curve through the origin from reading noise alone.

    eps = sum c A / (b sum c^2) gives u(eps) = u(A) sqrt(sum c^2) / (b sum c^2) (GUM,
    JCGM 100:2008, eq. 10), so u(eps)/eps = u(A) / sqrt(sum A_i^2) for readings A_i = eps b c_i.
    """
    if not standards:
        return 0.0
    readings = candidates.evaluation.true_absorbance[np.array(standards)]
    total = float(np.sqrt(np.sum(readings**2)))
    return inputs.instrument.absorbance_sd / total if total > 0 else 0.0


def design_recipes(
    inputs: PlanInputs,
    objective: Objective | None = None,
    *,
    candidates: CandidateSet | None = None,
    allowed: NDArray[np.bool_] | None = None,
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

    Returns
    -------
    Design
        With the design's feasibility findings; verification and prediction follow in
        :func:`planner.pipeline.design_plan`.
    """
    if candidates is None:
        candidates = candidate_set(inputs)
    standards = choose_standards(inputs, candidates, allowed)
    used = ((standards.blank,) if standards.blank >= 0 else ()) + standards.standards
    if objective is None:
        objective = mean_K_objective(_epsilon_relative_u(inputs, candidates, standards.standards))
    tests = choose_tests(inputs, candidates, exclude=used, objective=objective, allowed=allowed)

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
        notes.append(
            f"Test mixtures chosen to minimise the predicted u(K)/K of the mean K "
            f"({100 * tests.objective:.2f} %) among {tests.eligible} eligible mixtures."
        )
    else:
        notes.append("No test mixture met the window and bound-fraction constraints.")
    return Design(
        inputs=inputs,
        mixtures=tuple(mixtures),
        totals=totals,
        preparations=preparations(inputs, totals),
        checks=tuple(_feasibility(inputs, candidates, len(standards.standards))),
        notes=tuple(notes),
        objective=float(tests.objective) if np.isfinite(tests.objective) else None,
    )
