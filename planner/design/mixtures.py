"""Test mixtures: informative about K, inside the window, spread over bound fraction.

K is determined best where the limiting reagent is neither mostly free nor mostly bound
(bound fraction roughly 0.2 to 0.8: Deranleau, J. Am. Chem. Soc. 91 (1969) 4044-4049,
doi:10.1021/ja01043a003; Weber, Adv. Protein Chem. 29 (1975) 1-83, from memory). The test set
is chosen to minimise a pluggable objective, by default the first-order predicted relative
standard uncertainty of the mean K under the all-bound analysis, subject to every reading lying
in the window, every bound fraction inside ``design.bound_fraction_range``, and the set
spanning at least ``design.bound_fraction_span`` of bound fraction, so that the constancy of K
across conditions is tested and a wrong model shows.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Sequence

import numpy as np
from numpy.typing import NDArray

from planner.analysis import (
    Layout,
    all_bound_epsilon,
    all_bound_K,
    all_bound_K_log_sensitivities,
    global_fit_jacobian,
)
from planner.chem.constants import bench_K
from planner.design._arrays import distinct
from planner.design.candidates import CandidateSet
from planner.forward import predict_readings
from planner.inputs import PlanInputs
from planner.lab.bench import reading_sd
from planner.records import record

__all__ = [
    "PRIOR_NODES",
    "PRIOR_WEIGHTS",
    "GlobalFitObjective",
    "MeanKObjective",
    "MeanSquaredErrorObjective",
    "Objective",
    "RobustGlobalFitObjective",
    "TestsChoice",
    "choose_tests",
    "eligible_for_tests",
    "first_order_relative_u_K",
    "global_fit_objective",
    "mean_K_objective",
    "mse_objective",
    "own_scores",
    "per_mixture_relative_u_K",
    "robust_global_fit_objective",
]

#: An objective scores a set of candidate indices; lower is better.
Objective = Callable[[PlanInputs, CandidateSet, NDArray[np.int64]], float]

# Candidates ranked by their own u(K)/K that the set search draws from (bounded for speed).
_POOL = 300
#: Share of the window kept free above the test readings where the shelf allows (common
#: practice): an optimiser that favours strong readings otherwise packs every test just
#: 2 u(A) under the top, where stray light and detector non-linearity begin and where a
#: class's readings, which spread more than one bench's u(A) when a stock or a technique is
#: off, leave the window first. Readings inside it are used only when fewer eligible
#: mixtures than the tests asked would remain without them.
TEST_HEADROOM = 0.10
# Starting sets the local search improves (the best distinct ones of the pair enumeration).
_STARTS = 8


@record
class TestsChoice:
    """The chosen test mixtures.

    Attributes
    ----------
    tests
        Candidate indices, ascending bound fraction.
    objective
        Objective value of the set (for the default: predicted relative SD of mean K).
    span
        Bound-fraction span covered [unitless].
    eligible
        Candidates that met the window and bound-fraction range [unitless].
    headroom
        True when the tests keep the window's top tenth free (:data:`TEST_HEADROOM`); False
        when too few mixtures read below it and the 2 u(A) margin alone bounds them.
    """

    tests: tuple[int, ...]
    objective: float
    span: float
    eligible: int
    headroom: bool = True


def per_mixture_relative_u_K(
    inputs: PlanInputs, candidates: CandidateSet, indices: NDArray[np.int64]
) -> NDArray[np.float64]:
    """First-order relative standard uncertainty of K from each test mixture alone.

    Notes
    -----
    The all-bound analysis takes x = A_net/(b eps) for the product and
    K = x / ((M0 - x)(L0 - x)). Its relative sensitivities are (GUM, JCGM 100:2008, eq. 10,
    in relative form) d ln K/d ln x = 1 + x/(M0 - x) + x/(L0 - x),
    d ln K/d ln M0 = -M0/(M0 - x) and d ln K/d ln L0 = -L0/(L0 - x); u(x)/x comes from the
    reading noise u(A)/A_net (heteroscedastic, :func:`planner.lab.bench.reading_sd`), and
    u(M0), u(L0) from stocks and deliveries. The molar
    absorptivity's own uncertainty is common to all tests and is left to the prediction.

    Returns
    -------
    NDArray[np.float64]
        u(K)/K per candidate, shape (len(indices),) [unitless]; inf where undefined.
    """
    ev = candidates.evaluation
    excess, limiting = _excess_and_limiting(inputs)
    s_x, s_m, s_l = _K_log_sensitivities(inputs, candidates, indices)
    a_net = np.maximum(ev.true_absorbance[indices], 1e-12)
    u_x = reading_sd(inputs.instrument, inputs.bench, ev.absorbance[indices]) / a_net
    u_m = candidates.u_relative_total[indices, excess]
    u_l = candidates.u_relative_total[indices, limiting]
    result: NDArray[np.float64] = np.sqrt((s_x * u_x) ** 2 + (s_m * u_m) ** 2 + (s_l * u_l) ** 2)
    return result


def first_order_relative_u_K(
    inputs: PlanInputs, candidates: CandidateSet, indices: NDArray[np.int64]
) -> float:
    """Relative SD of the mean of K over the set, tests' own inputs only (independent)."""
    per = per_mixture_relative_u_K(inputs, candidates, indices)
    return float(np.sqrt(np.sum(per**2)) / max(len(indices), 1))


class MeanKObjective:
    """Default objective: predicted relative SD of the mean K, molar absorptivity included.

    Notes
    -----
    GUM law of propagation (JCGM 100:2008, eq. 13, correlated inputs) for the mean of the
    tests' K: the tests' own inputs are independent, giving (1/n^2) sum_i u_i^2, while the
    molar absorptivity from the standards is shared by every test, so its term adds
    coherently, (u(eps)/eps * mean_i d ln K_i/d ln x_i)^2, since x = A/(b eps) makes
    d ln K/d ln eps = -d ln K/d ln x.

    Parameters
    ----------
    epsilon_relative_u
        u(eps)/eps of the standard curve [unitless].
    """

    def __init__(self, epsilon_relative_u: float) -> None:
        self.epsilon_relative_u = epsilon_relative_u

    def combine(
        self, sum_own_squared: NDArray[np.float64], sum_sensitivity: NDArray[np.float64], n: int
    ) -> NDArray[np.float64]:
        """Objective from the sums over a set's members (vectorised over candidate sets)."""
        result: NDArray[np.float64] = np.hypot(
            np.sqrt(sum_own_squared) / n, self.epsilon_relative_u * sum_sensitivity / n
        )
        return result

    def __call__(
        self, inputs: PlanInputs, candidates: CandidateSet, indices: NDArray[np.int64]
    ) -> float:
        return float(self.combine(*_set_sums(inputs, candidates, indices)))


def mean_K_objective(epsilon_relative_u: float) -> MeanKObjective:
    """The default objective for a standard curve with u(eps)/eps = ``epsilon_relative_u``."""
    return MeanKObjective(epsilon_relative_u)


class GlobalFitObjective:
    """Objective of a plan analysed by the global fit: its predicted u(K)/K from the readings.

    Notes
    -----
    The global fit is unweighted least squares on (eps, log10 K), so to first order its
    covariance is the sandwich (J^T J)^-1 (J^T S J) (J^T J)^-1, J the rows of d(net reading)/d
    (eps, log10 K) of the standards and tests and S the diagonal of their reading variances
    u(A)^2 (the candidates' screening estimate, composition included); u(K)/K = ln 10
    u(log10 K). Minimising it is c-optimal design for log10 K (Atkinson, Donev and Tobias,
    Optimum Experimental Designs, with SAS, 2007, ch. 10, from memory). Both sums are additive
    over mixtures, so a swap of one test is scored for every candidate at once. Errors shared
    by several mixtures (a stock's concentration) are left to the prediction stage's budget.

    Parameters
    ----------
    rows
        J of every candidate, shape (n_candidates, 2).
    variance
        u(A)^2 of every candidate, shape (n_candidates,).
    standards
        Candidate indices of the standards (their rows are in every set).
    """

    def __init__(
        self,
        rows: NDArray[np.float64],
        variance: NDArray[np.float64],
        standards: NDArray[np.int64],
    ) -> None:
        self.rows = rows
        self.variance = variance
        outer = rows[:, :, None] * rows[:, None, :]
        self.a = outer
        self.b = outer * variance[:, None, None]
        self.a_standards = outer[standards].sum(axis=0)
        self.b_standards = self.b[standards].sum(axis=0)

    def combine(self, a: NDArray[np.float64], b: NDArray[np.float64]) -> NDArray[np.float64]:
        """u(K)/K from the summed information matrices, shape (..., 2, 2) (vectorised)."""
        entries_a = (a[..., 0, 0], a[..., 0, 1], a[..., 1, 0], a[..., 1, 1])
        return _sandwich_u(entries_a, (b[..., 0, 0], b[..., 0, 1], b[..., 1, 1]))

    def own(self, indices: NDArray[np.int64]) -> NDArray[np.float64]:
        """u(K)/K each candidate would give with the standards alone beside it."""
        return self.combine(self.a_standards + self.a[indices], self.b_standards + self.b[indices])

    def swaps_within(self, pool: NDArray[np.int64]) -> Callable[[list[int]], NDArray[np.float64]]:
        """Objective after replacing each member by each pool candidate, shape (n_members,
        n_pool), for members given as positions in ``pool`` (see _swap_search)."""
        stacked = _stacked_swaps([self], pool)

        def swaps(members: list[int]) -> NDArray[np.float64]:
            single: NDArray[np.float64] = stacked(members)[0]
            return single

        return swaps

    def many(self, sets: NDArray[np.int64]) -> NDArray[np.float64]:
        """The objective of each row of ``sets`` (candidate indices, shape (n_sets, n)) at
        once; each value is the one :meth:`__call__` gives for that row."""
        a = self.a_standards + self.a[sets].sum(axis=1)
        b = self.b_standards + self.b[sets].sum(axis=1)
        return self.combine(a, b)

    def __call__(
        self, inputs: PlanInputs, candidates: CandidateSet, indices: NDArray[np.int64]
    ) -> float:
        a = self.a_standards + self.a[indices].sum(axis=0)
        b = self.b_standards + self.b[indices].sum(axis=0)
        return float(self.combine(a, b))


def _stacked_swaps(
    nodes: Sequence[GlobalFitObjective], pool: NDArray[np.int64]
) -> Callable[[list[int]], NDArray[np.float64]]:
    """Every single swap's objective at each node at once, shape (n_nodes, n_members, n_pool),
    for members given as positions in ``pool``.

    The pool's matrix entries are taken out once; each call adds and takes away entry by
    entry, the same double arithmetic as on whole (n_members, n_pool, 2, 2) arrays per node.
    """
    entries = [(0, 0), (0, 1), (1, 0), (1, 1)]
    a_pool = np.stack([node.a[pool] for node in nodes])
    b_pool = np.stack([node.b[pool] for node in nodes])
    a_columns = [np.ascontiguousarray(a_pool[:, :, i, j])[:, None, :] for i, j in entries]
    b_columns = [np.ascontiguousarray(b_pool[:, :, i, j])[:, None, :] for i, j in entries]

    def swaps(members: list[int]) -> NDArray[np.float64]:
        a_members, b_members = a_pool[:, members], b_pool[:, members]
        a_set = np.stack(
            [node.a_standards + a_members[k].sum(axis=0) for k, node in enumerate(nodes)]
        )
        b_set = np.stack(
            [node.b_standards + b_members[k].sum(axis=0) for k, node in enumerate(nodes)]
        )
        a = [
            (a_set[:, i, j][:, None] - a_members[:, :, i, j])[:, :, None] + column
            for (i, j), column in zip(entries, a_columns, strict=True)
        ]
        b = [
            (b_set[:, i, j][:, None] - b_members[:, :, i, j])[:, :, None] + column
            for (i, j), column in zip(entries, b_columns, strict=True)
        ]
        return _sandwich_u(a, (b[0], b[1], b[3]))

    return swaps


def _sandwich_u(
    a: Sequence[NDArray[np.float64]], b: Sequence[NDArray[np.float64]]
) -> NDArray[np.float64]:
    """u(K)/K from the entries of the summed matrices A and B (see GlobalFitObjective):
    ``a`` = (A00, A01, A10, A11), ``b`` = (B00, B01, B11), B being symmetric."""
    a00, a01, a10, a11 = a
    b00, b01, b11 = b
    det = a00 * a11 - a01 * a10
    with np.errstate(divide="ignore", invalid="ignore"):
        # The (log10 K, log10 K) entry of A^-1 B A^-1, with A^-1 = adj(A)/det(A).
        r0 = -a10 / det
        r1 = a00 / det
        var = r0 * r0 * b00 + 2 * r0 * r1 * b01 + r1 * r1 * b11
        value = np.log(10.0) * np.sqrt(var)
    result: NDArray[np.float64] = np.where(np.isfinite(value) & (det > 0), value, np.inf)
    return result


def global_fit_objective(
    inputs: PlanInputs,
    candidates: CandidateSet,
    standards: tuple[int, ...],
    blank: int,
    *,
    at_plan_constants: bool = True,
) -> GlobalFitObjective:
    """The global fit's objective for tests added to these standards (see
    :class:`GlobalFitObjective`); the rows come from :func:`planner.analysis.global_fit_jacobian`
    with every candidate as a test, the blank's mean subtracted. ``at_plan_constants`` says
    that ``inputs`` has the constants the candidates were evaluated with, so their readings
    serve the Jacobian as they are (False at a shifted node of the prior of K)."""
    ev = candidates.evaluation
    limiting = inputs.reaction.components.index(inputs.design.limiting)
    excess = inputs.reaction.components.index(inputs.excess) if inputs.excess else limiting
    layout = Layout(
        totals_M=ev.total_M,
        blanks=np.array([blank] if blank >= 0 else [], dtype=np.int64),
        standards=np.array([], dtype=np.int64),
        tests=np.arange(candidates.size, dtype=np.int64),
        limiting=limiting,
        excess=excess,
        measured=inputs.measured,
        epsilon_true=inputs.measured_species.epsilon,
        K_true=bench_K(inputs),
    )
    rows = global_fit_jacobian(
        inputs.reaction,
        inputs.instrument,
        layout,
        readings=ev.readings() if at_plan_constants else None,
    )
    return GlobalFitObjective(rows, candidates.u_absorbance**2, np.array(standards, dtype=np.int64))


#: Nodes (in SDs of the prior of log10 K) and weights of the three-point Gauss-Hermite rule
#: for the mean over a normal prior: exact for polynomials up to degree 5 (Abramowitz and
#: Stegun, Handbook of Mathematical Functions, 1964, 25.4.46, from memory).
PRIOR_NODES = (-math.sqrt(3.0), 0.0, math.sqrt(3.0))
PRIOR_WEIGHTS = (1.0 / 6.0, 2.0 / 3.0, 1.0 / 6.0)


def _prior_reactions(inputs: PlanInputs) -> list[tuple[float, PlanInputs]]:
    """(shift of log10 K, the plan with the measured constant shifted) at each prior node."""
    sd = inputs.measured_species.log_beta_sd
    result = []
    for node in PRIOR_NODES:
        shift = node * sd
        species = list(inputs.reaction.species)
        measured = species[inputs.measured]
        species[inputs.measured] = dataclasses.replace(measured, log_beta=measured.log_beta + shift)
        reaction = dataclasses.replace(inputs.reaction, species=tuple(species))
        result.append((shift, dataclasses.replace(inputs, reaction=reaction)))
    return result


class MeanSquaredErrorObjective(MeanKObjective):
    """Predicted root mean squared error of the all-bound mean K, relative, over a prior of K.

    Notes
    -----
    MSE = bias^2 + variance (the mean squared error of an estimator; e.g. Casella and Berger,
    Statistical Inference, 2nd ed., 2002, section 7.3.1, from memory). The variance is the
    :class:`MeanKObjective`'s (heteroscedastic reading noise, stocks and deliveries of the
    tests, the shared eps). The bias of the mean K is the mean over the tests of each test's
    relative error on noise-free readings, with eps from the chosen standards on their own
    noise-free readings: the all-bound assumption's bias, which the variance alone ignores
    and which grows as tests crowd the top of the window. K itself is uncertain before the
    class measures it (``log_beta_sd`` of the measured species), and the bias depends on it;
    the objective takes the mean of the squared bias over a normal prior of log10 K by the
    three-point Gauss-Hermite rule (:data:`PRIOR_NODES`): the expected MSE a class meets
    ("pseudo-Bayesian" design; Chaloner and Verdinelli, Statistical Science 10 (1995) 273-304,
    from memory). The mean, not the worst case: a normal prior has no worst case, and over a
    truncated range the worst case designs for a tail alone, at the cost of the likely K.

    Parameters
    ----------
    epsilon_relative_u
        u(eps)/eps of the standard curve [unitless].
    bias
        Relative bias each candidate's K would add to the mean, per prior node, shape
        (n_nodes, n_candidates); inf where the candidate gives no K.
    """

    def __init__(self, epsilon_relative_u: float, bias: NDArray[np.float64]) -> None:
        super().__init__(epsilon_relative_u)
        self.bias = bias
        self.weights = np.array(PRIOR_WEIGHTS)

    def combine_mse(
        self,
        sum_own_squared: NDArray[np.float64],
        sum_sensitivity: NDArray[np.float64],
        sum_bias: NDArray[np.float64],
        n: int,
    ) -> NDArray[np.float64]:
        """sqrt(variance + mean over the prior of bias^2); ``sum_bias`` has the nodes first."""
        base = self.combine(sum_own_squared, sum_sensitivity, n)
        mean_square = np.tensordot(self.weights, (sum_bias / n) ** 2, axes=1)
        with np.errstate(invalid="ignore"):
            result: NDArray[np.float64] = np.sqrt(base**2 + mean_square)
        return np.where(np.isfinite(result), result, np.inf)

    def __call__(
        self, inputs: PlanInputs, candidates: CandidateSet, indices: NDArray[np.int64]
    ) -> float:
        own, sensitivity, n = _set_sums(inputs, candidates, indices)
        return float(self.combine_mse(own, sensitivity, self.bias[:, indices].sum(axis=1), n))


def mse_objective(
    inputs: PlanInputs,
    candidates: CandidateSet,
    standards: Sequence[int],
    blank: int,
    epsilon_relative_u: float,
) -> MeanSquaredErrorObjective:
    """The MSE objective of the all-bound analysis for tests beside these standards: each
    candidate's relative bias at every prior node (see :class:`MeanSquaredErrorObjective`)."""
    ev = candidates.evaluation
    components = inputs.reaction.components
    limiting = components.index(inputs.design.limiting)
    excess = components.index(inputs.excess) if inputs.excess is not None else limiting
    b = inputs.instrument.path_length_cm
    rows = np.array(standards, dtype=np.int64)
    bias = np.full((len(PRIOR_NODES), candidates.size), np.inf)
    k_bench = bench_K(inputs)
    for node, (shift, shifted) in enumerate(_prior_reactions(inputs)):
        readings = (
            ev.absorbance
            if shift == 0.0
            else predict_readings(shifted.reaction, inputs.instrument, ev.total_M).absorbance
        )
        net = readings - (readings[blank] if blank >= 0 else 0.0)
        if not rows.size:
            continue
        epsilon = all_bound_epsilon(ev.total_M[rows, limiting][None, :], net[rows][None, :], b)
        with np.errstate(divide="ignore", invalid="ignore"):
            k = np.asarray(
                all_bound_K(epsilon[0], ev.total_M[:, excess], ev.total_M[:, limiting], net, b),
                dtype=float,
            ).reshape(-1)
            relative = k / (k_bench * 10.0**shift) - 1.0
        bias[node] = np.where(np.isfinite(relative) & (k > 0), relative, np.inf)
    return MeanSquaredErrorObjective(epsilon_relative_u, bias)


class RobustGlobalFitObjective:
    """The global fit's predicted relative RMS error over a prior of K.

    The global fit is consistent: on noise-free readings it returns the plan's K, so to first
    order its MSE is its variance (:class:`GlobalFitObjective`), which depends on K through
    the design's sensitivities. The objective is sqrt of the variance's mean over the normal
    prior of log10 K (the three-point rule of :data:`PRIOR_NODES`; the mean rather than the
    worst case, as in :class:`MeanSquaredErrorObjective`).
    """

    def __init__(self, nodes: Sequence[GlobalFitObjective]) -> None:
        self.nodes = list(nodes)
        self.weights = PRIOR_WEIGHTS

    def _mean(self, values: Sequence[NDArray[np.float64]]) -> NDArray[np.float64]:
        variance = sum(w * v**2 for w, v in zip(self.weights, values, strict=True))
        result: NDArray[np.float64] = np.sqrt(np.asarray(variance, dtype=float))
        return result

    def own(self, indices: NDArray[np.int64]) -> NDArray[np.float64]:
        """Each candidate's score with the standards alone beside it."""
        return self._mean([node.own(indices) for node in self.nodes])

    def swaps_within(self, pool: NDArray[np.int64]) -> Callable[[list[int]], NDArray[np.float64]]:
        """Scores of every single swap of members given as positions in ``pool``."""
        stacked = _stacked_swaps(self.nodes, pool)

        def swaps(members: list[int]) -> NDArray[np.float64]:
            return self._mean(list(stacked(members)))

        return swaps

    def many(self, sets: NDArray[np.int64]) -> NDArray[np.float64]:
        """The objective of each row of ``sets`` at once (see GlobalFitObjective.many)."""
        return self._mean([node.many(sets) for node in self.nodes])

    def __call__(
        self, inputs: PlanInputs, candidates: CandidateSet, indices: NDArray[np.int64]
    ) -> float:
        return float(self._mean([np.array(n(inputs, candidates, indices)) for n in self.nodes]))


def robust_global_fit_objective(
    inputs: PlanInputs, candidates: CandidateSet, standards: tuple[int, ...], blank: int
) -> RobustGlobalFitObjective:
    """:func:`global_fit_objective` at every node of the prior of K."""
    return RobustGlobalFitObjective(
        [
            global_fit_objective(
                shifted, candidates, standards, blank, at_plan_constants=shift == 0.0
            )
            for shift, shifted in _prior_reactions(inputs)
        ]
    )


def _x_sensitivity(
    inputs: PlanInputs, candidates: CandidateSet, indices: NDArray[np.int64]
) -> NDArray[np.float64]:
    """d ln K/d ln x = 1 + x/(M0 - x) + x/(L0 - x) of each test (see per_mixture_relative_u_K)."""
    return _K_log_sensitivities(inputs, candidates, indices)[0]


def _set_sums(
    inputs: PlanInputs, candidates: CandidateSet, indices: NDArray[np.int64]
) -> tuple[NDArray[np.float64], NDArray[np.float64], int]:
    """A set's sum of own (u(K)/K)^2, its sum of d ln K/d ln x and its size (at least 1)."""
    own = per_mixture_relative_u_K(inputs, candidates, indices)
    sensitivity = _x_sensitivity(inputs, candidates, indices)
    return np.array(np.sum(own**2)), np.array(np.sum(sensitivity)), max(len(indices), 1)


def _excess_and_limiting(inputs: PlanInputs) -> tuple[int, int]:
    """Columns of the component in excess and of the limiting one (the same when none is)."""
    components = inputs.reaction.components
    limiting = components.index(inputs.design.limiting)
    excess = components.index(inputs.excess) if inputs.excess is not None else limiting
    return excess, limiting


def _K_log_sensitivities(
    inputs: PlanInputs, candidates: CandidateSet, indices: NDArray[np.int64]
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """d ln K/d ln x, d ln M0 and d ln L0 of each candidate (all_bound_K_log_sensitivities)."""
    ev = candidates.evaluation
    excess, limiting = _excess_and_limiting(inputs)
    return all_bound_K_log_sensitivities(
        ev.species_M[indices, inputs.measured],
        ev.total_M[indices, excess],
        ev.total_M[indices, limiting],
    )


def _each_swap(
    score: Callable[[list[int], int], NDArray[np.float64]],
) -> Callable[[list[int]], NDArray[np.float64]]:
    """Rows of ``score(others, n)`` for each member left out in turn (see _swap_search).

    ``others`` are the members kept when one slot is swapped, ``n`` the size of the set.
    """

    def swaps(members: list[int]) -> NDArray[np.float64]:
        n = len(members)
        return np.array([score(members[:slot] + members[slot + 1 :], n) for slot in range(n)])

    return swaps


def _mean_K_swaps(
    objective: MeanKObjective, own: NDArray[np.float64], sensitivity: NDArray[np.float64]
) -> Callable[[list[int]], NDArray[np.float64]]:
    """Scores of every single swap of a set for the default objective (see _swap_search)."""
    return _each_swap(
        lambda others, n: objective.combine(
            np.sum(own[others] ** 2) + own**2, np.sum(sensitivity[others]) + sensitivity, n
        )
    )


def _mse_swaps(
    objective: MeanSquaredErrorObjective,
    pool: NDArray[np.int64],
    own: NDArray[np.float64],
    sensitivity: NDArray[np.float64],
) -> Callable[[list[int]], NDArray[np.float64]]:
    """Scores of every single swap of a set for the MSE objective (see _swap_search)."""
    bias = objective.bias[:, pool]
    return _each_swap(
        lambda others, n: objective.combine_mse(
            np.sum(own[others] ** 2) + own**2,
            np.sum(sensitivity[others]) + sensitivity,
            bias[:, others].sum(axis=1)[:, None] + bias,
            n,
        )
    )


def _swap_search(
    swaps: Callable[[list[int]], NDArray[np.float64]],
    current: float,
    members: list[int],
    fraction: NDArray[np.float64],
    span: float,
    gap: float,
    seen: dict[tuple[int, ...], tuple[NDArray[np.float64], NDArray[np.int64]]] | None = None,
) -> list[int]:
    """Improve a test set by single swaps until none lowers the objective (local search).

    ``swaps(members)`` scores replacing each member by each pool candidate at once, shape
    (n_members, n_pool); a swap must keep the bound-fraction span and the members' separation.
    ``seen`` keeps each member list's best admissible swap per slot, for searches from other
    starts over the same pool that pass through the same sets.
    """
    n = len(members)
    members = list(members)
    for _ in range(4 * n):
        key = tuple(members)
        known = seen.get(key) if seen is not None else None
        if known is None:
            known = _best_swaps(swaps(members), members, fraction, span, gap)
            if seen is not None:
                seen[key] = known
        best_values, picks = known
        # The lowest improving swap; between equal ones the first slot (strict comparison).
        improving = best_values < current * (1 - 1e-12)
        if not improving.any():
            break
        slot = int(np.argmin(np.where(improving, best_values, np.inf)))
        current = float(best_values[slot])
        members[slot] = int(picks[slot])
    return members


def _best_swaps(
    scores: NDArray[np.float64],
    members: list[int],
    fraction: NDArray[np.float64],
    span: float,
    gap: float,
) -> tuple[NDArray[np.float64], NDArray[np.int64]]:
    """Each slot's best admissible swap: its score and the pool position swapped in."""
    n = len(members)
    # others[slot] are the members kept when that slot is swapped.
    keep = ~np.eye(n, dtype=bool)
    f_members = fraction[members]
    f_others = np.broadcast_to(f_members, (n, n))
    # Every slot at once: spread of the others with each pool candidate added, and the
    # candidate's distance from the nearest other member.
    high = np.max(f_others, axis=1, where=keep, initial=-np.inf)
    low = np.min(f_others, axis=1, where=keep, initial=np.inf)
    spread = np.maximum(high[:, None], fraction) - np.minimum(low[:, None], fraction)
    # The nearest other member: the nearest member, unless that is the slot swapped out,
    # then the second nearest (the same values as a minimum over the others).
    distance = np.abs(fraction[:, None] - f_members[None, :])
    closest = np.argmin(distance, axis=1)
    ordered = np.sort(distance, axis=1)
    second = ordered[:, 1] if n > 1 else np.full(fraction.shape, np.inf)
    nearest = np.where(np.arange(n)[:, None] == closest[None, :], second, ordered[:, 0])
    admissible = (spread >= span - 1e-12) & (nearest >= gap)
    admissible[:, members] = False
    values = np.where(admissible, scores, np.inf)
    picks = np.argmin(values, axis=1)
    return values[np.arange(n), picks], picks


def _own(
    inputs: PlanInputs,
    candidates: CandidateSet,
    indices: NDArray[np.int64],
    objective: Objective,
) -> NDArray[np.float64]:
    """Each candidate's own score, to rank the pool: u(K)/K it gives beside the standards."""
    if isinstance(objective, (GlobalFitObjective, RobustGlobalFitObjective)):
        return objective.own(indices)
    return per_mixture_relative_u_K(inputs, candidates, indices)


def own_scores(
    inputs: PlanInputs, candidates: CandidateSet, objective: Objective
) -> NDArray[np.float64]:
    """Every candidate's own score under the objective, shape (n,) [unitless]: what
    :func:`choose_tests` ranks its pool by, computed once for many searches (variants).

    Element by element the same values as for any subset; candidates that give no K (no
    limiting reagent, nothing bound) score inf or NaN and are never eligible as tests.
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return _own(inputs, candidates, np.arange(candidates.size, dtype=np.int64), objective)


def eligible_for_tests(
    inputs: PlanInputs,
    candidates: CandidateSet,
    *,
    exclude: Sequence[int] = (),
    allowed: NDArray[np.bool_] | None = None,
) -> tuple[NDArray[np.bool_], bool]:
    """The candidates eligible as test mixtures, shape (n,), and whether the window's top
    tenth is kept free (:data:`TEST_HEADROOM`).

    Eligible: every reading +/- 2 u(A) inside the window, so a real bench stays inside it;
    the bound fraction inside ``design.bound_fraction_range``; no padded stock; not in
    ``exclude`` and inside ``allowed``. Of those, only the ones reading below the top tenth
    when at least ``design.tests`` of them do.
    """
    low, high = inputs.instrument.absorbance_window
    ev = candidates.evaluation
    f_low, f_high = inputs.design.bound_fraction_range
    margin = 2.0 * candidates.u_absorbance
    eligible: NDArray[np.bool_] = (
        (ev.absorbance >= low + margin)
        & (ev.absorbance <= high - margin)
        & (ev.bound_fraction >= f_low)
        & (ev.bound_fraction <= f_high)
        & ~candidates.padded
    )
    if exclude:
        eligible[list(exclude)] = False
    if allowed is not None:
        eligible &= allowed
    below = eligible & (ev.absorbance <= high - np.maximum(margin, TEST_HEADROOM * (high - low)))
    headroom = bool(np.count_nonzero(below) >= inputs.design.tests)
    return (below if headroom else eligible), headroom


def choose_tests(
    inputs: PlanInputs,
    candidates: CandidateSet,
    exclude: tuple[int, ...] = (),
    objective: Objective = first_order_relative_u_K,
    allowed: NDArray[np.bool_] | None = None,
    scores: NDArray[np.float64] | None = None,
) -> TestsChoice:
    """Choose ``design.tests`` test mixtures minimising the objective under the constraints.

    Parameters
    ----------
    inputs
        The plan.
    candidates
        Every deliverable mixture, evaluated.
    exclude
        Candidate indices already used (the standards and blank).
    objective
        Scores a set of candidate indices, lower is better.
    allowed
        Optional mask of candidates the search may use (shape (n,)); None allows all.
    scores
        Every candidate's own score under this objective (:func:`own_scores`), when already
        computed (many searches on one candidate set share it); None computes what is needed.

    Returns
    -------
    TestsChoice
        Fewer tests than asked when fewer eligible candidates exist; the span is reported so
        the caller can check it.

    Notes
    -----
    The search fixes the pair of extreme members (lowest and highest bound fraction) that
    satisfies the span, fills the rest greedily with the candidates that lower the objective
    most, and keeps the best set over the candidate pairs; the next design stage may replace
    it with an exact optimiser.
    """
    design = inputs.design
    ev = candidates.evaluation
    fraction = ev.bound_fraction
    count = design.tests
    eligible, headroom = eligible_for_tests(inputs, candidates, exclude=exclude, allowed=allowed)
    indices = np.flatnonzero(eligible)
    if not indices.size:
        return TestsChoice((), float("inf"), 0.0, 0)
    own = scores[indices] if scores is not None else _own(inputs, candidates, indices, objective)
    pool = indices[np.argsort(own, kind="stable")[:_POOL]]
    if isinstance(objective, MeanKObjective):
        # The shared molar-absorptivity term favours tests with a small d ln K/d ln x.
        sensitivity = _x_sensitivity(inputs, candidates, indices)
        pool = np.concatenate([pool, indices[np.argsort(sensitivity, kind="stable")[:100]]])
    if isinstance(objective, MeanSquaredErrorObjective):
        # The bias term favours tests whose own bias is small, over the whole prior; taken
        # per tenth of bound fraction so the span can still be met (the bias grows with it).
        mean_square = np.tensordot(objective.weights, objective.bias[:, indices] ** 2, axes=1)
        for tenth in range(10):
            band = indices[(fraction[indices] * 10).astype(int) == tenth]
            square = mean_square[(fraction[indices] * 10).astype(int) == tenth]
            pool = np.concatenate([pool, band[np.argsort(square, kind="stable")[:30]]])
    # Make sure the extremes of bound fraction are reachable for the span constraint.
    extremes = indices[np.argsort(fraction[indices], kind="stable")]
    pool = distinct(np.concatenate([pool, extremes[:20], extremes[-20:]]))
    if pool.size <= count:
        chosen = pool[np.argsort(fraction[pool], kind="stable")]
        span = float(np.ptp(fraction[chosen])) if chosen.size else 0.0
        return TestsChoice(
            tuple(int(i) for i in chosen),
            objective(inputs, candidates, chosen),
            span,
            int(indices.size),
            headroom,
        )
    by_fraction = pool[np.argsort(fraction[pool], kind="stable")]
    f_sorted = fraction[by_fraction]
    own_pool = (
        scores[by_fraction]
        if scores is not None
        else _own(inputs, candidates, by_fraction, objective)
    )
    best: tuple[float, NDArray[np.int64]] | None = None
    starts: list[tuple[float, list[int]]] = []
    # The starting sets, each filled from one pair of extreme members, scored together below.
    filled: list[list[int]] = []
    span_needed = design.bound_fraction_span if count > 1 else 0.0
    gap = 0.5 * span_needed / max(count - 1, 1)
    # Candidate "low end" members: the best few by their own uncertainty among the lower half.
    by_own = np.argsort(own_pool, kind="stable")
    low_ends = by_own[:24]
    for lo in low_ends:
        # Partners by own score (the pool's order restricted, as for ``rest`` below).
        partners = by_own[(f_sorted >= f_sorted[lo] + span_needed)[by_own]]
        if count > 1 and not partners.size:
            continue
        his = partners[:4] if count > 1 else [lo]
        for hi in his:
            members = [int(lo)] if lo == hi else [int(lo), int(hi)]
            # The pool between the pair in bound fraction, best own score first (the pool's
            # stable order by own score, restricted: the same order as sorting them apart).
            inside = (f_sorted >= f_sorted[lo]) & (f_sorted <= f_sorted[hi])
            rest = by_own[inside[by_own]]
            # Keep members apart in bound fraction so the set tests K across conditions
            # instead of repeating one condition: take, in order of own score, the first
            # candidate at least ``gap`` from every member so far, until the set is full.
            f_rest = f_sorted[rest]
            free = np.ones(rest.size, dtype=np.bool_)
            for m in members:
                free &= (rest != m) & (np.abs(f_sorted[m] - f_rest) >= gap)
            while len(members) < count and free.any():
                take = int(np.argmax(free))
                members.append(int(rest[take]))
                free &= np.abs(f_rest[take] - f_rest) >= gap
                free[take] = False
            if len(members) < count:
                continue
            filled.append(sorted(members))
    if filled:
        sets = by_fraction[np.array(filled)]
        values = (
            objective.many(sets).tolist()
            if isinstance(objective, (GlobalFitObjective, RobustGlobalFitObjective))
            else [objective(inputs, candidates, chosen) for chosen in sets]
        )
        for value, members, chosen in zip(values, filled, sets, strict=True):
            starts.append((value, members))
            if best is None or value < best[0]:
                best = (value, chosen)
    if best is None:
        # No pair spans enough: take the widest-spread set available.
        picks = distinct(np.linspace(0, by_fraction.size - 1, count).round().astype(int))
        chosen = by_fraction[picks]
        best = (objective(inputs, candidates, chosen), chosen)
    value, chosen = best
    swaps: Callable[[list[int]], NDArray[np.float64]] | None = None
    if isinstance(objective, MeanSquaredErrorObjective):
        sensitivity_pool = _x_sensitivity(inputs, candidates, by_fraction)
        own_variance = per_mixture_relative_u_K(inputs, candidates, by_fraction)
        swaps = _mse_swaps(objective, by_fraction, own_variance, sensitivity_pool)
    elif isinstance(objective, MeanKObjective):
        sensitivity_pool = _x_sensitivity(inputs, candidates, by_fraction)
        swaps = _mean_K_swaps(objective, own_pool, sensitivity_pool)
    elif isinstance(objective, (GlobalFitObjective, RobustGlobalFitObjective)):
        swaps = objective.swaps_within(by_fraction)

    if swaps is not None and count > 1 and starts:
        # Local search from the few best distinct starting sets (multi-start: one start can
        # sit in a local optimum that the span constraint walls in).
        different = {tuple(m): v for v, m in starts}
        seen: dict[tuple[int, ...], tuple[NDArray[np.float64], NDArray[np.int64]]] = {}
        for start_value, start in sorted((v, list(m)) for m, v in different.items())[:_STARTS]:
            members = _swap_search(swaps, start_value, start, f_sorted, span_needed, gap, seen)
            candidate = by_fraction[np.array(sorted(members))]
            candidate_value = objective(inputs, candidates, candidate)
            if candidate_value < value:
                value, chosen = candidate_value, candidate
    return TestsChoice(
        tuple(int(i) for i in chosen),
        value,
        float(np.ptp(fraction[chosen])),
        int(indices.size),
        headroom,
    )
