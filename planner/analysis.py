"""The two analyses of a bench's readings, each written once.

**All-bound analysis.** The limiting reagent L of every standard is taken as entirely bound in
the measured product, so the standard curve is A_net = eps b [L]0 (blank-subtracted readings,
least squares through the origin, or with an intercept), and then, for each test mixture,
x = A_net/(eps b) and K = x / (([M]0 - x)([L]0 - x)), averaged over the tests (the 1:1
expression; see e.g. Harris, Quantitative Chemical Analysis, 9th ed., 2016, section 19-2,
from memory).

**Global fit.** The measured product's molar absorptivity eps and formation constant K are
fitted together to every blank-subtracted standard and test reading with the full
equilibrium model (:func:`planner.forward.predict_readings`: the other species' constants and
absorptivities, absorbing free components and the stray light as the plan gives them), by
least squares on (eps, log10 K).

The design's objective, the first-order prediction (whose sympy measurement models write the
same all-bound expressions, :func:`all_bound_K_from_x` included), the virtual class and the
readings reader call these functions. Every all-bound function is vectorised over any leading
axes (Monte Carlo trials).

How the global fit is vectorised
--------------------------------
At the nominal concentrations the model depends on the readings only through (eps, log10 K):
each mixture's measured-product concentration g and the absorbance per cm h of every other
absorber are smooth functions of log10 K alone. :func:`global_fit_table` tabulates them once
on a fine grid of log10 K (one forward-model call per node) with cubic splines (interpolation
error below 1e-7 relative, far below the noise), and :func:`global_fit_batch` fits many sets
of readings at once by a vectorised Levenberg-Marquardt iteration (Nocedal and Wright,
Numerical Optimization, 2nd ed., 2006, section 10.3). :func:`global_fit` is the direct
reference: :func:`scipy.optimize.least_squares` with the forward model solved at every
evaluation.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray

from planner.chem.constants import bench_log_beta
from planner.forward import Readings, predict_readings, reading_sensitivity
from planner.inputs import Instrument, Reaction
from planner.records import record

__all__ = [
    "GlobalFitTable",
    "Layout",
    "PooledFit",
    "all_bound_K",
    "all_bound_K_from_x",
    "all_bound_K_log_sensitivities",
    "all_bound_epsilon",
    "all_bound_mean_K",
    "global_fit",
    "global_fit_batch",
    "global_fit_gain",
    "global_fit_jacobian",
    "global_fit_residuals",
    "global_fit_sets",
    "global_fit_start_offset",
    "global_fit_starts",
    "global_fit_table",
]

# The global model is tabulated over log10 K within this many decades of the expected value,
# on nodes this far apart; a fit leaving the table has failed (K off by more than 30x).
_TABLE_DECADES = 1.5
_TABLE_STEP = 0.0125
_MAX_ITERATIONS = 60
_LN10 = math.log(10.0)
# Levenberg-Marquardt stops when a step changes no parameter by more than this (relative).
_STEP_TOLERANCE = 1e-9


@record
class Layout:
    """One bench's set of mixtures as the analyses see it: the recipe's nominal totals.

    Attributes
    ----------
    totals_M
        Nominal total of each component in each mixture, shape (n_mixtures, n_components)
        [mol/L]: what an analyst computes from the recipe.
    blanks, standards, tests
        Rows of the reagent blanks, calibration standards and test mixtures.
    limiting, excess
        Columns of the limiting and the excess component.
    measured
        Row of the measured product species in the reaction.
    epsilon_true, K_true
        The plan's molar absorptivity [L mol⁻¹ cm⁻¹] and K (the measured species' beta, in
        its own units): the global fit's scale and fallback start.
    """

    totals_M: NDArray[np.float64]
    blanks: NDArray[np.int64]
    standards: NDArray[np.int64]
    tests: NDArray[np.int64]
    limiting: int
    excess: int
    measured: int
    epsilon_true: float
    K_true: float


#: Factors (1 + relative error) beyond which a value is no estimate of the true one, and is
#: said as that factor: past a factor of ten either way "-100 %" hides a factor of a million.
_FAR_FACTORS = (0.1, 10.0)


def far_off(relative_error: float) -> bool:
    """True when a relative error moves a value by more than a factor of ten either way."""
    factor = 1.0 + relative_error
    low, high = _FAR_FACTORS
    # The bounds themselves (within round-off: 1 - 0.9 is 0.0999...) are still plain.
    return math.isfinite(factor) and not low * (1 - 1e-9) <= factor <= high * (1 + 1e-9)


# ---------------------------------------------------------------------------------------------
# The all-bound analysis
# ---------------------------------------------------------------------------------------------


def all_bound_epsilon(
    limiting_total_M: NDArray[np.float64],
    net_absorbance: NDArray[np.float64],
    path_length_cm: float,
    *,
    intercept: bool = False,
) -> NDArray[np.float64]:
    """Molar absorptivity from the standard curve, assuming [product] = [L]0.

    Parameters
    ----------
    limiting_total_M
        Limiting-reagent totals of the standards, shape (..., n_standards) [mol/L].
    net_absorbance
        Blank-subtracted readings, same shape [unitless].
    path_length_cm
        Path length [cm].
    intercept
        False: least squares through the origin, slope = sum(c A)/sum(c^2); True: ordinary
        least squares with an intercept (Draper and Smith, Applied Regression Analysis,
        3rd ed., 1998, eq. 1.2.9, from memory).

    Returns
    -------
    NDArray[np.float64]
        eps, shape (...) [L mol⁻¹ cm⁻¹].
    """
    c = np.asarray(limiting_total_M, dtype=float)
    a = np.asarray(net_absorbance, dtype=float)
    if intercept:
        c_mean = c.mean(axis=-1, keepdims=True)
        a_mean = a.mean(axis=-1, keepdims=True)
        slope = ((c - c_mean) * (a - a_mean)).sum(axis=-1) / ((c - c_mean) ** 2).sum(axis=-1)
    else:
        slope = (c * a).sum(axis=-1) / (c * c).sum(axis=-1)
    result: NDArray[np.float64] = slope / path_length_cm
    return result


def all_bound_K_from_x(x: object, excess_total: object, limiting_total: object) -> object:
    """K = x / ((M0 - x)(L0 - x)): the 1:1 expression, for floats, arrays or sympy symbols.

    The one place the expression is written: :func:`all_bound_K` evaluates it on arrays and
    the first-order prediction's sympy models differentiate it symbolically.
    """
    return x / ((excess_total - x) * (limiting_total - x))  # type: ignore[operator]


def all_bound_K_log_sensitivities(
    x: NDArray[np.float64],
    excess_total_M: NDArray[np.float64],
    limiting_total_M: NDArray[np.float64],
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Relative sensitivities of :func:`all_bound_K_from_x`: d ln K / d ln of x, M0 and L0.

    From K = x / ((M0 - x)(L0 - x)): d ln K/d ln x = 1 + x/(M0 - x) + x/(L0 - x),
    d ln K/d ln M0 = -M0/(M0 - x) and d ln K/d ln L0 = -L0/(L0 - x) (returned as magnitudes;
    GUM, JCGM 100:2008, eq. 10 in relative form). The design's objective uses them; a test
    checks them against sympy's derivatives of the expression itself.

    Returns
    -------
    tuple
        (|d ln K/d ln x|, |d ln K/d ln M0|, |d ln K/d ln L0|), each the shape of ``x``
        [unitless]; free amounts are floored at 1e-300 mol/L so a fully bound reagent gives a
        huge sensitivity, not a division by zero.
    """
    free_m = np.maximum(excess_total_M - x, 1e-300)
    free_l = np.maximum(limiting_total_M - x, 1e-300)
    return 1.0 + x / free_m + x / free_l, excess_total_M / free_m, limiting_total_M / free_l


def all_bound_K(
    epsilon: ArrayLike,
    excess_total_M: ArrayLike,
    limiting_total_M: ArrayLike,
    net_absorbance: ArrayLike,
    path_length_cm: float,
) -> NDArray[np.float64]:
    """K from each test mixture with the 1:1 expression.

    Parameters
    ----------
    epsilon
        Molar absorptivity from the standards, shape (...) [L mol⁻¹ cm⁻¹].
    excess_total_M, limiting_total_M
        Totals of the test mixtures, shape (..., n_tests) [mol/L].
    net_absorbance
        Blank-subtracted readings of the tests, shape (..., n_tests) [unitless].
    path_length_cm
        Path length [cm].

    Returns
    -------
    NDArray[np.float64]
        K per test, shape (..., n_tests) [L/mol]; a reading implying more product than
        reagent gives a non-positive denominator and so a nonsensical K, as it would at the
        bench (inf where the denominator is 0).
    """
    eps = np.asarray(epsilon, dtype=float)[..., None]
    x = np.asarray(net_absorbance, dtype=float) / (eps * path_length_cm)
    m0 = np.asarray(excess_total_M, dtype=float)
    l0 = np.asarray(limiting_total_M, dtype=float)
    denominator = (m0 - x) * (l0 - x)
    safe_x = np.where(denominator != 0, x, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.asarray(all_bound_K_from_x(safe_x, m0, l0), dtype=float)
    result: NDArray[np.float64] = np.where(denominator != 0, k, np.inf)
    return result


# ---------------------------------------------------------------------------------------------
# The global fit
# ---------------------------------------------------------------------------------------------


@record
class GlobalFitTable:
    """The global model at the nominal concentrations, tabulated over log10 K.

    A_true(eps, lg) = b (eps g(lg) + h(lg)) for each mixture: g the measured product's
    concentration [mol/L], h the absorbance per cm of every other absorber [1/cm]. One spline
    holds both, columns [g, h], so one call evaluates every mixture. The table holds for one
    set of mixtures (``layout``) on one photometer (``instrument``), which it keeps.
    """

    gh: object  # scipy.interpolate.CubicSpline
    low: float
    high: float
    n_mixtures: int
    layout: Layout
    instrument: Instrument


def global_fit_table(reaction: Reaction, instrument: Instrument, layout: Layout) -> GlobalFitTable:
    """Tabulate the global model of one set of mixtures over log10 K (see the module notes)."""
    from scipy.interpolate import CubicSpline

    logs = bench_log_beta(reaction)
    others = reaction.species_epsilon().copy()
    others[layout.measured] = 0.0
    centre = float(logs[layout.measured])
    nodes = np.arange(-_TABLE_DECADES, _TABLE_DECADES + _TABLE_STEP / 2, _TABLE_STEP) + centre
    n_mix = layout.totals_M.shape[0]
    table = np.empty((nodes.size, 2 * n_mix))
    for i, node in enumerate(nodes):
        trial_logs = logs.copy()
        trial_logs[layout.measured] = node
        # The forward model with the measured species made transparent gives every other
        # absorber's share h; the measured species' concentration g comes with it.
        solved = predict_readings(
            reaction, instrument, layout.totals_M, log_beta=trial_logs, species_epsilon=others
        )
        table[i, :n_mix] = solved.species_M[:, layout.measured]
        table[i, n_mix:] = solved.true_absorbance / instrument.path_length_cm
    return GlobalFitTable(
        gh=CubicSpline(nodes, table, axis=0),
        low=float(nodes[0]),
        high=float(nodes[-1]),
        n_mixtures=n_mix,
        layout=layout,
        instrument=instrument,
    )


def _fitted_rows(layout: Layout) -> NDArray[np.int64]:
    return np.concatenate([layout.standards, layout.tests])


def _eps_scale(layout: Layout) -> float:
    """The plan's eps, by which the fit divides eps so that both parameters are near 1."""
    return layout.epsilon_true if layout.epsilon_true > 0 else 1.0


def _residuals(
    table: GlobalFitTable, theta: NDArray[np.float64], net: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Residuals and their derivatives in eps / scale and in log10 K, each (n, n_fit)."""
    layout = table.layout
    scale = _eps_scale(layout)
    b = table.instrument.path_length_cm
    s = table.instrument.stray_light
    n_mix = table.n_mixtures
    epsilon = theta[:, 0:1] * scale
    gh = table.gh
    values = gh(theta[:, 1])  # type: ignore[operator]
    slopes = gh(theta[:, 1], 1)  # type: ignore[operator]
    g = values[:, :n_mix]
    true_a = b * (epsilon * g + values[:, n_mix:])
    transmitted = np.exp(-_LN10 * true_a)
    # A_obs = log10((1 + s)/(10^-A + s)), so d A_obs / d A = 10^-A / (10^-A + s).
    observed = math.log10(1.0 + s) - np.log10(transmitted + s)
    slope = transmitted / (transmitted + s)
    d_eps = (slope * b * scale) * g
    d_lg = (slope * b) * (epsilon * slopes[:, :n_mix] + slopes[:, n_mix:])
    fit = _fitted_rows(layout)

    def net_of_blank(a: NDArray[np.float64]) -> NDArray[np.float64]:
        result: NDArray[np.float64] = a[:, fit] - a[:, layout.blanks].mean(axis=1, keepdims=True)
        return result

    return net_of_blank(observed) - net[:, fit], net_of_blank(d_eps), net_of_blank(d_lg)


def global_fit_batch(
    table: GlobalFitTable, net: NDArray[np.float64], start: NDArray[np.float64]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Vectorised Levenberg-Marquardt global fit of (eps, log10 K) per set; NaN where it fails.

    Parameters
    ----------
    table
        From :func:`global_fit_table`: the set of mixtures, the photometer's path length and
        stray light, and the model tabulated over log10 K.
    net
        Blank-subtracted readings, shape (n_sets, n_mixtures) [unitless].
    start
        Starting eps [L mol⁻¹ cm⁻¹] and log10 K of each set, shape (n_sets, 2).

    Returns
    -------
    tuple
        (eps [L mol⁻¹ cm⁻¹], K) of each set, shape (n_sets,); NaN where the fit did not
        converge inside the table or gave eps <= 0.
    """
    n = net.shape[0]
    scale = _eps_scale(table.layout)
    theta = np.stack([start[:, 0] / scale, np.clip(start[:, 1], table.low, table.high)], axis=1)
    damping = np.full(n, 1e-6)
    active = np.ones(n, dtype=bool)
    converged = np.zeros(n, dtype=bool)
    residual, j_eps, j_lg = _residuals(table, theta, net)
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
        candidate[:, 1] = np.clip(candidate[:, 1], table.low, table.high)
        with np.errstate(over="ignore", invalid="ignore"):
            new_r, new_je, new_jl = _residuals(table, candidate, net[idx])
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
    edge = (theta[:, 1] <= table.low) | (theta[:, 1] >= table.high)
    ok = converged & ~edge & (theta[:, 0] > 0)
    epsilon = np.where(ok, theta[:, 0] * scale, np.nan)
    k = np.where(ok, 10.0 ** theta[:, 1], np.nan)
    return epsilon, k


def global_fit_starts(
    table: GlobalFitTable,
    eps_all_bound: NDArray[np.float64],
    k_all_bound: NDArray[np.float64],
    offset: tuple[float, float],
) -> NDArray[np.float64]:
    """Start each fit at its all-bound estimates moved by that analysis's known offset.

    ``offset`` is (eps, log10 K) of the global fit minus the all-bound analysis on the
    noise-free readings (:func:`global_fit_start_offset`), so the start lies within the noise
    of the minimum and the fit needs a few steps. The start does not choose the minimum, only
    how fast it is reached; where the all-bound values are unusable (K not positive) the fit
    starts from the plan's constants.
    """
    usable = (
        np.isfinite(k_all_bound)
        & (k_all_bound > 0)
        & np.isfinite(eps_all_bound)
        & (eps_all_bound > 0)
    )
    layout = table.layout
    lg = np.log10(np.where(usable, k_all_bound, 1.0)) + offset[1]
    eps = eps_all_bound + offset[0]
    eps = np.where(usable & (eps > 0), eps, layout.epsilon_true)
    lg = np.where(usable, lg, math.log10(layout.K_true))
    return np.stack([eps, np.clip(lg, table.low, table.high)], axis=1)


def all_bound_mean_K(
    layout: Layout, net: NDArray[np.float64], path_length_cm: float
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """eps (curve through the origin) and the mean K of the all-bound analysis, per set.

    ``net`` holds blank-subtracted readings, shape (n_sets, n_mixtures); returns (eps, K per
    test), shapes (n_sets,) and (n_sets, n_tests).
    """
    n = net.shape[0]
    std_l = layout.totals_M[layout.standards, layout.limiting]
    eps = all_bound_epsilon(
        np.broadcast_to(std_l, (n, std_l.size)), net[:, layout.standards], path_length_cm
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        k = all_bound_K(
            eps,
            layout.totals_M[layout.tests, layout.excess],
            layout.totals_M[layout.tests, layout.limiting],
            net[:, layout.tests],
            path_length_cm,
        )
    return eps, k


def global_fit_start_offset(
    table: GlobalFitTable, readings: NDArray[np.float64]
) -> tuple[float, float]:
    """(eps, log10 K) of the global fit minus the all-bound analysis on noise-free readings."""
    layout = table.layout
    net = (readings - readings[layout.blanks].mean())[None, :]
    eps, k_tests = all_bound_mean_K(layout, net, table.instrument.path_length_cm)
    with np.errstate(invalid="ignore"):
        k = k_tests.mean(axis=1)
    plan_start = np.array([[layout.epsilon_true, math.log10(layout.K_true)]])
    fitted_eps, fitted_k = global_fit_batch(table, net, plan_start)
    if not (np.isfinite(fitted_k[0]) and np.isfinite(k[0]) and k[0] > 0):
        return (0.0, 0.0)
    return (float(fitted_eps[0] - eps[0]), float(math.log10(fitted_k[0] / k[0])))


@record
class PooledFit:
    """The global fit of several sets of readings at once (one eps and one K for all).

    Attributes
    ----------
    epsilon, u_epsilon, K, u_K
        The pooled fit's molar absorptivity of the measured product [L mol⁻¹ cm⁻¹] and its
        formation constant (the measured species' beta, in its own units), each with its
        standard uncertainty.
    residuals
        Per set, reading minus fitted value of each fitted row (standards, then tests, in its
        layout's order), NaN where the set has no reading [unitless].
    sum_of_squares
        Sum of the squared residuals [unitless].
    n_readings
        Number of fitted (blank-subtracted) readings.
    """

    epsilon: float
    u_epsilon: float
    K: float
    u_K: float
    residuals: tuple[NDArray[np.float64], ...]
    sum_of_squares: float
    n_readings: int


def global_fit_sets(
    reaction: Reaction,
    instrument: Instrument,
    layouts: Sequence[Layout],
    sets: Sequence[tuple[int, ArrayLike]],
) -> PooledFit:
    """One global fit of eps and K to several sets of readings, each with its own blank.

    Each set is blank-subtracted with its own blank readings and compared with the model of
    its own layout (benches of different sections make different mixtures), by least squares
    on (eps, log10 K) with :func:`scipy.optimize.least_squares`, the forward model solved at
    every evaluation. With one set this is :func:`global_fit`.

    Parameters
    ----------
    reaction, instrument
        The reaction and photometer every set shares.
    layouts
        The sets of mixtures the sets of readings follow; the first gives the fit's scale
        and start (the plan's eps and K).
    sets
        (index into ``layouts``, readings): one reading per mixture of that layout, blank not
        subtracted, NaN for a mixture not read [unitless]. Every set needs a blank reading.

    Returns
    -------
    PooledFit
        The fitted values with standard uncertainties from the least-squares covariance,
        s^2 (J^T J)^-1 with s^2 = (sum of squared residuals) / (n - 2) (e.g. Bard, Nonlinear
        Parameter Estimation, 1974, ch. 7, from memory); NaN uncertainties with fewer than
        three readings.

    Raises
    ------
    ValueError
        A set without any blank reading (a programming error: callers leave such sets out).
    """
    from scipy.optimize import least_squares

    logs = bench_log_beta(reaction)
    first = layouts[0]
    scale = first.epsilon_true if first.epsilon_true > 0 else 1.0
    prepared = []
    for index, readings in sets:
        layout = layouts[index]
        data = np.asarray(readings, dtype=float)
        blanks = layout.blanks[np.isfinite(data[layout.blanks])]
        if blanks.size == 0:
            raise ValueError("a set of readings without a blank reading cannot be fitted")
        fit = _fitted_rows(layout)
        rows = fit[np.isfinite(data[fit])]
        prepared.append((index, blanks, rows, data[rows] - data[blanks].mean(), fit))
    used = sorted({index for index, *_ in prepared})

    def model(theta: NDArray[np.float64]) -> dict[int, NDArray[np.float64]]:
        trial = logs.copy()
        trial[first.measured] = theta[1]
        epsilon = reaction.species_epsilon().copy()
        epsilon[first.measured] = theta[0] * scale
        return {
            index: predict_readings(
                reaction,
                instrument,
                layouts[index].totals_M,
                log_beta=trial,
                species_epsilon=epsilon,
            ).absorbance
            for index in used
        }

    def residuals(theta: NDArray[np.float64]) -> NDArray[np.float64]:
        observed = model(theta)
        parts = [
            observed[index][rows] - observed[index][blanks].mean() - net
            for index, blanks, rows, net, _ in prepared
        ]
        return np.concatenate(parts)

    solution = least_squares(
        residuals, np.array([1.0, logs[first.measured]]), method="lm", xtol=1e-14, ftol=1e-14
    )
    theta = solution.x
    final = -np.asarray(solution.fun, dtype=float)  # reading minus fitted value
    n = final.size
    sum_of_squares = float(final @ final)
    u_eps = u_lg = math.nan
    if n > 2:
        jacobian = np.asarray(solution.jac, dtype=float)
        normal = jacobian.T @ jacobian
        if np.all(np.isfinite(normal)) and np.linalg.cond(normal) < 1e14:
            covariance = np.linalg.inv(normal) * sum_of_squares / (n - 2)
            u_eps = math.sqrt(covariance[0, 0]) * scale
            u_lg = math.sqrt(covariance[1, 1])
    k = float(10.0 ** theta[1])
    per_set = []
    start = 0
    for _, _, rows, _, fit in prepared:
        full = np.full(fit.size, np.nan)
        full[np.isin(fit, rows)] = final[start : start + rows.size]
        per_set.append(full)
        start += rows.size
    return PooledFit(
        epsilon=float(theta[0] * scale),
        u_epsilon=u_eps,
        K=k,
        u_K=k * _LN10 * u_lg,
        residuals=tuple(per_set),
        sum_of_squares=sum_of_squares,
        n_readings=n,
    )


def global_fit(
    reaction: Reaction, instrument: Instrument, layout: Layout, readings: ArrayLike
) -> tuple[float, float]:
    """The global fit of one set of readings with :func:`scipy.optimize.least_squares`.

    The reference for :func:`global_fit_batch`: the forward model is solved directly at every
    evaluation, without the tabulation (:func:`global_fit_sets` with one set).

    Parameters
    ----------
    reaction, instrument
        The plan's reaction and photometer.
    layout
        The set of mixtures.
    readings
        One bench's readings, one per mixture in layout order, blank not subtracted
        [unitless].

    Returns
    -------
    tuple of float
        (eps [L mol⁻¹ cm⁻¹], K) of the measured product species.
    """
    fitted = global_fit_sets(reaction, instrument, [layout], [(0, readings)])
    return fitted.epsilon, fitted.K


def global_fit_residuals(
    table: GlobalFitTable,
    net: NDArray[np.float64],
    epsilon: NDArray[np.float64],
    K: NDArray[np.float64],
) -> NDArray[np.float64]:
    """Reading minus fitted value of each fitted row, for fits by :func:`global_fit_batch`.

    Parameters
    ----------
    table
        As for :func:`global_fit_batch`.
    net
        Blank-subtracted readings, shape (n_sets, n_mixtures) [unitless].
    epsilon, K
        The fitted values of each set, shape (n_sets,); NaN gives NaN residuals.

    Returns
    -------
    NDArray[np.float64]
        Shape (n_sets, n_fitted), standards then tests in layout order [unitless].
    """
    scale = _eps_scale(table.layout)
    with np.errstate(divide="ignore", invalid="ignore"):
        lg = np.clip(np.log10(K), table.low, table.high)
    theta = np.stack([np.asarray(epsilon, dtype=float) / scale, lg], axis=1)
    with np.errstate(invalid="ignore"):
        model_minus_data, _, _ = _residuals(table, theta, net)
    result: NDArray[np.float64] = np.where(
        np.isfinite(K)[:, None] & np.isfinite(epsilon)[:, None], -model_minus_data, np.nan
    )
    return result


def global_fit_jacobian(
    reaction: Reaction,
    instrument: Instrument,
    layout: Layout,
    *,
    readings: Readings | None = None,
) -> NDArray[np.float64]:
    """Sensitivity of the fitted net readings to the global fit's parameters, at the plan's
    constants (``reaction``), photometer (``instrument``) and mixtures (``layout``);
    ``readings`` are the forward model's of ``layout.totals_M`` there, when already at hand.

    Returns
    -------
    NDArray[np.float64]
        d(net reading)/d(eps) [L^-1 mol cm] and d(net reading)/d(log10 K) of each fitted row
        (standards, then tests), shape (n_fitted, 2): the forward model's exact derivatives
        (:func:`planner.forward.reading_sensitivity`), the blank's mean subtracted as in the
        fit.
    """
    if readings is None:
        readings = predict_readings(reaction, instrument, layout.totals_M)
    d_eps, d_lg = reading_sensitivity(reaction, instrument, readings, layout.measured)
    fit = _fitted_rows(layout)

    def net(derivative: NDArray[np.float64]) -> NDArray[np.float64]:
        # Without a blank the readings are fitted as they are (the blank reads zero).
        blank = float(derivative[layout.blanks].mean()) if layout.blanks.size else 0.0
        result: NDArray[np.float64] = derivative[fit] - blank
        return result

    return np.stack([net(d_eps), net(d_lg)], axis=1)


def global_fit_gain(jacobian: NDArray[np.float64]) -> NDArray[np.float64]:
    """How the global fit's (eps, log10 K) answer small changes of the fitted net readings.

    The fit is unweighted least squares, so to first order d theta = (J^T J)^-1 J^T d A_net
    (the linearised estimator; e.g. Bard, Nonlinear Parameter Estimation, 1974, ch. 7, from
    memory). Any reading error model then gives the parameters' covariance G Sigma G^T.

    Parameters
    ----------
    jacobian
        From :func:`global_fit_jacobian`, shape (n_fitted, 2).

    Returns
    -------
    NDArray[np.float64]
        G, shape (2, n_fitted); NaN where J^T J is singular (eps and K not separable).
    """
    normal = jacobian.T @ jacobian
    if not np.all(np.isfinite(normal)) or np.linalg.cond(normal) > 1e14:
        return np.full((2, jacobian.shape[0]), np.nan)
    return np.asarray(np.linalg.solve(normal, jacobian.T), dtype=np.float64)
