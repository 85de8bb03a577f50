"""Reading a plan file: TOML text or a mapping, checked in two steps, to plan inputs.

The public functions of :mod:`planner.planfile` live here: the text is parsed (TOML syntax
errors with their line and column), no text may hold a NUL character, the structure is
validated by :class:`planner.planfile.schema.PlanModel` and the meaning by
:func:`planner.planfile.checks.plan_inputs`; every problem becomes one
:class:`planner.errors.PlanFileError` naming the file once.
"""

from __future__ import annotations

import os
import re
import tomllib
from collections.abc import Mapping
from typing import Any

from pydantic import ValidationError

from planner.errors import PlanFileError
from planner.fileio.problems import (
    TOML_WORDS,
    ContentError,
    explain,
    fail,
    key_path,
    offending_line,
    public_error,
)
from planner.fileio.text import PLAN_FILE, read_text
from planner.inputs import PlanInputs
from planner.planfile.checks import plan_inputs
from planner.planfile.schema import PlanModel

__all__ = ["load_plan", "parse_plan", "plan_from_mapping"]

#: The name of plan text that came from no file; messages do not quote it.
_UNNAMED = "<plan>"
_TOML_LOCATION = re.compile(r"\s*\(at line (\d+), column (\d+)\)\s*$")


def _build(data: Mapping[str, Any]) -> PlanInputs:
    """Validate a plan mapping (the parsed TOML) and build the inputs, or raise ContentError."""
    if not isinstance(data, Mapping):
        fail("", "a plan must be a table of keys", type(data).__name__, "see docs/plan-file.md")
    _check_no_nul(data)
    try:
        plan = PlanModel.model_validate(dict(data))
    except ValidationError as exc:
        raise explain(exc, PlanModel, TOML_WORDS) from None
    return plan_inputs(plan)


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
                fail(key_path(loc), "contains a NUL character", value, _NUL_HINT)
        elif isinstance(value, Mapping):
            children: list[tuple[tuple[int | str, ...], Any]] = []
            for key, item in value.items():
                if isinstance(key, str) and "\x00" in key:
                    fail(key_path((*loc, key)), "the key contains a NUL character", key, _NUL_HINT)
                children.append(((*loc, str(key)), item))
            pending.extend(reversed(children))
        elif isinstance(value, list):
            pending.extend(reversed([((*loc, i), item) for i, item in enumerate(value)]))


_NUL_HINT = "remove the \\u0000 (NUL) character; plan-file text cannot hold it"


def plan_from_mapping(data: Mapping[str, Any], *, source: str = _UNNAMED) -> PlanInputs:
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
    except ContentError as problem:
        raise public_error(problem, PlanFileError, source, _UNNAMED) from None


def parse_plan(text: str, *, source: str = _UNNAMED) -> PlanInputs:
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
        As :func:`parse_plan` gives it.

    Raises
    ------
    PlanFileError
        If the file cannot be read, is not UTF-8 text, or is not a valid plan; the message
        names the path.
    """
    name = os.fspath(path)
    return parse_plan(read_text(name, PLAN_FILE), source=name)


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
    problem = f"TOML syntax error in {source} at line {line}, column {column}: {reason}"
    shown_line = offending_line(text, line)
    if shown_line is None:
        return PlanFileError(problem, hint=hint)
    return PlanFileError(problem, value=shown_line, hint=hint)
