"""Validated, unit-normalised plan inputs as plain frozen dataclasses.

These are what the computational core receives. They are built only by
:mod:`planner.planfile` (from a TOML plan file or from the ``inputs`` block of a saved plan
result), which has already checked every value, so the core trusts them.

Units are in the names: ``_M`` mol/L, ``_mL`` millilitres, ``_uL`` microlitres, ``_cm``,
``_nm``, ``_C`` degrees Celsius. ``epsilon`` is a molar absorptivity [L mol⁻¹ cm⁻¹] and
``log_beta`` a decadic logarithm of an overall formation constant [log10 of (mol/L)^(1-n)].
"""

from __future__ import annotations

from dataclasses import field, replace

import numpy as np
from numpy.typing import ArrayLike, NDArray

from planner.records import record

__all__ = [
    "DEVICE_KINDS",
    "Bench",
    "DesignSettings",
    "Device",
    "Instrument",
    "IonicMedium",
    "PlanInputs",
    "ProductSpecies",
    "Reaction",
    "SessionSettings",
    "Solid",
    "Stock",
]

#: Glassware kinds of the plan file, in the order sheets list them.
DEVICE_KINDS = (
    "transfer-pipette",
    "graduated-pipette",
    "buret",
    "piston-pipette",
    "volumetric-flask",
    "graduated-cylinder",
    "tube",
)


def _vessel_flask(design: DesignSettings, glassware: tuple[Device, ...]) -> Device | None:
    """The volumetric flask the vessel names: from the shelf, else a class A flask of that size
    (its tolerance from the ISO 1042 table); None for tubes."""
    volume = design.flask_volume_mL
    if volume is None:
        return None
    for device in glassware:
        if device.kind == "volumetric-flask" and abs(device.volume_mL - volume) < 1e-9:
            return device
    return Device(kind="volumetric-flask", volume_mL=volume, device_class="A")


def _format_size(value: float) -> str:
    """Shortest exact decimal for a device size (5 -> '5', 0.5 -> '0.5')."""
    text = f"{value:.6f}".rstrip("0").rstrip(".")
    return text or "0"


@record
class ProductSpecies:
    """A product species formed from the reaction components.

    Attributes
    ----------
    name
        Name in the trade's notation, e.g. ``"FeSCN2+"``.
    formula
        Stoichiometric coefficient of each component [unitless]; components not named are 0.
    log_beta
        log10 of the overall formation constant beta [log10 of (mol/L)^(1-n)], where n is the
        sum of the coefficients.
    epsilon
        Molar absorptivity at the working wavelength [L mol⁻¹ cm⁻¹].
    enthalpy_kJ_mol
        Standard reaction enthalpy of the formation reaction [kJ/mol], or None when not
        given (beta then taken as independent of temperature).
    log_beta_sd
        Standard uncertainty of log10 beta before the class measures it [log10 units]
        (default 0.1); the design's MSE criterion averages over it for the measured species.
    epsilon_ionic_slope
        Relative change of the molar absorptivity per mol/L of ionic strength, from the
        ionic strength the constants refer to [L/mol]; 0 (the default) when not known.
    plan_epsilon
        The molar absorptivity as the plan file gives it, at the constants' ionic strength,
        when ``epsilon`` is its value in the benches' constant medium (:class:`PlanInputs`
        moves it there); None when the two are the same.
    """

    name: str
    formula: dict[str, int]
    log_beta: float
    epsilon: float = 0.0
    enthalpy_kJ_mol: float | None = None
    log_beta_sd: float = 0.1
    epsilon_ionic_slope: float = 0.0
    plan_epsilon: float | None = None

    def epsilon_at(self, ionic_strength_M: ArrayLike, reference_M: float) -> NDArray[np.float64]:
        """The molar absorptivity at other ionic strengths, eps0 (1 + slope (I - I0)), with
        eps0 the plan file's value at ``reference_M`` [L mol⁻¹ cm⁻¹]."""
        base = self.epsilon if self.plan_epsilon is None else self.plan_epsilon
        shift = np.asarray(ionic_strength_M, dtype=float) - reference_M
        return np.asarray(base * (1.0 + self.epsilon_ionic_slope * shift), dtype=float)

    @property
    def K_unit(self) -> str:
        """Unit of the species' overall formation constant beta: (L/mol)^(n-1) for a species
        made of n component units ("L/mol" for a 1:1 product, "L²/mol²" for a 1:2 one)."""
        order = sum(self.formula.values()) - 1
        if order <= 0:
            return ""
        if order == 1:
            return "L/mol"
        power = str(order).translate(str.maketrans("0123456789", "⁰¹²³⁴⁵⁶⁷⁸⁹"))
        return f"L{power}/mol{power}"


@record
class Reaction:
    """The complexation system: components, product species and the medium of the constants.

    Attributes
    ----------
    temperature_C
        Temperature the constants refer to [°C].
    ionic_strength_M
        Ionic strength of the medium the constants refer to [mol/L].
    components
        Free reagent ions whose mass balances are solved, e.g. ``("Fe3+", "SCN-")``.
    species
        Product species, one per complex.
    component_epsilon
        Molar absorptivity of each free component that absorbs [L mol⁻¹ cm⁻¹]; others are 0.
    bench_temperature_C
        Temperature of the benches [°C] (the session's), at which
        :func:`planner.chem.thermodynamics.bench_log_beta` gives the constants; None means
        the constants' own temperature. :class:`PlanInputs` sets it
        from ``session.temperature_C``.
    sit_delta_epsilon_kg_mol
        SIT interaction coefficient of the formation reactions, products minus reagents
        (NEA convention) [kg/mol], used to move the constants to mixtures above 0.5 mol/L
        (:mod:`planner.chem.activity`).
    bench_ionic_strength_M
        Ionic strength of the benches' constant medium [mol/L], or None for the constants'
        own; :class:`PlanInputs` sets it from ``design.ionic_medium``.
    """

    temperature_C: float
    ionic_strength_M: float
    components: tuple[str, ...]
    species: tuple[ProductSpecies, ...]
    component_epsilon: dict[str, float] = field(default_factory=dict)
    bench_temperature_C: float | None = None
    sit_delta_epsilon_kg_mol: float = 0.0
    bench_ionic_strength_M: float | None = None

    def stoichiometry(self) -> NDArray[np.float64]:
        """Coefficient matrix, shape (n_species, n_components) [unitless]."""
        matrix = np.zeros((len(self.species), len(self.components)))
        for i, sp in enumerate(self.species):
            for j, comp in enumerate(self.components):
                matrix[i, j] = sp.formula.get(comp, 0)
        return matrix

    def log_beta(self) -> NDArray[np.float64]:
        """log10 beta of each product species at ``temperature_C``, as the plan gives them,
        shape (n_species,). At the benches' temperature:
        :func:`planner.chem.thermodynamics.bench_log_beta`."""
        return np.array([sp.log_beta for sp in self.species], dtype=float)

    def enthalpy_kJ_mol(self) -> NDArray[np.float64]:
        """Reaction enthalpy of each product species, 0 where not given, shape (n_species,)
        [kJ/mol]."""
        return np.array([sp.enthalpy_kJ_mol or 0.0 for sp in self.species], dtype=float)

    def at_temperature(self, temperature_C: float) -> Reaction:
        """The same reaction with its benches at ``temperature_C`` [°C]."""
        return replace(self, bench_temperature_C=temperature_C)

    def species_epsilon(self) -> NDArray[np.float64]:
        """Molar absorptivity of each product species, shape (n_species,) [L mol⁻¹ cm⁻¹]."""
        return np.array([sp.epsilon for sp in self.species], dtype=float)

    def free_epsilon(self) -> NDArray[np.float64]:
        """Molar absorptivity of each free component, shape (n_components,) [L mol⁻¹ cm⁻¹]."""
        return np.array([self.component_epsilon.get(c, 0.0) for c in self.components])

    def species_names(self) -> tuple[str, ...]:
        """Names of the product species, in order."""
        return tuple(sp.name for sp in self.species)


@record
class Instrument:
    """The photometer and cuvette.

    Attributes
    ----------
    wavelength_nm
        Working wavelength [nm].
    path_length_cm
        Cuvette path length [cm].
    absorbance_window
        (low, high) of the linear working range [absorbance units]; low < high.
    absorbance_sd
        Floor of the standard deviation of one reading [absorbance units].
    stray_light
        Stray-light fraction s of the incident power [unitless].
    cuvette_fill_mL
        Volume needed to fill the cuvette [mL].
    absorbance_rsd
        Term of the reading's standard deviation proportional to the absorbance [unitless].
    transmittance_sd
        Standard deviation of the transmittance reading, constant in T [unitless]; it adds
        log10(e) sigma_T 10^A to the absorbance's (see :func:`planner.lab.bench.reading_sd`).
    """

    wavelength_nm: float
    path_length_cm: float
    absorbance_window: tuple[float, float]
    absorbance_sd: float
    stray_light: float
    cuvette_fill_mL: float
    absorbance_rsd: float = 0.0
    transmittance_sd: float = 0.0


@record
class Bench:
    """How the benches work: the technique's errors beside the glassware's and photometer's.

    All zero (``technique`` ``"none"``) is an ideal bench: the glassware's tolerances and the
    photometer's own noise only. :mod:`planner.lab.bench` holds the presets and their
    sources.

    Attributes
    ----------
    technique
        The preset the values come from: ``"calibrated"``, ``"practised"``, ``"novice"``, or
        ``"none"`` when the plan file has no ``[bench]`` table.
    buret_reading_sd_mL
        Standard deviation of one buret reading [mL]; a delivery reads twice.
    pipette_rsd
        Relative standard deviation of a transfer or graduated pipette's delivery from
        technique (drainage, meniscus, touch-off) [unitless].
    piston_rsd
        Relative standard deviation of a piston pipette's delivery from technique [unitless].
    cuvette_rsd
        Relative standard deviation of a reading from the cuvette's path and placement, per
        reading [unitless].
    blank_offset_sd
        Standard deviation of the offset between the blank's cuvette and the samples', one
        per bench [absorbance units].
    temperature_sd_C
        Standard deviation of the bench's temperature about the session's [°C].
    """

    technique: str = "none"
    buret_reading_sd_mL: float = 0.0
    pipette_rsd: float = 0.0
    piston_rsd: float = 0.0
    cuvette_rsd: float = 0.0
    blank_offset_sd: float = 0.0
    temperature_sd_C: float = 0.0


@record
class Solid:
    """The solid a stock is made from, so the prep sheet can weigh it out.

    Attributes
    ----------
    formula
        Chemical formula with hydrate water, e.g. ``"Fe(NO3)3(H2O)9"``.
    purity
        Mass fraction of the named compound in the reagent [unitless], 0 < purity <= 1.
    provides
        The stock ion this solid supplies; ``""`` means the first reaction component the stock
        contains.
    """

    formula: str
    purity: float = 1.0
    provides: str = ""


@record
class Stock:
    """A stock solution on the shelf.

    Attributes
    ----------
    id
        Short name used on sheets, e.g. ``"iron"``.
    contains_M
        Concentration of every listed ion [mol/L]. Counter-ions that are not listed are added
        by :mod:`planner.chem.species` to make the stock electrically neutral.
    relative_uncertainty
        Relative standard uncertainty of every concentration [unitless].
    available_mL
        Volume the prep room can make or has [mL]; ``None`` means no limit.
    solid
        Solid to weigh out, if the prep sheet should say how to make the stock.
    diluent
        True for the stock that dilutes and fills flasks to the mark.
    medium_salt_M
        Concentration of the inert salt the planner added to bring the stock to
        ``design.ionic_medium`` [mol/L] (0 when none); its ions are in ``contains_M``.
    plan_contains_M
        The plan file's own ``contains_M`` when a salt was added, else None.
    """

    id: str
    contains_M: dict[str, float]
    relative_uncertainty: float = 0.0
    available_mL: float | None = None
    solid: Solid | None = None
    diluent: bool = False
    medium_salt_M: float = 0.0
    plan_contains_M: dict[str, float] | None = None


@record
class Device:
    """One kind of glassware on the shelf.

    Attributes
    ----------
    kind
        One of :data:`DEVICE_KINDS`.
    volume_mL
        Nominal capacity [mL]; for a piston pipette the top of its range.
    device_class
        Tolerance class ``"A"`` or ``"B"`` where the standard defines classes, else ``""``.
    count
        How many a bench has [unitless].
    range_uL
        Piston pipettes: (low, high) adjustable range [µL].
    step_uL
        Piston pipettes: setting step [µL].
    division_mL
        Graduated pipettes, burets and cylinders: reading resolution [mL].
    min_delivery_mL
        Smallest volume worth delivering with this device [mL].
    tolerance_mL
        Maximum permissible error at nominal volume [mL]; the catalogue value unless the plan
        gives one (a certificate, say).
    """

    kind: str
    volume_mL: float
    device_class: str = "A"
    count: int = 1
    range_uL: tuple[float, float] | None = None
    step_uL: float | None = None
    division_mL: float | None = None
    min_delivery_mL: float | None = None
    tolerance_mL: float | None = None

    @property
    def id(self) -> str:
        """Readable stable id, e.g. ``transfer-pipette-5mL``, ``piston-pipette-100-1000uL``."""
        if self.kind == "piston-pipette" and self.range_uL is not None:
            low, high = self.range_uL
            return f"piston-pipette-{_format_size(low)}-{_format_size(high)}uL"
        return f"{self.kind}-{_format_size(self.volume_mL)}mL"


@record
class IonicMedium:
    """A constant ionic medium: an inert salt added to every stock up to one ionic strength.

    Attributes
    ----------
    salt
        Formula of the inert salt, one of :data:`planner.chem.activity.INERT_SALTS`.
    ionic_strength_M
        Ionic strength every stock, and so every mixture, is brought to [mol/L].
    """

    salt: str
    ionic_strength_M: float


@record
class DesignSettings:
    """What to design.

    Attributes
    ----------
    standards
        Number of calibration standards, besides the reagent blank.
    tests
        Number of test mixtures.
    limiting
        The limiting reagent of the standards (a reaction component).
    assumption_tolerance
        Accepted relative error of assuming the limiting reagent is fully bound [unitless].
    vessel
        ``"tube"`` or ``"flask-<mL>"``.
    total_volume_mL
        Volume of every mixture [mL].
    bound_fraction_span
        Smallest spread of the limiting reagent's bound fraction across the test set [unitless].
    bound_fraction_range
        (low, high) inside which test mixtures' bound fractions should lie [unitless].
    ionic_strength_spread
        Largest accepted relative spread of ionic strength across mixtures, (max-min)/max
        [unitless]; a larger spread is a warning.
    blanks
        Number of reagent blanks.
    measured_species
        The product species whose K and eps the experiment measures, as the plan file names
        it (``design.measured_species``), or None to let the planner choose the one absorbing
        product that holds the limiting reagent. The resolved choice is
        :attr:`PlanInputs.measured`.
    analysis
        The analysis the tests are designed for: ``"all-bound"`` (switched to the global fit
        when the all-bound analysis is inapplicable or errs by more than
        ``K_bias_tolerance``) or ``"global-fit"``.
    K_bias_tolerance
        Largest relative error in K the all-bound analysis may carry on noise-free readings
        [unitless] (default 0.10, common practice).
    ionic_medium
        The constant ionic medium every stock is brought to, or None.
    criterion
        What the test design minimises: ``"mse"`` (the predicted mean squared error of K,
        bias included, averaged over the prior of K) or ``"variance"`` (the predicted
        variance of K alone).
    """

    standards: int
    tests: int
    limiting: str
    assumption_tolerance: float
    vessel: str
    total_volume_mL: float
    bound_fraction_span: float = 0.25
    bound_fraction_range: tuple[float, float] = (0.15, 0.85)
    ionic_strength_spread: float = 0.5
    blanks: int = 1
    measured_species: str | None = None
    analysis: str = "all-bound"
    K_bias_tolerance: float = 0.10
    ionic_medium: IonicMedium | None = None
    criterion: str = "mse"

    @property
    def vessel_kind(self) -> str:
        """``"tube"`` or ``"volumetric-flask"``."""
        return "tube" if self.vessel == "tube" else "volumetric-flask"

    @property
    def flask_volume_mL(self) -> float | None:
        """Flask volume [mL] for a ``flask-<mL>`` vessel, else ``None``."""
        if self.vessel == "tube":
            return None
        return float(self.vessel.removeprefix("flask-"))


@record
class SessionSettings:
    """The teaching or work session the prep room supplies.

    Attributes
    ----------
    sections
        Number of sections (groups of benches running the same plan).
    benches_per_section
        Benches in a section; each makes one full set of mixtures per replicate.
    replicates
        Full sets per bench.
    margin
        Extra stock fraction beyond the need [unitless].
    dead_volume_mL
        Volume per stock and dispensing device left unusable in the bench container [mL].
    temperature_C
        The room's temperature at the benches [°C]; None means the constants' own
        (``reaction.temperature_C``).
    """

    sections: int = 1
    benches_per_section: int = 1
    replicates: int = 1
    margin: float = 0.15
    dead_volume_mL: float = 5.0
    temperature_C: float | None = None

    @property
    def sets(self) -> int:
        """Full mixture sets made in the session [unitless]."""
        return self.sections * self.benches_per_section * self.replicates


def measured_species_index(reaction: Reaction, design: DesignSettings) -> int:
    """Index of the measured product species: the one whose K and eps the experiment gives.

    The plan file's ``design.measured_species`` when given; otherwise the only absorbing
    product that holds the limiting reagent, or, when none absorbs, the first product that
    holds it.

    Raises
    ------
    InvalidInputError
        With field ``design.measured_species`` when the named species is not a product holding
        the limiting reagent, or when it is not named and more than one such product absorbs.
    """
    from planner.errors import InvalidInputError

    limiting = design.limiting
    holding = [i for i, sp in enumerate(reaction.species) if sp.formula.get(limiting, 0) > 0]
    names = [reaction.species[i].name for i in holding]
    if design.measured_species is not None:
        if design.measured_species not in names:
            raise InvalidInputError(
                f"not a product species that holds the limiting reagent {limiting}",
                field="design.measured_species",
                value=design.measured_species,
                hint=f"name one of {', '.join(names) or 'the reaction.species'}",
            )
        return holding[names.index(design.measured_species)]
    absorbing = [i for i in holding if reaction.species[i].epsilon > 0]
    if len(absorbing) > 1:
        raise InvalidInputError(
            "more than one product that holds the limiting reagent absorbs, so which one's K "
            "the experiment measures is ambiguous",
            field="design.measured_species",
            value=", ".join(reaction.species[i].name for i in absorbing),
            hint="name the measured species in [design], e.g. measured_species = "
            f'"{reaction.species[absorbing[0]].name}"',
        )
    if absorbing:
        return absorbing[0]
    if not holding:
        raise InvalidInputError(
            "no product species holds the limiting reagent",
            field="design.limiting",
            value=limiting,
            hint="name a component with a positive coefficient in a reaction.species formula",
        )
    return holding[0]


@record
class PlanInputs:
    """Everything a plan file says, validated and unit-normalised.

    Besides the plan file's own values it carries the roles derived from them, computed once
    here so that every stage agrees: :attr:`measured` (index of the measured product
    species), :attr:`excess` (the component that is in excess in that product, or None) and
    :attr:`flask` (the vessel's volumetric flask, or None for tubes).
    """

    title: str
    reaction: Reaction
    instrument: Instrument
    stocks: tuple[Stock, ...]
    glassware: tuple[Device, ...]
    design: DesignSettings
    session: SessionSettings
    bench: Bench = field(default_factory=Bench)
    measured: int = field(init=False, compare=False, repr=False)
    excess: str | None = field(init=False, compare=False, repr=False)
    flask: Device | None = field(init=False, compare=False, repr=False)

    def __post_init__(self) -> None:
        # The benches work at the session's temperature and the design's constant medium:
        # every stage reads the constants there (chem.constants.bench_log_beta), while the
        # plan file's values stay as given.
        medium = self.design.ionic_medium
        bench_medium = None if medium is None else medium.ionic_strength_M
        if (
            self.reaction.bench_temperature_C != self.session.temperature_C
            or self.reaction.bench_ionic_strength_M != bench_medium
        ):
            object.__setattr__(
                self,
                "reaction",
                replace(
                    self.reaction,
                    bench_temperature_C=self.session.temperature_C,
                    bench_ionic_strength_M=bench_medium,
                ),
            )
        # A molar absorptivity known to move with the medium is taken at the benches' one
        # (from the plan file's value each time, so a copy of these inputs moves it once).
        reaction = self.reaction
        if any(sp.epsilon_ionic_slope for sp in reaction.species):
            at = reaction.ionic_strength_M if bench_medium is None else bench_medium
            species = tuple(
                sp
                if not sp.epsilon_ionic_slope
                else replace(
                    sp,
                    epsilon=float(sp.epsilon_at(at, reaction.ionic_strength_M)),
                    plan_epsilon=sp.epsilon if sp.plan_epsilon is None else sp.plan_epsilon,
                )
                for sp in reaction.species
            )
            object.__setattr__(self, "reaction", replace(reaction, species=species))
        measured = measured_species_index(self.reaction, self.design)
        formula = self.reaction.species[measured].formula
        partners = [c for c, n in formula.items() if c != self.design.limiting and n > 0]
        object.__setattr__(self, "measured", measured)
        object.__setattr__(self, "excess", partners[0] if partners else None)
        object.__setattr__(self, "flask", _vessel_flask(self.design, self.glassware))

    @property
    def measured_species(self) -> ProductSpecies:
        """The measured product species (see :func:`measured_species_index`)."""
        return self.reaction.species[self.measured]

    def stock(self, stock_id: str) -> Stock:
        """The stock with this id (KeyError if absent)."""
        for st in self.stocks:
            if st.id == stock_id:
                return st
        raise KeyError(stock_id)

    @property
    def diluent(self) -> Stock | None:
        """The diluent stock, if the plan has one."""
        return next((st for st in self.stocks if st.diluent), None)
