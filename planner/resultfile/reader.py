"""Reading a saved plan result: JSON text, checked against the document model, to stage results.

The public functions of :mod:`planner.resultfile` live here. The text is parsed strictly (no
repeated keys, no NaN or infinity, no number beyond :data:`LARGEST_NUMBER` outside
``inputs``), its ``schema`` checked, its structure validated by
:class:`planner.resultfile.schema.PlanDocument` (the model the report writes), its
``inputs`` by the plan-file reader; every problem becomes one
:class:`planner.errors.ResultFileError` naming the file once.
"""

from __future__ import annotations

import json
import math
import os
from collections import Counter
from typing import Any

from pydantic import ValidationError

from planner.errors import PlanFileError, ResultFileError
from planner.fileio import problems
from planner.fileio.text import PLAN_RESULT, read_text
from planner.inputs import PlanInputs
from planner.planfile import plan_from_mapping
from planner.records import record
from planner.result import Check, GlobalFitPrediction, Mixture, Prediction, StockPreparation, Totals
from planner.resultfile.schema import SCHEMA, PlanDocument

__all__ = ["LARGEST_NUMBER", "SavedPlan", "load_result", "parse_result"]

#: Largest size of a number a plan result may hold outside ``inputs``. Volumes are at most
#: thousands of mL, concentrations tens of mol/L and K at most 10^(log beta limit); 1e100
#: leaves every product of two or three such numbers finite in double precision (IEEE 754,
#: largest finite value about 1.8e308).
LARGEST_NUMBER = 1e100

#: The name of text that came from no file; messages do not quote it.
_UNNAMED = "<result>"


@record
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
        The ``prediction`` block (the all-bound analysis), or None when the document has none
        or states null.
    analysis
        The analysis the plan was designed for (``"all-bound"`` when the document does not
        say).
    global_fit
        The ``global_fit_prediction`` block, or None.
    """

    inputs: PlanInputs
    mixtures: tuple[Mixture, ...]
    totals: Totals
    stated_checks: tuple[Check, ...]
    preparations: tuple[StockPreparation, ...] | None = None
    prediction: Prediction | None = None
    analysis: str = "all-bound"
    global_fit: GlobalFitPrediction | None = None


# --------------------------------------------------------------------------------------------
# JSON text to plain data
# --------------------------------------------------------------------------------------------


class _Object(dict[str, Any]):
    """A JSON object as parsed, remembering keys that appeared more than once."""

    __slots__ = ("repeated",)

    def __init__(self, pairs: list[tuple[str, Any]]) -> None:
        super().__init__(pairs)
        self.repeated = [key for key, count in Counter(k for k, _ in pairs).items() if count > 1]


def _syntax_error(exc: json.JSONDecodeError, text: str) -> problems.ContentError:
    problem = f"JSON syntax error at line {exc.lineno}, column {exc.colno}: {exc.msg.lower()}"
    hint = "check the quotes, brackets, commas and colons near there (JSON has no trailing commas)"
    line = problems.offending_line(text, exc.lineno)
    if line is None:
        return problems.ContentError("", problem, hint=hint)
    return problems.ContentError("", problem, line, hint)


def _plain(value: Any, loc: tuple[int | str, ...]) -> Any:
    """Parsed JSON as plain dicts and lists, or a ContentError at the first repeated key or
    non-finite number (Python's json module accepts NaN and Infinity; strict JSON does not)."""
    if isinstance(value, _Object):
        if value.repeated:
            key = value.repeated[0]
            problems.fail(
                problems.key_path((*loc, key)),
                "key given more than once in one object",
                key,
                "keep one; JSON readers silently keep the last, so an edit could be lost",
            )
        return {key: _plain(item, (*loc, key)) for key, item in value.items()}
    if isinstance(value, list):
        return [_plain(item, (*loc, index)) for index, item in enumerate(value)]
    if isinstance(value, float) and not math.isfinite(value):
        problems.fail(
            problems.key_path(loc),
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
        problems.fail(
            problems.key_path(loc),
            f"number too large for a plan result (more than {LARGEST_NUMBER:g} in size)",
            value,
            "write the intended value; no quantity of a plan comes near this size",
        )
    return value


def _document(text: str) -> dict[str, Any]:
    try:
        parsed = json.loads(text, object_pairs_hook=_Object)
    except json.JSONDecodeError as exc:
        raise _syntax_error(exc, text) from None
    except RecursionError:
        problems.fail("", "JSON nested too deeply to read", hint="this is not a plan result")
    if not isinstance(parsed, dict):
        problems.fail(
            "",
            "a plan result must be a JSON object { ... }",
            parsed,
            "give the plan.json that 'planner plan --format json' writes",
        )
    document: dict[str, Any] = _plain(parsed, ())
    return document


# --------------------------------------------------------------------------------------------
# Plain data to stage results
# --------------------------------------------------------------------------------------------


def _check_schema(document: dict[str, Any]) -> None:
    if "schema" not in document:
        problems.fail(
            "schema",
            "missing required key",
            hint=f'add "schema": "{SCHEMA}" (is this a plan result written by the planner?)',
        )
    schema = document["schema"]
    if schema != SCHEMA:
        problems.fail(
            "schema",
            "not a schema this version reads",
            schema,
            f'this reader understands "{SCHEMA}" only; re-plan with this version',
        )


def _inputs(data: dict[str, Any]) -> PlanInputs:
    try:
        # No source here: parse_result names it once, after the inputs. prefix is added.
        return plan_from_mapping(data)
    except PlanFileError as exc:
        field = f"inputs.{exc.field}" if exc.field else "inputs"
        if exc.has_value:
            raise problems.ContentError(field, exc.problem, exc.value, exc.hint) from None
        raise problems.ContentError(field, exc.problem, hint=exc.hint) from None


def _build(text: str) -> SavedPlan:
    document = _document(text)
    _check_schema(document)
    try:
        model = PlanDocument.model_validate(document)
    except ValidationError as exc:
        raise problems.explain(exc, PlanDocument, problems.JSON_WORDS) from None
    inputs = _inputs(model.inputs)
    totals = model.totals_mL
    if totals.dead_volume_mL is None:
        totals = totals.model_copy(update={"dead_volume_mL": inputs.session.dead_volume_mL})
    preparations = model.preparation
    return SavedPlan(
        inputs=inputs,
        mixtures=tuple(m.to_record(Mixture) for m in model.mixtures),
        totals=totals.to_record(Totals),
        stated_checks=tuple(c.to_record(Check) for c in model.checks),
        preparations=(
            None
            if preparations is None
            else tuple(p.to_record(StockPreparation) for p in preparations)
        ),
        prediction=None if model.prediction is None else model.prediction.to_record(Prediction),
        analysis=model.analysis,
        global_fit=(
            None
            if model.global_fit_prediction is None
            else model.global_fit_prediction.to_record(GlobalFitPrediction)
        ),
    )


# --------------------------------------------------------------------------------------------
# Public API
# --------------------------------------------------------------------------------------------


def parse_result(text: str, *, source: str = _UNNAMED) -> SavedPlan:
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
        return _build(text)
    except problems.ContentError as problem:
        raise problems.public_error(problem, ResultFileError, source, _UNNAMED) from None


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
    return parse_result(read_text(name, PLAN_RESULT), source=name)
