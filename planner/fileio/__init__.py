"""What the two file readers share: one way to read a file's text, one way to word a problem.

The plan-file reader (:mod:`planner.planfile`) and the saved-result reader
(:mod:`planner.resultfile`) both read a UTF-8 file of bounded size with :func:`read_text`, and
both turn a problem (their own findings, and pydantic's validation errors through
:func:`explain`) into the one message shape of :mod:`planner.errors`,
"key.path: problem (got value). Fix: hint", with :func:`public_error`.
"""

from __future__ import annotations

from planner.fileio.problems import (
    JSON_WORDS,
    NO_VALUE,
    TOML_WORDS,
    ContentError,
    Words,
    explain,
    fail,
    key_path,
    offending_line,
    public_error,
)
from planner.fileio.text import (
    MAX_PLAN_FILE_BYTES,
    MAX_RESULT_FILE_BYTES,
    PLAN_FILE,
    PLAN_RESULT,
    FileKind,
    read_text,
)

__all__ = [
    "JSON_WORDS",
    "MAX_PLAN_FILE_BYTES",
    "MAX_RESULT_FILE_BYTES",
    "NO_VALUE",
    "PLAN_FILE",
    "PLAN_RESULT",
    "TOML_WORDS",
    "ContentError",
    "FileKind",
    "Words",
    "explain",
    "fail",
    "key_path",
    "offending_line",
    "public_error",
    "read_text",
]
