"""Saved plan results: ``plan.json`` text back to the stage results, for re-verification.

This is the boundary layer of ``planner verify`` (DESIGN.md section 5, "Contract 2"): it reads
a plan result, perhaps edited by hand, and rebuilds what :func:`planner.verify.verify_result`
needs. It checks structure only (every key known, every value of the right type and finite);
whether the recipes make sense is the verifier's job, so a hand-edited plan with wrong volumes
reads without error and then fails its checks.

Rules of the reader:

- the document is a JSON object whose ``schema`` is ``"planner.plan/2"``;
- ``inputs`` is validated exactly as a plan file is, by
  :func:`planner.planfile.plan_from_mapping`;
- a mixture, an addition, ``totals_mL`` and a check may hold only the keys of the contract, so
  a misspelt key in a hand edit is caught rather than ignored; unknown *top-level* keys are
  allowed, because consumers may add blocks of their own;
- ``preparation`` (a list of stocks to prepare) and ``prediction`` (an object, or null) hold
  only the keys the planner writes, each of them; both may be left out, and verification
  then says so. ``title`` and ``notes`` are not read; ``checks`` may be left out;
  ``totals_mL.dead_volume_mL`` defaults to the plan's ``session.dead_volume_mL``;
- NaN and infinity (which strict JSON does not have, and the planner never writes) are
  errors wherever they appear, as are repeated keys in one object;
- outside ``inputs`` (which the plan-file rules bound), a number larger in size than
  :data:`LARGEST_NUMBER` is an error: no quantity of a plan comes near it, and arithmetic on
  such numbers (a volume of 1e308 mL in picolitres, say) overflows.

Every failure raises :class:`planner.errors.ResultFileError` whose message names the dotted
key path (``mixtures[3].additions[1].volume_mL``, 0-based list indices), the value received
and what would be valid. Units are those of the document: mol/L and mL.
"""

from __future__ import annotations

import difflib
import json
import math
import os
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Literal, NoReturn

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from planner.errors import PlanFileError, ResultFileError
from planner.inputs import PlanInputs
from planner.planfile import plan_from_mapping, read_text
from planner.result import (
    Addition,
    Check,
    Delivery,
    Mixture,
    Prediction,
    StockPreparation,
    Totals,
)

__all__ = ["LARGEST_NUMBER", "SCHEMA", "SavedPlan", "load_result", "parse_result"]

#: The schema name and version this reader understands.
SCHEMA = "planner.plan/2"

#: Largest size of a number a plan result may hold outside ``inputs``. Volumes are at most
#: thousands of mL, concentrations tens of mol/L and K at most 10^(log beta limit); 1e100
#: leaves every product of two or three such numbers finite in double precision (IEEE 754,
#: largest finite value about 1.8e308).
LARGEST_NUMBER = 1e100

_DEFAULT_SOURCE = "<result>"


@dataclass(frozen=True, slots=True)
class SavedPlan:
    """A saved plan result, read back: what verification needs.

    Attributes
    ----------
    inputs
        The plan's validated inputs (its ``inputs`` block).
    mixtures
        The mixtures as the document states them, in document order.
    totals
        The stock totals as the document states them [mL].
    stated_checks
        The checks the document reports, in document order (empty when it has none); the
        verifier's own findings replace them, and a difference shows a hand edit.
    preparations
        The ``preparation`` block, in document order, or None when the document has none.
    prediction
        The ``prediction`` block, or None when the document has none or states null.
    """

    inputs: PlanInputs
    mixtures: tuple[Mixture, ...]
    totals: Totals
    stated_checks: tuple[Check, ...]
    preparations: tuple[StockPreparation, ...] | None = None
    prediction: Prediction | None = None


# --------------------------------------------------------------------------------------------
# Structure: frozen pydantic models mirroring the document's keys
# --------------------------------------------------------------------------------------------


class _Model(BaseModel):
    """Base of the document models: strict types, no unknown keys, immutable, finite numbers."""

    # strict: JSON is typed, so "2.6" for a volume or true for an order is a mistake, not a
    # value to coerce; integers are still accepted where a number is expected.
    model_config = ConfigDict(strict=True, extra="forbid", frozen=True, allow_inf_nan=False)


class _DeliveryModel(_Model):
    device: str = Field(description='the device id, e.g. "piston-pipette-100-1000uL"')
    volume_mL: float = Field(gt=0, description="the volume of this delivery [mL], a number > 0")


class _AdditionModel(_Model):
    stock: str = Field(description="the id of a stock in inputs.stocks, in double quotes")
    # Bounds only where a value feeds the verifier's re-mixing: a negative volume would make
    # negative concentrations, which no mass-action solution has.
    volume_mL: float = Field(ge=0, description="the volume delivered [mL], a number >= 0")
    devices: list[str] = Field(
        description='the list of device ids, one per delivery, e.g. ["buret-25mL"]'
    )
    order: int = Field(description="the position in the order of addition, a whole number from 1")
    # Optional: plans saved before deliveries were listed name the devices only.
    deliveries: list[_DeliveryModel] | None = Field(
        None,
        description='the list of deliveries in order, each { "device": id, "volume_mL": v }',
    )


class _MixtureModel(_Model):
    id: str = Field(description='the mixture id, e.g. "S1", in double quotes')
    role: str = Field(description='one of "blank", "standard", "test"')
    total_volume_mL: float = Field(
        gt=0, description="the final volume of the mixture [mL], a number > 0"
    )
    additions: list[_AdditionModel] = Field(
        description="the list of additions, each { stock, volume_mL, devices, order }"
    )
    initial_M: dict[str, float] = Field(
        description="an object of ion concentrations after mixing [mol/L], numbers"
    )
    equilibrium_M: dict[str, float] = Field(
        description="an object of concentrations at equilibrium [mol/L], numbers"
    )
    absorbance: float = Field(description="the predicted reading [absorbance units], a number")
    u_absorbance: float = Field(description="the standard uncertainty of the reading, a number")
    bound_fraction: float = Field(
        description="the fraction of the limiting reagent in products, a number"
    )
    ionic_strength_M: float = Field(description="the ionic strength [mol/L], a number")


class _TotalsModel(_Model):
    per_bench: dict[str, float] = Field(description="an object of stock volumes [mL] per bench")
    per_section: dict[str, float] = Field(description="an object of stock volumes [mL] per section")
    session: dict[str, float] = Field(description="an object of stock volumes [mL] per session")
    to_prepare: dict[str, float] = Field(
        description="an object of stock volumes [mL] the prep room makes"
    )
    dead_volume_mL: float | None = Field(
        None, description="the dead volume per stock and bench container [mL], a number"
    )


class _CheckModel(_Model):
    name: str = Field(description='the check name, e.g. "absorbance-window"')
    status: Literal["fail", "warn", "pass"] = Field(description='"pass", "warn" or "fail"')
    detail: str = Field(description="what was found, in double quotes")


class _PreparationModel(_Model):
    stock: str = Field(description="the id of a stock in inputs.stocks, in double quotes")
    flask_mL: float = Field(description="the volumetric flask to make it in [mL], a number")
    flasks: int = Field(description="how many such flasks, a whole number")
    solid_formula: str = Field(description='the solid to weigh, e.g. "KSCN", or ""')
    molar_mass_g_per_mol: float = Field(description="the solid's molar mass [g/mol], a number")
    purity: float = Field(description="the mass fraction of the compound in the solid, a number")
    mass_g: float = Field(description="the mass of solid per flask [g], a number")
    provides: str = Field(description='the ion the solid provides, e.g. "SCN-", or ""')
    concentration_M: float = Field(description="that ion's concentration [mol/L], a number")
    medium: str = Field(description="what the stock is made up in, for the label")


class _PredictionModel(_Model):
    epsilon: float = Field(description="the molar absorptivity [L mol-1 cm-1], a number")
    u_epsilon: float = Field(description="its standard uncertainty, a number")
    K: float = Field(description="the mean K over the tests [L/mol], a number")
    u_K: float = Field(description="its standard uncertainty, a number")
    K_bias_from_assumption: float = Field(description="K / K_true - 1, a number")
    K_true: float = Field(description="the K the plan assumes [L/mol], a number")
    epsilon_true: float = Field(description="the absorptivity the plan assumes, a number")
    K_per_test: list[float] = Field(description="the K of each test mixture, a list of numbers")


class _DocumentModel(_Model):
    # Consumers may add top-level blocks of their own; only the contract's nested objects are
    # closed.
    model_config = ConfigDict(strict=True, extra="allow", frozen=True, allow_inf_nan=False)

    inputs: dict[str, Any] = Field(description="the validated plan, as an object")
    mixtures: list[_MixtureModel] = Field(
        min_length=1, description="the list of mixtures, each an object"
    )
    totals_mL: _TotalsModel = Field(
        description="an object { per_bench, per_section, session, to_prepare, dead_volume_mL }"
    )
    checks: list[_CheckModel] = Field(
        default_factory=list, description="the list of checks, each { name, status, detail }"
    )
    preparation: list[_PreparationModel] | None = Field(
        None, description="the list of stocks to prepare, each an object"
    )
    prediction: _PredictionModel | None = Field(
        None, description="the prediction of the usual analysis, an object or null"
    )


# --------------------------------------------------------------------------------------------
# Errors
# --------------------------------------------------------------------------------------------

_NO_VALUE = object()


class _ResultError(Exception):
    """A document problem found below the public functions (they add the source name)."""

    def __init__(self, field: str, problem: str, value: object = _NO_VALUE, hint: str = "") -> None:
        super().__init__(problem)
        self.field = field
        self.problem = problem
        self.value = value
        self.hint = hint


def _fail(field: str, problem: str, value: object = _NO_VALUE, hint: str = "") -> NoReturn:
    raise _ResultError(field, problem, value, hint)


def _public(problem: _ResultError, source: str) -> ResultFileError:
    text = problem.problem if source == _DEFAULT_SOURCE else f"{problem.problem} in {source}"
    if problem.value is _NO_VALUE:
        return ResultFileError(text, field=problem.field, hint=problem.hint)
    return ResultFileError(text, field=problem.field, value=problem.value, hint=problem.hint)


def _path(loc: Sequence[int | str]) -> str:
    """Dotted key path: ('mixtures', 3, 'additions', 1, 'volume_mL') -> mixtures[3]...."""
    text = ""
    for part in loc:
        if isinstance(part, int):
            text += f"[{part}]"
        elif part == "[key]":
            continue
        else:
            text = f"{text}.{part}" if text else part
    return text


class _Abbreviated(str):
    """Text shown as is in an error message, for a value too long to quote whole."""

    __slots__ = ()

    def __repr__(self) -> str:
        return str(self)


def _shown(value: object, limit: int = 80) -> object:
    """The value itself, or its shortened repr when that is longer than ``limit`` characters."""
    text = repr(value)
    if len(text) <= limit:
        return value
    return _Abbreviated(text[: limit - 3] + "...")


# The model each key leads to, to find the allowed keys and the description of a location.
_NESTED: dict[tuple[type[_Model], str], type[_Model]] = {
    (_DocumentModel, "mixtures"): _MixtureModel,
    (_DocumentModel, "totals_mL"): _TotalsModel,
    (_DocumentModel, "checks"): _CheckModel,
    (_DocumentModel, "preparation"): _PreparationModel,
    (_DocumentModel, "prediction"): _PredictionModel,
    (_MixtureModel, "additions"): _AdditionModel,
    (_AdditionModel, "deliveries"): _DeliveryModel,
}

_EXPECTED = {
    "float_type": "a number",
    "int_type": "a whole number",
    "string_type": "a string in double quotes",
    "bool_type": "true or false",
    "dict_type": "an object { ... }",
    "model_type": "an object { ... }",
    "model_attributes_type": "an object { ... }",
    "list_type": "a list [ ... ]",
}


def _model_at(loc: Sequence[int | str]) -> type[_Model]:
    """The model of the object at ``loc`` (list indices skipped)."""
    model: type[_Model] = _DocumentModel
    for part in loc:
        if isinstance(part, str):
            model = _NESTED.get((model, part), model)
    return model


def _field_of(loc: Sequence[int | str]) -> tuple[type[_Model], str]:
    """The model and key of the last declared field on the way to ``loc``.

    Inside a free-form object (``initial_M``'s ``"Fe3+"``) that is the object's own key.
    """
    model: type[_Model] = _DocumentModel
    holder, key = model, ""
    for part in loc:
        if isinstance(part, int) or part == "[key]":
            continue
        if part not in model.model_fields:
            break
        holder, key = model, part
        model = _NESTED.get((model, part), model)
    return holder, key


def _from_validation_error(exc: ValidationError) -> _ResultError:
    """The most useful first problem of a pydantic ValidationError, in the document's words."""
    errors = exc.errors(include_url=False)
    # An unknown key first: a misspelt required key also shows up as "missing", and the
    # unknown-key message carries the "did you mean" suggestion.
    errors.sort(key=lambda error: error["type"] != "extra_forbidden")
    error = errors[0]
    loc = error["loc"]
    kind = error["type"]
    field = _path(loc)
    given = _shown(error["input"])

    if kind == "extra_forbidden":
        holder = _model_at(loc[:-1])
        unknown = str(loc[-1])
        allowed = sorted(holder.model_fields)
        close = difflib.get_close_matches(unknown, allowed, n=1, cutoff=0.6)
        hint = "allowed keys here: " + ", ".join(allowed)
        if close:
            hint = f"did you mean {close[0]!r}? " + hint
        return _ResultError(field, "unknown key", unknown, hint)

    holder, key = _field_of(loc)
    info = holder.model_fields.get(key)
    description = f"{key} is {info.description}" if info is not None and info.description else ""
    if kind == "missing":
        return _ResultError(field, "missing required key", hint=f"add it; {description}")
    if kind in _EXPECTED:
        return _ResultError(field, f"wrong type, expected {_EXPECTED[kind]}", given, description)
    bounds = {
        "greater_than": ("gt", "greater than"),
        "greater_than_equal": ("ge", "at least"),
    }
    if kind in bounds:
        bound, words = bounds[kind]
        limit = error.get("ctx", {}).get(bound)
        shown = f"{limit:g}" if isinstance(limit, float) else str(limit)
        return _ResultError(field, f"must be {words} {shown}", given, description)
    if kind == "literal_error":
        return _ResultError(field, "not a valid value", given, description)
    if kind == "too_short":
        return _ResultError(field, "must not be empty", given, description)
    if kind == "finite_number":  # pragma: no cover - non-finite numbers are caught earlier
        return _ResultError(field, "must be a finite number", given, description)
    return _ResultError(field, error["msg"].lower(), given, description)


# --------------------------------------------------------------------------------------------
# JSON text to plain data
# --------------------------------------------------------------------------------------------


class _Object(dict[str, Any]):
    """A JSON object as parsed, remembering keys that appeared more than once."""

    __slots__ = ("repeated",)

    def __init__(self, pairs: list[tuple[str, Any]]) -> None:
        super().__init__(pairs)
        self.repeated = [key for key, count in Counter(k for k, _ in pairs).items() if count > 1]


def _syntax_error(exc: json.JSONDecodeError, text: str) -> _ResultError:
    lines = text.splitlines()
    problem = f"JSON syntax error at line {exc.lineno}, column {exc.colno}: {exc.msg.lower()}"
    hint = "check the quotes, brackets, commas and colons near there (JSON has no trailing commas)"
    if 1 <= exc.lineno <= len(lines):
        return _ResultError("", problem, _shown(lines[exc.lineno - 1].strip()), hint)
    return _ResultError("", problem, hint=hint)


def _plain(value: Any, loc: tuple[int | str, ...]) -> Any:
    """Parsed JSON as plain dicts and lists, or a _ResultError at the first repeated key or
    non-finite number (Python's json module accepts NaN and Infinity; strict JSON does not)."""
    if isinstance(value, _Object):
        if value.repeated:
            key = value.repeated[0]
            _fail(
                _path((*loc, key)),
                "key given more than once in one object",
                key,
                "keep one; JSON readers silently keep the last, so an edit could be lost",
            )
        return {key: _plain(item, (*loc, key)) for key, item in value.items()}
    if isinstance(value, list):
        return [_plain(item, (*loc, index)) for index, item in enumerate(value)]
    if isinstance(value, float) and not math.isfinite(value):
        _fail(
            _path(loc),
            "must be a finite number (JSON has no NaN or Infinity)",
            value,
            "write the number itself; the planner never writes NaN",
        )
    if (
        isinstance(value, (int, float))
        and not isinstance(value, bool)
        and loc[:1] != ("inputs",)
        and abs(value) > LARGEST_NUMBER
    ):
        _fail(
            _path(loc),
            f"number too large for a plan result (more than {LARGEST_NUMBER:g} in size)",
            _shown(value),
            "write the intended value; no quantity of a plan comes near this size",
        )
    return value


def _document(text: str) -> dict[str, Any]:
    try:
        parsed = json.loads(text, object_pairs_hook=_Object)
    except json.JSONDecodeError as exc:
        raise _syntax_error(exc, text) from None
    except RecursionError:
        _fail("", "JSON nested too deeply to read", hint="this is not a plan result")
    if not isinstance(parsed, dict):
        _fail(
            "",
            "a plan result must be a JSON object { ... }",
            _shown(parsed),
            "give the plan.json that 'planner plan --format json' writes",
        )
    document: dict[str, Any] = _plain(parsed, ())
    return document


# --------------------------------------------------------------------------------------------
# Plain data to stage results
# --------------------------------------------------------------------------------------------


def _check_schema(document: dict[str, Any]) -> None:
    if "schema" not in document:
        _fail(
            "schema",
            "missing required key",
            hint=f'add "schema": "{SCHEMA}" (is this a plan result written by the planner?)',
        )
    schema = document["schema"]
    if schema != SCHEMA:
        _fail(
            "schema",
            "not a schema this version reads",
            _shown(schema),
            f'this reader understands "{SCHEMA}" only; re-plan with this version',
        )


def _inputs(data: dict[str, Any]) -> PlanInputs:
    try:
        # No source here: parse_result names it once, after the inputs. prefix is added.
        return plan_from_mapping(data)
    except PlanFileError as exc:
        field = f"inputs.{exc.field}" if exc.field else "inputs"
        if exc.has_value:
            raise _ResultError(field, exc.problem, exc.value, exc.hint) from None
        raise _ResultError(field, exc.problem, hint=exc.hint) from None


def _mixture(model: _MixtureModel) -> Mixture:
    return Mixture(
        id=model.id,
        role=model.role,
        total_volume_mL=float(model.total_volume_mL),
        additions=tuple(
            Addition(
                stock=a.stock,
                volume_mL=float(a.volume_mL),
                devices=tuple(a.devices),
                order=a.order,
                deliveries=tuple(
                    Delivery(d.device, float(d.volume_mL)) for d in a.deliveries or ()
                ),
            )
            for a in model.additions
        ),
        initial_M={ion: float(c) for ion, c in model.initial_M.items()},
        equilibrium_M={name: float(c) for name, c in model.equilibrium_M.items()},
        absorbance=float(model.absorbance),
        u_absorbance=float(model.u_absorbance),
        bound_fraction=float(model.bound_fraction),
        ionic_strength_M=float(model.ionic_strength_M),
    )


def _totals(model: _TotalsModel, inputs: PlanInputs) -> Totals:
    def volumes(table: dict[str, float]) -> dict[str, float]:
        return {stock: float(v) for stock, v in table.items()}

    dead = model.dead_volume_mL
    return Totals(
        per_bench=volumes(model.per_bench),
        per_section=volumes(model.per_section),
        session=volumes(model.session),
        to_prepare=volumes(model.to_prepare),
        dead_volume_mL=inputs.session.dead_volume_mL if dead is None else float(dead),
    )


def _preparation(model: _PreparationModel) -> StockPreparation:
    return StockPreparation(
        stock=model.stock,
        flask_mL=float(model.flask_mL),
        flasks=model.flasks,
        solid_formula=model.solid_formula,
        molar_mass_g_per_mol=float(model.molar_mass_g_per_mol),
        purity=float(model.purity),
        mass_g=float(model.mass_g),
        provides=model.provides,
        concentration_M=float(model.concentration_M),
        medium=model.medium,
    )


def _prediction(model: _PredictionModel | None) -> Prediction | None:
    if model is None:
        return None
    return Prediction(
        epsilon=float(model.epsilon),
        u_epsilon=float(model.u_epsilon),
        K=float(model.K),
        u_K=float(model.u_K),
        K_bias_from_assumption=float(model.K_bias_from_assumption),
        K_true=float(model.K_true),
        epsilon_true=float(model.epsilon_true),
        K_per_test=tuple(float(k) for k in model.K_per_test),
    )


def _build(text: str, source: str) -> SavedPlan:
    document = _document(text)
    _check_schema(document)
    try:
        model = _DocumentModel.model_validate(document)
    except ValidationError as exc:
        raise _from_validation_error(exc) from None
    inputs = _inputs(model.inputs)
    return SavedPlan(
        inputs=inputs,
        mixtures=tuple(_mixture(m) for m in model.mixtures),
        totals=_totals(model.totals_mL, inputs),
        stated_checks=tuple(Check(c.name, c.status, c.detail) for c in model.checks),
        preparations=(
            None if model.preparation is None else tuple(_preparation(p) for p in model.preparation)
        ),
        prediction=_prediction(model.prediction),
    )


# --------------------------------------------------------------------------------------------
# Public API
# --------------------------------------------------------------------------------------------


def parse_result(text: str, *, source: str = _DEFAULT_SOURCE) -> SavedPlan:
    """Read a saved plan result's JSON text.

    Parameters
    ----------
    text
        The document (schema ``planner.plan/2``, DESIGN.md section 5).
    source
        Name of where the text came from, quoted in error messages.

    Returns
    -------
    SavedPlan
        Inputs, mixtures, totals [mL], stated checks, preparation and prediction, ready for
        :func:`planner.verify.verify_result`.

    Raises
    ------
    ResultFileError
        For the first problem found: a JSON syntax error (with line and column), a missing or
        other ``schema``, a missing key, an unknown key inside a mixture, addition, totals or
        check, a value of the wrong type, NaN or infinity, a repeated key, or an invalid
        ``inputs`` block (its field prefixed ``inputs.``). The message names the dotted key
        path, the value received and what would be valid.

    Examples
    --------
    >>> saved = parse_result(Path("out/plan.json").read_text())  # doctest: +SKIP
    >>> verify_result(saved.inputs, saved.mixtures, saved.totals,
    ...               saved.preparations, saved.prediction)  # doctest: +SKIP
    """
    try:
        return _build(text, source)
    except _ResultError as problem:
        raise _public(problem, source) from None


def load_result(path: str | os.PathLike[str]) -> SavedPlan:
    """Read a saved plan result file (``plan.json``).

    Parameters
    ----------
    path
        The file, UTF-8 JSON (a leading byte-order mark is accepted).

    Returns
    -------
    SavedPlan
        As :func:`parse_result` gives it.

    Raises
    ------
    ResultFileError
        If the file cannot be read, is not UTF-8 text, or is not a valid plan result; the
        message names the path.
    """
    name = os.fspath(path)
    return parse_result(read_text(name, "plan result", ResultFileError), source=name)
