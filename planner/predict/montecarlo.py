"""A virtual class: the plan run many times with every error drawn, and analysed two ways.

Each trial is one bench making the plan's set of mixtures (JCGM 101:2008, propagation of
distributions by a Monte Carlo method). A trial draws, per the error model of
:mod:`planner.predict._experiment` (the same model the first-order budget of
:mod:`planner.predict.uncertainty` uses):

- one relative error per stock (normal, the prepared batch's ``relative_uncertainty``),
  drawn once per class: the prep room makes each stock once for the session, so its error
  is common to every bench of the class (``session.sections`` x ``benches_per_section`` x
  ``replicates`` benches; the trials are consecutive classes of that size);
- one systematic error per one-mark device and per piston pipette, shared by every delivery
  it makes (triangular, u = a/sqrt(6)), and one random error per delivery by a graduated
  device (triangular) or piston pipette (normal, the ISO 8655-2 random limit);
- one technique error per delivery (normal, :func:`planner.lab.bench.technique_sd_mL`);
- one volume error per flask when the mixtures are made up in flasks (triangular);
- the readings: the equilibria re-solved at the actual concentrations
  (:func:`planner.chem.equilibrium.solve_equilibrium` on trials x mixtures rows), read
  through the photometer's stray-light response at the plan's stray-light fraction, plus
  normal noise whose SD is :func:`planner.lab.bench.reading_sd` at the actual reading, and one
  blank-cuvette offset per bench on the blank readings (normal, ``bench.blank_offset_sd``);
- one temperature deviation per bench (normal, ``bench.temperature_sd_C``) when a constant
  has an enthalpy: the readings move along the van 't Hoff secant across one SD either side.

The spread of K is reported two ways besides the whole distribution
(:class:`ClassSpread`): bench to bench inside a class (what a marker sees in one session)
and of the class mean from class to class (what the common stocks move together).

Every trial is then analysed from the recipe's nominal concentrations, as a class would, by
the two analyses of :mod:`planner.analysis`:

- **all-bound analysis**: the limiting reagent assumed fully bound in the standards, the
  standard curve through the origin and K from each test mixture with the 1:1 expression,
  averaged (:func:`planner.analysis.all_bound_mean_K`);
- **global fit**: a least-squares fit of the measured product's molar absorptivity and
  formation constant to every blank-subtracted standard and test reading with the full
  equilibrium model (:func:`planner.analysis.global_fit_batch`, vectorised over all trials,
  none subsampled; the tests check it against :func:`planner.analysis.global_fit`, which
  calls scipy.optimize.least_squares on the direct model).

Same inputs, trial count and seed give identical results: all randomness comes from the
``numpy.random.Generator`` passed in, drawn in a fixed order in chunks of a fixed size.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

import numpy as np
from numpy.typing import NDArray

from planner.analysis import (
    all_bound_mean_K,
    global_fit,
    global_fit_batch,
    global_fit_start_offset,
    global_fit_starts,
    global_fit_table,
)
from planner.errors import InvalidInputError
from planner.forward import predict_readings
from planner.inputs import PlanInputs
from planner.lab.bench import reading_sd
from planner.predict._experiment import (
    BenchExperiment,
    bench_experiment,
    reading_per_kelvin,
    triangular_half_width,
)
from planner.records import record
from planner.result import Mixture

__all__ = [
    "CHUNK_TRIALS",
    "MAX_TRIALS",
    "MEMORY_BUDGET_BYTES",
    "AnalysisSummary",
    "ClassSpread",
    "Simulation",
    "Summary",
    "coverage_interval",
    "global_fit_least_squares",
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

Progress = Callable[[int, int], None]


@record
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


@record
class ClassSpread:
    """K's spread split into its class-common and bench-to-bench parts.

    Attributes
    ----------
    class_size
        Benches per class (the session's sets), each class sharing one batch of stocks.
    classes
        Complete classes among the trials.
    bench_sd
        Pooled standard deviation of K inside a class: the bench-to-bench spread one
        session shows [L/mol]; nan with benches of one per class.
    class_mean_sd
        Standard deviation of the class mean of K from class to class [L/mol]: the common
        stocks plus the benches' spread divided by sqrt(class_size); nan with fewer than two
        classes.
    """

    class_size: int
    classes: int
    bench_sd: float
    class_mean_sd: float


@record
class AnalysisSummary:
    """What one analysis of the virtual class reports.

    Attributes
    ----------
    epsilon
        Molar absorptivity of the coloured product [L mol⁻¹ cm⁻¹].
    K
        Formation constant (mean over the tests for the all-bound analysis) [L/mol].
    K_spread
        K's spread inside a class and of the class mean (:class:`ClassSpread`).
    """

    epsilon: Summary
    K: Summary
    K_spread: ClassSpread | None = None


@record
class Simulation:
    """Result of a virtual class.

    Attributes
    ----------
    trials
        Number of trials (benches) simulated.
    all_bound, global_fit
        The two analyses.
    K_bias_from_assumption
        Relative bias of the all-bound analysis's mean K against the true K [unitless].
    K_true, epsilon_true
        What the plan assumes [L/mol], [L mol⁻¹ cm⁻¹].
    mixture_ids
        Mixtures in plan order.
    readings
        Distribution of each mixture's reading (blank not subtracted) [unitless].
    test_ids
        Test mixtures in plan order.
    K_per_test
        Distribution of each test's K under the all-bound analysis [L/mol].
    global_fit_failed
        Trials whose global fit did not converge inside the tabulated range (left out of the
        global fit's statistics).
    K_all_bound, K_global_fit, epsilon_all_bound, epsilon_global_fit
        Every trial's value, shape (trials,); NaN where a fit failed.
    trial_readings
        Every trial's readings, shape (trials, n_mixtures) [unitless].
    """

    trials: int
    all_bound: AnalysisSummary
    global_fit: AnalysisSummary
    K_bias_from_assumption: float
    K_true: float
    epsilon_true: float
    mixture_ids: tuple[str, ...]
    readings: tuple[Summary, ...]
    test_ids: tuple[str, ...]
    K_per_test: tuple[Summary, ...]
    global_fit_failed: int
    K_all_bound: NDArray[np.float64]
    K_global_fit: NDArray[np.float64]
    epsilon_all_bound: NDArray[np.float64]
    epsilon_global_fit: NDArray[np.float64]
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


@record
class _Draw:
    """Fixed arrays that turn standard variates into actual volumes and readings."""

    delivery_to_cell: NDArray[np.float64]  # (n_deliveries, n_mix * n_stocks), 0/1
    delivery_device: NDArray[np.int64]  # systematic device of each delivery, -1 for none
    a_systematic: NDArray[np.float64]  # triangular half-width per systematic device
    u_random: NDArray[np.float64]  # per delivery
    u_technique: NDArray[np.float64]  # per delivery, normal
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
        u_technique=np.array([d.u_technique_mL for d in ex.deliveries], dtype=float),
        random_normal=np.array([d.random_is_normal for d in ex.deliveries], dtype=bool),
        a_flask=float(triangular_half_width(np.array(ex.u_flask_mL))),
    )


def _standard_triangular(rng: np.random.Generator, shape: tuple[int, ...]) -> NDArray[np.float64]:
    """Triangular on (-1, 1) with mode 0: the sum of two uniforms minus 1, SD 1/sqrt(6)."""
    pair = rng.random((*shape, 2))
    result: NDArray[np.float64] = pair[..., 0] + pair[..., 1] - 1.0
    return result


def _simulate_readings(
    inputs: PlanInputs,
    ex: BenchExperiment,
    draw: _Draw,
    stock_factor: NDArray[np.float64],
    rng: np.random.Generator,
) -> NDArray[np.float64]:
    """Draw n benches, with the stock factors of their classes (shape (n, n_stocks)), and
    return their readings, shape (n, n_mix) [unitless]."""
    n_mix, n_stocks = ex.volumes_mL.shape
    n = stock_factor.shape[0]
    # Draw order is fixed (reproducibility): devices, deliveries, technique, flasks,
    # readings, blank offsets.
    systematic = draw.a_systematic * _standard_triangular(rng, (n, draw.a_systematic.size))
    triangular = _standard_triangular(rng, (n, draw.u_random.size))
    normal = rng.standard_normal((n, draw.u_random.size))
    random = np.where(
        draw.random_normal,
        draw.u_random * normal,
        triangular_half_width(draw.u_random) * triangular,
    )
    if np.any(draw.u_technique > 0):
        random = random + draw.u_technique * rng.standard_normal((n, draw.u_technique.size))
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
    readings = predict_readings(inputs.reaction, inputs.instrument, totals).absorbance
    readings = readings.reshape(n, n_mix)
    if ex.temperature_sd_C > 0:
        # The bench's own temperature moves every constant with an enthalpy (van 't Hoff);
        # the readings follow it along the secant across one SD either side, at the
        # bench's actual composition (linear in the deviation over the bench's spread).
        per_kelvin = reading_per_kelvin(
            inputs, totals, ex.temperature_C, step_K=ex.temperature_sd_C
        ).reshape(n, n_mix)
        deviation = ex.temperature_sd_C * np.asarray(rng.standard_normal(n), dtype=float)
        readings = readings + per_kelvin * deviation[:, None]
    result: NDArray[np.float64] = (
        readings + reading_sd(inputs.instrument, inputs.bench, readings) * noise
    )
    if ex.blank_offset_sd > 0:
        offset = ex.blank_offset_sd * np.asarray(rng.standard_normal(n), dtype=float)
        result[:, ex.layout.blanks] += offset[:, None]
    return result


def _class_spread(values: NDArray[np.float64], class_size: int) -> ClassSpread:
    """Bench-to-bench and class-mean spread of per-trial values in consecutive classes."""
    classes = values.size // class_size
    grouped = values[: classes * class_size].reshape(classes, class_size)
    complete = grouped[np.all(np.isfinite(grouped), axis=1)]
    bench_sd = class_mean_sd = math.nan
    if class_size > 1 and complete.shape[0] > 0:
        bench_sd = float(np.sqrt(complete.var(axis=1, ddof=1).mean()))
    if complete.shape[0] > 1:
        class_mean_sd = float(complete.mean(axis=1).std(ddof=1))
    return ClassSpread(
        class_size=class_size,
        classes=int(complete.shape[0]),
        bench_sd=bench_sd,
        class_mean_sd=class_mean_sd,
    )


def global_fit_least_squares(
    inputs: PlanInputs, mixtures: Sequence[Mixture], readings: NDArray[np.float64]
) -> tuple[float, float]:
    """The global fit of one bench's readings by :func:`planner.analysis.global_fit`.

    Returns (eps [L mol⁻¹ cm⁻¹], K) of the measured product.
    """
    ex = bench_experiment(inputs, mixtures)
    return global_fit(inputs.reaction, inputs.instrument, ex.layout, readings)


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
    global_fit: bool = True,
) -> Simulation:
    """Run the virtual class.

    Parameters
    ----------
    inputs
        The validated plan: its stocks, glassware and photometer give every trial's errors.
    mixtures
        The recipes every simulated bench makes (at least a blank, a standard and a test).
    trials
        Number of benches to simulate, from 2 to :func:`largest_trials` of the plan (at most
        :data:`MAX_TRIALS`; fewer when the arrays would exceed :data:`MEMORY_BUDGET_BYTES`).
    rng
        The only source of randomness; a generator from the user's seed.
    progress
        Called as ``progress(done, trials)`` after every chunk of :data:`CHUNK_TRIALS`.
    global_fit
        Also run the global fit (False leaves its values NaN: the all-bound analysis alone,
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
    largest = largest_trials(len(ex.mixture_ids), int(ex.layout.tests.size))
    if trials > largest:
        needed_GiB = (
            trials * _bytes_per_trial(len(ex.mixture_ids), int(ex.layout.tests.size)) / 2**30
        )
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
    layout = ex.layout
    draw = _draw_arrays(ex)
    b = ex.path_length_cm
    n_mix = len(ex.mixture_ids)
    readings = np.empty((trials, n_mix))
    eps_all_bound = np.empty(trials)
    k_all_bound = np.empty(trials)
    k_tests = np.empty((trials, ex.layout.tests.size))
    eps_global_fit = np.empty(trials)
    k_global_fit = np.empty(trials)
    table = global_fit_table(inputs.reaction, inputs.instrument, layout) if global_fit else None
    offset = global_fit_start_offset(table, ex.readings) if table is not None else (0.0, 0.0)
    # One stock batch per class of consecutive trials; a class that straddles two chunks
    # keeps the batch drawn in the first.
    class_size = inputs.session.sets
    carried: tuple[int, NDArray[np.float64]] | None = None
    for start in range(0, trials, CHUNK_TRIALS):
        n = min(CHUNK_TRIALS, trials - start)
        chunk = slice(start, start + n)
        classes = np.arange(start, start + n) // class_size
        first = int(classes[0])
        batches = 1.0 + ex.u_relative_stock * rng.standard_normal(
            (int(classes[-1]) - first + 1, len(ex.stock_ids))
        )
        if carried is not None and carried[0] == first:
            batches[0] = carried[1]
        carried = (int(classes[-1]), batches[-1])
        stock_factor = batches[classes - first]
        a = _simulate_readings(inputs, ex, draw, stock_factor, rng)
        net = a - a[:, ex.layout.blanks].mean(axis=1, keepdims=True)
        eps, k = all_bound_mean_K(layout, net, b)
        with np.errstate(invalid="ignore"):
            k_mean = k.mean(axis=1)
        readings[chunk] = a
        eps_all_bound[chunk] = eps
        k_all_bound[chunk] = k_mean
        k_tests[chunk] = k
        if table is not None:
            starts = global_fit_starts(table, eps, k_mean, offset)
            eps_global_fit[chunk], k_global_fit[chunk] = global_fit_batch(table, net, starts)
        else:
            eps_global_fit[chunk] = k_global_fit[chunk] = np.nan
        if progress is not None:
            progress(start + n, trials)
    all_bound = AnalysisSummary(
        epsilon=_summary(eps_all_bound),
        K=_summary(k_all_bound),
        K_spread=_class_spread(k_all_bound, class_size),
    )
    fitted = AnalysisSummary(
        epsilon=_summary(eps_global_fit),
        K=_summary(k_global_fit),
        K_spread=_class_spread(k_global_fit, class_size) if global_fit else None,
    )
    return Simulation(
        trials=trials,
        all_bound=all_bound,
        global_fit=fitted,
        K_bias_from_assumption=all_bound.K.mean / ex.layout.K_true - 1.0,
        K_true=ex.layout.K_true,
        epsilon_true=ex.layout.epsilon_true,
        mixture_ids=ex.mixture_ids,
        readings=tuple(_summary(readings[:, m]) for m in range(n_mix)),
        test_ids=tuple(ex.mixture_ids[i] for i in ex.layout.tests),
        K_per_test=tuple(_summary(k_tests[:, i]) for i in range(ex.layout.tests.size)),
        global_fit_failed=int(np.count_nonzero(~np.isfinite(k_global_fit))) if global_fit else 0,
        K_all_bound=k_all_bound,
        K_global_fit=k_global_fit,
        epsilon_all_bound=eps_all_bound,
        epsilon_global_fit=eps_global_fit,
        trial_readings=readings,
    )
