"""The plan file's meaning: checks across keys, defaults, and the core's dataclasses.

Step 2 of reading a plan file (:mod:`planner.planfile`), after the structure
(:mod:`planner.planfile.schema`) is valid: a species formula names declared components, the
limiting reagent is in a stock, the total volume fits the vessel, the shelf's devices have a
tolerance, ...; every default is filled in and ``K`` converted to ``log_beta``. A problem is
raised as :class:`planner.fileio.ContentError` naming the key path.
"""

from __future__ import annotations

import difflib
import math
import re
from collections.abc import Sequence
from dataclasses import replace

from planner.errors import InvalidInputError, shown
from planner.fileio.problems import NO_VALUE, fail
from planner.inputs import (
    DEVICE_KINDS,
    Bench,
    DesignSettings,
    Device,
    Instrument,
    IonicMedium,
    PlanInputs,
    ProductSpecies,
    Reaction,
    SessionSettings,
    Solid,
    Stock,
    measured_species_index,
)
from planner.lab.bench import PRESETS
from planner.planfile.schema import (
    CLASSLESS_KINDS,
    DELIVERING_KINDS,
    GRADUATED_KINDS,
    MAX_READINGS,
    BenchModel,
    DesignModel,
    GlasswareModel,
    InstrumentModel,
    PlanModel,
    ReactionModel,
    SessionModel,
    StockModel,
)

__all__ = ["plan_inputs"]

#: Largest vessel or device volume [mL], as volume_mL accepts.
_LARGEST_VOLUME_mL = 5000.0
_FLASK_VESSEL = re.compile(r"flask-(\d+(?:\.\d+)?)")
#: Relative tolerance for "equal" volumes written in different ways (25 vs 25.000000001).
_SAME_VOLUME_RTOL = 1e-9


def plan_inputs(plan: PlanModel) -> PlanInputs:
    """The plan inputs of a plan file whose structure is valid.

    Parameters
    ----------
    plan
        The validated plan-file model.

    Returns
    -------
    PlanInputs
        Every default filled in, ``K`` converted to ``log_beta``.

    Raises
    ------
    ContentError
        For the first check across keys that fails, naming its key path.
    """
    reaction = _reaction(plan.reaction)
    instrument = _instrument(plan.instrument)
    stocks = _stocks(plan.stocks, reaction.components)
    devices = _glassware(plan.glassware)
    design = _design(plan.design, reaction.components, stocks, devices)
    if design.ionic_medium is not None:
        stocks = _in_medium(stocks, design.ionic_medium)
        _check_epsilon_in_medium(reaction, design.ionic_medium.ionic_strength_M)
    # After the design: a limiting reagent in no stock gets its own, more telling message.
    _check_supplied(reaction.components, stocks)
    _check_species_use(reaction, stocks, design.limiting)
    try:
        measured_species_index(reaction, design)
    except InvalidInputError as exc:
        fail(exc.field, exc.problem, exc.value, exc.hint)
    if instrument.cuvette_fill_mL > design.total_volume_mL:
        fail(
            "instrument.cuvette_fill_mL",
            f"larger than design.total_volume_mL ({_format_size(design.total_volume_mL)} mL)",
            instrument.cuvette_fill_mL,
            "a mixture must fill the cuvette: raise the total volume or lower the fill",
        )
    session = _session(plan.session)
    bench = _bench(plan.bench)
    # Last: a formula that is wrong in itself gets its own message before its name's charge.
    for index, sp in enumerate(reaction.species):
        _check_species_charge(f"reaction.species[{index}].name", sp.name, sp.formula)
    return PlanInputs(plan.title, reaction, instrument, stocks, devices, design, session, bench)


def _check_epsilon_in_medium(reaction: Reaction, medium_M: float) -> None:
    """Every molar absorptivity moved to the constant medium stays positive where it was."""
    for index, sp in enumerate(reaction.species):
        if sp.epsilon > 0 and sp.epsilon_at(medium_M, reaction.ionic_strength_M) <= 0:
            fail(
                f"reaction.species[{index}].epsilon_ionic_slope",
                f"takes epsilon to zero or below at the medium's {medium_M:g} mol/L",
                sp.epsilon_ionic_slope,
                "give a slope whose straight line holds over that range, or none",
            )


def _format_size(value: float) -> str:
    """Shortest decimal for a size, as device ids write it (25.0 -> '25')."""
    text = f"{value:.6f}".rstrip("0").rstrip(".")
    return text or "0"


def _ordered(
    field: str, pair: Sequence[float], example: str, unit: str = ""
) -> tuple[float, float]:
    """A [low, high] pair as floats, or a problem when low is not below high."""
    low, high = pair
    if not low < high:
        fail(
            field,
            "low end must be below the high end",
            list(pair),
            f"write [low, high]{unit}, e.g. {example}",
        )
    return float(low), float(high)


def _choices(names: Sequence[str]) -> str:
    return ", ".join(shown(name) for name in names)


def _suggest(name: str, names: Sequence[str]) -> str:
    close = difflib.get_close_matches(name, list(names), n=1, cutoff=0.6)
    return f"did you mean {shown(close[0])}? " if close else ""


def _check_name(field: str, name: str, what: str) -> None:
    """A name is a dictionary key elsewhere, so stray spaces at its ends would not match."""
    if not name.strip() or name != name.strip():
        fail(field, f"{what} must not be blank or start or end with a space", name)


def _check_charge(field: str, name: str) -> None:
    """The ion's charge must be readable, or ionic strength and neutrality cannot be computed."""
    # Imported here: planner.chem.species is a heavier module and only needed once validating.
    from planner.chem.species import charge_from_name

    try:
        charge_from_name(name)
    except InvalidInputError as exc:
        fail(
            field,
            f"cannot read the charge of this ion name ({exc.problem})",
            name,
            "write the charge last, as in 'Fe3+', 'SCN-', 'SO4^2-', or no sign if neutral ('NH3')",
        )


def _check_species_charge(field: str, name: str, formula: dict[str, int]) -> None:
    """A product name that ends in a charge must give the charge its formula gives.

    Every calculation takes a product's charge from its formula and the components'
    charges (:func:`planner.chem.species.species_charge`); the name only labels the sheets,
    so a name reading otherwise labelled every sheet wrongly without a word (an invented
    "NiQ+" for Ni2+ + Q, whose charge is +2). A name without a charge, or one the charge
    reader cannot read, is a label and is left as it is.
    """
    from planner.chem.species import charge_from_name, species_charge

    if not name.rstrip().endswith(("+", "-", "\u207a", "\u207b")):
        return
    try:
        named = charge_from_name(name)
    except InvalidInputError:
        return
    charge = species_charge(formula, {c: charge_from_name(c) for c in formula})
    if named != charge:
        fail(
            field,
            f"the name reads as charge {named:+d}, but the formula gives {charge:+d}",
            name,
            f"end the name with the formula's charge ({_written_charge(charge)}), or give "
            "no charge in the name",
        )


def _written_charge(charge: int) -> str:
    """A charge as a name ends with it: '2+', '+', '-', '3-' or 'none' for 0."""
    if charge == 0:
        return "none"
    sign = "+" if charge > 0 else "-"
    return sign if abs(charge) == 1 else f"{abs(charge)}{sign}"


def _reaction(model: ReactionModel) -> Reaction:
    from planner.chem.species import COUNTER_ANION, COUNTER_CATION

    components = tuple(model.components)
    for index, name in enumerate(components):
        field = f"reaction.components[{index}]"
        _check_name(field, name, "a component name")
        if name in components[:index]:
            fail(field, "component listed twice", name, "list each component once")
        _check_charge(field, name)
        if name in (COUNTER_ANION, COUNTER_CATION):
            # Found by fuzzing: the unnamed counter-ion that makes a stock neutral is called
            # X- or X+ (planner.chem.species.COUNTER_ANION), so a component of that name
            # silently received every stock's counter-ion as reagent.
            fail(
                field,
                "this name is reserved for the unnamed counter-ion that makes a stock neutral",
                name,
                "give the component another name, e.g. 'L-' or 'Y-'",
            )

    species: list[ProductSpecies] = []
    formulas: list[dict[str, int]] = []
    for index, entry in enumerate(model.species):
        field = f"reaction.species[{index}]"
        _check_name(f"{field}.name", entry.name, "a species name")
        if entry.name in components:
            fail(
                f"{field}.name",
                "a product species cannot have a component's name",
                entry.name,
                "components are the free reagents; name the product, e.g. 'FeSCN2+'",
            )
        if any(other.name == entry.name for other in species):
            fail(f"{field}.name", "species listed twice", entry.name, "list each species once")
        for name, coefficient in entry.formula.items():
            if name not in components:
                fail(
                    f"{field}.formula.{name}",
                    "not a declared component",
                    name,
                    f"{_suggest(name, components)}use one of reaction.components "
                    f"({_choices(components)}) or add it there",
                )
            if coefficient == 0:
                fail(
                    f"{field}.formula.{name}",
                    "coefficient must not be 0",
                    coefficient,
                    "leave the component out of the formula instead",
                )
        if all(coefficient < 0 for coefficient in entry.formula.values()):
            fail(
                f"{field}.formula",
                "needs at least one positive coefficient",
                entry.formula,
                'a product is formed from the components, e.g. { "Fe3+" = 1, "SCN-" = 1 }',
            )
        if list(entry.formula.values()) == [1]:
            fail(
                f"{field}.formula",
                "this is a free component, not a product",
                entry.formula,
                "free components are listed in reaction.components; give their absorptivity "
                "in reaction.component_epsilon",
            )
        if entry.formula in formulas:
            other = formulas.index(entry.formula)
            fail(
                f"{field}.formula",
                f"same formula as reaction.species[{other}]",
                entry.formula,
                "list each species once",
            )
        formulas.append(dict(entry.formula))

        if entry.log_beta is not None and entry.K is not None:
            fail(
                field,
                "gives both log_beta and K",
                {"log_beta": entry.log_beta, "K": entry.K},
                "give exactly one of them (log_beta = log10 K)",
            )
        if entry.log_beta is not None:
            log_beta = entry.log_beta
        elif entry.K is not None:
            log_beta = math.log10(entry.K)
        else:
            fail(field, "needs log_beta or K", hint="give exactly one of them (log_beta = log10 K)")
        species.append(
            ProductSpecies(
                name=entry.name,
                formula=dict(entry.formula),
                log_beta=float(log_beta),
                epsilon=float(entry.epsilon),
                enthalpy_kJ_mol=(
                    None if entry.enthalpy_kJ_mol is None else float(entry.enthalpy_kJ_mol)
                ),
                log_beta_sd=float(entry.log_beta_sd),
                epsilon_ionic_slope=float(entry.epsilon_ionic_slope),
            )
        )

    for name in model.component_epsilon:
        if name not in components:
            fail(
                f"reaction.component_epsilon.{name}",
                "not a declared component",
                name,
                f"{_suggest(name, components)}use one of {_choices(components)}",
            )

    return Reaction(
        temperature_C=float(model.temperature_C),
        ionic_strength_M=float(model.ionic_strength_M),
        components=components,
        species=tuple(species),
        component_epsilon={name: float(eps) for name, eps in model.component_epsilon.items()},
        sit_delta_epsilon_kg_mol=float(model.sit_delta_epsilon_kg_mol),
    )


def _instrument(model: InstrumentModel) -> Instrument:
    low, high = _ordered("instrument.absorbance_window", model.absorbance_window, "[0.1, 1.0]")
    return Instrument(
        wavelength_nm=float(model.wavelength_nm),
        path_length_cm=float(model.path_length_cm),
        absorbance_window=(float(low), float(high)),
        absorbance_sd=float(model.absorbance_sd),
        stray_light=float(model.stray_light),
        cuvette_fill_mL=float(model.cuvette_fill_mL),
        absorbance_rsd=float(model.absorbance_rsd),
        transmittance_sd=float(model.transmittance_sd),
    )


def _stocks(models: Sequence[StockModel], components: Sequence[str]) -> tuple[Stock, ...]:
    stocks: list[Stock] = []
    diluent_index: int | None = None
    for index, entry in enumerate(models):
        field = f"stocks[{index}]"
        for other, earlier in enumerate(stocks):
            if earlier.id == entry.id:
                fail(
                    f"{field}.id",
                    f"same id as stocks[{other}]",
                    entry.id,
                    "give every stock its own id",
                )
        if not entry.id.strip():
            fail(f"{field}.id", "must not be blank", entry.id, "name the stock, e.g. 'iron'")
        for name in entry.contains_M:
            _check_name(f"{field}.contains_M.{name}", name, "an ion name")
            _check_charge(f"{field}.contains_M.{name}", name)
        if not entry.contains_M and not entry.diluent:
            fail(
                f"{field}.contains_M",
                "a stock other than the diluent must contain something",
                {},
                'list its ions, e.g. { "Fe3+" = 0.25, "H+" = 0.5 }',
            )
        if entry.diluent:
            if diluent_index is not None:
                fail(
                    f"{field}.diluent",
                    f"more than one diluent (stocks[{diluent_index}] is one already)",
                    True,
                    "mark only one stock diluent = true",
                )
            diluent_index = index

        solid: Solid | None = None
        if entry.solid is not None:
            provides = entry.solid.provides
            if provides and provides not in entry.contains_M:
                fail(
                    f"{field}.solid.provides",
                    "not an ion this stock contains",
                    provides,
                    f"{_suggest(provides, list(entry.contains_M))}use one of its contains_M "
                    f"keys ({_choices(list(entry.contains_M))})",
                )
            if not provides:
                # Solid.provides: "" means the first reaction component the stock contains,
                # in the order the stock lists its ions; filled in here so the core need not.
                provides = next((name for name in entry.contains_M if name in components), "")
                if not provides:
                    fail(
                        f"{field}.solid.provides",
                        "missing, and the stock contains no reaction component",
                        hint="name the ion this solid supplies, one of the stock's contains_M keys",
                    )
            _check_solid_formula(f"{field}.solid.formula", entry.solid.formula)
            solid = Solid(
                formula=entry.solid.formula, purity=float(entry.solid.purity), provides=provides
            )
        stocks.append(
            Stock(
                id=entry.id,
                contains_M={name: float(conc) for name, conc in entry.contains_M.items()},
                relative_uncertainty=float(entry.relative_uncertainty),
                available_mL=None if entry.available_mL is None else float(entry.available_mL),
                solid=solid,
                diluent=entry.diluent,
            )
        )

    if all(stock.diluent for stock in stocks):
        # Found by fuzzing: with the diluent as the only stock there is nothing to vary
        # against it (every mixture is the diluent itself), and the design had no reagent
        # stock to enumerate (an internal error before).
        fail(
            "stocks",
            "the diluent is the only stock",
            [stock.id for stock in stocks],
            "list each reagent stock in its own [[stocks]] table; the diluent only dilutes "
            "and fills up",
        )
    return tuple(stocks)


def _check_solid_formula(field: str, formula: str) -> None:
    """The prep sheet weighs the solid out, so its formula must give a molar mass.

    Found by fuzzing: an unreadable formula was only noticed when the prep sheet was built,
    with a message naming ``formula`` instead of the stock.
    """
    from planner.chem.species import molar_mass_g_per_mol

    try:
        molar_mass_g_per_mol(formula)
    except InvalidInputError as exc:
        fail(field, exc.problem, formula, exc.hint)


def _check_supplied(components: Sequence[str], stocks: Sequence[Stock]) -> None:
    """Every component must come from some stock, or its mixtures hold none of it."""
    for index, name in enumerate(components):
        if not any(name in stock.contains_M for stock in stocks):
            fail(
                f"reaction.components[{index}]",
                "no stock contains this component",
                name,
                f"add {shown(name)} to the contains_M of the stock that supplies it",
            )


def _device(index: int, entry: GlasswareModel) -> Device:
    field = f"glassware[{index}]"
    kind = entry.kind
    if kind not in DEVICE_KINDS:
        fail(
            f"{field}.kind",
            "unknown kind of glassware",
            kind,
            f"{_suggest(kind, DEVICE_KINDS)}use one of {', '.join(DEVICE_KINDS)}",
        )

    range_uL: tuple[float, float] | None = None
    step_uL: float | None = None
    if kind == "piston-pipette":
        if entry.range_uL is None or entry.step_uL is None:
            fail(
                f"{field}.{'range_uL' if entry.range_uL is None else 'step_uL'}",
                "missing required key for a piston pipette",
                hint="give range_uL = [low, high] and step_uL, e.g. [100, 1000] and 1",
            )
        low_uL, high_uL = _ordered(f"{field}.range_uL", entry.range_uL, "[100, 1000]", " in µL")
        if entry.step_uL > low_uL:
            fail(
                f"{field}.step_uL",
                f"larger than the low end of the range ({_format_size(low_uL)} µL)",
                entry.step_uL,
                "give the setting step in µL, e.g. 1 for a 100-1000 µL pipette",
            )
        range_uL = (float(low_uL), float(high_uL))
        step_uL = float(entry.step_uL)
        # A piston pipette's capacity is the top of its range (inputs.Device.volume_mL).
        volume_mL = high_uL / 1000.0
        if entry.volume_mL is not None and not math.isclose(
            entry.volume_mL, volume_mL, rel_tol=_SAME_VOLUME_RTOL
        ):
            fail(
                f"{field}.volume_mL",
                f"does not match the top of range_uL ({_format_size(volume_mL)} mL)",
                entry.volume_mL,
                "leave volume_mL out for a piston pipette",
            )
    else:
        for key, value in (("range_uL", entry.range_uL), ("step_uL", entry.step_uL)):
            if value is not None:
                fail(
                    f"{field}.{key}",
                    f"only piston pipettes take {key}",
                    value,
                    f'remove it, or set kind = "piston-pipette" (this is a {kind})',
                )
        if entry.volume_mL is None:
            fail(f"{field}.volume_mL", "missing required key", hint="add its capacity in mL")
        volume_mL = entry.volume_mL

    if entry.division_mL is not None:
        if kind not in GRADUATED_KINDS:
            hint = "remove it; division_mL is for graduated pipettes, burets and cylinders"
            fail(
                f"{field}.division_mL",
                f"a {kind} has no graduations to read",
                entry.division_mL,
                hint,
            )
        _below_capacity(
            f"{field}.division_mL",
            entry.division_mL,
            volume_mL,
            "give the reading resolution in mL, e.g. 0.1",
        )
    if entry.min_delivery_mL is not None:
        if kind not in DELIVERING_KINDS:
            problem = f"a {kind} is a vessel, it does not deliver"
            fail(f"{field}.min_delivery_mL", problem, entry.min_delivery_mL, "remove it")
        if entry.min_delivery_mL > volume_mL:
            fail(
                f"{field}.min_delivery_mL",
                f"larger than the capacity ({_format_size(volume_mL)} mL)",
                entry.min_delivery_mL,
                "give the smallest volume worth delivering, at most the capacity",
            )
    if entry.tolerance_mL is not None:
        _below_capacity(
            f"{field}.tolerance_mL",
            entry.tolerance_mL,
            volume_mL,
            "give the maximum permissible error in mL, e.g. 0.01 for a 5 mL pipette",
        )

    device = Device(
        kind=kind,
        volume_mL=float(volume_mL),
        device_class="" if kind in CLASSLESS_KINDS else entry.device_class,
        count=entry.count,
        range_uL=range_uL,
        step_uL=step_uL,
        division_mL=None if entry.division_mL is None else float(entry.division_mL),
        min_delivery_mL=None if entry.min_delivery_mL is None else float(entry.min_delivery_mL),
        tolerance_mL=None if entry.tolerance_mL is None else float(entry.tolerance_mL),
    )
    _check_device_model(field, device)
    return device


def _below_capacity(field: str, value_mL: float, capacity_mL: float, hint: str) -> None:
    """A device's division or tolerance must be below its capacity."""
    if value_mL >= capacity_mL:
        fail(
            field,
            f"must be below the capacity ({_format_size(capacity_mL)} mL)",
            value_mL,
            hint,
        )


def _check_device_model(field: str, device: Device) -> None:
    """The glassware model must be able to use the device, or the design fails later.

    Found by fuzzing: a size without a tolerance-table row (a 7 mL transfer pipette), or a
    division so fine that its readings cannot be listed, was only noticed deep in the design,
    with a message naming ``volume_mL`` instead of the [[glassware]] entry.
    """
    # Imported here: the glassware model is only needed once the structure is valid.
    from planner.lab.deliveries import reading_count
    from planner.lab.tolerances import standard_uncertainty_mL

    piston = device.kind == "piston-pipette"
    try:
        readings = reading_count(device)
        if device.kind != "tube":
            standard_uncertainty_mL(device)
    except InvalidInputError as exc:
        # The core names its own argument; a piston pipette's size is written as range_uL.
        key = {"device_class": "class", "": "volume_mL"}.get(exc.field, exc.field)
        if piston and key == "volume_mL":
            key = "range_uL"
        hint = exc.hint
        if "table" in exc.problem:
            hint += "; or give the device's own tolerance_mL (from its certificate)"
        fail(f"{field}.{key}", exc.problem, exc.value if exc.has_value else NO_VALUE, hint)
    if readings > MAX_READINGS:
        key = "step_uL" if piston else "division_mL"
        fail(
            f"{field}.{key}",
            f"{device.id} would have {readings} readings, more than the {MAX_READINGS} the "
            "planner lists",
            getattr(device, key),
            f"give a coarser {key} (the reading resolution the bench really uses)",
        )


def _glassware(models: Sequence[GlasswareModel]) -> tuple[Device, ...]:
    devices: list[Device] = []
    for index, entry in enumerate(models):
        device = _device(index, entry)
        for other, earlier in enumerate(devices):
            if earlier.id == device.id:
                fail(
                    f"glassware[{index}]",
                    f"same device as glassware[{other}] ({device.id})",
                    hint="list each device once and raise its count",
                )
        devices.append(device)
    if not any(device.kind in DELIVERING_KINDS for device in devices):
        fail(
            "glassware",
            "nothing on the shelf delivers a measured volume",
            [device.id for device in devices],
            "add a pipette, buret or graduated cylinder",
        )
    return tuple(devices)


def _design(
    model: DesignModel,
    components: Sequence[str],
    stocks: Sequence[Stock],
    devices: Sequence[Device],
) -> DesignSettings:
    if model.limiting not in components:
        fail(
            "design.limiting",
            "not a reaction component",
            model.limiting,
            f"{_suggest(model.limiting, components)}use one of {_choices(components)}",
        )
    if not any(model.limiting in stock.contains_M for stock in stocks):
        fail(
            "design.limiting",
            "no stock contains the limiting reagent",
            model.limiting,
            f"add {shown(model.limiting)} to the contains_M of the stock that supplies it",
        )

    vessel = model.vessel
    if vessel == "tube":
        if model.total_volume_mL is None:
            fail(
                "design.total_volume_mL",
                'missing required key for vessel = "tube"',
                hint="give the volume of every mixture in mL, e.g. 10",
            )
        total_mL = model.total_volume_mL
        tubes = [device.volume_mL for device in devices if device.kind == "tube"]
        if tubes and total_mL > max(tubes):
            fail(
                "design.total_volume_mL",
                f"larger than the largest tube on the shelf ({_format_size(max(tubes))} mL)",
                total_mL,
                "lower the total volume or list a larger tube in [[glassware]]",
            )
    else:
        match = _FLASK_VESSEL.fullmatch(vessel)
        flask_mL = float(match.group(1)) if match else 0.0
        if flask_mL <= 0:
            fail(
                "design.vessel",
                "not a vessel the planner knows",
                vessel,
                'write "tube" or a volumetric flask size in mL, e.g. "flask-25"',
            )
        if flask_mL > _LARGEST_VOLUME_mL:
            fail(
                "design.vessel",
                f"larger than the largest flask the planner accepts ({_LARGEST_VOLUME_mL:g} mL)",
                vessel,
                'give the flask size in mL, e.g. "flask-25"',
            )
        vessel = f"flask-{_format_size(flask_mL)}"
        _check_flask(vessel, flask_mL, devices)
        total_mL = flask_mL if model.total_volume_mL is None else model.total_volume_mL
        if not math.isclose(total_mL, flask_mL, rel_tol=_SAME_VOLUME_RTOL):
            relation = "larger than" if total_mL > flask_mL else "different from"
            fail(
                "design.total_volume_mL",
                f"{relation} the flask volume ({_format_size(flask_mL)} mL)",
                total_mL,
                "a flask is filled to the mark: leave total_volume_mL out or make it equal",
            )
        total_mL = flask_mL
        if not any(stock.diluent for stock in stocks):
            fail(
                "design.vessel",
                "a flask is filled to the mark with the diluent, but no stock is the diluent",
                vessel,
                "mark one stock diluent = true",
            )

    low, high = _ordered("design.bound_fraction_range", model.bound_fraction_range, "[0.15, 0.85]")
    if model.bound_fraction_span > high - low:
        fail(
            "design.bound_fraction_span",
            f"wider than bound_fraction_range allows ({high - low:g})",
            model.bound_fraction_span,
            "lower the span or widen bound_fraction_range",
        )

    return DesignSettings(
        standards=model.standards,
        tests=model.tests,
        limiting=model.limiting,
        assumption_tolerance=float(model.assumption_tolerance),
        vessel=vessel,
        total_volume_mL=float(total_mL),
        bound_fraction_span=float(model.bound_fraction_span),
        bound_fraction_range=(float(low), float(high)),
        ionic_strength_spread=float(model.ionic_strength_spread),
        blanks=model.blanks,
        measured_species=model.measured_species,
        analysis=model.analysis,
        K_bias_tolerance=float(model.K_bias_tolerance),
        criterion=model.criterion,
        ionic_medium=(
            None
            if model.ionic_medium is None
            else IonicMedium(
                salt=model.ionic_medium.salt,
                ionic_strength_M=float(model.ionic_medium.ionic_strength_M),
            )
        ),
    )


def _check_flask(vessel: str, flask_mL: float, devices: Sequence[Device]) -> None:
    """A flask vessel needs a tolerance: its [[glassware]] entry, or a table row for its size.

    The design takes the flask from the shelf, or else a class A flask of that size from the
    ISO 1042 table (planner.design.candidates.flask_device); a size the table lacks used to
    fail deep in the design with a message naming ``volume_mL``.
    """
    from planner.lab.tolerances import standard_uncertainty_mL

    on_shelf = any(
        device.kind == "volumetric-flask" and abs(device.volume_mL - flask_mL) < 1e-9
        for device in devices
    )
    if on_shelf:
        return  # its tolerance was checked with the [[glassware]] entry
    try:
        standard_uncertainty_mL(Device(kind="volumetric-flask", volume_mL=flask_mL))
    except InvalidInputError as exc:
        fail(
            "design.vessel",
            f"no volumetric flask of this size on the shelf, and {exc.problem}",
            vessel,
            'list the flask in [[glassware]] (kind = "volumetric-flask", with its '
            f"tolerance_mL), or use a size the table holds: {exc.hint}",
        )


def _check_species_use(reaction: Reaction, stocks: Sequence[Stock], limiting: str) -> None:
    """Cross-checks of species against the design and the stocks (found by fuzzing)."""
    if not any(sp.formula.get(limiting, 0) > 0 for sp in reaction.species):
        # Without a product holding it, no mixture is coloured by the limiting reagent and
        # the design had no coloured species to work with (an internal error before).
        fail(
            "design.limiting",
            "no product species holds the limiting reagent",
            limiting,
            "name a component that appears with a positive coefficient in some "
            "reaction.species formula",
        )
    for index, sp in enumerate(reaction.species):
        for name, coefficient in sp.formula.items():
            if coefficient >= 0:
                continue
            # A species that releases a component (M(OH) written with -1 H+) is defined only
            # where some of that component is present: with none, the model would need
            # water's own equilibrium, which it does not have, and the solver gave a wrong
            # balance. Every mixture holds it exactly when every stock does.
            for position, stock in enumerate(stocks):
                if name not in stock.contains_M:
                    fail(
                        f"reaction.species[{index}].formula.{name}",
                        f"a component with a negative coefficient must be in every stock, "
                        f"and stocks[{position}] ({shown(stock.id)}) has none",
                        coefficient,
                        f"add {shown(name)} to every stock's contains_M (e.g. the medium they "
                        "share), or write the species with positive coefficients",
                    )


def _session(model: SessionModel) -> SessionSettings:
    return SessionSettings(
        sections=model.sections,
        benches_per_section=model.benches_per_section,
        replicates=model.replicates,
        margin=float(model.margin),
        dead_volume_mL=float(model.dead_volume_mL),
        temperature_C=None if model.temperature_C is None else float(model.temperature_C),
    )


def _bench(model: BenchModel | None) -> Bench:
    """The bench model: the preset's values with the plan file's overrides; none is ideal."""
    if model is None:
        return Bench()
    preset = PRESETS[model.technique]

    def value(name: str) -> float:
        given = getattr(model, name)
        return float(getattr(preset, name) if given is None else given)

    return Bench(
        technique=model.technique,
        buret_reading_sd_mL=value("buret_reading_sd_mL"),
        pipette_rsd=value("pipette_rsd"),
        piston_rsd=value("piston_rsd"),
        cuvette_rsd=value("cuvette_rsd"),
        blank_offset_sd=value("blank_offset_sd"),
        temperature_sd_C=value("temperature_sd_C"),
    )


def _in_medium(stocks: Sequence[Stock], medium: IonicMedium) -> tuple[Stock, ...]:
    """Every stock with the inert salt that brings it to the medium's ionic strength.

    Ionic strength is linear in the concentrations, so a mixture of stocks that all have
    ionic strength I has I too (before the complex forms). Each stock's own I counts the
    counter-ions that make it neutral (:func:`planner.chem.species.neutralised`); the salt
    adds 1/2 sum nu z^2 per mol/L (1 for a 1:1 salt).
    """
    from planner.chem.activity import INERT_SALTS
    from planner.chem.species import charge_from_name, ionic_strength_M, neutralised

    ions = INERT_SALTS[medium.salt]
    per_mol = 0.5 * sum(n * charge_from_name(ion) ** 2 for ion, n in ions.items())
    salted = []
    for index, stock in enumerate(stocks):
        own_ions = neutralised(stock.contains_M)
        own = float(
            ionic_strength_M(
                [own_ions[n] for n in own_ions], [charge_from_name(n) for n in own_ions]
            )
        )
        if own > medium.ionic_strength_M * (1.0 + 1e-9):
            fail(
                "design.ionic_medium.ionic_strength_M",
                f"stock {stock.id!r} alone already has ionic strength {own:.4g} mol/L, above "
                "the target, so no salt can bring every mixture to it",
                medium.ionic_strength_M,
                f"raise the target to at least {own:.4g} mol/L, or make stocks[{index}] "
                "more dilute",
            )
        salt_M = max(medium.ionic_strength_M - own, 0.0) / per_mol
        contains = dict(stock.contains_M)
        for ion, n in ions.items():
            contains[ion] = contains.get(ion, 0.0) + n * salt_M
        salted.append(
            replace(
                stock,
                contains_M=contains,
                medium_salt_M=salt_M,
                plan_contains_M=dict(stock.contains_M),
            )
        )
    return tuple(salted)
