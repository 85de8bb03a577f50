"""The documents' references to tests name tests that exist.

docs/validation.md ties each published value or standard to the test that checks it; a test
renamed without its row left the table pointing at nothing (three rows were, found when the
word "taught" left the test names). Every ``tests/FILE.py::name`` in the documents must be a
test function defined in that file.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DOCUMENTS = [*sorted((ROOT / "docs").glob("*.md")), ROOT / "README.md", ROOT / "DEVELOPERS.md"]
REFERENCE = re.compile(r"`(tests/[\w/]+\.py)::(\w+)(?:\[[^\]`]*\])?`")


@pytest.mark.parametrize("document", DOCUMENTS, ids=lambda p: p.name)
def test_every_test_a_document_names_exists(document):
    missing = []
    for match in REFERENCE.finditer(document.read_text(encoding="utf-8")):
        path, name = ROOT / match.group(1), match.group(2)
        text = path.read_text(encoding="utf-8") if path.exists() else ""
        if not re.search(rf"^def {name}\(", text, re.MULTILINE):
            missing.append(f"{match.group(1)}::{name}")
    assert missing == []


def test_the_references_are_found_at_all():
    # The pattern reads the table's references: validation.md names well over a hundred.
    text = (ROOT / "docs" / "validation.md").read_text(encoding="utf-8")
    assert len(REFERENCE.findall(text)) > 100
