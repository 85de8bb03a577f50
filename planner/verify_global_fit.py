"""Independent re-derivation of a plan's global-fit prediction, for :mod:`planner.verify`.

The answer key of a plan designed for the global fit states the eps and K that fit will
report and their standard uncertainties. The prediction stage computes them from the sympy
error model of :mod:`planner.predict.uncertainty` and the forward model of
:mod:`planner.forward`. This module derives the same numbers a second way and imports neither
:mod:`planner.predict` nor :mod:`planner.design` nor :mod:`planner.forward`:

- the readings come from the caller's own forward model (``read``: :mod:`planner.verify`
  keeps its own, on purpose);
- the fit's gain is re-derived here: J, the change of every fitted net reading (standards
  and tests, the blanks' mean subtracted) per unit of eps and of log10 K, by central
  differences of ``read`` under changed constants, and G = (J^T J)^-1 J^T by a least-squares
  solve (numpy.linalg.lstsq) rather than the normal equations;
- each elementary input (a stock's concentration, a device's systematic error, one
  delivery's random error, a flask's volume, a reading's noise) changes the component totals
  of the mixtures it touches by the mixing rule written out below; the readings answer that
  change (central differences of ``read`` for each component, all mixtures at once), and the
  parameters answer the readings through G.

Mixing rule: a component total c = sum_s C_s (1 + r_s) V_s / V responds to a stock's relative
error r_s by C_s V_s / V; to a delivered volume V_s by (C_s - c) / V in a tube (the volume
made is the sum delivered) and by (C_s - C_d) / V in a flask made up to the mark with diluent
d; to the flask's own volume by (C_d - c) / V. Then u(y)^2 = sum_z (dy/dz u(z))^2 (JCGM
100:2008, eq. 10), and u(K) = K ln 10 u(log10 K).

The work is linear in the number of mixtures: a fixed number of forward-model calls over all
mixtures, and a constant amount of work per delivery.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

import numpy as np
from numpy.typing import NDArray

from planner.inputs import PlanInputs
from planner.lab.tolerances import standard_uncertainty_mL
from planner.records import record
from planner.result import Mixture
from planner.verify_prediction import bench_log_beta, reading_noise_sd

__all__ = ["RecomputedGlobalFit", "recompute_global_fit"]

#: Reads component totals (n, n_components) [mol/L] with the given log10 beta and species
#: absorptivities (None: the plan's) into photometer readings (n,).
Reader = Callable[
    [NDArray[np.float64], NDArray[np.float64] | None, NDArray[np.float64] | None],
    NDArray[np.float64],
]

# Central-difference steps: in log10 K and relative in eps (truncation error ~1e-8), and
# relative in a component total (as the first-order budget, JCGM 100:2008, 5.1.3 note 2).
_PARAMETER_STEP = 1e-4
_TOTAL_STEP = 1e-6


@record
class RecomputedGlobalFit:
    """The global fit's prediction, re-derived: eps and K (the plan's, which the fit returns
    from noise-free readings) and their standard uncertainties."""

    epsilon: float
    u_epsilon: float
    K: float
    u_K: float


def recompute_global_fit(
    inputs: PlanInputs,
    mixtures: Sequence[Mixture],
    totals_M: NDArray[np.float64],
    read: Reader,
    deliveries: Sequence[tuple[int, int, str, float, float]],
    temperature: tuple[NDArray[np.float64], float] | None = None,
) -> RecomputedGlobalFit | str:
    """Re-derive the global fit's prediction of a plan (see the module notes).

    Parameters
    ----------
    inputs
        The plan's inputs.
    mixtures
        The plan's mixtures, in plan order (roles and additions are read).
    totals_M
        Nominal component totals of every mixture, re-mixed by the verifier, shape
        (n_mixtures, n_components) [mol/L].
    read
        The verifier's forward model.
    deliveries
        Every measured delivery: (mixture row, stock column in ``inputs.stocks``, device id,
        u of the device's systematic error [mL], u of the delivery's random error [mL]).
    temperature
        d(reading)/dT of each mixture [1/K] and the SD of a bench's temperature [°C], one
        input shared by every reading; None for none.

    Returns
    -------
    RecomputedGlobalFit or str
        The numbers, or why the global fit gives none (no blank, standard or test; eps and K
        not separable).
    """
    roles = [m.role for m in mixtures]
    blanks = np.array([i for i, r in enumerate(roles) if r == "blank"], dtype=np.int64)
    fitted = np.array([i for i, r in enumerate(roles) if r in {"standard", "test"}], dtype=np.int64)
    if not blanks.size or "standard" not in roles or "test" not in roles:
        return "the global fit needs a blank, a standard and a test mixture"
    reaction = inputs.reaction
    measured = inputs.measured
    logs = bench_log_beta(inputs)
    epsilons = reaction.species_epsilon()
    lg, eps = float(logs[measured]), float(epsilons[measured])

    def net(readings: NDArray[np.float64]) -> NDArray[np.float64]:
        """Fitted rows' readings less the blanks' mean, along the last axis."""
        result: NDArray[np.float64] = readings[..., fitted] - readings[..., blanks].mean(
            axis=-1, keepdims=True
        )
        return result

    def read_with(trial_lg: float, trial_eps: float) -> NDArray[np.float64]:
        trial_logs = logs.copy()
        trial_logs[measured] = trial_lg
        trial_eps_all = epsilons.copy()
        trial_eps_all[measured] = trial_eps
        return net(read(totals_M, trial_logs, trial_eps_all))

    h = _PARAMETER_STEP
    d_eps = (read_with(lg, eps * (1 + h)) - read_with(lg, eps * (1 - h))) / (2 * h * eps)
    d_lg = (read_with(lg + h, eps) - read_with(lg - h, eps)) / (2 * h)
    jacobian = np.stack([d_eps, d_lg], axis=1)
    norms = np.linalg.norm(jacobian, axis=0)
    # A column of zeros (readings that eps or K does not move, e.g. far past the photometer's
    # range with a tampered eps) leaves nothing to fit as surely as two alike columns do.
    if not np.all(np.isfinite(norms) & (norms > 0)):
        return "eps or K does not move the readings, so the global fit cannot find them"
    if np.linalg.matrix_rank(jacobian / norms, tol=1e-7) < 2:
        return "eps and K move the readings alike, so the global fit cannot separate them"
    gain = np.linalg.lstsq(jacobian, np.eye(fitted.size), rcond=None)[0]  # (2, n_fitted)

    # d reading / d component total of every mixture (n_mix, n_comp).
    n_mix, n_comp = totals_M.shape
    slope = np.zeros((n_mix, n_comp))
    for j in range(n_comp):
        step = _TOTAL_STEP * totals_M[:, j]
        if not np.any(step > 0):
            continue
        up, down = totals_M.copy(), totals_M.copy()
        up[:, j] += step
        down[:, j] -= step
        change = read(up, None, None) - read(down, None, None)
        slope[:, j] = np.where(step > 0, change / np.where(step > 0, 2 * step, 1.0), 0.0)

    volume_mL = inputs.design.total_volume_mL
    stock_M = np.array(
        [[st.contains_M.get(c, 0.0) for c in reaction.components] for st in inputs.stocks]
    )
    diluent = inputs.diluent
    diluent_M = (
        stock_M[[st.id for st in inputs.stocks].index(diluent.id)]
        if diluent is not None
        else np.zeros(n_comp)
    )
    in_flask = inputs.design.vessel_kind == "volumetric-flask"
    volumes = np.zeros((n_mix, len(inputs.stocks)))
    column_of = {st.id: k for k, st in enumerate(inputs.stocks)}
    for row, m in enumerate(mixtures):
        for addition in m.additions:
            volumes[row, column_of[addition.stock]] += addition.volume_mL

    # The parameters' change per unit change of one mixture's reading: G's column for a
    # fitted row, minus G's row sums shared among the blanks for a blank (n_mix columns).
    per_reading = np.zeros((2, n_mix))
    per_reading[:, fitted] = gain
    per_reading[:, blanks] = -gain.sum(axis=1, keepdims=True) / blanks.size

    variance = np.zeros(2)
    # Stocks: every mixture's reading moves at once.
    for k, stock in enumerate(inputs.stocks):
        if stock.relative_uncertainty > 0:
            dc = volumes[:, k, None] * stock_M[None, k, :] / volume_mL
            moved = per_reading @ (slope * dc).sum(axis=1)
            variance += (moved * stock.relative_uncertainty) ** 2
    # Deliveries: systematic errors add up per device id, random ones stand alone.
    systematic: dict[str, list[float]] = {}
    for row, column, device_id, u_sys, u_rand in deliveries:
        reference = diluent_M if in_flask else totals_M[row]
        moved = per_reading[:, row] * float(
            slope[row] @ ((stock_M[column] - reference) / volume_mL)
        )
        if u_sys > 0:
            total = systematic.setdefault(device_id, [0.0, 0.0, u_sys])
            total[0] += float(moved[0])
            total[1] += float(moved[1])
        if u_rand > 0:
            variance += (moved * u_rand) ** 2
    for d_eps_total, d_lg_total, u_sys in systematic.values():
        variance += (np.array([d_eps_total, d_lg_total]) * u_sys) ** 2
    # Each mixture's own flask.
    if inputs.flask is not None:
        u_flask = standard_uncertainty_mL(inputs.flask)
        per_row = (slope * ((diluent_M[None, :] - totals_M) / volume_mL)).sum(axis=1)
        variance += ((per_reading * per_row[None, :] * u_flask) ** 2).sum(axis=1)
    # Readings: each its own noise at its own reading; one blank-cuvette offset on the blanks.
    base = read(totals_M, None, None)
    sd = np.array([reading_noise_sd(inputs, float(a)) for a in base])
    variance += ((per_reading * sd) ** 2).sum(axis=1)
    variance += (per_reading[:, blanks].sum(axis=1) * inputs.bench.blank_offset_sd) ** 2
    if temperature is not None:
        variance += (per_reading @ (np.asarray(temperature[0]) * temperature[1])) ** 2

    k_value = 10.0**lg
    return RecomputedGlobalFit(
        epsilon=eps,
        u_epsilon=math.sqrt(variance[0]),
        K=k_value,
        u_K=k_value * math.log(10.0) * math.sqrt(variance[1]),
    )
