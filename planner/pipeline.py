"""The pipeline: design -> prediction -> verification, each stage run once.

Every command and the public API go through here, so a number on any screen, sheet or JSON
document comes from one stage, computed once:

- :func:`planner.design.plan.design_recipes` chooses the recipes (and nothing else);
- :func:`planner.predict.uncertainty.propagate` predicts the all-bound analysis's result and
  every mixture's reading uncertainty u(A), once, on the final mixtures (all blanks
  included); the plan keeps that whole prediction (:attr:`planner.result.Plan.uncertainty`);
- :func:`planner.verify.verify_plan` re-checks the finished recipes from first principles.

The layers below never call upward: ``design`` imports neither ``predict`` nor ``verify``;
variants receive :func:`design_plan` as a callable.
"""

from __future__ import annotations

import dataclasses
import functools
import math
from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from planner.chem.constants import bench_K
from planner.design.candidates import CandidateSet
from planner.design.mixtures import Objective
from planner.design.plan import SharedWork, design_recipes
from planner.inputs import PlanInputs
from planner.result import (
    ROLES,
    Check,
    GlobalFitPrediction,
    Mixture,
    Plan,
    Prediction,
    UncertaintyResult,
)

if TYPE_CHECKING:  # the variants' module is imported when variants are made
    from planner.design.variants import VariantSet

__all__ = [
    "combined_plan",
    "design_plan",
    "design_variants",
    "meaningless_numbers",
    "predict_mixtures",
]

#: Name of the check that a plan's predicted numbers mean something.
PREDICTION_CHECK = "prediction-meaningful"


def _all_finite(value: object) -> bool:
    """True when every number in a (nested) dataclass, tuple, dict or float is finite."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return all(_all_finite(getattr(value, f.name)) for f in dataclasses.fields(value))
    if isinstance(value, (tuple, list)):
        return all(_all_finite(v) for v in value)
    if isinstance(value, dict):
        return all(_all_finite(v) for v in value.values())
    if isinstance(value, float):
        return math.isfinite(value)
    return True


def predict_mixtures(
    inputs: PlanInputs, mixtures: tuple[Mixture, ...]
) -> tuple[
    tuple[Mixture, ...], UncertaintyResult | None, Prediction | None, GlobalFitPrediction | None
]:
    """The prediction stage: every mixture's u(A), and both analyses' predicted results.

    Parameters
    ----------
    inputs
        The validated plan.
    mixtures
        The designed mixtures (``u_absorbance`` not yet filled).

    Returns
    -------
    tuple
        (the mixtures with ``u_absorbance`` from the first-order budget, the whole budget or
        None when the plan cannot be analysed, the all-bound analysis's prediction or None
        when it has no finite result, the global fit's or None likewise).
    """
    from planner.predict.uncertainty import (
        global_fit_prediction_from,
        prediction_from,
        propagate,
        reading_uncertainties,
    )

    if not mixtures:
        return mixtures, None, None, None
    roles = {m.role for m in mixtures}
    result: UncertaintyResult | None = None
    prediction: Prediction | None = None
    fitted: GlobalFitPrediction | None = None
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if set(ROLES) <= roles and inputs.excess is not None:
            result = propagate(inputs, mixtures)
            per_mixture = result.mixtures
            # A test whose predicted product equals a reagent's total makes the 1:1 expression
            # divide by zero: that analysis then has no prediction to offer (the global fit
            # may still have one), so the plan carries none rather than an infinity.
            candidate = prediction_from(result)
            prediction = candidate if _all_finite(candidate) else None
            fit = global_fit_prediction_from(result)
            fitted = fit if fit is not None and _all_finite(fit) else None
            if prediction is None and fitted is None:
                result = None
        else:
            per_mixture = reading_uncertainties(inputs, mixtures)
    by_id = {m.id: m.u_absorbance for m in per_mixture}
    filled = tuple(dataclasses.replace(m, u_absorbance=by_id[m.id]) for m in mixtures)
    return filled, result, prediction, fitted


def meaningless_numbers(prediction: Prediction) -> list[str]:
    """What in a prediction would print as a meaningless number.

    A formation constant, a molar absorptivity and their uncertainties are positive and finite;
    so is every end of a range a class is told to expect for them. A zero or negative K (a
    test whose predicted product exceeds what the 1:1 expression allows, or a range wider
    than the value) says that the analysis cannot determine K on this plan.

    Returns
    -------
    list of str
        One phrase per problem, empty when every number means something.
    """
    problems: list[str] = []

    def positive(value: float | None, what: str) -> None:
        if value is not None and not (math.isfinite(value) and value > 0):
            problems.append(f"{what} would be {value:.4g}")

    positive(prediction.epsilon, "eps")
    positive(prediction.u_epsilon, "u(eps)")
    positive(prediction.K, "the mean K")
    positive(prediction.u_K, "u(K)")
    if prediction.epsilon_ci95 is not None:
        positive(prediction.epsilon_ci95[0], "the low end of the 95 % range of eps")
    if prediction.K_ci95 is not None:
        positive(prediction.K_ci95[0], "the low end of the 95 % range of K")
    for n, (k, u) in enumerate(zip(prediction.K_per_test, prediction.u_K_per_test, strict=False)):
        positive(k, f"K from test {n + 1}")
        positive(u, f"u(K) of test {n + 1}")
    for n, (low, _) in enumerate(prediction.K_per_test_ci95):
        positive(low, f"the low end of the 95 % range of K from test {n + 1}")
    return problems


def _global_fit_problems(fitted: GlobalFitPrediction) -> list[str]:
    """What in the global fit's prediction would print as a meaningless number."""
    return [
        f"{what} would be {value:.4g}"
        for what, value in (
            ("the global fit's eps", fitted.epsilon),
            ("its u(eps)", fitted.u_epsilon),
            ("the global fit's K", fitted.K),
            ("its u(K)", fitted.u_K),
            ("the low end of its 95 % range of K", fitted.K_ci95[0]),
            ("the low end of its 95 % range of eps", fitted.epsilon_ci95[0]),
        )
        if not (math.isfinite(value) and value > 0)
    ]


def _shown(problems: list[str]) -> str:
    return "; ".join(problems[:4]) + (
        f"; and {len(problems) - 4} more" if len(problems) > 4 else ""
    )


# A test whose free share of some reagent is below this binds essentially all of it: its
# reading follows the stoichiometry, and K moves it by less than the reading noise.
_SATURATED_FREE_SHARE = 0.01
# A test binding less than this share of its limiting reagent hardly forms the product.
_FAINT_BOUND = 0.05


def _fit_fix(inputs: PlanInputs, mixtures: Sequence[Mixture]) -> str:
    """What to change when the global fit cannot tell K, read from the tests' speciation.

    Where every test binds essentially all of one of its reagents, the readings follow the
    stoichiometry and hold no K: K is too large for these concentrations (it shows only where
    K times a free concentration is near 1). Where no test forms much product, K is too small
    for them. Otherwise the tests are too few or too alike.
    """
    tests = [m for m in mixtures if m.role == "test"]
    components = inputs.reaction.components

    def least_free_share(m: Mixture) -> float:
        shares = [
            m.equilibrium_M.get(c, 0.0) / m.initial_M[c]
            for c in components
            if m.initial_M.get(c, 0.0) > 0
        ]
        return min(shares, default=1.0)

    if tests and all(least_free_share(m) < _SATURATED_FREE_SHARE for m in tests):
        k = bench_K(inputs)
        where = (
            f" (near 1/K = {1.0 / k:.2g} mol/L of free reagent for this 1:1 product)"
            if sum(inputs.measured_species.formula.values()) == 2
            else ""
        )
        return (
            f"every test binds over {100 * (1 - _SATURATED_FREE_SHARE):g} % of one of its "
            f"reagents, so its reading follows the stoichiometry, not K: K = "
            f"{k:.3g} is too large to measure at these concentrations, as K "
            f"shows only where K times a free concentration is near 1{where}. Use much more "
            "dilute stocks (with a longer path or a more strongly absorbing product), or "
            "measure K by competition with a weaker ligand"
        )
    if tests and all(m.bound_fraction < _FAINT_BOUND for m in tests):
        return (
            f"no test binds {100 * _FAINT_BOUND:g} % of its limiting reagent: K is too small "
            "for these concentrations; use a more concentrated stock of the excess reagent"
        )
    return "ask for more tests or a wider bound_fraction_range"


def _prediction_check(
    prediction: Prediction | None,
    fitted: GlobalFitPrediction | None,
    analysis: str,
    fit_fix: str = "ask for more tests or a wider bound_fraction_range",
) -> tuple[Prediction | None, GlobalFitPrediction | None, tuple[Check, ...]]:
    """Keep only predictions whose numbers all mean something, and say so in one check.

    The analysis the plan is designed for must give a meaningful prediction (else the check
    fails); the other one's is withheld when it would not, and the check says so.
    ``fit_fix`` is what the check tells to change when the global fit fails
    (:func:`_fit_fix`).
    """
    if prediction is None and fitted is None:
        return None, None, ()
    bound_problems = (
        meaningless_numbers(prediction) if prediction is not None else ["no finite value"]
    )
    fit_problems = _global_fit_problems(fitted) if fitted is not None else ["no finite value"]
    kept_bound = prediction if not bound_problems else None
    kept_fit = fitted if not fit_problems else None
    if analysis == "all-bound":
        if not bound_problems:
            return (
                kept_bound,
                kept_fit,
                (Check(PREDICTION_CHECK, "pass", "every predicted K, eps and range is positive"),),
            )
        return (
            None,
            kept_fit,
            (
                Check(
                    PREDICTION_CHECK,
                    "fail",
                    "the all-bound analysis of this plan would print meaningless numbers "
                    f"({_shown(bound_problems)}), so the answer key carries none: the standards' "
                    "limiting reagent is too far from all bound or the tests too close to it; "
                    "raise the excess in the standards, choose tests with more free limiting "
                    'reagent, or set design.analysis = "global-fit"',
                ),
            ),
        )
    if fit_problems:
        return (
            kept_bound,
            None,
            (
                Check(
                    PREDICTION_CHECK,
                    "fail",
                    f"the global fit of this plan would print meaningless numbers "
                    f"({_shown(fit_problems)}): its standards and tests do not separate eps from "
                    f"K; {fit_fix}",
                ),
            ),
        )
    withheld = (
        "; the all-bound analysis's numbers are withheld, they would mean nothing here"
        if bound_problems
        else ""
    )
    return (
        kept_bound,
        kept_fit,
        (
            Check(
                PREDICTION_CHECK,
                "pass",
                f"every predicted K, eps and range of the global fit is positive{withheld}",
            ),
        ),
    )


def design_plan(
    inputs: PlanInputs,
    objective: Objective | None = None,
    *,
    candidates: CandidateSet | None = None,
    allowed: NDArray[np.bool_] | None = None,
    shared: SharedWork | None = None,
) -> Plan:
    """Design, predict and verify a complete plan.

    Parameters
    ----------
    inputs
        Validated plan inputs.
    objective
        Scores a set of test mixtures (lower is better); see
        :func:`planner.design.plan.design_recipes`.
    candidates
        Candidates already enumerated for these inputs (variants reuse one set).
    allowed
        Optional mask of the candidates standards and tests may use.
    shared
        Design work shared with other plans of the same inputs and candidates (variants).

    Returns
    -------
    Plan
        With the design's feasibility findings and the verifier's checks; failed checks say
        what binds. ``prediction``, ``uncertainty`` and every ``u_absorbance`` come from one
        run of the prediction stage.
    """
    from planner.verify import verify_plan

    design = design_recipes(
        inputs, objective, candidates=candidates, allowed=allowed, shared=shared
    )
    mixtures, uncertainty, prediction, fitted = predict_mixtures(inputs, design.mixtures)
    prediction, fitted, meaningful = _prediction_check(
        prediction, fitted, design.analysis, _fit_fix(inputs, mixtures)
    )
    checks = (
        design.checks
        + tuple(verify_plan(inputs, mixtures, design.totals, analysis=design.analysis))
        + meaningful
    )
    return Plan(
        inputs=inputs,
        mixtures=mixtures,
        checks=checks,
        prediction=prediction,
        uncertainty=uncertainty,
        global_fit=fitted,
        # The rest as the design stage gave it.
        totals=design.totals,
        preparations=design.preparations,
        notes=design.notes,
        design_objective=design.objective,
        analysis=design.analysis,
    )


def design_variants(
    inputs: PlanInputs,
    sections: int,
    rng: np.random.Generator,
    progress: Callable[[int, int], None] | None = None,
) -> VariantSet:
    """Verified per-section plans of equal difficulty, no test recipe in two sections when the
    shelf allows (see :func:`planner.design.variants.design_variants`), each made by
    :func:`design_plan`; the combined plan carries ``section-distinctness``."""
    from planner.design import variants

    # Every section is designed from one candidate set: the work that does not depend on the
    # section's mask (standards, objectives) is done once.
    make_plan = functools.partial(_make_section_plan, shared=SharedWork())
    found = variants.design_variants(inputs, sections, rng, make_plan, progress)
    if not found.plans:
        return found
    distinct = variants.distinctness_check(found)
    return dataclasses.replace(
        found, combined=combined_plan(found.plans, session_checks=(distinct,))
    )


def _make_section_plan(
    one: PlanInputs,
    candidates: CandidateSet,
    allowed: NDArray[np.bool_] | None,
    *,
    shared: SharedWork,
) -> Plan:
    return design_plan(one, candidates=candidates, allowed=allowed, shared=shared)


def combined_plan(plans: tuple[Plan, ...], *, session_checks: tuple[Check, ...] = ()) -> Plan:
    """A plan standing for every section together, for the combined prep-room sheet.

    Its session counts all sections, its totals are the sections' totals added up, its
    preparation is made for those totals, and its checks are each section's checks that did
    not pass, prefixed with the section, followed by ``stock-inventory`` on the combined totals
    (each section may fit the stock on the shelf while the whole session does not), then
    ``session_checks`` (the variants' ``section-distinctness``).
    """
    from planner.design.logistics import combined_totals, preparations
    from planner.verify import inventory_check

    first = plans[0]
    inputs = dataclasses.replace(
        first.inputs, session=dataclasses.replace(first.inputs.session, sections=len(plans))
    )
    totals = combined_totals([p.totals for p in plans], inputs)
    session = inventory_check(inputs, totals)
    sections = [
        Check(c.name, c.status, f"section {n}: {c.detail}")
        for n, p in enumerate(plans, start=1)
        for c in p.checks
        if c.status != "pass"
    ]
    whole = Check(session.name, session.status, f"all sections together: {session.detail}")
    checks = (*sections, whole, *session_checks)
    return dataclasses.replace(
        first,
        inputs=inputs,
        totals=totals,
        preparations=preparations(inputs, totals),
        checks=checks,
    )
