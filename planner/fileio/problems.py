"""One way to word a file's problems: key path, problem, value received, fix.

Both file readers find problems below their public functions, where the file's name is not
known: they raise :class:`ContentError` (with :func:`fail`, or from a pydantic
``ValidationError`` through :func:`explain`), and their public function turns it into its
project error with :func:`public_error`, adding the file's name once. The message is the one
shape of :mod:`planner.errors`: ``stocks[1].contains_M.Fe3+: must be greater than 0 in
plan.toml (got -0.5). Fix: contains_M is ...``.

The words differ only where the formats do: a TOML plan file has tables (``[design]``,
``[[stocks]]``), a JSON result has objects; :class:`Words` holds them.
"""

from __future__ import annotations

import difflib
from collections.abc import Mapping, Sequence
from typing import NoReturn, get_args, get_origin

from pydantic import BaseModel, ValidationError
from pydantic.fields import FieldInfo

from planner.errors import KEY_LIMIT, PlannerError, shown
from planner.records import record

__all__ = [
    "JSON_WORDS",
    "NO_VALUE",
    "TOML_WORDS",
    "ContentError",
    "Words",
    "explain",
    "fail",
    "key_path",
    "offending_line",
    "public_error",
]

#: Marks a problem that has no value to show ("missing required key").
NO_VALUE = object()


class ContentError(Exception):
    """A problem in a file's content, found where the file's name is not known.

    The reader's public function turns it into its project error with :func:`public_error`.
    """

    def __init__(self, field: str, problem: str, value: object = NO_VALUE, hint: str = "") -> None:
        super().__init__(problem)
        self.field = field
        self.problem = problem
        self.value = value
        self.hint = hint


def fail(field: str, problem: str, value: object = NO_VALUE, hint: str = "") -> NoReturn:
    """Raise :class:`ContentError` at the dotted key path ``field``."""
    raise ContentError(field, problem, value, hint)


def public_error(
    problem: ContentError, error: type[PlannerError], source: str, unnamed: str
) -> PlannerError:
    """The project error of class ``error`` for ``problem`` in the file named ``source``.

    ``unnamed`` is the reader's placeholder for text that came from no file (``"<plan>"``):
    such text is not named in the message.
    """
    text = problem.problem if source == unnamed else f"{problem.problem} in {source}"
    if problem.value is NO_VALUE:
        return error(text, field=problem.field, hint=problem.hint)
    return error(text, field=problem.field, value=problem.value, hint=problem.hint)


def key_path(loc: Sequence[int | str]) -> str:
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


def offending_line(text: str, line: int) -> str | None:
    """Line ``line`` (1-based) of ``text`` without surrounding space, for a syntax error's
    value (shortened in the message like any value), or None when there is no such line."""
    lines = text.splitlines()
    return lines[line - 1].strip() if 1 <= line <= len(lines) else None


@record
class Words:
    """How a file format names its parts in messages.

    Attributes
    ----------
    expected
        What a pydantic type error expected, by error type (``"float_type"``: "a number").
    tables
        True for TOML: a nested model is a table, named ``[design]`` or ``[[stocks]]``, and
        a missing or mistyped one gets its own message; False for JSON's objects.
    """

    expected: Mapping[str, str]
    tables: bool


#: The words of a TOML plan file.
TOML_WORDS = Words(
    expected={
        "float_type": "a number",
        "int_type": "a whole number",
        "string_type": "text in quotes",
        "bool_type": "true or false",
        "dict_type": "a table { key = value, ... }",
        "model_type": "a table",
        "model_attributes_type": "a table",
        "list_type": "a list [ ... ]",
    },
    tables=True,
)
#: The words of a JSON document.
JSON_WORDS = Words(
    expected={
        "float_type": "a number",
        "int_type": "a whole number",
        "string_type": "a string in double quotes",
        "bool_type": "true or false",
        "dict_type": "an object { ... }",
        "model_type": "an object { ... }",
        "model_attributes_type": "an object { ... }",
        "list_type": "a list [ ... ]",
    },
    tables=False,
)

_BOUNDS = {
    "greater_than": ("gt", "greater than"),
    "greater_than_equal": ("ge", "at least"),
    "less_than": ("lt", "less than"),
    "less_than_equal": ("le", "at most"),
}


def _number(value: object) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _submodel(annotation: object) -> type[BaseModel] | None:
    """The model inside an annotation such as ``list[_StockModel] | None``."""
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation
    for argument in get_args(annotation):
        found = _submodel(argument)
        if found is not None:
            return found
    return None


def _keys(model: type[BaseModel]) -> dict[str, FieldInfo]:
    """The file's keys of a model (aliases where given) and their fields."""
    return {info.alias or name: info for name, info in model.model_fields.items()}


def _walk(
    root: type[BaseModel], loc: Sequence[int | str]
) -> tuple[type[BaseModel] | None, FieldInfo | None, str]:
    """Model holding the last key of ``loc``, and the nearest field on the way with its key.

    Inside a free-form table or object (``contains_M``) its own field is the nearest one.
    """
    model: type[BaseModel] | None = root
    holder: type[BaseModel] | None = None
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
    """How a person finds a TOML table: ``[design]``, ``[[stocks]]`` entry, ``stocks[0].solid``."""
    if not loc:
        return "the top level"
    if isinstance(loc[-1], int):
        return f"[[{key_path([part for part in loc if not isinstance(part, int)])}]] entries"
    if any(isinstance(part, int) for part in loc):
        return key_path(loc)
    return f"[{key_path(loc)}]"


def _unknown_key(
    loc: Sequence[int | str], holder: type[BaseModel] | None, given: object, words: Words
) -> ContentError:
    unknown = str(loc[-1])
    allowed = sorted(_keys(holder)) if holder is not None else []
    lowered = {name.lower(): name for name in allowed}
    # No suggestion for a key far longer than any known key (difflib is quadratic in it).
    close = []
    if len(unknown) <= KEY_LIMIT:
        close = difflib.get_close_matches(unknown.lower(), list(lowered), n=1, cutoff=0.6)
    where = f"in {_table_name(loc[:-1])}" if words.tables else "here"
    hint = f"allowed keys {where}: {', '.join(allowed)}"
    if close:
        hint = f"did you mean {shown(lowered[close[0]])}? " + hint
    return ContentError(key_path(loc), "unknown key", given, hint)


def _length_problem(kind: str, info: FieldInfo | None) -> str:
    metadata = info.metadata if info is not None else []
    shortest = next((m.min_length for m in metadata if hasattr(m, "min_length")), None)
    longest = next((m.max_length for m in metadata if hasattr(m, "max_length")), None)
    if shortest is not None and shortest == longest:
        return f"must have exactly {shortest} entries"
    if kind == "too_short":
        if shortest in (None, 1):
            return "must not be empty"
        return f"needs at least {shortest} entries"
    return f"must have at most {longest} entries"


def explain(exc: ValidationError, root: type[BaseModel], words: Words) -> ContentError:
    """The most useful first problem of a pydantic ValidationError, in the file's words.

    Parameters
    ----------
    exc
        From validating ``root``.
    root
        The model of the whole file; the description of each field, read as
        "<key> is <description>", says what would be valid.
    words
        :data:`TOML_WORDS` or :data:`JSON_WORDS`.

    Returns
    -------
    ContentError
        Its field is the dotted key path (``stocks[1].contains_M.Fe3+``, 0-based).
    """
    errors = exc.errors(include_url=False)
    # An unknown key first: a misspelt required key also shows up as "missing", and the
    # unknown-key message carries the "did you mean" suggestion.
    errors.sort(key=lambda error: error["type"] != "extra_forbidden")
    error = errors[0]
    loc = error["loc"]
    kind = error["type"]
    ctx = error.get("ctx", {})
    given = error["input"]
    field = key_path(loc)
    holder, info, key = _walk(root, loc)
    if kind == "extra_forbidden":
        return _unknown_key(loc, holder, given, words)

    description = f"{key} is {info.description}" if info is not None and info.description else ""
    annotation = info.annotation if info is not None else None
    table = key_path([part for part in loc if not isinstance(part, int)])
    is_table = words.tables and _submodel(annotation) is not None
    if kind == "missing":
        if is_table:
            header = f"[[{table}]]" if get_origin(annotation) is list else f"[{table}]"
            return ContentError(field, "missing required section", hint=f"add the {header} table")
        return ContentError(field, "missing required key", hint=f"add it; {description}")
    if kind == "list_type" and is_table:
        hint = f"write [[{table}]] (double brackets) once per entry"
        return ContentError(field, "wrong type, expected a list of tables", given, hint)
    if kind in words.expected:
        problem = f"wrong type, expected {words.expected[kind]}"
    elif kind in _BOUNDS:
        bound, relation = _BOUNDS[kind]
        problem = f"must be {relation} {_number(ctx[bound])}"
    elif kind in {"too_short", "too_long"}:
        problem = _length_problem(kind, info)
    elif kind == "string_too_short":
        problem = "must not be empty"
    elif kind == "literal_error":
        problem = f"must be {ctx.get('expected', 'one of the listed values')}"
    elif kind == "finite_number":
        problem = "must be a finite number (not nan or inf)"
    else:
        problem = error["msg"].lower()
    return ContentError(field, problem, given, description)
