"""One exception hierarchy for the planner.

Every error raised on purpose derives from :class:`PlannerError`. An error about an input names
the dotted key path of the field (``stocks[1].contains_M.Fe3+``), the value received and a hint
saying what would be valid, so the person at the bench can fix the file without reading code.

Failed *scientific* checks are not errors: they are data in the plan result's ``checks`` list.
"""

from __future__ import annotations

__all__ = [
    "ConvergenceError",
    "InfeasibleError",
    "InvalidInputError",
    "OutputError",
    "PlanFileError",
    "PlannerError",
    "ResultFileError",
]

_MISSING = object()


class PlannerError(Exception):
    """Base class of every error the planner raises on purpose.

    Parameters
    ----------
    problem
        What is wrong, in one sentence.
    field
        Dotted key path of the offending input, or ``""`` when no single field is at fault.
    value
        The value received (shown with ``repr``); omit when there is none.
    hint
        What would be valid, or how to fix it.
    """

    def __init__(
        self, problem: str, *, field: str = "", value: object = _MISSING, hint: str = ""
    ) -> None:
        self.problem = problem
        self.field = field
        self.value = None if value is _MISSING else value
        self.has_value = value is not _MISSING
        self.hint = hint
        super().__init__(self._compose())

    def _compose(self) -> str:
        parts = []
        if self.field:
            parts.append(f"{self.field}: {self.problem}")
        else:
            parts.append(self.problem)
        if self.has_value:
            parts.append(f"(got {self.value!r})")
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


class ConvergenceError(PlannerError):
    """A numerical method did not converge to the required accuracy."""


class InfeasibleError(PlannerError):
    """No design satisfies the hard constraints (used only where no partial plan can be shown)."""


class OutputError(PlannerError):
    """An output folder cannot be written (exists and is not empty, or is not writable)."""
