"""Hypothesis settings profiles for the whole test suite.

``ci`` (the default) is the bounded profile CI runs: 100 examples per property unless a test
asks for its own number, and 15 % of its nominal count for each fuzz property of
tests/test_fuzz.py, so that the whole suite stays near 4 minutes of CPU on a 2-core
machine. ``long`` gives every property twenty times as many examples as its nominal count,
for a deeper search before a release::

    HYPOTHESIS_PROFILE=long python -m pytest tests/test_fuzz.py

Fuzz properties set their nominal count through :func:`tests.strategies.budget`, so the
profile decides the depth everywhere.
"""

from __future__ import annotations

import os

from hypothesis import settings

from tests.strategies import CI_EXAMPLES

# print_blob: a failure prints the exact example to replay with @reproduce_failure.
settings.register_profile("ci", max_examples=CI_EXAMPLES, print_blob=True)
settings.register_profile("long", max_examples=20 * CI_EXAMPLES, print_blob=True)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))
