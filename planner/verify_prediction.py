"""Independent re-derivation of a plan's ``prediction`` block, for :mod:`planner.verify`.

The prediction is what the answer key states: the molar absorptivity and the mean K the
all-bound analysis will report from one bench's readings, their standard uncertainties, the K of
each test mixture, and the bias of K against the K the plan assumes. The design computes it
with :mod:`planner.predict.uncertainty`, whose sensitivity coefficients sympy derives. This
module derives the same numbers a second way and, like :mod:`planner.verify`, imports neither
:mod:`planner.design` nor :mod:`planner.predict`, so a mistake in either shows up as a
disagreement instead of being copied:

- the analysis is re-done from the verifier's own re-mixed component totals and re-read
  absorbances (not the stated ones);
- the sensitivity coefficients are derived by hand (written out below), not by sympy;
- the error model's inputs are re-listed from the recipes, the shelf and the tolerance tables
  of :mod:`planner.lab.tolerances`.

What is shared with the design is the *definition* of the prediction, which any
re-derivation has to share: the all-bound analysis and the error model of docs/methods.md
sections 9 and 10, and the recipes the design chose (every reagent blank, every standard and
every test, as the answer key uses them).

The all-bound analysis
------------------
With c_k the limiting reagent's nominal total in standard k, A_k its reading and A_0 the
blank's, b the path length, the curve through the origin gives

    eps = P / (b S),  P = sum_k c_k (A_k - A_0),  S = sum_k c_k^2;

test i, with nominal totals M_i (excess) and L_i (limiting), gives

    x_i = (A_i - A_0) / (eps b),  K_i = x_i / ((M_i - x_i)(L_i - x_i)),

and the answer key states the mean K and K / K_true - 1.

Sensitivity coefficients (hand derivation)
------------------------------------------
    d eps/d c_k = ((A_k - A_0) - 2 b eps c_k) / (b S)
    d eps/d A_k = c_k / (b S)
    d eps/d A_0 = -(sum_k c_k) / (b S)
    d K_i/d x_i = (M_i L_i - x_i^2) / ((M_i - x_i)(L_i - x_i))^2
    d K_i/d M_i = -x_i / ((M_i - x_i)^2 (L_i - x_i))
    d K_i/d L_i = -x_i / ((M_i - x_i)(L_i - x_i)^2)
    d x_i/d A_i = 1 / (eps b),  d x_i/d A_0 = -1 / (eps b),  d x_i/d eps = -x_i / eps

and for the mean K, D = d mean(K)/d eps = (1/n) sum_i dK_i/dx_i dx_i/d eps. A component total
c = sum_s C_s (1 + r_s) V_s / V responds to a stock's relative error r_s by C_s V_s / V; to a
delivered volume V_s by (C_s - c) / V in a tube (the volume made is the sum delivered) and by
(C_s - C_d) / V in a flask made up to the mark with diluent d; to the flask's own volume by
(C_d - c) / V. The readings respond only to their own noise. The standard uncertainty is then
u(y)^2 = sum_z (dy/dz u(z))^2 over the independent inputs z (JCGM 100:2008, eq. 10): one
relative error per stock, one systematic error per device id (shared by all its deliveries),
one random error per delivery, one volume error per flask, one noise per reading.

Each input touches one mixture, except a stock's and a device's, which are as many as the
shelf holds; so the work is linear in the number of mixtures.

References
----------
JCGM 100:2008, Evaluation of measurement data -- Guide to the expression of uncertainty in
measurement (GUM), 5.1 (eq. 10) and 5.1.3.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from planner.chem.activity import log_beta_in_medium
from planner.chem.species import charge_from_name
from planner.inputs import Device, PlanInputs
from planner.lab.deliveries import devices_by_id
from planner.lab.tolerances import piston_errors_uL, standard_uncertainty_mL
from planner.records import record
from planner.result import Addition, Mixture, Prediction

__all__ = [
    "ROUNDING_PROBE",
    "RecomputedPrediction",
    "bench_log_beta",
    "delivery_split_mL",
    "delivery_volumes_mL",
    "measured_deliveries",
    "reading_noise_sd",
    "recompute_prediction",
    "technique_u_mL",
]

#: Relative change of the inputs that probes how much rounding the prediction amplifies:
#: about ten units in the last place of a double (IEEE 754 binary64, unit roundoff 1.1e-16).
ROUNDING_PROBE = 1e-15

_UL_PER_ML = 1000.0
# How each kind of device errs (docs/methods.md section 9): one-mark glassware repeats its
# calibration error at every use (systematic per device); graduated glassware reads two
# different points of its scale per delivery (random per delivery); piston pipettes have both
# (ISO 8655-2 gives a systematic and a random limit).
_ONE_MARK = frozenset({"transfer-pipette", "volumetric-flask"})
_GRADUATED = frozenset({"buret", "graduated-pipette", "graduated-cylinder"})


@record
class RecomputedPrediction:
    """The prediction block, re-derived, with how far rounding of its inputs moves it.

    Attributes
    ----------
    prediction
        The numbers the plan's prediction block states (:class:`planner.result.Prediction`):
        eps from the curve through the origin, the mean K over the tests, their standard
        uncertainties, the bias of K against K_true, the constants the plan assumes and each
        test's K. The ranges and the intercept fit are not re-derived.
    rounding
        For each of the prediction's scalar numbers, by name, how far it moves when the blank
        reading or the component totals change by :data:`ROUNDING_PROBE` of their value (in
        the number's unit; infinite when such a change reaches a singularity). Near zero for a
        well-posed plan; large when a test's product nearly equals a reagent's total, so that
        the last digits of the inputs decide the result.
    rounding_per_test
        The same for each entry of ``prediction.K_per_test`` [L/mol].
    """

    prediction: Prediction
    rounding: dict[str, float]
    rounding_per_test: tuple[float, ...]


def delivery_split_mL(device: Device) -> tuple[float, float] | None:
    """(u of the device's systematic error, u of one delivery's random error) [mL], or None
    for a device that does not measure a delivery (the error model of docs/methods.md
    section 10, re-derived for verify)."""
    if device.kind == "piston-pipette":
        _, random_uL = piston_errors_uL(device, device.volume_mL * _UL_PER_ML)
        return standard_uncertainty_mL(device), random_uL / _UL_PER_ML
    if device.kind in _ONE_MARK:
        return standard_uncertainty_mL(device), 0.0
    if device.kind in _GRADUATED:
        return 0.0, standard_uncertainty_mL(device)
    return None


#: Molar gas constant [J mol⁻¹ K⁻¹] (CODATA 2018, exact) and 0 °C [K], for verify's own
#: van 't Hoff.
_R_J_PER_MOL_K = 8.314462618
_ZERO_C_K = 273.15


def bench_log_beta(inputs: PlanInputs, temperature_C: float | None = None) -> NDArray[np.float64]:
    """log10 beta of every product species at the benches' temperature, re-derived for verify.

    The integrated van 't Hoff equation, ln(beta2/beta1) = -(dH/R)(1/T2 - 1/T1) (Atkins and
    de Paula, Physical Chemistry, 9th ed., 2010, eq. 6.23, from memory), from each species'
    ``log_beta`` at ``reaction.temperature_C`` and its ``enthalpy_kJ_mol`` (none: no change),
    to ``temperature_C`` or else ``session.temperature_C``.
    """
    reaction = inputs.reaction
    wanted = inputs.session.temperature_C if temperature_C is None else temperature_C
    logs = np.array([sp.log_beta for sp in reaction.species], dtype=float)
    if wanted is not None:
        t1, t2 = reaction.temperature_C + _ZERO_C_K, wanted + _ZERO_C_K
        for i, sp in enumerate(reaction.species):
            if sp.enthalpy_kJ_mol:
                ln_ratio = -(sp.enthalpy_kJ_mol * 1000.0 / _R_J_PER_MOL_K) * (1 / t2 - 1 / t1)
                logs[i] += ln_ratio / math.log(10.0)
    medium = inputs.design.ionic_medium
    if medium is not None:
        # A constant medium moves every constant alike (Davies or SIT, planner.chem.activity,
        # checked there against published values); dz2 = sum nu z^2 - (sum nu z)^2.
        charges = {c: charge_from_name(c) for c in reaction.components}
        dz2 = [
            sum(n * charges[c] ** 2 for c, n in sp.formula.items())
            - sum(n * charges[c] for c, n in sp.formula.items()) ** 2
            for sp in reaction.species
        ]
        logs = log_beta_in_medium(
            logs,
            dz2,
            reaction.ionic_strength_M,
            [medium.ionic_strength_M],
            reaction.sit_delta_epsilon_kg_mol,
        )[0]
    return logs


def technique_u_mL(inputs: PlanInputs, device: Device, volume_mL: float) -> float:
    """The bench technique's standard deviation for one delivery [mL], re-derived for verify
    (docs/methods.md, the bench model): a buret is read twice, before and after, each reading
    with SD ``buret_reading_sd_mL``; a transfer or graduated pipette errs by ``pipette_rsd``
    of its volume, a piston pipette by ``piston_rsd``; anything else adds nothing."""
    bench = inputs.bench
    if device.kind == "buret":
        return math.sqrt(bench.buret_reading_sd_mL**2 + bench.buret_reading_sd_mL**2)
    if device.kind in {"transfer-pipette", "graduated-pipette"}:
        return bench.pipette_rsd * volume_mL
    if device.kind == "piston-pipette":
        return bench.piston_rsd * volume_mL
    return 0.0


def delivery_volumes_mL(addition: Addition) -> list[float]:
    """The volume of each delivery of an addition [mL]: as listed, else equal shares."""
    if len(addition.deliveries) == len(addition.devices):
        return [d.volume_mL for d in addition.deliveries]
    return [addition.volume_mL / len(addition.devices)] * len(addition.devices)


def reading_noise_sd(inputs: PlanInputs, absorbance: float) -> float:
    """SD of one reading at absorbance A, re-derived for verify [absorbance units].

    The three-term precision model of absorption photometry (Rothman, Crouch and Ingle,
    Anal. Chem. 47 (1975) 1226, from memory): a floor s0, a term r A proportional to the
    reading (r from the photometer and the cuvette's placement, in quadrature), and constant
    transmittance noise sigma_T, which A = -log10 T turns into sigma_T / (T ln 10).
    """
    instrument = inputs.instrument
    transmittance = 10.0 ** (-absorbance)
    # Without transmittance noise the term is 0 at any reading; with it, a reading so high
    # that T underflows to 0 has no usable precision.
    if instrument.transmittance_sd == 0.0:
        from_transmittance = 0.0
    elif transmittance == 0.0:
        from_transmittance = math.inf
    else:
        from_transmittance = instrument.transmittance_sd / (transmittance * math.log(10.0))
    proportional = math.sqrt(instrument.absorbance_rsd**2 + inputs.bench.cuvette_rsd**2)
    return math.sqrt(
        instrument.absorbance_sd**2 + (proportional * absorbance) ** 2 + from_transmittance**2
    )


def measured_deliveries(
    inputs: PlanInputs, mixtures: Sequence[Mixture]
) -> list[tuple[int, int, str, float, float]] | str:
    """Every measured delivery of the mixtures, with its error model, or why there is none.

    Returns
    -------
    list or str
        (row in ``mixtures``, stock column in ``inputs.stocks``, device id, u of the device's
        systematic error [mL], u of the delivery's random error [mL]) per delivery; the
        diluent to a flask's mark is the flask's volume, not a delivery. A string names an
        addition of an unknown stock or a device that does not measure.
    """
    column_of = {st.id: j for j, st in enumerate(inputs.stocks)}
    diluent = inputs.diluent
    in_flask = inputs.design.vessel_kind == "volumetric-flask"
    shelf = devices_by_id(inputs.glassware)
    deliveries: list[tuple[int, int, str, float, float]] = []
    for row, mixture in enumerate(mixtures):
        for addition in mixture.additions:
            column = column_of.get(addition.stock)
            if column is None:
                return f"{mixture.id} adds {addition.stock!r}, which is not a stock"
            if in_flask and diluent is not None and addition.stock == diluent.id:
                continue  # to the mark: the flask's volume, not a measured delivery
            each_mL = delivery_volumes_mL(addition) if addition.devices else []
            for device_id, volume_mL in zip(addition.devices, each_mL, strict=True):
                device = shelf.get(device_id)
                split = None if device is None else delivery_split_mL(device)
                if split is None or device is None:
                    return f"{mixture.id}: {device_id} does not measure a delivery"
                # The technique's error is random per delivery, like the device's own.
                u_random = math.hypot(split[1], technique_u_mL(inputs, device, volume_mL))
                deliveries.append((row, column, device_id, split[0], u_random))
    return deliveries


def _square(value: float) -> float:
    """value², infinite rather than an OverflowError when it does not fit a float."""
    return value * value


def _root(value: float) -> float:
    """sqrt of a variance, nan for a nan one (math.sqrt would raise on it only when < 0)."""
    return math.sqrt(value) if value >= 0 else math.nan


def recompute_prediction(
    inputs: PlanInputs,
    mixtures: Sequence[Mixture],
    totals_M: NDArray[np.float64],
    readings: NDArray[np.float64],
    temperature: tuple[NDArray[np.float64], float] | None = None,
) -> RecomputedPrediction | str:
    """Re-derive the prediction block of a plan (see the module notes).

    Parameters
    ----------
    inputs
        The plan's inputs.
    mixtures
        The plan's mixtures, in plan order (only roles and additions are read).
    totals_M
        Nominal total of each reaction component in each mixture, re-mixed from the
        additions, shape (n_mixtures, n_components) [mol/L].
    readings
        Re-computed photometer reading of each mixture (stray light applied, blank not
        subtracted), shape (n_mixtures,) [unitless].
    temperature
        d(reading)/dT of each mixture [1/K] and the SD of a bench's temperature [°C]: one
        input shared by every reading of the bench; None for none.

    Returns
    -------
    RecomputedPrediction or str
        The numbers, or why the all-bound analysis gives none for these recipes (no blank,
        standard or test; no excess partner in the coloured product; a device that does not
        measure; a non-finite result such as a test whose product equals a reagent's total).
    """
    reaction = inputs.reaction
    limiting_name = inputs.design.limiting
    holding = [i for i, sp in enumerate(reaction.species) if sp.formula.get(limiting_name, 0) > 0]
    if not holding:
        return f"no product species holds the limiting reagent {limiting_name}"
    # The measured species is part of the validated inputs (design.measured_species, or the
    # one absorbing product holding the limiting reagent).
    coloured = inputs.measured_species
    partners = [c for c, n in coloured.formula.items() if c != limiting_name and n > 0]
    if not partners:
        return f"the coloured product {coloured.name} holds no reagent besides {limiting_name}"
    limiting = reaction.components.index(limiting_name)
    excess = reaction.components.index(partners[0])

    blanks = [i for i, m in enumerate(mixtures) if m.role == "blank"]
    standards = [i for i, m in enumerate(mixtures) if m.role == "standard"]
    tests = [i for i, m in enumerate(mixtures) if m.role == "test"]
    if not blanks or not standards or not tests:
        return "the all-bound analysis needs a blank, a standard and a test mixture"
    # The prediction uses every blank (their mean is the blank reading), every standard and
    # every test.
    chosen = [*blanks, *standards, *tests]
    n_blank, n_std, n_test = len(blanks), len(standards), len(tests)
    rows_blank = np.arange(n_blank)
    rows_std = np.arange(n_blank, n_blank + n_std)
    rows_test = np.arange(n_blank + n_std, n_blank + n_std + n_test)

    stock_ids = [st.id for st in inputs.stocks]
    column_of = {sid: j for j, sid in enumerate(stock_ids)}
    stock_M = np.array(
        [[st.contains_M.get(c, 0.0) for c in (limiting_name, partners[0])] for st in inputs.stocks],
        dtype=float,
    ).reshape(len(stock_ids), 2)
    diluent = inputs.diluent
    diluent_column = column_of[diluent.id] if diluent is not None else None
    volume_mL = inputs.design.total_volume_mL

    # Per chosen mixture: the stock volumes, and every measured delivery.
    volumes = np.zeros((len(chosen), len(stock_ids)))
    listed = measured_deliveries(inputs, [mixtures[index] for index in chosen])
    if isinstance(listed, str):
        return listed
    deliveries = listed
    for row, index in enumerate(chosen):
        for addition in mixtures[index].additions:
            volumes[row, column_of[addition.stock]] += addition.volume_mL

    def evaluate(totals: NDArray[np.float64], reads: NDArray[np.float64]) -> list[float]:
        """[eps, u(eps), mean K, u(mean K), K of each test] for these totals and readings."""
        with np.errstate(all="ignore"):
            epsilon, u_epsilon, k_tests, u_k = _propagate(
                inputs,
                totals,
                reads,
                rows_blank,
                rows_std,
                rows_test,
                stock_M,
                volumes,
                deliveries,
                diluent_column,
                volume_mL,
                per_kelvin,
            )
        return [epsilon, u_epsilon, float(np.mean(k_tests)), u_k, *k_tests.tolist()]

    per_kelvin = (
        np.zeros(len(chosen))
        if temperature is None
        else np.asarray(temperature[0], dtype=float)[chosen] * temperature[1]
    )
    base_totals = totals_M[chosen][:, [limiting, excess]]
    base_readings = readings[chosen]
    numbers = evaluate(base_totals, base_readings)
    if not all(math.isfinite(v) for v in numbers):
        return "the all-bound analysis gives no finite result for these recipes"
    # How far the result moves when the blank reading or the totals change in their last
    # digits: the rounding that another, equally valid order of the same arithmetic makes.
    spread = [0.0] * len(numbers)
    blank_up, blank_down = base_readings.copy(), base_readings.copy()
    blank_up[rows_blank] *= 1.0 + ROUNDING_PROBE
    blank_down[rows_blank] *= 1.0 - ROUNDING_PROBE
    for totals, reads in (
        (base_totals, blank_up),
        (base_totals, blank_down),
        (base_totals * (1.0 + ROUNDING_PROBE), base_readings),
        (base_totals * (1.0 - ROUNDING_PROBE), base_readings),
    ):
        for i, (moved, value) in enumerate(zip(evaluate(totals, reads), numbers, strict=True)):
            # A probe that reaches a singularity makes the value worth nothing: inf.
            spread[i] = max(spread[i], abs(moved - value) if math.isfinite(moved) else math.inf)
    k_true = float(10.0 ** bench_log_beta(inputs)[inputs.measured])
    epsilon, u_epsilon, k_mean, u_k, *k_tests = numbers
    return RecomputedPrediction(
        prediction=Prediction(
            epsilon=epsilon,
            u_epsilon=u_epsilon,
            K=k_mean,
            u_K=u_k,
            K_bias_from_assumption=k_mean / k_true - 1.0,
            K_true=k_true,
            epsilon_true=float(coloured.epsilon),
            K_per_test=tuple(k_tests),
        ),
        rounding={
            "epsilon": spread[0],
            "u_epsilon": spread[1],
            "K": spread[2],
            "u_K": spread[3],
            "K_bias_from_assumption": spread[2] / k_true,
            "K_true": 0.0,
            "epsilon_true": 0.0,
        },
        rounding_per_test=tuple(spread[4:]),
    )


def _propagate(
    inputs: PlanInputs,
    totals: NDArray[np.float64],
    readings: NDArray[np.float64],
    rows_blank: NDArray[np.int64],
    rows_std: NDArray[np.int64],
    rows_test: NDArray[np.int64],
    stock_M: NDArray[np.float64],
    volumes: NDArray[np.float64],
    deliveries: Sequence[tuple[int, int, str, float, float]],
    diluent_column: int | None,
    volume_mL: float,
    temperature_move: NDArray[np.float64],
) -> tuple[float, float, NDArray[np.float64], float]:
    """eps, u(eps), K of each test and u(mean K); the first rows are the blanks (A_0 is their
    mean, so each blank reading carries 1/n_blanks of d/dA_0), columns (L, M)."""
    # numpy scalars throughout, so that a division by zero gives inf or nan (under the
    # caller's errstate) and the result is reported as not finite.
    b = np.float64(inputs.instrument.path_length_cm)
    a0 = np.mean(readings[rows_blank])
    n_blank = len(rows_blank)
    c = totals[rows_std, 0]
    a = readings[rows_std]
    s = np.sum(c * c)
    epsilon = np.sum(c * (a - a0)) / (b * s)
    d_eps_c = ((a - a0) - 2.0 * b * epsilon * c) / (b * s)
    d_eps_a = c / (b * s)
    d_eps_a0 = -np.sum(c) / (b * s)

    big_m = totals[rows_test, 1]
    big_l = totals[rows_test, 0]
    x = (readings[rows_test] - a0) / (epsilon * b)
    k_tests = x / ((big_m - x) * (big_l - x))
    denominator = (big_m - x) * (big_l - x)
    d_k_x = (big_m * big_l - x * x) / (denominator * denominator)
    d_k_m = -x / ((big_m - x) * (big_m - x) * (big_l - x))
    d_k_l = -x / ((big_m - x) * (big_l - x) * (big_l - x))
    n_test = len(rows_test)
    d_mean_eps = np.sum(d_k_x * (-x / epsilon)) / n_test

    # d(measurand)/d(component total) of every chosen mixture, columns (L, M).
    n = len(readings)
    w_eps = np.zeros((n, 2))
    w_eps[rows_std, 0] = d_eps_c
    w_k = d_mean_eps * w_eps
    w_k[rows_test, 0] += d_k_l / n_test
    w_k[rows_test, 1] += d_k_m / n_test

    var_eps = 0.0
    var_k = 0.0
    # Stock concentrations: dc/dr_s = C_s V_s / V in every mixture.
    for column, stock in enumerate(inputs.stocks):
        u = stock.relative_uncertainty
        if u <= 0:
            continue
        dc = volumes[:, column, None] * stock_M[None, column, :] / volume_mL
        var_eps += _square(float(np.sum(w_eps * dc)) * u)
        var_k += _square(float(np.sum(w_k * dc)) * u)

    # Deliveries: systematic errors add up per device id, random ones stand alone.
    diluent_M = stock_M[diluent_column] if diluent_column is not None else np.zeros(2)
    in_flask = inputs.design.vessel_kind == "volumetric-flask"
    systematic: dict[str, list[float]] = {}
    for row, column, device_id, u_sys, u_rand in deliveries:
        reference = diluent_M if in_flask else totals[row]
        dc = (stock_M[column] - reference) / volume_mL
        g_eps = float(np.dot(w_eps[row], dc))
        g_k = float(np.dot(w_k[row], dc))
        if u_sys > 0:
            total = systematic.setdefault(device_id, [0.0, 0.0, u_sys])
            total[0] += g_eps
            total[1] += g_k
        if u_rand > 0:
            var_eps += _square(g_eps * u_rand)
            var_k += _square(g_k * u_rand)
    for g_eps, g_k, u_sys in systematic.values():
        var_eps += _square(g_eps * u_sys)
        var_k += _square(g_k * u_sys)

    # Each mixture's own flask: dc/dV_f = (C_d - c) / V.
    flask = inputs.flask  # the vessel, derived once from the validated inputs
    if flask is not None:
        u_flask = standard_uncertainty_mL(flask)
        dc = (diluent_M[None, :] - totals) / volume_mL
        var_eps += float(np.sum((np.sum(w_eps * dc, axis=1) * u_flask) ** 2))
        var_k += float(np.sum((np.sum(w_k * dc, axis=1) * u_flask) ** 2))

    # Readings: each its own noise, at its own reading; one blank-cuvette offset on the blanks.
    sd = np.array([reading_noise_sd(inputs, float(a)) for a in readings])
    g_eps_read = np.zeros(n)
    g_eps_read[rows_std] = d_eps_a
    g_eps_read[rows_blank] = d_eps_a0 / n_blank
    g_k_read = d_mean_eps * g_eps_read
    g_k_read[rows_test] += d_k_x / (epsilon * b) / n_test
    g_k_read[rows_blank] += np.sum(d_k_x * (-1.0 / (epsilon * b))) / n_test / n_blank
    var_eps += float(np.sum((g_eps_read * sd) ** 2))
    var_k += float(np.sum((g_k_read * sd) ** 2))
    offset = inputs.bench.blank_offset_sd
    var_eps += _square(float(np.sum(g_eps_read[rows_blank])) * offset)
    var_k += _square(float(np.sum(g_k_read[rows_blank])) * offset)
    # The bench's temperature: one input moving every reading by dA/dT times its SD.
    var_eps += _square(float(np.dot(g_eps_read, temperature_move)))
    var_k += _square(float(np.dot(g_k_read, temperature_move)))
    return float(epsilon), _root(var_eps), k_tests, _root(var_k)
