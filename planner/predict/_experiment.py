"""One bench's set of mixtures as arrays: what the uncertainty models and the virtual class share.

Both :mod:`planner.predict.uncertainty` (first-order propagation) and
:mod:`planner.predict.montecarlo` (virtual class) need the same description of one bench's set
of mixtures: which stock goes into which mixture with which device, what each component's
nominal total is, what the photometer is predicted to read, and how every source of error is
modelled. :func:`bench_experiment` builds it once from the plan, so the two methods cannot
disagree about their inputs.

Error model of one bench's set of mixtures (the same in both methods)
--------------------------------------------------------------------
- **Stock concentration**: one relative error per stock, shared by every mixture made from that
  prepared batch (systematic), normal with standard deviation ``relative_uncertainty``.
- **One-mark devices** (transfer pipettes): the tolerance bounds the calibration error of the
  piece of glassware, which repeats at every use, so it is a systematic error per device id,
  triangular with half-width a, u = a/sqrt(6) (EURACHEM/CITAC CG4, 3rd ed., 2012, section 8.1
  and Appendix E.1, from memory). Every delivery by that device shares it.
- **Graduated devices** (burets, graduated pipettes, graduated cylinders): each delivery reads
  two different points of the scale, whose calibration errors differ from point to point; with
  no calibration data the errors of different deliveries are taken as independent (random per
  delivery), triangular with half-width a, u = a/sqrt(6).
- **Piston pipettes**: ISO 8655-2:2002 gives a systematic limit and a random limit (the latter a
  standard deviation). The systematic error is per device, triangular with half-width equal to
  the limit (u = limit/sqrt(6), as :func:`planner.lab.tolerances.standard_uncertainty_mL`); the
  random error is per delivery, normal with that standard deviation.
- **Volumetric flasks** as vessels: every mixture is made up in its own flask, so the flask's
  volume error is independent per mixture, triangular with u = a/sqrt(6); the diluent "to the
  mark" is not a measured delivery.
- **Technique** (the plan's ``[bench]``, :func:`planner.lab.bench.technique_sd_mL`): one
  normal error per delivery, independent, beside the device's own (two buret readings, a
  pipette's drainage, a piston pipette's handling).
- **Readings**: independent normal noise per reading, blank included, with the
  heteroscedastic standard deviation of :func:`planner.lab.bench.reading_sd` at the
  predicted reading (floor, proportional and constant-transmittance terms, and the cuvette's
  placement).
- **Blank cuvette**: one normal offset per bench, ``bench.blank_offset_sd``, on the blank
  readings (the samples are read in another cuvette), shared by every blank.
- **Room temperature**: one normal deviation per bench, ``bench.temperature_sd_C``, from the
  benches' temperature; it moves every constant that has an enthalpy by van 't Hoff
  (:mod:`planner.chem.thermodynamics`), and so every reading of the bench at once.
- **Stocks are one batch for the class**: the prep room makes each stock once, so its error
  is common to every bench of the class; the Monte Carlo draws it once per class and reports
  the class-common spread apart from the bench-to-bench spread.

A bench with several pieces of one device id is modelled as using one piece throughout (the
conservative choice for one-mark devices: their errors then all correlate).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from planner.analysis import Layout
from planner.chem.constants import bench_K
from planner.errors import InvalidInputError
from planner.forward import predict_readings
from planner.inputs import Device, PlanInputs
from planner.lab.bench import reading_sd, technique_sd_mL
from planner.lab.deliveries import devices_by_id
from planner.lab.tolerances import piston_errors_uL, standard_uncertainty_mL
from planner.records import record
from planner.result import ROLES, Mixture, Role

__all__ = [
    "BenchExperiment",
    "Delivery",
    "bench_experiment",
    "delivery_split_mL",
    "reading_per_kelvin",
    "triangular_half_width",
]

_UL_PER_ML = 1000.0
_SQRT6 = math.sqrt(6.0)
_ONE_MARK = frozenset({"transfer-pipette"})
_GRADUATED = frozenset({"buret", "graduated-pipette", "graduated-cylinder"})


@record
class Delivery:
    """One measured delivery of a stock into a mixture.

    Attributes
    ----------
    mixture
        Row of the mixture in :attr:`BenchExperiment.mixture_ids`.
    stock
        Column of the stock in :attr:`BenchExperiment.stock_ids`.
    device
        Device id.
    u_systematic_mL
        Standard uncertainty of the device's systematic error, shared by every delivery of
        that device [mL]; 0 when the device has none.
    u_random_mL
        Standard uncertainty of this delivery's own error [mL]; 0 when there is none.
    random_is_normal
        True when the random error is normal (a standard deviation, piston pipettes), False
        when triangular (a tolerance, graduated glassware).
    u_technique_mL
        Standard deviation of the technique's error of this delivery (normal, its own) [mL].
    """

    mixture: int
    stock: int
    device: str
    u_systematic_mL: float
    u_random_mL: float
    random_is_normal: bool
    u_technique_mL: float = 0.0


@record
class BenchExperiment:
    """One bench's set of mixtures, as the uncertainty models see it (made by
    :func:`bench_experiment` from the plan and its recipes).

    Attributes
    ----------
    mixture_ids, stock_ids
        Mixture ids and stocks in plan order (the stocks are the columns of ``volumes_mL``).
    components
        Reaction components (columns of ``stock_M`` and ``totals_M``).
    stock_M
        Concentration of each component in each stock, shape (n_stocks, n_components)
        [mol/L].
    u_relative_stock
        Relative standard uncertainty of each stock's concentrations, shape (n_stocks,)
        [unitless].
    volumes_mL
        Nominal volume of each stock in each mixture, shape (n_mixtures, n_stocks) [mL]; in a
        flask the diluent's entry is what fills to the mark.
    total_volume_mL
        Nominal final volume of each mixture, shape (n_mixtures,) [mL].
    in_flask
        True when every mixture is made up to the mark of a volumetric flask.
    diluent
        Column of the diluent stock, or None.
    u_flask_mL
        Standard uncertainty of one flask's volume [mL] (0 for tubes).
    deliveries
        Every measured delivery.
    systematic_devices
        Ids of the devices that carry a systematic error, in first-use order.
    u_systematic_mL
        Standard uncertainty of each of those devices' systematic error, shape (n,) [mL].
    layout
        The set as the analyses see it (:class:`planner.analysis.Layout`): nominal component
        totals, rows of the blanks, standards and tests, columns of the limiting and excess
        components, the measured species, and the K and eps the plan assumes.
    readings
        Predicted photometer readings (stray light applied, blank not subtracted), shape
        (n_mixtures,) [unitless].
    path_length_cm
        Cuvette path length [cm].
    reading_sd
        Standard deviation of each mixture's reading at its predicted value, shape
        (n_mixtures,) [unitless].
    blank_offset_sd
        Standard deviation of the blank cuvette's offset, one per bench [unitless].
    temperature_C
        The benches' temperature [°C] (the session's, else the constants').
    temperature_sd_C
        Standard deviation of one bench's temperature about it [°C]; 0 when no species gives
        an enthalpy (the constants then do not move with temperature).
    reading_per_kelvin
        d(reading)/dT of each mixture at its nominal composition, shape (n_mixtures,) [1/K]:
        the van 't Hoff shift of the constants read through the equilibrium and the
        photometer (central difference, step 0.01 K).
    stray_light
        Stray-light fraction [unitless].
    """

    mixture_ids: tuple[str, ...]
    stock_ids: tuple[str, ...]
    components: tuple[str, ...]
    stock_M: NDArray[np.float64]
    u_relative_stock: NDArray[np.float64]
    volumes_mL: NDArray[np.float64]
    total_volume_mL: NDArray[np.float64]
    in_flask: bool
    diluent: int | None
    u_flask_mL: float
    deliveries: tuple[Delivery, ...]
    systematic_devices: tuple[str, ...]
    u_systematic_mL: NDArray[np.float64]
    layout: Layout
    readings: NDArray[np.float64]
    path_length_cm: float
    reading_sd: NDArray[np.float64]
    blank_offset_sd: float
    temperature_C: float
    temperature_sd_C: float
    reading_per_kelvin: NDArray[np.float64]
    stray_light: float


def delivery_split_mL(device: Device) -> tuple[float, float, bool]:
    """Systematic and random standard uncertainty of one delivery by a device.

    Parameters
    ----------
    device
        A measuring device (not a tube or a flask used as the vessel).

    Returns
    -------
    tuple
        (u of the systematic error per device [mL], u of the random error per delivery [mL],
        True when the random error is normal rather than triangular). See the module notes.

    Notes
    -----
    The catalogue applies the nominal-volume limits at every setting of a graded device
    (:mod:`planner.lab.tolerances`), so the share of a combined volume that one delivery
    carries does not change its uncertainty.
    """
    if device.kind == "piston-pipette":
        _, random_uL = piston_errors_uL(device, device.volume_mL * _UL_PER_ML)
        return standard_uncertainty_mL(device), random_uL / _UL_PER_ML, True
    if device.kind in _ONE_MARK or device.kind == "volumetric-flask":
        return standard_uncertainty_mL(device), 0.0, False
    if device.kind in _GRADUATED:
        return 0.0, standard_uncertainty_mL(device), False
    raise InvalidInputError(
        "this device does not measure a delivery",
        field="additions.devices",
        value=device.id,
        hint="deliver stocks with pipettes, burets or graduated glassware",
    )


def _excess_column(inputs: PlanInputs, required: bool) -> int:
    """Column of the measured product's excess reagent (``PlanInputs.excess``)."""
    if inputs.excess is not None:
        return inputs.reaction.components.index(inputs.excess)
    if required:
        raise InvalidInputError(
            "the measured product holds no reagent besides the limiting one, so the all-bound "
            "analysis has no excess reagent",
            field="reaction.species",
            value=inputs.measured_species.name,
            hint="give the measured product's formula with both reagents",
        )
    return inputs.reaction.components.index(inputs.design.limiting)


def bench_experiment(
    inputs: PlanInputs, mixtures: Sequence[Mixture], *, for_analysis: bool = True
) -> BenchExperiment:
    """Describe one bench's set of mixtures for the uncertainty models.

    Parameters
    ----------
    inputs
        The validated plan.
    mixtures
        The plan's mixtures (blank, standards, tests), as the design stage makes them.
    for_analysis
        True (default): the set must hold a blank, a standard and a test, and the coloured
        product an excess partner, as the analyses need. False: any mixtures, for the
        readings' own uncertainty only (``excess`` is then the limiting component when the
        product has no partner).

    Returns
    -------
    BenchExperiment

    Raises
    ------
    InvalidInputError
        No blank, standard or test mixture (field ``mixtures``); a device id not on the shelf
        (field ``additions.devices``); a coloured product without an excess partner.
    """
    roles = [m.role for m in mixtures]
    for role in ROLES if for_analysis else ():
        if role not in roles:
            raise InvalidInputError(
                f"the plan has no {role} mixture, so the analysis cannot be predicted",
                field="mixtures",
                value=len(mixtures),
                hint="fix the failed checks of the plan first",
            )
    reaction = inputs.reaction
    components = reaction.components
    stock_ids = tuple(st.id for st in inputs.stocks)
    stock_M = np.array(
        [[st.contains_M.get(c, 0.0) for c in components] for st in inputs.stocks], dtype=float
    )
    stock_u = np.array([st.relative_uncertainty for st in inputs.stocks], dtype=float)
    diluent_stock = inputs.diluent
    diluent = stock_ids.index(diluent_stock.id) if diluent_stock is not None else None
    in_flask = inputs.design.vessel_kind == "volumetric-flask"
    shelf = devices_by_id(inputs.glassware)
    flask = inputs.flask
    u_flask = standard_uncertainty_mL(flask) if flask is not None else 0.0

    volumes = np.zeros((len(mixtures), len(stock_ids)))
    deliveries: list[Delivery] = []
    systematic: dict[str, float] = {}
    for row, mixture in enumerate(mixtures):
        for addition in mixture.additions:
            column = stock_ids.index(addition.stock)
            volumes[row, column] += addition.volume_mL
            if in_flask and column == diluent:
                continue  # to the mark: the flask's volume, not a measured delivery
            volumes_each = (
                [d.volume_mL for d in addition.deliveries]
                if len(addition.deliveries) == len(addition.devices)
                else [addition.volume_mL / max(len(addition.devices), 1)] * len(addition.devices)
            )
            for device_id, each_mL in zip(addition.devices, volumes_each, strict=True):
                if device_id not in shelf:
                    raise InvalidInputError(
                        "device not on the shelf",
                        field="additions.devices",
                        value=device_id,
                        hint=f"use one of {', '.join(sorted(shelf))}",
                    )
                u_sys, u_rand, normal = delivery_split_mL(shelf[device_id])
                if u_sys > 0:
                    systematic.setdefault(device_id, u_sys)
                u_tech = technique_sd_mL(inputs.bench, shelf[device_id], each_mL)
                deliveries.append(Delivery(row, column, device_id, u_sys, u_rand, normal, u_tech))
    totals_volume = np.array([m.total_volume_mL for m in mixtures], dtype=float)

    species = reaction.species[inputs.measured]

    def rows(role: Role) -> NDArray[np.int64]:
        return np.array([i for i, r in enumerate(roles) if r == role], dtype=np.int64)

    layout = Layout(
        totals_M=volumes @ stock_M / totals_volume[:, None],
        blanks=rows("blank"),
        standards=rows("standard"),
        tests=rows("test"),
        limiting=components.index(inputs.design.limiting),
        excess=_excess_column(inputs, required=for_analysis),
        measured=inputs.measured,
        epsilon_true=float(species.epsilon),
        K_true=bench_K(inputs),
    )
    readings = np.array([m.absorbance for m in mixtures], dtype=float)
    temperature = (
        inputs.session.temperature_C
        if inputs.session.temperature_C is not None
        else reaction.temperature_C
    )
    moves = bool(np.any(reaction.enthalpy_kJ_mol() != 0))
    temperature_sd = inputs.bench.temperature_sd_C if moves else 0.0
    per_kelvin = (
        reading_per_kelvin(inputs, layout.totals_M, temperature)
        if temperature_sd > 0
        else np.zeros(len(mixtures))
    )
    return BenchExperiment(
        mixture_ids=tuple(m.id for m in mixtures),
        stock_ids=stock_ids,
        components=components,
        stock_M=stock_M,
        u_relative_stock=stock_u,
        volumes_mL=volumes,
        total_volume_mL=totals_volume,
        in_flask=in_flask,
        diluent=diluent,
        u_flask_mL=u_flask if in_flask else 0.0,
        deliveries=tuple(deliveries),
        systematic_devices=tuple(systematic),
        u_systematic_mL=np.array(list(systematic.values()), dtype=float),
        layout=layout,
        readings=readings,
        path_length_cm=inputs.instrument.path_length_cm,
        reading_sd=reading_sd(inputs.instrument, inputs.bench, readings),
        blank_offset_sd=inputs.bench.blank_offset_sd,
        temperature_C=float(temperature),
        temperature_sd_C=float(temperature_sd),
        reading_per_kelvin=per_kelvin,
        stray_light=inputs.instrument.stray_light,
    )


#: Step of the central difference in temperature [K]: the van 't Hoff shift is smooth, so
#: the truncation error (~step^2) is negligible and the step far above rounding.
_TEMPERATURE_STEP_K = 0.01


def reading_per_kelvin(
    inputs: PlanInputs,
    totals_M: NDArray[np.float64],
    temperature_C: float,
    step_K: float = _TEMPERATURE_STEP_K,
) -> NDArray[np.float64]:
    """d(reading)/dT of mixtures at these totals, by a central difference [1/K].

    Parameters
    ----------
    inputs
        The plan (reaction with its enthalpies, instrument).
    totals_M
        Component totals, shape (n, n_components) [mol/L].
    temperature_C
        Temperature at which the slope is taken [°C].
    step_K
        Half-width of the difference [K]; the Monte Carlo uses the bench's temperature SD (a
        secant across the spread).

    Returns
    -------
    NDArray[np.float64]
        Shape (n,).
    """
    reaction = inputs.reaction
    up = predict_readings(
        reaction.at_temperature(temperature_C + step_K), inputs.instrument, totals_M
    ).absorbance
    down = predict_readings(
        reaction.at_temperature(temperature_C - step_K), inputs.instrument, totals_M
    ).absorbance
    result: NDArray[np.float64] = (up - down) / (2.0 * step_K)
    return result


def triangular_half_width(u: NDArray[np.float64]) -> NDArray[np.float64]:
    """Half-width a of the triangular distribution with standard deviation u: a = u sqrt(6)."""
    result: NDArray[np.float64] = np.asarray(u, dtype=float) * _SQRT6
    return result
