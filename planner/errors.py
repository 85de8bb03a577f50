"""One exception hierarchy for the planner.

Every error raised on purpose derives from :class:`PlannerError`. An error about an input names
the dotted key path of the field (``stocks[1].contains_M.Fe3+``), the value received and a hint
saying what would be valid, so the person at the bench can fix the file without reading code.

Failed *scientific* checks are not errors: they are data in the plan result's ``checks`` list.

Messages stay readable whatever the input: every value, key and quoted name is shortened by
:func:`shown` and :func:`shown_field` (docs/plan-file.md, "Error messages"), and a message's
problem and hint are capped as a last guard.
"""

from __future__ import annotations

import re

__all__ = [
    "KEY_LIMIT",
    "TEXT_LIMIT",
    "VALUE_LIMIT",
    "ConvergenceError",
    "InfeasibleError",
    "InvalidInputError",
    "OutputError",
    "PlanFileError",
    "PlannerError",
    "ReadingsFileError",
    "ResultFileError",
    "shown",
    "shown_field",
]

_MISSING = object()

#: Longest value quoted whole in a message [characters]: a longer one is cut to its first 77
#: characters and "...". Found by fuzzing: a 30 kB name went whole into the message, and
#: a megabyte took the terminal half a minute to print.
VALUE_LIMIT = 80
#: Longest key of a field path shown whole [characters]: a longer one shows its first 60
#: characters and its length, "...(5000 characters)".
KEY_LIMIT = 100
#: Longest problem or hint [characters]; messages quote values through :func:`shown`, so
#: only a builder that forgot to would reach it (a last guard, far above any real message).
TEXT_LIMIT = 1000

_LONG_KEY = re.compile(r"[^.\[\]]{" + str(KEY_LIMIT + 1) + ",}")


def shown(value: object, limit: int = VALUE_LIMIT) -> str:
    """How a message quotes a value: its ``repr``, cut to ``limit`` characters when longer.

    Parameters
    ----------
    value
        Anything; text is quoted (``'Fe3+'``), numbers are not (``0.5``).
    limit
        Longest text returned [characters], at least 4.

    Returns
    -------
    str
        ``repr(value)``, or its first ``limit - 3`` characters followed by ``...``.

    Examples
    --------
    >>> shown("Fe3+")
    "'Fe3+'"
    >>> len(shown("x" * 30_000))
    80
    """
    text = repr(value)
    if len(text) <= limit:
        return text
    return text[: limit - 3] + "..."


def shown_field(field: str) -> str:
    """A dotted field path with every key longer than :data:`KEY_LIMIT` characters cut.

    Examples
    --------
    >>> shown_field("design." + "k" * 5000)
    'design.kkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkkk...(5000 characters)'
    """
    return _LONG_KEY.sub(lambda m: f"{m[0][:60]}...({len(m[0])} characters)", field)


def _capped(text: str) -> str:
    if len(text) <= TEXT_LIMIT:
        return text
    return f"{text[: TEXT_LIMIT - 30]}...({len(text)} characters)"


class PlannerError(Exception):
    """Base class of every error the planner raises on purpose.

    Parameters
    ----------
    problem
        What is wrong, in one sentence.
    field
        Dotted key path of the offending input, or ``""`` when no single field is at fault.
    value
        The value received (shown with :func:`shown`, so shortened when long); omit when
        there is none. The attribute keeps it whole.
    hint
        What would be valid, or how to fix it.

    The field path is kept shortened (:func:`shown_field`); the problem and hint are capped
    at :data:`TEXT_LIMIT` characters.
    """

    def __init__(
        self, problem: str, *, field: str = "", value: object = _MISSING, hint: str = ""
    ) -> None:
        self.problem = _capped(problem)
        self.field = shown_field(field)
        self.value = None if value is _MISSING else value
        self.has_value = value is not _MISSING
        self.hint = _capped(hint)
        super().__init__(self._compose())

    def renamed(self, field: str) -> PlannerError:
        """The same error of the same class, naming ``field`` (a command-line option for a
        core argument, e.g. ``--excess`` for ``excess``)."""
        value = self.value if self.has_value else _MISSING
        return type(self)(self.problem, field=field, value=value, hint=self.hint)

    def _compose(self) -> str:
        parts = []
        if self.field:
            parts.append(f"{self.field}: {self.problem}")
        else:
            parts.append(self.problem)
        if self.has_value:
            parts.append(f"(got {shown(self.value)})")
        message = " ".join(parts)
        if self.hint:
            message += f". Fix: {self.hint}"
        return message


class InvalidInputError(PlannerError, ValueError):
    """An argument or input value is outside what the planner accepts."""


class PlanFileError(InvalidInputError):
    """A plan file cannot be read: TOML syntax, unknown key, wrong type or bad value."""


class ResultFileError(InvalidInputError):
    """A saved plan result (``plan.json``) cannot be read for verification."""


class ReadingsFileError(InvalidInputError):
    """A class's readings file (CSV for ``planner analyse``) cannot be read."""


class ConvergenceError(PlannerError):
    """A numerical method did not converge to the required accuracy."""


class InfeasibleError(PlannerError):
    """No design satisfies the hard constraints (used only where no partial plan can be shown)."""


class OutputError(PlannerError):
    """An output folder cannot be written (exists and is not empty, or is not writable)."""
