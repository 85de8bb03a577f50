"""A virtual class: the plan run many times with every error drawn, and analysed two ways.

Each trial is one bench making the plan's set of mixtures (JCGM 101:2008, propagation of
distributions by a Monte Carlo method). A trial draws, per the error model of
:mod:`planner.predict._experiment` (the same model the first-order budget of
:mod:`planner.predict.uncertainty` uses):

- one relative error per stock (normal, the prepared batch's ``relative_uncertainty``);
- one systematic error per one-mark device and per piston pipette, shared by every delivery
  it makes (triangular, u = a/sqrt(6)), and one random error per delivery by a graduated
  device (triangular) or piston pipette (normal, the ISO 8655-2 random limit);
- one volume error per flask when the mixtures are made up in flasks (triangular);
- the readings: the equilibria re-solved at the actual concentrations
  (:func:`planner.chem.equilibrium.solve_equilibrium` on trials x mixtures rows), read
  through the photometer's stray-light response at the plan's stray-light fraction, plus
  normal noise of SD ``absorbance_sd``.

Every trial is then analysed from the recipe's nominal concentrations, as a class would:

- **taught**: the limiting reagent assumed fully bound in the standards, the standard curve
  through the origin and K from each test mixture with the 1:1 expression, averaged
  (:func:`planner.predict.analysis.taught_epsilon`, :func:`~planner.predict.analysis.taught_K`);
- **exact**: a global least-squares fit of the coloured product's molar absorptivity and
  formation constant to every blank-subtracted standard and test reading, with the full
  equilibrium model (the other species' constants and absorptivities, and the stray light, as
  the plan gives them).

How the exact fits are vectorised
---------------------------------
Fitting 1e5 trials one by one with :func:`scipy.optimize.least_squares` would take minutes,
and the equilibrium solver takes one set of constants per call. But the analyst's model
depends on the trial only through the readings: at the nominal concentrations, each
mixture's coloured-product concentration is a smooth function of log10 K alone. That
function is tabulated once per plan on a fine grid of log10 K (one solve per node) and
interpolated by cubic splines (interpolation error below 1e-7 relative, far below the noise).
Every trial is then fitted at once by a vectorised Levenberg-Marquardt iteration (Nocedal and
Wright, Numerical Optimization, 2nd ed., 2006, section 10.3) on (eps, log10 K), started from
the trial's own taught estimates. All trials are fitted, none subsampled; the tests check the
result against :func:`scipy.optimize.least_squares` on the direct model
(:func:`exact_fit_least_squares`).

Same inputs, trial count and seed give identical results: all randomness comes from the
``numpy.random.Generator`` passed in, drawn in a fixed order in chunks of a fixed size.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.interpolate import CubicSpline
from scipy.optimize import least_squares

from planner.chem.equilibrium import solve_equilibrium
from planner.errors import InvalidInputError
from planner.inputs import PlanInputs
from planner.lab.photometer import observed_absorbance
from planner.predict._experiment import BenchExperiment, bench_experiment, triangular_half_width
from planner.predict.analysis import taught_epsilon, taught_K
from planner.result import Mixture

__all__ = [
    "CHUNK_TRIALS",
    "MAX_TRIALS",
    "MEMORY_BUDGET_BYTES",
    "AnalysisSummary",
    "Simulation",
    "Summary",
    "coverage_interval",
    "exact_fit_least_squares",
    "largest_trials",
    "simulate",
]

#: Trials simulated per chunk: 5000 trials x ~10 mixtures keeps the solver's arrays in cache
#: (measured several times faster than one pass over 1e6 rows) and lets progress be reported.
CHUNK_TRIALS = 5000
#: Most trials of one simulation: 1e7 take minutes at the measured 1e5 trials/s
#: (docs/performance.md), and the 95 % limits are already stable to about 0.1 % of the SD at
#: 1e6 (JCGM 101:2008, 7.2: M = 1e6 is the usual choice for 95 % coverage).
MAX_TRIALS = 10_000_000
#: Memory the per-trial arrays may take [bytes], 2 GiB: a laptop's share, so that a mistyped
#: trial count is refused at once instead of swapping or being killed (found by fuzzing:
#: 1e9 trials asked for 82 GiB).
MEMORY_BUDGET_BYTES = 2 * 2**30
# Per trial, in float64 values: every reading and every test's K (kept for the summaries),
# four per-trial results (eps and K of each analysis) and about six working copies (the
# finite values, their sort and deviations for each summary; the histograms' copies).
_KEPT_PER_TRIAL = 4
_WORKING_PER_TRIAL = 6
# The exact model is tabulated over log10 K within this many decades of the plan's value, on
# nodes this far apart; a fit leaving the table has failed (K off by more than 30x).
_TABLE_DECADES = 1.5
_TABLE_STEP = 0.0125
_MAX_ITERATIONS = 60
_LN10 = math.log(10.0)
# Levenberg-Marquardt stops when a step changes no parameter by more than this (relative).
_STEP_TOLERANCE = 1e-9

Progress = Callable[[int, int], None]


@dataclass(frozen=True, slots=True)
class Summary:
    """The distribution of one output over the trials (JCGM 101:2008, 7.6-7.7).

    Attributes
    ----------
    mean
        Average of the valid trials.
    sd
        Standard deviation (divisor n - 1).
    ci95
        Probabilistically symmetric 95 % coverage interval (low, high).
    standard_error
        Monte Carlo standard error of the mean, sd / sqrt(n).
    valid
        Number of trials with a finite value.
    """

    mean: float
    sd: float
    ci95: tuple[float, float]
    standard_error: float
    valid: int


@dataclass(frozen=True, slots=True)
class AnalysisSummary:
    """What one analysis of the virtual class reports.

    Attributes
    ----------
    epsilon
        Molar absorptivity of the coloured product [L mol⁻¹ cm⁻¹].
    K
        Formation constant (mean over the tests for the taught analysis) [L/mol].
    """

    epsilon: Summary
    K: Summary


@dataclass(frozen=True, slots=True)
class Simulation:
    """Result of a virtual class.

    Attributes
    ----------
    trials
        Number of trials (benches) simulated.
    taught, exact
        The two analyses.
    K_bias_from_assumption
        Relative bias of the taught analysis's mean K against the true K [unitless].
    K_true, epsilon_true
        What the plan assumes [L/mol], [L mol⁻¹ cm⁻¹].
    mixture_ids
        Mixtures in plan order.
    readings
        Distribution of each mixture's reading (blank not subtracted) [unitless].
    test_ids
        Test mixtures in plan order.
    K_per_test
        Distribution of each test's K under the taught analysis [L/mol].
    exact_failed
        Trials whose exact fit did not converge inside the tabulated range (left out of the
        exact analysis's statistics).
    K_taught, K_exact, epsilon_taught, epsilon_exact
        Every trial's value, shape (trials,); NaN where a fit failed.
    trial_readings
        Every trial's readings, shape (trials, n_mixtures) [unitless].
    """

    trials: int
    taught: AnalysisSummary
    exact: AnalysisSummary
    K_bias_from_assumption: float
    K_true: float
    epsilon_true: float
    mixture_ids: tuple[str, ...]
    readings: tuple[Summary, ...]
    test_ids: tuple[str, ...]
    K_per_test: tuple[Summary, ...]
    exact_failed: int
    K_taught: NDArray[np.float64]
    K_exact: NDArray[np.float64]
    epsilon_taught: NDArray[np.float64]
    epsilon_exact: NDArray[np.float64]
    trial_readings: NDArray[np.float64]


def coverage_interval(values: NDArray[np.float64], p: float = 0.95) -> tuple[float, float]:
    """Probabilistically symmetric coverage interval of Monte Carlo values.

    Parameters
    ----------
    values
        Output values, shape (M,), finite.
    p
        Coverage probability [unitless].

    Returns
    -------
    tuple of float
        (y_(r), y_(r+q)) of the sorted values, 1-based, with q = pM if that is an integer,
        else the integer part of pM + 1/2, and r = (M - q)/2 if an integer, else the integer
        part of (M - q + 1)/2 (JCGM 101:2008, 7.7.1 and 7.7.2, from memory).
    """
    ordered = np.sort(np.asarray(values, dtype=float))
    m = ordered.size
    if m == 0:
        raise InvalidInputError(
            "no finite values to summarise", field="values", value=0, hint="run more trials"
        )
    product = p * m
    q = int(product) if float(product).is_integer() else int(product + 0.5)
    q = max(0, min(q, m - 1))
    half = (m - q) / 2
    r = int(half) if half.is_integer() else int((m - q + 1) / 2)
    r = max(1, min(r, m - q))
    return (float(ordered[r - 1]), float(ordered[r + q - 1]))


def _summary(values: NDArray[np.float64]) -> Summary:
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return Summary(math.nan, math.nan, (math.nan, math.nan), math.nan, 0)
    sd = float(finite.std(ddof=1)) if finite.size > 1 else 0.0
    return Summary(
        mean=float(finite.mean()),
        sd=sd,
        ci95=coverage_interval(finite),
        standard_error=sd / math.sqrt(finite.size),
        valid=int(finite.size),
    )


@dataclass(frozen=True, slots=True)
class _Draw:
    """Fixed arrays that turn standard variates into actual volumes and readings."""

    delivery_to_cell: NDArray[np.float64]  # (n_deliveries, n_mix * n_stocks), 0/1
    delivery_device: NDArray[np.int64]  # systematic device of each delivery, -1 for none
    a_systematic: NDArray[np.float64]  # triangular half-width per systematic device
    u_random: NDArray[np.float64]  # per delivery
    random_normal: NDArray[np.bool_]  # per delivery
    a_flask: float


def _draw_arrays(ex: BenchExperiment) -> _Draw:
    n_mix, n_stocks = ex.volumes_mL.shape
    cells = np.zeros((len(ex.deliveries), n_mix * n_stocks))
    device = np.full(len(ex.deliveries), -1, dtype=np.int64)
    for i, d in enumerate(ex.deliveries):
        cells[i, d.mixture * n_stocks + d.stock] = 1.0
        if d.device in ex.systematic_devices:
            device[i] = ex.systematic_devices.index(d.device)
    return _Draw(
        delivery_to_cell=cells,
        delivery_device=device,
        a_systematic=triangular_half_width(ex.u_systematic_mL),
        u_random=np.array([d.u_random_mL for d in ex.deliveries], dtype=float),
        random_normal=np.array([d.random_is_normal for d in ex.deliveries], dtype=bool),
        a_flask=float(triangular_half_width(np.array(ex.u_flask_mL))),
    )


def _standard_triangular(rng: np.random.Generator, shape: tuple[int, ...]) -> NDArray[np.float64]:
    """Triangular on (-1, 1) with mode 0: the sum of two uniforms minus 1, SD 1/sqrt(6)."""
    pair = rng.random((*shape, 2))
    result: NDArray[np.float64] = pair[..., 0] + pair[..., 1] - 1.0
    return result


def _simulate_readings(
    inputs: PlanInputs, ex: BenchExperiment, draw: _Draw, n: int, rng: np.random.Generator
) -> NDArray[np.float64]:
    """Draw n benches and return their readings, shape (n, n_mix) [unitless]."""
    n_mix, n_stocks = ex.volumes_mL.shape
    # Draw order is fixed (reproducibility): stocks, devices, deliveries, flasks, readings.
    stock_factor = 1.0 + ex.stock_u_relative * rng.standard_normal((n, n_stocks))
    systematic = draw.a_systematic * _standard_triangular(rng, (n, draw.a_systematic.size))
    triangular = _standard_triangular(rng, (n, draw.u_random.size))
    normal = rng.standard_normal((n, draw.u_random.size))
    random = np.where(
        draw.random_normal,
        draw.u_random * normal,
        triangular_half_width(draw.u_random) * triangular,
    )
    errors = random
    if systematic.shape[1]:
        shared = systematic[:, np.maximum(draw.delivery_device, 0)]
        errors = random + np.where(draw.delivery_device >= 0, shared, 0.0)
    volumes = ex.volumes_mL[None] + (errors @ draw.delivery_to_cell).reshape(n, n_mix, n_stocks)
    if ex.in_flask:
        total = ex.total_volume_mL[None] + draw.a_flask * _standard_triangular(rng, (n, n_mix))
        if ex.diluent is not None:
            others = volumes.sum(axis=2) - volumes[:, :, ex.diluent]
            volumes[:, :, ex.diluent] = total - others
    else:
        total = volumes.sum(axis=2)
    noise = rng.standard_normal((n, n_mix))

    amounts = np.einsum("tms,sj->tmj", volumes * stock_factor[:, None, :], ex.stock_M)
    totals = np.maximum(amounts / total[:, :, None], 0.0).reshape(n * n_mix, -1)
    reaction = inputs.reaction
    solved = solve_equilibrium(totals, reaction.stoichiometry(), reaction.log_beta())
    per_cm = solved.species_M @ reaction.species_epsilon() + solved.free_M @ (
        reaction.free_epsilon()
    )
    true_a = (ex.path_length_cm * per_cm).reshape(n, n_mix)
    result: NDArray[np.float64] = (
        observed_absorbance(true_a, ex.stray_light) + ex.absorbance_sd * noise
    )
    return result


@dataclass(frozen=True, slots=True)
class _ExactModel:
    """The analyst's model at the nominal concentrations, tabulated over log10 K.

    A_true(eps, lg) = b (eps g(lg) + h(lg)) for each mixture: g the coloured product's
    concentration [mol/L], h the absorbance per cm of every other absorber [1/cm]. One spline
    holds both, columns [g, h], so one call evaluates every mixture.
    """

    gh: CubicSpline
    low: float
    high: float


def _exact_model(inputs: PlanInputs, ex: BenchExperiment) -> _ExactModel:
    reaction = inputs.reaction
    matrix = reaction.stoichiometry()
    logs = reaction.log_beta()
    others = reaction.species_epsilon().copy()
    others[ex.coloured] = 0.0
    centre = float(logs[ex.coloured])
    nodes = np.arange(-_TABLE_DECADES, _TABLE_DECADES + _TABLE_STEP / 2, _TABLE_STEP) + centre
    n_mix = len(ex.mixture_ids)
    table = np.empty((nodes.size, 2 * n_mix))
    for i, node in enumerate(nodes):
        trial_logs = logs.copy()
        trial_logs[ex.coloured] = node
        solved = solve_equilibrium(ex.totals_M, matrix, trial_logs)
        table[i, :n_mix] = solved.species_M[:, ex.coloured]
        table[i, n_mix:] = solved.species_M @ others + solved.free_M @ reaction.free_epsilon()
    return _ExactModel(
        gh=CubicSpline(nodes, table, axis=0), low=float(nodes[0]), high=float(nodes[-1])
    )


def _exact_residuals(
    ex: BenchExperiment,
    model: _ExactModel,
    theta: NDArray[np.float64],
    net: NDArray[np.float64],
    scale: float,
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Residuals and their derivatives in eps / scale and in log10 K, each (n, n_fit)."""
    b = ex.path_length_cm
    s = ex.stray_light
    n_mix = len(ex.mixture_ids)
    epsilon = theta[:, 0:1] * scale
    values = model.gh(theta[:, 1])
    slopes = model.gh(theta[:, 1], 1)
    g = values[:, :n_mix]
    true_a = b * (epsilon * g + values[:, n_mix:])
    transmitted = np.exp(-_LN10 * true_a)
    # A_obs = log10((1 + s)/(10^-A + s)), so d A_obs / d A = 10^-A / (10^-A + s).
    observed = math.log10(1.0 + s) - np.log10(transmitted + s)
    slope = transmitted / (transmitted + s)
    d_eps = (slope * b * scale) * g
    d_lg = (slope * b) * (epsilon * slopes[:, :n_mix] + slopes[:, n_mix:])
    fit = np.concatenate([ex.standards, ex.tests])

    def net_of_blank(a: NDArray[np.float64]) -> NDArray[np.float64]:
        result: NDArray[np.float64] = a[:, fit] - a[:, ex.blanks].mean(axis=1, keepdims=True)
        return result

    return net_of_blank(observed) - net[:, fit], net_of_blank(d_eps), net_of_blank(d_lg)


def _fit_exact(
    ex: BenchExperiment,
    model: _ExactModel,
    net: NDArray[np.float64],
    start: NDArray[np.float64],
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Vectorised Levenberg-Marquardt fit of (eps, log10 K) per trial; NaN where it fails.

    ``start`` is (n, 2): eps [L mol⁻¹ cm⁻¹] and log10 K of each trial's starting point.
    """
    n = net.shape[0]
    scale = ex.epsilon_true if ex.epsilon_true > 0 else 1.0
    theta = np.stack([start[:, 0] / scale, np.clip(start[:, 1], model.low, model.high)], axis=1)
    damping = np.full(n, 1e-6)
    active = np.ones(n, dtype=bool)
    converged = np.zeros(n, dtype=bool)
    residual, j_eps, j_lg = _exact_residuals(ex, model, theta, net, scale)
    cost = (residual**2).sum(axis=1)
    for _ in range(_MAX_ITERATIONS):
        idx = np.flatnonzero(active)
        if idx.size == 0:
            break
        th, r, je, jl = theta[idx], residual[idx], j_eps[idx], j_lg[idx]
        lam = damping[idx]
        # (J^T J + lambda diag(J^T J)) step = -J^T r, solved in closed form for 2 parameters.
        a11 = (je * je).sum(axis=1) * (1 + lam)
        a22 = (jl * jl).sum(axis=1) * (1 + lam)
        a12 = (je * jl).sum(axis=1)
        g1 = (je * r).sum(axis=1)
        g2 = (jl * r).sum(axis=1)
        det = a11 * a22 - a12 * a12
        singular = ~(det > 0)
        safe = np.where(singular, 1.0, det)
        step = np.stack([-(a22 * g1 - a12 * g2) / safe, -(a11 * g2 - a12 * g1) / safe], axis=1)
        step[singular] = 0.0
        candidate = th + step
        # A molar absorptivity is not negative, and log10 K stays inside the table.
        candidate[:, 0] = np.maximum(candidate[:, 0], 0.0)
        candidate[:, 1] = np.clip(candidate[:, 1], model.low, model.high)
        with np.errstate(over="ignore", invalid="ignore"):
            new_r, new_je, new_jl = _exact_residuals(ex, model, candidate, net[idx], scale)
        new_cost = (new_r**2).sum(axis=1)
        better = (new_cost <= cost[idx]) & ~singular  # False for a NaN cost
        accepted = idx[better]
        theta[accepted] = candidate[better]
        residual[accepted] = new_r[better]
        j_eps[accepted] = new_je[better]
        j_lg[accepted] = new_jl[better]
        cost[accepted] = new_cost[better]
        damping[idx] = np.where(better, lam * 0.1, lam * 10.0)
        small = np.all(np.abs(step) <= _STEP_TOLERANCE * (1.0 + np.abs(th)), axis=1)
        # Finished: a tiny step that lowered the cost, or a tiny undamped step that could not
        # (the minimum to rounding), or damping grown huge; a singular normal matrix fails.
        finished = ((small & (better | (lam < 1.0))) | (damping[idx] > 1e12)) & ~singular
        converged[idx[finished]] = True
        active[idx[finished | singular]] = False
    edge = (theta[:, 1] <= model.low) | (theta[:, 1] >= model.high)
    ok = converged & ~edge & (theta[:, 0] > 0)
    epsilon = np.where(ok, theta[:, 0] * scale, np.nan)
    k = np.where(ok, 10.0 ** theta[:, 1], np.nan)
    return epsilon, k


def _starts(
    ex: BenchExperiment,
    model: _ExactModel,
    eps_taught: NDArray[np.float64],
    k_taught: NDArray[np.float64],
    offset: tuple[float, float],
) -> NDArray[np.float64]:
    """Start each fit at its taught estimates moved by the taught analysis's known offset.

    ``offset`` is (eps, log10 K) of the exact fit minus the taught analysis on the noise-free
    readings, so the start lies within the noise of the minimum and the fit needs a few steps.
    The start does not choose the minimum, only how fast it is reached; where the taught
    values are unusable (K not positive) the fit starts from the plan's constants.
    """
    usable = np.isfinite(k_taught) & (k_taught > 0) & np.isfinite(eps_taught) & (eps_taught > 0)
    lg = np.log10(np.where(usable, k_taught, 1.0)) + offset[1]
    eps = eps_taught + offset[0]
    eps = np.where(usable & (eps > 0), eps, ex.epsilon_true)
    lg = np.where(usable, lg, math.log10(ex.K_true))
    return np.stack([eps, np.clip(lg, model.low, model.high)], axis=1)


def exact_fit_least_squares(
    inputs: PlanInputs, mixtures: Sequence[Mixture], readings: NDArray[np.float64]
) -> tuple[float, float]:
    """The exact analysis of one set of readings with scipy.optimize.least_squares.

    The reference for the vectorised fit of :func:`simulate`: the equilibrium is solved
    directly at every evaluation, without the tabulation.

    Parameters
    ----------
    inputs
        The validated plan.
    mixtures
        The plan's mixtures.
    readings
        One bench's readings, one per mixture in plan order, blank not subtracted [unitless].

    Returns
    -------
    tuple of float
        (eps [L mol⁻¹ cm⁻¹], K [L/mol]) of the coloured product.
    """
    ex = bench_experiment(inputs, mixtures)
    reaction = inputs.reaction
    matrix = reaction.stoichiometry()
    logs = reaction.log_beta()
    others = reaction.species_epsilon().copy()
    others[ex.coloured] = 0.0
    fit = np.concatenate([ex.standards, ex.tests])
    data = np.asarray(readings, dtype=float)
    net = data[fit] - data[ex.blanks].mean()
    scale = ex.epsilon_true if ex.epsilon_true > 0 else 1.0

    def residuals(theta: NDArray[np.float64]) -> NDArray[np.float64]:
        trial = logs.copy()
        trial[ex.coloured] = theta[1]
        solved = solve_equilibrium(ex.totals_M, matrix, trial)
        per_cm = (
            theta[0] * scale * solved.species_M[:, ex.coloured]
            + solved.species_M @ others
            + solved.free_M @ reaction.free_epsilon()
        )
        observed = observed_absorbance(ex.path_length_cm * per_cm, ex.stray_light)
        result: NDArray[np.float64] = observed[fit] - observed[ex.blanks].mean() - net
        return result

    solution = least_squares(
        residuals, np.array([1.0, logs[ex.coloured]]), method="lm", xtol=1e-14, ftol=1e-14
    )
    return float(solution.x[0] * scale), float(10.0 ** solution.x[1])


def _start_offset(ex: BenchExperiment, model: _ExactModel) -> tuple[float, float]:
    """(eps, log10 K) of the exact fit minus the taught analysis on the noise-free readings."""
    b = ex.path_length_cm
    net = (ex.readings - ex.readings[ex.blanks].mean())[None, :]
    eps = taught_epsilon(ex.totals_M[ex.standards, ex.limiting][None, :], net[:, ex.standards], b)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = taught_K(
            eps,
            ex.totals_M[ex.tests, ex.excess],
            ex.totals_M[ex.tests, ex.limiting],
            net[:, ex.tests],
            b,
        ).mean(axis=1)
    plan_start = np.array([[ex.epsilon_true, math.log10(ex.K_true)]])
    fitted_eps, fitted_k = _fit_exact(ex, model, net, plan_start)
    if not (np.isfinite(fitted_k[0]) and np.isfinite(k[0]) and k[0] > 0):
        return (0.0, 0.0)
    return (float(fitted_eps[0] - eps[0]), float(math.log10(fitted_k[0] / k[0])))


def _bytes_per_trial(n_mixtures: int, n_tests: int) -> int:
    return 8 * (n_mixtures + n_tests + _KEPT_PER_TRIAL + _WORKING_PER_TRIAL)


def largest_trials(n_mixtures: int, n_tests: int) -> int:
    """The most trials a plan of this size may simulate.

    Parameters
    ----------
    n_mixtures
        Mixtures of one bench (blanks, standards and tests).
    n_tests
        Test mixtures among them.

    Returns
    -------
    int
        :data:`MAX_TRIALS`, or fewer where the per-trial arrays of so many mixtures would
        exceed :data:`MEMORY_BUDGET_BYTES`.

    Examples
    --------
    >>> largest_trials(11, 5) == MAX_TRIALS
    True
    >>> largest_trials(211, 100)
    836247
    """
    return min(MAX_TRIALS, MEMORY_BUDGET_BYTES // _bytes_per_trial(n_mixtures, n_tests))


def simulate(
    inputs: PlanInputs,
    mixtures: Sequence[Mixture],
    *,
    trials: int,
    rng: np.random.Generator,
    progress: Progress | None = None,
    exact: bool = True,
) -> Simulation:
    """Run the virtual class.

    Parameters
    ----------
    inputs
        The validated plan.
    mixtures
        The plan's mixtures (at least one blank, one standard and one test).
    trials
        Number of benches to simulate, from 2 to :func:`largest_trials` of the plan (at most
        :data:`MAX_TRIALS`; fewer when the arrays would exceed :data:`MEMORY_BUDGET_BYTES`).
    rng
        The only source of randomness; a generator from the user's seed.
    progress
        Called as ``progress(done, trials)`` after every chunk of :data:`CHUNK_TRIALS`.
    exact
        Also run the exact analysis (False leaves its values NaN: the taught analysis alone,
        for timing or a quick look).

    Returns
    -------
    Simulation

    Raises
    ------
    InvalidInputError
        Fewer than 2 trials or more than the plan allows (field ``trials``; checked before
        anything is allocated), or a plan without blank, standard or test.
    """
    if trials < 2:
        raise InvalidInputError(
            "at least 2 trials are needed for a standard deviation",
            field="trials",
            value=trials,
            hint="ask for 10000 or more trials for stable 95 % intervals",
        )
    ex = bench_experiment(inputs, mixtures)
    largest = largest_trials(len(ex.mixture_ids), int(ex.tests.size))
    if trials > largest:
        needed_GiB = trials * _bytes_per_trial(len(ex.mixture_ids), int(ex.tests.size)) / 2**30
        reason = (
            f"more than the {MAX_TRIALS} a simulation may run"
            if largest == MAX_TRIALS
            else f"{trials} trials of {len(ex.mixture_ids)} mixtures would need about "
            f"{needed_GiB:.3g} GiB, more than the {MEMORY_BUDGET_BYTES / 2**30:g} GiB a "
            "simulation may use"
        )
        raise InvalidInputError(
            f"too many trials: {reason}",
            field="trials",
            value=trials,
            hint=f"ask for at most {largest} trials (1e5 give stable 95 % intervals)",
        )
    draw = _draw_arrays(ex)
    b = ex.path_length_cm
    n_mix = len(ex.mixture_ids)
    readings = np.empty((trials, n_mix))
    eps_taught = np.empty(trials)
    k_taught = np.empty(trials)
    k_tests = np.empty((trials, ex.tests.size))
    eps_exact = np.empty(trials)
    k_exact = np.empty(trials)
    std_l = ex.totals_M[ex.standards, ex.limiting]
    test_m = ex.totals_M[ex.tests, ex.excess]
    test_l = ex.totals_M[ex.tests, ex.limiting]
    model = _exact_model(inputs, ex) if exact else None
    offset = _start_offset(ex, model) if model is not None else (0.0, 0.0)
    for start in range(0, trials, CHUNK_TRIALS):
        n = min(CHUNK_TRIALS, trials - start)
        chunk = slice(start, start + n)
        a = _simulate_readings(inputs, ex, draw, n, rng)
        net = a - a[:, ex.blanks].mean(axis=1, keepdims=True)
        eps = taught_epsilon(np.broadcast_to(std_l, (n, std_l.size)), net[:, ex.standards], b)
        with np.errstate(divide="ignore", invalid="ignore"):
            k = taught_K(eps, test_m, test_l, net[:, ex.tests], b)
            k_mean = k.mean(axis=1)
        readings[chunk] = a
        eps_taught[chunk] = eps
        k_taught[chunk] = k_mean
        k_tests[chunk] = k
        if model is not None:
            starts = _starts(ex, model, eps, k_mean, offset)
            eps_exact[chunk], k_exact[chunk] = _fit_exact(ex, model, net, starts)
        else:
            eps_exact[chunk] = k_exact[chunk] = np.nan
        if progress is not None:
            progress(start + n, trials)
    taught = AnalysisSummary(epsilon=_summary(eps_taught), K=_summary(k_taught))
    fitted = AnalysisSummary(epsilon=_summary(eps_exact), K=_summary(k_exact))
    return Simulation(
        trials=trials,
        taught=taught,
        exact=fitted,
        K_bias_from_assumption=taught.K.mean / ex.K_true - 1.0,
        K_true=ex.K_true,
        epsilon_true=ex.epsilon_true,
        mixture_ids=ex.mixture_ids,
        readings=tuple(_summary(readings[:, m]) for m in range(n_mix)),
        test_ids=tuple(ex.mixture_ids[i] for i in ex.tests),
        K_per_test=tuple(_summary(k_tests[:, i]) for i in range(ex.tests.size)),
        exact_failed=int(np.count_nonzero(~np.isfinite(k_exact))) if exact else 0,
        K_taught=k_taught,
        K_exact=k_exact,
        epsilon_taught=eps_taught,
        epsilon_exact=eps_exact,
        trial_readings=readings,
    )
