"""Plan files: TOML text (or a saved mapping) to validated, unit-normalised plan inputs.

This is the boundary layer of the planner (DESIGN.md section 4, "Contract 1"). A plan file is
read in two steps:

1. *Structure*: frozen pydantic models that forbid unknown keys check that every key is known,
   every value has the right type and every single number lies in its range.
2. *Meaning*: plain Python checks that need more than one key (a species formula names declared
   components, the limiting reagent is in a stock, the total volume fits the vessel, ...),
   fill every default and convert ``K`` to ``log_beta``.

The result is a :class:`planner.inputs.PlanInputs` of plain frozen dataclasses; pydantic never
leaves this module. Every failure raises :class:`planner.errors.PlanFileError` whose message
names the key path (``stocks[1].contains_M.Fe3+``, 0-based list indices), the value received
and what would be valid.

Units are in the key names and are already the core's units (mol/L, mL, cm, nm, °C), except
``range_uL`` and ``step_uL`` of piston pipettes, which stay in µL as :class:`Device` keeps
them; the piston pipette's ``volume_mL`` is filled from the top of its range.
"""

from __future__ import annotations

import difflib
import math
import os
import re
import stat
import tomllib
from collections.abc import Mapping, Sequence
from typing import Annotated, Any, Literal, NoReturn, get_args, get_origin

from pydantic import BaseModel, ConfigDict, Field, ValidationError
from pydantic.fields import FieldInfo

from planner.errors import (
    KEY_LIMIT,
    InvalidInputError,
    PlanFileError,
    PlannerError,
    ResultFileError,
    shown,
)
from planner.inputs import (
    DEVICE_KINDS,
    DesignSettings,
    Device,
    Instrument,
    PlanInputs,
    ProductSpecies,
    Reaction,
    SessionSettings,
    Solid,
    Stock,
    measured_species_index,
)

__all__ = [
    "MAX_PLAN_FILE_BYTES",
    "MAX_RESULT_FILE_BYTES",
    "load_plan",
    "parse_plan",
    "plan_from_mapping",
    "plan_to_mapping",
]

#: Largest plan file read [bytes], 1 MiB. A plan file is a few kilobytes (the embedded default
#: is about 2 kB, and 40 devices, 12 stocks and 30 species stay below 20 kB); reading stops
#: here, so a wrong path (a disk image, /dev/zero) cannot exhaust memory.
MAX_PLAN_FILE_BYTES = 2**20
#: Largest saved plan result (plan.json) read by planner verify [bytes], 8 MiB. A result holds
#: the plan's inputs plus every mixture with its concentrations: about 20 kB for the default,
#: under 1 MB for 210 mixtures of 12 stocks, and it repeats the plan file's text (its title
#: twice), so its limit is larger than a plan file's.
MAX_RESULT_FILE_BYTES = 8 * 2**20
_TYPICAL_SIZE = {"plan file": "a few kilobytes", "plan result": "tens to hundreds of kilobytes"}

#: Devices that deliver a measured volume (the rest are vessels).
_DELIVERING_KINDS = frozenset(
    {"transfer-pipette", "graduated-pipette", "buret", "piston-pipette", "graduated-cylinder"}
)
#: Devices read against graduations, so ``division_mL`` applies.
_GRADUATED_KINDS = frozenset({"graduated-pipette", "buret", "graduated-cylinder"})
#: Devices whose standards define no tolerance classes.
_CLASSLESS_KINDS = frozenset({"piston-pipette", "tube"})

#: Largest vessel or device volume [mL], as volume_mL accepts.
_LARGEST_VOLUME_mL = 5000.0
_FLASK_VESSEL = re.compile(r"flask-(\d+(?:\.\d+)?)")
_TOML_LOCATION = re.compile(r"\s*\(at line (\d+), column (\d+)\)\s*$")
#: Relative tolerance for "equal" volumes written in different ways (25 vs 25.000000001).
_SAME_VOLUME_RTOL = 1e-9

# --------------------------------------------------------------------------------------------
# Step 1: structure (pydantic models mirroring the plan-file keys)
# --------------------------------------------------------------------------------------------

_Positive = Annotated[float, Field(gt=0)]
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
#: search enumerates every combination of stock volumes and the shelf enumerates every
#: combination of up to three deliveries, so a plan with thousands of entries would run for
#: hours or exhaust memory; these limits are far above any bench (thirty devices, a handful
#: of stocks) and keep a plan to seconds.
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

_Coefficient = Annotated[int, Field(ge=-COEFFICIENT_LIMIT, le=COEFFICIENT_LIMIT)]
_Fraction = Annotated[float, Field(gt=0, lt=1)]
_Absorbance = Annotated[float, Field(ge=0, le=4)]


class _Model(BaseModel):
    """Base of the plan-file models: strict types, no unknown keys, immutable, finite numbers."""

    # strict: TOML is typed, so "2" for a count or true for a volume is a mistake, not a value
    # to coerce; integers are still accepted where a number is expected.
    model_config = ConfigDict(strict=True, extra="forbid", frozen=True, allow_inf_nan=False)


class _SpeciesModel(_Model):
    """One ``[[reaction.species]]`` table: a product species and its constant."""

    name: str = Field(min_length=1, description="the product species name, e.g. 'FeSCN2+'")
    formula: dict[str, _Coefficient] = Field(
        min_length=1,
        description="the coefficient of each reaction component, -20 to 20, "
        'e.g. { "Fe3+" = 1, "SCN-" = 1 }',
    )
    log_beta: float | None = Field(
        None,
        ge=-LOG_BETA_LIMIT,
        le=LOG_BETA_LIMIT,
        description="the log10 of the overall formation constant, -60 to 60; give log_beta or K",
    )
    K: float | None = Field(
        None,
        ge=10.0**-LOG_BETA_LIMIT,
        le=10.0**LOG_BETA_LIMIT,
        description="the overall formation constant beta [(mol/L)^(1-n)], 1e-60 to 1e60; "
        "give K or log_beta",
    )
    epsilon: float = Field(
        0.0,
        ge=0,
        le=EPSILON_LIMIT,
        description="the molar absorptivity [L mol-1 cm-1] at the wavelength, 0 to 1e7",
    )


class _ReactionModel(_Model):
    """The ``[reaction]`` table: components, product species and their medium."""

    temperature_C: float = Field(
        25.0, ge=0, le=100, description="the temperature the constants refer to [°C], 0 to 100"
    )
    ionic_strength_M: float = Field(
        ge=0, le=10, description="the ionic strength the constants refer to [mol/L], 0 to 10"
    )
    components: list[str] = Field(
        min_length=1,
        max_length=MAX_COMPONENTS,
        description='the list of free reagent ions (at most 10), e.g. ["Fe3+", "SCN-"]',
    )
    species: list[_SpeciesModel] = Field(
        min_length=1,
        max_length=MAX_SPECIES,
        description="one [[reaction.species]] table per product species (at most 30)",
    )
    component_epsilon: dict[str, Annotated[float, Field(ge=0, le=EPSILON_LIMIT)]] = Field(
        default_factory=dict,
        description="a table of molar absorptivities [L mol-1 cm-1] of free components, 0 to 1e7",
    )


class _InstrumentModel(_Model):
    """The ``[instrument]`` table: photometer and cuvette."""

    wavelength_nm: float = Field(
        ge=150, le=3000, description="the working wavelength [nm], 150 to 3000"
    )
    path_length_cm: float = Field(
        1.0, gt=0, le=10, description="the cuvette path length [cm], > 0 and at most 10"
    )
    absorbance_window: list[_Absorbance] = Field(
        default_factory=lambda: [0.1, 1.0],
        min_length=2,
        max_length=2,
        description="the [low, high] linear working range [absorbance units], 0 <= low < high <= 4",
    )
    absorbance_sd: float = Field(
        0.003, gt=0, lt=1, description="the standard deviation of one reading, > 0 and < 1"
    )
    stray_light: float = Field(
        0.0,
        ge=0,
        lt=0.1,
        description="the stray-light fraction of the incident power, 0 <= s < 0.1",
    )
    cuvette_fill_mL: float = Field(
        3.0, gt=0, description="the volume that fills the cuvette [mL], > 0"
    )


class _SolidModel(_Model):
    """A stock's ``solid`` inline table: what the prep room weighs out."""

    formula: str = Field(
        min_length=1, description="the formula of the solid with its water, e.g. 'Fe(NO3)3(H2O)9'"
    )
    purity: float = Field(
        1.0,
        ge=MIN_PURITY,
        le=1,
        description="the mass fraction of the named compound, 0.5 <= purity <= 1",
    )
    provides: str = Field(
        "", description="the stock ion this solid supplies (one of the stock's contains_M keys)"
    )


class _StockModel(_Model):
    """One ``[[stocks]]`` table: a stock solution on the shelf."""

    id: str = Field(min_length=1, description="a short stock name used on the sheets, e.g. 'iron'")
    contains_M: dict[str, Annotated[float, Field(gt=0, le=20)]] = Field(
        default_factory=dict,
        description='a table of ion concentrations [mol/L], 0 < c <= 20, e.g. { "H+" = 0.5 }',
    )
    relative_uncertainty: float = Field(
        0.0,
        ge=0,
        lt=0.5,
        description="the relative standard uncertainty of the concentrations, 0 <= u < 0.5",
    )
    available_mL: float | None = Field(
        None,
        gt=0,
        description="the volume the prep room can make or has [mL], > 0; omit for no limit",
    )
    solid: _SolidModel | None = Field(
        None, description="the solid to weigh out, { formula = ..., purity = ... }"
    )
    diluent: bool = Field(False, description="true for the one stock that dilutes and fills flasks")


class _GlasswareModel(_Model):
    """One ``[[glassware]]`` table: one kind of device a bench has."""

    kind: str = Field(description="one of " + ", ".join(DEVICE_KINDS))
    volume_mL: float | None = Field(
        None, ge=0.001, le=5000, description="the nominal capacity [mL], 0.001 to 5000"
    )
    device_class: Literal["A", "B"] = Field(
        "A", alias="class", description='the tolerance class, "A" or "B"'
    )
    count: int = Field(1, ge=1, le=1000, description="how many a bench has, 1 to 1000")
    range_uL: list[_Microlitres] | None = Field(
        None,
        min_length=2,
        max_length=2,
        description="the [low, high] adjustable range of a piston pipette [µL], "
        "0.01 <= low < high <= 5e6",
    )
    step_uL: float | None = Field(
        None,
        ge=0.001,
        description="the setting step of a piston pipette [µL], at least 0.001 and at most "
        "range low",
    )
    division_mL: float | None = Field(
        None,
        gt=0,
        description="the reading resolution of a graduated device [mL], > 0, below capacity",
    )
    min_delivery_mL: float | None = Field(
        None, gt=0, description="the smallest volume worth delivering [mL], > 0, at most capacity"
    )
    tolerance_mL: float | None = Field(
        None,
        gt=0,
        description="the maximum permissible error at capacity [mL], > 0, below capacity",
    )


class _DesignModel(_Model):
    """The ``[design]`` table: what mixtures to design."""

    standards: int = Field(
        5, ge=1, le=100, description="the number of calibration standards, 1 to 100"
    )
    tests: int = Field(5, ge=1, le=100, description="the number of test mixtures, 1 to 100")
    limiting: str = Field(
        min_length=1,
        description="the limiting reagent of the standards, one of reaction.components",
    )
    assumption_tolerance: float = Field(
        0.02,
        # 1e-6 at least: a ppm is far below any photometric precision, and 5e-324 made the
        # smallest sufficient excess divide by zero (found by fuzzing).
        ge=1e-6,
        lt=1,
        description="the accepted relative error of 'all of it is bound', 1e-6 <= tol < 1",
    )
    vessel: str = Field("tube", description='"tube" or a volumetric flask such as "flask-25"')
    total_volume_mL: float | None = Field(
        None,
        gt=0,
        le=5000,
        description="the volume of every mixture [mL], > 0 (a flask: its volume)",
    )
    bound_fraction_span: float = Field(
        0.25,
        gt=0,
        lt=1,
        description="the smallest spread of test bound fractions, 0 < span <= range width",
    )
    bound_fraction_range: list[_Fraction] = Field(
        default_factory=lambda: [0.15, 0.85],
        min_length=2,
        max_length=2,
        description="the [low, high] range for test bound fractions, 0 < low < high < 1",
    )
    ionic_strength_spread: float = Field(
        0.5, ge=0, le=1, description="the largest accepted (max-min)/max ionic strength, 0 to 1"
    )
    measured_species: str | None = Field(
        None,
        min_length=1,
        description="the product species whose K the experiment measures, one of "
        "reaction.species (needed when more than one product absorbs)",
    )
    blanks: int = Field(1, ge=1, le=10, description="the number of reagent blanks, 1 to 10")
    analysis: Literal["all-bound", "global-fit"] = Field(
        "all-bound",
        description='the analysis the tests are designed for, "all-bound" or "global-fit"',
    )
    K_bias_tolerance: float = Field(
        0.10,
        gt=0,
        lt=1,
        description="the largest relative error in K the all-bound analysis may carry, 0 to 1",
    )


class _SessionModel(_Model):
    """The ``[session]`` table: how many sets the prep room supplies."""

    sections: int = Field(
        1, ge=1, le=1000, description="the number of sections running the plan, 1 to 1000"
    )
    benches_per_section: int = Field(
        1, ge=1, le=1000, description="the number of benches in a section, 1 to 1000"
    )
    replicates: int = Field(
        1, ge=1, le=100, description="the number of full mixture sets per bench, 1 to 100"
    )
    margin: float = Field(
        0.15,
        ge=0,
        le=1,
        description="the extra stock fraction beyond the need, 0 to 1 (0.15 = 15 %)",
    )
    dead_volume_mL: float = Field(
        5.0,
        ge=0,
        le=1000,
        description="the unusable volume per stock and dispensing device [mL], 0 to 1000",
    )


class _PlanModel(_Model):
    """A whole plan file."""

    title: str = Field("", description="free text shown on every sheet")
    reaction: _ReactionModel = Field(description="a [reaction] table")
    instrument: _InstrumentModel = Field(description="an [instrument] table")
    stocks: list[_StockModel] = Field(
        min_length=1, max_length=MAX_STOCKS, description="one [[stocks]] table per stock"
    )
    glassware: list[_GlasswareModel] = Field(
        min_length=1,
        max_length=MAX_GLASSWARE,
        description="one [[glassware]] table per kind of device on the shelf (at most 40)",
    )
    design: _DesignModel = Field(description="a [design] table")
    session: _SessionModel = Field(default_factory=_SessionModel, description="a [session] table")


# --------------------------------------------------------------------------------------------
# Errors: one internal problem type, turned into PlanFileError with the source at the top
# --------------------------------------------------------------------------------------------

_NO_VALUE = object()


class _PlanError(Exception):
    """A plan-file problem found below the public functions (they add the source name)."""

    def __init__(self, field: str, problem: str, value: object = _NO_VALUE, hint: str = "") -> None:
        super().__init__(problem)
        self.field = field
        self.problem = problem
        self.value = value
        self.hint = hint


def _fail(field: str, problem: str, value: object = _NO_VALUE, hint: str = "") -> NoReturn:
    raise _PlanError(field, problem, value, hint)


def _to_plan_file_error(problem: _PlanError, source: str) -> PlanFileError:
    text = problem.problem if source == "<plan>" else f"{problem.problem} in {source}"
    field = problem.field  # PlannerError shortens it, and the value, for the message
    if problem.value is _NO_VALUE:
        return PlanFileError(text, field=field, hint=problem.hint)
    return PlanFileError(text, field=field, value=problem.value, hint=problem.hint)


def _path(loc: Sequence[int | str]) -> str:
    """Dotted key path of a location: ('stocks', 1, 'contains_M', 'Fe3+') -> stocks[1]...."""
    text = ""
    for part in loc:
        if isinstance(part, int):
            text += f"[{part}]"
        elif part == "[key]":
            continue
        else:
            text = f"{text}.{part}" if text else part
    return text


def _submodel(annotation: object) -> type[_Model] | None:
    """The plan-file model inside an annotation such as ``list[_StockModel] | None``."""
    if isinstance(annotation, type) and issubclass(annotation, _Model):
        return annotation
    for argument in get_args(annotation):
        found = _submodel(argument)
        if found is not None:
            return found
    return None


def _keys(model: type[_Model]) -> dict[str, FieldInfo]:
    """Plan-file keys of a model (aliases where given) and their fields."""
    return {info.alias or name: info for name, info in model.model_fields.items()}


def _walk(
    loc: Sequence[int | str],
) -> tuple[type[_Model] | None, FieldInfo | None, str]:
    """Model holding the last key of ``loc``, and the nearest field on the way with its key.

    Inside a dictionary (``contains_M``) the dictionary's own field is the nearest one.
    """
    model: type[_Model] | None = _PlanModel
    holder: type[_Model] | None = None
    info: FieldInfo | None = None
    name = ""
    for part in loc:
        if isinstance(part, int) or part == "[key]":
            continue
        if model is None:
            break
        holder = model
        found = _keys(model).get(part)
        if found is None:
            return holder, info, name
        info, name = found, part
        model = _submodel(found.annotation)
    return holder, info, name


def _table_name(loc: Sequence[int | str]) -> str:
    """How a person finds a table: ``[design]``, ``[[stocks]]`` entry, ``stocks[0].solid``."""
    if not loc:
        return "the top level"
    if isinstance(loc[-1], int):
        return f"[[{_path([part for part in loc if not isinstance(part, int)])}]] entries"
    if any(isinstance(part, int) for part in loc):
        return _path(loc)
    return f"[{_path(loc)}]"


_EXPECTED = {
    "float_type": "a number",
    "int_type": "a whole number",
    "string_type": "text in quotes",
    "bool_type": "true or false",
    "dict_type": "a table { key = value, ... }",
    "model_type": "a table",
    "model_attributes_type": "a table",
}


def _number(value: object) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _from_validation_error(exc: ValidationError) -> _PlanError:
    """The most useful first problem of a pydantic ValidationError, in plan-file words."""
    errors = exc.errors(include_url=False)
    # An unknown key first: a misspelt required key also shows up as "missing", and the
    # unknown-key message carries the "did you mean" suggestion.
    errors.sort(key=lambda error: error["type"] != "extra_forbidden")
    error = errors[0]
    loc = error["loc"]
    kind = error["type"]
    ctx = error.get("ctx", {})
    field = _path(loc)
    holder, info, key = _walk(loc)
    # The field's description, read as "<key> is <description>", says what would be valid.
    description = f"{key} is {info.description}" if info is not None and info.description else ""
    given = error["input"]

    if kind == "extra_forbidden":
        unknown = str(loc[-1])
        allowed = sorted(_keys(holder)) if holder is not None else []
        lowered = {name.lower(): name for name in allowed}
        # No suggestion for a key far longer than any plan key (difflib is quadratic in it).
        close = []
        if len(unknown) <= KEY_LIMIT:
            close = difflib.get_close_matches(unknown.lower(), list(lowered), n=1, cutoff=0.6)
        where = _table_name(loc[:-1])
        hint = f"allowed keys in {where}: {', '.join(allowed)}"
        if close:
            hint = f"did you mean {shown(lowered[close[0]])}? " + hint
        return _PlanError(field, "unknown key", given, hint)

    if kind == "missing":
        annotation = info.annotation if info is not None else None
        if _submodel(annotation) is not None:
            table = _path([part for part in loc if not isinstance(part, int)])
            is_list = get_origin(annotation) is list
            header = f"[[{table}]]" if is_list else f"[{table}]"
            return _PlanError(field, "missing required section", hint=f"add the {header} table")
        return _PlanError(field, "missing required key", hint=f"add it; {description}")

    if kind == "list_type":
        annotation = info.annotation if info is not None else None
        if _submodel(annotation) is not None:
            table = _path([part for part in loc if not isinstance(part, int)])
            hint = f"write [[{table}]] (double brackets) once per entry"
            return _PlanError(field, "wrong type, expected a list of tables", given, hint)
        return _PlanError(field, "wrong type, expected a list [ ... ]", given, description)

    if kind in _EXPECTED:
        return _PlanError(field, f"wrong type, expected {_EXPECTED[kind]}", given, description)

    bounds = {
        "greater_than": ("gt", "greater than"),
        "greater_than_equal": ("ge", "at least"),
        "less_than": ("lt", "less than"),
        "less_than_equal": ("le", "at most"),
    }
    if kind in bounds:
        bound, words = bounds[kind]
        return _PlanError(field, f"must be {words} {_number(ctx[bound])}", given, description)

    if kind in {"too_short", "too_long"}:
        metadata = info.metadata if info is not None else []
        shortest = next((m.min_length for m in metadata if hasattr(m, "min_length")), None)
        longest = next((m.max_length for m in metadata if hasattr(m, "max_length")), None)
        if shortest is not None and shortest == longest:
            problem = f"must have exactly {shortest} entries"
        elif kind == "too_short":
            problem = "must not be empty" if shortest == 1 else f"needs at least {shortest} entries"
        else:
            problem = f"must have at most {longest} entries"
        return _PlanError(field, problem, given, description)

    if kind == "string_too_short":
        return _PlanError(field, "must not be empty", given, description)
    if kind == "literal_error":
        expected = ctx.get("expected", "one of the listed values")
        return _PlanError(field, f"must be {expected}", given, description)
    if kind == "finite_number":
        return _PlanError(field, "must be a finite number (not nan or inf)", given, description)
    return _PlanError(field, error["msg"].lower(), given, description)


# --------------------------------------------------------------------------------------------
# Step 2: meaning (cross-key checks, defaults, conversion to the core's dataclasses)
# --------------------------------------------------------------------------------------------


def _format_size(value: float) -> str:
    """Shortest decimal for a size, as device ids write it (25.0 -> '25')."""
    text = f"{value:.6f}".rstrip("0").rstrip(".")
    return text or "0"


def _choices(names: Sequence[str]) -> str:
    return ", ".join(shown(name) for name in names)


def _suggest(name: str, names: Sequence[str]) -> str:
    close = difflib.get_close_matches(name, list(names), n=1, cutoff=0.6)
    return f"did you mean {shown(close[0])}? " if close else ""


def _check_name(field: str, name: str, what: str) -> None:
    """A name is a dictionary key elsewhere, so stray spaces at its ends would not match."""
    if not name.strip() or name != name.strip():
        _fail(field, f"{what} must not be blank or start or end with a space", name)


def _check_charge(field: str, name: str) -> None:
    """The ion's charge must be readable, or ionic strength and neutrality cannot be computed."""
    # Imported here: planner.chem.species is a heavier module and only needed once validating.
    from planner.chem.species import charge_from_name

    try:
        charge_from_name(name)
    except InvalidInputError as exc:
        _fail(
            field,
            f"cannot read the charge of this ion name ({exc.problem})",
            name,
            "write the charge last, as in 'Fe3+', 'SCN-', 'SO4^2-', or no sign if neutral ('NH3')",
        )


def _reaction(model: _ReactionModel) -> Reaction:
    from planner.chem.species import COUNTER_ANION, COUNTER_CATION

    components = tuple(model.components)
    for index, name in enumerate(components):
        field = f"reaction.components[{index}]"
        _check_name(field, name, "a component name")
        if name in components[:index]:
            _fail(field, "component listed twice", name, "list each component once")
        _check_charge(field, name)
        if name in (COUNTER_ANION, COUNTER_CATION):
            # Found by fuzzing: the unnamed counter-ion that makes a stock neutral is called
            # X- or X+ (planner.chem.species.COUNTER_ANION), so a component of that name
            # silently received every stock's counter-ion as reagent.
            _fail(
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
            _fail(
                f"{field}.name",
                "a product species cannot have a component's name",
                entry.name,
                "components are the free reagents; name the product, e.g. 'FeSCN2+'",
            )
        if any(other.name == entry.name for other in species):
            _fail(f"{field}.name", "species listed twice", entry.name, "list each species once")
        for name, coefficient in entry.formula.items():
            if name not in components:
                _fail(
                    f"{field}.formula.{name}",
                    "not a declared component",
                    name,
                    f"{_suggest(name, components)}use one of reaction.components "
                    f"({_choices(components)}) or add it there",
                )
            if coefficient == 0:
                _fail(
                    f"{field}.formula.{name}",
                    "coefficient must not be 0",
                    coefficient,
                    "leave the component out of the formula instead",
                )
        if all(coefficient < 0 for coefficient in entry.formula.values()):
            _fail(
                f"{field}.formula",
                "needs at least one positive coefficient",
                entry.formula,
                'a product is formed from the components, e.g. { "Fe3+" = 1, "SCN-" = 1 }',
            )
        if list(entry.formula.values()) == [1]:
            _fail(
                f"{field}.formula",
                "this is a free component, not a product",
                entry.formula,
                "free components are listed in reaction.components; give their absorptivity "
                "in reaction.component_epsilon",
            )
        if entry.formula in formulas:
            other = formulas.index(entry.formula)
            _fail(
                f"{field}.formula",
                f"same formula as reaction.species[{other}]",
                entry.formula,
                "list each species once",
            )
        formulas.append(dict(entry.formula))

        if entry.log_beta is not None and entry.K is not None:
            _fail(
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
            _fail(
                field, "needs log_beta or K", hint="give exactly one of them (log_beta = log10 K)"
            )
        species.append(
            ProductSpecies(
                name=entry.name,
                formula=dict(entry.formula),
                log_beta=float(log_beta),
                epsilon=float(entry.epsilon),
            )
        )

    for name in model.component_epsilon:
        if name not in components:
            _fail(
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
    )


def _instrument(model: _InstrumentModel) -> Instrument:
    low, high = model.absorbance_window
    if not low < high:
        _fail(
            "instrument.absorbance_window",
            "low end must be below the high end",
            list(model.absorbance_window),
            "write [low, high], e.g. [0.1, 1.0]",
        )
    return Instrument(
        wavelength_nm=float(model.wavelength_nm),
        path_length_cm=float(model.path_length_cm),
        absorbance_window=(float(low), float(high)),
        absorbance_sd=float(model.absorbance_sd),
        stray_light=float(model.stray_light),
        cuvette_fill_mL=float(model.cuvette_fill_mL),
    )


def _stocks(models: Sequence[_StockModel], components: Sequence[str]) -> tuple[Stock, ...]:
    stocks: list[Stock] = []
    diluent_index: int | None = None
    for index, entry in enumerate(models):
        field = f"stocks[{index}]"
        for other, earlier in enumerate(stocks):
            if earlier.id == entry.id:
                _fail(
                    f"{field}.id",
                    f"same id as stocks[{other}]",
                    entry.id,
                    "give every stock its own id",
                )
        if not entry.id.strip():
            _fail(f"{field}.id", "must not be blank", entry.id, "name the stock, e.g. 'iron'")
        for name in entry.contains_M:
            _check_name(f"{field}.contains_M.{name}", name, "an ion name")
            _check_charge(f"{field}.contains_M.{name}", name)
        if not entry.contains_M and not entry.diluent:
            _fail(
                f"{field}.contains_M",
                "a stock other than the diluent must contain something",
                {},
                'list its ions, e.g. { "Fe3+" = 0.25, "H+" = 0.5 }',
            )
        if entry.diluent:
            if diluent_index is not None:
                _fail(
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
                _fail(
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
                    _fail(
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
        _fail(
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
        _fail(field, exc.problem, formula, exc.hint)


def _check_supplied(components: Sequence[str], stocks: Sequence[Stock]) -> None:
    """Every component must come from some stock, or its mixtures hold none of it."""
    for index, name in enumerate(components):
        if not any(name in stock.contains_M for stock in stocks):
            _fail(
                f"reaction.components[{index}]",
                "no stock contains this component",
                name,
                f"add {shown(name)} to the contains_M of the stock that supplies it",
            )


def _device(index: int, entry: _GlasswareModel) -> Device:
    field = f"glassware[{index}]"
    kind = entry.kind
    if kind not in DEVICE_KINDS:
        _fail(
            f"{field}.kind",
            "unknown kind of glassware",
            kind,
            f"{_suggest(kind, DEVICE_KINDS)}use one of {', '.join(DEVICE_KINDS)}",
        )

    range_uL: tuple[float, float] | None = None
    step_uL: float | None = None
    if kind == "piston-pipette":
        if entry.range_uL is None or entry.step_uL is None:
            _fail(
                f"{field}.{'range_uL' if entry.range_uL is None else 'step_uL'}",
                "missing required key for a piston pipette",
                hint="give range_uL = [low, high] and step_uL, e.g. [100, 1000] and 1",
            )
        low_uL, high_uL = entry.range_uL
        if not low_uL < high_uL:
            _fail(
                f"{field}.range_uL",
                "low end must be below the high end",
                list(entry.range_uL),
                "write [low, high] in µL, e.g. [100, 1000]",
            )
        if entry.step_uL > low_uL:
            _fail(
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
            _fail(
                f"{field}.volume_mL",
                f"does not match the top of range_uL ({_format_size(volume_mL)} mL)",
                entry.volume_mL,
                "leave volume_mL out for a piston pipette",
            )
    else:
        for key, value in (("range_uL", entry.range_uL), ("step_uL", entry.step_uL)):
            if value is not None:
                _fail(
                    f"{field}.{key}",
                    f"only piston pipettes take {key}",
                    value,
                    f'remove it, or set kind = "piston-pipette" (this is a {kind})',
                )
        if entry.volume_mL is None:
            _fail(f"{field}.volume_mL", "missing required key", hint="add its capacity in mL")
        volume_mL = entry.volume_mL

    if entry.division_mL is not None:
        if kind not in _GRADUATED_KINDS:
            _fail(
                f"{field}.division_mL",
                f"a {kind} has no graduations to read",
                entry.division_mL,
                "remove it; division_mL is for graduated pipettes, burets and cylinders",
            )
        if entry.division_mL >= volume_mL:
            _fail(
                f"{field}.division_mL",
                f"must be below the capacity ({_format_size(volume_mL)} mL)",
                entry.division_mL,
                "give the reading resolution in mL, e.g. 0.1",
            )
    if entry.min_delivery_mL is not None:
        if kind not in _DELIVERING_KINDS:
            _fail(
                f"{field}.min_delivery_mL",
                f"a {kind} is a vessel, it does not deliver",
                entry.min_delivery_mL,
                "remove it",
            )
        if entry.min_delivery_mL > volume_mL:
            _fail(
                f"{field}.min_delivery_mL",
                f"larger than the capacity ({_format_size(volume_mL)} mL)",
                entry.min_delivery_mL,
                "give the smallest volume worth delivering, at most the capacity",
            )
    if entry.tolerance_mL is not None and entry.tolerance_mL >= volume_mL:
        _fail(
            f"{field}.tolerance_mL",
            f"must be below the capacity ({_format_size(volume_mL)} mL)",
            entry.tolerance_mL,
            "give the maximum permissible error in mL, e.g. 0.01 for a 5 mL pipette",
        )

    device = Device(
        kind=kind,
        volume_mL=float(volume_mL),
        device_class="" if kind in _CLASSLESS_KINDS else entry.device_class,
        count=entry.count,
        range_uL=range_uL,
        step_uL=step_uL,
        division_mL=None if entry.division_mL is None else float(entry.division_mL),
        min_delivery_mL=None if entry.min_delivery_mL is None else float(entry.min_delivery_mL),
        tolerance_mL=None if entry.tolerance_mL is None else float(entry.tolerance_mL),
    )
    _check_device_model(field, device)
    return device


def _check_device_model(field: str, device: Device) -> None:
    """The glassware model must be able to use the device, or the design fails later.

    Found by fuzzing: a size without a tolerance-table row (a 7 mL transfer pipette), or a
    division so fine that its readings cannot be listed, was only noticed deep in the design,
    with a message naming ``volume_mL`` instead of the [[glassware]] entry.
    """
    # Imported here: planner.lab.glassware is only needed once the structure is valid.
    from planner.lab.glassware import reading_count, standard_uncertainty_mL

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
        _fail(f"{field}.{key}", exc.problem, exc.value if exc.has_value else _NO_VALUE, hint)
    if readings > MAX_READINGS:
        key = "step_uL" if piston else "division_mL"
        _fail(
            f"{field}.{key}",
            f"{device.id} would have {readings} readings, more than the {MAX_READINGS} the "
            "planner lists",
            getattr(device, key),
            f"give a coarser {key} (the reading resolution the bench really uses)",
        )


def _glassware(models: Sequence[_GlasswareModel]) -> tuple[Device, ...]:
    devices: list[Device] = []
    for index, entry in enumerate(models):
        device = _device(index, entry)
        for other, earlier in enumerate(devices):
            if earlier.id == device.id:
                _fail(
                    f"glassware[{index}]",
                    f"same device as glassware[{other}] ({device.id})",
                    hint="list each device once and raise its count",
                )
        devices.append(device)
    if not any(device.kind in _DELIVERING_KINDS for device in devices):
        _fail(
            "glassware",
            "nothing on the shelf delivers a measured volume",
            [device.id for device in devices],
            "add a pipette, buret or graduated cylinder",
        )
    return tuple(devices)


def _design(
    model: _DesignModel,
    components: Sequence[str],
    stocks: Sequence[Stock],
    devices: Sequence[Device],
) -> DesignSettings:
    if model.limiting not in components:
        _fail(
            "design.limiting",
            "not a reaction component",
            model.limiting,
            f"{_suggest(model.limiting, components)}use one of {_choices(components)}",
        )
    if not any(model.limiting in stock.contains_M for stock in stocks):
        _fail(
            "design.limiting",
            "no stock contains the limiting reagent",
            model.limiting,
            f"add {shown(model.limiting)} to the contains_M of the stock that supplies it",
        )

    vessel = model.vessel
    if vessel == "tube":
        if model.total_volume_mL is None:
            _fail(
                "design.total_volume_mL",
                'missing required key for vessel = "tube"',
                hint="give the volume of every mixture in mL, e.g. 10",
            )
        total_mL = model.total_volume_mL
        tubes = [device.volume_mL for device in devices if device.kind == "tube"]
        if tubes and total_mL > max(tubes):
            _fail(
                "design.total_volume_mL",
                f"larger than the largest tube on the shelf ({_format_size(max(tubes))} mL)",
                total_mL,
                "lower the total volume or list a larger tube in [[glassware]]",
            )
    else:
        match = _FLASK_VESSEL.fullmatch(vessel)
        flask_mL = float(match.group(1)) if match else 0.0
        if flask_mL <= 0:
            _fail(
                "design.vessel",
                "not a vessel the planner knows",
                vessel,
                'write "tube" or a volumetric flask size in mL, e.g. "flask-25"',
            )
        if flask_mL > _LARGEST_VOLUME_mL:
            _fail(
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
            _fail(
                "design.total_volume_mL",
                f"{relation} the flask volume ({_format_size(flask_mL)} mL)",
                total_mL,
                "a flask is filled to the mark: leave total_volume_mL out or make it equal",
            )
        total_mL = flask_mL
        if not any(stock.diluent for stock in stocks):
            _fail(
                "design.vessel",
                "a flask is filled to the mark with the diluent, but no stock is the diluent",
                vessel,
                "mark one stock diluent = true",
            )

    low, high = model.bound_fraction_range
    if not low < high:
        _fail(
            "design.bound_fraction_range",
            "low end must be below the high end",
            list(model.bound_fraction_range),
            "write [low, high], e.g. [0.15, 0.85]",
        )
    if model.bound_fraction_span > high - low:
        _fail(
            "design.bound_fraction_span",
            f"wider than bound_fraction_range allows ({_number(high - low)})",
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
    )


def _check_flask(vessel: str, flask_mL: float, devices: Sequence[Device]) -> None:
    """A flask vessel needs a tolerance: its [[glassware]] entry, or a table row for its size.

    The design takes the flask from the shelf, or else a class A flask of that size from the
    ISO 1042 table (planner.design.candidates.flask_device); a size the table lacks used to
    fail deep in the design with a message naming ``volume_mL``.
    """
    from planner.lab.glassware import standard_uncertainty_mL

    on_shelf = any(
        device.kind == "volumetric-flask" and abs(device.volume_mL - flask_mL) < 1e-9
        for device in devices
    )
    if on_shelf:
        return  # its tolerance was checked with the [[glassware]] entry
    try:
        standard_uncertainty_mL(Device(kind="volumetric-flask", volume_mL=flask_mL))
    except InvalidInputError as exc:
        _fail(
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
        _fail(
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
                    _fail(
                        f"reaction.species[{index}].formula.{name}",
                        f"a component with a negative coefficient must be in every stock, "
                        f"and stocks[{position}] ({shown(stock.id)}) has none",
                        coefficient,
                        f"add {shown(name)} to every stock's contains_M (e.g. the medium they "
                        "share), or write the species with positive coefficients",
                    )


def _check_combinations(devices: Sequence[Device], total_mL: float) -> None:
    """The shelf's delivery combinations must be few enough to list (found by fuzzing)."""
    from planner.lab.glassware import MAX_COMBINATIONS, combination_count

    count = combination_count(devices, max_volume_mL=total_mL)
    if count > MAX_COMBINATIONS:
        _fail(
            "glassware",
            f"the shelf gives {count} ways to deliver volumes up to {_format_size(total_mL)} mL "
            f"with up to three deliveries, more than the {MAX_COMBINATIONS} the planner lists",
            len(devices),
            "list fewer devices, or give graduated devices a coarser division_mL "
            "(piston pipettes a coarser step_uL)",
        )


def _session(model: _SessionModel) -> SessionSettings:
    return SessionSettings(
        sections=model.sections,
        benches_per_section=model.benches_per_section,
        replicates=model.replicates,
        margin=float(model.margin),
        dead_volume_mL=float(model.dead_volume_mL),
    )


def _check_no_nul(data: Mapping[str, Any]) -> None:
    """No text of the plan, key or value, may hold a NUL character.

    TOML writes it as an escape (``"\\u0000"``), so it passes the syntax; but it ends text in C
    libraries, file names and browsers, so an id or title holding one would be printed cut
    short or not at all. Walked without recursion, in document order: a saved result's JSON
    may nest deeply.
    """
    pending: list[tuple[tuple[int | str, ...], Any]] = [((), data)]
    while pending:
        loc, value = pending.pop()
        if isinstance(value, str):
            if "\x00" in value:
                _fail(_path(loc), "contains a NUL character", value, _NUL_HINT)
        elif isinstance(value, Mapping):
            children: list[tuple[tuple[int | str, ...], Any]] = []
            for key, item in value.items():
                if isinstance(key, str) and "\x00" in key:
                    _fail(_path((*loc, key)), "the key contains a NUL character", key, _NUL_HINT)
                children.append(((*loc, str(key)), item))
            pending.extend(reversed(children))
        elif isinstance(value, list):
            pending.extend(reversed([((*loc, i), item) for i, item in enumerate(value)]))


_NUL_HINT = "remove the \\u0000 (NUL) character; plan-file text cannot hold it"


def _build(data: Mapping[str, Any]) -> PlanInputs:
    """Validate a plan mapping (the parsed TOML) and build the dataclasses, or raise _PlanError."""
    if not isinstance(data, Mapping):
        _fail("", "a plan must be a table of keys", type(data).__name__, "see docs/plan-file.md")
    _check_no_nul(data)
    try:
        plan = _PlanModel.model_validate(dict(data))
    except ValidationError as exc:
        raise _from_validation_error(exc) from None

    reaction = _reaction(plan.reaction)
    instrument = _instrument(plan.instrument)
    stocks = _stocks(plan.stocks, reaction.components)
    devices = _glassware(plan.glassware)
    design = _design(plan.design, reaction.components, stocks, devices)
    # After the design: a limiting reagent in no stock gets its own, more telling message.
    _check_supplied(reaction.components, stocks)
    _check_species_use(reaction, stocks, design.limiting)
    try:
        measured_species_index(reaction, design)
    except InvalidInputError as exc:
        _fail(exc.field, exc.problem, exc.value, exc.hint)
    _check_combinations(devices, design.total_volume_mL)
    if instrument.cuvette_fill_mL > design.total_volume_mL:
        _fail(
            "instrument.cuvette_fill_mL",
            f"larger than design.total_volume_mL ({_format_size(design.total_volume_mL)} mL)",
            instrument.cuvette_fill_mL,
            "a mixture must fill the cuvette: raise the total volume or lower the fill",
        )
    return PlanInputs(
        title=plan.title,
        reaction=reaction,
        instrument=instrument,
        stocks=stocks,
        glassware=devices,
        design=design,
        session=_session(plan.session),
    )


# --------------------------------------------------------------------------------------------
# Public API
# --------------------------------------------------------------------------------------------


def plan_from_mapping(data: Mapping[str, Any], *, source: str = "<plan>") -> PlanInputs:
    """Validate a plan given as a mapping (parsed TOML, or a saved result's ``inputs``).

    Parameters
    ----------
    data
        The plan's keys and values, as :func:`tomllib.loads` or :func:`json.loads` give them.
    source
        Name of where the data came from, quoted in error messages.

    Returns
    -------
    PlanInputs
        The validated, unit-normalised plan, every default filled in and ``K`` converted to
        ``log_beta``.

    Raises
    ------
    PlanFileError
        For the first problem found, naming its key path (``stocks[1].contains_M.Fe3+``), the
        value received and what would be valid.

    Examples
    --------
    >>> plan = plan_from_mapping(data)  # doctest: +SKIP
    >>> plan_from_mapping(plan_to_mapping(plan)) == plan  # doctest: +SKIP
    True
    """
    try:
        return _build(data)
    except _PlanError as problem:
        raise _to_plan_file_error(problem, source) from None


def parse_plan(text: str, *, source: str = "<plan>") -> PlanInputs:
    """Read a plan file's TOML text.

    Parameters
    ----------
    text
        The plan file's contents (TOML 1.0; keys described in ``docs/plan-file.md``).
    source
        Name of the file, quoted in error messages.

    Returns
    -------
    PlanInputs
        The validated, unit-normalised plan.

    Raises
    ------
    PlanFileError
        On a TOML syntax error (the message gives the line and column) or any invalid key or
        value (the message names the key path).
    """
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise _syntax_error(exc, text, source) from None
    except RecursionError:
        # Found by fuzzing: tomllib parses nested arrays and inline tables recursively, so
        # some thousands of "[" exhaust the stack (an internal error before).
        raise PlanFileError(
            f"TOML in {source} is nested too deeply to read",
            hint="a plan file nests lists and tables only a few levels deep",
        ) from None
    except ValueError as exc:
        # Found by fuzzing: an integer of more than 4300 digits hits Python's limit on
        # converting text to int (sys.get_int_max_str_digits), raised as a plain ValueError.
        reason = "a number has too many digits" if "digits" in str(exc) else str(exc)
        raise PlanFileError(
            f"TOML in {source} cannot be read: {reason}",
            hint="numbers in a plan file have a few digits; check for a pasted run of digits",
        ) from None
    return plan_from_mapping(data, source=source)


def load_plan(path: str | os.PathLike[str]) -> PlanInputs:
    """Read and validate a plan file.

    Parameters
    ----------
    path
        The plan file, UTF-8 TOML (a leading byte-order mark is accepted).

    Returns
    -------
    PlanInputs
        The validated, unit-normalised plan.

    Raises
    ------
    PlanFileError
        If the file cannot be read, is not UTF-8 text, or is not a valid plan; the message
        names the path.
    """
    name = os.fspath(path)
    return parse_plan(read_text(name, "plan file", PlanFileError), source=name)


def read_text(name: str, what: str, error: type[PlannerError]) -> str:
    """A UTF-8 text file (byte-order mark allowed), or ``error`` naming the path.

    Shared by the readers of plan files and of saved plan results. Only a regular file is
    read, and only up to its size limit (:data:`MAX_PLAN_FILE_BYTES` for a plan file,
    :data:`MAX_RESULT_FILE_BYTES` for a saved result, whose ``error`` is a
    :class:`~planner.errors.ResultFileError`): a FIFO blocked forever, ``/dev/zero`` was read
    until memory ran out, and a directory gave an operating-system message.
    """
    limit = MAX_RESULT_FILE_BYTES if issubclass(error, ResultFileError) else MAX_PLAN_FILE_BYTES
    try:
        # stat first, so that a FIFO is never opened (opening one for reading waits for a
        # writer); O_NONBLOCK keeps a FIFO swapped in after the stat from blocking, and the
        # fstat of the open file is the check that counts.
        _check_regular(os.stat(name), name, what, error, limit)
        flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0)
        descriptor = os.open(name, flags)
        try:
            _check_regular(os.fstat(descriptor), name, what, error, limit)
            with os.fdopen(descriptor, "rb", closefd=False) as handle:
                raw = handle.read(limit + 1)  # one byte more tells a file that grew
        finally:
            os.close(descriptor)
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        raise error(
            f"cannot read the {what} {name} ({reason})",
            hint="check the path and that the file is readable",
        ) from None
    if len(raw) > limit:
        _too_large(name, what, error, limit)
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise error(
            f"the {what} {name} is not UTF-8 text (bad byte at offset {exc.start})",
            hint="save the file as UTF-8",
        ) from None


def _check_regular(
    status: os.stat_result, name: str, what: str, error: type[PlannerError], limit: int
) -> None:
    mode = status.st_mode
    if not stat.S_ISREG(mode):
        kind = next(
            (
                text
                for test, text in (
                    (stat.S_ISDIR, "a directory"),
                    (stat.S_ISFIFO, "a FIFO (named pipe)"),
                    (stat.S_ISCHR, "a character device"),
                    (stat.S_ISBLK, "a block device"),
                    (stat.S_ISSOCK, "a socket"),
                )
                if test(mode)
            ),
            "not a regular file",
        )
        raise error(
            f"cannot read the {what} {name}: it is {kind}, not a regular file",
            hint=f"give the path of the {what} itself (a file of at most {_size(limit)})",
        )
    if status.st_size > limit:
        _too_large(name, what, error, limit)


def _size(limit: int) -> str:
    return f"{limit // 2**20} MiB"


def _too_large(name: str, what: str, error: type[PlannerError], limit: int) -> NoReturn:
    raise error(
        f"the {what} {name} is larger than {_size(limit)}, the most the planner reads",
        hint=f"check the path: a {what} is {_TYPICAL_SIZE.get(what, 'far smaller')}",
    )


def plan_to_mapping(inputs: PlanInputs) -> dict[str, Any]:
    """The validated plan as plain JSON-able data in plan-file keys.

    Every default is written out, ``K`` appears as ``log_beta``, a flask's total volume is
    given, and a key that does not apply to a device (``class`` of a piston pipette or tube,
    ``range_uL`` of anything else) is left out. Optional values that are unset are ``None``.

    Parameters
    ----------
    inputs
        A plan built by this module.

    Returns
    -------
    dict
        Nested dicts, lists, strings, numbers, booleans and ``None``, such that
        ``plan_from_mapping(plan_to_mapping(inputs)) == inputs``.
    """
    reaction = inputs.reaction
    instrument = inputs.instrument
    design = inputs.design
    session = inputs.session
    return {
        "title": inputs.title,
        "reaction": {
            "temperature_C": reaction.temperature_C,
            "ionic_strength_M": reaction.ionic_strength_M,
            "components": list(reaction.components),
            "species": [
                {
                    "name": sp.name,
                    "formula": dict(sp.formula),
                    "log_beta": sp.log_beta,
                    "epsilon": sp.epsilon,
                }
                for sp in reaction.species
            ],
            "component_epsilon": dict(reaction.component_epsilon),
        },
        "instrument": {
            "wavelength_nm": instrument.wavelength_nm,
            "path_length_cm": instrument.path_length_cm,
            "absorbance_window": list(instrument.absorbance_window),
            "absorbance_sd": instrument.absorbance_sd,
            "stray_light": instrument.stray_light,
            "cuvette_fill_mL": instrument.cuvette_fill_mL,
        },
        "stocks": [_stock_mapping(stock) for stock in inputs.stocks],
        "glassware": [_device_mapping(device) for device in inputs.glassware],
        "design": {
            "standards": design.standards,
            "tests": design.tests,
            "limiting": design.limiting,
            "assumption_tolerance": design.assumption_tolerance,
            "vessel": design.vessel,
            "total_volume_mL": design.total_volume_mL,
            "bound_fraction_span": design.bound_fraction_span,
            "bound_fraction_range": list(design.bound_fraction_range),
            "ionic_strength_spread": design.ionic_strength_spread,
            "blanks": design.blanks,
            "analysis": design.analysis,
            "K_bias_tolerance": design.K_bias_tolerance,
            **(
                {"measured_species": design.measured_species}
                if design.measured_species is not None
                else {}
            ),
        },
        "session": {
            "sections": session.sections,
            "benches_per_section": session.benches_per_section,
            "replicates": session.replicates,
            "margin": session.margin,
            "dead_volume_mL": session.dead_volume_mL,
        },
    }


def _stock_mapping(stock: Stock) -> dict[str, Any]:
    solid = None
    if stock.solid is not None:
        solid = {
            "formula": stock.solid.formula,
            "purity": stock.solid.purity,
            "provides": stock.solid.provides,
        }
    return {
        "id": stock.id,
        "contains_M": dict(stock.contains_M),
        "relative_uncertainty": stock.relative_uncertainty,
        "available_mL": stock.available_mL,
        "solid": solid,
        "diluent": stock.diluent,
    }


def _device_mapping(device: Device) -> dict[str, Any]:
    entry: dict[str, Any] = {"kind": device.kind, "volume_mL": device.volume_mL}
    if device.kind not in _CLASSLESS_KINDS:
        entry["class"] = device.device_class
    entry["count"] = device.count
    if device.kind == "piston-pipette":
        entry["range_uL"] = None if device.range_uL is None else list(device.range_uL)
        entry["step_uL"] = device.step_uL
    if device.kind in _GRADUATED_KINDS:
        entry["division_mL"] = device.division_mL
    if device.kind in _DELIVERING_KINDS:
        entry["min_delivery_mL"] = device.min_delivery_mL
    entry["tolerance_mL"] = device.tolerance_mL
    return entry


def _syntax_error(exc: tomllib.TOMLDecodeError, text: str, source: str) -> PlanFileError:
    """A TOML syntax error with its line and column (Python 3.11 has them only in the text)."""
    message = str(exc)
    location = _TOML_LOCATION.search(message)
    reason = _TOML_LOCATION.sub("", message).strip() or "invalid TOML"
    reason = reason[0].lower() + reason[1:]
    hint = "check the quotes, brackets, commas and '=' on that line"
    if location is None:
        # tomllib says "(at end of document)" when the text ends inside a value or table.
        return PlanFileError(
            f"TOML syntax error in {source} at the end of the file: {reason}",
            hint="close the last string, list or table",
        )
    line, column = int(location.group(1)), int(location.group(2))
    lines = text.splitlines()
    problem = f"TOML syntax error in {source} at line {line}, column {column}: {reason}"
    if 1 <= line <= len(lines):
        # Shortened like any value: a megabyte-long line went whole into the message before.
        return PlanFileError(problem, value=lines[line - 1].strip(), hint=hint)
    return PlanFileError(problem, hint=hint)
