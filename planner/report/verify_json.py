"""The answer of ``planner verify --format json``: schema ``planner.verify/1``."""

from __future__ import annotations

from typing import Any

from planner.report.jsonout import dumps
from planner.report.plan_json import check_entries
from planner.result import Check

__all__ = ["SCHEMA", "verify_document", "verify_json"]

#: Schema name and version of the document.
SCHEMA = "planner.verify/1"


def verify_document(checks: tuple[Check, ...], *, file: str) -> dict[str, Any]:
    """The findings of re-verifying a saved plan result, as JSON-able data.

    Parameters
    ----------
    checks
        From :func:`planner.verify.verify_result`.
    file
        The saved result that was verified, as the user named it.

    Returns
    -------
    dict
        ``schema``, ``file`` and ``checks`` (each ``name``, ``status``, ``detail``; failed
        first, then warnings, then passes), as plan.json lists them.
    """
    return {"schema": SCHEMA, "file": file, "checks": check_entries(checks)}


def verify_json(checks: tuple[Check, ...], *, file: str) -> str:
    """:func:`verify_document` as one JSON text: sorted keys, final newline."""
    return dumps(verify_document(checks, file=file))
