"""The plan file's structure: frozen pydantic models mirroring its keys, and their limits.

Step 1 of reading a plan file (:mod:`planner.planfile`): every key known, every value of the
right type, every single number in its range. Each field's ``description`` says what would be
valid; :func:`planner.fileio.problems.explain` quotes it as the fix of a message ("<key> is
<description>"). Checks that need more than one key are in :mod:`planner.planfile.checks`.
"""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field

from planner.inputs import DEVICE_KINDS

__all__ = [
    "CLASSLESS_KINDS",
    "COEFFICIENT_LIMIT",
    "DELIVERING_KINDS",
    "EPSILON_LIMIT",
    "GRADUATED_KINDS",
    "LOG_BETA_LIMIT",
    "MAX_COMPONENTS",
    "MAX_GLASSWARE",
    "MAX_READINGS",
    "MAX_SPECIES",
    "MAX_STOCKS",
    "MIN_PURITY",
    "BenchModel",
    "DesignModel",
    "GlasswareModel",
    "InstrumentModel",
    "IonicMediumModel",
    "PlanModel",
    "ReactionModel",
    "SessionModel",
    "SolidModel",
    "SpeciesModel",
    "StockModel",
]

#: Devices that deliver a measured volume (the rest are vessels).
DELIVERING_KINDS = frozenset(
    {"transfer-pipette", "graduated-pipette", "buret", "piston-pipette", "graduated-cylinder"}
)
#: Devices read against graduations, so ``division_mL`` applies.
GRADUATED_KINDS = frozenset({"graduated-pipette", "buret", "graduated-cylinder"})
#: Devices whose standards define no tolerance classes.
CLASSLESS_KINDS = frozenset({"piston-pipette", "tube"})

# Piston-pipette settings [µL]: at least 0.01 µL (no piston pipette is set finer) and at most
# 5000 mL, the largest capacity volume_mL accepts; 1e308 overflowed the picolitre grid
# (found by fuzzing).
_Microlitres = Annotated[float, Field(ge=0.01, le=5_000_000)]

#: Largest |log10 beta| accepted. log_beta = 1e308 overflowed the solver (found by fuzzing);
#: within +-60 every product of beta and a concentration, and its square, stays far inside
#: float range, and no complex of a spectrophotometric study comes near the limit (the
#: largest overall constants of common complexes are about 1e45, e.g. hexacyanoferrate(III),
#: from memory).
LOG_BETA_LIMIT = 60.0
#: Largest molar absorptivity [L mol-1 cm-1]. The strongest absorbers known are near 1e6
#: (from memory); 1e308 overflowed the Beer-Lambert sum (found by fuzzing).
EPSILON_LIMIT = 1e7
#: Largest |stoichiometric coefficient|: larger ones are a typo, and huge ints overflow floats.
COEFFICIENT_LIMIT = 20
#: Most reaction components, product species, stocks and [[glassware]] entries. The candidate
#: search combines stock volumes and the shelf's volume table makes a few passes per device,
#: so a plan with thousands of entries would run for hours or exhaust memory; these limits
#: are far above any bench (thirty devices, a handful of stocks) and keep a plan to seconds:
#: the design bounds its work within them (planner.design.candidates, volume_table in
#: planner.lab.deliveries), so no shelf they accept is refused later.
MAX_COMPONENTS = 10
MAX_SPECIES = 30
MAX_STOCKS = 12
MAX_GLASSWARE = 40
#: Most readings one graduated device or piston pipette may have (a 100 mL buret read to
#: 0.01 mL has 10 000). Finer divisions or steps multiply the candidate search and, at
#: 1e-9 mL, asked for hundreds of gigabytes.
MAX_READINGS = 20_000

#: Lowest purity of a solid to weigh out [mass fraction]. Reagents bought for solutions of
#: known concentration are sold at 0.95 and above (common practice); below 0.5 the "solid"
#: is mostly something else and is a typo, and a purity of 5e-324 made an infinite mass on
#: the prep sheet (found by fuzzing).
MIN_PURITY = 0.5

# Value types with their limits, each defined once; a field gives its default and the
# description its message quotes. Names say the range: ``_Unit`` 0 to 1, ``_Rsd`` a relative
# SD 0 <= r < 0.5, ``_Fraction`` strictly between 0 and 1.
_Coefficient = Annotated[int, Field(ge=-COEFFICIENT_LIMIT, le=COEFFICIENT_LIMIT)]
_Fraction = Annotated[float, Field(gt=0, lt=1)]
_Absorbance = Annotated[float, Field(ge=0, le=4)]
_Epsilon = Annotated[float, Field(ge=0, le=EPSILON_LIMIT)]
_Celsius = Annotated[float, Field(ge=0, le=100)]
_Positive = Annotated[float, Field(gt=0)]
_Unit = Annotated[float, Field(ge=0, le=1)]
_Rsd = Annotated[float, Field(ge=0, lt=0.5)]
_Tenth = Annotated[float, Field(ge=0, lt=0.1)]
_Count10 = Annotated[int, Field(ge=1, le=10)]
_Count100 = Annotated[int, Field(ge=1, le=100)]
_Count1000 = Annotated[int, Field(ge=1, le=1000)]


def _default(value: object, description: str) -> Any:
    """A field with this default and the description its error messages quote."""
    return Field(value, description=description)


class _Model(BaseModel):
    """Base of the plan-file models: strict types, no unknown keys, immutable, finite numbers."""

    # strict: TOML is typed, so "2" for a count or true for a volume is a mistake, not a value
    # to coerce; integers are still accepted where a number is expected.
    model_config = ConfigDict(strict=True, extra="forbid", frozen=True, allow_inf_nan=False)


class SpeciesModel(_Model):
    """One ``[[reaction.species]]`` table: a product species and its constant."""

    name: str = Field(min_length=1, description="the product species name, e.g. 'FeSCN2+'")
    formula: dict[str, _Coefficient] = Field(
        min_length=1,
        description="the coefficient of each reaction component, -20 to 20, "
        'e.g. { "Fe3+" = 1, "SCN-" = 1 }',
    )
    log_beta: Annotated[float, Field(ge=-LOG_BETA_LIMIT, le=LOG_BETA_LIMIT)] | None = Field(
        None,
        description="the log10 of the overall formation constant, -60 to 60; give log_beta or K",
    )
    K: Annotated[float, Field(ge=10.0**-LOG_BETA_LIMIT, le=10.0**LOG_BETA_LIMIT)] | None = Field(
        None,
        description="the overall formation constant beta [(mol/L)^(1-n)], 1e-60 to 1e60; "
        "give K or log_beta",
    )
    epsilon: _Epsilon = Field(
        0.0, description="the molar absorptivity [L mol-1 cm-1] at the wavelength, 0 to 1e7"
    )
    log_beta_sd: Annotated[float, Field(ge=0, le=3)] = Field(
        0.1, description="the standard uncertainty of log_beta before the experiment, 0 to 3"
    )
    enthalpy_kJ_mol: Annotated[float, Field(ge=-500, le=500)] | None = Field(
        None, description="the standard reaction enthalpy of the formation [kJ/mol], -500 to 500"
    )
    epsilon_ionic_slope: Annotated[float, Field(ge=-1, le=1)] = Field(
        0.0,
        description="the relative change of epsilon per mol/L of ionic strength from "
        "reaction.ionic_strength_M, -1 to 1 (-0.02: 2 % lower per mol/L); 0 when not known",
    )


class ReactionModel(_Model):
    """The ``[reaction]`` table: components, product species and their medium."""

    temperature_C: _Celsius = Field(
        25.0, description="the temperature the constants refer to [°C], 0 to 100"
    )
    ionic_strength_M: Annotated[float, Field(ge=0, le=10)] = Field(
        description="the ionic strength the constants refer to [mol/L], 0 to 10"
    )
    components: list[str] = Field(
        min_length=1,
        max_length=MAX_COMPONENTS,
        description='the list of free reagent ions (at most 10), e.g. ["Fe3+", "SCN-"]',
    )
    species: list[SpeciesModel] = Field(
        min_length=1,
        max_length=MAX_SPECIES,
        description="one [[reaction.species]] table per product species (at most 30)",
    )
    sit_delta_epsilon_kg_mol: Annotated[float, Field(ge=-5, le=5)] = Field(
        0.0,
        description="the SIT interaction coefficient of the formation, products minus "
        "reagents [kg/mol], -5 to 5",
    )
    component_epsilon: dict[str, _Epsilon] = Field(
        default_factory=dict,
        description="a table of molar absorptivities [L mol-1 cm-1] of free components, 0 to 1e7",
    )


class InstrumentModel(_Model):
    """The ``[instrument]`` table: photometer and cuvette."""

    wavelength_nm: Annotated[float, Field(ge=150, le=3000)] = Field(
        description="the working wavelength [nm], 150 to 3000"
    )
    path_length_cm: Annotated[float, Field(gt=0, le=10)] = Field(
        1.0, description="the cuvette path length [cm], > 0 and at most 10"
    )
    absorbance_window: list[_Absorbance] = Field(
        default_factory=lambda: [0.1, 1.0],
        min_length=2,
        max_length=2,
        description="the [low, high] linear working range [absorbance units], 0 <= low < high <= 4",
    )
    absorbance_sd: _Fraction = _default(0.003, "the standard deviation of one reading, > 0 and < 1")
    stray_light: _Tenth = Field(
        0.0, description="the stray-light fraction of the incident power, 0 <= s < 0.1"
    )
    cuvette_fill_mL: _Positive = _default(3.0, "the volume that fills the cuvette [mL], > 0")
    absorbance_rsd: _Rsd = Field(
        0.0,
        description="the reading's standard deviation proportional to A, 0 <= r < 0.5 "
        "(0.005 = 0.5 % of the reading)",
    )
    transmittance_sd: _Tenth = Field(
        0.0,
        description="the standard deviation of the transmittance reading, constant in T, "
        "0 <= sigma_T < 0.1",
    )


class SolidModel(_Model):
    """A stock's ``solid`` inline table: what the prep room weighs out."""

    formula: str = Field(
        min_length=1, description="the formula of the solid with its water, e.g. 'Fe(NO3)3(H2O)9'"
    )
    purity: Annotated[float, Field(ge=MIN_PURITY, le=1)] = Field(
        1.0, description="the mass fraction of the named compound, 0.5 <= purity <= 1"
    )
    provides: str = Field(
        "", description="the stock ion this solid supplies (one of the stock's contains_M keys)"
    )


class StockModel(_Model):
    """One ``[[stocks]]`` table: a stock solution on the shelf."""

    id: str = Field(min_length=1, description="a short stock name used on the sheets, e.g. 'iron'")
    contains_M: dict[str, Annotated[float, Field(gt=0, le=20)]] = Field(
        default_factory=dict,
        description='a table of ion concentrations [mol/L], 0 < c <= 20, e.g. { "H+" = 0.5 }',
    )
    relative_uncertainty: _Rsd = Field(
        0.0, description="the relative standard uncertainty of the concentrations, 0 <= u < 0.5"
    )
    available_mL: _Positive | None = Field(
        None, description="the volume the prep room can make or has [mL], > 0; omit for no limit"
    )
    solid: SolidModel | None = Field(
        None, description="the solid to weigh out, { formula = ..., purity = ... }"
    )
    diluent: bool = Field(False, description="true for the one stock that dilutes and fills flasks")


class GlasswareModel(_Model):
    """One ``[[glassware]]`` table: one kind of device a bench has."""

    kind: str = Field(description="one of " + ", ".join(DEVICE_KINDS))
    volume_mL: Annotated[float, Field(ge=0.001, le=5000)] | None = Field(
        None, description="the nominal capacity [mL], 0.001 to 5000"
    )
    device_class: Literal["A", "B"] = Field(
        "A", alias="class", description='the tolerance class, "A" or "B"'
    )
    count: _Count1000 = Field(1, description="how many a bench has, 1 to 1000")
    range_uL: list[_Microlitres] | None = Field(
        None,
        min_length=2,
        max_length=2,
        description="the [low, high] adjustable range of a piston pipette [µL], "
        "0.01 <= low < high <= 5e6",
    )
    step_uL: Annotated[float, Field(ge=0.001)] | None = Field(
        None,
        description="the setting step of a piston pipette [µL], at least 0.001 and at most "
        "range low",
    )
    division_mL: _Positive | None = Field(
        None, description="the reading resolution of a graduated device [mL], > 0, below capacity"
    )
    min_delivery_mL: _Positive | None = Field(
        None, description="the smallest volume worth delivering [mL], > 0, at most capacity"
    )
    tolerance_mL: _Positive | None = Field(
        None, description="the maximum permissible error at capacity [mL], > 0, below capacity"
    )


class IonicMediumModel(_Model):
    """``design.ionic_medium``: an inert salt added to every stock up to one ionic strength."""

    salt: Literal["NaNO3", "KNO3", "NaClO4", "LiClO4"] = Field(
        description='the inert salt, one of "NaNO3", "KNO3", "NaClO4", "LiClO4"'
    )
    ionic_strength_M: Annotated[float, Field(gt=0, le=6)] = Field(
        description="the ionic strength of every stock [mol/L], > 0 and at most 6"
    )


class DesignModel(_Model):
    """The ``[design]`` table: what mixtures to design."""

    standards: _Count100 = Field(5, description="the number of calibration standards, 1 to 100")
    tests: _Count100 = Field(5, description="the number of test mixtures, 1 to 100")
    limiting: str = Field(
        min_length=1,
        description="the limiting reagent of the standards, one of reaction.components",
    )
    # 1e-6 at least: a ppm is far below any photometric precision, and 5e-324 made the
    # smallest sufficient excess divide by zero (found by fuzzing).
    assumption_tolerance: Annotated[float, Field(ge=1e-6, lt=1)] = Field(
        0.02,
        description="the accepted relative error of 'all of it is bound', 1e-6 <= tol < 1",
    )
    vessel: str = Field("tube", description='"tube" or a volumetric flask such as "flask-25"')
    total_volume_mL: Annotated[float, Field(gt=0, le=5000)] | None = Field(
        None, description="the volume of every mixture [mL], > 0 (a flask: its volume)"
    )
    bound_fraction_span: _Fraction = Field(
        0.25,
        description="the smallest spread of test bound fractions, 0 < span <= range width",
    )
    bound_fraction_range: list[_Fraction] = Field(
        default_factory=lambda: [0.15, 0.85],
        min_length=2,
        max_length=2,
        description="the [low, high] range for test bound fractions, 0 < low < high < 1",
    )
    ionic_strength_spread: _Unit = Field(
        0.5, description="the largest accepted (max-min)/max ionic strength, 0 to 1"
    )
    measured_species: str | None = Field(
        None,
        min_length=1,
        description="the product species whose K the experiment measures, one of "
        "reaction.species (needed when more than one product absorbs)",
    )
    blanks: _Count10 = Field(1, description="the number of reagent blanks, 1 to 10")
    analysis: Literal["all-bound", "global-fit"] = Field(
        "all-bound",
        description='the analysis the tests are designed for, "all-bound" or "global-fit"',
    )
    K_bias_tolerance: _Fraction = Field(
        0.10,
        description="the largest relative error in K the all-bound analysis may carry, 0 to 1",
    )
    criterion: Literal["mse", "variance"] = Field(
        "mse", description='what the test design minimises, "mse" or "variance"'
    )
    ionic_medium: IonicMediumModel | None = Field(
        None,
        description='a table { salt = "NaNO3", ionic_strength_M = 3.0 } that brings every '
        "stock to one ionic strength",
    )


class SessionModel(_Model):
    """The ``[session]`` table: how many sets the prep room supplies."""

    sections: _Count1000 = _default(1, "the number of sections running the plan, 1 to 1000")
    benches_per_section: _Count1000 = _default(1, "the number of benches in a section, 1 to 1000")
    replicates: _Count100 = _default(1, "the number of full mixture sets per bench, 1 to 100")
    margin: _Unit = _default(0.15, "the extra stock fraction beyond the need, 0 to 1 (0.15 = 15 %)")
    dead_volume_mL: Annotated[float, Field(ge=0, le=1000)] = Field(
        5.0, description="the unusable volume per stock and dispensing device [mL], 0 to 1000"
    )
    temperature_C: _Celsius | None = Field(
        None, description="the room's temperature at the benches [°C], 0 to 100"
    )


class BenchModel(_Model):
    """The ``[bench]`` table: the technique preset and any of its terms overridden."""

    technique: Literal["calibrated", "practised", "novice"] = Field(
        "practised",
        description='one of "calibrated", "practised", "novice"',
    )
    buret_reading_sd_mL: _Unit | None = _default(None, "the SD of one buret reading [mL], 0 to 1")
    pipette_rsd: _Rsd | None = _default(None, "the relative SD of a pipette's delivery, 0 to 0.5")
    piston_rsd: _Rsd | None = Field(
        None, description="the relative SD of a piston pipette's delivery, 0 to 0.5"
    )
    cuvette_rsd: _Rsd | None = Field(
        None, description="the relative SD of a reading from cuvette path and placement, 0 to 0.5"
    )
    blank_offset_sd: Annotated[float, Field(ge=0, lt=1)] | None = Field(
        None, description="the SD of the blank cuvette's offset [absorbance units], 0 to 1"
    )
    temperature_sd_C: Annotated[float, Field(ge=0, le=20)] | None = Field(
        None, description="the SD of a bench's temperature [°C], 0 to 20"
    )


class PlanModel(_Model):
    """A whole plan file."""

    title: str = Field("", description="free text shown on every sheet")
    reaction: ReactionModel = Field(description="a [reaction] table")
    instrument: InstrumentModel = Field(description="an [instrument] table")
    stocks: list[StockModel] = Field(
        min_length=1, max_length=MAX_STOCKS, description="one [[stocks]] table per stock"
    )
    glassware: list[GlasswareModel] = Field(
        min_length=1,
        max_length=MAX_GLASSWARE,
        description="one [[glassware]] table per kind of device on the shelf (at most 40)",
    )
    design: DesignModel = Field(description="a [design] table")
    session: SessionModel = Field(default_factory=SessionModel, description="a [session] table")
    bench: BenchModel | None = Field(
        None, description="a [bench] table (none: the glassware's tolerances only)"
    )
