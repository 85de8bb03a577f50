"""Hypothesis settings profiles for the whole test suite.

``ci`` (the default) is the bounded profile CI runs: 100 examples per property unless a test
asks for its own number, and 10 % of its nominal count for each fuzz property of
tests/test_fuzz.py, so that the whole suite stays within 4 minutes of CPU on a 2-core
machine. ``long`` gives every property twenty times as many examples as its nominal count,
for a deeper search before a release::

    HYPOTHESIS_PROFILE=long python -m pytest tests/test_fuzz.py

Fuzz properties set their nominal count through :func:`tests.strategies.budget`, so the
profile decides the depth everywhere.

Also the output folder of the embedded default plan, written once per session for the tests
that only read one (:func:`default_out`).
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from hypothesis import settings

from tests.strategies import CI_EXAMPLES

# print_blob: a failure prints the exact example to replay with @reproduce_failure.
settings.register_profile("ci", max_examples=CI_EXAMPLES, print_blob=True)
settings.register_profile("long", max_examples=20 * CI_EXAMPLES, print_blob=True)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))


#: The date the shared output folder's sheets are printed for (a leap day).
DEFAULT_OUT_DATE = "2028-02-29"


@pytest.fixture(scope="session")
def default_out(tmp_path_factory) -> Path:
    """``planner plan --out DIR --date 2028-02-29 -q`` of the embedded default plan, run once
    per session. Read it, do not change it: copy it first."""
    from typer.testing import CliRunner

    from planner.cli import app

    out = tmp_path_factory.mktemp("default-out") / "sheets"
    result = CliRunner().invoke(
        app, ["plan", "--out", str(out), "--date", DEFAULT_OUT_DATE, "-q"], catch_exceptions=False
    )
    assert result.exit_code == 0, result.stderr
    return out
